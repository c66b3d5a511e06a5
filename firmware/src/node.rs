//! The `Node`: calibration, metering, state machine, forecast, aggregation and
//! command handling behind one small surface that a board binary calls.

use embedded_hal::digital::OutputPin;
use embedded_storage::Storage;
use gleaner_protocol::{
    encode_frame, Command, ConfigSource, ConverterState, Decoder, DecoderStats, Downlink,
    EnergyTotals, FirmwareVersion, Hello, LoadEvent, NodeConfig, Outcome, Refusal, Reply, Report,
    Sample, SampleBlock, SlotHarvest, Uplink, UplinkBody, MAX_BURST_SAMPLES,
    MAX_DOWNLINK_FRAME_LEN, MAX_UPLINK_FRAME_LEN, PROTOCOL_VERSION, SAMPLES_PER_BLOCK,
};
use heapless::{Deque, HistoryBuf, Vec};

use crate::brownout::{brownout_ms, power_nw, DrainOutlook};
use crate::calibration::{calibrate, RawSample};
use crate::config::validate;
use crate::config_store;
use crate::cutoff::{CutoffDetector, Observation};
use crate::day_end::DayEnd;
use crate::forecast::{
    CutoffForecaster, InputSeen, TimeAverage, HARVEST_AVERAGE_MS, LOAD_AVERAGE_MS,
};
use crate::harvest_profile::{HarvestProfile, SLOT_MS};
use crate::interval::{ChannelSummary, IntervalStats};
use crate::load_shed::{LoadShedder, Risk, ShedSaving};
use crate::load_watch::LoadWatch;
use crate::meter::{storage_level_nj, Meter};

/// Samples averaged for the storage voltage: a single sample's noise would
/// swing the storage energy of a large capacitor by more than an interval's
/// harvest.
pub const STORAGE_SMOOTHING: usize = 8;

/// Messages waiting to be sent. When full, the newest message is dropped and
/// counted; its sequence number is still used, so the host sees the loss.
pub const OUTBOX_LEN: usize = 8;

const fn parse_u8(s: &str) -> u8 {
    let bytes = s.as_bytes();
    let mut value: u8 = 0;
    let mut i = 0;
    while let Some(&byte) = bytes.split_at(i).1.first() {
        value = value.wrapping_mul(10).wrapping_add(byte.wrapping_sub(b'0'));
        i = i.saturating_add(1);
    }
    value
}

/// This crate's version, as sent in `Hello`.
pub const FIRMWARE_VERSION: FirmwareVersion = FirmwareVersion {
    major: parse_u8(env!("CARGO_PKG_VERSION_MAJOR")),
    minor: parse_u8(env!("CARGO_PKG_VERSION_MINOR")),
    patch: parse_u8(env!("CARGO_PKG_VERSION_PATCH")),
};

/// What a board hands to [`Node::new`].
#[derive(Debug)]
pub struct NodeParts<P, S> {
    /// Configuration to start with (usually from [`config_store::load`]).
    pub config: NodeConfig,
    /// Where it came from.
    pub config_source: ConfigSource,
    /// The node's stable identity (the MCU's factory id on hardware).
    pub node_id: u64,
    /// A value that differs on every boot (a counter kept in flash, or random).
    pub boot_id: u32,
    /// Time between two samples, for `Hello` and burst blocks.
    pub sample_period_us: u32,
    /// Load switch, high = load on.
    pub load_pin: P,
    /// Non-volatile storage for accepted configurations.
    pub storage: S,
}

/// Counters of the node's own troubles.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct NodeStats {
    /// Messages dropped because the outbox was full.
    pub dropped_messages: u32,
    /// Failed conversions reported by the board.
    pub sampler_errors: u32,
}

#[derive(Debug, Clone)]
struct Burst {
    next_index: u32,
    remaining: u32,
    block: Vec<gleaner_protocol::Sample, SAMPLES_PER_BLOCK>,
}

#[derive(Debug, Clone, Copy, Default)]
struct IntervalStart {
    t_us: u64,
    drawn_nj: u64,
    delivered_nj: u64,
    stored_level_nj: i64,
}

