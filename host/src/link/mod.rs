//! Talking to a node over a serial link: finding and opening ports with
//! errors that say what to do, tracking the link's health (lost frames,
//! reboots, errors) from the frames received, and the node's clients: a
//! blocking [`Session`] and a [`script::CommandScript`] run while recording,
//! both numbering their requests with [`RequestIds`].

pub mod ports;
pub mod script;
pub mod session;
pub mod tracker;

pub use ports::{list_ports, open_port, PortError, PortInfo, DEFAULT_BAUD};
pub use session::{explain, Session};
pub use tracker::{LinkStats, LinkTracker, ReadAhead, Tracked};

/// Request id of the `Hello` a recorder asks for on every connect (the node
/// echoes it); never given to another command.
pub const HELLO_REQUEST_ID: u16 = 0xFFF0;

/// Request ids for one client's commands: 1, 2, ... wrapping round, never 0
/// nor [`HELLO_REQUEST_ID`], so a reply is matched to its command.
#[derive(Debug, Clone)]
pub struct RequestIds {
    next: u16,
}

impl Default for RequestIds {
    fn default() -> Self {
        RequestIds { next: 1 }
    }
}

impl RequestIds {
    /// The id for the next command.
    pub fn next_id(&mut self) -> u16 {
        loop {
            let id = self.next;
            self.next = self.next.wrapping_add(1).max(1);
            if id != HELLO_REQUEST_ID {
                return id;
            }
        }
    }
}

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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn request_ids_wrap_round_and_never_take_zero_or_the_recorders_hello() {
        let mut ids = RequestIds::default();
        assert_eq!((ids.next_id(), ids.next_id()), (1, 2));
        let mut ids = RequestIds {
            next: HELLO_REQUEST_ID - 1,
        };
        assert_eq!(ids.next_id(), HELLO_REQUEST_ID - 1);
        assert_eq!(
            ids.next_id(),
            HELLO_REQUEST_ID + 1,
            "the Hello's id is skipped"
        );
        let mut ids = RequestIds { next: u16::MAX };
        assert_eq!(
            (ids.next_id(), ids.next_id()),
            (u16::MAX, 1),
            "0 is skipped"
        );
    }
}
