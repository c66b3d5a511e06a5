//! Checkpoints of the analysis, written into a log as it is recorded, so a
//! report on a long log reads only its end.
//!
//! The writer's [`Keeper`] follows every record it appends through the same
//! [`Analyzer`] a report uses. Every [`CHECKPOINT_EVERY_BYTES`] it has the
//! analyzer's whole state appended as checkpoint records (kind 4, in parts
//! of at most [`PART_BYTES`]), each stamped with the length of the file
//! before the checkpoint and the CRC-32 of those bytes. A report
//! ([`resume`]) looks for the last whole checkpoint near the end of the log,
//! checks the CRC of every byte before it, and goes on from its state,
//! reading only the records after it. At any doubt (a byte changed anywhere
//! before it, another version of the program, a compressed log, standard
//! input) the report reads every record instead: the result is the same
//! either way, only the time differs.

use std::fs::File;
use std::io::{Read, Seek, SeekFrom};
use std::path::Path;

use crc32fast::Hasher;

use super::Analyzer;
use crate::log::split::LogItem;
use crate::log::{
    lend_body, parse_body, Follower, LogReader, BODY_PREFIX_LEN, KIND_CHECKPOINT, KIND_FRAME,
    MAGIC, MAX_BODY_LEN, RECORD_PREFIX_LEN,
};

/// Bytes of log between two checkpoints: a report reads at most about this
/// much besides the CRC pass, and the checkpoints (a few hundred KiB at most,
/// the plot series being the largest part) add a few percent to the log.
pub const CHECKPOINT_EVERY_BYTES: u64 = 8 << 20;

/// How far back from the end of a log a report looks for a checkpoint.
const LOOK_BACK_BYTES: u64 = 3 * CHECKPOINT_EVERY_BYTES;

/// The analysis rules and state layout the checkpoints hold: raise it when an
/// accumulator's state or rules change, so older checkpoints are passed over.
pub const REVISION: u32 = 1;

/// The program that writes and reads checkpoints: a checkpoint from another
/// version is passed over.
const WRITER: &str = env!("CARGO_PKG_VERSION");

/// Bytes of the stamp at the start of every part's payload.
const STAMP_LEN: usize = 20;

/// Most state bytes in one part: a part is one record.
pub const PART_BYTES: usize = MAX_BODY_LEN - BODY_PREFIX_LEN - STAMP_LEN;

/// What every part of a checkpoint starts with (after kind and time), all
/// little-endian: revision u32, covered u64, covered_crc u32, part u16,
/// parts u16.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Stamp {
    /// [`REVISION`] of the writer.
    revision: u32,
    /// Bytes of the file before the checkpoint's first part.
    covered: u64,
    /// CRC-32/ISO-HDLC of those bytes.
    covered_crc: u32,
    /// This part's index.
    part: u16,
    /// Parts in the checkpoint.
    parts: u16,
}

impl Stamp {
    fn encode(&self) -> [u8; STAMP_LEN] {
        let mut out = [0u8; STAMP_LEN];
        out[0..4].copy_from_slice(&self.revision.to_le_bytes());
        out[4..12].copy_from_slice(&self.covered.to_le_bytes());
        out[12..16].copy_from_slice(&self.covered_crc.to_le_bytes());
        out[16..18].copy_from_slice(&self.part.to_le_bytes());
        out[18..20].copy_from_slice(&self.parts.to_le_bytes());
        out
    }

    /// The stamp and the state bytes of a part's payload.
    fn decode(payload: &[u8]) -> Option<(Stamp, &[u8])> {
        let (stamp, chunk) = payload.split_at_checked(STAMP_LEN)?;
        let bytes = |range: std::ops::Range<usize>| stamp.get(range);
        let stamp = Stamp {
            revision: u32::from_le_bytes(bytes(0..4)?.try_into().ok()?),
            covered: u64::from_le_bytes(bytes(4..12)?.try_into().ok()?),
            covered_crc: u32::from_le_bytes(bytes(12..16)?.try_into().ok()?),
            part: u16::from_le_bytes(bytes(16..18)?.try_into().ok()?),
            parts: u16::from_le_bytes(bytes(18..20)?.try_into().ok()?),
        };
        Some((stamp, chunk))
    }

