//! Recording: bytes from a port are split into frames, every frame is written
//! to the log as received (damaged ones too, so nothing is lost), and good
//! frames are decoded and placed for the live view.
//!
//! [`run_port`] drives a port: it reconnects when the port disappears and comes
//! back, marks the gap, and stops cleanly when asked.

use std::io::{Read, Write};
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use anyhow::{bail, Result};
use gleaner_protocol::{FrameError, FrameSplitter, MAX_UPLINK_FRAME_LEN};

use crate::link::tracker::TrackError;
use crate::link::{open_port, LinkStats, LinkTracker, Tracked};
use crate::log::{now_us, LogHeader, LogWriter, MarkerKind, FORMAT_VERSION};

/// How often recorded data is forced to the disk.
pub const SYNC_EVERY: Duration = Duration::from_secs(1);

/// Splits, logs and decodes.
pub struct Recorder {
    writer: Option<LogWriter>,
    splitter: FrameSplitter<MAX_UPLINK_FRAME_LEN>,
    tracker: LinkTracker,
    last_sync: Instant,
    bytes: u64,
}

/// The header for a new log recorded from `source`.
pub fn header_for(source: &str) -> LogHeader {
    let host = std::fs::read_to_string("/proc/sys/kernel/hostname")
        .or_else(|_| std::fs::read_to_string("/etc/hostname"))
        .map(|s| s.trim().to_string())
        .unwrap_or_else(|_| "unknown".into());
    LogHeader {
        format_version: FORMAT_VERSION,
        writer: format!("gleaner {}", env!("CARGO_PKG_VERSION")),
        host,
        started: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        source: source.into(),
    }
}

impl Recorder {
    /// A recorder writing to `writer` (or only decoding when None).
    pub fn new(writer: Option<LogWriter>) -> Self {
        Recorder {
            writer,
            splitter: FrameSplitter::new(),
            tracker: LinkTracker::new(),
            last_sync: Instant::now(),
            bytes: 0,
        }
    }

    /// Creates the log at `path` and a recorder for it.
    pub fn create(path: &Path, source: &str) -> Result<Self> {
        Ok(Self::new(Some(LogWriter::create(
            path,
            &header_for(source),
        )?)))
    }

    /// Takes bytes received at `host_time_us`; calls `on_message` for each
    /// decoded message. A protocol version mismatch stops recording.
    pub fn on_bytes(
        &mut self,
        host_time_us: u64,
        bytes: &[u8],
        mut on_message: impl FnMut(&Tracked),
    ) -> Result<()> {
        self.bytes += bytes.len() as u64;
        for &byte in bytes {
            let Some(result) = self.splitter.push(byte) else {
                continue;
            };
            match result {
                Ok(frame) => {
                    if let Some(w) = self.writer.as_mut() {
                        w.append_frame(host_time_us, frame)?;
                    }
                    match self.tracker.accept_encoded(frame) {
                        Ok(Some(tracked)) => on_message(&tracked),
                        Ok(None) | Err(TrackError::Frame(_)) => {}
                        Err(TrackError::Version(mismatch)) => {
                            self.flush()?;
                            bail!("{mismatch}; recording stopped (the log so far is kept)");
                        }
                    }
                }
                Err(FrameError::Oversize) => {
                    self.tracker.count_error(FrameError::Oversize);
                    if let Some(w) = self.writer.as_mut() {
                        w.append_marker(
                            host_time_us,
                            MarkerKind::Discarded,
                            "bytes of an over-long frame",
                        )?;
                    }
                }
                Err(e) => self.tracker.count_error(e),
            }
        }
        self.flush()
    }

    /// Writes a marker.
    pub fn mark(&mut self, kind: MarkerKind, detail: &str) -> Result<()> {
        if let Some(w) = self.writer.as_mut() {
            w.append_marker(now_us(), kind, detail)?;
        }
        Ok(())
    }

    /// Hands records to the operating system; forces them to disk once a second.
    pub fn flush(&mut self) -> Result<()> {
        if let Some(w) = self.writer.as_mut() {
            w.flush()?;
            if self.last_sync.elapsed() >= SYNC_EVERY {
                w.sync()?;
                self.last_sync = Instant::now();
            }
        }
        Ok(())
    }

    /// Forgets a partly received frame (after a reconnect).
    pub fn resync(&mut self) {
        self.splitter.clear();
    }

    /// Goes on in a new log at `path` (rotation): the old log ends with a
    /// note naming the new one and is forced to disk; the new one starts
    /// with a header and a note naming the old one. Nothing received is lost
    /// and the link counters carry on.
    pub fn continue_in(&mut self, path: &Path, source: &str) -> Result<()> {
        let old = self
            .log_path()
            .map(|p| p.display().to_string())
            .unwrap_or_default();
        self.mark(
            MarkerKind::Note,
            &format!("continues in {}", path.display()),
        )?;
        if let Some(w) = self.writer.as_mut() {
            w.sync()?;
        }
        self.writer = Some(LogWriter::create(path, &header_for(source))?);
        self.last_sync = Instant::now();
        self.mark(MarkerKind::Note, &format!("continued from {old}"))
    }

