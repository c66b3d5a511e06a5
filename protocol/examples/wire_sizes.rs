//! Bytes on the wire of typical messages against a CSV text line carrying the
//! same numbers at the same precision, and the burst rate 115200 baud 8N1
//! (11,520 bytes/s) carries either way.

use gleaner_protocol::*;

// The typical report the protocol tests use.
#[path = "../tests/common.rs"]
mod common;

fn main() {
    let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
    let mut samples = heapless::Vec::new();
    for i in 0..SAMPLES_PER_BLOCK as u32 {
        let _ = samples.push(Sample {
            input_uv: 1_200_000 + i * 800,
            input_na: 1_000_000,
            output_uv: 3_300_000,
            output_na: 250_000,
        });
    }
    let block = Uplink {
        seq: 7,
        uptime_ms: 5_000,
        body: UplinkBody::Samples(SampleBlock {
            first_index: 1_000,
            remaining: 992,
            period_us: 1_000,
            samples: samples.clone(),
        }),
    };
    let block_len = encode_frame(&block, &mut buf).unwrap().len();
    let per_sample = block_len as f64 / SAMPLES_PER_BLOCK as f64;
    // The same numbers as text: index, time and four channels per line.
    let text_sample: f64 = samples
        .iter()
        .enumerate()
        .map(|(i, s)| {
            format!(
                "{},{},{},{},{},{}\n",
                1_000 + i,
                5_000_000 + i * 1_000,
                s.input_uv,
                s.input_na,
                s.output_uv,
                s.output_na
            )
            .len() as f64
        })
        .sum::<f64>()
        / SAMPLES_PER_BLOCK as f64;
    let report = common::example_report();
    let report_len = encode_frame(&report, &mut buf).unwrap().len();
    let report_text = "4321,3600000,1000,100,1180000,1200000,1215000,950000,1000000,1040000,3290000,3300000,3301000,8000,250000,4000000,1200000,825000,0,harvesting,0,0,1000,0,0,0,,5400000,0,0\n".len();
    println!("sample_bytes {per_sample:.2}");
    println!("sample_text_bytes {text_sample:.2}");
    println!("sample_ratio {:.2}", text_sample / per_sample);
    println!("report_bytes {report_len}");
    println!("report_text_bytes {report_text}");
    println!("report_ratio {:.2}", report_text as f64 / report_len as f64);
    println!("burst_samples_per_s_frames {:.0}", 11_520.0 / per_sample);
    println!("burst_samples_per_s_text {:.0}", 11_520.0 / text_sample);
}
