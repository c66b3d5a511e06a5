//! The fleet dataset: logs exported into one Hive-partitioned Parquet
//! dataset that DuckDB, Spark, pandas and Polars read as tables
//! (docs/dataset.md):
//!
//! ```text
//! DIR/reports/node=<node id>/day=<YYYY-MM-DD>/part-<log name>.parquet
//! DIR/events/...   (converter state transitions)
//! DIR/loads/...    (the load losing or regaining its supply)
//! ```
//!
//! Rows are the live stream's lines ([`crate::stream::Line`]), so a
//! column has the same name and unit as the stream's key and the CSV's
//! column. Each log writes its own part files, so new logs add files and
//! never rewrite old ones, and exporting a log again replaces its own.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use anyhow::{Context, Result};
use arrow_array::{
    ArrayRef, BooleanArray, Int64Array, RecordBatch, StringArray, TimestampMicrosecondArray,
};
use arrow_schema::{DataType, Field, Schema, SchemaRef, TimeUnit};
use gleaner_protocol::{Hello, UplinkBody};
use indicatif::ProgressBar;
use parquet::arrow::ArrowWriter;
use parquet::file::properties::WriterProperties;

use crate::columns::{self, Cell, Column, Kind};
use crate::files::AtomicFile;
use crate::link::LinkTracker;
use crate::link::Tracked;
use crate::log::{LogHeader, LogReader, RecordBody};
use crate::stream::NodeSeen;

/// Schema name in every file's metadata.
pub const DATASET_SCHEMA: &str = "gleaner.dataset.v1";

/// Rows per row group.
const ROW_GROUP_ROWS: usize = 65_536;
/// Messages held before they are encoded into the open row group.
const BATCH_ROWS: usize = 8_192;

/// The tables of the dataset.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Table {
    /// One row per report interval.
    Reports,
    /// One row per converter state transition.
    Events,
    /// One row per load supply change.
    Loads,
}

impl Table {
    /// Every table.
    pub const ALL: [Table; 3] = [Table::Reports, Table::Events, Table::Loads];

    /// Its folder name.
    pub const fn name(self) -> &'static str {
        match self {
            Table::Reports => "reports",
            Table::Events => "events",
            Table::Loads => "loads",
        }
    }

    /// The table a message's row goes to, if any.
    fn of(body: &UplinkBody) -> Option<Table> {
        match body {
            UplinkBody::Report(_) => Some(Table::Reports),
            UplinkBody::Event(_) => Some(Table::Events),
            UplinkBody::Load(_) => Some(Table::Loads),
            _ => None,
        }
    }

    /// Its columns (names as in the live stream; the partition columns
    /// `node` and `day` come from the folders).
    pub fn schema(self) -> SchemaRef {
        let time = DataType::Timestamp(TimeUnit::Microsecond, Some("+00:00".into()));
        let mut columns: Vec<(String, DataType, bool)> = vec![
            ("node_id".into(), DataType::Utf8, false),
            ("node_name".into(), DataType::Utf8, true),
            ("boot".into(), DataType::Int64, false),
            ("seq".into(), DataType::Int64, false),
            ("uptime_ms".into(), DataType::Int64, false),
            ("host_time".into(), time, false),
            ("lost_before".into(), DataType::Int64, false),
        ];
        let kinds: Vec<(&str, Kind)> = match self {
            Table::Reports => columns::REPORT.iter().map(|c| (c.name, c.kind)).collect(),
            Table::Events => columns::EVENT.iter().map(|c| (c.name, c.kind)).collect(),
            Table::Loads => columns::LOAD.iter().map(|c| (c.name, c.kind)).collect(),
        };
        columns.extend(kinds.into_iter().map(|(name, kind)| {
            let (data_type, nullable) = match kind {
                Kind::Int => (DataType::Int64, false),
                Kind::MaybeInt => (DataType::Int64, true),
                Kind::Text => (DataType::Utf8, false),
                Kind::Flag => (DataType::Boolean, false),
            };
            (name.to_string(), data_type, nullable)
        }));
        let fields: Vec<Field> = columns
            .into_iter()
            .map(|(name, kind, nullable)| {
                let unit = unit_of(&name);
                let field = Field::new(name, kind, nullable);
                match unit {
                    Some(unit) => {
                        field.with_metadata([("unit".to_string(), unit.to_string())].into())
                    }
                    None => field,
                }
            })
            .collect();
        Arc::new(Schema::new(fields))
    }
}

