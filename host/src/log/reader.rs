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

/// A streaming log reader; an iterator of records.
pub struct LogReader<R> {
    input: R,
    buf: Vec<u8>,
    start: usize,
    end: usize,
    offset: u64,
    eof: bool,
    checked_magic: bool,
    damaged_from: Option<(u64, u64)>,
    warnings: Vec<ReadWarning>,
    io_error: Option<std::io::Error>,
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
            eof: false,
            checked_magic: false,
            damaged_from: None,
            warnings: Vec::new(),
            io_error: None,
        }
    }

    /// Warnings so far (damage skipped, torn tail).
    pub fn warnings(&self) -> &[ReadWarning] {
        &self.warnings
    }

    /// An I/O error that ended reading early, if any.
    pub fn take_io_error(&mut self) -> Option<std::io::Error> {
        self.io_error.take()
    }

    /// Bytes consumed so far.
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

    fn parse(body: &[u8]) -> Option<Record> {
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
}

impl<R: Read> Iterator for LogReader<R> {
    type Item = Record;

    fn next(&mut self) -> Option<Record> {
        if !self.checked_magic {
            self.checked_magic = true;
            let have = self.fill(MAGIC.len());
            if have >= MAGIC.len() && &self.buf[self.start..self.start + MAGIC.len()] == MAGIC {
                self.consume(MAGIC.len());
            } else if have > 0 {
                self.warnings.push(ReadWarning::NotALog);
                if have < MAGIC.len() {
                    self.consume(have);
                    return None;
                }
            }
        }
        loop {
            let have = self.fill(RECORD_PREFIX_LEN);
            if have == 0 {
                self.end_damage();
                return None;
            }
            if have < RECORD_PREFIX_LEN {
                self.end_damage();
                self.warnings.push(ReadWarning::TornTail {
                    offset: self.offset,
                    bytes: have as u64,
                });
                self.consume(have);
                return None;
            }
            let head = &self.buf[self.start..self.start + RECORD_PREFIX_LEN];
            let len = u32::from_le_bytes([head[0], head[1], head[2], head[3]]) as usize;
            let crc = u32::from_le_bytes([head[4], head[5], head[6], head[7]]);
            if !(BODY_PREFIX_LEN..=MAX_BODY_LEN).contains(&len) {
                self.skip_damaged_byte();
                continue;
            }
            let have = self.fill(RECORD_PREFIX_LEN + len);
            if have < RECORD_PREFIX_LEN + len {
                // Either a torn tail or a damaged length near the end: a torn
                // tail is the common case and loses only this record.
                if self.damaged_from.is_none() {
                    self.warnings.push(ReadWarning::TornTail {
                        offset: self.offset,
                        bytes: have as u64,
                    });
                    self.consume(have);
                    return None;
                }
                self.skip_damaged_byte();
                continue;
            }
            let body =
                &self.buf[self.start + RECORD_PREFIX_LEN..self.start + RECORD_PREFIX_LEN + len];
            if frame_crc(body) != crc {
                self.skip_damaged_byte();
                continue;
            }
            let parsed = Self::parse(body);
            match parsed {
                Some(record) => {
                    self.end_damage();
                    self.consume(RECORD_PREFIX_LEN + len);
                    return Some(record);
                }
                None => self.skip_damaged_byte(),
            }
        }
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
