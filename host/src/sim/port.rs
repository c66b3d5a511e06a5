//! Runs a virtual node behind a pseudo-terminal, so the host talks to it
//! through the same serial-port code it uses for a real device.

use std::io::{Read, Write};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use anyhow::{anyhow, Context, Result};
use serialport::{SerialPort, TTYPort};

use super::engine::VirtualNode;
use super::truth::GroundTruth;

/// Progress shared with the caller.
#[derive(Debug, Clone, Default)]
pub struct Progress {
    /// Simulated seconds done.
    pub simulated_s: f64,
    /// Scenario length, s.
    pub total_s: f64,
    /// Ground truth so far (updated every simulated second or so).
    pub truth: GroundTruth,
}

/// A virtual node running on its own thread behind a pseudo-terminal.
pub struct VirtualPort {
    path: String,
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

fn write_all_patiently(
    port: &mut TTYPort,
    mut bytes: &[u8],
    stop: &AtomicBool,
    unread: Unread,
) -> Result<()> {
    while !bytes.is_empty() {
        match port.write(bytes) {
            Ok(0) => return Err(anyhow!("pseudo-terminal closed")),
            Ok(n) => bytes = &bytes[n..],
            Err(e)
                if matches!(
                    e.kind(),
                    std::io::ErrorKind::TimedOut
                        | std::io::ErrorKind::WouldBlock
                        | std::io::ErrorKind::Interrupted
                ) =>
            {
                if stop.load(Ordering::Relaxed) || unread == Unread::Drop {
                    return Ok(());
                }
            }
            Err(e) => return Err(e).context("writing to the pseudo-terminal"),
        }
    }
    Ok(())
}

impl VirtualPort {
    /// Starts `node` behind a new pseudo-terminal. With `speed`, simulated
    /// time runs that many times faster than real time; without, as fast as
    /// the reader takes the bytes.
    pub fn spawn(node: VirtualNode, speed: Option<f64>) -> Result<Self> {
        Self::spawn_with(node, speed, Unread::Wait)
    }

    /// As [`VirtualPort::spawn`], choosing what happens to bytes nobody reads.
    pub fn spawn_with(mut node: VirtualNode, speed: Option<f64>, unread: Unread) -> Result<Self> {
        let (mut master, slave) = TTYPort::pair().context("cannot create a pseudo-terminal")?;
        let path = slave
            .name()
            .ok_or_else(|| anyhow!("pseudo-terminal has no name"))?;
        master.set_timeout(Duration::from_millis(20))?;
        let stop = Arc::new(AtomicBool::new(false));
        let finished = Arc::new(AtomicBool::new(false));
        let progress = Arc::new(Mutex::new(Progress {
            total_s: node.scenario().duration_s(),
            ..Progress::default()
        }));
        let (stop_t, finished_t, progress_t) = (stop.clone(), finished.clone(), progress.clone());
        let handle = std::thread::Builder::new()
            .name("virtual-node".into())
            .spawn(move || {
                // Keep our end of the slave open so the master never sees a hang-up
                // while the host closes and reopens the port.
                let _slave = slave;
                let started = Instant::now();
                let period_s = f64::from(node.scenario().sample_period_ms) / 1000.0;
                let batch = ((0.25 / period_s).ceil() as u64).max(1);
                let mut out = Vec::with_capacity(4096);
                let mut rx = [0u8; 512];
                let mut steps = 0u64;
                while !stop_t.load(Ordering::Relaxed) {
                    if !node.finished() {
                        node.step();
                        steps += 1;
                    }
                    node.drain_frames(&mut out);
                    if !out.is_empty() {
                        write_all_patiently(&mut master, &out, &stop_t, unread)?;
                        out.clear();
                    }
                    if steps.is_multiple_of(batch) || node.finished() {
                        if master.bytes_to_read().unwrap_or(0) > 0 {
                            if let Ok(n) = master.read(&mut rx) {
                                node.receive(&rx[..n]);
                            }
                        }
                        let simulated = node.now_us() as f64 / 1e6;
                        if let Ok(mut p) = progress_t.lock() {
                            p.simulated_s = simulated.min(p.total_s);
                            p.truth = node.truth().clone();
                        }
                        if node.finished() {
                            finished_t.store(true, Ordering::Relaxed);
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
            })?;
        Ok(VirtualPort {
            path,
            stop,
            finished,
            progress,
            handle: Some(handle),
        })
    }

    /// The pseudo-terminal path to open as a serial port.
    pub fn path(&self) -> &str {
        &self.path
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

impl Drop for VirtualPort {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
        if let Some(handle) = self.handle.take() {
            let _ = handle.join();
        }
    }
}
