//! Any bytes into both streaming decoders: never a panic, and every message
//! yielded re-encodes to a frame that decodes to itself.
#![no_main]

use gleaner_protocol::{encode_frame, Decoder, Downlink, Uplink, MAX_DOWNLINK_FRAME_LEN, MAX_UPLINK_FRAME_LEN};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let mut up = Decoder::<Uplink, MAX_UPLINK_FRAME_LEN>::new();
    up.feed(data, |r| {
        if let Ok(m) = r {
            let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
            let frame = encode_frame(&m, &mut buf).expect("a decoded message fits its own maximum");
            let mut again = Decoder::<Uplink, MAX_UPLINK_FRAME_LEN>::new();
            let mut got = None;
            again.feed(frame, |r| got = Some(r));
            assert_eq!(got, Some(Ok(m)));
        }
    });
    let mut down = Decoder::<Downlink, MAX_DOWNLINK_FRAME_LEN>::new();
    down.feed(data, |_| {});
    assert_eq!(up.stats().bytes, data.len() as u64);
});
