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

/// The frame CRC of `bytes` (CRC-32/ISO-HDLC): the node's small table, or on
/// a host (feature `std`) crc32fast, which computes the same CRC.
pub fn frame_crc(bytes: &[u8]) -> u32 {
    #[cfg(feature = "std")]
    return crc32fast::hash(bytes);
    #[cfg(not(feature = "std"))]
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

/// A message type that can say whether undecodable bytes name a kind of
/// message it does not know (a newer protocol's appended variant).
pub trait Message: DeserializeOwned {
    /// Varints before the kind index in the postcard bytes.
    const FIELDS_BEFORE_KIND: usize;
    /// Number of kinds this side knows.
    const KNOWN_KINDS: u64;

    /// True when `body` names a kind index beyond [`Self::KNOWN_KINDS`].
    fn names_unknown_kind(body: &[u8]) -> bool {
        let mut rest = body;
        for _ in 0..Self::FIELDS_BEFORE_KIND {
            match read_varint(rest) {
                Some((_, used)) => rest = rest.get(used..).unwrap_or(&[]),
                None => return false,
            }
        }
        read_varint(rest).is_some_and(|(kind, _)| kind >= Self::KNOWN_KINDS)
    }
}

impl Message for Uplink {
    const FIELDS_BEFORE_KIND: usize = 2; // seq, uptime_ms
    const KNOWN_KINDS: u64 = crate::UplinkBody::KIND_NAMES.len() as u64;
}

impl Message for Downlink {
    const FIELDS_BEFORE_KIND: usize = 1; // request_id
    const KNOWN_KINDS: u64 = crate::Command::KIND_NAMES.len() as u64;
}

/// Reads one LEB128 varint of at most 10 bytes: `(value, bytes used)`.
fn read_varint(bytes: &[u8]) -> Option<(u64, usize)> {
    let mut value = 0u64;
    for (i, &byte) in bytes.iter().take(10).enumerate() {
        let shift = u32::try_from(i).ok()?.checked_mul(7)?;
        value |= u64::from(byte & 0x7F).checked_shl(shift)?;
        if byte & 0x80 == 0 {
            return Some((value, i.checked_add(1)?));
        }
    }
    None
}

/// Decodes one frame given the bytes between two delimiters (without the
/// delimiter). COBS is undone in place, so `encoded` is overwritten.
pub fn decode_frame<T: Message>(encoded: &mut [u8]) -> Result<T, FrameError> {
    parse_body(open_frame(encoded)?)
}

/// Undoes COBS in place and checks the CRC; returns the postcard bytes of
/// the message (without the CRC).
pub fn open_frame(encoded: &mut [u8]) -> Result<&[u8], FrameError> {
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
    Ok(body)
}

/// Parses the postcard bytes of one message, which must be used up exactly.
pub fn parse_body<T: Message>(body: &[u8]) -> Result<T, FrameError> {
    let mut parser = postcard::Deserializer::from_bytes(body);
    let message = match T::deserialize(&mut parser) {
        Ok(message) => message,
        Err(_) if T::names_unknown_kind(body) => return Err(FrameError::UnknownVariant),
        Err(_) => return Err(FrameError::Malformed),
    };
    match parser.finalize() {
        Ok([]) => Ok(message),
        _ => Err(FrameError::TrailingBytes),
    }
}

#[cfg(all(test, feature = "std"))]
mod tests {
    use super::*;

    #[test]
    fn the_hosts_crc_is_the_nodes_crc_at_every_length() {
        // The host computes the frame CRC another way (crc32fast); both must
        // give the catalogue's CRC-32/ISO-HDLC for any bytes, also lengths
        // around the fast path's 64-byte blocks.
        let bytes: std::vec::Vec<u8> = (0..300u32).map(|i| (i * 151 + 7) as u8).collect();
        for len in 0..bytes.len() {
            let part = &bytes[..len];
            assert_eq!(frame_crc(part), FRAME_CRC.checksum(part), "length {len}");
        }
    }
}
