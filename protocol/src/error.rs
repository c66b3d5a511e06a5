//! Errors of framing and decoding.

/// Why a received frame was dropped. Each kind is counted by the [`Decoder`](crate::Decoder).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum FrameError {
    /// The bytes between two delimiters are not valid COBS.
    Cobs,
    /// Too short to hold a message and its CRC.
    TooShort,
    /// The CRC does not match: the frame was damaged on the way.
    Crc,
    /// More bytes than the largest valid frame before a delimiter.
    Oversize,
    /// The CRC matched but the message names an enum variant this side does not know
    /// (usually a newer protocol minor version).
    UnknownVariant,
    /// The CRC matched but the bytes are not a valid message.
    Malformed,
    /// The message decoded but bytes were left over after it.
    TrailingBytes,
}

impl FrameError {
    /// A one-line explanation for people.
    pub const fn describe(self) -> &'static str {
        match self {
            FrameError::Cobs => "invalid COBS framing",
            FrameError::TooShort => "frame too short for a message and CRC",
            FrameError::Crc => "CRC mismatch (damaged frame)",
            FrameError::Oversize => "frame longer than the largest message",
            FrameError::UnknownVariant => "unknown message kind (newer protocol?)",
            FrameError::Malformed => "malformed message",
            FrameError::TrailingBytes => "bytes left over after the message",
        }
    }
}

impl core::fmt::Display for FrameError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.describe())
    }
}

impl core::error::Error for FrameError {}

/// Why a message could not be encoded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum EncodeError {
    /// The output buffer is smaller than the encoded frame.
    BufferTooSmall,
}

impl core::fmt::Display for EncodeError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            EncodeError::BufferTooSmall => f.write_str("output buffer too small for the frame"),
        }
    }
}

impl core::error::Error for EncodeError {}
