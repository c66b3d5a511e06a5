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
use crate::link::{open_port, LinkStats, LinkTracker, Tracked, HELLO_REQUEST_ID};
use crate::log::{now_us, DiskFull, LogHeader, LogWriter, MarkerKind, FORMAT_VERSION};

/// How often recorded data is forced to the disk.
pub const SYNC_EVERY: Duration = Duration::from_secs(1);

/// How often a recorder paused by a full disk tries to write again.
pub const RESUME_TRY_EVERY: Duration = Duration::from_secs(5);

/// Splits, logs and decodes.
pub struct Recorder {
    out: Output,
    splitter: FrameSplitter<MAX_UPLINK_FRAME_LEN>,
    tracker: LinkTracker,
    last_sync: Instant,
    bytes: u64,
}

/// The log being written, and whether a full disk has paused it.
struct Output {
    writer: Option<LogWriter>,
    /// Set while the disk is full: frames are decoded but not written.
    paused: Option<Paused>,
    /// Frames received but not written because the disk was full, in all.
    frames_not_written: u64,
}

/// A recording paused by a full disk.
#[derive(Debug, Clone, Copy)]
struct Paused {
    since_us: u64,
    /// Frames received since, not written.
    frames: u64,
    next_try: Instant,
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
            out: Output {
                writer,
                paused: None,
                frames_not_written: 0,
            },
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
        self.out.try_resume()?;
        for &byte in bytes {
            let Some(result) = self.splitter.push(byte) else {
                continue;
            };
            match result {
                Ok(frame) => {
                    self.out.write(|w| w.append_frame(host_time_us, frame))?;
                    self.out.count_if_paused();
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
                    self.out.write(|w| {
                        w.append_marker(
                            host_time_us,
                            MarkerKind::Discarded,
                            "bytes of an over-long frame",
                        )
                    })?;
                }
                Err(e) => self.tracker.count_error(e),
            }
        }
        self.flush()
    }

    /// Writes a marker, stamped now.
    pub fn mark(&mut self, kind: MarkerKind, detail: &str) -> Result<()> {
        self.mark_at(now_us(), kind, detail)
    }

    /// Writes a marker stamped `host_time_us`.
    pub fn mark_at(&mut self, host_time_us: u64, kind: MarkerKind, detail: &str) -> Result<()> {
        self.out
            .write(|w| w.append_marker(host_time_us, kind, detail))
    }

    /// Hands records to the operating system; forces them to disk once a
    /// second. A paused recorder tries to go on writing every
    /// [`RESUME_TRY_EVERY`].
    pub fn flush(&mut self) -> Result<()> {
        self.out.try_resume()?;
        let sync = self.last_sync.elapsed() >= SYNC_EVERY;
        self.out
            .write(|w| if sync { w.sync() } else { w.flush() })?;
        if sync {
            self.last_sync = Instant::now();
        }
        Ok(())
    }

    /// True while a full disk keeps the recorder from writing.
    pub fn is_paused(&self) -> bool {
        self.out.paused.is_some()
    }

    /// Frames received but not written because the disk was full.
    pub fn frames_not_written(&self) -> u64 {
        self.out.frames_not_written
    }

    /// Tries to write again at the next flush instead of after
    /// [`RESUME_TRY_EVERY`] (for a caller that knows space was freed).
    pub fn try_resume_now(&mut self) {
        if let Some(p) = self.out.paused.as_mut() {
            p.next_try = Instant::now();
        }
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
        self.out.write(|w| w.sync())?;
        match LogWriter::create(path, &header_for(source)) {
            Ok(w) => self.out.writer = Some(w),
            Err(e) if e.downcast_ref::<DiskFull>().is_some() => {
                // No room for the new log's header: the half-made file goes,
                // and the full disk pauses the old log as it would any write.
                let _ = std::fs::remove_file(path);
                return self.out.write(|_| Err(e));
            }
            Err(e) => return Err(e),
        }
        // A log paused by a full disk: there was room for the new one's header.
        self.try_resume_now();
        self.last_sync = Instant::now();
        self.mark(MarkerKind::Note, &format!("continued from {old}"))
    }

    /// Goes on in `earlier`, the node's own log from a port it has left
    /// (the recording there has ended): what this port recorded so far is
    /// copied to its end, after a note, and this port's short log is
    /// removed. If that cannot be done, recording goes on here and a note
    /// says why; either way nothing received is lost.
    pub fn go_on_in_earlier(&mut self, earlier: &Path, port: &str) -> Result<()> {
        let Some(short) = self.log_path().map(Path::to_path_buf) else {
            return Ok(());
        };
        self.out.write(|w| w.sync())?;
        if self.is_paused() {
            return Ok(()); // a full disk: stay where the pause will resume
        }
        match copy_log_into(&short, earlier, port) {
            Ok(writer) => {
                self.out.writer = Some(writer);
                // The short log lives on, whole, in the earlier one.
                let _ = std::fs::remove_file(&short);
                Ok(())
            }
            Err(e) => self.mark(
                MarkerKind::Note,
                &format!("the node's earlier log is not continued: {e:#}"),
            ),
        }
    }

    /// Writes the stop marker and forces everything to disk.
    pub fn finish(&mut self) -> Result<()> {
        self.mark(MarkerKind::Stopped, "recording stopped")?;
        self.out.write(|w| w.sync())
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
        self.out.writer.as_ref().map(|w| w.path())
    }
}

