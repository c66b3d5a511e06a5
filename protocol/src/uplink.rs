//! Node-to-host messages.

use heapless::Vec;
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use crate::config::{Channel, NodeConfig};
use crate::version::{FirmwareVersion, ProtocolVersion};

/// Samples carried by one [`SampleBlock`].
pub const SAMPLES_PER_BLOCK: usize = 8;

/// Every node-to-host message: a wrapping sequence number (so the host can count
/// lost frames), the node's uptime, and the message itself.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Uplink {
    /// Increments by one per frame sent, wrapping; reset to 0 at boot.
    pub seq: u16,
    /// Milliseconds since the node booted.
    pub uptime_ms: u64,
    /// The message.
    pub body: UplinkBody,
}

/// The kinds of node-to-host message. Append new variants at the end only.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum UplinkBody {
    /// Who the node is and how it is configured; at boot and on request.
    Hello(Hello),
    /// One report interval's summary.
    Report(Report),
    /// A state transition, sent at once.
    Event(Event),
    /// Raw calibrated samples of a burst.
    Samples(SampleBlock),
    /// The answer to a host command.
    Reply(Reply),
    /// The load lost or regained its supply (since protocol 2).
    Load(LoadEvent),
    /// An hour slot of harvest ended: what it brought and what was predicted (since protocol 2).
    Harvest(SlotHarvest),
}

impl UplinkBody {
    /// Short names of the kinds, in wire order; their number is the number of kinds.
    pub const KIND_NAMES: [&'static str; 7] = [
        "hello", "report", "event", "samples", "reply", "load", "harvest",
    ];

    /// Position of this message's kind in wire order (an index into [`Self::KIND_NAMES`]).
    pub const fn kind_index(&self) -> usize {
        match self {
            UplinkBody::Hello(_) => 0,
            UplinkBody::Report(_) => 1,
            UplinkBody::Event(_) => 2,
            UplinkBody::Samples(_) => 3,
            UplinkBody::Reply(_) => 4,
            UplinkBody::Load(_) => 5,
            UplinkBody::Harvest(_) => 6,
        }
    }

    /// The short name of this message's kind.
    pub fn kind_name(&self) -> &'static str {
        match Self::KIND_NAMES.get(self.kind_index()) {
            Some(name) => name,
            None => "unknown",
        }
    }
}

/// Where the active configuration came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ConfigSource {
    /// Built-in defaults (nothing valid was stored).
    Defaults,
    /// Read from non-volatile storage at boot.
    Stored,
    /// Set by the host since boot.
    Received,
}

/// Energy totals kept by the node since boot or the last reset.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct EnergyTotals {
    /// Energy drawn from the harvester.
    pub drawn_nj: u64,
    /// Energy delivered to the load.
    pub delivered_nj: u64,
    /// Net energy put into output storage (negative when it discharged).
    pub stored_nj: i64,
}

/// The node describes itself, so a recorded log is self-describing.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Hello {
    /// Protocol spoken by the node.
    pub protocol: ProtocolVersion,
    /// Firmware version.
    pub firmware: FirmwareVersion,
    /// Stable identity of the node (a factory id on hardware); 0 when unknown.
    pub node_id: u64,
    /// Random or counter value that changes on every boot.
    pub boot_id: u32,
    /// Time between two samples.
    pub sample_period_us: u32,
    /// The active configuration.
    pub config: NodeConfig,
    /// Where it came from.
    pub config_source: ConfigSource,
    /// Totals since boot or the last reset.
    pub totals: EnergyTotals,
}

/// What the converter is doing: the states of the cutoff state machine.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ConverterState {
    /// No usable input; the converter has not started.
    Idle,
    /// Input above the start threshold; output not up yet.
    ColdStart,
    /// Converting normally.
    Harvesting,
    /// Input near the hold threshold, or cutoff forecast within the horizon.
    Sagging,
    /// Input fell below the hold threshold: stopped for lack of input.
    CutOff,
    /// Input healthy but the converter is not delivering: a fault.
    Stalled,
}

