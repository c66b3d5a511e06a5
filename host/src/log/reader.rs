//! Reading logs, streaming, with bounded memory. Damage never stops the
//! reader: a record whose length or CRC is wrong is skipped byte by byte until
//! the next valid record, and a torn last record (the one being written when
//! the recorder was killed) is reported as a warning.

use std::io::Read;

use gleaner_protocol::frame_crc;
use thiserror::Error;

use super::format::{
    LogHeader, MarkerKind, Record, RecordBody, BODY_PREFIX_LEN, KIND_FRAME, KIND_HEADER,
    KIND_MARKER, MAGIC, MAX_BODY_LEN, RECORD_PREFIX_LEN,
};

/// Something the reader passed over.
#[derive(Debug, Clone, PartialEq, Eq, Error)]
pub enum ReadWarning {
    /// The file does not start with the log magic.
    #[error("not a Gleaner log (the first bytes are not the log signature)")]
    NotALog,
    /// Bytes that did not form valid records were skipped.
    #[error("skipped {bytes} damaged bytes at offset {offset}")]
    Damaged {
        /// Where the damage began.
        offset: u64,
        /// How many bytes were skipped.
        bytes: u64,
    },
    /// The file ends in the middle of a record.
    #[error("the last record is incomplete ({bytes} bytes at offset {offset}): it was being written when recording stopped, and is skipped")]
    TornTail {
        /// Where the incomplete record starts.
        offset: u64,
        /// Its bytes.
        bytes: u64,
    },
}

/// Why a log could not be read as a whole: for readers that must not stop
/// short silently (exports, replays).
#[derive(Debug, Error)]
pub enum LogError {
    /// The input is not a log at all.
    #[error("{name}: {}", ReadWarning::NotALog)]
    NotALog {
        /// The file (`-`: standard input).
        name: String,
    },
    /// Reading stopped early on an I/O error (a failing disk, a truncated
    /// or corrupt gzip stream).
    #[error("{name}: reading stopped at offset {offset}")]
    Unreadable {
        /// The file.
        name: String,
        /// Bytes read before the error.
        offset: u64,
        /// The error.
        #[source]
        source: std::io::Error,
    },
}

impl LogError {
    /// True when the input, not the machine, is at fault: not a log, or a
    /// compressed stream that does not decode.
    pub fn is_bad_input(&self) -> bool {
        match self {
            LogError::NotALog { .. } => true,
            LogError::Unreadable { source, .. } => matches!(
                source.kind(),
                std::io::ErrorKind::InvalidData
                    | std::io::ErrorKind::InvalidInput
                    | std::io::ErrorKind::UnexpectedEof
            ),
        }
    }
}

/// A streaming log reader; an iterator of records.
pub struct LogReader<R> {
    input: R,
    buf: Vec<u8>,
    start: usize,
    end: usize,
    offset: u64,
    /// Stop before the first valid record at or after this offset.
    stop_at: u64,
    eof: bool,
    checked_magic: bool,
    damaged_from: Option<(u64, u64)>,
    warnings: Vec<ReadWarning>,
    io_error: Option<std::io::Error>,
}

/// One record as it lies in the reader's buffer: a frame's bytes are lent,
/// mutable (to be decoded in place) until the next read.
#[derive(Debug, PartialEq, Eq)]
pub enum RecordRef<'a> {
    /// A frame as received (COBS bytes without the delimiter).
    Frame {
        /// Microseconds since the Unix epoch when the host received it.
        host_time_us: u64,
        /// The frame's bytes.
        bytes: &'a mut [u8],
    },
    /// Any other record, owned.
    Other(Record),
}

/// What lies at the reader's position.
enum Probe {
    /// A valid record of this body length.
    Valid(usize),
    /// Not a valid record here (bad length, CRC or content).
    Invalid,
    /// A record prefix whose body runs past the end of the input.
    Torn(usize),
    /// Fewer bytes than a record prefix are left (maybe none).
    End(usize),
}

const WINDOW: usize = RECORD_PREFIX_LEN + MAX_BODY_LEN;

impl<R: Read> LogReader<R> {
    /// Reads from `input` (wrap files in nothing: the reader buffers itself).
    pub fn new(input: R) -> Self {
        LogReader {
            input,
            buf: vec![0; 2 * WINDOW],
            start: 0,
            end: 0,
            offset: 0,
            stop_at: u64::MAX,
            eof: false,
            checked_magic: false,
            damaged_from: None,
            warnings: Vec::new(),
            io_error: None,
        }
    }