/// The unit a column's name ends in, as the project names units.
pub fn unit_of(column: &str) -> Option<&'static str> {
    const SUFFIXES: [(&str, &str); 7] = [
        ("_uv", "µV"),
        ("_na", "nA"),
        ("_nj", "nJ"),
        ("_nw", "nW"),
        ("_ms", "ms"),
        ("_uj", "µJ"),
        ("_us", "µs"),
    ];
    let stem = ["_min", "_mean", "_max"]
        .iter()
        .find_map(|s| column.strip_suffix(s))
        .unwrap_or(column);
    if column == "host_time" {
        return Some("UTC timestamp, µs");
    }
    SUFFIXES
        .iter()
        .find(|(suffix, _)| stem.ends_with(suffix))
        .map(|(_, unit)| *unit)
}

/// What exporting one log wrote.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Exported {
    /// The node, 16 hex digits (zeros: unknown, as for protocol 1 logs).
    pub node_id: String,
    /// Rows per table.
    pub rows: BTreeMap<&'static str, u64>,
    /// The files written.
    pub files: Vec<PathBuf>,
}

/// The first log's header and the first `Hello` in the logs (read until one
/// is found), for the node's identity and the files' metadata.
fn first_hello(logs: &[PathBuf]) -> Result<(Option<LogHeader>, Option<Hello>)> {
    let mut header = None;
    for log in logs {
        let mut tracker = LinkTracker::new();
        for record in LogReader::new(crate::files::open_log(log)?.reader) {
            match &record.body {
                RecordBody::Header(h) => {
                    header.get_or_insert_with(|| h.clone());
                }
                RecordBody::Frame(bytes) => {
                    if let Ok(Some(t)) = tracker.accept_encoded(bytes) {
                        if let UplinkBody::Hello(h) = t.message.body {
                            return Ok((header, Some(h)));
                        }
                    }
                }
                _ => {}
            }
        }
    }
    Ok((header, None))
}

/// The UTC date of a time in µs since the Unix epoch, `YYYY-MM-DD`.
pub fn utc_day(host_time_us: u64) -> String {
    let time = std::time::UNIX_EPOCH + std::time::Duration::from_micros(host_time_us);
    humantime::format_rfc3339_seconds(time).to_string()[..10].to_string()
}

/// The writer of one part file.
struct Part {
    writer: ArrowWriter<AtomicFile>,
    /// Messages not written yet, with their receive times.
    rows: Vec<(Tracked, u64)>,
    /// Where it goes.
    path: PathBuf,
}

/// Exports the log at `log` into the dataset at `dir`, advancing `progress`
/// by the bytes read. Part files appear only when complete; every table gets
/// at least one (empty when the log has no rows for it).
pub fn export_log(log: &Path, dir: &Path, progress: &ProgressBar) -> Result<Exported> {
    // A gzipped log's part files are named as the log's would be.
    let name = log
        .file_name()
        .map_or("log".into(), |n| n.to_string_lossy());
    let name = name
        .strip_suffix(crate::upkeep::COMPRESSED_SUFFIX)
        .unwrap_or(&name);
    let stem = Path::new(name).file_stem().map_or("log".into(), |s| {
        s.to_string_lossy()
            .replace(|c: char| !c.is_ascii_alphanumeric() && c != '-', "_")
    });
    let mut exported = write_tables(&[log.to_path_buf()], progress, &|table, node_id, day| {
        dir.join(table.name())
            .join(format!("node={node_id}"))
            .join(format!("day={day}"))
            .join(format!("part-{stem}.parquet"))
    })?;
    // A table with no rows gets one empty file beside another table's first,
    // so every table exists for a query engine ("no files found" otherwise).
    let first = exported.files.iter().find_map(|f| {
        let table = Table::ALL
            .into_iter()
            .find(|t| f.starts_with(dir.join(t.name())))?;
        Some(f.strip_prefix(dir.join(table.name())).ok()?.to_path_buf())
    });
    if let Some(rest) = first {
        for table in Table::ALL {
            let folder = dir.join(table.name());
            if !exported.files.iter().any(|f| f.starts_with(&folder)) {
                let empty = open_part(&folder.join(&rest), table, &[])?;
                exported
                    .files
                    .push(finish(empty, table, &NodeSeen::default())?);
            }
        }
    }
    exported.files.sort();
    Ok(exported)
}

