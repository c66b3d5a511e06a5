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

use crate::link::{LinkStats, Tracked};
use crate::record_status::StatusBoard;
use crate::recorder::PortObserver;
use crate::upkeep::Upkeep;

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
    /// The log just left, complete once the recorder has written its last
    /// note (by the next call).
    closing: Option<PathBuf>,
    /// What becomes of closed logs.
    upkeep: Upkeep,
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
            closing: None,
            upkeep: Upkeep::none(),
        }
    }

    /// Writing `current` now; closed logs are handed to `upkeep`.
    pub fn keeping(mut self, current: &Path, upkeep: Upkeep) -> Self {
        upkeep.opened(current);
        self.current = current.to_path_buf();
        self.upkeep = upkeep;
        self
    }
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
        if let Some(closed) = self.closing.take() {
            self.upkeep.closed(&closed);
        }
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
        self.upkeep.opened(&path);
        self.closing = Some(std::mem::replace(&mut self.current, path.clone()));
        Some(path)
    }
}
