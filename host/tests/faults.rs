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
fn a_full_disk_pauses_recording_and_it_resumes_when_space_returns() {
    let disk = TinyDisk::mount(64 * 1024);
    // Something else on the disk, removed later to give the space back.
    let filler = disk.0.join("filler");
    std::fs::write(&filler, vec![0u8; 24 * 1024]).unwrap();
    let log = disk.0.join("full.gleanlog");
    let mut recorder = Recorder::create(&log, "test").unwrap();
    let mut sent = 0u16;
    while !recorder.is_paused() {
        recorder.on_bytes(1, &report_frame(sent), |_| {}).unwrap();
        sent += 1;
        assert!(sent < 60_000, "the disk never filled");
    }
    let paused_at = sent;
    // Full: frames still arrive (and are decoded), none is written, no error.
    let mut decoded = 0;
    for _ in 0..50 {
        recorder
            .on_bytes(2, &report_frame(sent), |_| decoded += 1)
            .unwrap();
        sent += 1;
    }
    assert_eq!(decoded, 50);
    assert!(recorder.is_paused());
    // Space comes back: the next write after the retry goes through.
    std::fs::remove_file(&filler).unwrap();
    recorder.try_resume_now();
    for _ in 0..20 {
        recorder.on_bytes(3, &report_frame(sent), |_| {}).unwrap();
        sent += 1;
    }
    assert!(!recorder.is_paused());
    recorder.finish().unwrap();
    let not_written = recorder.frames_not_written();
    assert!(not_written >= 50, "{not_written}");
    // The log reads to its end with no damage: every frame written before the
    // disk filled, a note of what was not written, and every frame after.
    let mut reader = LogReader::new(std::fs::File::open(&log).unwrap());
    let (mut frames, mut notes) = (Vec::new(), Vec::new());
    for record in reader.by_ref() {
        match record.body {
            RecordBody::Frame(_) => frames.push(record.host_time_us),
            RecordBody::Marker { detail, .. } if detail.contains("disk was full") => {
                notes.push(detail)
            }
            _ => {}
        }
    }
    assert!(reader.warnings().is_empty(), "{:?}", reader.warnings());
    assert_eq!(notes.len(), 1, "{notes:?}");
    assert!(
        notes[0].contains(&format!("{not_written} frames")),
        "{notes:?}"
    );
    assert_eq!(frames.len() as u64 + not_written, u64::from(sent));
    assert_eq!(frames.iter().filter(|&&t| t == 3).count(), 20);
    assert!(frames.len() >= usize::from(paused_at) - 1);
}
