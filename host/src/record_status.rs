//! What each port of a recording is doing, for people and scripts watching a
//! gateway: kept up to date by the port threads, written as `status.json` in
//! the runs folder every few seconds (whole files only), and printed by
//! `gleaner record --status`.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::time::Duration;

use anyhow::{Context, Result};
use serde::{Deserialize, Serialize};

use crate::analysis::text::duration;
use crate::link::{LinkStats, Tracked};
use crate::recorder::PortObserver;

/// The status file's name in the runs folder.
pub const STATUS_FILE: &str = "status.json";

/// Identifies the status file's layout.
pub const STATUS_SCHEMA: &str = "gleaner.record-status.v1";

/// One port's recording.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct PortStatus {
    /// The log being written.
    pub log: PathBuf,
    /// The port is open now.
    pub connected: bool,
    /// The node's id from its `Hello` (16 hex digits), once seen.
    pub node_id: Option<String>,
    /// The converter's state in the last report.
    pub state: Option<String>,
    /// Host time of the last frame, µs since the Unix epoch.
    pub last_frame_us: Option<u64>,
    /// Frames decoded.
    pub frames: u64,
    /// Frames the node sent that never arrived.
    pub lost_frames: u64,
    /// Frames dropped for damage.
    pub damaged_frames: u64,
    /// Times the port went away (gaps in the log).
    pub gaps: u64,
    /// Node reboots seen.
    pub reboots: u64,
    /// The disk is full: frames are read but not written.
    #[serde(default)]
    pub disk_full: bool,
    /// Frames received but not written because the disk was full.
    #[serde(default)]
    pub frames_not_written: u64,
    /// The node came back on this other port, and its recording goes on
    /// there in this port's log.
    #[serde(default)]
    pub moved_to: Option<String>,
    /// This port's recording has ended and its log is closed.
    #[serde(default)]
    pub log_closed: bool,
}

/// The status file: every port recorded.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct RecordStatus {
    /// [`STATUS_SCHEMA`].
    pub schema: String,
    /// When written, µs since the Unix epoch.
    pub written_us: u64,
    /// By port.
    pub ports: BTreeMap<String, PortStatus>,
}

/// The ports' statuses, shared by the port threads.
#[derive(Debug, Default)]
pub struct StatusBoard {
    ports: Mutex<BTreeMap<String, PortStatus>>,
}

impl StatusBoard {
    /// Changes `port`'s status.
    pub fn update(&self, port: &str, change: impl FnOnce(&mut PortStatus)) {
        if let Ok(mut ports) = self.ports.lock() {
            change(ports.entry(port.to_owned()).or_default());
        }
    }

    /// Claims for `port` the recording of another port, not connected, that
    /// last recorded the node `node_id`: returns that port, whose recording
    /// then ends so that `port` can go on in its log.
    pub fn claim_moved_node(&self, port: &str, node_id: &str) -> Option<String> {
        let mut ports = self.ports.lock().ok()?;
        let (left, status) = ports.iter_mut().find(|(p, s)| {
            p.as_str() != port
                && s.node_id.as_deref() == Some(node_id)
                && !s.connected
                && s.moved_to.is_none()
                && !s.log_closed
        })?;
        status.moved_to = Some(port.to_owned());
        Some(left.clone())
    }

    /// The port the node of `port` moved to, once `port` has lost it.
    pub fn moved_to(&self, port: &str) -> Option<String> {
        let ports = self.ports.lock().ok()?;
        let status = ports.get(port).filter(|s| !s.connected)?;
        status.moved_to.clone()
    }

    /// The log `port` wrote, once its recording has ended and the log is closed.
    pub fn closed_log(&self, port: &str) -> Option<PathBuf> {
        let ports = self.ports.lock().ok()?;
        let status = ports.get(port).filter(|s| s.log_closed)?;
        Some(status.log.clone())
    }

    /// True once `port`'s recording has ended because its node moved to
    /// another port (not for a recording that ended otherwise).
    pub fn handed_over(&self, port: &str) -> bool {
        self.ports
            .lock()
            .ok()
            .and_then(|ports| {
                ports
                    .get(port)
                    .map(|s| s.log_closed && s.moved_to.is_some())
            })
            .unwrap_or(false)
    }

