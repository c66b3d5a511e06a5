//! Reading one log on every core, with the result of one sequential read.
//!
//! The file is cut into parts of [`PART_BYTES`]. A worker finds the first
//! valid record at or after its part's start (the length prefix and CRC make
//! boundaries findable), reads records up to the first valid one at or after
//! the part's end, and opens and reads their frames ahead
//! ([`ReadAhead`]). The parts are handed over in file order. Where two parts
//! disagree on the boundary between them (bytes inside a record that happen
//! to look like a record, or damage across the cut), the later part is read
//! again from where the earlier one ended, so records, damage and torn tails
//! come out exactly as [`LogReader`] gives them. Memory is a few parts per
//! worker, whatever the file's length.

use std::fs::File;
use std::io::{Read, Seek, SeekFrom};
use std::ops::Range;
use std::path::Path;
use std::sync::mpsc::{self, Receiver, SyncSender};

use gleaner_protocol::{FrameError, Uplink};

use super::{LogReader, ReadWarning, Record, RecordRef};
use crate::link::ReadAhead;

/// Bytes of file per part: large enough that the cut costs nothing, small
/// enough that a few parts in flight per worker stay a few megabytes.
pub const PART_BYTES: u64 = 512 * 1024;

/// A record with the smallest frame a node sends (a sizing guess only).
const SMALLEST_RECORD_BYTES: usize = 32;

/// Largest read the reader asks of the file at once (the last read of a part
/// overshoots its end by at most this).
const READ_BYTES: usize = 64 * 1024;

/// One record as a log item: a frame already opened and read.
#[derive(Debug)]
pub enum LogItem<'a> {
    /// A frame, opened and read ahead.
    Frame {
        /// Microseconds since the Unix epoch when the host received it.
        host_time_us: u64,
        /// What it holds.
        frame: ReadAhead<'a>,
    },
    /// Any other record.
    Other(Record),
}

impl<'a> From<RecordRef<'a>> for LogItem<'a> {
    /// A record as the analysis takes it: a frame opened and read in place.
    fn from(record: RecordRef<'a>) -> Self {
        match record {
            RecordRef::Frame {
                host_time_us,
                bytes,
            } => LogItem::Frame {
                host_time_us,
                frame: ReadAhead::open(bytes),
            },
            RecordRef::Other(record) => LogItem::Other(record),
        }
    }
}

/// What reading a log noticed besides its records.
#[derive(Debug, Default)]
pub struct ReadSummary {
    /// Damage skipped, torn tail, not a log: in file order.
    pub warnings: Vec<ReadWarning>,
    /// An I/O error that ended reading early.
    pub io_error: Option<std::io::Error>,
    /// Bytes read.
    pub bytes: u64,
}

/// A frame item kept in a part: its postcard bytes live in the part's arena.
enum Kept {
    Frame {
        host_time_us: u64,
        body: Option<Range<usize>>,
        read: Result<(Uplink, u8), FrameError>,
    },
    Other(Record),
}

/// One part's records, read by a worker.
struct Part {
    /// Offset of its first record (or where its search ended).
    start: u64,
    /// Where reading stopped: the next part's first record, or the end.
    stop: u64,
    items: Vec<Kept>,
    arena: Vec<u8>,
    warnings: Vec<ReadWarning>,
    io_error: Option<std::io::Error>,
}

impl Part {
    /// An empty part with room for the records of `bytes` of file.
    fn with_room(bytes: u64) -> Self {
        // Sized for a part of small frames, so neither grows as it fills.
        let bytes = usize::try_from(bytes).unwrap_or(usize::MAX);
        Part {
            start: 0,
            stop: 0,
            items: Vec::with_capacity(bytes / SMALLEST_RECORD_BYTES),
            arena: Vec::with_capacity(bytes),
            warnings: Vec::new(),
            io_error: None,
        }
    }
}

/// Limits each read, so a part reads little past its end.
struct Paced<R>(R);

impl<R: Read> Read for Paced<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = buf.len().min(READ_BYTES);
        self.0.read(&mut buf[..n])
    }
}