/// Writes the tables of the logs (in order, as one run) as
/// `PREFIX-reports.parquet`, `PREFIX-events.parquet` and
/// `PREFIX-loads.parquet` (the dataset's columns, one file per table, each
/// written even when it has no rows).
pub fn export_files(logs: &[PathBuf], prefix: &Path, progress: &ProgressBar) -> Result<Exported> {
    let place = |table: Table, _: &str, _: &str| {
        let mut name = prefix.as_os_str().to_owned();
        name.push(format!("-{}.parquet", table.name()));
        PathBuf::from(name)
    };
    let mut exported = write_tables(logs, progress, &place)?;
    for table in Table::ALL {
        let path = place(table, "", "");
        if !exported.files.contains(&path) {
            let empty = open_part(&path, table, &[])?;
            exported
                .files
                .push(finish(empty, table, &NodeSeen::default())?);
        }
    }
    exported.files.sort();
    Ok(exported)
}

/// Where a row goes: the file for a table, node id and UTC day.
type Place<'a> = dyn Fn(Table, &str, &str) -> PathBuf + 'a;

/// Reads the logs at `logs`, in order as one run, and writes each row to the
/// file `place` names for it; every file appears only when complete.
fn write_tables(logs: &[PathBuf], progress: &ProgressBar, place: &Place<'_>) -> Result<Exported> {
    let (header, hello) = first_hello(logs)?;
    let mut tables = Tables::new(header.as_ref(), hello.as_ref());
    let mut tracker = LinkTracker::new();
    for log in logs {
        let mut reader = LogReader::new(crate::files::open_log(log)?.reader);
        let (mut shown, mut records) = (0u64, 0u64);
        while let Some(record) = reader.next() {
            records += 1;
            if records.is_multiple_of(crate::progress::RECORDS_PER_UPDATE) {
                progress.inc(reader.offset() - shown);
                shown = reader.offset();
            }
            let RecordBody::Frame(bytes) = &record.body else {
                continue;
            };
            if let Ok(Some(t)) = tracker.accept_encoded(bytes) {
                tables.push(t, record.host_time_us, place)?;
            }
        }
        progress.inc(reader.offset().saturating_sub(shown));
        reader.read_whole(&log.display().to_string())?;
    }
    tables.finish()
}

/// The tables being written: one open file per table. Rows come in time
/// order, so a table's file for a day is finished when the next day starts
/// (memory stays at one row group per table, whatever the log's length).
struct Tables {
    node: NodeSeen,
    node_id: String,
    metadata: Vec<parquet::file::metadata::KeyValue>,
    open: BTreeMap<Table, (PathBuf, Part)>,
    written: std::collections::BTreeSet<PathBuf>,
    exported: Exported,
}

impl Tables {
    /// Tables of the node that sent `hello` (none: node zero), recorded as `header` says.
    fn new(header: Option<&LogHeader>, hello: Option<&Hello>) -> Self {
        let mut node = NodeSeen::default();
        if let Some(h) = hello {
            node.learn(&UplinkBody::Hello(h.clone()));
        }
        // A log with no Hello (protocol 1 before asking for one) is node zero.
        let node_id = node.id.get_or_insert_with(|| format!("{:016x}", 0)).clone();
        Tables {
            metadata: file_metadata(header, hello),
            exported: Exported {
                node_id: node_id.clone(),
                ..Exported::default()
            },
            node,
            node_id,
            open: BTreeMap::new(),
            written: std::collections::BTreeSet::new(),
        }
    }

