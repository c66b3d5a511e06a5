//! The recording format: an append-only file of checksummed records.
//!
//! ```text
//! file   = magic "GLEANLOG" , record*
//! record = body_len: u32 LE , crc32(body): u32 LE , body
//! body   = kind: u8 , host_time_us: u64 LE (since the Unix epoch) , payload
//! ```
//!
//! Kinds: `1` header (UTF-8 JSON: format version, host, start time, source),
//! `2` frame (the bytes of one frame as received, without the `0x00` delimiter),
//! `3` marker (one code byte and UTF-8 detail: port opened, port lost, stopped,
//! bytes discarded, note), `4` a part of a checkpoint of the analysis
//! ([`crate::analysis::checkpoint`]). The node's own `Hello` frames, recorded like any
//! other frame, make the file describe the node too. See `docs/log-format.md`.

mod format;
mod reader;
pub mod split;
mod writer;

pub use format::{LogHeader, MarkerKind, Record, RecordBody, FORMAT_VERSION, MAGIC, MAX_BODY_LEN};
pub(crate) use format::{BODY_PREFIX_LEN, KIND_CHECKPOINT, KIND_FRAME, RECORD_PREFIX_LEN};
pub(crate) use reader::{lend_body, parse_body};
pub use reader::{LogError, LogReader, ReadWarning, RecordRef};
pub use writer::{DiskFull, Follower, LogStore, LogWriter};

/// Microseconds since the Unix epoch, now.
pub fn now_us() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| u64::try_from(d.as_micros()).unwrap_or(u64::MAX))
        .unwrap_or(0)
}
