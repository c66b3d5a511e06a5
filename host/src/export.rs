//! Exports of recorded runs: CSV with units in the column names.
//!
//! `PREFIX-reports.csv` has one row per report, `PREFIX-events.csv` one row per
//! state transition. Integers are the node's own (µV, nA, nJ, ms), so sums
//! reproduce the report's totals exactly.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use gleaner_protocol::UplinkBody;

use crate::files::{open_input, AtomicFile, Input};
use crate::link::LinkTracker;
use crate::log::{LogReader, RecordBody};
use indicatif::ProgressBar;

/// Column names of the reports file.
pub const REPORT_COLUMNS: &str = "boot,seq,uptime_ms,host_time_us,interval_ms,sample_count,\
input_uv_min,input_uv_mean,input_uv_max,input_na_min,input_na_mean,input_na_max,\
output_uv_min,output_uv_mean,output_uv_max,output_na_min,output_na_mean,output_na_max,\
drawn_nj,delivered_nj,stored_nj,state,idle_ms,cold_start_ms,harvesting_ms,sagging_ms,cutoff_ms,stalled_ms,\
input_cutoff_in_ms,brownout_in_ms,load_nw,net_nw,load_powered,load_shed,flags";

/// Column names of the events file.
pub const EVENT_COLUMNS: &str =
    "boot,seq,uptime_ms,host_time_us,from,to,cause,trigger_input_uv,trigger_output_uv,input_uv,output_uv";

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

fn opt(v: Option<u32>) -> String {
    v.map_or(String::new(), |x| x.to_string())
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

/// Writes `PREFIX-reports.csv` and `PREFIX-events.csv` from the log at `log`
/// (`-`: standard input), advancing `progress` by the bytes read; each file
/// appears only once complete.
pub fn export_csv(log: &Path, prefix: &Path, progress: &ProgressBar) -> Result<Exported> {
    let input = open_input(log, "log")?;
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

/// Writes the reports table and the events table of the log read from
/// `input` as CSV, advancing `progress` by the bytes read; returns their row
/// counts.
pub fn write_csv(
    input: Input,
    reports_out: &mut dyn Write,
    events_out: &mut dyn Write,
    progress: &ProgressBar,
) -> Result<(u64, u64)> {
    let (file, name) = (input.reader, input.name);
    writeln!(reports_out, "{REPORT_COLUMNS}")?;
    writeln!(events_out, "{EVENT_COLUMNS}")?;
    let mut tracker = LinkTracker::new();
    let (mut reports, mut events) = (0, 0);
    let mut reader = LogReader::new(file);
    let mut records = 0u64;
    while let Some(record) = reader.next() {
        records += 1;
        if records.is_multiple_of(crate::progress::RECORDS_PER_UPDATE) {
            progress.set_position(reader.offset());
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
                let c = |s: &gleaner_protocol::ChannelStats| {
                    format!("{},{},{}", s.min(), s.mean, s.max())
                };
                let d = &r.state_ms;
                writeln!(
                    reports_out,
                    "{boot},{seq},{up},{host},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
                    r.interval_ms,
                    r.sample_count,
                    c(&r.input_uv),
                    c(&r.input_na),
                    c(&r.output_uv),
                    c(&r.output_na),
                    r.drawn_nj,
                    r.delivered_nj,
                    r.stored_nj,
                    r.state.name(),
                    d.idle_ms,
                    d.cold_start_ms,
                    d.harvesting_ms,
                    d.sagging_ms,
                    d.cutoff_ms,
                    d.stalled_ms,
                    opt(r.input_cutoff_in_ms),
                    opt(r.brownout_in_ms),
                    r.load_nw,
                    r.net_nw,
                    u8::from(r.load_powered),
                    u8::from(r.load_shed),
                    r.flags.0
                )?;
                reports += 1;
            }
            UplinkBody::Event(e) => {
                writeln!(
                    events_out,
                    "{boot},{seq},{up},{host},{},{},{},{},{},{},{}",
                    e.from.name(),
                    e.to.name(),
                    e.cause.name(),
                    e.trigger_input_uv,
                    e.trigger_output_uv,
                    e.input_uv,
                    e.output_uv
                )?;
                events += 1;
            }
            _ => {}
        }
    }
    refuse_non_log(&reader, &name)?;
    reports_out.flush()?;
    events_out.flush()?;
    Ok((reports, events))
}

/// Writes `PREFIX-reports.parquet`, `PREFIX-events.parquet` and
/// `PREFIX-loads.parquet` from the log at `log`: the dataset's columns
/// (docs/dataset.md), one file per table, each appearing only when complete.
pub fn export_parquet(
    log: &Path,
    prefix: &Path,
    progress: &ProgressBar,
) -> Result<crate::dataset::Exported> {
    crate::dataset::export_files(log, prefix, progress)
}
