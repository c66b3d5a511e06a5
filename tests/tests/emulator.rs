//! The emulated node: the board binary under QEMU (`mps2-an386`, Cortex-M4F),
//! its UART on a pseudo-terminal or a file, the host on the other side.
//!
//! Needs `qemu-system-arm` (Debian package of that name; `.ci/run` installs
//! it) and the `thumbv7em-none-eabihf` target. Regenerate the golden bytes
//! with `GLEANER_BLESS=1 cargo test -p gleaner-tests --test emulator`.

use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::atomic::AtomicBool;
use std::sync::OnceLock;
use std::time::{Duration, Instant};

use gleaner::analysis::analyze_file;
use gleaner::link::script::{CommandScript, Scripted, Step};
use gleaner::link::LinkTracker;
use gleaner::link::HELLO_REQUEST_ID;
use gleaner::recorder::{run_port, Recorder};
use gleaner::settings::NodeSettings;
use gleaner_protocol::{Outcome, UplinkBody};
use gleaner_tests::{qemu as qemu_present, workspace, Collect};

/// Builds the board binary once and returns its path.
fn board_elf() -> &'static Path {
    static ELF: OnceLock<PathBuf> = OnceLock::new();
    ELF.get_or_init(|| {
        let board = workspace().join("firmware/boards/qemu-mps2-an386");
        let status = Command::new(env!("CARGO"))
            .args(["build", "--release", "--locked"])
            .current_dir(&board)
            .env_remove("CARGO_TARGET_DIR")
            .status()
            .expect("cargo runs");
        assert!(
            status.success(),
            "the QEMU board binary builds (needs `rustup target add thumbv7em-none-eabihf`)"
        );
        board.join("target/thumbv7em-none-eabihf/release/gleaner-board-qemu")
    })
}

/// QEMU with deterministic instruction counting. `real_time` keeps the
/// virtual clock in step with the host's while the guest sleeps (needed when
/// the host sends commands: with `sleep=off` the whole run can finish before
/// QEMU looks at the serial input); otherwise it runs far faster than real time.
fn qemu(real_time: bool, extra: &[&str]) -> Command {
    let mut cmd = Command::new("qemu-system-arm");
    cmd.args([
        "-machine",
        "mps2-an386",
        "-cpu",
        "cortex-m4",
        "-nographic",
        "-semihosting-config",
        "enable=on,target=native",
    ]);
    let icount = if real_time {
        "shift=4,sleep=on"
    } else {
        "shift=4,sleep=off"
    };
    cmd.args(["-icount", icount, "-kernel", board_elf().to_str().unwrap()]);
    cmd.args(extra);
    cmd
}

