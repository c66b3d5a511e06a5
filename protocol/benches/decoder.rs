//! Frames per second through the streaming decoder, beside a plain copy of
//! the same bytes (the floor), measured in one run.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use gleaner_protocol::*;

// The typical report the protocol tests use.
#[path = "../tests/common.rs"]
mod common;

fn stream() -> Vec<u8> {
    let mut out = Vec::new();
    let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
    for seq in 0..1_000u16 {
        let mut m = common::example_report();
        m.seq = seq;
        m.uptime_ms = u64::from(seq) * 1_000;
        if let UplinkBody::Report(r) = &mut m.body {
            r.input_uv =
                ChannelStats::from_min_mean_max(1_180_000, 1_200_000 + u32::from(seq), 1_215_000);
        }
        out.extend_from_slice(encode_frame(&m, &mut buf).unwrap());
    }
    out
}

fn decoding(c: &mut Criterion) {
    let bytes = stream();
    let mut group = c.benchmark_group("decoder");
    group.throughput(Throughput::Bytes(bytes.len() as u64));
    group.bench_function("decode 1000 report frames", |b| {
        b.iter(|| {
            let mut d = Decoder::<Uplink, MAX_UPLINK_FRAME_LEN>::new();
            let mut n = 0u32;
            d.feed(std::hint::black_box(&bytes), |r| n += u32::from(r.is_ok()));
            assert_eq!(n, 1_000);
        })
    });
    group.bench_function("copy the same bytes", |b| {
        let mut dst = vec![0u8; bytes.len()];
        b.iter(|| dst.copy_from_slice(std::hint::black_box(&bytes)))
    });
    group.finish();
}

criterion_group!(benches, decoding);
criterion_main!(benches);
