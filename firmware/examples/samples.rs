//! Runs the Node for N samples (default 100000) of a slowly varying input, for
//! instruction counting: `valgrind --tool=callgrind` on two runs of different
//! N gives the cost of one sample (see tests/bench/compare.sh).

use gleaner_firmware::config::default_config;
use gleaner_firmware::config_store::{MemoryStorage, STORE_LEN};
use gleaner_firmware::load_shed::NoPin;
use gleaner_firmware::{Node, NodeParts, RawSample};
use gleaner_protocol::{ConfigSource, MAX_UPLINK_FRAME_LEN};

fn main() {
    let n: u64 = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(100_000);
    let mut node = Node::new(NodeParts {
        config: default_config(),
        config_source: ConfigSource::Defaults,
        node_id: 1,
        boot_id: 1,
        sample_period_us: 1_000,
        load_pin: NoPin,
        storage: MemoryStorage::<STORE_LEN>::new(),
    });
    let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
    let mut bytes = 0usize;
    for i in 0..n {
        let wobble = (i % 97) as u32;
        let raw = RawSample {
            input_voltage: 1_200 + wobble,
            input_current: 60 + wobble / 8,
            output_voltage: 2_000 + wobble / 4,
            output_current: 300 + wobble,
        };
        node.on_sample(i * 1_000, &raw);
        while let Some(frame) = node.next_frame(&mut buf) {
            bytes += frame.len();
        }
    }
    println!(
        "{n} samples, {bytes} bytes of frames, node state {} bytes",
        std::mem::size_of_val(&node)
    );
}
