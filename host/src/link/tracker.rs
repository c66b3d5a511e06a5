//! Link health from the frames received: sequence gaps are lost frames, a
//! new boot id or an uptime that runs backwards is a reboot, and a run of
//! framing errors with nothing good is most likely a wrong baud rate.

use gleaner_protocol::{
    open_frame, parse_uplink_any, FrameError, ProtocolVersion, Uplink, UplinkBody, VersionMismatch,
    OLDER_MAJORS, PROTOCOL_VERSION,
};
use serde::{Deserialize, Serialize};

/// Counters of a link.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct LinkStats {
    /// Frames decoded.
    pub frames: u64,
    /// Frames the node sent that never arrived (from sequence gaps).
    pub lost_frames: u64,
    /// Frames received twice (dropped the second time).
    pub duplicates: u64,
    /// Frames with a bad CRC.
    pub crc_errors: u64,
    /// Frames with bad COBS, too short or too long.
    pub framing_errors: u64,
    /// Frames with a good CRC that did not decode.
    pub decode_errors: u64,
    /// Node reboots seen.
    pub reboots: u64,
}

impl LinkStats {
    /// Every frame dropped for damage.
    pub fn damaged(&self) -> u64 {
        self.crc_errors + self.framing_errors + self.decode_errors
    }

    /// True when errors dominate: nearly always a wrong baud rate (or a
    /// device that is not a Gleaner node).
    pub fn likely_wrong_baud(&self) -> bool {
        self.damaged() >= 8 && self.damaged() > 4 * self.frames
    }
}

/// One received message, placed in its boot.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Tracked {
    /// 0 for the first boot seen, counting up.
    pub boot_index: u32,
    /// This frame starts a new boot.
    pub reboot: bool,
    /// Frames lost just before this one.
    pub lost_before: u64,
    /// The message.
    pub message: Uplink,
}

/// A frame opened (COBS undone, CRC checked) and read as the current
/// protocol before the tracker sees it, perhaps on another thread: the
/// tracker reads it again only when its boot speaks an older major.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadAhead<'a> {
    /// The frame's postcard bytes; None when its COBS, CRC or length was wrong.
    pub body: Option<&'a [u8]>,
    /// The message and the major it was read as (no preferred major), or why not.
    pub read: Result<(Uplink, u8), FrameError>,
}

impl<'a> ReadAhead<'a> {
    /// Opens and reads one encoded frame (without its delimiter), in place.
    pub fn open(encoded: &'a mut [u8]) -> Self {
        match open_frame(encoded) {
            Ok(body) => ReadAhead {
                body: Some(body),
                read: parse_uplink_any(body, None),
            },
            Err(error) => ReadAhead {
                body: None,
                read: Err(error),
            },
        }
    }
}

/// Follows sequence numbers, uptime and boot ids across frames.
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct LinkTracker {
    stats: LinkStats,
    boot_id: Option<u32>,
    boot_index: Option<u32>,
    last_seq: Option<u16>,
    last_uptime_ms: u64,
    /// The major protocol version of the present boot, from its `Hello`.
    boot_major: Option<u8>,
}

impl LinkTracker {
    /// A tracker that has seen nothing.
    pub fn new() -> Self {
        Self::default()
    }

    /// The major protocol version the node of the present boot speaks, once
    /// its `Hello` was seen (commands need it to be [`PROTOCOL_VERSION`]'s).
    pub fn boot_major(&self) -> Option<u8> {
        self.boot_major
    }

    /// True when commands can be sent to the node of the present boot.
    pub fn speaks_current_protocol(&self) -> bool {
        self.boot_major.is_none_or(|m| m == PROTOCOL_VERSION.major)
    }

    /// The counters so far.
    pub fn stats(&self) -> &LinkStats {
        &self.stats
    }

    /// Decodes one encoded frame (without its delimiter) and places it.
    /// Ok(None) for a duplicate; a protocol major-version mismatch is an error
    /// the caller must stop on.
    pub fn accept_encoded(&mut self, encoded: &[u8]) -> Result<Option<Tracked>, TrackError> {
        self.accept_in_place(&mut encoded.to_vec())
    }

    /// As [`Self::accept_encoded`], decoding in place (the bytes are overwritten).
    pub fn accept_in_place(&mut self, encoded: &mut [u8]) -> Result<Option<Tracked>, TrackError> {
        self.accept_ahead(ReadAhead::open(encoded))
    }

