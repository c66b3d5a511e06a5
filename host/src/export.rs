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

/// What a Parquet export wrote.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ExportedParquet {
    /// One row per report.
    pub reports_path: PathBuf,
    /// Rows in it.
    pub reports: u64,
    /// One row per transition.
    pub events_path: PathBuf,
    /// Rows in it.
    pub events: u64,
}

/// Rows per Parquet row group.
const BATCH_ROWS: usize = 65_536;

/// Column buffers of the reports file (same columns and units as the CSV;
/// see docs/parquet-schema.md).
#[derive(Default)]
struct ReportColumns {
    boot: Vec<u32>,
    seq: Vec<u16>,
    uptime_ms: Vec<u64>,
    host_time_us: Vec<u64>,
    interval_ms: Vec<u32>,
    sample_count: Vec<u32>,
    stats: [Vec<u32>; 12],
    drawn_nj: Vec<u64>,
    delivered_nj: Vec<u64>,
    stored_nj: Vec<i64>,
    state: Vec<&'static str>,
    state_ms: [Vec<u32>; 6],
    input_cutoff_in_ms: Vec<Option<u32>>,
    brownout_in_ms: Vec<Option<u32>>,
    load_nw: Vec<u64>,
    net_nw: Vec<i64>,
    load_powered: Vec<bool>,
    load_shed: Vec<bool>,
    flags: Vec<u8>,
}

const STAT_COLUMNS: [&str; 12] = [
    "input_uv_min",
    "input_uv_mean",
    "input_uv_max",
    "input_na_min",
    "input_na_mean",
    "input_na_max",
    "output_uv_min",
    "output_uv_mean",
    "output_uv_max",
    "output_na_min",
    "output_na_mean",
    "output_na_max",
];
const STATE_COLUMNS: [&str; 6] = [
    "idle_ms",
    "cold_start_ms",
    "harvesting_ms",
    "sagging_ms",
    "cutoff_ms",
    "stalled_ms",
];

fn report_schema() -> arrow_schema::SchemaRef {
    use arrow_schema::{DataType, Field, Schema};
    let mut fields = vec![
        Field::new("boot", DataType::UInt32, false),
        Field::new("seq", DataType::UInt16, false),
        Field::new("uptime_ms", DataType::UInt64, false),
        Field::new("host_time_us", DataType::UInt64, false),
        Field::new("interval_ms", DataType::UInt32, false),
        Field::new("sample_count", DataType::UInt32, false),
    ];
    fields.extend(
        STAT_COLUMNS
            .iter()
            .map(|c| Field::new(*c, DataType::UInt32, false)),
    );
    fields.push(Field::new("drawn_nj", DataType::UInt64, false));
    fields.push(Field::new("delivered_nj", DataType::UInt64, false));
    fields.push(Field::new("stored_nj", DataType::Int64, false));
    fields.push(Field::new("state", DataType::Utf8, false));
    fields.extend(
        STATE_COLUMNS
            .iter()
            .map(|c| Field::new(*c, DataType::UInt32, false)),
    );
    fields.push(Field::new("input_cutoff_in_ms", DataType::UInt32, true));
    fields.push(Field::new("brownout_in_ms", DataType::UInt32, true));
    fields.push(Field::new("load_nw", DataType::UInt64, false));
    fields.push(Field::new("net_nw", DataType::Int64, false));
    fields.push(Field::new("load_powered", DataType::Boolean, false));
    fields.push(Field::new("load_shed", DataType::Boolean, false));
    fields.push(Field::new("flags", DataType::UInt8, false));
    std::sync::Arc::new(Schema::new(fields))
}