impl<R: Seek> Seek for Paced<R> {
    fn seek(&mut self, to: SeekFrom) -> std::io::Result<u64> {
        self.0.seek(to)
    }
}

/// A worker's reader of parts, on its own file handle.
type PartReader = LogReader<Paced<File>>;

/// Reads the records of the part starting at `from` (a record boundary, or
/// anywhere when `search` is set) up to the first at or after `to`, into
/// `part` (emptied, its memory reused).
fn read_part(reader: &mut PartReader, from: u64, to: u64, search: bool, part: &mut Part) {
    part.items.clear();
    part.arena.clear();
    part.start = from;
    part.stop = from;
    if let Err(error) = reader.restart(from, to) {
        part.io_error = Some(error);
        return;
    }
    if search {
        reader.seek_record();
    }
    part.start = reader.offset();
    while let Some(record) = reader.next_ref() {
        part.items.push(match record {
            RecordRef::Frame {
                host_time_us,
                bytes,
            } => keep_frame(host_time_us, ReadAhead::open(bytes), &mut part.arena),
            RecordRef::Other(record) => Kept::Other(record),
        });
    }
    part.stop = reader.offset();
    part.warnings = reader.take_warnings();
    part.io_error = reader.take_io_error();
}

/// A frame read ahead, its postcard bytes copied into `arena`.
fn keep_frame(host_time_us: u64, frame: ReadAhead<'_>, arena: &mut Vec<u8>) -> Kept {
    let body = frame.body.map(|body| {
        let at = arena.len();
        arena.extend_from_slice(body);
        at..arena.len()
    });
    Kept::Frame {
        host_time_us,
        body,
        read: frame.read,
    }
}