    /// Moves to byte `offset` of the file to read a part of it, stopping
    /// before the first valid record at or after `stop_at` (records that
    /// start earlier are read whole, and damage is skipped past `stop_at` as
    /// in one read). At offset 0 the signature is checked again. The buffer
    /// is kept, so one reader reads many parts without allocating.
    pub fn restart(&mut self, offset: u64, stop_at: u64) -> std::io::Result<()>
    where
        R: std::io::Seek,
    {
        self.input.seek(std::io::SeekFrom::Start(offset))?;
        self.start = 0;
        self.end = 0;
        self.offset = offset;
        self.stop_at = stop_at;
        self.eof = false;
        self.checked_magic = offset > 0;
        self.damaged_from = None;
        Ok(())
    }

    /// Moves to the first valid record at or after the present position (or
    /// to the end), silently: for a part of a log that starts anywhere.
    pub fn seek_record(&mut self) {
        loop {
            match self.probe() {
                Probe::Valid(_) => return,
                Probe::End(have) => return self.consume(have),
                Probe::Invalid | Probe::Torn(_) => self.consume(1),
            }
        }
    }

    /// Warnings so far (damage skipped, torn tail).
    pub fn warnings(&self) -> &[ReadWarning] {
        &self.warnings
    }

    /// Takes the warnings so far.
    pub fn take_warnings(&mut self) -> Vec<ReadWarning> {
        std::mem::take(&mut self.warnings)
    }

    /// An I/O error that ended reading early, if any.
    pub fn take_io_error(&mut self) -> Option<std::io::Error> {
        self.io_error.take()
    }

    /// After the last record: Ok when what was read is a log, read to its
    /// end; else why not (`name` names the input in the error).
    pub fn read_whole(&mut self, name: &str) -> Result<(), LogError> {
        if self.warnings.contains(&ReadWarning::NotALog) {
            return Err(LogError::NotALog {
                name: name.to_string(),
            });
        }
        match self.io_error.take() {
            Some(source) => Err(LogError::Unreadable {
                name: name.to_string(),
                offset: self.offset,
                source,
            }),
            None => Ok(()),
        }
    }

    /// Bytes consumed so far (the file offset, for a reader that resumed).
    pub fn offset(&self) -> u64 {
        self.offset
    }

    /// Makes at least `n` bytes available unless the input ends first.
    fn fill(&mut self, n: usize) -> usize {
        if self.end - self.start >= n {
            return self.end - self.start;
        }
        if self.start > 0 {
            self.buf.copy_within(self.start..self.end, 0);
            self.end -= self.start;
            self.start = 0;
        }
        while self.end < n && !self.eof {
            match self.input.read(&mut self.buf[self.end..]) {
                Ok(0) => self.eof = true,
                Ok(read) => self.end += read,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => {
                    self.io_error = Some(e);
                    self.eof = true;
                }
            }
        }
        self.end - self.start
    }

    fn consume(&mut self, n: usize) {
        self.start += n;
        self.offset += n as u64;
    }

    fn skip_damaged_byte(&mut self) {
        let entry = self.damaged_from.get_or_insert((self.offset, 0));
        entry.1 += 1;
        self.consume(1);
    }

    fn end_damage(&mut self) {
        if let Some((offset, bytes)) = self.damaged_from.take() {
            self.warnings.push(ReadWarning::Damaged { offset, bytes });
        }
    }

    /// Checks for a valid record at the present position, reading as needed.
    fn probe(&mut self) -> Probe {
        let have = self.fill(RECORD_PREFIX_LEN);
        if have < RECORD_PREFIX_LEN {
            return Probe::End(have);
        }
        let head = &self.buf[self.start..self.start + RECORD_PREFIX_LEN];
        let len = u32::from_le_bytes([head[0], head[1], head[2], head[3]]) as usize;
        let crc = u32::from_le_bytes([head[4], head[5], head[6], head[7]]);
        if !(BODY_PREFIX_LEN..=MAX_BODY_LEN).contains(&len) {
            return Probe::Invalid;
        }
        let have = self.fill(RECORD_PREFIX_LEN + len);
        if have < RECORD_PREFIX_LEN + len {
            return Probe::Torn(have);
        }
        let body = &self.buf[self.start + RECORD_PREFIX_LEN..self.start + RECORD_PREFIX_LEN + len];
        // A frame's content is never judged here; other kinds must parse.
        let valid = frame_crc(body) == crc && (body[0] == KIND_FRAME || parse_body(body).is_some());
        if valid {
            Probe::Valid(len)
        } else {
            Probe::Invalid
        }
    }