    /// True when `other` is a part of the same checkpoint.
    fn same_checkpoint(&self, other: &Stamp) -> bool {
        (self.revision, self.covered, self.covered_crc, self.parts)
            == (
                other.revision,
                other.covered,
                other.covered_crc,
                other.parts,
            )
    }
}

/// Follows what a writer appends through an [`Analyzer`], and has its state
/// written as a checkpoint every so many bytes.
pub struct Keeper {
    analyzer: Analyzer,
    /// CRC-32 of every byte followed, the signature included.
    crc: Hasher,
    /// Bytes followed: the file's length.
    bytes: u64,
    /// Bytes since the last checkpoint.
    since: u64,
    every: u64,
    last_time_us: u64,
    body: Vec<u8>,
    /// A record a reader would take for damage was written: no checkpoint
    /// could stand for a read of this file any more.
    spoiled: bool,
}

impl Default for Keeper {
    fn default() -> Self {
        Keeper::new()
    }
}

impl Keeper {
    /// A keeper for a new log, checkpointing every [`CHECKPOINT_EVERY_BYTES`].
    pub fn new() -> Self {
        Keeper::every(CHECKPOINT_EVERY_BYTES)
    }

    /// A keeper for a new log, checkpointing every `bytes` (tests, tools).
    pub fn every(bytes: u64) -> Self {
        let mut crc = Hasher::new();
        crc.update(MAGIC);
        Keeper {
            analyzer: Analyzer::new(),
            crc,
            bytes: MAGIC.len() as u64,
            since: 0,
            every: bytes.max(1),
            last_time_us: 0,
            body: Vec::new(),
            spoiled: false,
        }
    }

    /// A keeper, checkpointing every `every` bytes, for a log of `len` bytes
    /// that is being gone on in: from its last checkpoint, or its start,
    /// following every record up to its end. None when the file does not
    /// read whole to `len`.
    pub fn picking_up(path: &Path, len: u64, every: u64) -> Option<Keeper> {
        let mut keeper = Keeper::every(every);
        if let Some(resumed) = resume(path, 1) {
            keeper.analyzer = resumed.analyzer;
            keeper.crc = resumed.crc;
            keeper.bytes = resumed.offset;
        }
        let file = File::open(path).ok()?;
        let end = walk(&file, keeper.bytes, |_, record| keeper.follow(record)).ok()?;
        (end == len).then_some(keeper)
    }
}

impl Follower for Keeper {
    fn follow(&mut self, record: &[u8]) {
        self.crc.update(record);
        self.bytes += record.len() as u64;
        self.since += record.len() as u64;
        let Some(body) = record.get(RECORD_PREFIX_LEN..) else {
            return;
        };
        match body.first() {
            Some(&KIND_CHECKPOINT) => {
                self.since = 0;
                return;
            }
            Some(&KIND_FRAME) => {}
            _ if parse_body(body).is_none() => {
                self.spoiled = true;
                return;
            }
            _ => {}
        }
        if let Some(time) = body.get(1..BODY_PREFIX_LEN) {
            self.last_time_us = u64::from_le_bytes(time.try_into().unwrap_or_default());
        }
        self.body.clear();
        self.body.extend_from_slice(body);
        // Exactly what a reader hands the analyzer for this body.
        self.analyzer
            .add_item(LogItem::from(lend_body(&mut self.body)));
    }

    fn due(&mut self) -> Option<(u8, u64, Vec<Vec<u8>>)> {
        if self.spoiled || self.since < self.every {
            return None;
        }
        self.since = 0;
        let state = postcard::to_allocvec(&(WRITER, &self.analyzer)).ok()?;
        let chunks: Vec<&[u8]> = state.chunks(PART_BYTES).collect();
        let stamp = Stamp {
            revision: REVISION,
            covered: self.bytes,
            covered_crc: self.crc.clone().finalize(),
            part: 0,
            parts: u16::try_from(chunks.len()).ok()?,
        };
        let payloads = chunks
            .iter()
            .zip(0..)
            .map(|(chunk, part)| [&Stamp { part, ..stamp }.encode()[..], chunk].concat())
            .collect();
        Some((KIND_CHECKPOINT, self.last_time_us, payloads))
    }
}

