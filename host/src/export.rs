//! Exports of recorded runs: CSV with units in the column names.
//!
//! `PREFIX-reports.csv` has one row per report, `PREFIX-events.csv` one row per
//! state transition. Integers are the node's own (µV, nA, nJ, ms), so sums
//! reproduce the report's totals exactly.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use gleaner_protocol::UplinkBody;

use crate::columns;
use crate::files::{AtomicFile, Input};
use crate::link::LinkTracker;
use crate::log::{LogReader, RecordBody};
use indicatif::ProgressBar;

/// The columns every CSV row starts with (the message's envelope); the
/// rest come from [`crate::columns`].
const CSV_ENVELOPE: &str = "boot,seq,uptime_ms,host_time_us";

/// The header of the reports file.
pub fn report_header() -> String {
    format!("{CSV_ENVELOPE},{}", columns::csv_header(&columns::REPORT))
}

/// The header of the events file.
pub fn event_header() -> String {
    format!("{CSV_ENVELOPE},{}", columns::csv_header(&columns::EVENT))
}

/// What an export wrote.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Exported {
    /// The reports file.
    pub reports_path: PathBuf,
    /// Rows in it.
    pub reports: u64,
    /// The events file.
    pub events_path: PathBuf,
    /// Rows in it.
    pub events: u64,
}

/// `prefix` with `suffix` appended to its last component.
fn suffixed(prefix: &Path, suffix: &str) -> PathBuf {
    let mut name = prefix.as_os_str().to_owned();
    name.push(suffix);
    PathBuf::from(name)
}

/// An error when what was read is not a log (so nothing is written for it).
fn refuse_non_log<R: std::io::Read>(reader: &LogReader<R>, name: &str) -> Result<()> {
    use crate::failure::FailedAs;
    if reader
        .warnings()
        .iter()
        .any(|w| matches!(w, crate::log::ReadWarning::NotALog))
    {
        return Err(
            anyhow::anyhow!("{name}: {}", crate::log::ReadWarning::NotALog)
                .failed_as(crate::failure::Failure::BadInput),
        );
    }
    Ok(())
}

/// Opens the logs at `logs` (`-`: standard input), gzipped or not.
pub fn open_logs(logs: &[PathBuf]) -> Result<Vec<Input>> {
    logs.iter().map(|log| crate::files::open_log(log)).collect()
}

/// Writes `PREFIX-reports.csv` and `PREFIX-events.csv` from the logs at
/// `logs` (in order, as one run; `-`: standard input), advancing `progress`
/// by the bytes read; each file appears only once complete.
pub fn export_csv(logs: &[PathBuf], prefix: &Path, progress: &ProgressBar) -> Result<Exported> {
    let input = open_logs(logs)?;
    let reports_path = suffixed(prefix, "-reports.csv");
    let events_path = suffixed(prefix, "-events.csv");
    let mut reports_out = std::io::BufWriter::new(AtomicFile::create(&reports_path)?);
    let mut events_out = std::io::BufWriter::new(AtomicFile::create(&events_path)?);
    let (reports, events) = write_csv(input, &mut reports_out, &mut events_out, progress)?;
    for (out, path) in [(reports_out, &reports_path), (events_out, &events_path)] {
        out.into_inner()
            .map_err(|e| e.into_error())
            .with_context(|| format!("cannot write {}", path.display()))?
            .commit()?;
    }
    Ok(Exported {
        reports_path,
        reports,
        events_path,
        events,
    })
}

/// Writes the reports table and the events table of the logs read from
/// `inputs` (in order, as one run) as CSV, advancing `progress` by the bytes
/// read; returns their row counts.
pub fn write_csv(
    inputs: Vec<Input>,
    reports_out: &mut dyn Write,
    events_out: &mut dyn Write,
    progress: &ProgressBar,
) -> Result<(u64, u64)> {
    writeln!(reports_out, "{}", report_header())?;
    writeln!(events_out, "{}", event_header())?;
    let mut tracker = LinkTracker::new();
    let mut rows = (0, 0);
    let mut done_before = 0;
    for input in inputs {
        let mut reader = LogReader::new(input.reader);
        let at = |offset| progress.set_position(done_before + offset);
        write_csv_rows(
            &mut reader,
            &mut tracker,
            reports_out,
            events_out,
            &mut rows,
            at,
        )?;
        done_before += reader.offset();
        refuse_non_log(&reader, &input.name)?;
    }
    reports_out.flush()?;
    events_out.flush()?;
    Ok(rows)
}

/// Writes the rows of one log to `reports_out` and `events_out`, counting
/// them in `rows`; `at` is told the offset read now and then.
fn write_csv_rows<R: std::io::Read>(
    reader: &mut LogReader<R>,
    tracker: &mut LinkTracker,
    reports_out: &mut dyn Write,
    events_out: &mut dyn Write,
    (reports, events): &mut (u64, u64),
    at: impl Fn(u64),
) -> Result<()> {
    let mut records = 0u64;
    while let Some(record) = reader.next() {
        records += 1;
        if records.is_multiple_of(crate::progress::RECORDS_PER_UPDATE) {
            at(reader.offset());
        }
        let RecordBody::Frame(bytes) = &record.body else {
            continue;
        };
        let Ok(Some(t)) = tracker.accept_encoded(bytes) else {
            continue;
        };
        let (boot, seq, up, host) = (
            t.boot_index,
            t.message.seq,
            t.message.uptime_ms,
            record.host_time_us,
        );
        match &t.message.body {
            UplinkBody::Report(r) => {
                write!(reports_out, "{boot},{seq},{up},{host}")?;
                columns::write_csv_cells(reports_out, &columns::REPORT, r)?;
                writeln!(reports_out)?;
                *reports += 1;
            }
            UplinkBody::Event(e) => {
                write!(events_out, "{boot},{seq},{up},{host}")?;
                columns::write_csv_cells(events_out, &columns::EVENT, e)?;
                writeln!(events_out)?;
                *events += 1;
            }
            _ => {}
        }
    }
    Ok(())
}

/// Writes `PREFIX-reports.parquet`, `PREFIX-events.parquet` and
/// `PREFIX-loads.parquet` from the logs (in order, as one run): the dataset's columns
/// (docs/dataset.md), one file per table, each appearing only when complete.
pub fn export_parquet(
    logs: &[PathBuf],
    prefix: &Path,
    progress: &ProgressBar,
) -> Result<crate::dataset::Exported> {
    crate::dataset::export_files(logs, prefix, progress)
}