    /// Everything now.
    pub fn snapshot(&self) -> RecordStatus {
        RecordStatus {
            schema: STATUS_SCHEMA.into(),
            written_us: crate::log::now_us(),
            ports: self.ports.lock().map(|p| p.clone()).unwrap_or_default(),
        }
    }

    /// Writes `DIR/status.json` whole (a reader never sees half a file).
    pub fn write(&self, dir: &Path) -> Result<()> {
        let mut file = crate::files::AtomicFile::create(&dir.join(STATUS_FILE))?;
        serde_json::to_writer_pretty(&mut file, &self.snapshot())?;
        std::io::Write::write_all(&mut file, b"\n")?;
        file.commit()
    }
}

/// Keeps a port's status while passing everything on to `inner`.
pub struct Reporting<'a> {
    board: &'a StatusBoard,
    port: String,
    inner: &'a mut dyn PortObserver,
}

impl<'a> Reporting<'a> {
    /// Reports `port` on `board`, recording to `log`.
    pub fn new(
        board: &'a StatusBoard,
        port: &str,
        log: &Path,
        inner: &'a mut dyn PortObserver,
    ) -> Self {
        board.update(port, |s| {
            s.log = log.to_path_buf();
            s.connected = true;
            s.moved_to = None;
            s.log_closed = false;
        });
        Reporting {
            board,
            port: port.to_owned(),
            inner,
        }
    }
}

fn counters(s: &mut PortStatus, stats: &LinkStats) {
    s.frames = stats.frames;
    s.lost_frames = stats.lost_frames;
    s.damaged_frames = stats.damaged();
    s.reboots = stats.reboots;
}

impl PortObserver for Reporting<'_> {
    fn inner(&mut self) -> Option<&mut dyn PortObserver> {
        Some(&mut *self.inner)
    }

    fn message(&mut self, tracked: &Tracked, host_time_us: u64, stats: &LinkStats) {
        self.board.update(&self.port, |s| {
            s.last_frame_us = Some(host_time_us);
            counters(s, stats);
            match &tracked.message.body {
                gleaner_protocol::UplinkBody::Hello(h) => {
                    s.node_id = Some(format!("{:016x}", h.node_id))
                }
                gleaner_protocol::UplinkBody::Report(r) => s.state = Some(r.state.name().into()),
                _ => {}
            }
        });
        self.inner.message(tracked, host_time_us, stats);
    }

    fn tick(&mut self, stats: &LinkStats, idle_for: Duration) -> bool {
        self.board.update(&self.port, |s| counters(s, stats));
        self.inner.tick(stats, idle_for)
    }

    fn link_changed(&mut self, connected: bool, detail: &str, host_time_us: u64) {
        self.board.update(&self.port, |s| {
            s.connected = connected;
            if !connected {
                s.gaps += 1;
            }
        });
        self.inner.link_changed(connected, detail, host_time_us);
    }

    fn disk_full(&mut self, full: bool, frames_not_written: u64) {
        self.board.update(&self.port, |s| {
            s.disk_full = full;
            s.frames_not_written = frames_not_written;
        });
        self.inner.disk_full(full, frames_not_written);
    }
}

/// What a full disk did to a port's recording, in words (nothing when it never filled).
fn disk_words(s: &PortStatus) -> String {
    match (s.disk_full, s.frames_not_written) {
        (true, n) => format!(", DISK FULL: paused, {n} frames not written"),
        (false, 0) => String::new(),
        (false, n) => format!(", {n} frames not written while the disk was full"),
    }
}

