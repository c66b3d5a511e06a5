//! `gleaner watch`: the live view of a port or a recording.

use std::path::PathBuf;
use std::sync::atomic::Ordering;
use std::time::{Duration, Instant};

use anyhow::Result;
use clap::Args;

use crate::failure::FailedAs;
use crate::link::LinkTracker;
use crate::log::{LogReader, RecordBody};
use crate::recorder::{run_port, PortObserver, Recorder};
use crate::stream::Streamed;
use crate::view::observer::{Display, LiveObserver};

/// Watch a node live: channels, power, efficiency, state and how long it has
/// held, the time-to-cutoff forecast, energy totals, load shedding, link
/// health, the latest events and charts of recent minutes. Full screen on a
/// terminal (q quits), one line per report otherwise.
#[derive(Debug, Args)]
pub struct Cmd {
    /// Serial port of the node (a path or an alias); or give it with `-p/--port`.
    #[arg(value_name = "PORT")]
    pub port_arg: Option<String>,
    /// The port and line rate.
    #[command(flatten)]
    pub link: super::PortArgs,
    /// Replay a recorded log instead of a port (`-`: standard input); several
    /// (a rotated recording, gzipped or not) play in the order given as one run.
    #[arg(long, value_name = "LOG", num_args = 1.., conflicts_with = "port_arg")]
    pub replay: Vec<PathBuf>,
    /// Replay speed: this many times faster than the node's own clock ran (a
    /// simulated day recorded in seconds still takes a day / speed; 0: as fast
    /// as possible).
    #[arg(long, default_value_t = 0.0)]
    pub speed: f64,
    /// One line per report instead of the full screen.
    #[arg(long, help = super::PLAIN_HELP)]
    pub plain: bool,
    /// Instead of the view, write every message and link change to standard
    /// output as one JSON object per line (docs/stream-json-lines.md), for
    /// other tools.
    #[arg(long)]
    pub json_lines: bool,
    /// Also record to this log file.
    #[arg(long)]
    pub record: Option<PathBuf>,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let display = if self.json_lines {
            Display::Silent
        } else {
            Display::choose(self.plain, None)
        };
        let screen = matches!(display, Display::Screen { .. });
        let stop = super::stop_flag()?;
        if let Some(first) = self.replay.first() {
            let logs = &self.replay;
            let more = match logs.len() {
                1 => String::new(),
                n => format!(" and {} more", n - 1),
            };
            let mut observer = LiveObserver::new(
                display,
                &format!("replay {}{more}", first.display()),
                Box::new(std::io::stdout()),
                Box::new(|_, _| false),
            );
            let result = if self.json_lines {
                let mut streamed = Streamed::new(&mut observer, Box::new(std::io::stdout()), true);
                replay(logs, self.speed, &stop, &mut streamed)
            } else {
                replay(logs, self.speed, &stop, &mut observer)
            };
            observer.close();
            if screen && result.is_ok() && !observer.quit {
                say!("replay finished")?;
            }
            return result;
        }
        let Some(reach) = self.link.reach(self.port_arg.as_deref())? else {
            return Err(anyhow::anyhow!("name a port (-p PORT), or --replay a log")
                .failed_as(crate::failure::Failure::Usage));
        };
        let port = reach.port.as_str();
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
        let result = if self.json_lines {
            let mut streamed = Streamed::new(&mut observer, Box::new(std::io::stdout()), true);
            run_port(&mut recorder, port, reach.baud, &stop, &mut streamed)
        } else {
            run_port(&mut recorder, port, reach.baud, &stop, &mut observer)
        };
        observer.close();
        recorder.finish()?;
        result
    }
}

/// The node's own time through a replay: its uptime advances it, and where
/// the uptime starts again (a reboot) the recorder's clock bridges the gap.
#[derive(Debug, Default)]
pub struct ReplayClock {
    elapsed_us: u64,
    last: Option<(u64, u64)>,
}

impl ReplayClock {
    /// Advances to a message stamped `uptime_ms` by the node and recorded at
    /// `host_us`; returns the node time elapsed since the first message.
    pub fn advance(&mut self, uptime_ms: u64, host_us: u64) -> Duration {
        let uptime_us = uptime_ms.saturating_mul(1000);
        if let Some((last_uptime_us, last_host_us)) = self.last {
            let step = if uptime_us >= last_uptime_us {
                uptime_us - last_uptime_us
            } else {
                host_us.saturating_sub(last_host_us)
            };
            self.elapsed_us = self.elapsed_us.saturating_add(step);
        }
        self.last = Some((uptime_us, host_us));
        Duration::from_micros(self.elapsed_us)
    }
}

