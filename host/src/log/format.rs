//! Record layout shared by the writer and the reader.

use serde::{Deserialize, Serialize};

/// First bytes of every log file.
pub const MAGIC: &[u8; 8] = b"GLEANLOG";
/// Version of the layout in this module, written in the header.
pub const FORMAT_VERSION: u32 = 1;
/// Largest record body accepted; a reader never allocates more per record.
pub const MAX_BODY_LEN: usize = 64 * 1024;
/// Bytes before the body: length and CRC.
pub const RECORD_PREFIX_LEN: usize = 8;
/// Bytes of kind and time at the start of every body.
pub const BODY_PREFIX_LEN: usize = 9;

pub(crate) const KIND_HEADER: u8 = 1;
pub(crate) const KIND_FRAME: u8 = 2;
pub(crate) const KIND_MARKER: u8 = 3;
/// A part of a checkpoint of the analysis ([`crate::analysis::checkpoint`]).
pub(crate) const KIND_CHECKPOINT: u8 = 4;

/// The header record: what wrote the file, where and when.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct LogHeader {
    /// [`FORMAT_VERSION`] of the writer.
    pub format_version: u32,
    /// Program and version that wrote the file.
    pub writer: String,
    /// Host name of the recording computer.
    pub host: String,
    /// Start of recording, RFC 3339.
    pub started: String,
    /// The port or virtual source recorded.
    pub source: String,
}

/// The kinds of marker.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum MarkerKind {
    /// The port was opened (start, or reconnect after a loss).
    PortOpened,
    /// The port went away: a gap starts.
    PortLost,
    /// Recording stopped cleanly.
    Stopped,
    /// Bytes were discarded (an over-long frame); detail says how many.
    Discarded,
    /// Free text.
    Note,
    /// A code this reader does not know (from a newer writer).
    Unknown(u8),
}

impl MarkerKind {
    pub(crate) fn code(self) -> u8 {
        match self {
            MarkerKind::PortOpened => 1,
            MarkerKind::PortLost => 2,
            MarkerKind::Stopped => 3,
            MarkerKind::Discarded => 4,
            MarkerKind::Note => 5,
            MarkerKind::Unknown(code) => code,
        }
    }

    pub(crate) fn from_code(code: u8) -> Self {
        match code {
            1 => MarkerKind::PortOpened,
            2 => MarkerKind::PortLost,
            3 => MarkerKind::Stopped,
            4 => MarkerKind::Discarded,
            5 => MarkerKind::Note,
            other => MarkerKind::Unknown(other),
        }
    }
}

/// What a record holds.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum RecordBody {
    /// The file header.
    Header(LogHeader),
    /// A frame as received (COBS bytes without the delimiter).
    Frame(Vec<u8>),
    /// A marker.
    Marker {
        /// Which.
        kind: MarkerKind,
        /// Details for people.
        detail: String,
    },
    /// A record kind this reader does not know (from a newer writer).
    Unknown(u8),
}

/// One record with its host receive time.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Record {
    /// Microseconds since the Unix epoch when the host received or wrote it.
    pub host_time_us: u64,
    /// The content.
    pub body: RecordBody,
}