/// Appends the records of the log `short` (after its header) to the log
/// `earlier`, after a note saying the node came back on `port`; returns the
/// writer of `earlier`, synced. On failure `earlier` is cut back to where it
/// ended.
fn copy_log_into(short: &Path, earlier: &Path, port: &str) -> Result<LogWriter> {
    let mut writer = LogWriter::append_to(earlier)?;
    let copy = |writer: &mut LogWriter| -> Result<()> {
        let file = std::fs::File::open(short)?;
        let mut reader = crate::log::LogReader::new(file);
        let mut first = true;
        for record in reader.by_ref() {
            if first {
                first = false;
                writer.append_marker(
                    record.host_time_us,
                    MarkerKind::Note,
                    &format!(
                        "the node came back on {port}; its recording goes on here (from {})",
                        short.display()
                    ),
                )?;
            }
            match &record.body {
                crate::log::RecordBody::Frame(frame) => {
                    writer.append_frame(record.host_time_us, frame)?
                }
                crate::log::RecordBody::Marker { kind, detail } => {
                    writer.append_marker(record.host_time_us, *kind, detail)?
                }
                crate::log::RecordBody::Header(_) | crate::log::RecordBody::Unknown(_) => {}
            }
        }
        // A read that stopped early must not pass for the whole log: the
        // short log is removed once copied.
        reader.read_whole(&short.display().to_string())?;
        writer.sync()
    };
    if let Err(e) = copy(&mut writer) {
        writer.roll_back()?;
        return Err(e);
    }
    Ok(writer)
}

impl Output {
    /// Runs `op` on the log unless recording is paused. When the disk is
    /// full, the log is cut back to its last whole record and recording
    /// pauses (frames are still decoded, and counted); any other error stops it.
    fn write(&mut self, op: impl FnOnce(&mut LogWriter) -> Result<()>) -> Result<()> {
        if self.paused.is_some() {
            return Ok(());
        }
        let Some(w) = self.writer.as_mut() else {
            return Ok(());
        };
        let Err(e) = op(w) else {
            return Ok(());
        };
        if e.downcast_ref::<DiskFull>().is_none() {
            return Err(e);
        }
        let given_up = w.roll_back()?;
        eprintln!(
            "warning: {e}: recording paused, the log is intact up to here; frames are counted, not written, until space is free again (tried every {} s)",
            RESUME_TRY_EVERY.as_secs()
        );
        self.frames_not_written += given_up;
        self.paused = Some(Paused {
            since_us: now_us(),
            frames: given_up,
            next_try: Instant::now() + RESUME_TRY_EVERY,
        });
        Ok(())
    }

