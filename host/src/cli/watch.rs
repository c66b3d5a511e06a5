//! `gleaner watch`: the live view of a port or a recording.

use std::io::IsTerminal;
use std::path::PathBuf;
use std::sync::atomic::Ordering;
use std::time::{Duration, Instant};

use anyhow::{bail, Context, Result};
use clap::Args;

use crate::link::{LinkTracker, DEFAULT_BAUD};
use crate::log::{LogReader, RecordBody};
use crate::recorder::{run_port, PortObserver, Recorder};
use crate::view::observer::{Display, LiveObserver};

/// Watch a node live: channels, power, efficiency, state and how long it has
/// held, the time-to-cutoff forecast, energy totals, load shedding, link
/// health, the latest events and charts of recent minutes. Full screen on a
/// terminal (q quits), one line per report otherwise.
#[derive(Debug, Args)]
pub struct Cmd {
    /// Serial port of the node (see `gleaner ports`).
    #[arg(required_unless_present = "replay")]
    pub port: Option<String>,
    /// Line rate.
    #[arg(long, default_value_t = DEFAULT_BAUD)]
    pub baud: u32,
    /// Replay a recorded log instead of a port.
    #[arg(long, conflicts_with = "port")]
    pub replay: Option<PathBuf>,
    /// Replay speed: this many times faster than recorded (0: as fast as possible).
    #[arg(long, default_value_t = 0.0)]
    pub speed: f64,
    /// One line per report even on a terminal.
    #[arg(long)]
    pub plain: bool,
    /// Also record to this log file.
    #[arg(long)]
    pub record: Option<PathBuf>,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let screen = !self.plain && std::io::stdout().is_terminal();
        let display = if screen {
            Display::Screen(ratatui::init())
        } else {
            Display::Plain { every: None }
        };
        let stop = super::stop_flag()?;
        if let Some(log) = &self.replay {
            let mut observer = LiveObserver::new(
                display,
                &format!("replay {}", log.display()),
                Box::new(std::io::stdout()),
                Box::new(|_, _| false),
            );
            let result = replay(log, self.speed, &stop, &mut observer);
            observer.close();
            if screen && result.is_ok() && !observer.quit {
                println!("replay finished");
            }
            return result;
        }
        let Some(port) = self.port.as_deref() else {
            bail!("name a port, or --replay a log")
        };
        let mut recorder = match &self.record {
            Some(path) => Recorder::create(path, port)?,
            None => Recorder::new(None),
        };
        let mut observer = LiveObserver::new(
            display,
            port,
            Box::new(std::io::stdout()),
            Box::new(|_, _| false),
        );
        let result = run_port(&mut recorder, port, self.baud, &stop, &mut observer);
        observer.close();
        recorder.finish()?;
        result
    }
}

/// Feeds a recorded log to an observer, paced by the recorded host times.
pub fn replay(
    path: &std::path::Path,
    speed: f64,
    stop: &std::sync::atomic::AtomicBool,
    observer: &mut dyn PortObserver,
) -> Result<()> {
    let file =
        std::fs::File::open(path).with_context(|| format!("cannot open log {}", path.display()))?;
    let mut reader = LogReader::new(file);
    let mut tracker = LinkTracker::new();
    let started = Instant::now();
    let mut first_us = None;
    for record in reader.by_ref() {
        if stop.load(Ordering::Relaxed) {
            break;
        }
        if let RecordBody::Frame(bytes) = &record.body {
            if speed > 0.0 {
                let first = *first_us.get_or_insert(record.host_time_us);
                let due = Duration::from_secs_f64(
                    record.host_time_us.saturating_sub(first) as f64 / 1e6 / speed,
                );
                while started.elapsed() < due {
                    if observer.tick(tracker.stats(), Duration::ZERO) {
                        return Ok(());
                    }
                    std::thread::sleep(
                        due.saturating_sub(started.elapsed())
                            .min(Duration::from_millis(50)),
                    );
                }
            }
            if let Ok(Some(tracked)) = tracker.accept_encoded(bytes) {
                observer.message(&tracked, tracker.stats());
            }
            if observer.tick(tracker.stats(), Duration::ZERO) {
                return Ok(());
            }
        }
    }
    for w in reader.warnings() {
        eprintln!("warning: {w}");
    }
    Ok(())
}