    fn check_magic(&mut self) -> bool {
        self.checked_magic = true;
        let have = self.fill(MAGIC.len());
        if have >= MAGIC.len() && &self.buf[self.start..self.start + MAGIC.len()] == MAGIC {
            self.consume(MAGIC.len());
        } else if have > 0 {
            self.warnings.push(ReadWarning::NotALog);
            if have < MAGIC.len() {
                self.consume(have);
                return false;
            }
        }
        true
    }

    /// The next record, a frame's bytes lent in place (no copy): what a
    /// reader that decodes frames should call.
    pub fn next_ref(&mut self) -> Option<RecordRef<'_>> {
        let (at, len) = self.next_valid()?;
        let body = at + RECORD_PREFIX_LEN;
        Some(lend_body(&mut self.buf[body..body + len]))
    }

    /// The next valid record whole, as it lies in the file (length, CRC and
    /// body), with its offset: for a reader that hashes or copies records.
    pub(crate) fn next_whole(&mut self) -> Option<(u64, &[u8])> {
        let (at, len) = self.next_valid()?;
        let whole = RECORD_PREFIX_LEN + len;
        Some((self.offset - whole as u64, &self.buf[at..at + whole]))
    }

    /// Moves past the next valid record, skipping and noting damage; where
    /// it lies in the buffer and its body's length.
    fn next_valid(&mut self) -> Option<(usize, usize)> {
        if !self.checked_magic && !self.check_magic() {
            return None;
        }
        loop {
            match self.probe() {
                Probe::End(have) => {
                    self.end_damage();
                    if have > 0 {
                        self.warnings.push(ReadWarning::TornTail {
                            offset: self.offset,
                            bytes: have as u64,
                        });
                        self.consume(have);
                    }
                    return None;
                }
                // Either a torn tail or a damaged length near the end: a torn
                // tail is the common case and loses only this record.
                Probe::Torn(have) if self.damaged_from.is_none() => {
                    self.warnings.push(ReadWarning::TornTail {
                        offset: self.offset,
                        bytes: have as u64,
                    });
                    self.consume(have);
                    return None;
                }
                Probe::Torn(_) | Probe::Invalid => self.skip_damaged_byte(),
                Probe::Valid(_) if self.offset >= self.stop_at => {
                    self.end_damage();
                    return None;
                }
                Probe::Valid(len) => {
                    self.end_damage();
                    let at = self.start;
                    self.consume(RECORD_PREFIX_LEN + len);
                    return Some((at, len));
                }
            }
        }
    }
}

/// A valid non-frame body as a record (None: it does not parse, damage).
pub(crate) fn parse_body(body: &[u8]) -> Option<Record> {
    let (&kind, rest) = body.split_first()?;
    let time: [u8; 8] = rest.get(..8)?.try_into().ok()?;
    let host_time_us = u64::from_le_bytes(time);
    let payload = rest.get(8..)?;
    let body = match kind {
        KIND_HEADER => RecordBody::Header(serde_json::from_slice::<LogHeader>(payload).ok()?),
        KIND_FRAME => RecordBody::Frame(payload.to_vec()),
        KIND_MARKER => {
            let (&code, detail) = payload.split_first()?;
            RecordBody::Marker {
                kind: MarkerKind::from_code(code),
                detail: String::from_utf8_lossy(detail).into_owned(),
            }
        }
        other => RecordBody::Unknown(other),
    };
    Some(Record { host_time_us, body })
}

/// A valid record's body as a record, a frame's bytes lent: what every
/// reader, and the writer's checkpoint keeper, makes of a body.
pub(crate) fn lend_body(body: &mut [u8]) -> RecordRef<'_> {
    if body.first() == Some(&KIND_FRAME) && body.len() >= BODY_PREFIX_LEN {
        let (prefix, bytes) = body.split_at_mut(BODY_PREFIX_LEN);
        let mut time = [0u8; 8];
        time.copy_from_slice(&prefix[1..]);
        let host_time_us = u64::from_le_bytes(time);
        return RecordRef::Frame {
            host_time_us,
            bytes,
        };
    }
    match parse_body(body) {
        Some(record) => RecordRef::Other(record),
        // probe() parsed it already.
        None => RecordRef::Other(Record {
            host_time_us: 0,
            body: RecordBody::Unknown(body.first().copied().unwrap_or(0)),
        }),
    }
}