    /// Writes the stop marker and forces everything to disk.
    pub fn finish(&mut self) -> Result<()> {
        self.mark(MarkerKind::Stopped, "recording stopped")?;
        if let Some(w) = self.writer.as_mut() {
            w.sync()?;
        }
        Ok(())
    }

    /// Link counters.
    pub fn stats(&self) -> &LinkStats {
        self.tracker.stats()
    }

    /// Bytes received.
    pub fn bytes_received(&self) -> u64 {
        self.bytes
    }

    /// The log being written.
    pub fn log_path(&self) -> Option<&Path> {
        self.writer.as_ref().map(|w| w.path())
    }
}

/// What the port loop reports to its caller between reads.
pub trait PortObserver {
    /// A message arrived; the recorder stamped its frame `host_time_us`.
    fn message(&mut self, tracked: &Tracked, host_time_us: u64, stats: &LinkStats);
    /// Called after every read (or timeout): return true to stop.
    fn tick(&mut self, stats: &LinkStats, idle_for: Duration) -> bool;
    /// The port went away or came back.
    fn link_changed(&mut self, _connected: bool, _detail: &str) {}
    /// Bytes to send to the node now (commands), if any.
    fn outgoing(&mut self) -> Option<Vec<u8>> {
        None
    }
    /// A new log to go on in now (rotation), if any.
    fn next_log(&mut self) -> Option<std::path::PathBuf> {
        None
    }
}

/// Request id of the `Hello` asked for on every connect (the node echoes it).
pub const HELLO_REQUEST_ID: u16 = 0xFFF0;

/// Asks the node for its `Hello` (firmware, identity, calibration and
/// thresholds): a node that was running before the port opened sent its own
/// long ago, and a log without one does not describe itself.
fn ask_for_hello(port: &mut impl Write, recorder: &mut Recorder) -> Result<()> {
    let sent = crate::link::downlink_frame(HELLO_REQUEST_ID, gleaner_protocol::Command::GetInfo)
        .and_then(|frame| Ok(port.write_all(&frame).and_then(|()| port.flush())?));
    match sent {
        Ok(()) => Ok(()),
        Err(e) => recorder.mark(
            MarkerKind::Note,
            &format!("could not ask the node for its Hello: {e}"),
        ),
    }
}

/// Reads `port` until `stop` is set or the observer says so, reconnecting
/// when the port goes away. Returns when done; the log is complete.
pub fn run_port(
    recorder: &mut Recorder,
    port: &str,
    baud: u32,
    stop: &AtomicBool,
    observer: &mut dyn PortObserver,
) -> Result<()> {
    let mut link = Some(open_port(port, baud)?);
    recorder.mark(MarkerKind::PortOpened, &format!("{port} at {baud} baud"))?;
    if let Some(p) = link.as_mut() {
        ask_for_hello(p, recorder)?;
    }
    let mut buf = [0u8; 4096];
    let mut last_data = Instant::now();
    while !stop.load(Ordering::Relaxed) {
        match link.as_mut() {
            Some(p) => match p.read(&mut buf) {
                Ok(0) => {}
                Ok(n) => {
                    last_data = Instant::now();
                    let mut messages = Vec::new();
                    let host_time_us = now_us();
                    recorder.on_bytes(host_time_us, &buf[..n], |t| messages.push(t.clone()))?;
                    for t in &messages {
                        observer.message(t, host_time_us, recorder.stats());
                    }
                }
                Err(e)
                    if matches!(
                        e.kind(),
                        std::io::ErrorKind::TimedOut
                            | std::io::ErrorKind::WouldBlock
                            | std::io::ErrorKind::Interrupted
                    ) => {}
                Err(e) => {
                    let detail = format!("{port}: {e}");
                    recorder.mark(MarkerKind::PortLost, &detail)?;
                    recorder.resync();
                    observer.link_changed(false, &detail);
                    link = None;
                }
            },
            None => {
                std::thread::sleep(Duration::from_millis(250));
                if let Ok(p) = open_port(port, baud) {
                    recorder.mark(
                        MarkerKind::PortOpened,
                        &format!("{port} at {baud} baud (reconnected)"),
                    )?;
                    observer.link_changed(true, port);
                    link = Some(p);
                    if let Some(p) = link.as_mut() {
                        ask_for_hello(p, recorder)?;
                    }
                }
            }
        }
        if let (Some(p), Some(bytes)) = (link.as_mut(), observer.outgoing()) {
            if let Err(e) = p.write_all(&bytes).and_then(|()| p.flush()) {
                recorder.mark(MarkerKind::Note, &format!("could not send a command: {e}"))?;
            }
        }
        if let Some(path) = observer.next_log() {
            recorder.continue_in(&path, port)?;
            // The new log describes the node too.
            if let Some(p) = link.as_mut() {
                ask_for_hello(p, recorder)?;
            }
        }
        if observer.tick(recorder.stats(), last_data.elapsed()) {
            break;
        }
    }
    Ok(())
}