impl ConverterState {
    /// All states in wire order.
    pub const ALL: [ConverterState; 6] = [
        ConverterState::Idle,
        ConverterState::ColdStart,
        ConverterState::Harvesting,
        ConverterState::Sagging,
        ConverterState::CutOff,
        ConverterState::Stalled,
    ];

    /// How many states there are.
    pub const COUNT: usize = Self::ALL.len();

    /// A short lowercase name.
    pub const fn name(self) -> &'static str {
        match self {
            ConverterState::Idle => "idle",
            ConverterState::ColdStart => "cold-start",
            ConverterState::Harvesting => "harvesting",
            ConverterState::Sagging => "sagging",
            ConverterState::CutOff => "cutoff",
            ConverterState::Stalled => "stalled",
        }
    }

    /// True in the states where the load is not being supplied by the converter.
    pub const fn is_outage(self) -> bool {
        matches!(self, ConverterState::CutOff | ConverterState::Stalled)
    }
}

/// Why a transition happened. Append new variants at the end only.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum TransitionCause {
    /// Input rose to the start threshold.
    InputAboveStart,
    /// Output reached the output-good threshold (`output_up_uv`).
    OutputUp,
    /// Input came within the warning band of the stop voltage (`hold_uv`).
    InputNearHold,
    /// The forecast put cutoff within the horizon.
    ForecastUnderHorizon,
    /// Input fell below the converter's stop voltage (`hold_uv`).
    InputBelowHold,
    /// Output fell below the output-lost threshold (`output_down_uv`) with healthy input.
    OutputCollapsed,
    /// Output did not come up within the cold-start timeout.
    ColdStartTimeout,
    /// Conditions returned to normal.
    Recovered,
    /// The converter stopped drawing input current (below `input_idle_na`).
    ConverterIdle,
    /// The converter started drawing input current.
    ConverterStarted,
}

impl TransitionCause {
    /// A short lowercase name.
    pub const fn name(self) -> &'static str {
        match self {
            TransitionCause::InputAboveStart => "input-above-start",
            TransitionCause::OutputUp => "output-good",
            TransitionCause::InputNearHold => "input-near-stop",
            TransitionCause::ForecastUnderHorizon => "forecast-under-horizon",
            TransitionCause::InputBelowHold => "input-below-stop",
            TransitionCause::OutputCollapsed => "output-collapsed",
            TransitionCause::ColdStartTimeout => "cold-start-timeout",
            TransitionCause::Recovered => "recovered",
            TransitionCause::ConverterIdle => "no-input-current",
            TransitionCause::ConverterStarted => "converter-started",
        }
    }
}

/// A state transition, sent as soon as it happens.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Event {
    /// State left.
    pub from: ConverterState,
    /// State entered.
    pub to: ConverterState,
    /// Why.
    pub cause: TransitionCause,
    /// Input voltage when the condition was first seen (what triggered it).
    pub trigger_input_uv: u32,
    /// Output voltage when the condition was first seen.
    pub trigger_output_uv: u32,
    /// Input voltage at switch-over, after the debounce.
    pub input_uv: u32,
    /// Output voltage at switch-over, after the debounce.
    pub output_uv: u32,
}

/// Minimum, mean and maximum of one channel over an interval, sent as the mean
/// and the two distances from it (small numbers, so short varints).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChannelStats {
    /// Mean over the interval, in the channel's unit.
    pub mean: u32,
    /// `mean - min`.
    pub below_mean: u32,
    /// `max - mean`.
    pub above_mean: u32,
}

impl ChannelStats {
    /// Builds the statistics from a minimum, mean and maximum.
    pub const fn from_min_mean_max(min: u32, mean: u32, max: u32) -> Self {
        ChannelStats {
            mean,
            below_mean: mean.saturating_sub(min),
            above_mean: max.saturating_sub(mean),
        }
    }

    /// Smallest value seen.
    pub const fn min(&self) -> u32 {
        self.mean.saturating_sub(self.below_mean)
    }

    /// Largest value seen.
    pub const fn max(&self) -> u32 {
        self.mean.saturating_add(self.above_mean)
    }
}