impl<R: Read> Iterator for LogReader<R> {
    type Item = Record;

    fn next(&mut self) -> Option<Record> {
        Some(match self.next_ref()? {
            RecordRef::Frame {
                host_time_us,
                bytes,
            } => Record {
                host_time_us,
                body: RecordBody::Frame(bytes.to_vec()),
            },
            RecordRef::Other(record) => record,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::log::LogWriter;

    fn header() -> LogHeader {
        LogHeader {
            format_version: 1,
            writer: "test".into(),
            host: "bench".into(),
            started: "now".into(),
            source: "none".into(),
        }
    }

    fn sample_log() -> (Vec<u8>, usize) {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("a.gleanlog");
        let mut w = LogWriter::create(&path, &header()).unwrap();
        for i in 0..20u8 {
            w.append_frame(1000 + u64::from(i), &[i + 1; 7]).unwrap();
        }
        w.append_marker(5000, MarkerKind::PortLost, "unplugged")
            .unwrap();
        w.sync().unwrap();
        (std::fs::read(&path).unwrap(), 22)
    }

    #[test]
    fn reads_back_everything_written() {
        let (bytes, count) = sample_log();
        let mut reader = LogReader::new(&bytes[..]);
        let records: Vec<Record> = reader.by_ref().collect();
        assert_eq!(records.len(), count);
        assert!(matches!(records[0].body, RecordBody::Header(_)));
        assert_eq!(records[3].body, RecordBody::Frame(vec![3; 7]));
        assert_eq!(records[3].host_time_us, 1002);
        assert!(reader.warnings().is_empty());
    }

    #[test]
    fn truncated_at_every_offset_keeps_every_complete_record() {
        let (bytes, _) = sample_log();
        let full: Vec<Record> = LogReader::new(&bytes[..]).collect();
        // Offsets where records end.
        let mut ends = vec![];
        let mut pos = MAGIC.len();
        while pos < bytes.len() {
            let len = u32::from_le_bytes(bytes[pos..pos + 4].try_into().unwrap()) as usize;
            pos += 8 + len;
            ends.push(pos);
        }
        for cut in 0..=bytes.len() {
            let mut reader = LogReader::new(&bytes[..cut]);
            let got: Vec<Record> = reader.by_ref().collect();
            let complete = ends.iter().filter(|&&e| e <= cut).count();
            assert_eq!(got, full[..complete], "cut at {cut}");
            let torn = cut > MAGIC.len() && !ends.contains(&cut);
            for w in reader.warnings() {
                assert!(
                    matches!(w, ReadWarning::TornTail { .. } | ReadWarning::NotALog),
                    "cut {cut}: {w}"
                );
            }
            assert_eq!(
                reader
                    .warnings()
                    .iter()
                    .any(|w| matches!(w, ReadWarning::TornTail { .. })),
                torn,
                "cut {cut}"
            );
        }
    }

    #[test]
    fn damage_in_the_middle_is_skipped_and_counted() {
        let (mut bytes, count) = sample_log();
        // Flip a byte inside the body of the fifth record.
        let mut pos = MAGIC.len();
        for _ in 0..4 {
            pos += 8 + u32::from_le_bytes(bytes[pos..pos + 4].try_into().unwrap()) as usize;
        }
        bytes[pos + 12] ^= 0x40;
        let mut reader = LogReader::new(&bytes[..]);
        let got: Vec<Record> = reader.by_ref().collect();
        assert_eq!(got.len(), count - 1);
        assert!(matches!(reader.warnings(), [ReadWarning::Damaged { .. }]));
    }

    proptest::proptest! {
        #[test]
        fn random_bytes_never_panic(bytes in proptest::collection::vec(proptest::num::u8::ANY, 0..4096)) {
            let mut reader = LogReader::new(&bytes[..]);
            let n = reader.by_ref().count();
            proptest::prop_assert!(n <= bytes.len() / 17 + 1);
        }

        #[test]
        fn garbage_after_the_magic_never_panics(tail in proptest::collection::vec(proptest::num::u8::ANY, 0..2048)) {
            let mut bytes = MAGIC.to_vec();
            bytes.extend_from_slice(&tail);
            let _ = LogReader::new(&bytes[..]).count();
        }
    }
}
