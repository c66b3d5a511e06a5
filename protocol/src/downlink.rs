//! Host-to-node messages.

use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use crate::config::NodeConfig;

/// One command from the host, tagged with an id the node echoes in its `Reply`.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Downlink {
    /// Chosen by the host; echoed in the matching `Reply`.
    pub request_id: u16,
    /// What to do.
    pub command: Command,
}

/// What the host can ask of a node. Append new variants at the end only.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Command {
    /// Answered with `Outcome::Pong`.
    Ping,
    /// Answered with a `Hello`, then `Outcome::Accepted`.
    GetInfo,
    /// Validate and apply a configuration; a bad one is refused and the old stays.
    SetConfig(NodeConfig),
    /// Zero the energy totals kept since the last reset.
    ResetEnergy,
    /// Stream this many samples at the full sampling rate.
    StartBurst {
        /// Number of samples, 1 to [`crate::limits::MAX_BURST_SAMPLES`].
        samples: u32,
    },
}

impl Command {
    /// Short names of the commands, in wire order; their number is the number of kinds.
    pub const KIND_NAMES: [&'static str; 5] = [
        "ping",
        "get-info",
        "set-config",
        "reset-energy",
        "start-burst",
    ];
}