/// Milliseconds spent in each state during an interval.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StateDurations {
    /// In `Idle`.
    pub idle_ms: u32,
    /// In `ColdStart`.
    pub cold_start_ms: u32,
    /// In `Harvesting`.
    pub harvesting_ms: u32,
    /// In `Sagging`.
    pub sagging_ms: u32,
    /// In `CutOff`.
    pub cutoff_ms: u32,
    /// In `Stalled`.
    pub stalled_ms: u32,
}

impl StateDurations {
    /// Time in one state.
    pub const fn get(&self, state: ConverterState) -> u32 {
        match state {
            ConverterState::Idle => self.idle_ms,
            ConverterState::ColdStart => self.cold_start_ms,
            ConverterState::Harvesting => self.harvesting_ms,
            ConverterState::Sagging => self.sagging_ms,
            ConverterState::CutOff => self.cutoff_ms,
            ConverterState::Stalled => self.stalled_ms,
        }
    }

    /// Mutable time in one state.
    pub fn get_mut(&mut self, state: ConverterState) -> &mut u32 {
        match state {
            ConverterState::Idle => &mut self.idle_ms,
            ConverterState::ColdStart => &mut self.cold_start_ms,
            ConverterState::Harvesting => &mut self.harvesting_ms,
            ConverterState::Sagging => &mut self.sagging_ms,
            ConverterState::CutOff => &mut self.cutoff_ms,
            ConverterState::Stalled => &mut self.stalled_ms,
        }
    }
}

/// Bit flags of a report.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReportFlags(pub u8);

impl ReportFlags {
    /// Some sample hit an end of the ADC's range.
    pub const ADC_CLIPPED: u8 = 1 << 0;
    /// Some calibrated value fell outside what the channel can represent.
    pub const OUT_OF_RANGE: u8 = 1 << 1;
    /// The sampler reported an error for some sample.
    pub const SAMPLER_ERROR: u8 = 1 << 2;

    /// True when `flag` (one of the constants) is set.
    pub const fn contains(self, flag: u8) -> bool {
        self.0 & flag != 0
    }

    /// Sets `flag`.
    pub fn insert(&mut self, flag: u8) {
        self.0 |= flag;
    }
}

/// One report interval's summary.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Report {
    /// Length of the interval actually covered.
    pub interval_ms: u32,
    /// Samples taken in the interval.
    pub sample_count: u32,
    /// Harvester voltage.
    pub input_uv: ChannelStats,
    /// Harvester current.
    pub input_na: ChannelStats,
    /// Load voltage.
    pub output_uv: ChannelStats,
    /// Load current.
    pub output_na: ChannelStats,
    /// Energy drawn from the harvester during the interval.
    pub drawn_nj: u64,
    /// Energy delivered to the load during the interval.
    pub delivered_nj: u64,
    /// Net energy into output storage during the interval (0 without storage).
    pub stored_nj: i64,
    /// State at the end of the interval.
    pub state: ConverterState,
    /// Time in each state during the interval.
    pub state_ms: StateDurations,
    /// Forecast time until the input falls to the hold threshold (the
    /// converter stops); None when no cutoff is in sight.
    pub input_cutoff_in_ms: Option<u32>,
    /// Forecast time until the load browns out (storage down to the load's
    /// minimum); None while storage is not expected to run out.
    pub brownout_in_ms: Option<u32>,
    /// The load's power at the present storage voltage, from its current
    /// averaged over its duty period.
    pub load_nw: u64,
    /// Converter output less load power, averaged like `load_nw`:
    /// positive while storage charges, negative while it drains.
    pub net_nw: i64,
    /// True while the load has its supply (storage above the load's minimum).
    pub load_powered: bool,
    /// True while non-essential load is shed.
    pub load_shed: bool,
    /// Clipping and range flags.
    pub flags: ReportFlags,
}

impl Report {
    /// The statistics of one channel.
    pub const fn channel(&self, channel: Channel) -> &ChannelStats {
        match channel {
            Channel::InputVoltage => &self.input_uv,
            Channel::InputCurrent => &self.input_na,
            Channel::OutputVoltage => &self.output_uv,
            Channel::OutputCurrent => &self.output_na,
        }
    }
}