/// An outbox entry. A `Hello` waits as its energy totals only (the largest
/// message would otherwise set the size of every entry); the rest is filled
/// in when it is sent.
#[derive(Debug, Clone)]
enum QueuedBody {
    Hello { totals: EnergyTotals },
    Report(Report),
    Event(gleaner_protocol::Event),
    Samples(SampleBlock),
    Reply(Reply),
    Load(LoadEvent),
    Harvest(SlotHarvest),
}

/// A message waiting to be sent, with its sequence number and time.
#[derive(Debug, Clone)]
struct Queued {
    seq: u16,
    uptime_ms: u64,
    body: QueuedBody,
}

/// Energies of one report interval.
#[derive(Debug, Clone, Copy)]
struct IntervalEnergy {
    drawn_nj: u64,
    delivered_nj: u64,
    stored_nj: i64,
}

/// The node. `P` drives the load switch, `S` keeps the configuration.
#[derive(Debug)]
pub struct Node<P, S> {
    config: NodeConfig,
    config_source: ConfigSource,
    node_id: u64,
    boot_id: u32,
    sample_period_us: u32,
    storage: S,
    shedder: LoadShedder<P>,
    detector: CutoffDetector,
    meter: Meter,
    cutoff_forecast: CutoffForecaster,
    /// When the harvesting day ends, learned from the nights seen.
    day_end: DayEnd,
    /// The load's current, nA: a constant-current load's stays put while the
    /// storage voltage (and so its power) falls.
    load_current: TimeAverage,
    /// The converter's output power (into the load and the storage), nW.
    output_power: TimeAverage,
    load_watch: LoadWatch,
    /// What shedding saves, learned from the last shed.
    shed_saving: ShedSaving,
    /// Time to brown-out counting the shedding to come (what is reported).
    brownout_in_ms: Option<u32>,
    /// Time to brown-out if nothing changes (what shedding acts on).
    brownout_as_is_ms: Option<u32>,
    harvest: HarvestProfile,
    /// Start of the present harvest slot: (time µs, energy drawn until then nJ).
    slot_start: Option<(u64, u64)>,
    interval: IntervalStats,
    interval_start: Option<IntervalStart>,
    recent_output_uv: HistoryBuf<u32, STORAGE_SMOOTHING>,
    smoothed_output_uv: u32,
    boot_stored_level_nj: Option<i64>,
    reset_baseline: EnergyTotals,
    input_cutoff_in_ms: Option<u32>,
    last_t_us: Option<u64>,
    last_sample: Sample,
    now_us: u64,
    seq: u16,
    outbox: Deque<Queued, OUTBOX_LEN>,
    rx: Decoder<Downlink, MAX_DOWNLINK_FRAME_LEN>,
    burst: Option<Burst>,
    stats: NodeStats,
}

/// The outbox at boot: the `Hello` first, with sequence number 0 and
/// nothing metered yet.
fn boot_outbox() -> Deque<Queued, OUTBOX_LEN> {
    let mut outbox = Deque::new();
    let hello = Queued {
        seq: 0,
        uptime_ms: 0,
        body: QueuedBody::Hello {
            totals: EnergyTotals::default(),
        },
    };
    // An empty outbox has room for one message.
    let _ = outbox.push_back(hello);
    outbox
}

impl<P: OutputPin, S: Storage> Node<P, S> {
    /// A node at boot; its `Hello` is the first message queued.
    ///
    /// Built as one expression, the Hello already in its outbox, so the node
    /// is written where the caller keeps it rather than copied there (a board
    /// keeps it on its stack).
    pub fn new(parts: NodeParts<P, S>) -> Self {
        let shed_saving = ShedSaving::new(parts.config.shed_load_na);
        Node {
            config: parts.config,
            config_source: parts.config_source,
            node_id: parts.node_id,
            boot_id: parts.boot_id,
            sample_period_us: parts.sample_period_us,
            storage: parts.storage,
            shedder: LoadShedder::new(parts.load_pin),
            detector: CutoffDetector::new(0),
            meter: Meter::new(),
            cutoff_forecast: CutoffForecaster::new(),
            day_end: DayEnd::new(),
            load_current: TimeAverage::new(),
            output_power: TimeAverage::new(),
            load_watch: LoadWatch::new(),
            shed_saving,
            brownout_in_ms: None,
            brownout_as_is_ms: None,
            harvest: HarvestProfile::new(),
            slot_start: None,
            interval: IntervalStats::default(),
            interval_start: None,
            recent_output_uv: HistoryBuf::new(),
            smoothed_output_uv: 0,
            boot_stored_level_nj: None,
            reset_baseline: EnergyTotals::default(),
            input_cutoff_in_ms: None,
            last_t_us: None,
            last_sample: Sample::default(),
            now_us: 0,
            seq: 1,
            outbox: boot_outbox(),
            rx: Decoder::new(),
            burst: None,
            stats: NodeStats::default(),
        }
    }

