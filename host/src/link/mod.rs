//! Talking to a node over a serial link: finding and opening ports with
//! errors that say what to do, and tracking the link's health (lost frames,
//! reboots, errors) from the frames received.

pub mod ports;
pub mod script;
pub mod tracker;

pub use ports::{list_ports, open_port, PortInfo, DEFAULT_BAUD};
pub use tracker::{LinkStats, LinkTracker, ReadAhead, Tracked};

/// The wire bytes of `command` sent as request `request_id` (one COBS frame
/// with its terminating zero), for every host-side client of a node.
pub fn downlink_frame(
    request_id: u16,
    command: gleaner_protocol::Command,
) -> anyhow::Result<Vec<u8>> {
    let mut buf = [0u8; gleaner_protocol::MAX_DOWNLINK_FRAME_LEN];
    let request = gleaner_protocol::Downlink {
        request_id,
        command,
    };
    gleaner_protocol::encode_frame(&request, &mut buf)
        .map(<[u8]>::to_vec)
        .map_err(|e| anyhow::anyhow!("cannot encode the command: {e:?}"))
}