/// One calibrated sample of all four channels.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Sample {
    /// Harvester voltage.
    pub input_uv: u32,
    /// Harvester current.
    pub input_na: u32,
    /// Load voltage.
    pub output_uv: u32,
    /// Load current.
    pub output_na: u32,
}

/// Consecutive burst samples, taken `period_us` apart.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SampleBlock {
    /// Index of the first sample within the burst (0-based).
    pub first_index: u32,
    /// Samples left in the burst after this block.
    pub remaining: u32,
    /// Time between samples.
    pub period_us: u32,
    /// The samples, oldest first.
    pub samples: Vec<Sample, SAMPLES_PER_BLOCK>,
}

/// Why a command was refused. Append new variants at the end only.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Refusal {
    /// `hold_uv` must be below `start_uv`.
    HoldNotBelowStart,
    /// `output_down_uv` must be below `output_up_uv`.
    OutputThresholdsInverted,
    /// A channel's scale is zero or too large.
    ChannelScaleOutOfRange(Channel),
    /// The ADC resolution is outside [`crate::limits::MIN_ADC_BITS`] to [`crate::limits::MAX_ADC_BITS`].
    AdcBitsOutOfRange,
    /// The report interval is outside [`crate::limits::MIN_REPORT_INTERVAL_MS`] to [`crate::limits::MAX_REPORT_INTERVAL_MS`].
    ReportIntervalOutOfRange,
    /// The debounce time is longer than [`crate::limits::MAX_DEBOUNCE_MS`].
    DebounceOutOfRange,
    /// A timeout or horizon is zero or longer than [`crate::limits::MAX_TIMEOUT_MS`].
    TimeoutOutOfRange,
    /// The sag margin is larger than the hold threshold or [`crate::limits::MAX_SAG_MARGIN_UV`].
    SagMarginOutOfRange,
    /// The burst length is zero or above [`crate::limits::MAX_BURST_SAMPLES`].
    BurstLengthOutOfRange,
    /// A burst is already running.
    BurstInProgress,
    /// The configuration could not be written to non-volatile storage.
    StorageWriteFailed,
    /// The storage capacitance is above [`crate::limits::MAX_STORAGE_UF`].
    StorageCapacitanceOutOfRange,
    /// The load's restart voltage is not above its minimum, or either is out of range.
    LoadThresholdsOutOfRange,
    /// The node name holds characters other than letters, digits, space and `-_.:`.
    NodeNameInvalid,
    /// The converter's MPPT fraction is neither 0 nor between
    /// [`crate::ConverterModel::MIN_MPPT_FRACTION_PPM`] and its maximum.
    MpptFractionOutOfRange,
    /// The shed load is above [`crate::limits::MAX_SHED_LOAD_NA`].
    ShedLoadOutOfRange,
}

