//! The virtual node: the physics models produce raw counts, and the unmodified
//! firmware [`Node`] turns them into frames.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use anyhow::Result;
use embedded_hal::digital::{ErrorType, OutputPin};
use gleaner_firmware::config_store::MemoryStorage;
use gleaner_firmware::{Node, NodeParts};
use gleaner_protocol::{ConfigSource, MAX_UPLINK_FRAME_LEN};
use rand::SeedableRng;
use rand_pcg::Pcg64Mcg;

use crate::sim::models::converter::{Converter, StepOutcome};
use crate::sim::models::source::Source;
use crate::sim::run::truth::GroundTruth;
use crate::sim::scenarios::scenario::Scenario;

/// The load-shed pin of the virtual node: low sheds the simulated load's
/// non-essential part.
#[derive(Debug, Clone, Default)]
pub struct SimPin(Arc<AtomicBool>);

impl SimPin {
    /// True while the load is shed (pin low).
    pub fn is_shed(&self) -> bool {
        !self.0.load(Ordering::Relaxed)
    }
}

impl ErrorType for SimPin {
    type Error = core::convert::Infallible;
}

impl OutputPin for SimPin {
    fn set_low(&mut self) -> Result<(), Self::Error> {
        self.0.store(false, Ordering::Relaxed);
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Self::Error> {
        self.0.store(true, Ordering::Relaxed);
        Ok(())
    }
}

/// Bytes of simulated configuration flash.
pub const SIM_FLASH_LEN: usize = gleaner_firmware::config_store::STORE_LEN;

/// The node type the simulator runs.
pub type SimNode = Node<SimPin, MemoryStorage<SIM_FLASH_LEN>>;

/// A simulated node with its physical surroundings.
pub struct VirtualNode {
    scenario: Scenario,
    source: Source,
    converter: Converter,
    pin: SimPin,
    node: SimNode,
    rng: Pcg64Mcg,
    step_index: u64,
    truth: GroundTruth,
    last: Option<StepOutcome>,
    load_powered: bool,
    shed_pin_wired: bool,
    bench: Option<crate::sim::run::bench::Bench>,
}

impl VirtualNode {
    /// Builds the models and boots the node with the scenario's configuration.
    pub fn new(scenario: Scenario, boot_id: u32) -> Result<Self> {
        let config = scenario.node_config()?;
        let pin = SimPin::default();
        let node = Node::new(NodeParts {
            config,
            config_source: ConfigSource::Stored,
            node_id: scenario.node_id(),
            boot_id,
            sample_period_us: scenario.sample_period_ms.saturating_mul(1000),
            load_pin: pin.clone(),
            storage: MemoryStorage::new(),
        });
        let source = Source::new(
            &scenario.source,
            scenario.start_hour,
            scenario.duration_s(),
            scenario.seed,
        );
        Ok(VirtualNode {
            converter: Converter::new(scenario.converter),
            source,
            pin,
            node,
            rng: Pcg64Mcg::seed_from_u64(scenario.seed ^ 0x5eed_ad0c),
            step_index: 0,
            truth: GroundTruth::default(),
            last: None,
            load_powered: false,
            shed_pin_wired: true,
            bench: None,
            scenario,
        })
    }

    /// Whether the load obeys the node's load-shed pin (true unless told
    /// otherwise), to compare runs with and without shedding.
    pub fn wire_shed_pin(&mut self, wired: bool) {
        self.shed_pin_wired = wired;
    }

    /// Wires the node's channels to a bench: channels it sets read its
    /// levels instead of the scenario's physics.
    pub fn attach_bench(&mut self, bench: crate::sim::run::bench::Bench) {
        self.bench = Some(bench);
    }

    /// The scenario.
    pub fn scenario(&self) -> &Scenario {
        &self.scenario
    }

    /// Simulated time of the next sample, µs.
    pub fn now_us(&self) -> u64 {
        self.step_index * u64::from(self.scenario.sample_period_ms) * 1000
    }

