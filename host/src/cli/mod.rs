//! The command-line interface: one module per command, each with `run(self)`.

/// `println!` that returns the write's error instead of panicking, so a
/// reader that closes the pipe early ends the command quietly (see
/// [`is_closed_pipe`]).
macro_rules! say {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        writeln!(std::io::stdout(), $($arg)*)
    }};
}

/// `print!` that returns the write's error instead of panicking.
macro_rules! say_part {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        write!(std::io::stdout(), $($arg)*)
    }};
}

pub mod demo;
pub mod export;
pub mod import;
pub mod node;
pub mod plan;
pub mod ports;
pub mod record;
pub mod report;
pub mod sim;
pub mod watch;

use clap::{Parser, Subcommand};

/// Gleaner: how much energy your harvester delivers, how well the step-up
/// stage converts it, and when and why your node loses power.
#[derive(Debug, Parser)]
#[command(name = "gleaner", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run a virtual node through the whole path: simulate, record, watch, report.
    Demo(demo::Cmd),
    /// List serial ports, to find the node.
    Ports(ports::Cmd),
    /// Watch a node live (or replay a recording), optionally recording it.
    Watch(watch::Cmd),
    /// Record a node to a log file, headless, for long runs.
    Record(record::Cmd),
    /// Talk to a node: ping, info, configuration, counters, bursts.
    Node(node::Cmd),
    /// Report on recorded runs: energy, efficiency, outages, sizing advice.
    Report(report::Cmd),
    /// Export recorded runs as CSV.
    Export(export::Cmd),
    /// Turn a raw capture of serial bytes into a log.
    Import(import::Cmd),
    /// Size storage and duty cycle from numbers, before any deployment.
    Plan(plan::Cmd),
    /// Virtual-node tools: scenarios and source I-V curves.
    Sim(sim::Cmd),
}

/// True when `err` comes from writing to a pipe whose reader has gone
/// (`gleaner report --json LOG | head`): the command ends quietly, as shell
/// tools do.
pub fn is_closed_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|cause| {
        cause
            .downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

impl Cli {
    /// Runs the chosen command.
    pub fn run(self) -> anyhow::Result<()> {
        match self.command {
            Command::Demo(c) => c.run(),
            Command::Ports(c) => c.run(),
            Command::Watch(c) => c.run(),
            Command::Record(c) => c.run(),
            Command::Node(c) => c.run(),
            Command::Report(c) => c.run(),
            Command::Export(c) => c.run(),
            Command::Import(c) => c.run(),
            Command::Plan(c) => c.run(),
            Command::Sim(c) => c.run(),
        }
    }
}

/// A stop flag set by Ctrl-C or SIGTERM.
pub fn stop_flag() -> anyhow::Result<std::sync::Arc<std::sync::atomic::AtomicBool>> {
    let flag = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    for signal in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
        signal_hook::flag::register(signal, flag.clone())?;
    }
    Ok(flag)
}

/// A fresh log path `DIR/NAME-YYYYMMDD-HHMMSS.gleanlog`.
pub fn new_log_path(dir: &std::path::Path, name: &str) -> std::path::PathBuf {
    let stamp = humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string();
    let stamp: String = stamp
        .chars()
        .filter(|c| c.is_ascii_digit())
        .take(14)
        .collect();
    let safe: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' {
                c
            } else {
                '_'
            }
        })
        .collect();
    let mut path = dir.join(format!("{safe}-{stamp}.gleanlog"));
    let mut n = 1;
    while path.exists() {
        path = dir.join(format!("{safe}-{stamp}-{n}.gleanlog"));
        n += 1;
    }
    path
}