/// Hands a part's items to `sink`, in order, leaving the part empty.
fn deliver(part: &mut Part, sink: &mut impl FnMut(LogItem<'_>)) {
    let arena = &part.arena;
    for item in part.items.drain(..) {
        sink(match item {
            Kept::Frame {
                host_time_us,
                body,
                read,
            } => LogItem::Frame {
                host_time_us,
                frame: ReadAhead {
                    body: body.and_then(|range| arena.get(range)),
                    read,
                },
            },
            Kept::Other(record) => LogItem::Other(record),
        });
    }
}

/// Reads every record of the log at `path` (`-`: standard input, read in one
/// stream) into `sink`, in file order, on up to `workers` threads; `progress`
/// is called with the bytes read since its last call.
pub fn read_log(
    path: &Path,
    workers: usize,
    progress: &mut dyn FnMut(u64),
    sink: impl FnMut(LogItem<'_>),
) -> anyhow::Result<ReadSummary> {
    read_log_from(path, 0, workers, progress, sink)
}

/// As [`read_log`], from the record at byte `from` of an uncompressed log
/// file (0: the whole log, which may be compressed or standard input).
pub fn read_log_from(
    path: &Path,
    from: u64,
    workers: usize,
    progress: &mut dyn FnMut(u64),
    sink: impl FnMut(LogItem<'_>),
) -> anyhow::Result<ReadSummary> {
    let mut file = match crate::files::is_stdio(path) {
        true => None,
        false => Some(crate::files::open_file(path, "log")?),
    };
    let compressed = match file.as_mut() {
        Some(file) => crate::files::is_gzip(file)
            .map_err(|e| anyhow::anyhow!("cannot read {}: {e}", path.display()))?,
        None => true, // standard input may be either: read it in one stream
    };
    let Some(file) = file.filter(|_| !compressed) else {
        let input = crate::files::open_log(path)?;
        return Ok(read_stream(LogReader::new(input.reader), progress, sink));
    };
    let size = file.metadata().map_or(0, |m| m.len());
    if workers < 2 || size.saturating_sub(from) < 2 * PART_BYTES {
        let mut reader = LogReader::new(file);
        if from > 0 {
            reader
                .restart(from, u64::MAX)
                .map_err(|e| anyhow::anyhow!("cannot read {}: {e}", path.display()))?;
        }
        return Ok(read_stream(reader, progress, sink));
    }
    let cut = Cut::new(from..size, PART_BYTES, workers);
    Ok(read_in_parts(
        path,
        LogReader::new(Paced(file)),
        cut,
        progress,
        sink,
    ))
}

/// Parts in flight per worker: one being read, one waiting to be handed over.
const PARTS_PER_WORKER: usize = 2;

/// How a file is cut into parts and the parts dealt to workers.
#[derive(Debug, Clone, Copy)]
struct Cut {
    /// Where the first part begins (a record boundary, or 0).
    base: u64,
    part_bytes: u64,
    parts: u64,
    workers: u64,
}

impl Cut {
    /// Cuts the bytes `span` of a file.
    fn new(span: Range<u64>, part_bytes: u64, workers: usize) -> Self {
        let part_bytes = part_bytes.max(1);
        Cut {
            base: span.start,
            part_bytes,
            parts: span.end.saturating_sub(span.start).div_ceil(part_bytes),
            workers: (workers as u64).max(1),
        }
    }

    /// Where part `i` begins (its end is where part `i + 1` begins).
    fn start(self, i: u64) -> u64 {
        self.base.saturating_add(i.saturating_mul(self.part_bytes))
    }
}

/// A worker: reads parts `first`, `first + workers`, ... into the empty
/// parts it gets back, and sends them on, until the file ends or nobody
/// listens.
fn read_parts(path: &Path, first: u64, cut: Cut, full: SyncSender<Part>, empty: Receiver<Part>) {
    // A worker that cannot open the file sends parts marked failed: they are
    // read again by the caller, which has the file open.
    let mut reader = File::open(path).ok().map(|f| LogReader::new(Paced(f)));
    let mut spare: Vec<Part> = (0..PARTS_PER_WORKER)
        .map(|_| Part::with_room(cut.part_bytes))
        .collect();
    for i in (first..cut.parts).step_by(cut.workers as usize) {
        let Some(mut part) = spare.pop().or_else(|| empty.recv().ok()) else {
            return;
        };
        match reader.as_mut() {
            Some(reader) => read_part(reader, cut.start(i), cut.start(i + 1), i > 0, &mut part),
            None => part.io_error = Some(std::io::ErrorKind::NotFound.into()),
        }
        if full.send(part).is_err() {
            return; // the caller stopped early
        }
    }
}

/// Reads the file in parts on `workers` threads and hands the records over
/// in order; `own` reads again any part whose start disagrees.
fn read_in_parts(
    path: &Path,
    mut own: PartReader,
    cut: Cut,
    progress: &mut dyn FnMut(u64),
    mut sink: impl FnMut(LogItem<'_>),
) -> ReadSummary {
    let mut summary = ReadSummary::default();
    std::thread::scope(|scope| {
        let mut lanes = Vec::new();
        for w in 0..cut.workers {
            let (full_send, full) = mpsc::sync_channel::<Part>(PARTS_PER_WORKER);
            let (empty, empty_receive) = mpsc::sync_channel::<Part>(PARTS_PER_WORKER);
            scope.spawn(move || read_parts(path, w, cut, full_send, empty_receive));
            lanes.push((full, empty));
        }
        let mut expected = cut.start(0);
        for i in 0..cut.parts {
            let Some((full, empty)) = lanes.get((i % cut.workers) as usize) else {
                break;
            };
            let Ok(mut part) = full.recv() else { break };
            if part.start != expected || part.io_error.is_some() {
                // The cut fell differently (or the worker could not read):
                // read this part again from where the last one ended, as
                // one sequential read would.
                read_part(&mut own, expected, cut.start(i + 1), false, &mut part);
            }
            progress(part.stop.saturating_sub(expected));
            expected = part.stop;
            summary.warnings.append(&mut part.warnings);
            let failed = part.io_error.take();
            deliver(&mut part, &mut sink);
            let _ = empty.send(part); // the worker may have finished
            if failed.is_some() {
                summary.io_error = failed;
                break;
            }
        }
        summary.bytes = expected;
        drop(lanes); // ends workers still waiting
    });
    summary
}

/// Reads a log as one stream (standard input, small files, one core).
fn read_stream<R: Read>(
    mut reader: LogReader<R>,
    progress: &mut dyn FnMut(u64),
    mut sink: impl FnMut(LogItem<'_>),
) -> ReadSummary {
    let (mut shown, mut records) = (reader.offset(), 0u64);
    while let Some(record) = reader.next_ref() {
        sink(LogItem::from(record));
        records += 1;
        if records.is_multiple_of(crate::progress::RECORDS_PER_UPDATE) {
            progress(reader.offset() - shown);
            shown = reader.offset();
        }
    }
    progress(reader.offset().saturating_sub(shown));
    ReadSummary {
        warnings: reader.take_warnings(),
        io_error: reader.take_io_error(),
        bytes: reader.offset(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::log::{LogHeader, LogWriter, MarkerKind, RecordBody};
    use gleaner_protocol::{encode_frame, Outcome, Reply, UplinkBody, MAX_UPLINK_FRAME_LEN};

    /// What a reader gave, owned, to compare two reads.
    #[derive(Debug, PartialEq)]
    enum Seen {
        Frame(u64, Option<Vec<u8>>, Result<(Uplink, u8), FrameError>),
        Other(Record),
    }

    fn seen(item: LogItem<'_>) -> Seen {
        match item {
            LogItem::Frame {
                host_time_us,
                frame,
            } => Seen::Frame(host_time_us, frame.body.map(<[u8]>::to_vec), frame.read),
            LogItem::Other(record) => Seen::Other(record),
        }
    }

    /// A log of good frames of varied length, damaged frames and markers.
    fn write_log(path: &Path, records: u32) {
        let header = LogHeader {
            format_version: 1,
            writer: "split test".into(),
            host: "bench".into(),
            started: "now".into(),
            source: "none".into(),
        };
        let mut w = LogWriter::create(path, &header).unwrap();
        for i in 0..records {
            let t = 1_000 + u64::from(i);
            if i % 17 == 5 {
                w.append_marker(t, MarkerKind::Note, "a note").unwrap();
                continue;
            }
            let message = Uplink {
                seq: i as u16,
                uptime_ms: u64::from(i) * 7_919 * u64::from(i % 5),
                body: UplinkBody::Reply(Reply {
                    request_id: (i * 31) as u16,
                    outcome: Outcome::Pong,
                }),
            };
            let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
            let mut frame = encode_frame(&message, &mut buf).unwrap().to_vec();
            frame.pop(); // the delimiter is not logged
            if i % 11 == 3 {
                frame[1] ^= 0x55; // damaged on the line
            }
            w.append_frame(t, &frame).unwrap();
        }
        w.sync().unwrap();
    }

    fn read_whole(path: &Path) -> (Vec<Seen>, Vec<ReadWarning>) {
        let mut items = Vec::new();
        let file = File::open(path).unwrap();
        let summary = read_stream(LogReader::new(file), &mut |_| {}, |i| items.push(seen(i)));
        (items, summary.warnings)
    }

    fn read_cut(
        path: &Path,
        part_bytes: u64,
        workers: usize,
    ) -> (Vec<Seen>, Vec<ReadWarning>, u64) {
        let mut items = Vec::new();
        let size = std::fs::metadata(path).unwrap().len();
        let own = LogReader::new(Paced(File::open(path).unwrap()));
        let mut read = 0;
        let cut = Cut::new(0..size, part_bytes, workers);
        let summary = read_in_parts(path, own, cut, &mut |n| read += n, |i| items.push(seen(i)));
        assert!(summary.io_error.is_none());
        assert_eq!(summary.bytes, size);
        (items, summary.warnings, read)
    }

    #[test]
    fn parts_of_any_size_give_what_one_read_gives() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("clean.gleanlog");
        write_log(&path, 300);
        let (whole, warnings) = read_whole(&path);
        assert!(warnings.is_empty());
        assert_eq!(whole.len(), 301); // the header and every record
        let size = std::fs::metadata(&path).unwrap().len();
        for part_bytes in [1, 9, 23, 64, 100, 997, size / 2, size + 5] {
            for workers in [1, 2, 3] {
                let (items, warnings, read) = read_cut(&path, part_bytes, workers);
                assert_eq!(
                    items, whole,
                    "parts of {part_bytes} bytes, {workers} workers"
                );
                assert!(warnings.is_empty());
                assert_eq!(read, size, "progress adds up to the file");
            }
        }
    }

    #[test]
    fn damage_across_cuts_and_torn_tails_read_as_in_one_read() {
        let dir = tempfile::tempdir().unwrap();
        let clean = dir.path().join("clean.gleanlog");
        write_log(&clean, 200);
        let bytes = std::fs::read(&clean).unwrap();
        let mut state = 0x2545_f491_u32;
        let mut next = move |n: usize| {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            state as usize % n
        };
        let path = dir.path().join("damaged.gleanlog");
        for case in 0..12 {
            let mut damaged = bytes.clone();
            for _ in 0..1 + case % 4 {
                // A flipped byte, or a run of garbage up to 300 bytes long.
                let at = 8 + next(damaged.len() - 8);
                let run = if case % 2 == 0 { 1 } else { 1 + next(300) };
                for b in damaged.iter_mut().skip(at).take(run) {
                    *b ^= 1 + next(255) as u8;
                }
            }
            if case % 3 == 0 {
                let cut = damaged.len() - 1 - next(40);
                damaged.truncate(cut); // a torn tail
            }
            if case == 7 {
                damaged[0] = b'X'; // not a log's signature
            }
            std::fs::write(&path, &damaged).unwrap();
            let (whole, whole_warnings) = read_whole(&path);
            assert!(!whole_warnings.is_empty(), "case {case} damages something");
            for part_bytes in [13, 50, 211, 1024] {
                let (items, warnings, _) = read_cut(&path, part_bytes, 2);
                assert_eq!(items, whole, "case {case}, parts of {part_bytes}");
                assert_eq!(
                    warnings, whole_warnings,
                    "case {case}, parts of {part_bytes}"
                );
            }
        }
    }

    #[test]
    fn a_protocol_1_log_read_in_parts_reports_as_read_whole() {
        // Protocol 1 frames are read ahead as the current protocol and
        // again, as protocol 1, once the boot's Hello says so.
        let path = Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("../tests/data/protocol1-orchard-night.gleanlog");
        let size = std::fs::metadata(&path).unwrap().len();
        let report = |part_bytes: Option<u64>| {
            let mut analyzer = crate::analysis::Analyzer::new();
            match part_bytes {
                None => {
                    read_stream(
                        LogReader::new(File::open(&path).unwrap()),
                        &mut |_| {},
                        |i| analyzer.add_item(i),
                    );
                }
                Some(bytes) => {
                    let own = LogReader::new(Paced(File::open(&path).unwrap()));
                    let cut = Cut::new(0..size, bytes, 2);
                    read_in_parts(&path, own, cut, &mut |_| {}, |i| analyzer.add_item(i));
                }
            }
            analyzer.finish()
        };
        let whole = report(None);
        assert!(whole.boots.iter().all(|b| b.protocol.starts_with("1.")));
        assert!(whole.link.frames > 100 && whole.link.decode_errors == 0);
        assert_eq!(report(Some(4096)), whole);
        assert_eq!(report(Some(333)), whole);
    }

    #[test]
    fn records_are_markers_and_headers_too() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("a.gleanlog");
        write_log(&path, 40);
        let (items, _, _) = read_cut(&path, 64, 2);
        let markers = items
            .iter()
            .filter(|s| {
                matches!(
                    s,
                    Seen::Other(Record {
                        body: RecordBody::Marker {
                            kind: MarkerKind::Note,
                            ..
                        },
                        ..
                    })
                )
            })
            .count();
        assert_eq!(markers, 3); // i = 5, 22, 39
        let damaged = items
            .iter()
            .filter(|s| matches!(s, Seen::Frame(_, None, Err(FrameError::Crc))))
            .count();
        assert_eq!(damaged, 4); // i = 3, 14, 25, 36
    }
}
