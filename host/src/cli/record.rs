//! `gleaner record`: headless recording for long runs.

use std::collections::BTreeSet;
use std::io::Write;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use anyhow::{Context, Result};
use clap::Args;
use gleaner_protocol::Outcome;

use crate::analysis::text::duration;
use crate::failure::FailedAs;
use crate::link::script::{CommandScript, Scripted, Step};
use crate::link::LinkStats;
use crate::record_status::{Reporting, StatusBoard};
use crate::recorder::{run_port, Recorder};
use crate::rotation::{Every, Reopen, Rotating};
use crate::settings::NodeSettings;
use crate::upkeep::{Policy, Upkeep, BYTES_PER_MB};
use crate::view::observer::{Display, LiveObserver};

/// Record a node to a log file: reconnects when the port disappears and comes
/// back (the gap is marked in the log), prints a status line now and then,
/// and stops cleanly on Ctrl-C or SIGTERM with everything flushed. Several
/// ports (or a pattern such as '/dev/serial/by-id/*', quoted) record at once,
/// one log per port in --dir, each port on its own so one silent, unplugged
/// or garbled node never holds up the others; ports that appear later
/// matching a pattern are picked up.
#[derive(Debug, Args)]
pub struct Cmd {
    /// Serial port of the node (a path or an alias), or several, or glob
    /// patterns; or give one with `-p/--port`.
    #[arg(value_name = "PORT")]
    pub ports: Vec<String>,
    /// The port and line rate.
    #[command(flatten)]
    pub link: super::PortArgs,
    /// Record every port named in the configuration file's `[ports]` (as
    /// if each name were given): those present now, and any that appear.
    #[arg(long)]
    pub named: bool,
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
    /// `daily`: start a new log when the UTC day changes; SIGHUP also starts new logs
    /// (the usual signal of tools that move logs away). Each log ends with a
    /// note naming the next.
    #[arg(long, value_enum, default_value = "never", hide_possible_values = true)]
    pub rotate: Every,
    /// Also start a new log when the current one reaches this many megabytes.
    #[arg(long, value_name = "MB", value_parser = clap::value_parser!(u64).range(1..))]
    pub rotate_mb: Option<u64>,
    /// Remove these ports' closed logs in the folder (from this recording or
    /// an earlier one; never a log being written) last written more than
    /// this many days ago. Other files are never touched.
    #[arg(long, value_name = "DAYS", value_parser = clap::value_parser!(u32).range(1..))]
    pub keep_days: Option<u32>,
    /// Gzip each closed log (NAME-....gleanlog.gz); `report`, `export` and
    /// `watch --replay` read them as they are.
    #[arg(long)]
    pub compress: bool,
    /// While the folder's disk has less free space than this (megabytes),
    /// remove the oldest closed logs of these ports.
    #[arg(long, value_name = "MB", value_parser = clap::value_parser!(u64).range(1..))]
    pub free_floor_mb: Option<u64>,
    /// Instead of recording, say what a running several-port recording in
    /// --dir is doing (from its status.json): each port's node, state, last
    /// frame, frames lost and damaged, gaps and log.
    #[arg(long, conflicts_with_all = ["ports", "named", "out", "ping", "set_config", "json_lines"])]
    pub status: bool,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        if self.status {
            let config = crate::user_config::UserConfig::load()?;
            let dir = config.runs_dir(self.dir.clone());
            let said = crate::record_status::describe(&dir, crate::log::now_us())
                .failed_as(crate::failure::Failure::BadInput)?;
            print!("{said}");
            return Ok(());
        }
        if self.named {
            let config = crate::user_config::UserConfig::load()?;
            if config.ports.is_empty() {
                return Err(anyhow::anyhow!(
                    "--named records the ports of the configuration file's [ports], and it names none"
                ))
                .failed_as(crate::failure::Failure::Usage);
            }
            let mut all = self;
            all.ports.extend(config.ports.into_keys());
            return all.record_many();
        }
        if self.ports.len() > 1 || self.ports.first().is_some_and(|p| is_pattern(p)) {
            return self.record_many();
        }
        let reach = self.link.require(self.ports.first().map(String::as_str))?;
        let port = reach.port.clone();
        let path = match self.out.clone() {
            Some(path) => path,
            None => {
                let config = crate::user_config::UserConfig::load()?;
                super::new_log_path(
                    &config.runs_dir(self.dir.clone()),
                    &log_name(&config, &port),
                )
            }
        };
        let stop = super::stop_flag()?;
        let reopen = Reopen::on_sighup()?;
        let (dir, _) = log_place(&path);
        let stats = std::thread::scope(|scope| {
            let upkeep = Upkeep::start(scope, dir, self.upkeep_policy());
            self.record_port(&reach, &path, &stop, None, &reopen, upkeep)
        })?;
        let _ = std::io::stderr().flush();
        eprintln!("stopped: {}; log {}", summary(&stats), path.display());
        Ok(())
    }

    /// Records one port to `path` until stopped. With a `board` (several
    /// ports at once), it keeps the port's status there and its status lines
    /// start with the port.
    fn record_port(
        &self,
        reach: &super::Reach,
        path: &std::path::Path,
        stop: &AtomicBool,
        board: Option<&StatusBoard>,
        reopen: &Reopen,
        upkeep: Upkeep,
    ) -> Result<LinkStats> {
        let port = reach.port.clone();
        let tag = board.map(|_| reach.port.as_str());
        let mut recorder = Recorder::create(path, &port)?;
        eprintln!("recording {port} to {} (Ctrl-C stops)", path.display());
        let done = self.status_lines(tag);
        let steps = self.steps()?;
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
        let mut reporting;
        let inner: &mut dyn crate::recorder::PortObserver = match board {
            Some(board) => {
                reporting = Reporting::new(board, &port, path, inner);
                &mut reporting
            }
            None => inner,
        };
        let mut scripted = Scripted::new(script, inner);
        let (dir, name) = log_place(path);
        let status = board.map(|b| (b, port.clone()));
        let mut rotating = Rotating::new(&mut scripted, self.rotate, reopen, dir, name, status)
            .keeping(path, upkeep)
            .limited_to(self.rotate_mb.map(|mb| mb.saturating_mul(BYTES_PER_MB)));
        let result = run_port(&mut recorder, &port, reach.baud, stop, &mut rotating);
        if let Some(to) = board.and_then(|b| b.moved_to(&port)) {
            let note = format!("the node came back on {to}: its recording goes on in this log");
            eprintln!("{port}: {note}");
            // Not written: the log still ends whole, with the stop below.
            if let Err(e) = recorder.mark(crate::log::MarkerKind::Note, &note) {
                eprintln!("{port}: the note was not written: {e:#}");
            }
        }
        print_outcomes(&scripted.script);
        let finished = recorder.finish();
        let stats = *recorder.stats();
        result?;
        finished?;
        Ok(stats)
    }

    /// Prints a status line every --status-every (prefixed with `tag`) and
    /// says when --duration is up.
    fn status_lines<'a>(
        &'a self,
        tag: Option<&'a str>,
    ) -> impl FnMut(&LinkStats, Duration) -> bool + 'a {
        let started = Instant::now();
        let status_every = Duration::from_secs_f64(self.status_every);
        let mut last_status = Instant::now();
        let limit = self.duration.map(Duration::from_secs_f64);
        move |stats: &LinkStats, _idle: Duration| {
            if self.status_every > 0.0 && last_status.elapsed() >= status_every {
                last_status = Instant::now();
                eprintln!(
                    "{}[{}] frames {} lost {} crc {} framing {} reboots {}{}",
                    tag.map_or(String::new(), |t| format!("{t}: ")),
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
        }
    }

    /// What becomes of closed logs: --compress, --keep-days, --free-floor-mb.
    fn upkeep_policy(&self) -> Policy {
        Policy {
            compress: self.compress,
            keep_for: self
                .keep_days
                .map(|d| Duration::from_secs(u64::from(d) * SECONDS_PER_DAY)),
            free_floor_bytes: self.free_floor_mb.map(|mb| mb.saturating_mul(BYTES_PER_MB)),
        }
    }

    /// The commands to send once connected: --ping, --set-config.
    fn steps(&self) -> Result<Vec<Step>> {
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
        Ok(steps)
    }

    /// Records every port named or matching a pattern, one log each, until
    /// stopped; looks for new matching ports every [`RESCAN`].
    fn record_many(&self) -> Result<()> {
        use crate::failure::Failure;
        self.check_many()?;
        let config = crate::user_config::UserConfig::load()?;
        let dir = config.runs_dir(self.dir.clone());
        std::fs::create_dir_all(&dir)
            .with_context(|| format!("cannot create folder {}", dir.display()))?;
        let stop = super::stop_flag()?;
        let started = Instant::now();
        let limit = self.duration.map(Duration::from_secs_f64);
        let mut recording: BTreeSet<String> = BTreeSet::new();
        let done = std::sync::Mutex::new(Vec::new());
        let board = StatusBoard::default();
        let reopen = Reopen::on_sighup()?;
        std::thread::scope(|scope| -> Result<()> {
            let upkeep = Upkeep::start(scope, dir.clone(), self.upkeep_policy());
            loop {
                // A port whose node moved to another port has ended: a node
                // plugged in there later is recorded afresh.
                recording.retain(|port| !board.handed_over(port));
                for port in self.present_ports(&config) {
                    if !recording.insert(port.clone()) {
                        continue;
                    }
                    let path = super::new_log_path(&dir, &log_name(&config, &port));
                    let reach = super::Reach {
                        port: port.clone(),
                        baud: config.baud(self.link.baud),
                    };
                    let (stop, done, board, reopen) = (&stop, &done, &board, &*reopen);
                    let upkeep = upkeep.clone();
                    scope.spawn(move || {
                        let ended = self.record_among(&reach, path, stop, board, reopen, upkeep);
                        if let Ok(mut all) = done.lock() {
                            all.push(ended);
                        }
                    });
                }
                if recording.is_empty() {
                    stop.store(true, Ordering::Relaxed);
                    return Err(anyhow::anyhow!(
                        "no port matches {} (`gleaner ports` lists them)",
                        self.ports.join(", ")
                    ))
                    .failed_as(Failure::Usage);
                }
                write_status(&board, &dir);
                if until_rescan(&stop, started, limit) {
                    return Ok(());
                }
            }
        })?;
        write_status(&board, &dir);
        say_how_each_ended(done.into_inner().unwrap_or_default())
    }

    /// Records one of several ports to `path` until stopped; returns the
    /// port, its last log (where its node's recording went on) and how it ended.
    fn record_among(
        &self,
        reach: &super::Reach,
        path: PathBuf,
        stop: &AtomicBool,
        board: &StatusBoard,
        reopen: &Reopen,
        upkeep: Upkeep,
    ) -> (String, PathBuf, Result<LinkStats>) {
        let outcome = self.record_port(reach, &path, stop, Some(board), reopen, upkeep);
        let mut last_log = path;
        board.update(&reach.port, |s| {
            s.connected = false;
            s.log_closed = true;
            if !s.log.as_os_str().is_empty() {
                last_log.clone_from(&s.log);
            }
        });
        (reach.port.clone(), last_log, outcome)
    }

    /// Refuses options that name one log or one stream.
    fn check_many(&self) -> Result<()> {
        use crate::failure::Failure;
        if self.out.is_some() {
            return Err(anyhow::anyhow!(
                "--out names one log; with several ports each gets its own log in --dir"
            ))
            .failed_as(Failure::Usage);
        }
        if self.json_lines {
            return Err(anyhow::anyhow!(
                "--json-lines streams one port; record several ports without it (each log can be replayed with `gleaner watch --replay LOG --json-lines`)"
            ))
            .failed_as(Failure::Usage);
        }
        Ok(())
    }

    /// The ports named (aliases resolved) that exist now, and every path
    /// matching a pattern.
    fn present_ports(&self, config: &crate::user_config::UserConfig) -> Vec<String> {
        let mut found = Vec::new();
        for given in &self.ports {
            if !is_pattern(given) {
                let port = config.port(given);
                if std::path::Path::new(&port).exists() {
                    found.push(port);
                }
                continue;
            }
            if let Ok(paths) = glob::glob(given) {
                // Not a link left behind by a device that went away.
                let present = paths.flatten().filter(|p| p.exists());
                found.extend(present.map(|p| p.to_string_lossy().into_owned()));
            }
        }
        found
    }
}

