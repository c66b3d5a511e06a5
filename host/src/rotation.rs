//! When a recording goes on in a new log: at the start of every UTC day
//! (`record --rotate daily`), and when the recorder gets SIGHUP (the usual
//! signal of tools that move logs away). The old log ends with a note naming
//! the new one, so a set of rotated logs reads back in order.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// How often a daily rotation looks at the date.
const DAY_CHECK: Duration = Duration::from_secs(1);

use anyhow::{Context, Result};

use crate::link::{LinkStats, Tracked};
use crate::record_status::StatusBoard;
use crate::recorder::PortObserver;

/// How often a recording starts a new log by itself.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum Every {
    /// One log for the whole recording (SIGHUP still starts a new one).
    #[default]
    Never,
    /// A new log when the UTC day changes.
    Daily,
}

/// SIGHUP seen, as a count every port thread can compare with its own.
#[derive(Debug, Default)]
pub struct Reopen {
    requested: Arc<AtomicBool>,
    generation: AtomicU64,
}

impl Reopen {
    /// Counts SIGHUP from now on (on Unix; Windows has no such signal).
    pub fn on_sighup() -> anyhow::Result<Arc<Self>> {
        let reopen = Arc::new(Reopen::default());
        #[cfg(unix)]
        signal_hook::flag::register(signal_hook::consts::SIGHUP, reopen.requested.clone())?;
        Ok(reopen)
    }

    /// Asks for new logs (what SIGHUP does).
    pub fn request(&self) {
        self.requested.store(true, Ordering::Relaxed);
    }

    /// How many times new logs were asked for.
    pub fn generation(&self) -> u64 {
        if self.requested.swap(false, Ordering::Relaxed) {
            self.generation.fetch_add(1, Ordering::Relaxed);
        }
        self.generation.load(Ordering::Relaxed)
    }
}

/// Decides when one port's recording goes on in a new log, passing
/// everything else on to `inner`.
pub struct Rotating<'a> {
    inner: &'a mut dyn PortObserver,
    every: Every,
    reopen: &'a Reopen,
    seen: u64,
    day: String,
    day_checked: Instant,
    dir: PathBuf,
    name: String,
    /// The port and where its status is kept, when several ports record.
    status: Option<(&'a StatusBoard, String)>,
    /// The log being written now.
    current: PathBuf,
    /// Logs of this port last written longer ago than this are removed at
    /// each rotation.
    keep: Option<Duration>,
}

impl<'a> Rotating<'a> {
    /// New logs go to `dir`, named after `name` and the time.
    pub fn new(
        inner: &'a mut dyn PortObserver,
        every: Every,
        reopen: &'a Reopen,
        dir: PathBuf,
        name: String,
        status: Option<(&'a StatusBoard, String)>,
    ) -> Self {
        Rotating {
            inner,
            every,
            seen: reopen.generation(),
            reopen,
            day: today(),
            day_checked: Instant::now(),
            dir,
            name,
            status,
            current: PathBuf::new(),
            keep: None,
        }
    }

    /// Writing `current` now; at each rotation, removes this port's logs
    /// last written more than `keep` ago.
    pub fn keeping(mut self, current: &Path, keep: Option<Duration>) -> Self {
        self.current = current.to_path_buf();
        self.keep = keep;
        self
    }
}

/// True for a file name `new_log_path` gives a log of `name`:
/// `NAME-YYYYMMDDHHMMSS.gleanlog`, perhaps with `-N` before the extension.
fn is_log_of(file: &str, name: &str) -> bool {
    let Some(rest) = file
        .strip_prefix(name)
        .and_then(|r| r.strip_prefix('-'))
        .and_then(|r| r.strip_suffix(".gleanlog"))
    else {
        return false;
    };
    let (stamp, n) = rest.split_once('-').unwrap_or((rest, "1"));
    stamp.len() == 14
        && stamp.bytes().all(|b| b.is_ascii_digit())
        && !n.is_empty()
        && n.bytes().all(|b| b.is_ascii_digit())
}

/// Removes the logs of `name` in `dir` last written more than `keep` ago,
/// except `current`; returns what it removed. Other files, and other
/// ports' logs, are never touched.
pub fn remove_old_logs(
    dir: &Path,
    name: &str,
    keep: Duration,
    current: &Path,
) -> Result<Vec<PathBuf>> {
    let now = std::time::SystemTime::now();
    let mut removed = Vec::new();
    for entry in std::fs::read_dir(dir).with_context(|| format!("cannot list {}", dir.display()))? {
        let entry = entry?;
        let path = entry.path();
        let file = entry.file_name();
        let old = entry
            .metadata()
            .and_then(|m| m.modified())
            .ok()
            .and_then(|t| now.duration_since(t).ok())
            .is_some_and(|age| age > keep);
        let ours = file.to_str().is_some_and(|f| is_log_of(f, name));
        if ours && old && path.file_name() != current.file_name() {
            std::fs::remove_file(&path)
                .with_context(|| format!("cannot remove {}", path.display()))?;
            removed.push(path);
        }
    }
    removed.sort();
    Ok(removed)
}

/// Today's UTC date.
fn today() -> String {
    crate::dataset::utc_day(crate::log::now_us())
}

impl PortObserver for Rotating<'_> {
    fn message(&mut self, tracked: &Tracked, host_time_us: u64, stats: &LinkStats) {
        self.inner.message(tracked, host_time_us, stats);
    }