/// A report's starting point taken from a log's checkpoint.
pub struct Resumed {
    /// The analyzer as it stood after every record before `offset`.
    pub analyzer: Analyzer,
    /// Where reading goes on: the record after the checkpoint.
    pub offset: u64,
    /// CRC-32 of the file's bytes before `offset`.
    crc: Hasher,
}

/// The last whole checkpoint near the end of the log at `path`, checked
/// against every byte before it (on up to `workers` threads); None when
/// there is none to trust, and the log must be read from its start.
pub fn resume(path: &Path, workers: usize) -> Option<Resumed> {
    if crate::files::is_stdio(path) {
        return None;
    }
    let mut file = File::open(path).ok()?;
    let size = file.metadata().ok()?.len();
    let mut magic = [0u8; MAGIC.len()];
    file.read_exact(&mut magic).ok()?;
    if &magic != MAGIC {
        return None; // compressed, or not a log
    }
    let from = size.saturating_sub(LOOK_BACK_BYTES);
    let start = if from <= MAGIC.len() as u64 {
        MAGIC.len() as u64
    } else {
        let mut reader = LogReader::new(&file);
        reader.restart(from, u64::MAX).ok()?;
        reader.seek_record();
        reader.offset()
    };
    let found = last_checkpoint(&file, start)?;
    if prefix_crc(path, found.stamp.covered, workers).ok()? != found.stamp.covered_crc {
        return None;
    }
    let (writer, analyzer): (String, Analyzer) = postcard::from_bytes(&found.state).ok()?;
    (writer == WRITER).then_some(Resumed {
        analyzer,
        offset: found.end,
        crc: found.crc,
    })
}

/// A checkpoint found in a log, its parts gathered.
struct Found {
    stamp: Stamp,
    next_part: u16,
    state: Vec<u8>,
    /// Where its last part ends.
    end: u64,
    /// CRC-32 of the file up to `end`.
    crc: Hasher,
}

/// The last whole checkpoint of this program's [`REVISION`] in the records
/// from `start` (a record boundary) on.
fn last_checkpoint(file: &File, start: u64) -> Option<Found> {
    let mut building: Option<Found> = None;
    let mut last = None;
    walk(file, start, |at, record| {
        let part = record
            .get(RECORD_PREFIX_LEN..)
            .filter(|body| body.first() == Some(&KIND_CHECKPOINT))
            .and_then(|body| Stamp::decode(body.get(BODY_PREFIX_LEN..)?))
            .filter(|(stamp, _)| stamp.revision == REVISION);
        let Some((stamp, chunk)) = part else {
            building = None;
            return;
        };
        if stamp.part == 0 && stamp.covered == at {
            building = Some(Found {
                stamp,
                next_part: 0,
                state: Vec::new(),
                end: at,
                crc: Hasher::new_with_initial_len(stamp.covered_crc, stamp.covered),
            });
        }
        match building.as_mut() {
            Some(b) if b.stamp.same_checkpoint(&stamp) && b.next_part == stamp.part => {
                b.state.extend_from_slice(chunk);
                b.crc.update(record);
                b.end = at + record.len() as u64;
                b.next_part += 1;
                if b.next_part == stamp.parts {
                    last = building.take();
                }
            }
            _ => building = None,
        }
    })
    .ok()?;
    last
}

