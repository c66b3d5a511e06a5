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

pub mod calibrate;
pub mod demo;
pub mod export;
pub mod import;
pub mod node;
pub mod plan;
pub mod ports;
pub mod record;
pub mod report;
pub mod shell;
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
    /// Record a node to a log file (or several nodes, one log each), headless, for long runs.
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
    /// Print the shell completion script (bash, zsh, fish, elvish, powershell).
    Completions(shell::Completions),
    /// Print the manual page, or write every command's page into a folder.
    ManPage(shell::ManPage),
}

/// Help of `--plain`, the same on every command that has it.
pub const PLAIN_HELP: &str = "One line per report (no full screen), even on a terminal";

/// A length of time as people type it: a number of seconds (`90`), or a
/// number with a unit: `ms`, `s`, `min` (or `m`), `h`, `d` (`1500ms`, `2h`,
/// `1.5d`). Used by every option that takes a time.
pub fn parse_seconds(text: &str) -> Result<f64, String> {
    let text = text.trim();
    let split = text
        .find(|c: char| c.is_ascii_alphabetic())
        .unwrap_or(text.len());
    let (number, unit) = text.split_at(split);
    let value: f64 = number
        .trim()
        .parse()
        .map_err(|_| format!("'{text}' is not a time (say 90, 90s, 15min, 2h or 1d)"))?;
    let scale = match unit.trim() {
        "" | "s" => 1.0,
        "ms" => 1e-3,
        "m" | "min" => 60.0,
        "h" => 3600.0,
        "d" => 86_400.0,
        other => {
            return Err(format!(
                "unknown time unit '{other}' (use ms, s, min, h or d)"
            ))
        }
    };
    let seconds = value * scale;
    if !(seconds.is_finite() && seconds >= 0.0) {
        return Err(format!("'{text}' must be a time of at least 0"));
    }
    Ok(seconds)
}

/// How to reach the node, as every command that opens a port takes it.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct PortArgs {
    /// Serial port of the node: a path (see `gleaner ports`) or a name from
    /// the configuration file's `[ports]`.
    #[arg(short = 'p', long = "port", value_name = "PORT", env = crate::user_config::PORT_ENV)]
    pub port: Option<String>,
    /// Line rate (default: the configuration file's `baud`, else 115200).
    #[arg(long, env = crate::user_config::BAUD_ENV)]
    pub baud: Option<u32>,
}

/// A port to open and its line rate, aliases resolved.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Reach {
    /// The port's path.
    pub port: String,
    /// The line rate.
    pub baud: u32,
}

impl PortArgs {
    /// The port named by `first` (a command's positional argument), else by
    /// `-p/--port` or `GLEANER_PORT`, with aliases and the line rate taken
    /// from the user's configuration file; `None` when no port is named.
    pub fn reach(&self, first: Option<&str>) -> anyhow::Result<Option<Reach>> {
        let Some(given) = first.or(self.port.as_deref()) else {
            return Ok(None);
        };
        let config = crate::user_config::UserConfig::load()?;
        Ok(Some(Reach {
            port: config.port(given),
            baud: config.baud(self.baud),
        }))
    }

    /// As [`PortArgs::reach`], with a usage error when no port is named.
    pub fn require(&self, first: Option<&str>) -> anyhow::Result<Reach> {
        use crate::failure::FailedAs;
        self.reach(first)?
            .ok_or_else(|| {
                anyhow::anyhow!(
                    "name the node's port (-p PORT or GLEANER_PORT; `gleaner ports` lists them)"
                )
            })
            .failed_as(crate::failure::Failure::Usage)
    }
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
            Command::Completions(c) => c.run(),
            Command::ManPage(c) => c.run(),
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn times_read_with_or_without_units() {
        assert_eq!(parse_seconds("90"), Ok(90.0));
        assert_eq!(parse_seconds("90s"), Ok(90.0));
        assert_eq!(parse_seconds("1500ms"), Ok(1.5));
        assert_eq!(parse_seconds("15min"), Ok(900.0));
        assert_eq!(parse_seconds("2h"), Ok(7200.0));
        assert_eq!(parse_seconds("1.5d"), Ok(129_600.0));
        assert!(parse_seconds("-1s").is_err());
        assert!(parse_seconds("2 weeks").is_err());
        assert!(parse_seconds("soon").is_err());
    }
}
