//! The Gleaner node firmware library.
//!
//! One [`Node`] ties together everything that runs on the node's
//! microcontroller beside the step-up converter:
//!
//! * [`calibration`]: raw ADC counts to microvolts and nanoamps, with clipping flags;
//! * [`front_end`]: the measuring front-end described once, per channel, and its calibration;
//! * [`meter`]: power, lossless energy accumulators and efficiency as an energy ratio;
//! * [`cutoff`]: the debounced cutoff state machine with a cause for each transition;
//! * [`day_end`]: the hour the harvesting day ends (a sunset), learned from the nights seen;
//! * [`forecast`]: time to input cutoff from the input's trends, and the averaged
//!   load current and converter power;
//! * [`brownout`]: time to the load's brown-out, counting the harvest still coming in,
//!   the input cutoff and the shedding to come;
//! * [`harvest_profile`]: tomorrow's harvest per hour of the day (EWMA and WCMA);
//! * [`interval`]: per-report aggregation (min / mean / max, time in each state);
//! * [`config`]: defaults and validation of the configuration the host may send;
//! * [`config_store`]: two alternating records that survive a power cut mid-write;
//! * [`flash_slots`]: those two records on two erase pages of a NOR flash;
//! * [`load_shed`]: the output pin that drops non-essential load when brown-out is near;
//! * [`load_watch`]: whether the load has power, and why it lost it;
//! * [`sampler`]: the small trait a board implements for its ADC.
//!
//! Hardware enters only through traits (embedded-hal `OutputPin`, embedded-io
//! `Write`, embedded-storage `Storage`, [`sampler::Sampler`]), so the same code
//! runs on a board, under QEMU and in the host's virtual node.
//!
//! # Example
//!
//! ```
//! use gleaner_firmware::{Node, NodeParts, RawSample, config::default_config};
//! use gleaner_firmware::config_store::MemoryStorage;
//! use gleaner_firmware::load_shed::NoPin;
//! use gleaner_protocol::MAX_UPLINK_FRAME_LEN;
//!
//! let mut node = Node::new(NodeParts {
//!     config: default_config(),
//!     config_source: gleaner_protocol::ConfigSource::Defaults,
//!     node_id: 0x00C0_FFEE,
//!     boot_id: 42,
//!     sample_period_us: 10_000,
//!     load_pin: NoPin,
//!     storage: MemoryStorage::<512>::new(),
//! });
//! // 1.2 s of samples at 100 Hz: counts as a 12-bit ADC would give them.
//! for i in 0..120u64 {
//!     node.on_sample(i * 10_000, &RawSample { input_voltage: 1200, input_current: 40,
//!         output_voltage: 1400, output_current: 300 });
//! }
//! let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
//! let mut frames = 0;
//! while let Some(frame) = node.next_frame(&mut buf) {
//!     assert_eq!(frame.last(), Some(&0)); // every frame ends in the delimiter
//!     frames += 1;
//! }
//! assert!(frames >= 2); // the Hello and at least one Report
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

pub mod brownout;
pub mod calibration;
pub mod config;
pub mod config_store;
pub mod cutoff;
pub mod day_end;
pub mod flash_slots;
pub mod forecast;
pub mod front_end;
pub mod harvest_profile;
pub mod interval;
pub mod load_shed;
pub mod load_watch;
pub mod meter;
mod node;
pub mod sampler;
mod wide;

pub use calibration::RawSample;
pub use node::{Node, NodeParts, NodeStats, FIRMWARE_VERSION, OUTBOX_LEN};
