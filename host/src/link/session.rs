//! A blocking session with a node on an open port: one command at a time,
//! each waiting for its reply (`gleaner node`, calibration, tests).

use std::io::{Read, Write};
use std::time::{Duration, Instant};

use anyhow::{Context, Result};
use gleaner_protocol::{
    Command, FrameSplitter, Hello, NodeConfig, Outcome, Sample, UplinkBody, MAX_UPLINK_FRAME_LEN,
};
use serialport::SerialPort;

use super::{open_port, LinkTracker, RequestIds};
use crate::failure::{FailedAs, Failure};

/// A command session on an open port.
pub struct Session {
    port: Box<dyn SerialPort>,
    splitter: FrameSplitter<MAX_UPLINK_FRAME_LEN>,
    tracker: LinkTracker,
    ids: RequestIds,
    timeout: Duration,
    /// The last `Hello` received.
    pub hello: Option<Hello>,
    /// Burst samples received, by index.
    pub samples: Vec<(u32, Sample, u32)>,
    /// Advanced by the burst samples received.
    pub progress: indicatif::ProgressBar,
}

impl Session {
    /// Opens `port`.
    pub fn open(port: &str, baud: u32, timeout: Duration) -> Result<Self> {
        let port = open_port(port, baud)?;
        Ok(Session {
            port,
            splitter: FrameSplitter::new(),
            tracker: LinkTracker::new(),
            ids: RequestIds::default(),
            timeout,
            hello: None,
            samples: Vec::new(),
            progress: crate::progress::none(),
        })
    }

    /// Asks for a burst of `samples` samples at the full sampling rate and
    /// waits for them all (in [`Session::samples`], emptied first).
    pub fn burst(&mut self, samples: u32) -> Result<()> {
        self.samples.clear();
        let period_s = self
            .hello
            .as_ref()
            .map_or(0.01, |h| f64::from(h.sample_period_us) / 1e6);
        let extra = Duration::from_secs_f64(f64::from(samples) * period_s.max(0.001) * 2.0 + 1.0);
        explain(self.request(Command::StartBurst { samples }, extra)?)
    }

    /// The node's present configuration, from a fresh `Hello` (what
    /// settings are applied on top of).
    pub fn present_config(&mut self) -> Result<NodeConfig> {
        explain(self.request(Command::GetInfo, Duration::ZERO)?)?;
        Ok(self
            .hello
            .as_ref()
            .context("the node accepted but sent no Hello")?
            .config
            .clone())
    }

    /// Sends `config` to be applied and stored; an error carries a refusal.
    pub fn configure(&mut self, config: NodeConfig) -> Result<()> {
        explain(self.request(Command::SetConfig(config), Duration::ZERO)?)
    }

    /// Sends `command` and waits for its reply; collects `Hello`s and samples meanwhile.
    /// `extra` extends the wait (bursts take time).
    pub fn request(&mut self, command: Command, extra: Duration) -> Result<Outcome> {
        let request_id = self.ids.next_id();
        let frame = super::downlink_frame(request_id, command)?;
        self.port.write_all(&frame).context("writing to the port")?;
        self.port.flush().ok();
        let deadline = Instant::now() + self.timeout + extra;
        let mut outcome = None;
        let mut rx = [0u8; 1024];
        while Instant::now() < deadline {
            let n = match self.port.read(&mut rx) {
                Ok(n) => n,
                Err(e) if super::ports::try_again(&e) => 0,
                Err(e) => return Err(e).context("reading from the port"),
            };
            for &byte in &rx[..n] {
                let Some(Ok(frame)) = self.splitter.push(byte) else {
                    continue;
                };
                let Ok(Some(tracked)) = self.tracker.accept_encoded(frame) else {
                    continue;
                };
                match tracked.message.body {
                    UplinkBody::Hello(h) => self.hello = Some(h),
                    UplinkBody::Samples(block) => {
                        for (i, s) in block.samples.iter().enumerate() {
                            self.samples
                                .push((block.first_index + i as u32, *s, block.period_us));
                        }
                        self.progress.set_position(self.samples.len() as u64);
                        if block.remaining == 0 && outcome.is_some() {
                            return Ok(outcome.unwrap_or(Outcome::Accepted));
                        }
                    }
                    UplinkBody::Reply(r) if r.request_id == request_id => {
                        outcome = Some(r.outcome);
                    }
                    _ => {}
                }
            }
            if let Some(o) = outcome {
                if extra.is_zero() {
                    return Ok(o);
                }
            }
        }
        match outcome {
            Some(o) => Ok(o),
            None => Err(anyhow::anyhow!(
                "the node did not answer within {:.1} s: check the port, the baud rate, and that the node runs Gleaner firmware ({} frames heard, {} damaged)",
                (self.timeout + extra).as_secs_f64(),
                self.tracker.stats().frames,
                self.tracker.stats().damaged()
            )
            .failed_as(Failure::NoAnswer)),
        }
    }
}

/// Ok for an answer that did what was asked; a refusal is an error carrying
/// the node's reason.
pub fn explain(outcome: Outcome) -> Result<()> {
    match outcome {
        Outcome::Refused(reason) => Err(anyhow::anyhow!(
            "the node refused: {reason}; its previous settings stay in force"
        )
        .failed_as(Failure::Refused)),
        Outcome::Pong | Outcome::Accepted => Ok(()),
    }
}