    /// Processes one reading of the four channels taken at `t_us` (microseconds
    /// since boot, from the board's timer). Queues events, reports and burst
    /// blocks as they fall due.
    pub fn on_sample(&mut self, t_us: u64, raw: &RawSample) {
        let (sample, flags) = calibrate(&self.config.calibration, raw);
        // Storage level first: a new interval starts from this sample's level.
        self.recent_output_uv.write(sample.output_uv);
        let count = u64::try_from(self.recent_output_uv.len()).unwrap_or(1);
        let sum = self
            .recent_output_uv
            .iter()
            .fold(0u64, |acc, &v| acc.saturating_add(u64::from(v)));
        let smoothed = u32::try_from(sum.checked_div(count).unwrap_or(0)).unwrap_or(u32::MAX);
        self.smoothed_output_uv = smoothed;
        if self.boot_stored_level_nj.is_none() {
            self.boot_stored_level_nj = Some(self.stored_level_nj());
        }
        let dt_us = self.advance_clock(t_us);
        self.meter.add(t_us, &sample);
        self.interval
            .add(&sample, flags, self.detector.state(), dt_us);
        self.last_sample = sample;

        let now_ms = t_us / 1000;
        let seen = Observation {
            input_uv: sample.input_uv,
            input_na: sample.input_na,
            output_uv: sample.output_uv,
            input_cutoff_in_ms: self.input_cutoff_in_ms,
        };
        if let Some(event) = self.detector.update(now_ms, &seen, &self.config.thresholds) {
            self.on_transition(now_ms, event);
        }
        self.watch_load(now_ms, &sample);
        self.close_slot_if_due(t_us);
        self.add_to_burst(sample);
        self.close_interval_if_due(t_us);
    }

    /// A change of the converter's state at `now_ms`: learned from, and sent.
    /// Kept out of line so its frame is not on the stack while the forecasts
    /// are computed.
    #[inline(never)]
    fn on_transition(&mut self, now_ms: u64, event: gleaner_protocol::Event) {
        match event.to {
            ConverterState::CutOff => self.day_end.on_cutoff(now_ms),
            ConverterState::ColdStart | ConverterState::Harvesting => {
                self.day_end.on_start(now_ms);
            }
            _ => {}
        }
        if event.to == ConverterState::ColdStart {
            self.cutoff_forecast.clear();
            self.input_cutoff_in_ms = None;
        }
        self.enqueue(QueuedBody::Event(event));
    }

    /// Records a failed conversion at `t_us`: time passes, the report is flagged.
    pub fn on_sampler_error(&mut self, t_us: u64) {
        let dt_us = self.advance_clock(t_us);
        self.stats.sampler_errors = self.stats.sampler_errors.saturating_add(1);
        self.interval.add_time(self.detector.state(), dt_us);
        self.interval
            .flag(gleaner_protocol::ReportFlags::SAMPLER_ERROR);
        self.close_interval_if_due(t_us);
    }

    /// Feeds bytes received from the host; complete commands are executed and
    /// their replies queued. Any bytes are accepted; damage is counted.
    pub fn on_received(&mut self, bytes: &[u8]) {
        for &byte in bytes {
            if let Some(Ok(downlink)) = self.rx.push_byte(byte) {
                let outcome = self.execute(downlink.command);
                let reply = Reply {
                    request_id: downlink.request_id,
                    outcome,
                };
                self.enqueue(QueuedBody::Reply(reply));
            }
        }
    }

