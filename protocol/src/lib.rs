//! The Gleaner wire protocol: everything that crosses the serial line between a
//! node and the host.
//!
//! * [`Uplink`] messages go from the node to the host: [`Hello`], [`Report`],
//!   [`Event`], [`SampleBlock`], [`Reply`], [`LoadEvent`] and [`SlotHarvest`],
//!   each wrapped with a wrapping sequence number and the node's uptime.
//! * [`Downlink`] messages go from the host to the node: a request id and a
//!   [`Command`].
//!
//! # Framing
//!
//! A frame is `COBS(postcard(message) ++ CRC-32) ++ 0x00`. The CRC is
//! CRC-32/ISO-HDLC from the catalogue of parametrised CRC algorithms (check value
//! `0xCBF43926` for `"123456789"`), sent little-endian after the postcard bytes.
//! The largest frame of each direction is known at compile time
//! ([`MAX_UPLINK_FRAME_LEN`], [`MAX_DOWNLINK_FRAME_LEN`]) and every buffer is
//! sized from it.
//!
//! # Compatibility rule
//!
//! postcard encodes enum variants by index and struct fields by position, so the
//! wire format is an API:
//! * a change that old decoders can still read (a new enum variant appended at
//!   the end of an enum) bumps [`PROTOCOL_VERSION`]'s minor number;
//! * any other change (a field added, removed or reordered, a variant moved)
//!   bumps the major number. Hosts refuse a node whose major version differs
//!   from their own ([`ProtocolVersion::check_compatible`]), but read recorded
//!   protocol 1 to 3 frames through [`v1`], [`v2`] and [`v3`] ([`decode_uplink_any`]).
//!
//! Protocol 2 added the node's identity and name, the load's
//! supply thresholds, load events, the brown-out forecast with averaged load
//! and net power, hourly harvest slots with their predictions, and the trigger values of transitions.
//! Protocol 3 added what the node knows of its converter ([`ConverterModel`]:
//! its MPPT fraction and whether it regulates its output) to the configuration.
//! Protocol 4 added the current the load-shed pin switches off
//! (`NodeConfig::shed_load_na`), so the brown-out forecast can count the
//! shedding the node will do.
//!
//! Golden-byte tests pin the encoding of every message kind.
//!
//! # Example
//!
//! ```
//! use gleaner_protocol::{encode_frame, Decoder, Uplink, UplinkBody, Reply, Outcome,
//!     MAX_UPLINK_FRAME_LEN};
//!
//! let message = Uplink { seq: 7, uptime_ms: 1_500, body: UplinkBody::Reply(Reply {
//!     request_id: 3, outcome: Outcome::Pong }) };
//! let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
//! let frame = encode_frame(&message, &mut buf).unwrap();
//!
//! // Feed the bytes in arbitrary chunks, as a serial port delivers them.
//! let mut decoder = Decoder::<Uplink, MAX_UPLINK_FRAME_LEN>::new();
//! let mut received = None;
//! for chunk in frame.chunks(3) {
//!     decoder.feed(chunk, |result| received = Some(result));
//! }
//! assert_eq!(received, Some(Ok(message)));
//! ```
#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::indexing_slicing,
        clippy::arithmetic_side_effects,
        clippy::cast_possible_truncation
    )
)]

mod compat;
mod config;
mod decoder;
mod downlink;
mod error;
mod frame;
pub mod limits;
mod uplink;
pub mod v1;
pub mod v2;
pub mod v3;
mod version;

pub use compat::{decode_uplink_any, parse_uplink_any, OLDER_MAJORS};
pub use config::{
    Calibration, Channel, ChannelCal, ConverterModel, NodeConfig, NodeName, Thresholds,
    NODE_NAME_LEN,
};
pub use decoder::{Decoder, DecoderStats, FrameSplitter};
pub use downlink::{Command, Downlink};
pub use error::{EncodeError, FrameError};
pub use frame::{
    decode_frame, encode_frame, frame_crc, max_frame_len, open_frame, parse_body, Message,
    MAX_DOWNLINK_FRAME_LEN, MAX_UPLINK_FRAME_LEN, MAX_UPLINK_PAYLOAD_LEN,
};
pub use limits::{MAX_BURST_SAMPLES, MAX_SHED_LOAD_NA};
pub use uplink::{
    ChannelStats, ConfigSource, ConverterState, EnergyTotals, Event, Hello, LoadCause, LoadEvent,
    Outcome, Refusal, Reply, Report, ReportFlags, Sample, SampleBlock, SlotHarvest, StateDurations,
    TransitionCause, Uplink, UplinkBody, SAMPLES_PER_BLOCK,
};
pub use version::{FirmwareVersion, ProtocolVersion, VersionMismatch, PROTOCOL_VERSION};

/// Re-exported so users can bound generic code by postcard's compile-time size.
pub use postcard::experimental::max_size::MaxSize;