    /// Writes again when there is room: a note says how long the disk was
    /// full and how many frames were not written.
    fn try_resume(&mut self) -> Result<()> {
        let Some(p) = self.paused else {
            return Ok(());
        };
        if Instant::now() < p.next_try {
            return Ok(());
        }
        self.paused = None;
        let detail = format!(
            "the disk was full for {} s: {} frames received meanwhile were not written",
            now_us().saturating_sub(p.since_us) / 1_000_000,
            p.frames
        );
        self.write(|w| {
            w.append_marker(now_us(), MarkerKind::Note, &detail)?;
            w.sync()
        })?;
        match self.paused.as_mut() {
            // Still full: the frames not written go on counting from here.
            Some(again) => {
                again.since_us = p.since_us;
                again.frames = again.frames.saturating_add(p.frames);
            }
            None => eprintln!("recording resumed: {detail}"),
        }
        Ok(())
    }

    /// Counts a frame received while paused.
    fn count_if_paused(&mut self) {
        if let Some(p) = self.paused.as_mut() {
            p.frames += 1;
            self.frames_not_written += 1;
        }
    }
}

/// What the port loop reports to its caller between reads. An observer
/// that wraps another ([`PortObserver::inner`]) passes on, by default, every
/// call it does not handle itself; one that wraps none must handle
/// [`PortObserver::message`] and [`PortObserver::tick`].
pub trait PortObserver {
    /// The observer this one wraps, if any.
    fn inner(&mut self) -> Option<&mut dyn PortObserver> {
        None
    }
    /// A message arrived; the recorder stamped its frame `host_time_us`.
    fn message(&mut self, tracked: &Tracked, host_time_us: u64, stats: &LinkStats) {
        if let Some(inner) = self.inner() {
            inner.message(tracked, host_time_us, stats);
        }
    }
    /// Called after every read (or timeout): return true to stop.
    fn tick(&mut self, stats: &LinkStats, idle_for: Duration) -> bool {
        self.inner()
            .is_some_and(|inner| inner.tick(stats, idle_for))
    }
    /// The port went away or came back (at `host_time_us`).
    fn link_changed(&mut self, connected: bool, detail: &str, host_time_us: u64) {
        if let Some(inner) = self.inner() {
            inner.link_changed(connected, detail, host_time_us);
        }
    }
    /// Bytes to send to the node now (commands), if any.
    fn outgoing(&mut self) -> Option<Vec<u8>> {
        self.inner().and_then(|inner| inner.outgoing())
    }
    /// Another log to go on in now, if any.
    fn next_log(&mut self) -> Option<NextLog> {
        self.inner().and_then(|inner| inner.next_log())
    }
    /// The disk filled (`full`) or has room again; frames received and not
    /// written so far.
    fn disk_full(&mut self, full: bool, frames_not_written: u64) {
        if let Some(inner) = self.inner() {
            inner.disk_full(full, frames_not_written);
        }
    }
}

/// Where a recording goes on.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum NextLog {
    /// A new log (rotation).
    New(std::path::PathBuf),
    /// The node's own log from a port it has left: it came back on this one.
    Earlier(std::path::PathBuf),
}

/// What ends the detail of the marker of a port opened again after a loss.
pub const RECONNECTED: &str = " (reconnected)";

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
    let mut was_full = false;
    while !stop.load(Ordering::Relaxed) {
        match link.as_mut() {
            Some(p) => match p.read(&mut buf) {
                Ok(0) => {}
                Ok(n) => {
                    last_data = Instant::now();
                    take_bytes(recorder, observer, &buf[..n])?;
                }
                Err(e) if crate::link::ports::try_again(&e) => {}
                Err(e) => {
                    let (detail, at) = (format!("{port}: {e}"), now_us());
                    recorder.mark_at(at, MarkerKind::PortLost, &detail)?;
                    recorder.resync();
                    observer.link_changed(false, &detail, at);
                    link = None;
                }
            },
            None => link = reopen(recorder, observer, port, baud)?,
        }
        if let (Some(p), Some(bytes)) = (link.as_mut(), observer.outgoing()) {
            if let Err(e) = p.write_all(&bytes).and_then(|()| p.flush()) {
                recorder.mark(MarkerKind::Note, &format!("could not send a command: {e}"))?;
            }
        }
        follow_next_log(recorder, observer, link.as_mut(), port)?;
        if recorder.is_paused() != was_full {
            was_full = recorder.is_paused();
            observer.disk_full(was_full, recorder.frames_not_written());
        }
        if observer.tick(recorder.stats(), last_data.elapsed()) {
            break;
        }
    }
    Ok(())
}

