//! Exports of recorded runs: CSV with units in the column names.
//!
//! `PREFIX-reports.csv` has one row per report, `PREFIX-events.csv` one row per
//! state transition. Integers are the node's own (µV, nA, nJ, ms), so sums
//! reproduce the report's totals exactly.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use gleaner_protocol::UplinkBody;

use crate::link::LinkTracker;
use crate::log::{LogReader, RecordBody};

/// Column names of the reports file.
pub const REPORT_COLUMNS: &str = "boot,seq,uptime_ms,host_time_us,interval_ms,sample_count,\
input_uv_min,input_uv_mean,input_uv_max,input_na_min,input_na_mean,input_na_max,\
output_uv_min,output_uv_mean,output_uv_max,output_na_min,output_na_mean,output_na_max,\
drawn_nj,delivered_nj,stored_nj,state,idle_ms,cold_start_ms,harvesting_ms,sagging_ms,cut_off_ms,stalled_ms,\
input_cutoff_in_ms,storage_runout_in_ms,load_shed,flags";

/// Column names of the events file.
pub const EVENT_COLUMNS: &str = "boot,seq,uptime_ms,host_time_us,from,to,cause,input_uv,output_uv";

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

fn opt(v: Option<u32>) -> String {
    v.map_or(String::new(), |x| x.to_string())
}

/// Writes `PREFIX-reports.csv` and `PREFIX-events.csv` from the log at `log`.
pub fn export_csv(log: &Path, prefix: &Path) -> Result<Exported> {
    let file =
        std::fs::File::open(log).with_context(|| format!("cannot open log {}", log.display()))?;
    let with_suffix = |suffix: &str| {
        let mut name = prefix.as_os_str().to_owned();
        name.push(suffix);
        PathBuf::from(name)
    };
    let reports_path = with_suffix("-reports.csv");
    let events_path = with_suffix("-events.csv");
    let create = |p: &Path| -> Result<std::io::BufWriter<std::fs::File>> {
        Ok(std::io::BufWriter::new(
            std::fs::File::create(p).with_context(|| format!("cannot create {}", p.display()))?,
        ))
    };
    let mut reports_out = create(&reports_path)?;
    let mut events_out = create(&events_path)?;
    writeln!(reports_out, "{REPORT_COLUMNS}")?;
    writeln!(events_out, "{EVENT_COLUMNS}")?;
    let mut tracker = LinkTracker::new();
    let (mut reports, mut events) = (0, 0);
    for record in LogReader::new(file) {
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
                    "{boot},{seq},{up},{host},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
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
                    d.cut_off_ms,
                    d.stalled_ms,
                    opt(r.input_cutoff_in_ms),
                    opt(r.storage_runout_in_ms),
                    u8::from(r.load_shed),
                    r.flags.0
                )?;
                reports += 1;
            }
            UplinkBody::Event(e) => {
                writeln!(
                    events_out,
                    "{boot},{seq},{up},{host},{},{},{},{},{}",
                    e.from.name(),
                    e.to.name(),
                    e.cause.name(),
                    e.input_uv,
                    e.output_uv
                )?;
                events += 1;
            }
            _ => {}
        }
    }
    reports_out.flush()?;
    events_out.flush()?;
    Ok(Exported {
        reports_path,
        reports,
        events_path,
        events,
    })
}
