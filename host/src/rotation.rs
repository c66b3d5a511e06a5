//! When a recording goes on in a new log: at the start of every UTC day
//! (`record --rotate daily`), when the log reaches a size (`--rotate-mb`),
//! and when the recorder gets SIGHUP (the usual
//! signal of tools that move logs away). The old log ends with a note naming
//! the new one, so a set of rotated logs reads back in order.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// How often the date (daily rotation) and the log's size (a size limit)
/// are looked at.
const CHECK_EVERY: Duration = Duration::from_secs(1);

use crate::link::{LinkStats, Tracked};
use crate::record_status::StatusBoard;
use crate::recorder::{NextLog, PortObserver};
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
    checked: Instant,
    /// A new log when the current one has this many bytes.
    max_bytes: Option<u64>,
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
    /// The port this node was recorded on before, whose log this recording
    /// goes on in once that port's recording has ended.
    came_from: Option<String>,
    /// The node identified on this port, and until when a port it left is
    /// looked for (that port may notice it lost the node a little later).
    seeking: Option<(String, Instant)>,
}

/// How long after a node is identified a port it left is looked for.
const SEEK_MOVED_NODE_FOR: Duration = Duration::from_secs(30);

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
            checked: Instant::now(),
            max_bytes: None,
            dir,
            name,
            status,
            current: PathBuf::new(),
            closing: None,
            upkeep: Upkeep::none(),
            came_from: None,
            seeking: None,
        }
    }

    /// Also goes on in a new log when the current one has `max_bytes`.
    pub fn limited_to(mut self, max_bytes: Option<u64>) -> Self {
        self.max_bytes = max_bytes;
        self
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

impl Rotating<'_> {
    /// A node identified on this port: if a port it has left still holds its
    /// log, this port will go on in it.
    fn identified(&mut self, node_id: u64) {
        if self.status.is_some() && self.came_from.is_none() {
            let until = Instant::now() + SEEK_MOVED_NODE_FOR;
            self.seeking = Some((format!("{node_id:016x}"), until));
        }
    }

    /// The node's earlier log, once the port it left has closed it.
    fn earlier_log(&mut self) -> Option<PathBuf> {
        let (board, port) = self.status.as_ref()?;
        if let Some((node_id, until)) = &self.seeking {
            self.came_from = board.claim_moved_node(port, node_id);
            if self.came_from.is_some() || Instant::now() > *until {
                self.seeking = None;
            }
        }
        let log = board.closed_log(self.came_from.as_deref()?)?;
        self.came_from = None;
        board.update(port, |s| s.log = log.clone());
        self.upkeep.opened(&log);
        self.current = log.clone();
        Some(log)
    }
}

impl PortObserver for Rotating<'_> {
    fn inner(&mut self) -> Option<&mut dyn PortObserver> {
        Some(&mut *self.inner)
    }

    fn message(&mut self, tracked: &Tracked, host_time_us: u64, stats: &LinkStats) {
        if let gleaner_protocol::UplinkBody::Hello(hello) = &tracked.message.body {
            self.identified(hello.node_id);
        }
        self.inner.message(tracked, host_time_us, stats);
    }

    fn tick(&mut self, stats: &LinkStats, idle_for: Duration) -> bool {
        // The node came back on another port: this port's recording ends,
        // so that one can go on in its log.
        let moved = self
            .status
            .as_ref()
            .is_some_and(|(board, port)| board.moved_to(port).is_some());
        self.inner.tick(stats, idle_for) || moved
    }

    fn next_log(&mut self) -> Option<NextLog> {
        // Called after every read: the date is looked at once a second, and
        // only when rotating daily.
        if let Some(closed) = self.closing.take() {
            self.upkeep.closed(&closed);
        }
        if let Some(earlier) = self.earlier_log() {
            return Some(NextLog::Earlier(earlier));
        }
        let generation = self.reopen.generation();
        let (mut new_day, mut full) = (None, false);
        if self.checked.elapsed() >= CHECK_EVERY {
            self.checked = Instant::now();
            if self.every == Every::Daily {
                new_day = Some(today()).filter(|day| *day != self.day);
            }
            full = self
                .max_bytes
                .is_some_and(|max| std::fs::metadata(&self.current).is_ok_and(|m| m.len() >= max));
        }
        if generation == self.seen && new_day.is_none() && !full {
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
        Some(NextLog::New(path))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Quiet;

    impl PortObserver for Quiet {
        fn message(&mut self, _: &Tracked, _: u64, _: &LinkStats) {}
        fn tick(&mut self, _: &LinkStats, _: Duration) -> bool {
            false
        }
    }

    #[test]
    fn a_log_that_reaches_its_size_limit_is_followed_by_a_new_one() {
        let dir = tempfile::tempdir().unwrap();
        let current = dir.path().join("node-20261203000000.gleanlog");
        std::fs::write(&current, [0u8; 999]).unwrap();
        let (mut quiet, reopen) = (Quiet, Reopen::default());
        let mut rotating = Rotating::new(
            &mut quiet,
            Every::Never,
            &reopen,
            dir.path().to_path_buf(),
            "node".into(),
            None,
        )
        .keeping(&current, Upkeep::none())
        .limited_to(Some(1000));
        let a_while_ago = Instant::now() - CHECK_EVERY;
        rotating.checked = a_while_ago;
        assert_eq!(rotating.next_log(), None, "999 bytes of 1000");
        std::fs::write(&current, [0u8; 1000]).unwrap();
        assert_eq!(rotating.next_log(), None, "looked at once a second");
        rotating.checked = a_while_ago;
        let Some(NextLog::New(next)) = rotating.next_log() else {
            panic!("a new log at 1000 bytes");
        };
        assert_eq!(next.parent(), Some(dir.path()));
        assert!(next
            .file_name()
            .unwrap()
            .to_string_lossy()
            .starts_with("node-"));
        assert_ne!(next, current);
    }
}
