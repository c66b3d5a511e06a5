//! `gleaner sim`: scenarios and source curves of the virtual node.

#[cfg(unix)]
use std::io::Write;
use std::path::PathBuf;
#[cfg(unix)]
use std::sync::Arc;

use anyhow::{bail, Result};
use clap::{Args, Subcommand};

use crate::sim::models::numeric::golden_max;
use crate::sim::models::source::{Source, SourceParams};
use crate::sim::run::engine::simulate_to_log;
use crate::sim::scenarios::scenario::BUILTIN;
use crate::sim::Scenario;

/// Virtual-node tools.
#[derive(Debug, Args)]
pub struct Cmd {
    /// What to do.
    #[command(subcommand)]
    pub action: Action,
}

/// Virtual-node actions.
#[derive(Debug, Subcommand)]
pub enum Action {
    /// List the built-in scenarios.
    List {
        /// Print JSON instead of a table.
        #[arg(long)]
        json: bool,
    },
    /// Print a scenario's TOML (a starting point for your own).
    Show {
        /// Built-in name or file.
        scenario: String,
    },
    /// Print a source's I-V curve and maximum-power point as CSV, to compare
    /// the model with measurements of your own cell.
    Curve(Curve),
    /// Write a long, invented log quickly (a daily cycle, no physics), for
    /// benchmarks and trying the analysis on big files.
    Synthetic {
        /// Days of reports.
        #[arg(long, default_value_t = 30.0)]
        days: f64,
        /// Seconds between reports.
        #[arg(long, default_value_t = 1)]
        interval_s: u64,
        /// Log file to create.
        #[arg(long)]
        out: PathBuf,
    },
    /// Simulate a scenario straight into a log file, as fast as possible
    /// (no pseudo-terminal; host times are simulated).
    Run {
        /// Built-in name or file.
        scenario: String,
        /// Log file to create.
        #[arg(long)]
        out: PathBuf,
    },
    /// Simulate an invented fleet into a folder of logs, one per node (the
    /// built-in scenarios in turn, each with its own seed and identity), on
    /// every core: for trying fleet reports and the Parquet dataset.
    Fleet {
        /// Nodes in the fleet.
        #[arg(long, default_value_t = 10)]
        nodes: usize,
        /// Days simulated.
        #[arg(long, default_value_t = 7.0)]
        days: f64,
        /// Seed of the fleet.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Folder for the logs.
        #[arg(long)]
        dir: PathBuf,
    },
    /// Run a virtual node on a pseudo-terminal of its own until stopped
    /// (Ctrl-C): practise `watch`, `record` and `node` on it from another
    /// terminal, or attach any serial program. With nobody attached its bytes
    /// are dropped, as a real node's are; after the scenario ends the node
    /// still answers commands.
    Serve(Serve),
    /// Judge the node's forecasts against the truth over a corpus of
    /// randomized, invented scenarios: coverage, share within ±20 %, median
    /// signed error (positive: optimistic) and flapping, today's (protocol 1,
    /// replayed) and the node's side by side.
    Score {
        /// Scenarios in the corpus.
        #[arg(long, default_value_t = 200)]
        scenarios: usize,
        /// Seed of the corpus.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Also run every scenario with the load ignoring the shed pin and
        /// compare the minutes without power.
        #[arg(long)]
        compare_shedding: bool,
        /// Print JSON instead of a table.
        #[arg(long)]
        json: bool,
    },
}

/// A virtual node served on a pseudo-terminal.
#[derive(Debug, Args)]
pub struct Serve {
    /// Built-in name or file.
    #[arg(default_value = crate::sim::scenarios::scenario::DEFAULT_SCENARIO)]
    pub scenario: String,
    /// Simulated time runs this many times faster than real time (1: real time).
    #[arg(long, default_value_t = 1.0)]
    pub speed: f64,
    /// Also make a symbolic link to the device here (a name that stays put).
    /// SIGUSR1 unplugs the node for a second and plugs it back in on a new
    /// pseudo-terminal behind the same link; SIGUSR2 behind the link's name
    /// with `-moved` added, as an adapter moved to another USB socket.
    #[arg(long)]
    pub link: Option<PathBuf>,
    /// Boot id of the virtual node.
    #[arg(long, default_value_t = 1)]
    pub boot_id: u32,
    /// While plugged in, hold simulated time until the reader takes the
    /// node's bytes instead of dropping what the line cannot take (for
    /// measuring a recorder's own losses on a busy machine).
    #[arg(long)]
    pub wait_for_reader: bool,
    /// Put the node on a virtual bench: lines on standard input set what its
    /// channels see (`input_v 0.1`, `input_a 0.002`, `output_v 3.3`,
    /// `output_a 0.0005`, `input_v off`, `off`), to practise calibration.
    #[arg(long)]
    pub bench: bool,
}