impl core::fmt::Display for Refusal {
    /// A one-line explanation for people; every number comes from
    /// [`crate::limits`] or [`crate::ConverterModel`].
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        use crate::limits::*;
        match self {
            Refusal::HoldNotBelowStart => {
                f.write_str("the stop voltage must be below the start voltage")
            }
            Refusal::OutputThresholdsInverted => {
                f.write_str("the output-lost voltage must be below the output-good voltage")
            }
            Refusal::ChannelScaleOutOfRange(channel) => write!(
                f,
                "a channel scale is zero or above {} units per count (channel {})",
                MAX_SCALE_Q20 >> 20,
                channel.name()
            ),
            Refusal::AdcBitsOutOfRange => write!(
                f,
                "ADC resolution must be {MIN_ADC_BITS} to {MAX_ADC_BITS} bits"
            ),
            Refusal::ReportIntervalOutOfRange => write!(
                f,
                "report interval must be {MIN_REPORT_INTERVAL_MS} ms to {} s",
                MAX_REPORT_INTERVAL_MS / 1000
            ),
            Refusal::DebounceOutOfRange => write!(
                f,
                "debounce time must be at most {} s",
                MAX_DEBOUNCE_MS / 1000
            ),
            Refusal::TimeoutOutOfRange => write!(
                f,
                "timeouts and horizons must be 1 ms to {} s",
                MAX_TIMEOUT_MS / 1000
            ),
            Refusal::SagMarginOutOfRange => write!(
                f,
                "the warning band must be at most the stop voltage and at most {} mV",
                MAX_SAG_MARGIN_UV / 1000
            ),
            Refusal::BurstLengthOutOfRange => write!(
                f,
                "burst length must be 1 to {MAX_BURST_SAMPLES} samples"
            ),
            Refusal::BurstInProgress => f.write_str("a burst is already running"),
            Refusal::StorageWriteFailed => {
                f.write_str("the node could not store the configuration")
            }
            Refusal::StorageCapacitanceOutOfRange => write!(
                f,
                "storage capacitance must be at most {} F",
                MAX_STORAGE_UF / 1_000_000
            ),
            Refusal::LoadThresholdsOutOfRange => write!(
                f,
                "the load's restart voltage must be above its minimum voltage, both at most {} V",
                MAX_LOAD_UV / 1_000_000
            ),
            Refusal::NodeNameInvalid => f.write_str(
                "the node name may hold only letters, digits, spaces and - _ . : (no leading or trailing space)",
            ),
            Refusal::MpptFractionOutOfRange => write!(
                f,
                "the converter's MPPT fraction must be 0 (none) or {} % to {} % of open circuit",
                crate::ConverterModel::MIN_MPPT_FRACTION_PPM / 10_000,
                crate::ConverterModel::MAX_MPPT_FRACTION_PPM / 10_000
            ),
            Refusal::ShedLoadOutOfRange => write!(
                f,
                "the shed load's current must be at most {} mA",
                MAX_SHED_LOAD_NA / 1_000_000
            ),
        }
    }
}

/// The result of a command.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Outcome {
    /// Answer to `Ping`.
    Pong,
    /// Done as asked.
    Accepted,
    /// Not done; the reason says why. The previous state stays in force.
    Refused(Refusal),
}

/// The answer to one `Downlink`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Reply {
    /// The request id of the command answered.
    pub request_id: u16,
    /// What happened.
    pub outcome: Outcome,
}

/// Why the load lost (or regained) its supply. Append new variants at the end only.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LoadCause {
    /// The converter's input was cut off and storage then ran out.
    InputCutOff,
    /// The load drew more than the harvest supplied while the input was healthy.
    LoadTooHeavy,
    /// The converter stopped delivering with a healthy input (a fault).
    ConverterFault,
    /// The supply came back (only with `powered = true`).
    SupplyRestored,
}

impl LoadCause {
    /// A short lowercase name.
    pub const fn name(self) -> &'static str {
        match self {
            LoadCause::InputCutOff => "input-cutoff",
            LoadCause::LoadTooHeavy => "load-too-heavy",
            LoadCause::ConverterFault => "converter-fault",
            LoadCause::SupplyRestored => "supply-restored",
        }
    }
}

/// The load lost or regained its supply, sent at once.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoadEvent {
    /// True when the supply came back, false when the load browned out.
    pub powered: bool,
    /// Why.
    pub cause: LoadCause,
    /// Output (storage) voltage when the condition was first seen.
    pub output_uv: u32,
    /// Input voltage at the same moment.
    pub input_uv: u32,
    /// The converter's state at the same moment.
    pub converter: ConverterState,
    /// How long the converter had been in that state.
    pub converter_state_ms: u32,
    /// Net power (converter output less load) averaged as in [`Report::net_nw`].
    pub net_nw: i64,
}

/// One time-of-day slot of harvest: what it brought, and what the node's two
/// predictors had said of it before it began.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SlotHarvest {
    /// The slot of the day that ended, counted from boot modulo a day's slots.
    pub slot: u16,
    /// Length of a slot.
    pub slot_ms: u32,
    /// Energy drawn from the harvester in the slot.
    pub harvested_uj: u32,
    /// The EWMA profile's prediction for this slot (None until a day is learned).
    pub ewma_predicted_uj: Option<u32>,
    /// The WCMA prediction for this slot (None until learned).
    pub wcma_predicted_uj: Option<u32>,
    /// Harvest the EWMA profile predicts for the next 24 hours.
    pub next_day_uj: Option<u64>,
}
