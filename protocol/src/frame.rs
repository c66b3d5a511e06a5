//! Frame encoding and decoding: `COBS(postcard(message) ++ CRC-32) ++ 0x00`.

use crc::{Crc, CRC_32_ISO_HDLC};
use postcard::experimental::max_size::MaxSize;
use postcard::ser_flavors::{crc::CrcModifier, Cobs, Slice};
use serde::{de::DeserializeOwned, Serialize};

use crate::error::{EncodeError, FrameError};
use crate::{Downlink, Uplink};

/// CRC-32/ISO-HDLC (poly 0x04C11DB7, reflected, init and xorout 0xFFFFFFFF).
pub(crate) const FRAME_CRC: Crc<u32> = Crc::<u32>::new(&CRC_32_ISO_HDLC);

/// Bytes of CRC after the postcard bytes.
const CRC_LEN: usize = 4;

/// The largest frame (with delimiter) for a message of at most `max_message_len`
/// postcard bytes.
pub const fn max_frame_len(max_message_len: usize) -> usize {
    cobs::max_encoding_length(max_message_len.saturating_add(CRC_LEN)).saturating_add(1)
}

/// Largest postcard encoding of an [`Uplink`] plus its CRC.
pub const MAX_UPLINK_PAYLOAD_LEN: usize = Uplink::POSTCARD_MAX_SIZE.saturating_add(CRC_LEN);
/// Largest uplink frame on the wire, delimiter included.
pub const MAX_UPLINK_FRAME_LEN: usize = max_frame_len(Uplink::POSTCARD_MAX_SIZE);
/// Largest downlink frame on the wire, delimiter included.
pub const MAX_DOWNLINK_FRAME_LEN: usize = max_frame_len(Downlink::POSTCARD_MAX_SIZE);

/// The frame CRC of `bytes` (CRC-32/ISO-HDLC).
pub fn frame_crc(bytes: &[u8]) -> u32 {
    FRAME_CRC.checksum(bytes)
}

/// Encodes `message` as one complete frame (ending in the `0x00` delimiter) into
/// `buf` and returns the used part. A too-small buffer is an error.
pub fn encode_frame<'a, T: Serialize>(
    message: &T,
    buf: &'a mut [u8],
) -> Result<&'a [u8], EncodeError> {
    let cobs = Cobs::try_new(Slice::new(buf)).map_err(|_| EncodeError::BufferTooSmall)?;
    let flavor = CrcModifier::new(cobs, FRAME_CRC.digest());
    let used = postcard::serialize_with_flavor(message, flavor)
        .map_err(|_| EncodeError::BufferTooSmall)?;
    Ok(used)
}

/// Decodes one frame given the bytes between two delimiters (without the
/// delimiter). COBS is undone in place, so `encoded` is overwritten.
pub fn decode_frame<T: DeserializeOwned>(encoded: &mut [u8]) -> Result<T, FrameError> {
    let len = cobs::decode_in_place(encoded).map_err(|_| FrameError::Cobs)?;
    let decoded = encoded.get(..len).ok_or(FrameError::Cobs)?;
    let body_len = len.checked_sub(CRC_LEN).ok_or(FrameError::TooShort)?;
    if body_len == 0 {
        return Err(FrameError::TooShort);
    }
    let (body, crc_bytes) = decoded.split_at(body_len);
    let mut sent = [0u8; CRC_LEN];
    sent.copy_from_slice(crc_bytes);
    if u32::from_le_bytes(sent) != frame_crc(body) {
        return Err(FrameError::Crc);
    }
    match postcard::take_from_bytes::<T>(body) {
        Ok((message, [])) => Ok(message),
        Ok(_) => Err(FrameError::TrailingBytes),
        Err(postcard::Error::DeserializeBadEnum) => Err(FrameError::UnknownVariant),
        Err(_) => Err(FrameError::Malformed),
    }
}