    /// Encodes the oldest queued message into `buf` and returns the frame, or
    /// None when nothing is queued.
    pub fn next_frame<'b>(&mut self, buf: &'b mut [u8; MAX_UPLINK_FRAME_LEN]) -> Option<&'b [u8]> {
        let queued = self.outbox.pop_front()?;
        let message = self.uplink_of(queued);
        match encode_frame(&message, buf) {
            Ok(frame) => Some(frame),
            // Cannot happen with a buffer of MAX_UPLINK_FRAME_LEN; counted if it does.
            Err(_) => {
                self.stats.dropped_messages = self.stats.dropped_messages.saturating_add(1);
                None
            }
        }
    }

    /// Writes every queued frame to `sink`; returns the bytes written.
    pub fn write_pending<W: embedded_io::Write>(
        &mut self,
        sink: &mut W,
    ) -> Result<usize, W::Error> {
        let mut buf = [0u8; MAX_UPLINK_FRAME_LEN];
        let mut written = 0usize;
        while let Some(frame) = self.next_frame(&mut buf) {
            sink.write_all(frame)?;
            written = written.saturating_add(frame.len());
        }
        sink.flush()?;
        Ok(written)
    }

    /// Messages waiting in the outbox.
    pub fn pending_messages(&self) -> usize {
        self.outbox.len()
    }

    /// The present cutoff state.
    pub fn state(&self) -> ConverterState {
        self.detector.state()
    }

    /// The active configuration.
    pub const fn config(&self) -> &NodeConfig {
        &self.config
    }

    /// Energy totals since boot or the last reset.
    pub fn totals(&self) -> EnergyTotals {
        let base = &self.reset_baseline;
        EnergyTotals {
            drawn_nj: self.meter.input.total_nj().saturating_sub(base.drawn_nj),
            delivered_nj: self
                .meter
                .output
                .total_nj()
                .saturating_sub(base.delivered_nj),
            stored_nj: self.stored_since_boot().saturating_sub(base.stored_nj),
        }
    }

    /// True while non-essential load is shed.
    pub fn load_shed(&self) -> bool {
        self.shedder.is_shed()
    }

    /// The node's own counters.
    pub const fn stats(&self) -> NodeStats {
        self.stats
    }

    /// Counters of the downlink decoder.
    pub const fn downlink_stats(&self) -> &DecoderStats {
        self.rx.stats()
    }

    fn stored_since_boot(&self) -> i64 {
        let level = self.stored_level_nj();
        level.saturating_sub(self.boot_stored_level_nj.unwrap_or(level))
    }

    /// Moves the clock to `t_us`; returns the time since the previous sample.
    fn advance_clock(&mut self, t_us: u64) -> u64 {
        let dt = self.last_t_us.map_or(0, |last| t_us.saturating_sub(last));
        self.last_t_us = Some(t_us);
        self.now_us = self.now_us.max(t_us);
        if self.interval_start.is_none() {
            self.interval_start = Some(self.interval_marker(t_us));
        }
        dt
    }

    fn interval_marker(&self, t_us: u64) -> IntervalStart {
        IntervalStart {
            t_us,
            drawn_nj: self.meter.input.total_nj(),
            delivered_nj: self.meter.output.total_nj(),
            stored_level_nj: self.stored_level_nj(),
        }
    }

    fn close_interval_if_due(&mut self, t_us: u64) {
        let Some(start) = self.interval_start else {
            return;
        };
        let length_us = t_us.saturating_sub(start.t_us);
        if length_us < u64::from(self.config.report_interval_ms).saturating_mul(1000) {
            return;
        }
        let summary = self.interval.summary();
        let drawn_nj = self.meter.input.total_nj().saturating_sub(start.drawn_nj);
        let delivered_nj = self
            .meter
            .output
            .total_nj()
            .saturating_sub(start.delivered_nj);
        let stored_nj = if self.config.output_storage_uf == 0 {
            0
        } else {
            self.stored_level_nj().saturating_sub(start.stored_level_nj)
        };
        let state = self.detector.state();
        let length_ms = length_us / 1000;
        let energy = IntervalEnergy {
            drawn_nj,
            delivered_nj,
            stored_nj,
        };
        self.update_forecasts(t_us / 1000, length_us, &summary, &energy);
        let report = Report {
            interval_ms: u32::try_from(length_ms).unwrap_or(u32::MAX),
            sample_count: summary.count,
            input_uv: summary.input_uv,
            input_na: summary.input_na,
            output_uv: summary.output_uv,
            output_na: summary.output_na,
            drawn_nj,
            delivered_nj,
            stored_nj,
            state,
            state_ms: summary.state_ms,
            input_cutoff_in_ms: self.input_cutoff_in_ms,
            brownout_in_ms: self.brownout_in_ms,
            load_nw: u64::try_from(self.load_nw()).unwrap_or(0),
            net_nw: self.net_nw(),
            load_powered: self.load_watch.is_powered(),
            load_shed: self.shedder.is_shed(),
            flags: summary.flags,
        };
        self.enqueue(QueuedBody::Report(report));
        self.interval.restart();
        self.interval_start = Some(self.interval_marker(t_us));
    }

    /// Ends the harvest slot when an hour has passed: learns it and sends it
    /// with what had been predicted for it.
    #[inline(never)]
    fn close_slot_if_due(&mut self, t_us: u64) {
        let drawn_nj = self.meter.input.total_nj();
        let (start_us, start_nj) = *self.slot_start.get_or_insert((t_us, drawn_nj));
        if t_us.saturating_sub(start_us) < u64::from(SLOT_MS).saturating_mul(1000) {
            return;
        }
        let harvested_uj =
            u32::try_from(drawn_nj.saturating_sub(start_nj) / 1000).unwrap_or(u32::MAX);
        let outcome = self.harvest.end_slot(harvested_uj);
        self.slot_start = Some((t_us, drawn_nj));
        self.enqueue(QueuedBody::Harvest(SlotHarvest {
            slot: outcome.slot,
            slot_ms: SLOT_MS,
            harvested_uj,
            ewma_predicted_uj: outcome.ewma_predicted_uj,
            wcma_predicted_uj: outcome.wcma_predicted_uj,
            next_day_uj: outcome.next_day_uj,
        }));
    }

    /// Energy in the output storage at its smoothed voltage, nJ.
    fn stored_level_nj(&self) -> i64 {
        storage_level_nj(self.config.output_storage_uf, self.smoothed_output_uv)
    }

    /// The load's power at the present storage voltage, from its averaged
    /// current, nW.
    fn load_nw(&self) -> i64 {
        power_nw(self.load_current.mean(), self.smoothed_output_uv)
    }

    /// Converter output less load power, both averaged, nW.
    fn net_nw(&self) -> i64 {
        self.output_power.mean().saturating_sub(self.load_nw())
    }

    /// Watches the load's supply on every sample; a change is sent at once
    /// and the load-shed decision revisited.
    #[inline(never)]
    fn watch_load(&mut self, now_ms: u64, sample: &Sample) {
        let converter = self.detector.state();
        let Some((powered, cause)) =
            self.load_watch
                .update(sample.output_uv, converter, &self.config.thresholds)
        else {
            return;
        };
        let in_state = now_ms.saturating_sub(self.detector.entered_ms());
        let event = LoadEvent {
            powered,
            cause,
            output_uv: sample.output_uv,
            input_uv: sample.input_uv,
            converter,
            converter_state_ms: u32::try_from(in_state).unwrap_or(u32::MAX),
            net_nw: self.net_nw(),
        };
        self.enqueue(QueuedBody::Load(event));
        self.revisit_load_shed(now_ms);
    }

    fn revisit_load_shed(&mut self, now_ms: u64) {
        let risk = Risk::assess(
            self.brownout_as_is_ms,
            self.load_watch.is_powered(),
            self.config.thresholds.brownout_horizon_ms,
        );
        let was_shed = self.shedder.is_shed();
        self.shedder
            .update(risk, now_ms, self.config.load_restore_ms);
        // Shedding or restoring changes what the load draws: its average
        // starts again rather than lag the change by its time constant.
        if self.shedder.is_shed() != was_shed {
            if self.shedder.is_shed() {
                let settled = self.load_current.spans(LOAD_AVERAGE_MS);
                self.shed_saving
                    .on_shed(settled.then(|| self.load_current.mean()));
            } else {
                self.shed_saving.on_restore();
            }
            self.load_current.clear();
        }
    }

    /// Updates the averages and both forecasts at the end of an interval.
    #[inline(never)]
    fn update_forecasts(
        &mut self,
        now_ms: u64,
        length_us: u64,
        summary: &ChannelSummary,
        energy: &IntervalEnergy,
    ) {
        let input_uv = summary.input_uv.mean;
        let IntervalEnergy {
            drawn_nj,
            delivered_nj,
            stored_nj,
        } = *energy;
        let delivered = i64::try_from(delivered_nj).unwrap_or(i64::MAX);
        // A browned-out load draws nothing because it has no power: that says
        // nothing of what it draws when it runs, so it is not averaged in.
        if self.load_watch.is_powered() {
            let load_na = i64::from(summary.output_na.mean);
            self.load_current.push(load_na, length_us, LOAD_AVERAGE_MS);
            if self.shedder.is_shed() && self.load_current.spans(LOAD_AVERAGE_MS) {
                self.shed_saving.on_settled(self.load_current.mean());
            }
        }
        self.output_power.push_energy(
            delivered.saturating_add(stored_nj),
            length_us,
            HARVEST_AVERAGE_MS,
        );
        let t = &self.config.thresholds;
        let converting = matches!(
            self.detector.state(),
            ConverterState::Harvesting | ConverterState::Sagging
        );
        self.input_cutoff_in_ms = if converting {
            let input_nw = drawn_nj
                .saturating_mul(1_000_000)
                .checked_div(length_us)
                .unwrap_or(0);
            let seen = InputSeen {
                input_uv,
                input_min_uv: summary.input_uv.min(),
                input_max_uv: summary.input_uv.max(),
                input_max_na: summary.input_na.max(),
                input_nw: u32::try_from(input_nw).unwrap_or(u32::MAX),
                length_us,
                output_uv: summary.output_uv.mean,
            };
            // The means stand for the middle of the interval.
            let middle_ms = now_ms.saturating_sub(length_us / 2000);
            self.cutoff_forecast
                .push(middle_ms, seen, &self.config.converter);
            // Within its look-ahead the learned day end answers: before the
            // evening's fall shows in the input, the trends cannot tell a
            // sunset from a cloud (measured on the corpus: `sim score`).
            let measured = self.cutoff_forecast.time_to_cutoff(now_ms, t.hold_uv);
            self.day_end
                .time_to_next(now_ms, t.forecast_horizon_ms)
                .or(measured)
        } else {
            None
        };
        let (as_is, planned) = self.brownout_outlook(converting);
        self.brownout_as_is_ms = as_is;
        self.brownout_in_ms = planned;
        self.revisit_load_shed(now_ms);
    }

    /// Time to brown-out if nothing changes, and counting the shedding the
    /// node will do; None without storage or while the load has no power.
    fn brownout_outlook(&self, converting: bool) -> (Option<u32>, Option<u32>) {
        let t = &self.config.thresholds;
        let c_uf = self.config.output_storage_uf;
        if c_uf == 0 || !self.load_watch.is_powered() {
            return (None, None);
        }
        let mut outlook = DrainOutlook {
            storage_uf: c_uf,
            storage_uv: self.smoothed_output_uv,
            min_uv: t.load_min_uv,
            load_na: self.load_current.mean(),
            supply_nw: self.output_power.mean(),
            converting,
            input_cutoff_in_ms: self.input_cutoff_in_ms,
            shed_na: 0,
            shed_horizon_ms: t.brownout_horizon_ms,
        };
        let as_is = brownout_ms(&outlook);
        if self.shedder.is_shed() {
            return (as_is, as_is);
        }
        outlook.shed_na = self.shed_saving.saving_na();
        (as_is, brownout_ms(&outlook))
    }

    fn add_to_burst(&mut self, sample: Sample) {
        let Some(burst) = self.burst.as_mut() else {
            return;
        };
        // The block has room: it is sent whenever it fills or the burst ends.
        let _ = burst.block.push(sample);
        burst.remaining = burst.remaining.saturating_sub(1);
        if !burst.block.is_full() && burst.remaining > 0 {
            return;
        }
        let samples = core::mem::take(&mut burst.block);
        let count = u32::try_from(samples.len()).unwrap_or(0);
        let block = SampleBlock {
            first_index: burst.next_index,
            remaining: burst.remaining,
            period_us: self.sample_period_us,
            samples,
        };
        burst.next_index = burst.next_index.saturating_add(count);
        if burst.remaining == 0 {
            self.burst = None;
        }
        self.enqueue(QueuedBody::Samples(block));
    }

    fn execute(&mut self, command: Command) -> Outcome {
        match command {
            Command::Ping => Outcome::Pong,
            Command::GetInfo => {
                self.enqueue_hello();
                Outcome::Accepted
            }
            Command::SetConfig(config) => match self.apply_config(config) {
                Ok(()) => Outcome::Accepted,
                Err(reason) => Outcome::Refused(reason),
            },
            Command::ResetEnergy => {
                self.reset_baseline = EnergyTotals {
                    drawn_nj: self.meter.input.total_nj(),
                    delivered_nj: self.meter.output.total_nj(),
                    stored_nj: self.stored_since_boot(),
                };
                Outcome::Accepted
            }
            Command::StartBurst { samples } => {
                if self.burst.is_some() {
                    Outcome::Refused(Refusal::BurstInProgress)
                } else if samples == 0 || samples > MAX_BURST_SAMPLES {
                    Outcome::Refused(Refusal::BurstLengthOutOfRange)
                } else {
                    self.burst = Some(Burst {
                        next_index: 0,
                        remaining: samples,
                        block: Vec::new(),
                    });
                    Outcome::Accepted
                }
            }
        }
    }

    /// Validates, persists, then applies; on any failure the old configuration stays.
    fn apply_config(&mut self, config: NodeConfig) -> Result<(), Refusal> {
        validate(&config)?;
        config_store::save(&mut self.storage, &config).map_err(|_| Refusal::StorageWriteFailed)?;
        // A newly stated shed load replaces what was learned of the old one.
        if config.shed_load_na != self.config.shed_load_na {
            self.shed_saving = ShedSaving::new(config.shed_load_na);
        }
        self.config = config;
        self.config_source = ConfigSource::Received;
        Ok(())
    }

    fn enqueue_hello(&mut self) {
        let totals = self.totals();
        self.enqueue(QueuedBody::Hello { totals });
    }

    fn enqueue(&mut self, body: QueuedBody) {
        let queued = Queued {
            seq: self.seq,
            uptime_ms: self.now_us / 1000,
            body,
        };
        self.seq = self.seq.wrapping_add(1);
        if self.outbox.push_back(queued).is_err() {
            self.stats.dropped_messages = self.stats.dropped_messages.saturating_add(1);
        }
    }

    /// The message a queued entry stands for; a `Hello` is completed here
    /// with the configuration active now.
    fn uplink_of(&self, queued: Queued) -> Uplink {
        let body = match queued.body {
            QueuedBody::Hello { totals } => UplinkBody::Hello(Hello {
                protocol: PROTOCOL_VERSION,
                firmware: FIRMWARE_VERSION,
                node_id: self.node_id,
                boot_id: self.boot_id,
                sample_period_us: self.sample_period_us,
                config: self.config.clone(),
                config_source: self.config_source,
                totals,
            }),
            QueuedBody::Report(r) => UplinkBody::Report(r),
            QueuedBody::Event(e) => UplinkBody::Event(e),
            QueuedBody::Samples(s) => UplinkBody::Samples(s),
            QueuedBody::Reply(r) => UplinkBody::Reply(r),
            QueuedBody::Load(e) => UplinkBody::Load(e),
            QueuedBody::Harvest(h) => UplinkBody::Harvest(h),
        };
        Uplink {
            seq: queued.seq,
            uptime_ms: queued.uptime_ms,
            body,
        }
    }
}
