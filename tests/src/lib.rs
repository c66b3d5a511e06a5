//! Helpers shared by the end-to-end tests: running scenarios, pseudo-terminal
//! pairs, and scripted writers that behave like a node.

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::sync::OnceLock;
use std::time::Duration;

use anyhow::Result;
use gleaner::analysis::{analyze_file, RunReport};
use gleaner::link::{LinkStats, Tracked};
use gleaner::recorder::{run_port, PortObserver, Recorder};
use gleaner::sim::run::port::VirtualPort;
use gleaner::sim::{GroundTruth, Scenario, VirtualNode};

/// The repository's top folder.
pub fn workspace() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .map_or_else(|| PathBuf::from(".."), Path::to_path_buf)
}

/// True when a missing outside tool fails a test instead of skipping it:
/// `.ci/run` sets `GLEANER_REQUIRE_TOOLS=1` (a skip there would hide a
/// broken set-up); a plain `cargo test` skips with the reason on stderr.
pub fn tools_required() -> bool {
    std::env::var_os("GLEANER_REQUIRE_TOOLS").is_some_and(|v| v == "1")
}

/// `found`, or None after saying on stderr which test tier is skipped and
/// how to get `what`; fails instead when tools are required.
fn present_or_skip(found: Option<PathBuf>, what: &str, how: &str) -> Option<PathBuf> {
    if found.is_none() {
        assert!(!tools_required(), "{what} is missing: {how}");
        // Written to stderr itself, not through `eprintln!`, which the test
        // harness captures for passing tests: the skip must be seen.
        use std::io::Write;
        let _ = writeln!(std::io::stderr(), "skipped: {what} is missing ({how})");
    }
    found
}

/// The Python with the reference libraries: `GLEANER_PYTHON`, else the
/// `.venv` that `bash .ci/run` makes; None (the test skips) without it.
pub fn reference_python() -> Option<PathBuf> {
    static FOUND: OnceLock<Option<PathBuf>> = OnceLock::new();
    let found = FOUND.get_or_init(|| {
        let python = std::env::var_os("GLEANER_PYTHON")
            .map(PathBuf::from)
            .unwrap_or_else(|| workspace().join(".venv/bin/python"));
        python.exists().then_some(python)
    });
    present_or_skip(
        found.clone(),
        "a Python with the reference libraries",
        "run `bash .ci/run` once (it makes .venv) or set GLEANER_PYTHON",
    )
}

/// `program` when `program --version` runs (looked up once per test binary).
fn runnable(cell: &'static OnceLock<Option<PathBuf>>, program: PathBuf) -> Option<PathBuf> {
    cell.get_or_init(|| {
        std::process::Command::new(&program)
            .arg("--version")
            .output()
            .is_ok_and(|o| o.status.success())
            .then_some(program)
    })
    .clone()
}

/// The Arm system emulator for the emulated node; None (the test skips) without it.
pub fn qemu() -> Option<PathBuf> {
    static FOUND: OnceLock<Option<PathBuf>> = OnceLock::new();
    present_or_skip(
        runnable(&FOUND, PathBuf::from("qemu-system-arm")),
        "qemu-system-arm",
        "apt-get install qemu-system-arm, or run `bash .ci/run`",
    )
}

/// The headless browser: `GLEANER_BROWSER`, else `chromium`; None (the test
/// skips) without it.
pub fn browser() -> Option<PathBuf> {
    static FOUND: OnceLock<Option<PathBuf>> = OnceLock::new();
    let browser = std::env::var_os("GLEANER_BROWSER")
        .map_or_else(|| PathBuf::from("chromium"), PathBuf::from);
    present_or_skip(
        runnable(&FOUND, browser),
        "a headless browser",
        "install Debian's chromium (`bash .ci/run` does) or set GLEANER_BROWSER",
    )
}

/// A scenario, shortened to `hours` when given.
pub fn scenario(name: &str, hours: Option<f64>) -> Scenario {
    let mut s = Scenario::builtin(name).expect("built-in scenario");
    if let Some(h) = hours {
        s.duration_h = h;
    }
    s
}

/// Observes a port loop: collects messages, stops when `stop_when` says so.
pub struct Collect<F: FnMut(&LinkStats, Duration) -> bool> {
    /// Messages seen.
    pub messages: Vec<Tracked>,
    /// Link changes seen (connected?, detail).
    pub changes: Vec<(bool, String)>,
    stop_when: F,
}

impl<F: FnMut(&LinkStats, Duration) -> bool> Collect<F> {
    /// A collector that stops when `stop_when` returns true.
    pub fn new(stop_when: F) -> Self {
        Collect {
            messages: Vec::new(),
            changes: Vec::new(),
            stop_when,
        }
    }
}

impl<F: FnMut(&LinkStats, Duration) -> bool> PortObserver for Collect<F> {
    fn message(&mut self, tracked: &Tracked, _host_time_us: u64, _stats: &LinkStats) {
        self.messages.push(tracked.clone());
    }
    fn tick(&mut self, stats: &LinkStats, idle_for: Duration) -> bool {
        (self.stop_when)(stats, idle_for)
    }
    fn link_changed(&mut self, connected: bool, detail: &str, _host_time_us: u64) {
        self.changes.push((connected, detail.to_string()));
    }
}

/// Runs `scenario` on a virtual node behind a pseudo-terminal, records it
/// through the serial path into `dir`, and returns the log, its report and the
/// ground truth.
pub fn record_virtual_run(
    scenario: Scenario,
    dir: &Path,
) -> Result<(PathBuf, RunReport, GroundTruth, Vec<Tracked>)> {
    let node = VirtualNode::new(scenario, 0x5EED)?;
    let port = VirtualPort::spawn(node, None)?;
    let log = dir.join("run.gleanlog");
    let mut recorder = Recorder::create(&log, &port.path())?;
    let stop = AtomicBool::new(false);
    let messages = {
        let port_ref = &port;
        let mut observer =
            Collect::new(move |_, idle| port_ref.finished() && idle > Duration::from_millis(300));
        run_port(&mut recorder, &port.path(), 115_200, &stop, &mut observer)?;
        observer.messages
    };
    recorder.finish()?;
    let truth = port.stop()?;
    let report = analyze_file(&log)?;
    Ok((log, report, truth, messages))
}

/// Relative difference of `a` from `b`.
pub fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-12)
}