impl ReportColumns {
    fn push(
        &mut self,
        boot: u32,
        seq: u16,
        uptime_ms: u64,
        host_time_us: u64,
        r: &gleaner_protocol::Report,
    ) {
        self.boot.push(boot);
        self.seq.push(seq);
        self.uptime_ms.push(uptime_ms);
        self.host_time_us.push(host_time_us);
        self.interval_ms.push(r.interval_ms);
        self.sample_count.push(r.sample_count);
        let channels = [&r.input_uv, &r.input_na, &r.output_uv, &r.output_na];
        for (k, c) in channels.iter().enumerate() {
            self.stats[3 * k].push(c.min());
            self.stats[3 * k + 1].push(c.mean);
            self.stats[3 * k + 2].push(c.max());
        }
        self.drawn_nj.push(r.drawn_nj);
        self.delivered_nj.push(r.delivered_nj);
        self.stored_nj.push(r.stored_nj);
        self.state.push(r.state.name());
        for (i, s) in gleaner_protocol::ConverterState::ALL.iter().enumerate() {
            self.state_ms[i].push(r.state_ms.get(*s));
        }
        self.input_cutoff_in_ms.push(r.input_cutoff_in_ms);
        self.brownout_in_ms.push(r.brownout_in_ms);
        self.load_nw.push(r.load_nw);
        self.net_nw.push(r.net_nw);
        self.load_powered.push(r.load_powered);
        self.load_shed.push(r.load_shed);
        self.flags.push(r.flags.0);
    }

    fn take_batch(&mut self) -> Result<arrow_array::RecordBatch> {
        use arrow_array::*;
        use std::sync::Arc;
        let t = std::mem::take(self);
        let mut cols: Vec<ArrayRef> = vec![
            Arc::new(UInt32Array::from(t.boot)),
            Arc::new(UInt16Array::from(t.seq)),
            Arc::new(UInt64Array::from(t.uptime_ms)),
            Arc::new(UInt64Array::from(t.host_time_us)),
            Arc::new(UInt32Array::from(t.interval_ms)),
            Arc::new(UInt32Array::from(t.sample_count)),
        ];
        cols.extend(
            t.stats
                .into_iter()
                .map(|v| Arc::new(UInt32Array::from(v)) as ArrayRef),
        );
        cols.push(Arc::new(UInt64Array::from(t.drawn_nj)));
        cols.push(Arc::new(UInt64Array::from(t.delivered_nj)));
        cols.push(Arc::new(Int64Array::from(t.stored_nj)));
        cols.push(Arc::new(StringArray::from(t.state)));
        cols.extend(
            t.state_ms
                .into_iter()
                .map(|v| Arc::new(UInt32Array::from(v)) as ArrayRef),
        );
        cols.push(Arc::new(UInt32Array::from(t.input_cutoff_in_ms)));
        cols.push(Arc::new(UInt32Array::from(t.brownout_in_ms)));
        cols.push(Arc::new(UInt64Array::from(t.load_nw)));
        cols.push(Arc::new(Int64Array::from(t.net_nw)));
        cols.push(Arc::new(BooleanArray::from(t.load_powered)));
        cols.push(Arc::new(BooleanArray::from(t.load_shed)));
        cols.push(Arc::new(UInt8Array::from(t.flags)));
        Ok(RecordBatch::try_new(report_schema(), cols)?)
    }
}

fn event_schema() -> arrow_schema::SchemaRef {
    use arrow_schema::{DataType, Field, Schema};
    std::sync::Arc::new(Schema::new(vec![
        Field::new("boot", DataType::UInt32, false),
        Field::new("seq", DataType::UInt16, false),
        Field::new("uptime_ms", DataType::UInt64, false),
        Field::new("host_time_us", DataType::UInt64, false),
        Field::new("from", DataType::Utf8, false),
        Field::new("to", DataType::Utf8, false),
        Field::new("cause", DataType::Utf8, false),
        Field::new("trigger_input_uv", DataType::UInt32, false),
        Field::new("trigger_output_uv", DataType::UInt32, false),
        Field::new("input_uv", DataType::UInt32, false),
        Field::new("output_uv", DataType::UInt32, false),
    ]))
}