/// Reads `DIR/status.json` and says, one line per port, what each is doing.
pub fn describe(dir: &Path, now_us: u64) -> Result<String> {
    let path = dir.join(STATUS_FILE);
    let text = std::fs::read_to_string(&path).with_context(|| {
        format!("no recording status in {} (is `gleaner record` running with several ports or a pattern there?)", dir.display())
    })?;
    let status: RecordStatus = serde_json::from_str(&text)
        .with_context(|| format!("{} is not a recording status file", path.display()))?;
    let ago = |us: u64| duration(now_us.saturating_sub(us) as f64 / 1e6);
    let mut out = format!("status written {} ago\n", ago(status.written_us));
    for (port, s) in &status.ports {
        out.push_str(&format!(
            "{port}: {}, node {}, {}, last frame {}, frames {}, lost {}, damaged {}, gaps {}, reboots {}{}; log {}\n",
            match (&s.moved_to, s.connected) {
                (Some(to), false) => format!("not connected (the node moved to {to})"),
                (_, true) => "connected".into(),
                (None, false) => "not connected".into(),
            },
            s.node_id.as_deref().unwrap_or("not identified yet"),
            s.state.as_deref().unwrap_or("no report yet"),
            s.last_frame_us.map_or("never".into(), |t| format!("{} ago", ago(t))),
            s.frames,
            s.lost_frames,
            s.damaged_frames,
            s.gaps,
            s.reboots,
            disk_words(s),
            s.log.display()
        ));
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_status_file_round_trips_and_reads_in_words() {
        let dir = tempfile::tempdir().unwrap();
        let board = StatusBoard::default();
        board.update("/dev/ttyACM0", |s| {
            s.log = "runs/a.gleanlog".into();
            s.connected = true;
            s.node_id = Some("5157000000000001".into());
            s.state = Some("harvesting".into());
            s.last_frame_us = Some(1_000_000);
            s.frames = 42;
            s.gaps = 1;
        });
        board.write(dir.path()).unwrap();
        let text = describe(dir.path(), 61_000_000).unwrap();
        assert!(text.contains("/dev/ttyACM0: connected, node 5157000000000001, harvesting, last frame 00:01:00 ago, frames 42, lost 0, damaged 0, gaps 1, reboots 0; log"), "{text}");
        board.update("/dev/ttyACM0", |s| {
            s.disk_full = true;
            s.frames_not_written = 17;
        });
        board.write(dir.path()).unwrap();
        let text = describe(dir.path(), 61_000_000).unwrap();
        assert!(
            text.contains("reboots 0, DISK FULL: paused, 17 frames not written; log"),
            "{text}"
        );
        board.update("/dev/ttyACM0", |s| {
            s.connected = false;
            s.moved_to = Some("/dev/ttyACM3".into());
        });
        board.write(dir.path()).unwrap();
        let text = describe(dir.path(), 61_000_000).unwrap();
        assert!(
            text.contains("/dev/ttyACM0: not connected (the node moved to /dev/ttyACM3), node 5157000000000001"),
            "{text}"
        );
        let err = describe(&dir.path().join("none"), 0).unwrap_err();
        assert!(
            format!("{err:#}").contains("no recording status"),
            "{err:#}"
        );
    }

    #[test]
    fn a_node_is_claimed_only_from_a_port_that_lost_it_and_only_once() {
        let board = StatusBoard::default();
        let node = "5157000000000001";
        let on = |port: &str, connected: bool| {
            board.update(port, |s| {
                s.node_id = Some(node.into());
                s.connected = connected;
                s.log = format!("{port}.gleanlog").into();
            })
        };
        on("a", true);
        on("b", true);
        // Still connected on a: the same id on b is not taken for a move.
        assert_eq!(board.claim_moved_node("b", node), None);
        assert_eq!(board.claim_moved_node("b", "0000000000000002"), None);
        on("a", false);
        assert_eq!(board.claim_moved_node("b", node), Some("a".into()));
        assert_eq!(board.claim_moved_node("c", node), None, "claimed once");
        assert_eq!(board.moved_to("a"), Some("b".into()));
        // a's log is handed over only once its recording has closed it.
        assert_eq!(board.closed_log("a"), None);
        assert!(!board.handed_over("a"));
        board.update("a", |s| s.log_closed = true);
        assert_eq!(board.closed_log("a"), Some("a.gleanlog".into()));
        assert!(board.handed_over("a") && !board.handed_over("b"));
    }
}