/// Reads whole, valid records from `from` (a record boundary) on, handing
/// each (prefix and body) and its offset to `each`, up to the end of the
/// file or the first damage; returns where it stopped.
fn walk(file: &File, from: u64, mut each: impl FnMut(u64, &[u8])) -> std::io::Result<u64> {
    let mut reader = LogReader::new(file);
    reader.restart(from, u64::MAX)?;
    let mut at = from;
    while let Some((record_at, record)) = reader.next_whole() {
        if record_at != at {
            return Ok(at); // damage was skipped before this record
        }
        each(at, record);
        at += record.len() as u64;
    }
    match reader.take_io_error() {
        Some(error) => Err(error),
        None => Ok(at),
    }
}

/// CRC-32 of the first `len` bytes of the file, read in `workers` pieces at
/// once and combined.
fn prefix_crc(path: &Path, len: u64, workers: usize) -> std::io::Result<u32> {
    let pieces = workers.clamp(1, 16) as u64;
    let share = len.div_ceil(pieces).max(1);
    let crcs: Vec<std::io::Result<Hasher>> = std::thread::scope(|scope| {
        let threads: Vec<_> = (0..pieces)
            .map(|i| {
                let range = (i * share).min(len)..((i + 1) * share).min(len);
                scope.spawn(move || range_crc(path, range))
            })
            .collect();
        threads
            .into_iter()
            .map(|t| {
                t.join()
                    .unwrap_or_else(|_| Err(std::io::Error::other("a reading thread failed")))
            })
            .collect()
    });
    let mut total = Hasher::new();
    for crc in crcs {
        total.combine(&crc?);
    }
    Ok(total.finalize())
}

/// CRC-32 of the bytes `range` of the file.
fn range_crc(path: &Path, range: std::ops::Range<u64>) -> std::io::Result<Hasher> {
    let mut file = File::open(path)?;
    file.seek(SeekFrom::Start(range.start))?;
    let mut hasher = Hasher::new();
    let mut buf = vec![0u8; 1 << 20];
    let mut left = range.end.saturating_sub(range.start);
    while left > 0 {
        let n = usize::try_from(left).map_or(buf.len(), |l| l.min(buf.len()));
        let chunk = &mut buf[..n];
        file.read_exact(chunk)?;
        hasher.update(chunk);
        left -= n as u64;
    }
    Ok(hasher)
}

#[cfg(test)]
mod tests {
    use std::io::Write;
    use std::path::PathBuf;

    use super::*;
    use crate::analysis::{analyze_file_with, Reading, RunReport};
    use crate::log::{LogWriter, Record, RecordBody};
    use crate::sim::scenarios::synthetic::SyntheticLog;

    /// The recorded runs kept as test data.
    const FIXTURES: [&str; 3] = [
        "protocol1-orchard-night",
        "protocol2-greenhouse-evening",
        "protocol3-greenhouse-evening",
    ];

