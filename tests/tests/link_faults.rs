//! A noisy link: a million frames through bit errors, dropped bytes, garbage
//! bursts and duplicates. Nothing damaged is ever accepted, every frame that
//! arrived intact is recovered, and the host's lost-frame count is the truth.
//!
//! "1 % bit errors" is read as: 1 % of frames have one bit flipped somewhere
//! (delimiter included); 0.5 % lose one byte; every 10,000 frames a burst of
//! 1 to 200 random bytes (zeros included) is inserted; 0.1 % are sent twice.

use gleaner::link::LinkTracker;
use gleaner_protocol::*;

struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        // xorshift64*
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

fn message(i: u32) -> Uplink {
    let seq = (i & 0xFFFF) as u16;
    let uptime_ms = u64::from(i) * 100;
    let body = match i % 3 {
        0 => UplinkBody::Reply(Reply {
            request_id: seq,
            outcome: Outcome::Pong,
        }),
        1 => UplinkBody::Event(Event {
            from: ConverterState::Harvesting,
            to: ConverterState::Sagging,
            cause: TransitionCause::InputNearHold,
            trigger_input_uv: 0,
            trigger_output_uv: 0,
            input_uv: 700_000 + i,
            output_uv: 3_000_000,
        }),
        _ => UplinkBody::Report(Report {
            interval_ms: 100,
            sample_count: 10,
            input_uv: ChannelStats::from_min_mean_max(i, i + 10, i + 20),
            input_na: ChannelStats::default(),
            output_uv: ChannelStats::from_min_mean_max(3_000_000, 3_000_000, 3_000_000),
            output_na: ChannelStats::default(),
            drawn_nj: u64::from(i),
            delivered_nj: 0,
            stored_nj: 0,
            state: ConverterState::Harvesting,
            state_ms: StateDurations {
                harvesting_ms: 100,
                ..Default::default()
            },
            input_cutoff_in_ms: None,
            brownout_in_ms: None,
            load_nw: 0,
            net_nw: 0,
            load_powered: true,
            load_shed: false,
            flags: ReportFlags::default(),
        }),
    };
    Uplink {
        seq,
        uptime_ms,
        body,
    }
}

fn run(frames: u32, seed: u64) {
    let mut rng = Rng(seed);
    let mut stream = Vec::with_capacity(frames as usize * 40);
    // Which frames arrive intact and can be recovered: their bytes unchanged and
    // the stream just before them ending in a delimiter.
    let mut recoverable = Vec::new();
    let mut damaged_count = 0u64;
    let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
    for i in 0..frames {
        if i % 10_000 == 9_999 {
            let len = 1 + rng.below(200) as usize;
            for _ in 0..len {
                stream.push(rng.next() as u8);
            }
        }
        let boundary_ok = stream.last().is_none_or(|&b| b == 0);
        let mut frame = encode_frame(&message(i), &mut buf).unwrap().to_vec();
        let mut damaged = false;
        // Damage falls inside the frame: a lost delimiter followed by garbage
        // that happens to start with 0x00 would arrive intact after all.
        let body_len = frame.len() as u64 - 1;
        if rng.below(100) == 0 {
            let at = rng.below(body_len) as usize;
            frame[at] ^= 1 << rng.below(8);
            damaged = true;
        }
        if rng.below(200) == 0 {
            let at = rng.below(body_len) as usize;
            frame.remove(at);
            damaged = true;
        }
        damaged_count += u64::from(damaged);
        let copies = if rng.below(1_000) == 0 { 2 } else { 1 };
        for copy in 0..copies {
            let ok = !damaged && (copy > 0 || boundary_ok);
            if ok && copy == 0 {
                recoverable.push(i);
            }
            stream.extend_from_slice(&frame);
        }
    }
    // The host side, as the recorder does it.
    let mut splitter = FrameSplitter::<MAX_UPLINK_FRAME_LEN>::new();
    let mut tracker = LinkTracker::new();
    let mut accepted = Vec::new();
    let mut index_of_seq_base = 0u32;
    for &byte in &stream {
        let Some(Ok(frame)) = splitter.push(byte) else {
            continue;
        };
        if let Ok(Some(tracked)) = tracker.accept_encoded(frame) {
            // Recover the running index from the wrapping sequence number.
            let seq = u32::from(tracked.message.seq);
            let mut index = (index_of_seq_base & !0xFFFF) | seq;
            if index + 0x8000 < index_of_seq_base {
                index += 0x1_0000;
            }
            index_of_seq_base = index;
            assert_eq!(
                tracked.message,
                message(index),
                "a damaged frame was accepted as frame {index}"
            );
            accepted.push(index);
        }
    }
    assert_eq!(
        accepted, recoverable,
        "every frame that arrived intact is recovered, nothing else"
    );
    let stats = tracker.stats();
    let last = *accepted.last().unwrap();
    // The node sent frames 0..=last before the last one we saw.
    assert_eq!(
        stats.lost_frames,
        u64::from(last) + 1 - accepted.len() as u64
    );
    println!(
        "{frames} frames, {damaged_count} damaged, {} accepted, {} lost by count, {} CRC errors, {} framing errors, {} duplicates dropped",
        accepted.len(),
        stats.lost_frames,
        stats.crc_errors,
        stats.framing_errors,
        stats.duplicates
    );
    assert!(stats.duplicates > 0 && stats.crc_errors > 0);
}

#[test]
fn a_million_frames_through_a_noisy_link() {
    run(1_000_000, 0x00DD_BA11_u64);
}

#[test]
#[ignore = "ten million frames: run with --ignored when changing the framing"]
fn ten_million_frames_through_a_noisy_link() {
    run(10_000_000, 0xBAD_5EED);
}
