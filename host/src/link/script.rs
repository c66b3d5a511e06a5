//! Commands run against a node one at a time, each waiting for its reply: a
//! short script sent while recording as soon as the node answers (its
//! replies are in the log too), or driven by a [`super::Session`]. Settings
//! are applied here only: on the node's present configuration, from a fresh
//! `Hello` asked for first.

use std::collections::VecDeque;
use std::time::{Duration, Instant};

use gleaner_protocol::{Command, Hello, NodeConfig, Outcome, UplinkBody};

use crate::link::{LinkStats, Tracked};
use crate::recorder::PortObserver;
use crate::settings::NodeSettings;

/// One step of a script.
#[derive(Debug, Clone, PartialEq)]
pub enum Step {
    /// Ping the node.
    Ping,
    /// Ask for its `Hello`.
    GetInfo,
    /// Apply these settings on top of the node's present configuration.
    Configure(Box<NodeSettings>),
    /// Zero its energy totals.
    ResetEnergy,
}

/// Runs steps one at a time, each waiting for its reply (or a timeout).
#[derive(Debug)]
pub struct CommandScript {
    steps: VecDeque<Step>,
    ids: super::RequestIds,
    waiting: Option<(u16, Step, Instant)>,
    timeout: Duration,
    hello: Option<Hello>,
    /// When the script began, and whether the node has been heard from since.
    started: Instant,
    heard: bool,
    /// Each step with its outcome (None: no answer in time).
    pub results: Vec<(Step, Option<Outcome>)>,
    /// Problems preparing a step (bad settings for this node).
    pub errors: Vec<anyhow::Error>,
    /// The last configuration sent by a `Configure` step.
    pub configured: Option<NodeConfig>,
}

impl CommandScript {
    /// A script of `steps`, each given `timeout` to be answered.
    pub fn new(steps: Vec<Step>, timeout: Duration) -> Self {
        CommandScript {
            steps: steps.into(),
            ids: super::RequestIds::default(),
            waiting: None,
            timeout,
            hello: None,
            started: Instant::now(),
            heard: false,
            results: Vec::new(),
            errors: Vec::new(),
            configured: None,
        }
    }

    /// Sends the first command at once instead of waiting to hear the node
    /// (a session at the user's request: the node is up, and may be quiet).
    pub fn at_once(mut self) -> Self {
        self.heard = true;
        self
    }

    /// Steps not yet sent.
    pub fn steps_left(&self) -> usize {
        self.steps.len()
    }

    /// True when every step has been answered or has timed out.
    pub fn finished(&self) -> bool {
        self.steps.is_empty() && self.waiting.is_none()
    }

    /// Takes a received message.
    pub fn message(&mut self, tracked: &Tracked) {
        self.heard = true;
        match &tracked.message.body {
            UplinkBody::Hello(h) => self.hello = Some(h.clone()),
            UplinkBody::Reply(r) => {
                if let Some((id, step, _)) = self.waiting.take() {
                    if r.request_id == id {
                        self.results.push((step, Some(r.outcome)));
                    } else {
                        self.waiting = Some((id, step, Instant::now()));
                    }
                }
            }
            _ => {}
        }
    }

    /// The next command's bytes, when one is due. The first waits until the
    /// node has been heard from (a node still booting may drop what it is
    /// sent: an emulated UART before its firmware runs, say), or one timeout
    /// of silence.
    pub fn outgoing(&mut self) -> Option<Vec<u8>> {
        if !self.heard && self.started.elapsed() < self.timeout {
            return None;
        }
        if let Some((_, _, sent)) = &self.waiting {
            if sent.elapsed() < self.timeout {
                return None;
            }
            if let Some((_, step, _)) = self.waiting.take() {
                self.results.push((step, None));
            }
        }
        let step = self.steps.pop_front()?;
        let command = match &step {
            Step::Ping => Command::Ping,
            Step::GetInfo => Command::GetInfo,
            Step::ResetEnergy => Command::ResetEnergy,
            Step::Configure(settings) => match &self.hello {
                None => {
                    // Learn the present configuration first.
                    self.steps.push_front(step.clone());
                    self.steps.push_front(Step::GetInfo);
                    return self.outgoing();
                }
                Some(hello) => match settings.apply(&hello.config) {
                    Ok(config) => {
                        self.configured = Some(config.clone());
                        Command::SetConfig(config)
                    }
                    Err(e) => {
                        self.errors.push(e.into());
                        return self.outgoing();
                    }
                },
            },
        };
        let request_id = self.ids.next_id();
        let bytes = super::downlink_frame(request_id, command).ok()?;
        self.waiting = Some((request_id, step, Instant::now()));
        Some(bytes)
    }
}

/// Wraps an observer with a command script.
pub struct Scripted<'a> {
    /// The script.
    pub script: CommandScript,
    inner: &'a mut dyn PortObserver,
}

impl<'a> Scripted<'a> {
    /// `inner` sees everything; the script sends its commands.
    pub fn new(script: CommandScript, inner: &'a mut dyn PortObserver) -> Self {
        Scripted { script, inner }
    }
}

impl PortObserver for Scripted<'_> {
    fn inner(&mut self) -> Option<&mut dyn PortObserver> {
        Some(&mut *self.inner)
    }

    fn message(&mut self, tracked: &Tracked, host_time_us: u64, stats: &LinkStats) {
        self.script.message(tracked);
        self.inner.message(tracked, host_time_us, stats);
    }
    fn outgoing(&mut self) -> Option<Vec<u8>> {
        self.script.outgoing().or_else(|| self.inner.outgoing())
    }
}
