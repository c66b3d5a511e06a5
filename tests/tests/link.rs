//! The live side against something that behaves like a device: pseudo-terminal
//! pairs fed by a scripted writer or a virtual node.

use std::io::Write;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use gleaner::analysis::analyze_file;
use gleaner::link::Session;
use gleaner::link::{LinkStats, Tracked};
use gleaner::log::{LogReader, MarkerKind, RecordBody};
use gleaner::recorder::{run_port, Recorder};
use gleaner::sim::run::port::VirtualPort;
use gleaner::sim::VirtualNode;
use gleaner::view::observer::{Display, LiveObserver};
use gleaner_protocol::*;
use gleaner_tests::{scenario, Collect};
use serialport::{SerialPort, TTYPort};

fn frame(message: &Uplink) -> Vec<u8> {
    let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
    encode_frame(message, &mut buf).unwrap().to_vec()
}

fn hello(boot_id: u32, uptime_ms: u64) -> Uplink {
    Uplink {
        seq: 0,
        uptime_ms,
        body: UplinkBody::Hello(Hello {
            protocol: PROTOCOL_VERSION,
            firmware: gleaner_firmware::FIRMWARE_VERSION,
            node_id: 0x7E57_0000_0000_0001,
            boot_id,
            sample_period_us: 10_000,
            config: gleaner_firmware::config::default_config(),
            config_source: ConfigSource::Defaults,
            totals: EnergyTotals::default(),
        }),
    }
}

fn report(seq: u16, uptime_ms: u64, input_uv: u32, state: ConverterState) -> Uplink {
    Uplink {
        seq,
        uptime_ms,
        body: UplinkBody::Report(Report {
            interval_ms: 1_000,
            sample_count: 100,
            input_uv: ChannelStats::from_min_mean_max(input_uv, input_uv, input_uv),
            input_na: ChannelStats::from_min_mean_max(2_000_000, 2_000_000, 2_000_000),
            output_uv: ChannelStats::from_min_mean_max(3_300_000, 3_300_000, 3_300_000),
            output_na: ChannelStats::from_min_mean_max(1_000_000, 1_000_000, 1_000_000),
            drawn_nj: 2_000_000,
            delivered_nj: 1_500_000,
            stored_nj: 0,
            state,
            state_ms: StateDurations {
                harvesting_ms: 1_000,
                ..Default::default()
            },
            input_cutoff_in_ms: Some(42_000),
            brownout_in_ms: None,
            load_nw: 0,
            net_nw: 0,
            load_powered: true,
            load_shed: false,
            flags: ReportFlags::default(),
        }),
    }
}

/// A scripted node: a pseudo-terminal pair whose master end we write.
fn scripted() -> (TTYPort, TTYPort, String) {
    let (master, slave) = TTYPort::pair().unwrap();
    let path = slave.name().unwrap();
    (master, slave, path)
}

#[test]
fn plain_watch_shows_the_values_sent() {
    let (mut master, _slave, path) = scripted();
    let stream: Vec<u8> = [
        hello(1, 5),
        report(1, 1_000, 1_000_000, ConverterState::Harvesting),
    ]
    .iter()
    .flat_map(frame)
    .collect();
    master.write_all(&stream).unwrap();
    let mut out = Vec::new();
    {
        let stop = AtomicBool::new(false);
        let started = Instant::now();
        let mut observer = LiveObserver::new(
            Display::Plain { every: None },
            "test",
            Box::new(&mut out),
            Box::new(move |stats, _| {
                stats.frames >= 2 || started.elapsed() > Duration::from_secs(5)
            }),
        );
        let mut recorder = Recorder::new(None);
        run_port(&mut recorder, &path, 115_200, &stop, &mut observer).unwrap();
    }
    let text = String::from_utf8(out).unwrap();
    assert!(text.contains("node boot 00000001"), "{text}");
    let line = text
        .lines()
        .find(|l| l.contains("harvesting"))
        .expect("a report line");
    assert!(line.contains("in 1.000 V"), "{line}");
    assert!(line.contains("2.000 mA"), "{line}");
    assert!(line.contains("eff  75.0%"), "{line}");
    assert!(line.contains("cutoff in    42.0 s"), "{line}");
}