/// Writes the status file; a failure is said (recording goes on).
fn write_status(board: &StatusBoard, dir: &std::path::Path) {
    if let Err(e) = board.write(dir) {
        eprintln!("could not write the recording status: {e:#}");
    }
}

/// Seconds in the day of `--keep-days`.
const SECONDS_PER_DAY: u64 = 86_400;

/// How often several-port recording looks for new ports.
pub const RESCAN: Duration = Duration::from_secs(2);

/// True when `port` is a glob pattern rather than one port.
fn is_pattern(port: &str) -> bool {
    port.contains(['*', '?', '['])
}

/// The log's name for a port: its alias, else its file name.
fn log_name(config: &crate::user_config::UserConfig, port: &str) -> String {
    config.alias_of(port).map_or_else(
        || {
            std::path::Path::new(port)
                .file_name()
                .map_or("node".into(), |n| n.to_string_lossy().into_owned())
        },
        str::to_owned,
    )
}

/// Where a log's successors go and what they are named after: its folder,
/// and its name without the time stamp `new_log_path` adds.
fn log_place(path: &std::path::Path) -> (PathBuf, String) {
    let dir = path
        .parent()
        .map_or_else(|| PathBuf::from("."), std::path::Path::to_path_buf);
    let stem = path
        .file_stem()
        .map_or_else(|| "node".to_owned(), |s| s.to_string_lossy().into_owned());
    // NAME-YYYYMMDDHHMMSS(-N): keep NAME.
    let name = match stem.rsplit_once('-') {
        Some((name, stamp)) if stamp.len() == 14 && stamp.bytes().all(|b| b.is_ascii_digit()) => {
            name.to_owned()
        }
        _ => stem,
    };
    (dir, name)
}