    /// True once the scenario's duration has been simulated.
    pub fn finished(&self) -> bool {
        self.now_us() as f64 > self.scenario.duration_s() * 1e6
    }

    /// Simulates one sample period and gives the counts to the node.
    pub fn step(&mut self) {
        let dt = f64::from(self.scenario.sample_period_ms) / 1000.0;
        let t_us = self.now_us();
        let t = t_us as f64 / 1e6;
        self.source.set_conditions(t, dt);
        let outcome = self.converter.step(
            t - dt,
            dt,
            &self.source,
            &self.scenario.load,
            self.shed_pin_wired && self.pin.is_shed(),
            self.load_powered,
        );
        self.load_powered = self
            .scenario
            .load
            .powered_at(outcome.output_v, self.load_powered);
        self.truth.note_load(t, dt, self.load_powered);
        self.source.advance(dt, outcome.input_a);
        self.truth
            .add(t, &outcome, self.scenario.converter.output_capacitance_f);
        let physics = [
            outcome.input_v,
            outcome.input_a,
            outcome.output_v,
            outcome.load_a,
        ];
        let [input_v, input_a, output_v, output_a] = match &self.bench {
            Some(bench) => bench.levels().over(physics),
            None => physics,
        };
        let raw =
            self.scenario
                .front_end
                .sample(input_v, input_a, output_v, output_a, &mut self.rng);
        self.node.on_sample(t_us, &raw);
        self.last = Some(outcome);
        self.step_index += 1;
    }

    /// Feeds bytes from the host to the node.
    pub fn receive(&mut self, bytes: &[u8]) {
        self.node.on_received(bytes);
    }

    /// Appends every frame the node has queued to `out`.
    pub fn drain_frames(&mut self, out: &mut Vec<u8>) {
        let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
        while let Some(frame) = self.node.next_frame(&mut buf) {
            out.extend_from_slice(frame);
        }
    }

    /// What really happened so far.
    pub fn truth(&self) -> &GroundTruth {
        &self.truth
    }

    /// The last step's true values.
    pub fn last_step(&self) -> Option<&StepOutcome> {
        self.last.as_ref()
    }

    /// The firmware node.
    pub fn node(&self) -> &SimNode {
        &self.node
    }

    /// The source (for its condition).
    pub fn source(&self) -> &Source {
        &self.source
    }
}

/// Simulates the whole scenario straight into a new log at `path` (no
/// pseudo-terminal), stamping each frame with `start_us` plus the simulated
/// time; returns what really happened.
pub fn simulate_to_log(
    scenario: Scenario,
    boot_id: u32,
    path: &std::path::Path,
    start_us: u64,
    progress: &indicatif::ProgressBar,
) -> Result<GroundTruth> {
    use crate::log::{LogWriter, MarkerKind};
    let source = format!("virtual node '{}' (simulated host times)", scenario.name);
    let mut writer = LogWriter::create(path, &crate::recorder::header_for(&source))?;
    writer.append_marker(start_us, MarkerKind::PortOpened, "simulated")?;
    let mut node = VirtualNode::new(scenario, boot_id)?;
    let mut bytes = Vec::new();
    let mut steps = 0u64;
    while !node.finished() {
        node.step();
        node.drain_frames(&mut bytes);
        let t = start_us + node.now_us();
        steps += 1;
        if steps.is_multiple_of(crate::progress::RECORDS_PER_UPDATE) {
            progress.set_position(node.now_us() / 1_000_000);
        }
        for frame in bytes.split(|&b| b == 0).filter(|f| !f.is_empty()) {
            writer.append_frame(t, frame)?;
        }
        bytes.clear();
    }
    writer.append_marker(
        start_us + node.now_us(),
        MarkerKind::Stopped,
        "end of scenario",
    )?;
    writer.sync()?;
    Ok(node.truth().clone())
}
