//! Runs a virtual node behind a pseudo-terminal, so the host talks to it
//! through the same serial-port code it uses for a real device.

use std::io::{Read, Write};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use anyhow::{anyhow, Context, Result};
use serialport::{SerialPort, TTYPort};

use crate::sim::run::engine::VirtualNode;
use crate::sim::run::truth::GroundTruth;

/// Progress shared with the caller.
#[derive(Debug, Clone, Default)]
pub struct Progress {
    /// Simulated seconds done.
    pub simulated_s: f64,
    /// Scenario length, s.
    pub total_s: f64,
    /// Ground truth so far (updated every simulated second or so).
    pub truth: GroundTruth,
    /// Frames handed whole to the pseudo-terminal.
    pub frames_sent: u64,
    /// Frames not sent whole: unplugged, or nobody reading (with [`Unread::Drop`]).
    pub frames_dropped: u64,
}

/// The pseudo-terminal the node is plugged into, shared with its thread.
#[derive(Debug, Default)]
struct Plug {
    /// The slave's path.
    path: String,
    /// Asked for: unplug for this long, then plug into a new pseudo-terminal.
    unplug_for: Option<Duration>,
    /// Times plugged into a new pseudo-terminal.
    replugs: u64,
}

/// A virtual node running on its own thread behind a pseudo-terminal.
pub struct VirtualPort {
    plug: Arc<Mutex<Plug>>,
    stop: Arc<AtomicBool>,
    finished: Arc<AtomicBool>,
    progress: Arc<Mutex<Progress>>,
    handle: Option<JoinHandle<Result<GroundTruth>>>,
}

/// What the node does when nobody reads its bytes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Unread {
    /// Wait for a reader (simulated time stands still): nothing is lost.
    Wait,
    /// Drop them, as a real node's UART does with nothing attached; the
    /// node's time runs on.
    Drop,
}

/// Writes `all`; returns how many bytes went (fewer only with [`Unread::Drop`]).
fn write_all_patiently(
    port: &mut TTYPort,
    all: &[u8],
    stop: &AtomicBool,
    unread: Unread,
) -> Result<usize> {
    let mut bytes = all;
    while !bytes.is_empty() {
        match port.write(bytes) {
            Ok(0) => return Err(anyhow!("pseudo-terminal closed")),
            Ok(n) => bytes = &bytes[n..],
            Err(e) if crate::link::ports::try_again(&e) => {
                if stop.load(Ordering::Relaxed) || unread == Unread::Drop {
                    break;
                }
            }
            Err(e) => return Err(e).context("writing to the pseudo-terminal"),
        }
    }
    Ok(all.len() - bytes.len())
}

/// Frames ending in `bytes` (each ends with its 0 delimiter).
fn frames_in(bytes: &[u8]) -> u64 {
    bytes.iter().filter(|&&b| b == 0).count() as u64
}

impl VirtualPort {
    /// Starts `node` behind a new pseudo-terminal. With `speed`, simulated
    /// time runs that many times faster than real time; without, as fast as
    /// the reader takes the bytes.
    pub fn spawn(node: VirtualNode, speed: Option<f64>) -> Result<Self> {
        Self::spawn_with(node, speed, Unread::Wait)
    }

    /// As [`VirtualPort::spawn`], choosing what happens to bytes nobody reads.
    pub fn spawn_with(node: VirtualNode, speed: Option<f64>, unread: Unread) -> Result<Self> {
        let (wire, path) = Wire::plugged()?;
        let plug = Arc::new(Mutex::new(Plug {
            path,
            ..Plug::default()
        }));
        let stop = Arc::new(AtomicBool::new(false));
        let finished = Arc::new(AtomicBool::new(false));
        let progress = Arc::new(Mutex::new(Progress {
            total_s: node.scenario().duration_s(),
            ..Progress::default()
        }));
        let (stop_t, finished_t, progress_t, plug_t) = (
            stop.clone(),
            finished.clone(),
            progress.clone(),
            plug.clone(),
        );
        let handle = std::thread::Builder::new()
            .name("virtual-node".into())
            .spawn(move || {
                let shared = Shared {
                    stop: stop_t,
                    finished: finished_t,
                    progress: progress_t,
                    plug: plug_t,
                };
                serve_node(node, wire, &shared, speed, unread)
            })?;
        Ok(VirtualPort {
            plug,
            stop,
            finished,
            progress,
            handle: Some(handle),
        })
    }

    /// Unplugs the node for `gap` (its time runs on, its bytes are lost),
    /// then plugs it into a new pseudo-terminal: see [`VirtualPort::replugs`]
    /// and [`VirtualPort::path`].
    pub fn unplug_for(&self, gap: Duration) {
        if let Ok(mut plug) = self.plug.lock() {
            plug.unplug_for = Some(gap);
        }
    }

    /// Times the node was plugged into a new pseudo-terminal.
    pub fn replugs(&self) -> u64 {
        self.plug.lock().map_or(0, |p| p.replugs)
    }

    /// The pseudo-terminal path to open as a serial port (a new one after
    /// each replug).
    pub fn path(&self) -> String {
        self.plug.lock().map(|p| p.path.clone()).unwrap_or_default()
    }