    /// Adds a message received at `host_time_us` to its table's file.
    fn push(&mut self, t: Tracked, host_time_us: u64, place: &Place<'_>) -> Result<()> {
        self.node.learn(&t.message.body);
        let Some(table) = Table::of(&t.message.body) else {
            return Ok(());
        };
        let place = place(table, &self.node_id, &utc_day(host_time_us));
        if self.open.get(&table).is_none_or(|(at, _)| *at != place) {
            if let Some((_, part)) = self.open.remove(&table) {
                self.exported.files.push(finish(part, table, &self.node)?);
            }
            let path = unused(&place, &self.written);
            self.written.insert(path.clone());
            let part = open_part(&path, table, &self.metadata)?;
            self.open.insert(table, (place, part));
        }
        if let Some((_, part)) = self.open.get_mut(&table) {
            part.rows.push((t, host_time_us));
            if part.rows.len() >= BATCH_ROWS {
                write_rows(part, table, &self.node)?;
            }
        }
        *self.exported.rows.entry(table.name()).or_default() += 1;
        Ok(())
    }

    /// Finishes every open file.
    fn finish(mut self) -> Result<Exported> {
        for (table, (_, part)) in std::mem::take(&mut self.open) {
            self.exported.files.push(finish(part, table, &self.node)?);
        }
        self.exported.files.sort();
        Ok(self.exported)
    }
}

/// `path`, or when this export has written it already (the host clock went
/// back into an earlier day), `path` with `-2`, `-3`, ... before `.parquet`.
fn unused(path: &Path, written: &std::collections::BTreeSet<PathBuf>) -> PathBuf {
    let mut candidate = path.to_path_buf();
    let mut n = 2;
    while written.contains(&candidate) {
        let stem = path
            .file_stem()
            .map_or(String::new(), |s| s.to_string_lossy().into_owned());
        candidate = path.with_file_name(format!("{stem}-{n}.parquet"));
        n += 1;
    }
    candidate
}

/// Writes a part's last rows and gives the file its name.
fn finish(mut part: Part, table: Table, node: &NodeSeen) -> Result<PathBuf> {
    write_rows(&mut part, table, node)?;
    part.writer.into_inner()?.commit()?;
    Ok(part.path)
}

/// Key-value metadata of every part file of a log.
fn file_metadata(
    header: Option<&LogHeader>,
    hello: Option<&Hello>,
) -> Vec<parquet::file::metadata::KeyValue> {
    use parquet::file::metadata::KeyValue;
    let mut kv = vec![KeyValue::new(
        "gleaner.schema".into(),
        DATASET_SCHEMA.to_string(),
    )];
    if let Some(h) = header {
        kv.push(KeyValue::new(
            "gleaner.log_header".into(),
            serde_json::to_string(h).unwrap_or_default(),
        ));
    }
    if let Some(h) = hello {
        kv.push(KeyValue::new(
            "gleaner.node".into(),
            serde_json::to_string(&crate::cli::node::NodeInfo::from_hello(h)).unwrap_or_default(),
        ));
    }
    kv
}

/// Starts the file at `path` for `table`'s rows.
fn open_part(
    path: &Path,
    table: Table,
    metadata: &[parquet::file::metadata::KeyValue],
) -> Result<Part> {
    if let Some(folder) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
        std::fs::create_dir_all(folder)
            .with_context(|| format!("cannot create {}", folder.display()))?;
    }
    let properties = WriterProperties::builder()
        .set_max_row_group_size(ROW_GROUP_ROWS)
        .set_compression(CODEC)
        .set_key_value_metadata(Some(metadata.to_vec()))
        .build();
    let writer = ArrowWriter::try_new(AtomicFile::create(path)?, table.schema(), Some(properties))?;
    Ok(Part {
        writer,
        rows: Vec::new(),
        path: path.to_path_buf(),
    })
}