impl Serve {
    /// Serves until SIGINT or SIGTERM.
    #[cfg(not(unix))]
    fn run(self) -> Result<()> {
        use crate::failure::FailedAs;
        Err(anyhow::anyhow!(
            "sim serve needs a pseudo-terminal, which this system does not have (Linux and macOS do); `gleaner sim run {} --out LOG` simulates the scenario into a log instead",
            self.scenario
        ))
        .failed_as(crate::failure::Failure::Usage)
    }

    /// Serves until SIGINT or SIGTERM.
    #[cfg(unix)]
    fn run(self) -> Result<()> {
        if !(self.speed.is_finite() && self.speed > 0.0 && self.speed <= 1e6) {
            bail!(
                "--speed must be above 0 and at most 1000000, got {}",
                self.speed
            );
        }
        let stop = super::stop_flag()?;
        let port = self.spawn()?;
        let mut out = std::io::stdout();
        let mut replugging = Replugging::on_signals(self.link.clone())?;
        let mut said_over = false;
        while !stop.load(std::sync::atomic::Ordering::Relaxed) {
            std::thread::sleep(std::time::Duration::from_millis(100));
            if port.finished() && !said_over {
                said_over = true;
                writeln!(out, "the scenario is over; the node still answers commands")?;
                out.flush()?;
            }
            if let Some(said) = replugging.follow(&port)? {
                writeln!(out, "{said}")?;
                out.flush()?;
            }
        }
        let progress = port.progress();
        port.stop()?;
        if let Some(link) = &replugging.link {
            let _ = std::fs::remove_file(link);
        }
        writeln!(
            out,
            "frames sent whole {}, not sent {} (unplugged, or nobody reading); {:.1} simulated hours",
            progress.frames_sent,
            progress.frames_dropped,
            progress.simulated_s / 3600.0
        )?;
        Ok(())
    }

    /// Starts the virtual node on its pseudo-terminal (and link) and says
    /// where it is.
    #[cfg(unix)]
    fn spawn(&self) -> Result<crate::sim::run::port::VirtualPort> {
        use crate::sim::run::port::{Unread, VirtualPort};
        let scenario = Scenario::load(&self.scenario)?;
        let name = scenario.name.clone();
        let mut node = crate::sim::VirtualNode::new(scenario, self.boot_id)?;
        if self.bench {
            let bench = crate::sim::run::bench::Bench::default();
            node.attach_bench(bench.clone());
            obey_bench_lines(bench);
        }
        let unread = if self.wait_for_reader {
            Unread::Wait
        } else {
            Unread::Drop
        };
        let port = VirtualPort::spawn_with(node, Some(self.speed), unread)?;
        let shown = match &self.link {
            Some(link) => {
                std::os::unix::fs::symlink(port.path(), link)
                    .map_err(|e| anyhow::anyhow!("cannot make the link {}: {e}", link.display()))?;
                format!("{} (linked from {})", port.path(), link.display())
            }
            None => port.path().to_string(),
        };
        let mut out = std::io::stdout();
        writeln!(
            out,
            "virtual node '{name}' (an invented scenario) on {shown}, {}x real time",
            self.speed
        )?;
        writeln!(
            out,
            "try in another terminal: gleaner watch {}   (Ctrl-C here stops the node)",
            port.path()
        )?;
        out.flush()?;
        Ok(port)
    }
}

/// How long a virtual node stays unplugged on SIGUSR1 or SIGUSR2.
#[cfg(unix)]
const UNPLUGGED_FOR: std::time::Duration = std::time::Duration::from_secs(1);

/// A served node unplugged and plugged back in on a signal, for trying a
/// recorder's reconnection: SIGUSR1 plugs it back in behind the same link,
/// SIGUSR2 behind the link's name with `-moved` added (another USB socket).
#[cfg(unix)]
struct Replugging {
    same: Arc<std::sync::atomic::AtomicBool>,
    moved: Arc<std::sync::atomic::AtomicBool>,
    /// The link now.
    link: Option<PathBuf>,
    /// Unplugged, to come back behind this link after this many replugs.
    pending: Option<(Option<PathBuf>, u64)>,
}

#[cfg(unix)]
impl Replugging {
    fn on_signals(link: Option<PathBuf>) -> Result<Self> {
        let (same, moved) = (Arc::default(), Arc::default());
        signal_hook::flag::register(signal_hook::consts::SIGUSR1, Arc::clone(&same))?;
        signal_hook::flag::register(signal_hook::consts::SIGUSR2, Arc::clone(&moved))?;
        Ok(Replugging {
            same,
            moved,
            link,
            pending: None,
        })
    }