#[test]
fn record_then_read_back_gives_every_frame_sent() {
    let (mut master, _slave, path) = scripted();
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("r.gleanlog");
    let sent: Vec<Vec<u8>> = (0..200u16)
        .map(|i| {
            frame(&report(
                i,
                u64::from(i) * 1_000,
                900_000 + u32::from(i),
                ConverterState::Harvesting,
            ))
        })
        .collect();
    let writer = std::thread::spawn(move || {
        for chunk in sent.chunks(7) {
            for f in chunk {
                master.write_all(f).unwrap();
            }
            std::thread::sleep(Duration::from_millis(2));
        }
        (master, sent)
    });
    let mut recorder = Recorder::create(&log, &path).unwrap();
    let stop = AtomicBool::new(false);
    let started = Instant::now();
    let mut observer = Collect::new(move |stats, _| {
        stats.frames >= 200 || started.elapsed() > Duration::from_secs(10)
    });
    run_port(&mut recorder, &path, 115_200, &stop, &mut observer).unwrap();
    recorder.finish().unwrap();
    let (_master, sent) = writer.join().unwrap();
    let logged: Vec<Vec<u8>> = LogReader::new(std::fs::File::open(&log).unwrap())
        .filter_map(|r| match r.body {
            RecordBody::Frame(f) => Some(f),
            _ => None,
        })
        .collect();
    let sent_bodies: Vec<Vec<u8>> = sent.iter().map(|f| f[..f.len() - 1].to_vec()).collect();
    assert_eq!(logged, sent_bodies);
    assert_eq!(observer.messages.len(), 200);
}

/// Records the port at `path` into `log` until `frames` frames came (or 5 s
/// passed); returns the messages seen and the recorder's link figures.
fn record_until(path: &str, log: &std::path::Path, frames: u64) -> (Vec<Tracked>, LinkStats) {
    let mut recorder = Recorder::create(log, path).unwrap();
    let stop = AtomicBool::new(false);
    let started = Instant::now();
    let mut observer = Collect::new(move |stats, _| {
        stats.frames >= frames || started.elapsed() > Duration::from_secs(5)
    });
    run_port(&mut recorder, path, 115_200, &stop, &mut observer).unwrap();
    recorder.finish().unwrap();
    (observer.messages, *recorder.stats())
}

#[test]
fn a_reboot_is_detected_and_logged() {
    let (mut master, _slave, path) = scripted();
    let mut stream = Vec::new();
    for m in [
        hello(7, 3),
        report(1, 1_000, 1_000_000, ConverterState::Harvesting),
        report(2, 2_000, 1_000_000, ConverterState::Harvesting),
    ] {
        stream.extend(frame(&m));
    }
    // Second boot: new boot id, uptime from zero.
    for m in [
        hello(8, 4),
        report(1, 1_000, 1_000_000, ConverterState::Harvesting),
    ] {
        stream.extend(frame(&m));
    }
    master.write_all(&stream).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("reboot.gleanlog");
    let (messages, stats) = record_until(&path, &log, 5);
    assert_eq!(stats.reboots, 1);
    assert!(messages[3].reboot);
    assert_eq!(messages[3].boot_index, 1);
    let report = analyze_file(&log).unwrap();
    assert_eq!(report.link.reboots, 1);
    assert_eq!(report.boots.len(), 2);
    assert_eq!(report.link.lost_frames, 0);
    // Energy continues across the boots: three reports of 2 mJ.
    assert!((report.energy.drawn_j - 0.006).abs() < 1e-12);
}

/// What the recorder's thread saw, passed to the test as it happens.
enum Seen {
    Message,
    Link(bool),
}

/// Keeps what the recorder saw and signals each event on a channel, so the
/// test waits for the recorder instead of sleeping for a guessed time.
struct Signalling {
    messages: Vec<Tracked>,
    changes: Vec<bool>,
    tx: std::sync::mpsc::Sender<Seen>,
}

impl gleaner::recorder::PortObserver for Signalling {
    fn message(&mut self, tracked: &Tracked, _host_time_us: u64, _stats: &LinkStats) {
        self.messages.push(tracked.clone());
        let _ = self.tx.send(Seen::Message);
    }
    fn tick(&mut self, _stats: &LinkStats, _idle_for: Duration) -> bool {
        false
    }
    fn link_changed(&mut self, connected: bool, _detail: &str, _host_time_us: u64) {
        self.changes.push(connected);
        let _ = self.tx.send(Seen::Link(connected));
    }
}

/// Generous: the events come in milliseconds; a loaded machine may take seconds.
const EVENT_DEADLINE: Duration = Duration::from_secs(20);

/// Waits for `count` messages, failing after the deadline.
fn await_messages(rx: &std::sync::mpsc::Receiver<Seen>, mut count: usize) {
    while count > 0 {
        match rx
            .recv_timeout(EVENT_DEADLINE)
            .expect("the recorder reports each message")
        {
            Seen::Message => count -= 1,
            Seen::Link(connected) => panic!("link changed to {connected} while messages were due"),
        }
    }
}