fn wait(child: &mut Child, limit: Duration) -> bool {
    let started = Instant::now();
    while started.elapsed() < limit {
        if let Ok(Some(status)) = child.try_wait() {
            return status.success();
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    let _ = child.kill();
    false
}

/// Stack the emulated node may use, our own budget: with its static RAM
/// (the executor's task, which holds the `Node`, about 4 KiB) it then fits
/// beside a radio stack on parts with 24 KiB of RAM.
const STACK_BUDGET: usize = 10 * 1024;

/// Runs the node to its end with the UART into a file; returns the bytes and
/// the stack the node says it used.
fn run_to_file(dir: &Path, name: &str) -> (Vec<u8>, usize) {
    let out = dir.join(name);
    let mut child = qemu(
        false,
        &[
            "-monitor",
            "none",
            "-serial",
            &format!("file:{}", out.display()),
        ],
    )
    .stdout(Stdio::piped())
    .spawn()
    .expect("qemu-system-arm is installed (apt-get install qemu-system-arm)");
    let mut said = String::new();
    let mut stdout = child.stdout.take().unwrap();
    let reader = std::thread::spawn(move || {
        std::io::Read::read_to_string(&mut stdout, &mut said).map(|_| said)
    });
    assert!(
        wait(&mut child, Duration::from_secs(120)),
        "the emulated node exits with success"
    );
    let said = reader.join().unwrap().unwrap();
    let stack = said
        .split("stack used ")
        .nth(1)
        .and_then(|rest| rest.split_whitespace().next())
        .and_then(|n| n.parse().ok())
        .unwrap_or_else(|| panic!("the node reports its stack use: {said:?}"));
    (std::fs::read(out).unwrap(), stack)
}

#[test]
fn the_first_seconds_are_byte_for_byte_as_expected_and_repeatable() {
    if qemu_present().is_none() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let (first, stack) = run_to_file(dir.path(), "a.bin");
    let (second, _) = run_to_file(dir.path(), "b.bin");
    assert_eq!(first, second, "the same run gives the same bytes");
    println!("emulated node: stack used {stack} bytes");
    assert!(
        (1024..=STACK_BUDGET).contains(&stack),
        "stack used {stack} bytes, budget {STACK_BUDGET}"
    );
    // Frames of the first three seconds.
    let mut tracker = LinkTracker::new();
    let mut golden = Vec::new();
    for frame in first.split(|&b| b == 0).filter(|f| !f.is_empty()) {
        let tracked = tracker.accept_encoded(frame).unwrap().unwrap();
        if tracked.message.uptime_ms > 3_000 {
            break;
        }
        golden.extend_from_slice(frame);
        golden.push(0);
    }
    let hex: String = golden.iter().map(|b| format!("{b:02x}")).collect();
    let path = workspace().join("tests/data/qemu-first-seconds.hex");
    if std::env::var_os("GLEANER_BLESS").is_some() {
        std::fs::write(&path, format!("{hex}\n")).unwrap();
    }
    let expected = std::fs::read_to_string(&path)
        .expect("tests/data/qemu-first-seconds.hex (GLEANER_BLESS=1 writes it)");
    assert_eq!(
        hex,
        expected.trim(),
        "the emulated node's first seconds changed"
    );
}

#[test]
fn record_the_emulated_node_talk_to_it_and_report_its_cutoff() {
    if qemu_present().is_none() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let monitor = dir.path().join("monitor.sock");
    let mut child = qemu(
        true,
        &[
            "-S",
            "-serial",
            "pty",
            "-monitor",
            &format!("unix:{},server=on,wait=off", monitor.display()),
        ],
    )
    .stdout(Stdio::piped())
    .stderr(Stdio::null())
    .spawn()
    .expect("qemu-system-arm is installed");
    // QEMU names the pseudo-terminal it made for UART0 on its standard output.
    let mut stderr = BufReader::new(child.stdout.take().unwrap());
    let mut line = String::new();
    let pty = loop {
        line.clear();
        assert!(
            stderr.read_line(&mut line).unwrap() > 0,
            "QEMU said where the serial port is"
        );
        if let Some(rest) = line.split("char device redirected to ").nth(1) {
            break rest.split_whitespace().next().unwrap().to_string();
        }
    };
    let log = dir.path().join("qemu.gleanlog");
    let mut recorder = Recorder::create(&log, &pty).unwrap();
    let stop = AtomicBool::new(false);
    let mut monitor_link = None;
    let child_ref = &mut child;
    let monitor_ref = &monitor;
    let mut collect = Collect::new(move |_, idle| {
        if monitor_link.is_none() {
            // The port is open: let the machine run. The monitor connection
            // stays open (QEMU may drop a command from a connection that
            // closes at once).
            let mut m = std::os::unix::net::UnixStream::connect(monitor_ref).unwrap();
            m.write_all(b"cont\n").unwrap();
            monitor_link = Some(m);
        }
        matches!(child_ref.try_wait(), Ok(Some(_))) && idle > Duration::from_millis(300)
    });
    let settings = NodeSettings::from_toml("report_interval_ms = 500").unwrap();
    let script = CommandScript::new(
        vec![Step::Ping, Step::Configure(Box::new(settings))],
        Duration::from_secs(5),
    );
    let mut scripted = Scripted::new(script, &mut collect);
    let result = run_port(&mut recorder, &pty, 115_200, &stop, &mut scripted);
    recorder.finish().unwrap();
    result.unwrap();
    let outcomes: Vec<Option<Outcome>> = scripted.script.results.iter().map(|r| r.1).collect();
    // The Hello sent at boot gave the present configuration, so no GetInfo was needed.
    assert_eq!(
        outcomes,
        vec![Some(Outcome::Pong), Some(Outcome::Accepted)],
        "ping, set config"
    );
    drop(scripted);
    let messages = std::mem::take(&mut collect.messages);
    drop(collect);
    assert!(child.wait().unwrap().success());

    let report = analyze_file(&log).unwrap();
    assert_eq!(report.boots.len(), 1);
    assert_eq!(report.boots[0].firmware, env!("CARGO_PKG_VERSION"));
    assert_eq!((report.link.lost_frames, report.link.damaged()), (0, 0));
    let cutoff = report
        .outages
        .first()
        .expect("the stand-in cell runs out and the cutoff is reported");
    assert!(
        (0.69..=0.75).contains(&cutoff.input_v_before),
        "cut off near the 0.7 V hold: {cutoff:?}"
    );
    // The script's two commands were answered (the recorder's own Hello
    // request on connect may reach the emulated UART before the firmware
    // listens, so its reply is not counted on).
    let script_replies = messages
        .iter()
        .filter(
            |t| matches!(&t.message.body, UplinkBody::Reply(r) if r.request_id != HELLO_REQUEST_ID),
        )
        .count();
    assert_eq!(script_replies, 2);
    // The new report interval took effect.
    let intervals: Vec<u32> = messages
        .iter()
        .filter_map(|t| match &t.message.body {
            UplinkBody::Report(r) => Some(r.interval_ms),
            _ => None,
        })
        .collect();
    // Reports before the command lands run at the old 1 s, and the interval
    // under way when it lands is cut short; how many depends on how fast the
    // emulator runs on a loaded machine. From the first 500 ms report on,
    // every report is 500 ms.
    let first = intervals.iter().position(|&ms| ms == 500);
    assert!(first.is_some_and(|i| i <= 4), "{intervals:?}");
    assert!(
        intervals[first.unwrap_or(0)..].iter().all(|&ms| ms == 500),
        "{intervals:?}"
    );
    assert!(intervals[..first.unwrap_or(0)].iter().all(|&ms| ms <= 1000));
}