    /// Unplugs on a signal and links the new pseudo-terminal once plugged
    /// back in; says what it did.
    fn follow(&mut self, port: &crate::sim::run::port::VirtualPort) -> Result<Option<String>> {
        use std::sync::atomic::Ordering::Relaxed;
        let moved = self.moved.swap(false, Relaxed);
        if (self.same.swap(false, Relaxed) || moved) && self.pending.is_none() {
            let back_behind = match (&self.link, moved) {
                (Some(link), true) => {
                    let mut name = link.as_os_str().to_owned();
                    name.push("-moved");
                    Some(PathBuf::from(name))
                }
                (link, _) => link.clone(),
            };
            if let Some(link) = self.link.take() {
                let _ = std::fs::remove_file(link);
            }
            self.pending = Some((back_behind, port.replugs() + 1));
            port.unplug_for(UNPLUGGED_FOR);
            return Ok(Some("unplugged".into()));
        }
        let Some((back_behind, _)) = self.pending.take_if(|(_, n)| port.replugs() >= *n) else {
            return Ok(None);
        };
        let path = port.path();
        if let Some(link) = &back_behind {
            let _ = std::fs::remove_file(link);
            std::os::unix::fs::symlink(&path, link)
                .map_err(|e| anyhow::anyhow!("cannot make the link {}: {e}", link.display()))?;
        }
        self.link = back_behind;
        Ok(Some(match &self.link {
            Some(link) => format!("plugged back in on {path} (linked from {})", link.display()),
            None => format!("plugged back in on {path}"),
        }))
    }
}

/// Reads bench settings from standard input, one per line, on a thread of
/// its own; says what it did (or why not) on standard output.
#[cfg(unix)]
fn obey_bench_lines(bench: crate::sim::run::bench::Bench) {
    std::thread::spawn(move || {
        use std::io::BufRead;
        for line in std::io::stdin().lock().lines() {
            let Ok(line) = line else { break };
            if line.trim().is_empty() {
                continue;
            }
            let said = match bench.obey(&line) {
                Ok(done) => done,
                Err(why) => format!("bench: not done: {why:#}"),
            };
            let mut out = std::io::stdout().lock();
            if writeln!(out, "{said}").and_then(|()| out.flush()).is_err() {
                break;
            }
        }
    });
}

/// Conditions for a curve.
#[derive(Debug, Args)]
pub struct Curve {
    /// The scenario whose source to use (built-in name or file).
    #[arg(long, default_value = crate::sim::scenarios::scenario::DEFAULT_SCENARIO)]
    pub scenario: String,
    /// Irradiance for a solar source, W/m².
    #[arg(long)]
    pub irradiance: Option<f64>,
    /// Cell temperature for a solar source, °C.
    #[arg(long)]
    pub celsius: Option<f64>,
    /// Depth of discharge for a cell (0 fresh, 1 spent).
    #[arg(long)]
    pub depth: Option<f64>,
    /// Capacitor voltage for a supercapacitor, V.
    #[arg(long)]
    pub volts: Option<f64>,
    /// Temperature difference for a thermoelectric generator, K.
    #[arg(long)]
    pub delta_k: Option<f64>,
    /// Points on the curve.
    #[arg(long, default_value_t = 50)]
    pub points: usize,
}

impl Curve {
    fn source(&self) -> Result<Source> {
        let scenario = Scenario::load(&self.scenario)?;
        let mut params = scenario.source.clone();
        match &mut params {
            SourceParams::Solar {
                daylight,
                cell_celsius,
                ..
            } => {
                let g = self.irradiance.unwrap_or(daylight.peak_w_m2);
                if !(0.0..=1500.0).contains(&g) {
                    bail!("--irradiance must be 0 to 1500 W/m², got {g}");
                }
                daylight.peak_w_m2 = g;
                daylight.night_w_m2 = g;
                daylight.clouds_per_hour = 0.0;
                if let Some(c) = self.celsius {
                    *cell_celsius = c;
                }
            }
            SourceParams::Cell { cell } => {
                let d = self.depth.unwrap_or(cell.initial_depth);
                if !(0.0..=1.2).contains(&d) {
                    bail!("--depth must be 0 to 1.2, got {d}");
                }
                cell.initial_depth = d;
            }
            SourceParams::Supercap { cap } => cap.initial_v = self.volts.unwrap_or(cap.initial_v),
            SourceParams::Thermoelectric { pipe, .. } => {
                let dk = self.delta_k.unwrap_or(pipe.running_delta_k);
                pipe.running_delta_k = dk;
                pipe.idle_delta_k = dk;
            }
        }
        let mut source = Source::new(&params, 12.0, 1.0, 1);
        if let SourceParams::Thermoelectric { .. } = params {
            // Let the pipe settle at the requested difference.
            for _ in 0..100 {
                source.set_conditions(0.0, 1e6);
            }
        }
        Ok(source)
    }
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        match self.action {
            Action::List { json } => list(json)?,
            Action::Show { scenario } => match BUILTIN.iter().find(|(n, _)| *n == scenario) {
                Some((_, text)) => say_part!("{text}")?,
                None => say_part!("{}", toml::to_string(&Scenario::load(&scenario)?)?)?,
            },
            Action::Curve(c) => curve(&c)?,
            Action::Synthetic {
                days,
                interval_s,
                out,
            } => synthetic(days, interval_s, &out)?,
            Action::Run { scenario, out } => {
                let scenario = Scenario::load(&scenario)?;
                let progress = crate::progress::steps(
                    scenario.duration_s() as u64,
                    &format!("simulating {}", scenario.name),
                    "simulated s",
                );
                simulate_to_log(scenario, 1, &out, crate::log::now_us(), &progress)?;
                progress.finish_and_clear();
                say!("simulated to {}", out.display())?;
            }
            Action::Serve(serve) => serve.run()?,
            Action::Fleet {
                nodes,
                days,
                seed,
                dir,
            } => fleet(nodes, days, seed, &dir)?,
            Action::Score {
                scenarios,
                seed,
                compare_shedding,
                json,
            } => {
                let score =
                    crate::sim::judging::score::score_corpus(seed, scenarios, compare_shedding)?;
                if json {
                    say!("{}", serde_json::to_string_pretty(&score.to_json())?)?;
                } else {
                    say_part!("{}", score.render())?;
                }
            }
        }
        Ok(())
    }
}

