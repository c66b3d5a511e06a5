//! Protocol and firmware version numbers.

use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

/// The protocol version this crate speaks. See the crate docs for the rule.
pub const PROTOCOL_VERSION: ProtocolVersion = ProtocolVersion { major: 4, minor: 0 };

/// A protocol version: hosts and nodes interoperate when the major numbers match.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ProtocolVersion {
    /// Bumped on any change old decoders cannot read.
    pub major: u8,
    /// Bumped on appended enum variants.
    pub minor: u8,
}

/// The two versions of a refused pairing, ours and the peer's.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct VersionMismatch {
    /// The version this side speaks.
    pub ours: ProtocolVersion,
    /// The version the peer announced.
    pub theirs: ProtocolVersion,
}

impl ProtocolVersion {
    /// Ok when a peer announcing `theirs` can be understood by this crate.
    pub fn check_compatible(theirs: ProtocolVersion) -> Result<(), VersionMismatch> {
        if theirs.major == PROTOCOL_VERSION.major {
            Ok(())
        } else {
            Err(VersionMismatch {
                ours: PROTOCOL_VERSION,
                theirs,
            })
        }
    }
}

impl core::fmt::Display for ProtocolVersion {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        write!(f, "{}.{}", self.major, self.minor)
    }
}

impl core::fmt::Display for VersionMismatch {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        write!(
            f,
            "the node speaks protocol {} but this host speaks {}; update whichever is older",
            self.theirs, self.ours
        )
    }
}

impl core::error::Error for VersionMismatch {}

/// The firmware's semantic version, as reported in `Hello`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FirmwareVersion {
    /// Major number.
    pub major: u8,
    /// Minor number.
    pub minor: u8,
    /// Patch number.
    pub patch: u8,
}

impl core::fmt::Display for FirmwareVersion {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        write!(f, "{}.{}.{}", self.major, self.minor, self.patch)
    }
}