/// Records bytes read from the port and shows the observer every message in them.
fn take_bytes(
    recorder: &mut Recorder,
    observer: &mut dyn PortObserver,
    bytes: &[u8],
) -> Result<()> {
    let mut messages = Vec::new();
    let host_time_us = now_us();
    recorder.on_bytes(host_time_us, bytes, |t| messages.push(t.clone()))?;
    for t in &messages {
        observer.message(t, host_time_us, recorder.stats());
    }
    Ok(())
}

/// After a quarter second, tries the lost port again; when it opens, the log
/// and the observer are told and the node is asked for its `Hello`.
fn reopen(
    recorder: &mut Recorder,
    observer: &mut dyn PortObserver,
    port: &str,
    baud: u32,
) -> Result<Option<Box<dyn serialport::SerialPort>>> {
    std::thread::sleep(Duration::from_millis(250));
    let Ok(mut p) = open_port(port, baud) else {
        return Ok(None);
    };
    let at = now_us();
    let detail = format!("{port} at {baud} baud{RECONNECTED}");
    recorder.mark_at(at, MarkerKind::PortOpened, &detail)?;
    observer.link_changed(true, port, at);
    ask_for_hello(&mut p, recorder)?;
    Ok(Some(p))
}

/// Goes on in another log when the observer says so (rotation, a node that
/// moved here from another port).
fn follow_next_log(
    recorder: &mut Recorder,
    observer: &mut dyn PortObserver,
    link: Option<&mut Box<dyn serialport::SerialPort>>,
    port: &str,
) -> Result<()> {
    match observer.next_log() {
        Some(NextLog::New(path)) => {
            recorder.continue_in(&path, port)?;
            // The new log describes the node too.
            if let Some(p) = link {
                ask_for_hello(p, recorder)?;
            }
        }
        Some(NextLog::Earlier(path)) => recorder.go_on_in_earlier(&path, port)?,
        None => {}
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::log::{LogHeader, LogReader, RecordBody};

    fn header() -> LogHeader {
        LogHeader {
            format_version: 1,
            writer: "recorder test".into(),
            host: "bench".into(),
            started: "now".into(),
            source: "none".into(),
        }
    }

    /// A log of `frames` frames of 12 bytes, at host times from `t0` on.
    fn log_with(path: &Path, t0: u64, frames: u64) {
        let mut w = LogWriter::create(path, &header()).unwrap();
        for i in 0..frames {
            w.append_frame(t0 + i, &[i as u8 + 1; 12]).unwrap();
        }
        w.sync().unwrap();
    }

    fn frames_in(path: &Path) -> Vec<u64> {
        LogReader::new(std::fs::File::open(path).unwrap())
            .filter(|r| matches!(r.body, RecordBody::Frame(_)))
            .map(|r| r.host_time_us)
            .collect()
    }

    #[test]
    fn a_moved_nodes_log_goes_on_in_its_earlier_one_whole_or_not_at_all() {
        let dir = tempfile::tempdir().unwrap();
        let (earlier, short) = (dir.path().join("a.gleanlog"), dir.path().join("b.gleanlog"));
        log_with(&earlier, 100, 3);
        log_with(&short, 500, 4);
        let before = std::fs::read(&earlier).unwrap();
        // The short log's frames follow the earlier ones, after a note.
        drop(copy_log_into(&short, &earlier, "/dev/ttyB").unwrap());
        assert_eq!(frames_in(&earlier), [100, 101, 102, 500, 501, 502, 503]);
        // A "log" that cannot be read to its end (here a folder: reading it
        // fails) is not continued, and the earlier log is as it was.
        std::fs::write(&earlier, &before).unwrap();
        let Err(err) = copy_log_into(dir.path(), &earlier, "/dev/ttyB") else {
            panic!("a folder was copied as a log");
        };
        assert!(
            crate::failure::Failure::find::<crate::log::LogError>(&err).is_some(),
            "{err:#}"
        );
        assert_eq!(std::fs::read(&earlier).unwrap(), before);
    }
}