    /// Places a frame read ahead: the same result as [`Self::accept_encoded`]
    /// on its bytes.
    pub fn accept_ahead(&mut self, frame: ReadAhead<'_>) -> Result<Option<Tracked>, TrackError> {
        let older = self.boot_major.filter(|m| OLDER_MAJORS.contains(m));
        let decoded = match (frame.body, older) {
            // An older boot's layout is tried first, as a read preferring it
            // would have.
            (Some(body), Some(older))
                if frame
                    .read
                    .as_ref()
                    .map_or(true, |(_, major)| *major != older) =>
            {
                parse_uplink_any(body, Some(older))
            }
            _ => frame.read,
        };
        match decoded {
            Ok((message, _)) => self.accept(message),
            Err(error) => {
                self.count_error(error);
                Err(TrackError::Frame(error))
            }
        }
    }

    /// Counts a frame the decoder rejected.
    pub fn count_error(&mut self, error: FrameError) {
        match error {
            FrameError::Crc => self.stats.crc_errors += 1,
            FrameError::Cobs | FrameError::TooShort | FrameError::Oversize => {
                self.stats.framing_errors += 1
            }
            _ => self.stats.decode_errors += 1,
        }
    }

    /// Places a decoded message.
    pub fn accept(&mut self, message: Uplink) -> Result<Option<Tracked>, TrackError> {
        let mut reboot = false;
        if let UplinkBody::Hello(hello) = &message.body {
            // Protocols 1 and 2 are still read (converted); any other major must match ours.
            if !OLDER_MAJORS.contains(&hello.protocol.major) {
                ProtocolVersion::check_compatible(hello.protocol).map_err(TrackError::Version)?;
            }
            self.boot_major = Some(hello.protocol.major);
            if self.boot_id.is_some_and(|id| id != hello.boot_id) {
                reboot = true;
            }
            self.boot_id = Some(hello.boot_id);
        }
        if self.last_seq.is_some() && message.uptime_ms < self.last_uptime_ms {
            reboot = true;
        }
        let mut lost_before = 0;
        if reboot || self.boot_index.is_none() {
            let first = self.boot_index.is_none();
            self.boot_index = Some(self.boot_index.map_or(0, |b| b + 1));
            if !first {
                self.stats.reboots += 1;
                // Frames of the new boot before this one never arrived.
                lost_before = u64::from(message.seq);
            }
        } else if let Some(last) = self.last_seq {
            let gap = message.seq.wrapping_sub(last);
            if gap == 0 || gap >= 0x8000 {
                self.stats.duplicates += 1;
                return Ok(None);
            }
            lost_before = u64::from(gap - 1);
        }
        self.stats.lost_frames += lost_before;
        self.stats.frames += 1;
        self.last_seq = Some(message.seq);
        self.last_uptime_ms = message.uptime_ms;
        Ok(Some(Tracked {
            boot_index: self.boot_index.unwrap_or(0),
            reboot,
            lost_before,
            message,
        }))
    }
}

/// Why a frame was not placed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
pub enum TrackError {
    /// The frame itself was damaged.
    #[error("{0}")]
    Frame(FrameError),
    /// The node speaks another major protocol version.
    #[error("{0}")]
    Version(VersionMismatch),
}

#[cfg(test)]
mod tests {
    use super::*;
    use gleaner_protocol::{Outcome, Reply};

    fn msg(seq: u16, uptime_ms: u64) -> Uplink {
        Uplink {
            seq,
            uptime_ms,
            body: UplinkBody::Reply(Reply {
                request_id: 0,
                outcome: Outcome::Pong,
            }),
        }
    }

    #[test]
    fn gaps_are_lost_frames_and_wrap() {
        let mut t = LinkTracker::new();
        t.accept(msg(65_533, 10)).unwrap();
        t.accept(msg(65_535, 11)).unwrap();
        let tracked = t.accept(msg(2, 12)).unwrap().unwrap();
        assert_eq!(tracked.lost_before, 2); // 0 and 1
        assert_eq!(t.stats().lost_frames, 3);
        assert_eq!(t.accept(msg(2, 12)).unwrap(), None);
        assert_eq!(t.stats().duplicates, 1);
    }

    #[test]
    fn uptime_running_backwards_is_a_reboot() {
        let mut t = LinkTracker::new();
        t.accept(msg(10, 5_000)).unwrap();
        let tracked = t.accept(msg(3, 20)).unwrap().unwrap();
        assert!(tracked.reboot);
        assert_eq!(tracked.boot_index, 1);
        assert_eq!(tracked.lost_before, 3);
        assert_eq!(t.stats().reboots, 1);
    }

    #[test]
    fn many_errors_and_no_frames_suggest_a_wrong_baud_rate() {
        let mut t = LinkTracker::new();
        for _ in 0..10 {
            t.count_error(FrameError::Cobs);
        }
        assert!(t.stats().likely_wrong_baud());
        t.accept(msg(0, 0)).unwrap();
        assert!(t.stats().likely_wrong_baud());
    }
}
