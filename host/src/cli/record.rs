//! `gleaner record`: headless recording for long runs.

use std::io::Write;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use anyhow::{Context, Result};
use clap::Args;
use gleaner_protocol::Outcome;

use crate::analysis::text::duration;
use crate::failure::FailedAs;
use crate::link::script::{CommandScript, Scripted, Step};
use crate::link::LinkStats;
use crate::recorder::{run_port, Recorder};
use crate::settings::NodeSettings;
use crate::view::observer::{Display, LiveObserver};

/// Record a node to a log file: reconnects when the port disappears and comes
/// back (the gap is marked in the log), prints a status line now and then,
/// and stops cleanly on Ctrl-C or SIGTERM with everything flushed.
#[derive(Debug, Args)]
pub struct Cmd {
    /// Serial port of the node (a path or an alias); or give it with `-p/--port`.
    #[arg(value_name = "PORT")]
    pub port_arg: Option<String>,
    /// The port and line rate.
    #[command(flatten)]
    pub link: super::PortArgs,
    /// Log file to create (default: a new file in --dir).
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Folder for the new log when --out is not given (default: the
    /// configuration file's `runs_dir`, else `gleaner-runs`).
    #[arg(long, env = crate::user_config::RUNS_DIR_ENV)]
    pub dir: Option<PathBuf>,
    /// Time between status lines on stderr (seconds, or with a unit: 30s,
    /// 5min; 0: none).
    #[arg(long, default_value = "60", value_parser = super::parse_seconds)]
    pub status_every: f64,
    /// Stop after this long (seconds, or with a unit: 90s, 2h, 7d; default:
    /// until Ctrl-C or SIGTERM).
    #[arg(long, value_parser = super::parse_seconds)]
    pub duration: Option<f64>,
    /// Also write every message and link change to standard output as one
    /// JSON object per line (docs/stream-json-lines.md), for other tools; if
    /// their end of the pipe closes, recording goes on.
    #[arg(long)]
    pub json_lines: bool,
    /// Ping the node once it is connected (the reply is in the log).
    #[arg(long)]
    pub ping: bool,
    /// Apply these settings (TOML, as for `gleaner node set-config --file`) once connected.
    #[arg(long)]
    pub set_config: Option<PathBuf>,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let reach = self.link.require(self.port_arg.as_deref())?;
        let port = reach.port.clone();
        let path = match self.out.clone() {
            Some(path) => path,
            None => {
                let config = crate::user_config::UserConfig::load()?;
                let name = config.alias_of(&port).map_or_else(
                    || {
                        std::path::Path::new(&port)
                            .file_name()
                            .map_or("node".into(), |n| n.to_string_lossy().into_owned())
                    },
                    str::to_owned,
                );
                super::new_log_path(&config.runs_dir(self.dir.clone()), &name)
            }
        };
        let mut recorder = Recorder::create(&path, &port)?;
        eprintln!("recording {port} to {} (Ctrl-C stops)", path.display());
        let stop = super::stop_flag()?;
        let started = Instant::now();
        let status_every = Duration::from_secs_f64(self.status_every);
        let mut last_status = Instant::now();
        let limit = self.duration.map(Duration::from_secs_f64);
        let done = move |stats: &LinkStats, _idle: Duration| {
            if self.status_every > 0.0 && last_status.elapsed() >= status_every {
                last_status = Instant::now();
                eprintln!(
                    "[{}] frames {} lost {} crc {} framing {} reboots {}{}",
                    duration(started.elapsed().as_secs_f64()),
                    stats.frames,
                    stats.lost_frames,
                    stats.crc_errors,
                    stats.framing_errors,
                    stats.reboots,
                    if stats.likely_wrong_baud() {
                        " - mostly errors: is the baud rate right?"
                    } else {
                        ""
                    }
                );
            }
            limit.is_some_and(|l| started.elapsed() >= l)
        };
        let mut steps = Vec::new();
        if self.ping {
            steps.push(Step::Ping);
        }
        if let Some(file) = &self.set_config {
            let text = std::fs::read_to_string(file)
                .with_context(|| format!("cannot read {}", file.display()))?;
            let settings = NodeSettings::from_toml(&text)
                .with_context(|| format!("in {}", file.display()))
                .failed_as(crate::failure::Failure::BadInput)?;
            steps.push(Step::Configure(Box::new(settings)));
        }
        let mut observer = LiveObserver::new(
            Display::Silent,
            &port,
            Box::new(std::io::sink()),
            Box::new(done),
        );
        let script = CommandScript::new(steps, Duration::from_secs(3));
        let mut streamed;
        let inner: &mut dyn crate::recorder::PortObserver = if self.json_lines {
            streamed =
                crate::stream::Streamed::new(&mut observer, Box::new(std::io::stdout()), false);
            &mut streamed
        } else {
            &mut observer
        };
        let mut scripted = Scripted::new(script, inner);
        let result = run_port(&mut recorder, &port, reach.baud, &stop, &mut scripted);
        for (step, outcome) in &scripted.script.results {
            match outcome {
                Some(Outcome::Refused(reason)) => eprintln!("{step:?}: refused: {reason}"),
                Some(o) => eprintln!("{step:?}: {o:?}"),
                None => eprintln!("{step:?}: the node did not answer within 3 s"),
            }
        }
        for e in &scripted.script.errors {
            eprintln!("not sent: {e}");
        }
        let finished = recorder.finish();
        let stats = *recorder.stats();
        result?;
        finished?;
        let _ = std::io::stderr().flush();
        eprintln!(
            "stopped: {} frames, {} lost, {} damaged, {} reboots; log {}",
            stats.frames,
            stats.lost_frames,
            stats.damaged(),
            stats.reboots,
            path.display()
        );
        Ok(())
    }
}
