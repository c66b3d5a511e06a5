//! Exports of recorded runs: CSV with units in the column names.
//!
//! `PREFIX-reports.csv` has one row per report, `PREFIX-events.csv` one row per
//! state transition. Integers are the node's own (µV, nA, nJ, ms), so sums
//! reproduce the report's totals exactly.

use std::io::Write;
use std::path::{Path, PathBuf};

use gleaner_protocol::UplinkBody;

use crate::columns;
use crate::files::{AtomicFile, Input};
use crate::link::LinkTracker;
use crate::log::{LogReader, RecordBody};
use indicatif::ProgressBar;

/// Why an export could not write its output (a full disk, a closed pipe).
/// A table file appears only when complete, so nothing half-written is left
/// behind. A log that cannot be read as a whole fails with its
/// [`crate::log::LogError`]; opening files fails as [`crate::files`] says.
#[derive(Debug, thiserror::Error)]
pub enum ExportError {
    /// An output could not be written.
    #[error("cannot write {what}")]
    Unwritable {
        /// The file, or the table on a stream.
        what: String,
        /// Why.
        #[source]
        source: std::io::Error,
    },
}

/// The result of an export step: the typed errors above travel in an
/// `anyhow::Error` beside the file helpers' own, whose exit-code marks they
/// keep.
type Result<T> = anyhow::Result<T>;

/// `Unwritable` for an I/O error while writing `what`.
fn unwritable(what: &str) -> impl Fn(std::io::Error) -> ExportError + '_ {
    move |source| ExportError::Unwritable {
        what: what.to_string(),
        source,
    }
}

/// The columns every CSV row starts with (the message's envelope); the
/// rest come from [`crate::columns`].
const CSV_ENVELOPE: &str = "boot,seq,uptime_ms,host_time_us";

/// The reports table, as errors name it.
const REPORTS: &str = "the reports table";
/// The events table, as errors name it.
const EVENTS: &str = "the events table";

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
            .map_err(unwritable(&path.display().to_string()))?
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
    writeln!(reports_out, "{}", report_header()).map_err(unwritable(REPORTS))?;
    writeln!(events_out, "{}", event_header()).map_err(unwritable(EVENTS))?;
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
        reader.read_whole(&input.name)?;
    }
    reports_out.flush().map_err(unwritable(REPORTS))?;
    events_out.flush().map_err(unwritable(EVENTS))?;
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
                write!(reports_out, "{boot},{seq},{up},{host}")
                    .and_then(|()| columns::write_csv_cells(reports_out, &columns::REPORT, r))
                    .and_then(|()| writeln!(reports_out))
                    .map_err(unwritable(REPORTS))?;
                *reports += 1;
            }
            UplinkBody::Event(e) => {
                write!(events_out, "{boot},{seq},{up},{host}")
                    .and_then(|()| columns::write_csv_cells(events_out, &columns::EVENT, e))
                    .and_then(|()| writeln!(events_out))
                    .map_err(unwritable(EVENTS))?;
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
) -> anyhow::Result<crate::dataset::Exported> {
    crate::dataset::export_files(logs, prefix, progress)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Read;

    /// A gzipped log whose stream is cut short (a copy that stopped, say)
    /// fails the export as bad input, and no table file is left.
    #[test]
    fn a_truncated_gzip_log_fails_the_export_and_writes_nothing() {
        let mut log = Vec::new();
        crate::sim::scenarios::synthetic::SyntheticLog::new(6 * 3600, 10)
            .read_to_end(&mut log)
            .unwrap();
        let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
        gz.write_all(&log).unwrap();
        let gz = gz.finish().unwrap();
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("cut.gleanlog.gz");
        std::fs::write(&path, &gz[..gz.len() / 2]).unwrap();
        let prefix = dir.path().join("out");
        let hidden = ProgressBar::hidden();
        let err = export_csv(std::slice::from_ref(&path), &prefix, &hidden).unwrap_err();
        use crate::failure::Failure;
        use crate::log::LogError;
        let Some(LogError::Unreadable { offset, .. }) = Failure::find::<LogError>(&err) else {
            panic!("{err:?}");
        };
        assert!(*offset > 0 && *offset < log.len() as u64, "{offset}");
        assert_eq!(Failure::exit_code(&err), Failure::BadInput.code());
        // A log that is not there keeps the exit code its opening gives.
        let missing = export_csv(&[dir.path().join("none.gleanlog")], &prefix, &hidden);
        assert_eq!(
            missing.map_err(|e| Failure::exit_code(&e)).err(),
            Some(Failure::BadInput.code())
        );
        let left: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(left.len(), 1, "only the input remains");
        // The whole file exports.
        std::fs::write(&path, &gz).unwrap();
        let done = export_csv(std::slice::from_ref(&path), &prefix, &hidden).unwrap();
        assert_eq!(done.reports, 6 * 360);
    }
}