    fn fixture(name: &str) -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join(format!("../tests/data/{name}.gleanlog"))
    }

    /// The records of the log `from` written again to `to`, with a
    /// checkpoint every `every` bytes; the first `first` records only, when
    /// given (the rest: [`go_on`]).
    fn rewrite(from: impl Read, to: &Path, every: u64, first: Option<usize>) -> usize {
        let mut records = LogReader::new(from);
        let Some(Record {
            body: RecordBody::Header(header),
            ..
        }) = records.next()
        else {
            panic!("a log starts with its header");
        };
        let mut writer = LogWriter::create(to, &header).unwrap();
        writer.sync().unwrap();
        let keeper = Keeper::picking_up(to, writer.bytes_written(), every).unwrap();
        writer.follow_with(Some(Box::new(keeper)));
        let mut copied = 0;
        for record in records.take(first.unwrap_or(usize::MAX)) {
            append(&mut writer, record);
            copied += 1;
        }
        writer.sync().unwrap();
        copied
    }

    /// Checkpoint spacing in the tests: several per test log.
    const EVERY: u64 = 8 * 1024;

    /// The test log `name` written again into `dir`, with a checkpoint
    /// every [`EVERY`] bytes.
    fn with_checkpoints(dir: &Path, name: &str) -> PathBuf {
        let path = dir.join(format!("{name}.gleanlog"));
        rewrite(File::open(fixture(name)).unwrap(), &path, EVERY, None);
        path
    }

    fn append<W: crate::log::LogStore>(writer: &mut LogWriter<W>, record: Record) {
        match record.body {
            RecordBody::Frame(frame) => writer.append_frame(record.host_time_us, &frame),
            RecordBody::Marker { kind, detail } => {
                writer.append_marker(record.host_time_us, kind, &detail)
            }
            RecordBody::Header(_) | RecordBody::Unknown(_) => Ok(()),
        }
        .unwrap();
    }

    fn report(path: &Path, checkpoints: bool) -> RunReport {
        let reading = Reading {
            workers: 2,
            checkpoints,
        };
        analyze_file_with(path, &reading, &crate::progress::none()).unwrap()
    }

    /// Checkpoint parts in the log, and how many begin a checkpoint.
    fn checkpoints_in(path: &Path) -> (usize, usize) {
        let file = File::open(path).unwrap();
        let (mut parts, mut firsts) = (0, 0);
        walk(&file, MAGIC.len() as u64, |_, record| {
            let body = &record[RECORD_PREFIX_LEN..];
            if body[0] == KIND_CHECKPOINT {
                parts += 1;
                let (stamp, _) = Stamp::decode(&body[BODY_PREFIX_LEN..]).unwrap();
                firsts += usize::from(stamp.part == 0);
            }
        })
        .unwrap();
        (parts, firsts)
    }

    fn flip_byte(path: &Path, at: u64) {
        let mut bytes = std::fs::read(path).unwrap();
        bytes[at as usize] ^= 0x5a;
        std::fs::write(path, bytes).unwrap();
    }

    #[test]
    fn a_stamp_reads_back_and_a_short_one_does_not() {
        let stamp = Stamp {
            revision: REVISION,
            covered: 0x0102_0304_0506_0708,
            covered_crc: 0xdead_beef,
            part: 3,
            parts: 4,
        };
        let payload = [&stamp.encode()[..], b"state"].concat();
        assert_eq!(Stamp::decode(&payload), Some((stamp, &b"state"[..])));
        assert_eq!(Stamp::decode(&payload[..STAMP_LEN - 1]), None);
    }

    #[test]
    fn a_report_from_a_checkpoint_is_the_report_of_every_record() {
        let dir = tempfile::tempdir().unwrap();
        for name in FIXTURES {
            let path = with_checkpoints(dir.path(), name);
            let (parts, checkpoints) = checkpoints_in(&path);
            assert!(checkpoints >= 3, "{name}: {checkpoints} checkpoints");
            let resumed = resume(&path, 2).expect("the last checkpoint is found and trusted");
            let size = std::fs::metadata(&path).unwrap().len();
            assert!(
                size - resumed.offset < EVERY + 2 * MAX_BODY_LEN as u64,
                "{name}"
            );
            let quick = report(&path, true);
            assert_eq!(quick, report(&path, false), "{name}, {parts} parts");
            assert_eq!(quick, report(&fixture(name), false), "{name}: as recorded");
        }
    }

    #[test]
    fn a_checkpoint_larger_than_a_record_is_kept_in_parts() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("synthetic.gleanlog");
        // Two days at one report a minute: the plot series is full.
        rewrite(SyntheticLog::new(2 * 86_400, 60), &path, 128 * 1024, None);
        let (parts, checkpoints) = checkpoints_in(&path);
        assert!(
            parts >= 2 * checkpoints,
            "{parts} parts, {checkpoints} checkpoints"
        );
        assert!(resume(&path, 2).is_some());
        assert_eq!(report(&path, true), report(&path, false));
    }

    #[test]
    fn a_byte_changed_before_the_checkpoint_means_every_record_is_read() {
        let dir = tempfile::tempdir().unwrap();
        let path = with_checkpoints(dir.path(), FIXTURES[2]);
        flip_byte(&path, 4_000);
        assert!(resume(&path, 2).is_none());
        let quick = report(&path, true);
        assert_eq!(quick, report(&path, false));
        assert!(
            quick.warnings.iter().any(|w| w.contains("damaged bytes")),
            "{:?}",
            quick.warnings
        );
    }

    #[test]
    fn damage_or_a_torn_tail_after_the_checkpoint_is_read_as_ever() {
        let dir = tempfile::tempdir().unwrap();
        let path = with_checkpoints(dir.path(), FIXTURES[2]);
        let offset = resume(&path, 2).unwrap().offset;
        flip_byte(&path, offset + 20);
        let size = std::fs::metadata(&path).unwrap().len();
        File::options()
            .write(true)
            .open(&path)
            .unwrap()
            .set_len(size - 5)
            .unwrap();
        assert_eq!(resume(&path, 2).map(|r| r.offset), Some(offset));
        let quick = report(&path, true);
        assert_eq!(quick, report(&path, false));
        let said = |what: &str| quick.warnings.iter().any(|w| w.contains(what));
        assert!(
            said("damaged bytes") && said("incomplete"),
            "{:?}",
            quick.warnings
        );
    }

    #[test]
    fn a_log_gone_on_in_goes_on_checkpointing() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("gone-on.gleanlog");
        let source = fixture(FIXTURES[1]);
        let copied = rewrite(File::open(&source).unwrap(), &path, EVERY, Some(300));
        let first_part = std::fs::metadata(&path).unwrap().len();
        let first_checkpoint = resume(&path, 1).unwrap().offset;
        let mut writer = LogWriter::append_to(&path).unwrap();
        let keeper = Keeper::picking_up(&path, first_part, EVERY).unwrap();
        writer.follow_with(Some(Box::new(keeper)));
        for record in LogReader::new(File::open(&source).unwrap()).skip(1 + copied) {
            append(&mut writer, record);
        }
        writer.sync().unwrap();
        let later = resume(&path, 1).unwrap().offset;
        assert!(first_checkpoint < first_part && later > first_part);
        assert_eq!(report(&path, true), report(&source, false));
    }

    #[test]
    fn a_compressed_log_is_read_whole() {
        let dir = tempfile::tempdir().unwrap();
        let path = with_checkpoints(dir.path(), FIXTURES[0]);
        let gz = dir.path().join("packed.gleanlog.gz");
        let mut encoder =
            flate2::write::GzEncoder::new(File::create(&gz).unwrap(), flate2::Compression::fast());
        encoder.write_all(&std::fs::read(&path).unwrap()).unwrap();
        encoder.finish().unwrap();
        assert!(resume(&gz, 2).is_none());
        assert_eq!(report(&gz, true), report(&path, true));
    }

    /// [`REVISION`] and the CRC-32 of the analyzer's state after the
    /// protocol-3 test log under it: pinned together.
    const PINNED: (u32, u32) = (1, 3_979_976_904);

    #[test]
    fn the_revision_is_raised_when_the_state_or_its_rules_change() {
        let mut analyzer = Analyzer::new();
        for record in LogReader::new(File::open(fixture(FIXTURES[2])).unwrap()) {
            analyzer.add_record(&record);
        }
        let state = postcard::to_allocvec(&analyzer).unwrap();
        assert_eq!(
            (REVISION, crc32fast::hash(&state)),
            PINNED,
            "the analysis keeps other state or follows other rules: raise REVISION and pin the new fingerprint"
        );
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(64))]
        #[test]
        fn a_forged_state_never_panics(at in 0usize..1_000_000, xor in 1u8..=255) {
            let mut analyzer = Analyzer::new();
            for record in LogReader::new(File::open(fixture(FIXTURES[2])).unwrap()) {
                analyzer.add_record(&record);
            }
            let mut state = postcard::to_allocvec(&(WRITER, &analyzer)).unwrap();
            let at = at % state.len();
            state[at] ^= xor;
            if let Ok((_, mut forged)) = postcard::from_bytes::<(String, Analyzer)>(&state) {
                // Going on from it must not panic either.
                for record in LogReader::new(File::open(fixture(FIXTURES[2])).unwrap()).take(200) {
                    forged.add_record(&record);
                }
                let _ = forged.finish();
            }
        }
    }
}