/// Waits for the link to change to `connected`.
fn await_link(rx: &std::sync::mpsc::Receiver<Seen>, connected: bool) {
    match rx
        .recv_timeout(EVENT_DEADLINE)
        .expect("the recorder reports the link change")
    {
        Seen::Link(now) => assert_eq!(now, connected),
        Seen::Message => panic!("a message while the link should change to {connected}"),
    }
}

/// Waits until the recorder has the port open: on every connect it asks the
/// node for its `Hello`, so a whole frame arrives on the node's side.
fn await_hello_request(master: &mut TTYPort) {
    master.set_timeout(Duration::from_millis(100)).unwrap();
    let deadline = Instant::now() + EVENT_DEADLINE;
    let mut byte = [0u8; 1];
    loop {
        assert!(
            Instant::now() < deadline,
            "the recorder opened the port and asked for a Hello"
        );
        if matches!(std::io::Read::read(master, &mut byte), Ok(1)) && byte[0] == 0 {
            return;
        }
    }
}

#[test]
fn ten_unplug_replug_cycles_reconnect_each_time_and_mark_every_gap() {
    const CYCLES: u16 = 10;
    let dir = tempfile::tempdir().unwrap();
    let link = dir.path().join("node");
    let log = dir.path().join("unplug.gleanlog");
    let (mut master, mut slave, first_path) = scripted();
    std::os::unix::fs::symlink(&first_path, &link).unwrap();
    let stop = Arc::new(AtomicBool::new(false));
    let link_name = link.to_string_lossy().into_owned();
    let (tx, rx) = std::sync::mpsc::channel();
    let recorder_thread = {
        let (stop, log, link_name) = (stop.clone(), log.clone(), link_name.clone());
        std::thread::spawn(move || {
            let mut recorder = Recorder::create(&log, &link_name).unwrap();
            let mut observer = Signalling {
                messages: Vec::new(),
                changes: Vec::new(),
                tx,
            };
            run_port(&mut recorder, &link_name, 115_200, &stop, &mut observer).unwrap();
            recorder.finish().unwrap();
            observer
        })
    };
    await_hello_request(&mut master);
    // Each cycle: five frames arrive, the device disappears, three frames are
    // sent while it is gone (lost), and it comes back under the same name.
    let mut expected = Vec::new();
    for cycle in 0..CYCLES {
        let base = cycle * 8;
        let batch: Vec<u8> = (base..base + 5)
            .flat_map(|i| {
                frame(&report(
                    i,
                    u64::from(i) * 1_000,
                    1_000_000,
                    ConverterState::Harvesting,
                ))
            })
            .collect();
        master.write_all(&batch).unwrap();
        expected.extend(base..base + 5);
        await_messages(&rx, 5);
        drop(master);
        drop(slave);
        std::fs::remove_file(&link).unwrap();
        await_link(&rx, false);
        let (m, s, path) = scripted();
        std::os::unix::fs::symlink(&path, &link).unwrap();
        (master, slave) = (m, s);
        await_link(&rx, true);
        await_hello_request(&mut master);
    }
    let last = CYCLES * 8;
    master
        .write_all(&frame(&report(
            last,
            u64::from(last) * 1_000,
            1_000_000,
            ConverterState::Harvesting,
        )))
        .unwrap();
    expected.push(last);
    await_messages(&rx, 1);
    stop.store(true, Ordering::Relaxed);
    let observer = recorder_thread.join().unwrap();
    let seqs: Vec<u16> = observer.messages.iter().map(|t| t.message.seq).collect();
    assert_eq!(seqs, expected, "nothing outside the gaps is lost");
    assert_eq!(observer.changes, [false, true].repeat(usize::from(CYCLES)));
    let markers: Vec<MarkerKind> = LogReader::new(std::fs::File::open(&log).unwrap())
        .filter_map(|r| match r.body {
            RecordBody::Marker { kind, .. } => Some(kind),
            _ => None,
        })
        .collect();
    let mut expected_markers = vec![MarkerKind::PortOpened];
    for _ in 0..CYCLES {
        expected_markers.extend([MarkerKind::PortLost, MarkerKind::PortOpened]);
    }
    expected_markers.push(MarkerKind::Stopped);
    assert_eq!(markers, expected_markers);
    let report = analyze_file(&log).unwrap();
    assert_eq!(report.recording_gaps, u32::from(CYCLES));
    assert_eq!(
        report.link.lost_frames,
        3 * u64::from(CYCLES),
        "the frames sent into each gap are counted lost"
    );
}

