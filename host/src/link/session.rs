//! A blocking session with a node on an open port: one command at a time,
//! each waiting for its reply (`gleaner node`, calibration, tests). Settings
//! go through the same [`CommandScript`] as commands sent while recording.

use std::io::{Read, Write};
use std::time::{Duration, Instant};

use anyhow::{Context, Result};
use gleaner_protocol::{
    Command, FrameSplitter, Hello, NodeConfig, Outcome, Sample, UplinkBody, MAX_UPLINK_FRAME_LEN,
};
use serialport::SerialPort;

use super::script::{CommandScript, Step};
use super::{open_port, LinkTracker, RequestIds, Tracked};
use crate::failure::{FailedAs, Failure};
use crate::settings::NodeSettings;

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

    /// Applies `settings` on top of the node's present configuration (a
    /// fresh `Hello` first) and has it stored, through the one command
    /// script every client uses; returns the configuration sent.
    pub fn apply_settings(&mut self, settings: &NodeSettings) -> Result<NodeConfig> {
        let steps = vec![Step::Configure(Box::new(settings.clone()))];
        let started = Instant::now();
        let mut script = self.run(CommandScript::new(steps, self.timeout).at_once())?;
        if let Some(e) = script.errors.pop() {
            return Err(e.failed_as(Failure::BadInput));
        }
        match script.results.last() {
            Some((Step::Configure(_), Some(outcome))) => explain(*outcome)?,
            _ => return Err(self.no_answer(started.elapsed())),
        }
        script.configured.context("the configuration was not sent")
    }

    /// Runs `script` to its end: sends each command when due and feeds it
    /// what the node says (`Hello`s and samples are kept here too).
    pub fn run(&mut self, mut script: CommandScript) -> Result<CommandScript> {
        // A step waits at most its timeout; the script ends well before this.
        let steps = u32::try_from(script.steps_left()).unwrap_or(u32::MAX);
        let deadline = Instant::now() + self.timeout * steps.saturating_mul(2).saturating_add(1);
        while !script.finished() && Instant::now() < deadline {
            if let Some(bytes) = script.outgoing() {
                self.port.write_all(&bytes).context("writing to the port")?;
                self.port.flush().ok();
            }
            self.pump(Instant::now() + POLL, |tracked| {
                script.message(tracked);
                false
            })?;
        }
        Ok(script)
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
        while Instant::now() < deadline {
            let burst_done = self.pump(deadline, |tracked| match &tracked.message.body {
                UplinkBody::Reply(r) if r.request_id == request_id => {
                    outcome = Some(r.outcome);
                    extra.is_zero()
                }
                UplinkBody::Samples(block) => block.remaining == 0 && outcome.is_some(),
                _ => false,
            })?;
            if burst_done {
                break;
            }
        }
        outcome.ok_or_else(|| self.no_answer(self.timeout + extra))
    }

    /// Reads from the port until `deadline` or until `stop` says so for a
    /// message; `Hello`s and burst samples are kept on the way. True when
    /// `stop` said so.
    fn pump(&mut self, deadline: Instant, mut stop: impl FnMut(&Tracked) -> bool) -> Result<bool> {
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
                self.keep(&tracked);
                if stop(&tracked) {
                    return Ok(true);
                }
            }
        }
        Ok(false)
    }

    /// Keeps a `Hello` and burst samples.
    fn keep(&mut self, tracked: &Tracked) {
        match &tracked.message.body {
            UplinkBody::Hello(h) => self.hello = Some(h.clone()),
            UplinkBody::Samples(block) => {
                for (i, s) in block.samples.iter().enumerate() {
                    self.samples
                        .push((block.first_index + i as u32, *s, block.period_us));
                }
                self.progress.set_position(self.samples.len() as u64);
            }
            _ => {}
        }
    }

    /// The error for a node that did not answer within `waited`.
    fn no_answer(&self, waited: Duration) -> anyhow::Error {
        anyhow::anyhow!(
            "the node did not answer within {:.1} s: check the port, the baud rate, and that the node runs Gleaner firmware ({} frames heard, {} damaged)",
            waited.as_secs_f64(),
            self.tracker.stats().frames,
            self.tracker.stats().damaged()
        )
        .failed_as(Failure::NoAnswer)
    }
}

/// How long [`Session::run`] reads between looking at its script.
const POLL: Duration = Duration::from_millis(20);

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
