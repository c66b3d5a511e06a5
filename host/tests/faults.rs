//! The recorder under bad conditions: killed at random moments, and a full disk.

use std::io::Write;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use gleaner::log::{LogReader, ReadWarning, RecordBody};
use gleaner::recorder::Recorder;
use gleaner_protocol::*;
use serialport::{SerialPort, TTYPort};

fn report_frame(seq: u16) -> Vec<u8> {
    let message = Uplink {
        seq,
        uptime_ms: u64::from(seq) * 1000,
        body: UplinkBody::Reply(Reply {
            request_id: seq,
            outcome: Outcome::Pong,
        }),
    };
    let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
    encode_frame(&message, &mut buf).unwrap().to_vec()
}

/// A small deterministic generator for the kill moments (xorshift).
fn next(state: &mut u64) -> u64 {
    *state ^= *state << 13;
    *state ^= *state >> 7;
    *state ^= *state << 17;
    *state
}

#[test]
fn killed_at_random_moments_every_log_opens_with_everything_flushed() {
    let kills: usize = std::env::var("GLEANER_KILLS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(100);
    let dir = tempfile::tempdir().unwrap();
    let mut rng = 0x9E37_79B9_7F4A_7C15u64;
    let mut total_frames = 0usize;
    for round in 0..kills {
        let (mut master, slave) = TTYPort::pair().unwrap();
        let path = slave.name().unwrap();
        let log = dir.path().join(format!("kill-{round}.gleanlog"));
        let mut child = Command::new(env!("CARGO_BIN_EXE_gleaner"))
            .args([
                "record",
                &path,
                "--out",
                log.to_str().unwrap(),
                "--status-every",
                "0",
            ])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        // Wait until the recorder has the log open.
        let started = Instant::now();
        while !log.exists() && started.elapsed() < Duration::from_secs(5) {
            std::thread::sleep(Duration::from_millis(2));
        }
        let frames = (next(&mut rng) % 300) as u16;
        let mut sent = Vec::new();
        for seq in 0..frames {
            let f = report_frame(seq);
            master.write_all(&f).unwrap();
            sent.push(f[..f.len() - 1].to_vec());
        }
        std::thread::sleep(Duration::from_millis(next(&mut rng) % 40));
        child.kill().unwrap(); // SIGKILL
        child.wait().unwrap();
        drop(master);
        drop(slave);
        let mut reader = LogReader::new(std::fs::File::open(&log).unwrap());
        let got: Vec<Vec<u8>> = reader
            .by_ref()
            .filter_map(|r| match r.body {
                RecordBody::Frame(f) => Some(f),
                _ => None,
            })
            .collect();
        // What was recorded is exactly a prefix of what was sent, undamaged.
        assert!(got.len() <= sent.len());
        assert_eq!(got[..], sent[..got.len()], "round {round}");
        for w in reader.warnings() {
            assert!(
                matches!(w, ReadWarning::TornTail { .. }),
                "round {round}: {w}"
            );
        }
        total_frames += got.len();
    }
    assert!(
        total_frames > 0,
        "the recorder recorded something before being killed"
    );
}

/// A tiny tmpfs: mounting needs root, which CI and the dev machines have here.
struct TinyDisk(std::path::PathBuf);

impl TinyDisk {
    fn mount(bytes: usize) -> TinyDisk {
        let dir = tempfile::tempdir().unwrap().keep();
        let status = Command::new("mount")
            .args([
                "-t",
                "tmpfs",
                "-o",
                &format!("size={bytes}"),
                "tmpfs",
                dir.to_str().unwrap(),
            ])
            .status()
            .expect("mount runs");
        assert!(
            status.success(),
            "mounting a tmpfs needs root (CI runs as root)"
        );
        TinyDisk(dir)
    }
}

impl Drop for TinyDisk {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
        let _ = std::fs::remove_dir(&self.0);
    }
}

#[test]
fn a_full_disk_stops_recording_with_a_clear_error_and_a_readable_log() {
    let disk = TinyDisk::mount(64 * 1024);
    let log = disk.0.join("full.gleanlog");
    let mut recorder = Recorder::create(&log, "test").unwrap();
    let mut written = 0u16;
    let err = loop {
        let f = report_frame(written);
        match recorder.on_bytes(1, &f, |_| {}) {
            Ok(()) => written += 1,
            Err(e) => break e,
        }
        assert!(written < 60_000, "the disk never filled");
    };
    let message = format!("{err:#}");
    assert!(
        message.contains("full") && message.contains("intact"),
        "{message}"
    );
    let mut reader = LogReader::new(std::fs::File::open(&log).unwrap());
    let frames = reader
        .by_ref()
        .filter(|r| matches!(r.body, RecordBody::Frame(_)))
        .count();
    assert!(frames > 100, "{frames} frames kept");
    assert!(
        frames >= usize::from(written) - 1,
        "every frame before the failing one is readable: {frames} of {written}"
    );
    for w in reader.warnings() {
        assert!(matches!(w, ReadWarning::TornTail { .. }), "{w}");
    }
}
