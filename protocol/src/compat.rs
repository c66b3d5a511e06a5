//! Reading frames of every protocol major a host may meet in a log: the
//! current one, and protocols 1 to 3 converted ([`crate::v1`], [`crate::v2`],
//! [`crate::v3`]).

use crate::frame::{open_frame, parse_body};
use crate::{FrameError, Uplink, UplinkBody, PROTOCOL_VERSION};

/// The older majors still read, oldest first.
pub const OLDER_MAJORS: [u8; 3] = [1, 2, 3];

/// Decodes an uplink body in the layout of the older protocol `major`,
/// converted, when it reads consistently as that layout.
fn parse_older(major: u8, body: &[u8]) -> Result<(Uplink, u8), FrameError> {
    let message: Uplink = match major {
        1 => parse_body::<crate::v1::Uplink>(body)?.into(),
        2 => parse_body::<crate::v2::Uplink>(body)?.into(),
        _ => parse_body::<crate::v3::Uplink>(body)?.into(),
    };
    if consistent(&message, major) {
        Ok((message, major))
    } else {
        Err(FrameError::Malformed)
    }
}

/// A `Hello` names its own version first, at the same place in every
/// layout: one read in the layout of `major` must say `major` (a current
/// layout also passes a newer one, so the caller can say which versions
/// differ). Other messages carry no version and pass.
fn consistent(message: &Uplink, major: u8) -> bool {
    match &message.body {
        UplinkBody::Hello(h) if major == PROTOCOL_VERSION.major => {
            h.protocol.major >= PROTOCOL_VERSION.major
        }
        UplinkBody::Hello(h) => h.protocol.major == major,
        _ => true,
    }
}

/// Decodes an uplink frame of any protocol this crate reads: the current
/// layout, or an older protocol's converted. `prefer_major` (from the boot's
/// `Hello`, when known) says which to try first. Returns the message and the
/// major version it was read as. COBS is undone in place.
pub fn decode_uplink_any(
    encoded: &mut [u8],
    prefer_major: Option<u8>,
) -> Result<(Uplink, u8), FrameError> {
    parse_uplink_any(open_frame(encoded)?, prefer_major)
}

/// As [`decode_uplink_any`], for the postcard bytes of a frame already
/// opened ([`crate::open_frame`]). A read with `prefer_major` `None` may be
/// made ahead of time; it needs repeating only when the boot turns out to
/// speak an older major and the read gave another one.
pub fn parse_uplink_any(body: &[u8], prefer_major: Option<u8>) -> Result<(Uplink, u8), FrameError> {
    if let Some(major) = prefer_major.filter(|m| OLDER_MAJORS.contains(m)) {
        if let Ok(found) = parse_older(major, body) {
            return Ok(found);
        }
    }
    // The current layout first, returned as directly as it can be: most
    // frames of most logs take this path.
    let current = PROTOCOL_VERSION.major;
    let error = match parse_body::<Uplink>(body) {
        Ok(message) if consistent(&message, current) => return Ok((message, current)),
        Ok(_) => FrameError::Malformed,
        // A newer kind than ours is reported as such, not retried as an older one.
        Err(FrameError::UnknownVariant) => return Err(FrameError::UnknownVariant),
        Err(error) => error,
    };
    OLDER_MAJORS
        .iter()
        .rev()
        .find_map(|&major| parse_older(major, body).ok())
        .ok_or(error)
}