/// Writes `PREFIX-reports.parquet` and `PREFIX-events.parquet` from the log at
/// `log`, streaming in row groups of 65,536 rows, advancing `progress` by
/// the bytes read; each file appears only once complete.
pub fn export_parquet(
    log: &Path,
    prefix: &Path,
    progress: &ProgressBar,
) -> Result<ExportedParquet> {
    use arrow_array::*;
    use parquet::arrow::ArrowWriter;
    use std::sync::Arc;
    let Input {
        reader: file, name, ..
    } = open_input(log, "log")?;
    let reports_path = suffixed(prefix, "-reports.parquet");
    let events_path = suffixed(prefix, "-events.parquet");
    let mut reports_out =
        ArrowWriter::try_new(AtomicFile::create(&reports_path)?, report_schema(), None)?;
    let mut events_out =
        ArrowWriter::try_new(AtomicFile::create(&events_path)?, event_schema(), None)?;
    let mut rows = ReportColumns::default();
    let mut events: Vec<(u32, u16, u64, u64, gleaner_protocol::Event)> = Vec::new();
    let mut tracker = LinkTracker::new();
    let (mut n_reports, mut n_events) = (0u64, 0u64);
    let mut reader = LogReader::new(file);
    let mut records = 0u64;
    while let Some(mut record) = reader.next() {
        records += 1;
        if records.is_multiple_of(crate::progress::RECORDS_PER_UPDATE) {
            progress.set_position(reader.offset());
        }
        let host = record.host_time_us;
        let RecordBody::Frame(bytes) = &mut record.body else {
            continue;
        };
        let Ok(Some(t)) = tracker.accept_in_place(bytes) else {
            continue;
        };
        match &t.message.body {
            UplinkBody::Report(r) => {
                rows.push(t.boot_index, t.message.seq, t.message.uptime_ms, host, r);
                n_reports += 1;
                if rows.boot.len() >= BATCH_ROWS {
                    reports_out.write(&rows.take_batch()?)?;
                }
            }
            UplinkBody::Event(e) => {
                events.push((t.boot_index, t.message.seq, t.message.uptime_ms, host, *e));
                n_events += 1;
            }
            _ => {}
        }
    }
    if !rows.boot.is_empty() {
        reports_out.write(&rows.take_batch()?)?;
    }
    refuse_non_log(&reader, &name)?;
    let reports_file = reports_out.into_inner()?;
    for chunk in events.chunks(BATCH_ROWS) {
        let cols: Vec<ArrayRef> = vec![
            Arc::new(UInt32Array::from(
                chunk.iter().map(|e| e.0).collect::<Vec<_>>(),
            )),
            Arc::new(UInt16Array::from(
                chunk.iter().map(|e| e.1).collect::<Vec<_>>(),
            )),
            Arc::new(UInt64Array::from(
                chunk.iter().map(|e| e.2).collect::<Vec<_>>(),
            )),
            Arc::new(UInt64Array::from(
                chunk.iter().map(|e| e.3).collect::<Vec<_>>(),
            )),
            Arc::new(StringArray::from(
                chunk.iter().map(|e| e.4.from.name()).collect::<Vec<_>>(),
            )),
            Arc::new(StringArray::from(
                chunk.iter().map(|e| e.4.to.name()).collect::<Vec<_>>(),
            )),
            Arc::new(StringArray::from(
                chunk.iter().map(|e| e.4.cause.name()).collect::<Vec<_>>(),
            )),
            Arc::new(UInt32Array::from(
                chunk
                    .iter()
                    .map(|e| e.4.trigger_input_uv)
                    .collect::<Vec<_>>(),
            )),
            Arc::new(UInt32Array::from(
                chunk
                    .iter()
                    .map(|e| e.4.trigger_output_uv)
                    .collect::<Vec<_>>(),
            )),
            Arc::new(UInt32Array::from(
                chunk.iter().map(|e| e.4.input_uv).collect::<Vec<_>>(),
            )),
            Arc::new(UInt32Array::from(
                chunk.iter().map(|e| e.4.output_uv).collect::<Vec<_>>(),
            )),
        ];
        events_out.write(&RecordBatch::try_new(event_schema(), cols)?)?;
    }
    let events_file = events_out.into_inner()?;
    reports_file.commit()?;
    events_file.commit()?;
    Ok(ExportedParquet {
        reports_path,
        reports: n_reports,
        events_path,
        events: n_events,
    })
}