    fn tick(&mut self, stats: &LinkStats, idle_for: Duration) -> bool {
        self.inner.tick(stats, idle_for)
    }

    fn link_changed(&mut self, connected: bool, detail: &str) {
        self.inner.link_changed(connected, detail);
    }

    fn outgoing(&mut self) -> Option<Vec<u8>> {
        self.inner.outgoing()
    }

    fn disk_full(&mut self, full: bool, frames_not_written: u64) {
        self.inner.disk_full(full, frames_not_written);
    }

    fn next_log(&mut self) -> Option<PathBuf> {
        // Called after every read: the date is looked at once a second, and
        // only when rotating daily.
        let generation = self.reopen.generation();
        let mut new_day = None;
        if self.every == Every::Daily && self.day_checked.elapsed() >= DAY_CHECK {
            self.day_checked = Instant::now();
            new_day = Some(today()).filter(|day| *day != self.day);
        }
        if generation == self.seen && new_day.is_none() {
            return None;
        }
        self.seen = generation;
        if let Some(day) = new_day {
            self.day = day;
        }
        let path = crate::cli::new_log_path(&self.dir, &self.name);
        if let Some((board, port)) = &self.status {
            board.update(port, |s| s.log = path.clone());
        }
        if let Some(keep) = self.keep {
            match remove_old_logs(&self.dir, &self.name, keep, &self.current) {
                Ok(removed) => {
                    for old in removed {
                        eprintln!("removed {} (older than --keep-days)", old.display());
                    }
                }
                Err(e) => eprintln!("warning: old logs not removed: {e:#}"),
            }
        }
        self.current = path.clone();
        Some(path)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_this_ports_old_logs_go() {
        let dir = tempfile::tempdir().unwrap();
        let week_ago = std::time::SystemTime::now() - Duration::from_secs(7 * 86_400);
        let make = |name: &str, old: bool| {
            let path = dir.path().join(name);
            let file = std::fs::File::create(&path).unwrap();
            if old {
                file.set_modified(week_ago).unwrap();
            }
            path
        };
        // In the order they are returned (sorted by path).
        let gone = [
            make("ttyACM0-20261101000000-2.gleanlog", true),
            make("ttyACM0-20261101000000.gleanlog", true),
        ];
        let kept = [
            make("ttyACM0-20261202000000.gleanlog", false),
            make("ttyACM0-20261102000000.gleanlog", true), // being written
            make("ttyACM1-20261101000000.gleanlog", true), // another port
            make("ttyACM0-notes.gleanlog", true),          // not a name we give
            make("ttyACM0-20261101000000.gleanlog.bak", true),
            make("readme.txt", true),
        ];
        let removed =
            remove_old_logs(dir.path(), "ttyACM0", Duration::from_secs(86_400), &kept[1]).unwrap();
        assert_eq!(removed, gone.to_vec());
        assert!(gone.iter().all(|p| !p.exists()));
        assert!(kept.iter().all(|p| p.exists()));
    }
}
