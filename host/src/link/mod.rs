//! Talking to a node over a serial link: finding and opening ports with
//! errors that say what to do, and tracking the link's health (lost frames,
//! reboots, errors) from the frames received.

pub mod ports;
pub mod script;
pub mod tracker;

pub use ports::{list_ports, open_port, PortInfo, DEFAULT_BAUD};
pub use tracker::{LinkStats, LinkTracker, Tracked};
