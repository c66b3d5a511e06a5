//! The node's configuration as it travels on the wire (in `Hello` and in the
//! `SetConfig` command). Validation lives in the firmware, which owns the rules.

use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

/// Longest node name, in bytes of UTF-8.
pub const NODE_NAME_LEN: usize = 24;

/// The human name a user gives a node ("greenhouse-3"), empty when unset.
/// Which characters are allowed is checked on the node.
pub type NodeName = heapless::String<NODE_NAME_LEN>;

/// One of the four measured channels.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Channel {
    /// Harvester side voltage, microvolts.
    InputVoltage,
    /// Harvester side current, nanoamps.
    InputCurrent,
    /// Load side voltage, microvolts.
    OutputVoltage,
    /// Load side current, nanoamps.
    OutputCurrent,
}

impl Channel {
    /// All channels in wire order.
    pub const ALL: [Channel; 4] = [
        Channel::InputVoltage,
        Channel::InputCurrent,
        Channel::OutputVoltage,
        Channel::OutputCurrent,
    ];

    /// A short lowercase name with its unit, for messages and column headers.
    pub const fn name(self) -> &'static str {
        match self {
            Channel::InputVoltage => "input_uv",
            Channel::InputCurrent => "input_na",
            Channel::OutputVoltage => "output_uv",
            Channel::OutputCurrent => "output_na",
        }
    }
}

/// Linear map from ADC counts to the channel's unit (µV for voltages, nA for
/// currents): `value = round(counts * units_per_count_q20 / 2^20) + offset`.
///
/// Q20 fixed point keeps a millionth of a unit per count without floats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChannelCal {
    /// Channel units per ADC count, times 2^20.
    pub units_per_count_q20: u64,
    /// Added after scaling, in channel units (front-end offset correction).
    pub offset: i32,
}

/// Calibration of all four channels and the ADC they share.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Calibration {
    /// ADC resolution; counts at 0 or `2^bits - 1` are flagged as clipped.
    pub adc_bits: u8,
    /// Input (harvester) voltage channel.
    pub input_voltage: ChannelCal,
    /// Input (harvester) current channel.
    pub input_current: ChannelCal,
    /// Output (load) voltage channel.
    pub output_voltage: ChannelCal,
    /// Output (load) current channel.
    pub output_current: ChannelCal,
}

impl Calibration {
    /// The calibration of one channel.
    pub const fn channel(&self, channel: Channel) -> &ChannelCal {
        match channel {
            Channel::InputVoltage => &self.input_voltage,
            Channel::InputCurrent => &self.input_current,
            Channel::OutputVoltage => &self.output_voltage,
            Channel::OutputCurrent => &self.output_current,
        }
    }

    /// The calibration of one channel, to change.
    pub fn channel_mut(&mut self, channel: Channel) -> &mut ChannelCal {
        match channel {
            Channel::InputVoltage => &mut self.input_voltage,
            Channel::InputCurrent => &mut self.input_current,
            Channel::OutputVoltage => &mut self.output_voltage,
            Channel::OutputCurrent => &mut self.output_current,
        }
    }
}

/// Thresholds and timings of the cutoff state machine.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Thresholds {
    /// Input voltage at which the converter can cold-start.
    pub start_uv: u32,
    /// Input voltage below which the converter stops; must be below `start_uv`.
    pub hold_uv: u32,
    /// Input within this margin above `hold_uv` counts as sagging.
    pub sag_margin_uv: u32,
    /// Output at or above this: the converter is delivering.
    pub output_up_uv: u32,
    /// Output below this while the input is healthy: the converter has stalled.
    pub output_down_uv: u32,
    /// A condition must hold this long before the state changes.
    pub debounce_ms: u32,
    /// Longest time the output may take to come up after a cold start.
    pub cold_start_timeout_ms: u32,
    /// Sagging when the forecast says cutoff within this time.
    pub forecast_horizon_ms: u32,
    /// Input current below this means the converter is not drawing: stopped
    /// (input below start) or stalled (input healthy, output not up).
    pub input_idle_na: u32,
    /// The load's own minimum supply voltage: below it the load browns out.
    pub load_min_uv: u32,
    /// Supply voltage at which a browned-out load starts again; above `load_min_uv`.
    pub load_restart_uv: u32,
    /// Shed non-essential load when brown-out is forecast within this time.
    pub brownout_horizon_ms: u32,
}

/// How the converter treats its input and output, as far as the forecasts
/// need to know (from its data sheet or its setting resistors).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ConverterModel {
    /// The fraction of the source's open-circuit voltage at which the
    /// converter holds its input while converting at full power (fractional
    /// open-circuit-voltage MPPT), in ppm; 0 when its input follows another
    /// rule (a resistive input, a fixed voltage) or is not known.
    pub mppt_fraction_ppm: u32,
    /// True when the converter regulates its output: once the output is full
    /// it draws only what the load takes, its input rises towards open
    /// circuit, and the node no longer sees the voltage its stop comparator
    /// watches while it converts.
    pub output_regulated: bool,
}

impl ConverterModel {
    /// Lowest MPPT fraction a node accepts (5 %; 0 says there is none).
    pub const MIN_MPPT_FRACTION_PPM: u32 = 50_000;
    /// Highest MPPT fraction a node accepts (99 %).
    pub const MAX_MPPT_FRACTION_PPM: u32 = 990_000;

    /// Nothing known: forecasts read the input as it is measured.
    pub const UNKNOWN: ConverterModel = ConverterModel {
        mppt_fraction_ppm: 0,
        output_regulated: false,
    };
}

/// Everything a node can be told to change, validated on the node.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NodeConfig {
    /// Counts-to-units maps.
    pub calibration: Calibration,
    /// State-machine thresholds.
    pub thresholds: Thresholds,
    /// Length of one report interval.
    pub report_interval_ms: u32,
    /// Storage capacitance on the output, 0 when there is none.
    pub output_storage_uf: u32,
    /// Time with brown-out out of sight before shed load is restored.
    pub load_restore_ms: u32,
    /// Current the load-shed pin switches off, from the load's design, in nA;
    /// 0 when not known (the node then learns it from its first shed). The
    /// brown-out forecast counts the shedding the node will do with it.
    pub shed_load_na: u32,
    /// The user's name for the node; empty when unset.
    pub name: NodeName,
    /// What the node knows of its converter.
    pub converter: ConverterModel,
}