/// Feeds recorded logs to an observer, in the order given as one run (one
/// link and one clock throughout, so a rotated recording shows no lost frame
/// or reboot between its files), paced by the node's own clock.
pub fn replay(
    paths: &[PathBuf],
    speed: f64,
    stop: &std::sync::atomic::AtomicBool,
    observer: &mut dyn PortObserver,
) -> Result<()> {
    let mut pace = Pace {
        tracker: LinkTracker::new(),
        started: Instant::now(),
        clock: ReplayClock::default(),
        speed,
    };
    for path in paths {
        let mut reader = LogReader::new(crate::files::open_log(path)?.reader);
        let over = pace.feed(&mut reader, stop, observer);
        let name = match paths.len() {
            1 => String::new(),
            _ => format!("{}: ", path.display()),
        };
        for w in reader.warnings() {
            eprintln!("warning: {name}{w}");
        }
        // Not a log was said above; a read that stopped early is an error.
        if let Err(e @ crate::log::LogError::Unreadable { .. }) =
            reader.read_whole(&path.display().to_string())
        {
            return Err(e.into());
        }
        if over {
            break;
        }
    }
    Ok(())
}

/// The port change a recorded marker stands for: `Some(false)` where the
/// port went away, `Some(true)` where it came back (not its first opening).
fn link_change(kind: crate::log::MarkerKind, detail: &str) -> Option<bool> {
    use crate::log::MarkerKind;
    match kind {
        MarkerKind::PortLost => Some(false),
        MarkerKind::PortOpened if detail.ends_with(crate::recorder::RECONNECTED) => Some(true),
        _ => None,
    }
}

/// A replay under way: the link and the node's clock carry on across logs.
struct Pace {
    tracker: LinkTracker,
    started: Instant,
    clock: ReplayClock,
    speed: f64,
}

impl Pace {
    /// Feeds one log; true when the replay is over (stopped or quit).
    fn feed<R: std::io::Read>(
        &mut self,
        reader: &mut LogReader<R>,
        stop: &std::sync::atomic::AtomicBool,
        observer: &mut dyn PortObserver,
    ) -> bool {
        for record in reader.by_ref() {
            if stop.load(Ordering::Relaxed) {
                return true;
            }
            let bytes = match &record.body {
                RecordBody::Frame(bytes) => bytes,
                // The port's gaps, as the recorder saw them.
                RecordBody::Marker { kind, detail } => {
                    if let Some(connected) = link_change(*kind, detail) {
                        observer.link_changed(connected, detail, record.host_time_us);
                    }
                    continue;
                }
                _ => continue,
            };
            let tracked = self.tracker.accept_encoded(bytes).ok().flatten();
            if let (Some(t), true) = (&tracked, self.speed > 0.0) {
                let node_time = self.clock.advance(t.message.uptime_ms, record.host_time_us);
                if self.wait_until(node_time, observer) {
                    return true;
                }
            }
            if let Some(tracked) = tracked {
                observer.message(&tracked, record.host_time_us, self.tracker.stats());
            }
            if observer.tick(self.tracker.stats(), Duration::ZERO) {
                return true;
            }
        }
        false
    }

    /// Waits until `node_time` is due at this speed, ticking the observer;
    /// true when it quits.
    fn wait_until(&self, node_time: Duration, observer: &mut dyn PortObserver) -> bool {
        let due = Duration::from_secs_f64(node_time.as_secs_f64() / self.speed);
        while self.started.elapsed() < due {
            if observer.tick(self.tracker.stats(), Duration::ZERO) {
                return true;
            }
            std::thread::sleep(
                due.saturating_sub(self.started.elapsed())
                    .min(Duration::from_millis(50)),
            );
        }
        false
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn replay_time_is_the_nodes_time_bridged_over_reboots() {
        let mut clock = ReplayClock::default();
        // A simulated hour recorded in one second of host time.
        assert_eq!(clock.advance(5_000, 0), Duration::ZERO);
        assert_eq!(
            clock.advance(3_605_000, 1_000_000),
            Duration::from_secs(3600)
        );
        // The node reboots (uptime from 0 again) 2 s of host time later: the
        // host's 2 s bridge the gap, then the node's clock runs again.
        assert_eq!(clock.advance(100, 3_000_000), Duration::from_secs(3602));
        assert_eq!(clock.advance(60_100, 3_100_000), Duration::from_secs(3662));
    }
}
