//! The node's command handler on any bytes, between samples built from the
//! same bytes: never a panic, energy totals never fall, and every frame the
//! node sends decodes.
#![no_main]

use gleaner_firmware::config::default_config;
use gleaner_firmware::config_store::{MemoryStorage, STORE_LEN};
use gleaner_firmware::load_shed::NoPin;
use gleaner_firmware::{Node, NodeParts, RawSample};
use gleaner_protocol::{ConfigSource, Decoder, Uplink, MAX_UPLINK_FRAME_LEN};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let mut node = Node::new(NodeParts {
        config: default_config(),
        config_source: ConfigSource::Defaults,
        node_id: 1,
        boot_id: 1,
        sample_period_us: 10_000,
        load_pin: NoPin,
        storage: MemoryStorage::<STORE_LEN>::new(),
    });
    let mut decoder = Decoder::<Uplink, MAX_UPLINK_FRAME_LEN>::new();
    let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
    let mut t = 0u64;
    let mut last = node.totals();
    for chunk in data.chunks(9) {
        node.on_received(chunk);
        if let [a, b, c, d, e, f, g, h, dt] = *chunk {
            t = t.saturating_add(u64::from(dt) * 1_000);
            let raw = RawSample {
                input_voltage: u32::from(u16::from_le_bytes([a, b])),
                input_current: u32::from(u16::from_le_bytes([c, d])),
                output_voltage: u32::from(u16::from_le_bytes([e, f])),
                output_current: u32::from(u16::from_le_bytes([g, h])),
            };
            node.on_sample(t, &raw);
        }
        let now = node.totals();
        assert!(now.drawn_nj >= last.drawn_nj && now.delivered_nj >= last.delivered_nj);
        last = now;
        while let Some(frame) = node.next_frame(&mut buf) {
            decoder.feed(frame, |r| assert!(r.is_ok(), "the node sent a bad frame: {r:?}"));
        }
    }
});