    /// True once the whole scenario has been simulated and sent.
    pub fn finished(&self) -> bool {
        self.finished.load(Ordering::Relaxed)
    }

    /// Progress so far.
    pub fn progress(&self) -> Progress {
        self.progress.lock().map(|p| p.clone()).unwrap_or_default()
    }

    /// Stops the node and returns the ground truth.
    pub fn stop(mut self) -> Result<GroundTruth> {
        self.stop.store(true, Ordering::Relaxed);
        match self.handle.take() {
            Some(handle) => handle
                .join()
                .map_err(|_| anyhow!("virtual node thread panicked"))?,
            None => Err(anyhow!("virtual node already stopped")),
        }
    }
}

/// What the node's thread shares with its [`VirtualPort`].
struct Shared {
    stop: Arc<AtomicBool>,
    finished: Arc<AtomicBool>,
    progress: Arc<Mutex<Progress>>,
    plug: Arc<Mutex<Plug>>,
}

/// The node's thread: steps the node (at `speed` times real time, or as
/// fast as it goes), writes its frames to the wire, takes what the wire
/// brings, and follows unplugging, until told to stop.
fn serve_node(
    mut node: VirtualNode,
    mut wire: Wire,
    shared: &Shared,
    speed: Option<f64>,
    unread: Unread,
) -> Result<crate::sim::GroundTruth> {
    let started = Instant::now();
    let period_s = f64::from(node.scenario().sample_period_ms) / 1000.0;
    let batch = ((0.25 / period_s).ceil() as u64).max(1);
    let mut out = Vec::with_capacity(4096);
    let (mut steps, mut sent, mut dropped) = (0u64, 0u64, 0u64);
    while !shared.stop.load(Ordering::Relaxed) {
        if !node.finished() {
            node.step();
            steps += 1;
        }
        node.drain_frames(&mut out);
        if !out.is_empty() {
            let went = match wire.master.as_mut() {
                Some(master) => write_all_patiently(master, &out, &shared.stop, unread)?,
                None => 0, // unplugged: the bytes are lost
            };
            let (whole, rest) = out.split_at(went.min(out.len()));
            (sent, dropped) = (sent + frames_in(whole), dropped + frames_in(rest));
            out.clear();
        }
        if steps.is_multiple_of(batch) || node.finished() {
            wire.follow(&shared.plug)?;
            wire.receive(&mut node);
            let simulated = node.now_us() as f64 / 1e6;
            if let Ok(mut p) = shared.progress.lock() {
                p.simulated_s = simulated.min(p.total_s);
                p.truth = node.truth().clone();
                (p.frames_sent, p.frames_dropped) = (sent, dropped);
            }
            if node.finished() {
                shared.finished.store(true, Ordering::Relaxed);
                std::thread::sleep(Duration::from_millis(10));
            } else if let Some(speed) = speed {
                let due = Duration::from_secs_f64(simulated / speed);
                if let Some(wait) = due.checked_sub(started.elapsed()) {
                    std::thread::sleep(wait.min(Duration::from_millis(200)));
                }
            }
        }
    }
    Ok(node.truth().clone())
}

/// The node's end of the line: a pseudo-terminal, or nothing while unplugged.
struct Wire {
    master: Option<TTYPort>,
    /// Our end of the slave, kept open so the master never sees a hang-up
    /// while the host closes and reopens the port.
    slave: Option<TTYPort>,
    /// Unplugged until then.
    back_at: Option<Instant>,
}

impl Wire {
    /// A new pseudo-terminal, and its slave's path.
    fn plugged() -> Result<(Self, String)> {
        let (mut master, slave) = TTYPort::pair().context("cannot create a pseudo-terminal")?;
        let path = slave
            .name()
            .ok_or_else(|| anyhow!("pseudo-terminal has no name"))?;
        master.set_timeout(Duration::from_millis(20))?;
        let wire = Wire {
            master: Some(master),
            slave: Some(slave),
            back_at: None,
        };
        Ok((wire, path))
    }

    /// Unplugs or plugs back in as `plug` asks.
    fn follow(&mut self, plug: &Mutex<Plug>) -> Result<()> {
        let Ok(mut plug) = plug.lock() else {
            return Ok(());
        };
        if let Some(gap) = plug.unplug_for.take() {
            // Closing both ends: the host's reads fail, as on a real unplug.
            (self.master, self.slave) = (None, None);
            self.back_at = Some(Instant::now() + gap);
        }
        if self.back_at.is_some_and(|t| Instant::now() >= t) {
            let (wire, path) = Wire::plugged()?;
            *self = wire;
            plug.path = path;
            plug.replugs += 1;
        }
        Ok(())
    }

    /// Hands the node whatever the host sent.
    fn receive(&mut self, node: &mut VirtualNode) {
        let Some(master) = self.master.as_mut() else {
            return;
        };
        let mut rx = [0u8; 512];
        if master.bytes_to_read().unwrap_or(0) > 0 {
            if let Ok(n) = master.read(&mut rx) {
                node.receive(&rx[..n]);
            }
        }
    }
}

impl Drop for VirtualPort {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
        if let Some(handle) = self.handle.take() {
            let _ = handle.join();
        }
    }
}