#[test]
fn device_commands_work_and_a_refusal_shows_the_reason() {
    let node = VirtualNode::new(scenario("stalled-converter", Some(0.5)), 3).unwrap();
    let port = VirtualPort::spawn(node, Some(50.0)).unwrap();
    let mut session = Session::open(&port.path(), 115_200, Duration::from_secs(3)).unwrap();
    assert_eq!(
        session.request(Command::Ping, Duration::ZERO).unwrap(),
        Outcome::Pong
    );
    assert_eq!(
        session.request(Command::GetInfo, Duration::ZERO).unwrap(),
        Outcome::Accepted
    );
    let mut config = session
        .hello
        .as_ref()
        .expect("GetInfo brings a Hello")
        .config
        .clone();
    let good = config.clone();
    config.thresholds.hold_uv = config.thresholds.start_uv;
    assert_eq!(
        session
            .request(Command::SetConfig(config), Duration::ZERO)
            .unwrap(),
        Outcome::Refused(Refusal::HoldNotBelowStart)
    );
    assert_eq!(
        Refusal::HoldNotBelowStart.to_string(),
        "the stop voltage must be below the start voltage"
    );
    let mut better = good;
    better.report_interval_ms = 3_000;
    assert_eq!(
        session
            .request(Command::SetConfig(better), Duration::ZERO)
            .unwrap(),
        Outcome::Accepted
    );
    session.request(Command::GetInfo, Duration::ZERO).unwrap();
    assert_eq!(
        session.hello.as_ref().unwrap().config.report_interval_ms,
        3_000
    );
    assert_eq!(
        session.hello.as_ref().unwrap().config_source,
        ConfigSource::Received
    );
    // A burst of 40 samples arrives complete.
    assert_eq!(
        session
            .request(Command::StartBurst { samples: 40 }, Duration::from_secs(5))
            .unwrap(),
        Outcome::Accepted
    );
    let indices: Vec<u32> = session.samples.iter().map(|s| s.0).collect();
    assert_eq!(indices, (0..40).collect::<Vec<u32>>());
    port.stop().unwrap();
}

#[test]
fn a_node_that_never_answers_times_out_with_a_clear_message() {
    let (_master, _slave, path) = scripted();
    let mut session = Session::open(&path, 115_200, Duration::from_millis(300)).unwrap();
    let err = session
        .request(Command::Ping, Duration::ZERO)
        .unwrap_err()
        .to_string();
    assert!(err.contains("did not answer within 0.3 s"), "{err}");
    assert!(err.contains("baud rate"), "{err}");
}

#[test]
fn a_wrong_baud_rate_shows_as_errors_and_is_named() {
    // At a wrong rate the bytes arrive mangled: model it by flipping bits.
    let (mut master, _slave, path) = scripted();
    let mut garbage = Vec::new();
    for i in 0..40u16 {
        let mut f = frame(&report(
            i,
            u64::from(i) * 1_000,
            1_000_000,
            ConverterState::Harvesting,
        ));
        for b in f.iter_mut().filter(|b| **b != 0) {
            *b ^= 0x55;
            if *b == 0 {
                *b = 0x11;
            }
        }
        garbage.extend(f);
    }
    master.write_all(&garbage).unwrap();
    let mut recorder = Recorder::new(None);
    let stop = AtomicBool::new(false);
    let started = Instant::now();
    let mut observer = Collect::new(move |stats, _| {
        stats.damaged() >= 40 || started.elapsed() > Duration::from_secs(5)
    });
    run_port(&mut recorder, &path, 115_200, &stop, &mut observer).unwrap();
    assert_eq!(recorder.stats().frames, 0);
    assert!(recorder.stats().likely_wrong_baud());
}

#[test]
fn a_protocol_major_mismatch_stops_with_both_versions() {
    let (mut master, _slave, path) = scripted();
    let mut h = hello(1, 1);
    if let UplinkBody::Hello(hello) = &mut h.body {
        hello.protocol = ProtocolVersion { major: 9, minor: 1 };
    }
    master.write_all(&frame(&h)).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let mut recorder = Recorder::create(&dir.path().join("v.gleanlog"), &path).unwrap();
    let stop = AtomicBool::new(false);
    let started = Instant::now();
    let mut observer = Collect::new(move |_, _| started.elapsed() > Duration::from_secs(5));
    let err = run_port(&mut recorder, &path, 115_200, &stop, &mut observer)
        .unwrap_err()
        .to_string();
    let ours = gleaner_protocol::PROTOCOL_VERSION.to_string();
    assert!(err.contains("9.1") && err.contains(&ours), "{err}");
}

