//! Time per sample through the Node (criterion). Instruction counts, which do
//! not drift with machine load, come from tests/bench/compare.sh (callgrind).

use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};
use gleaner_firmware::config::default_config;
use gleaner_firmware::config_store::{MemoryStorage, STORE_LEN};
use gleaner_firmware::load_shed::NoPin;
use gleaner_firmware::{Node, NodeParts, RawSample};
use gleaner_protocol::{ConfigSource, MAX_UPLINK_FRAME_LEN};

fn node() -> Node<NoPin, MemoryStorage<STORE_LEN>> {
    Node::new(NodeParts {
        config: default_config(),
        config_source: ConfigSource::Defaults,
        node_id: 1,
        boot_id: 1,
        sample_period_us: 1_000,
        load_pin: NoPin,
        storage: MemoryStorage::new(),
    })
}

fn samples(c: &mut Criterion) {
    let mut group = c.benchmark_group("node");
    group.throughput(Throughput::Elements(1_000));
    group.bench_function("1000 samples", |b| {
        b.iter_batched(
            node,
            |mut n| {
                let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
                for i in 0..1_000u64 {
                    let w = (i % 97) as u32;
                    n.on_sample(
                        i * 1_000,
                        &RawSample {
                            input_voltage: 1_200 + w,
                            input_current: 60,
                            output_voltage: 2_000,
                            output_current: 300 + w,
                        },
                    );
                    while n.next_frame(&mut buf).is_some() {}
                }
                n
            },
            BatchSize::SmallInput,
        )
    });
    group.finish();
}

criterion_group!(benches, samples);
criterion_main!(benches);
