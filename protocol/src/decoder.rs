//! The streaming decoder: any bytes in, whole messages or typed errors out.

use core::marker::PhantomData;

use crate::error::FrameError;
use crate::frame::{decode_frame, Message};

/// Splits a byte stream at `0x00` delimiters into encoded frames of at most `N`
/// bytes (`N` is the largest frame, delimiter included, so `N - 1` bytes of body).
///
/// Bytes of an over-long frame are dropped up to the next delimiter, which then
/// reports [`FrameError::Oversize`]; the splitter is in step again right after.
#[derive(Debug, Clone)]
pub struct FrameSplitter<const N: usize> {
    buf: [u8; N],
    len: usize,
    overflowed: bool,
}

impl<const N: usize> Default for FrameSplitter<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> FrameSplitter<N> {
    /// An empty splitter.
    pub const fn new() -> Self {
        FrameSplitter {
            buf: [0; N],
            len: 0,
            overflowed: false,
        }
    }

    /// Takes one byte. At a delimiter that closes a non-empty frame, returns the
    /// frame's encoded bytes (valid until the next call) or `Oversize`.
    /// Empty frames (repeated delimiters) are skipped silently.
    pub fn push(&mut self, byte: u8) -> Option<Result<&mut [u8], FrameError>> {
        if byte == 0 {
            let len = core::mem::take(&mut self.len);
            if core::mem::take(&mut self.overflowed) {
                return Some(Err(FrameError::Oversize));
            }
            if len == 0 {
                return None;
            }
            return self.buf.get_mut(..len).map(Ok);
        }
        if self.overflowed {
            return None;
        }
        // Keep one place for the delimiter so a frame never exceeds N on the wire.
        match self.buf.get_mut(self.len) {
            Some(slot) if self.len.saturating_add(1) < N => {
                *slot = byte;
                self.len = self.len.saturating_add(1);
            }
            _ => {
                self.overflowed = true;
                self.len = 0;
            }
        }
        None
    }

    /// Bytes held of a frame not yet closed.
    pub const fn pending_len(&self) -> usize {
        self.len
    }

    /// Forgets a partly received frame (for example after a reconnect).
    pub fn clear(&mut self) {
        self.len = 0;
        self.overflowed = false;
    }
}

/// Counts of what a [`Decoder`] has seen.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DecoderStats {
    /// Bytes fed.
    pub bytes: u64,
    /// Messages decoded.
    pub frames: u64,
    /// Frames with bad COBS.
    pub cobs_errors: u32,
    /// Frames too short for a message.
    pub too_short: u32,
    /// Frames whose CRC did not match.
    pub crc_errors: u32,
    /// Frames longer than the largest message.
    pub oversize: u32,
    /// Frames naming an unknown enum variant.
    pub unknown_variant: u32,
    /// Frames with a matching CRC but an invalid message.
    pub malformed: u32,
    /// Frames with bytes after the message.
    pub trailing_bytes: u32,
}

impl DecoderStats {
    /// Counts one error.
    pub fn count(&mut self, error: FrameError) {
        let counter = match error {
            FrameError::Cobs => &mut self.cobs_errors,
            FrameError::TooShort => &mut self.too_short,
            FrameError::Crc => &mut self.crc_errors,
            FrameError::Oversize => &mut self.oversize,
            FrameError::UnknownVariant => &mut self.unknown_variant,
            FrameError::Malformed => &mut self.malformed,
            FrameError::TrailingBytes => &mut self.trailing_bytes,
        };
        *counter = counter.saturating_add(1);
    }

    /// All dropped frames, whatever the reason.
    pub const fn errors(&self) -> u32 {
        self.cobs_errors
            .saturating_add(self.too_short)
            .saturating_add(self.crc_errors)
            .saturating_add(self.oversize)
            .saturating_add(self.unknown_variant)
            .saturating_add(self.malformed)
            .saturating_add(self.trailing_bytes)
    }
}

/// A streaming decoder of messages of type `T` in frames of at most `N` bytes.
/// Never allocates, never panics, counts every error kind and resynchronises
/// at the next delimiter.
#[derive(Debug, Clone)]
pub struct Decoder<T, const N: usize> {
    splitter: FrameSplitter<N>,
    stats: DecoderStats,
    _message: PhantomData<fn() -> T>,
}

impl<T: Message, const N: usize> Default for Decoder<T, N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<T: Message, const N: usize> Decoder<T, N> {
    /// A decoder in its initial state.
    pub const fn new() -> Self {
        Decoder {
            splitter: FrameSplitter::new(),
            stats: zero_stats(),
            _message: PhantomData,
        }
    }

    /// Takes one byte; returns a result when it closes a frame.
    pub fn push_byte(&mut self, byte: u8) -> Option<Result<T, FrameError>> {
        self.stats.bytes = self.stats.bytes.saturating_add(1);
        let result = match self.splitter.push(byte)? {
            Ok(encoded) => decode_frame::<T>(encoded),
            Err(error) => Err(error),
        };
        match &result {
            Ok(_) => self.stats.frames = self.stats.frames.saturating_add(1),
            Err(error) => self.stats.count(*error),
        }
        Some(result)
    }

    /// Feeds a chunk of any length; calls `on_result` for each frame it closes.
    pub fn feed(&mut self, bytes: &[u8], mut on_result: impl FnMut(Result<T, FrameError>)) {
        for &byte in bytes {
            if let Some(result) = self.push_byte(byte) {
                on_result(result);
            }
        }
    }

    /// The counters so far.
    pub const fn stats(&self) -> &DecoderStats {
        &self.stats
    }

    /// Forgets a partly received frame; counters are kept.
    pub fn clear(&mut self) {
        self.splitter.clear();
    }
}

const fn zero_stats() -> DecoderStats {
    DecoderStats {
        bytes: 0,
        frames: 0,
        cobs_errors: 0,
        too_short: 0,
        crc_errors: 0,
        oversize: 0,
        unknown_variant: 0,
        malformed: 0,
        trailing_bytes: 0,
    }
}