#[test]
fn opening_a_missing_port_says_what_to_do() {
    let err = Session::open("/dev/ttyGLEANER-none", 115_200, Duration::from_secs(1))
        .err()
        .unwrap()
        .to_string();
    assert!(err.contains("gleaner ports"), "{err}");
}

#[test]
fn ports_are_listed_without_error() {
    // The list may be empty on a CI machine; it must not fail.
    let ports = gleaner::link::list_ports().unwrap();
    for p in ports {
        assert!(!p.name.is_empty());
        assert!(["usb", "pci", "bluetooth", "unknown"].contains(&p.kind.as_str()));
    }
}

/// A report of a node that has run for an hour.
fn running_for_an_hour() -> Vec<u8> {
    frame(&report(
        50,
        3_600_000,
        1_000_000,
        ConverterState::Harvesting,
    ))
}

#[test]
fn the_recorder_asks_a_running_node_for_its_hello() {
    // A node that has run for an hour when the laptop is attached: its Hello
    // went out long ago, reports keep coming.
    let (mut master, _slave, path) = scripted();
    master.set_timeout(Duration::from_millis(50)).unwrap();
    master.write_all(&running_for_an_hour()).unwrap();
    let node = std::thread::spawn(move || {
        let mut got = Vec::new();
        let mut buf = [0u8; 256];
        let deadline = Instant::now() + Duration::from_secs(5);
        while Instant::now() < deadline && !got.contains(&0) {
            if let Ok(n) = std::io::Read::read(&mut master, &mut buf) {
                got.extend_from_slice(&buf[..n]);
            }
        }
        let end = got.iter().position(|&b| b == 0).expect("a request frame");
        let request: Downlink = decode_frame(&mut got[..end]).expect("a downlink");
        // Answered as the firmware does: the Hello, then the next report.
        let answer = Uplink {
            seq: 51,
            ..hello(7, 3_600_500)
        };
        master.write_all(&frame(&answer)).unwrap();
        master
            .write_all(&frame(&report(
                52,
                3_601_000,
                1_000_000,
                ConverterState::Harvesting,
            )))
            .unwrap();
        (master, request)
    });
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("attached.gleanlog");
    record_until(&path, &log, 3);
    let (_master, request) = node.join().unwrap();
    assert_eq!(request.command, Command::GetInfo);
    let report = analyze_file(&log).unwrap();
    assert_eq!(report.boots.len(), 1, "{:?}", report.warnings);
    assert_eq!(report.boots[0].boot_id, 7);
    assert_eq!(report.link.lost_frames, 0);
    assert!(!report.warnings.iter().any(|w| w.contains("no Hello")));
}

#[test]
fn a_log_without_a_hello_says_so() {
    let (mut master, _slave, path) = scripted();
    master.write_all(&running_for_an_hour()).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("silent.gleanlog");
    record_until(&path, &log, 1);
    let report = analyze_file(&log).unwrap();
    assert!(report.boots.is_empty());
    assert!(
        report.warnings.iter().any(|w| w.contains("no Hello")),
        "{:?}",
        report.warnings
    );
}

#[test]
fn settings_are_applied_on_the_present_configuration_or_refused_with_the_reason() {
    let node = VirtualNode::new(scenario("stalled-converter", Some(0.5)), 3).unwrap();
    let port = VirtualPort::spawn(node, Some(50.0)).unwrap();
    let mut session = Session::open(&port.path(), 115_200, Duration::from_secs(3)).unwrap();
    // One key changed; the rest is what the node has (its Hello is asked first).
    let settings = gleaner::settings::NodeSettings::from_toml("report_interval_ms = 2500").unwrap();
    let sent = session.apply_settings(&settings).unwrap();
    assert_eq!(sent.report_interval_ms, 2_500);
    let before = session.hello.clone().expect("the Hello asked for first");
    assert_eq!(
        NodeConfig {
            report_interval_ms: before.config.report_interval_ms,
            ..sent.clone()
        },
        before.config
    );
    session.request(Command::GetInfo, Duration::ZERO).unwrap();
    assert_eq!(session.hello.as_ref().unwrap().config, sent);
    // A stop voltage above the start voltage: the node's own reason, and its
    // settings unchanged.
    let settings = gleaner::settings::NodeSettings::from_toml("stop_v = 5.0").unwrap();
    let err = session.apply_settings(&settings).unwrap_err();
    assert_eq!(
        gleaner::failure::Failure::exit_code(&err),
        gleaner::failure::Failure::Refused.code(),
        "{err:#}"
    );
    assert!(format!("{err:#}").contains("stop voltage"), "{err:#}");
    session.request(Command::GetInfo, Duration::ZERO).unwrap();
    assert_eq!(session.hello.as_ref().unwrap().config, sent);
}