/// The compression of the dataset's files: snappy. Measured on a 30-day
/// log's reports table: snappy 5.6 MB, LZ4 (raw) 5.3 MB, zstd 4.1 MB,
/// uncompressed 7.9 MB, all written and read in about the same time. zstd
/// needs a C library built for every target (the Windows check cannot), and
/// Spark 4.3's LZ4 (raw) reader refused pages our writer's LZ4 made ("all
/// input must be consumed"), so snappy, which every reader takes.
pub const CODEC: parquet::basic::Compression = parquet::basic::Compression::SNAPPY;

/// Writes the rows gathered for a part as one row group.
fn write_rows(part: &mut Part, table: Table, node: &NodeSeen) -> Result<()> {
    if part.rows.is_empty() {
        return Ok(());
    }
    let batch = record_batch(table, &part.rows, node)?;
    part.rows.clear();
    part.writer.write(&batch)?;
    Ok(())
}

/// The rows of `table` as one Arrow batch, column by column: the envelope
/// every table shares, then the table's columns from [`crate::columns`].
fn record_batch(table: Table, rows: &[(Tracked, u64)], node: &NodeSeen) -> Result<RecordBatch> {
    let count = rows.len();
    let int = |f: &dyn Fn(&(Tracked, u64)) -> i64| -> ArrayRef {
        Arc::new(Int64Array::from_iter_values(rows.iter().map(f)))
    };
    let host_time = TimestampMicrosecondArray::from_iter_values(
        rows.iter()
            .map(|(_, us)| i64::try_from(*us).unwrap_or(i64::MAX)),
    )
    .with_timezone("+00:00");
    let mut arrays: Vec<ArrayRef> = vec![
        Arc::new(StringArray::from(vec![node.id.as_deref(); count])),
        Arc::new(StringArray::from(vec![node.name.as_deref(); count])),
        int(&|(t, _)| i64::from(t.boot_index)),
        int(&|(t, _)| i64::from(t.message.seq)),
        int(&|(t, _)| i64::try_from(t.message.uptime_ms).unwrap_or(i64::MAX)),
        Arc::new(host_time),
        int(&|(t, _)| i64::try_from(t.lost_before).unwrap_or(i64::MAX)),
    ];
    arrays.extend(match table {
        Table::Reports => arrays_of(rows, &columns::REPORT, |b| match b {
            UplinkBody::Report(r) => Some(r),
            _ => None,
        }),
        Table::Events => arrays_of(rows, &columns::EVENT, |b| match b {
            UplinkBody::Event(e) => Some(e),
            _ => None,
        }),
        Table::Loads => arrays_of(rows, &columns::LOAD, |b| match b {
            UplinkBody::Load(e) => Some(e),
            _ => None,
        }),
    });
    Ok(RecordBatch::try_new(table.schema(), arrays)?)
}

/// One Arrow array per column of the messages of `rows` that `pick` takes.
fn arrays_of<T>(
    rows: &[(Tracked, u64)],
    columns: &[Column<T>],
    pick: fn(&UplinkBody) -> Option<&T>,
) -> Vec<ArrayRef> {
    let messages: Vec<&T> = rows
        .iter()
        .filter_map(|(t, _)| pick(&t.message.body))
        .collect();
    column_arrays(columns, &messages)
}

/// One Arrow array per column of `messages`.
fn column_arrays<T>(columns: &[Column<T>], messages: &[&T]) -> Vec<ArrayRef> {
    columns
        .iter()
        .map(|column| -> ArrayRef {
            let cells = messages.iter().map(|m| (column.cell)(m));
            match column.kind {
                Kind::Int | Kind::MaybeInt => Arc::new(
                    cells
                        .map(|c| match c {
                            Cell::Int(v) => Some(v),
                            _ => None,
                        })
                        .collect::<Int64Array>(),
                ),
                Kind::Text => Arc::new(
                    cells
                        .map(|c| match c {
                            Cell::Text(t) => Some(t),
                            _ => None,
                        })
                        .collect::<StringArray>(),
                ),
                Kind::Flag => Arc::new(
                    cells
                        .map(|c| match c {
                            Cell::Flag(f) => Some(f),
                            _ => None,
                        })
                        .collect::<BooleanArray>(),
                ),
            }
        })
        .collect()
}