/// A recording's counters in words.
fn summary(stats: &LinkStats) -> String {
    format!(
        "{} frames, {} lost, {} damaged, {} reboots",
        stats.frames,
        stats.lost_frames,
        stats.damaged(),
        stats.reboots
    )
}

/// What the node answered to the commands sent while recording.
fn print_outcomes(script: &CommandScript) {
    for (step, outcome) in &script.results {
        match outcome {
            Some(Outcome::Refused(reason)) => eprintln!("{step:?}: refused: {reason}"),
            Some(o) => eprintln!("{step:?}: {o:?}"),
            None => eprintln!("{step:?}: the node did not answer within 3 s"),
        }
    }
    for e in &script.errors {
        eprintln!("not sent: {e:#}");
    }
}

/// How each port's recording ended: `port: stopped ...` or its error; an
/// error when any failed.
fn say_how_each_ended(ended: Vec<(String, PathBuf, Result<LinkStats>)>) -> Result<()> {
    use crate::failure::Failure;
    let count = ended.len();
    let mut failed = 0;
    for (port, path, outcome) in ended {
        match outcome {
            Ok(stats) => eprintln!(
                "{port}: stopped: {}; log {}",
                summary(&stats),
                path.display()
            ),
            Err(e) => {
                failed += 1;
                eprintln!("{port}: {e:#}");
            }
        }
    }
    if failed > 0 {
        return Err(anyhow::anyhow!(
            "{failed} of {} ports could not be recorded (above)",
            count
        ))
        .failed_as(Failure::PortUnavailable);
    }
    Ok(())
}

/// Waits until the next look for new ports ([`RESCAN`]); true (with `stop`
/// set, so every port's thread ends) when the recording is over: stopped,
/// or `limit` after `started`.
fn until_rescan(stop: &AtomicBool, started: Instant, limit: Option<Duration>) -> bool {
    let deadline = Instant::now() + RESCAN;
    let over = || limit.is_some_and(|l| started.elapsed() >= l);
    while Instant::now() < deadline && !stop.load(Ordering::Relaxed) && !over() {
        std::thread::sleep(Duration::from_millis(100));
    }
    if stop.load(Ordering::Relaxed) || over() {
        stop.store(true, Ordering::Relaxed);
        return true;
    }
    false
}
