//! `gleaner demo`: the whole path with no hardware.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use crate::analysis::{analyze_file, html, text};
use crate::sim::scenarios::scenario::DEFAULT_SCENARIO;
use crate::sim::{GroundTruth, Scenario};

/// Run a scenario on a virtual node, record it through a pseudo-terminal
/// exactly as from a real port, show it live, and report on the recording.
#[derive(Debug, Args)]
pub struct Cmd {
    /// Built-in scenario (see `gleaner sim list`) or a scenario TOML file.
    #[arg(long, default_value = DEFAULT_SCENARIO)]
    pub scenario: String,
    /// Simulated time runs this many times faster than real time
    /// (default: the whole scenario in about 20 seconds).
    #[arg(long)]
    pub speed: Option<f64>,
    /// Folder for the log and the HTML report (default: the configuration
    /// file's `runs_dir`, else `gleaner-runs`).
    #[arg(long, alias = "out", env = crate::user_config::RUNS_DIR_ENV)]
    pub dir: Option<PathBuf>,
    /// One line per report instead of the full screen.
    #[arg(long, help = super::PLAIN_HELP)]
    pub plain: bool,
}

impl Cmd {
    /// Runs the demo.
    pub fn run(self) -> Result<()> {
        let scenario = Scenario::load(&self.scenario)?;
        let speed = self.speed.unwrap_or(scenario.duration_s() / 20.0).max(1.0);
        say!(
            "Gleaner demo: scenario '{}' ({:.1} h simulated, {speed:.0}x real time)",
            scenario.name,
            scenario.duration_h
        )?;
        say!("  {}", scenario.description)?;
        let name = scenario.name.clone();
        let boot_id = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.subsec_nanos())
            .unwrap_or(1);
        let dir = crate::user_config::UserConfig::load()?.runs_dir(self.dir.clone());
        let log_path = super::new_log_path(&dir, &name);
        let truth = self.record_live(scenario, boot_id, speed, &log_path)?;

        let report = analyze_file(&log_path)?;
        say!()?;
        say_part!("{}", text::render(&report))?;
        let html_path = log_path.with_extension("html");
        match html::render(&report) {
            Ok(page) => crate::files::write_atomic(&html_path, page.as_bytes())?,
            Err(e) => eprintln!("warning: the HTML report could not be drawn: {e}"),
        }
        say_truth(&report, &truth)?;
        say_next(&log_path, &html_path)?;
        Ok(())
    }

    /// Runs the virtual node on a pseudo-terminal, records it to `log_path`
    /// exactly as from a real port and shows it live; returns the truth.
    #[cfg(unix)]
    fn record_live(
        &self,
        scenario: Scenario,
        boot_id: u32,
        speed: f64,
        log_path: &std::path::Path,
    ) -> Result<GroundTruth> {
        use crate::link::DEFAULT_BAUD;
        use crate::recorder::{run_port, Recorder};
        use crate::sim::run::port::VirtualPort;
        use crate::view::observer::{Display, LiveObserver};
        use std::sync::atomic::Ordering;
        use std::time::Duration;
        let name = scenario.name.clone();
        let node = crate::sim::VirtualNode::new(scenario, boot_id)?;
        let port = VirtualPort::spawn(node, Some(speed))?;
        let mut recorder = Recorder::create(
            log_path,
            &format!("virtual node '{name}' on {}", port.path()),
        )?;
        say!(
            "  virtual node on {}; recording to {}",
            port.path(),
            log_path.display()
        )?;

        let stop = super::stop_flag()?;
        let display = Display::choose(self.plain, Some(Duration::from_secs(2)));
        let port_ref = &port;
        let mut observer = LiveObserver::new(
            display,
            &format!("virtual node: {name}"),
            Box::new(std::io::stdout()),
            Box::new(move |_, idle| port_ref.finished() && idle > Duration::from_millis(500)),
        );
        let result = run_port(
            &mut recorder,
            &port.path(),
            DEFAULT_BAUD,
            &stop,
            &mut observer,
        );
        observer.close();
        let quit = observer.quit || stop.load(Ordering::Relaxed);
        drop(observer);
        recorder.finish()?;
        result?;
        let progress = port.progress();
        let truth = port.stop()?;
        if quit {
            say!(
                "stopped early at {:.1} of {:.1} simulated hours",
                progress.simulated_s / 3600.0,
                progress.total_s / 3600.0
            )?;
        }
        Ok(truth)
    }

    /// Without pseudo-terminals (Windows), the scenario is simulated straight
    /// into the log, with no live view; the report is the same.
    #[cfg(not(unix))]
    fn record_live(
        &self,
        scenario: Scenario,
        boot_id: u32,
        _speed: f64,
        log_path: &std::path::Path,
    ) -> Result<GroundTruth> {
        say!(
            "  no pseudo-terminal here: simulating straight into {}",
            log_path.display()
        )?;
        if let Some(dir) = log_path.parent() {
            std::fs::create_dir_all(dir)?;
        }
        let progress = crate::progress::steps(
            scenario.duration_s() as u64,
            &format!("simulating {}", scenario.name),
            "simulated s",
        );
        let truth = crate::sim::run::engine::simulate_to_log(
            scenario,
            boot_id,
            log_path,
            crate::log::now_us(),
            &progress,
        )?;
        progress.finish_and_clear();
        Ok(truth)
    }
}

/// The simulator's ground truth beside what the node metered.
fn say_truth(report: &crate::analysis::RunReport, truth: &crate::sim::GroundTruth) -> Result<()> {
    say!()?;
    say!("SIMULATOR GROUND TRUTH (what really happened)")?;
    say!(
        "  drawn {}, delivered {}, storage change {}, efficiency {}",
        text::energy(truth.drawn_j),
        text::energy(truth.delivered_j),
        text::energy(truth.storage_now_j - truth.storage_start_j),
        truth
            .efficiency()
            .map_or("-".into(), |e| format!("{:.1} %", e * 100.0))
    )?;
    if truth.drawn_j > 0.0 {
        say!(
            "  the node's drawn energy is within {:.2} % of the truth, delivered within {:.2} %",
            (report.energy.drawn_j - truth.drawn_j).abs() / truth.drawn_j * 100.0,
            (report.energy.delivered_j - truth.delivered_j).abs() / truth.delivered_j.max(1e-12)
                * 100.0
        )?;
    }
    Ok(())
}

/// Where the log and page are, and what to run next.
fn say_next(log_path: &std::path::Path, html_path: &std::path::Path) -> Result<()> {
    say!()?;
    say!("Log:  {}", log_path.display())?;
    say!(
        "Page: {} (open it in a browser; it needs no network)",
        html_path.display()
    )?;
    say!(
        "Next: gleaner report {}       (the same report again, or --json)",
        log_path.display()
    )?;
    say!(
        "      gleaner watch --replay {}   (watch it again)",
        log_path.display()
    )?;
    say!("      gleaner demo --scenario crate-beacon   (other scenarios: gleaner sim list)")?;
    Ok(())
}