/// `sim list`: the built-in scenarios.
fn list(json: bool) -> Result<()> {
    let mut all = Vec::new();
    for (name, _) in BUILTIN {
        let s = Scenario::builtin(name)?;
        if !json {
            say!("{name:<20} {:>5.1} h  {}", s.duration_h, s.description)?;
        }
        all.push(serde_json::json!({
            "name": name,
            "duration_h": s.duration_h,
            "description": s.description,
        }));
    }
    if json {
        say!("{}", serde_json::to_string_pretty(&all)?)?;
    }
    Ok(())
}

/// `sim curve`: a source's I-V curve as CSV, its maximum power point first.
fn curve(c: &Curve) -> Result<()> {
    if c.points < 2 || c.points > 100_000 {
        bail!("--points must be 2 to 100000");
    }
    let source = c.source()?;
    let voc = source.open_circuit_voltage();
    say!("# open-circuit voltage {voc:.6} V")?;
    let (v_mp, p_mp) = golden_max(0.0, voc.max(0.0), |v| v * source.current_at(v));
    say!(
        "# maximum power {p_mp:.6e} W at {v_mp:.6} V, {:.6e} A",
        source.current_at(v_mp)
    )?;
    say!("voltage_v,current_a,power_w")?;
    for i in 0..c.points {
        let v = voc * i as f64 / (c.points - 1) as f64;
        let a = source.current_at(v);
        say!("{v:.6},{a:.6e},{:.6e}", v * a)?;
    }
    Ok(())
}

/// `sim synthetic`: a long invented log written to a new file.
fn synthetic(days: f64, interval_s: u64, out: &std::path::Path) -> Result<()> {
    if !(days > 0.0 && days <= 3660.0) {
        bail!("--days must be above 0 and at most 3660, got {days}");
    }
    let file = std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(out)
        .map_err(|e| anyhow::anyhow!("cannot create {}: {e}", out.display()))?;
    let mut writer = std::io::BufWriter::new(file);
    let mut log =
        crate::sim::scenarios::synthetic::SyntheticLog::new((days * 86_400.0) as u64, interval_s);
    let progress = crate::progress::counting_bytes(&format!("writing {}", out.display()));
    let bytes = std::io::copy(&mut progress.wrap_read(&mut log), &mut writer)?;
    progress.finish_and_clear();
    std::io::Write::flush(&mut writer)?;
    say!("{bytes} bytes to {}", out.display())?;
    Ok(())
}

/// `sim fleet`: invented nodes simulated into one log each.
fn fleet(nodes: usize, days: f64, seed: u64, dir: &std::path::Path) -> Result<()> {
    let scenarios = crate::sim::scenarios::fleet::fleet_scenarios(nodes, days, seed)?;
    let total: f64 = scenarios.iter().map(Scenario::duration_s).sum();
    let progress = crate::progress::steps(
        total as u64,
        &format!("simulating {nodes} nodes"),
        "simulated s",
    );
    let logs = crate::sim::scenarios::fleet::simulate_fleet(scenarios, dir, &progress)?;
    progress.finish_and_clear();
    say!(
        "{} invented nodes, {days} days each, into {}",
        logs.len(),
        dir.display()
    )?;
    Ok(())
}
