//! What a report says about one run: the types behind the text, JSON
//! ([`REPORT_SCHEMA`]) and HTML renderings.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::harvest::HarvestForecast;
use super::load_outages::LoadOutage;
use super::series;
use super::sizing::SizingAdvice;
use crate::link::LinkStats;
use crate::log::LogHeader;

/// Identifies the JSON layout; bumped on any incompatible change.
pub const REPORT_SCHEMA: &str = "gleaner.report.v2";

/// Fields renamed from schema `gleaner.report.v1` to v2 (old path, new name),
/// so that one word names one quantity: energy *drawn* from the harvester,
/// *delivered* to the load, *stored*, and power *converted* (out of the
/// converter into load and storage).
pub const RENAMED_SINCE_V1: [(&str, &str); 6] = [
    (".boots[].hold_v", "stop_v"),
    (".boots[].output_down_v", "output_lost_v"),
    (".days[].harvested_j", "drawn_j"),
    (".days[].consumed_j", "delivered_j"),
    (".harvest.slots[].harvested_j", "drawn_j"),
    (".sizing.harvest_w", "converted_w"),
];

/// State and cause names renamed from schema v1 to v2 (old, new): the
/// converter's stop voltage was "hold", output good was "up", a converter that
/// stops drawing current was "idle" (also a state it never leads to), and
/// cutoff is one word, as the trade writes it.
pub const NAMES_RENAMED_SINCE_V1: [(&str, &str); 6] = [
    ("output-up", "output-good"),
    ("input-near-hold", "input-near-stop"),
    ("input-below-hold", "input-below-stop"),
    ("converter-idle", "no-input-current"),
    ("cut-off", "cutoff"),
    ("input-cut-off", "input-cutoff"),
];

/// One node boot as its `Hello` describes it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BootInfo {
    /// 0 for the first boot in the log.
    pub index: u32,
    /// The node's stable id, 16 hex digits ("0000000000000000": not known,
    /// as in protocol 1 logs).
    pub node_id: String,
    /// The user's name for the node (empty when unset).
    pub node_name: String,
    /// The node's boot id.
    pub boot_id: u32,
    /// Firmware version.
    pub firmware: String,
    /// Protocol version.
    pub protocol: String,
    /// Where the configuration came from.
    pub config_source: String,
    /// Start threshold, V.
    pub start_v: f64,
    /// Hold threshold, V.
    pub stop_v: f64,
    /// Output-down threshold (lowest useful storage voltage), V.
    pub output_lost_v: f64,
    /// The load's minimum supply voltage (brown-out), V.
    pub load_min_v: f64,
    /// Report interval, s.
    pub report_interval_s: f64,
    /// Output storage, F.
    pub storage_f: f64,
    /// The converter's MPPT fraction of open circuit; None when it has none
    /// or the node was not told (protocol 1 and 2 logs).
    pub mppt_fraction: Option<f64>,
    /// True when the node was told its converter regulates its output.
    pub output_regulated: bool,
    /// Current the node was told its load-shed pin switches off, A; None
    /// when not told (0 on the wire, and every log before protocol 4).
    pub shed_load_a: Option<f64>,
}

impl BootInfo {
    /// Boot `index` as its `Hello` describes it.
    pub fn of(index: u32, h: &gleaner_protocol::Hello) -> Self {
        let t = &h.config.thresholds;
        BootInfo {
            index,
            node_id: format!("{:016x}", h.node_id),
            node_name: h.config.name.to_string(),
            boot_id: h.boot_id,
            firmware: h.firmware.to_string(),
            protocol: h.protocol.to_string(),
            config_source: format!("{:?}", h.config_source).to_lowercase(),
            start_v: f64::from(t.start_uv) / 1e6,
            stop_v: f64::from(t.hold_uv) / 1e6,
            output_lost_v: f64::from(t.output_down_uv) / 1e6,
            load_min_v: f64::from(t.load_min_uv) / 1e6,
            report_interval_s: f64::from(h.config.report_interval_ms) / 1e3,
            storage_f: f64::from(h.config.output_storage_uf) / 1e6,
            mppt_fraction: mppt_fraction(&h.config.converter),
            output_regulated: h.config.converter.output_regulated,
            shed_load_a: match h.config.shed_load_na {
                0 => None,
                na => Some(f64::from(na) / 1e9),
            },
        }
    }

    /// How the converter was described to the node, in words.
    pub fn converter_words(&self) -> String {
        converter_words(self.mppt_fraction, self.output_regulated)
    }

    /// The shed load the node was told, in words; None when not told.
    pub fn shed_load_words(&self) -> Option<String> {
        self.shed_load_a.map(|a| format!("{:.1} µA", a * 1e6))
    }
}

/// The MPPT fraction a node was told, None when none (0 on the wire).
pub fn mppt_fraction(converter: &gleaner_protocol::ConverterModel) -> Option<f64> {
    match converter.mppt_fraction_ppm {
        0 => None,
        ppm => Some(f64::from(ppm) / 1e6),
    }
}

/// A converter description in words, as the report and `node info` show it.
pub fn converter_words(mppt_fraction: Option<f64>, output_regulated: bool) -> String {
    if mppt_fraction.is_none() && !output_regulated {
        // Protocol 1 and 2 nodes were never told; neither was this one.
        return "converter not described".to_owned();
    }
    let input = match mppt_fraction {
        Some(f) => format!("MPPT at {:.0} % of open circuit", f * 100.0),
        None => "no MPPT fraction".to_owned(),
    };
    let output = if output_regulated {
        "regulated output"
    } else {
        "unregulated output"
    };
    format!("{input}, {output}")
}

/// Time in one state.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StateShare {
    /// State name.
    pub state: String,
    /// Seconds in it.
    pub seconds: f64,
    /// Share of the covered time, 0 to 1.
    pub share: f64,
}

/// Why the load lost its supply.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum OutageCause {
    /// The converter stopped for lack of input (`CutOff`).
    StarvedOfInput,
    /// The converter stopped with healthy input (`Stalled`).
    ConverterFault,
}

impl OutageCause {
    /// The cause in words, the same in every output.
    pub const fn words(self) -> &'static str {
        match self {
            OutageCause::StarvedOfInput => "starved of input",
            OutageCause::ConverterFault => "converter fault",
        }
    }
}

/// One outage.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Outage {
    /// Start, s of run time.
    pub start_s: f64,
    /// End, s of run time (the end of the log while ongoing).
    pub end_s: f64,
    /// Length, s.
    pub duration_s: f64,
    /// Why.
    pub cause: OutageCause,
    /// The node's word for the first transition.
    pub node_cause: String,
    /// Mean input voltage in the last report before it, V.
    pub input_v_before: f64,
    /// Mean output (storage) voltage in the last report before it, V.
    pub storage_v_before: f64,
    /// Still going at the end of the log.
    pub ongoing: bool,
}

/// Energy totals.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EnergyTotals {
    /// Drawn from the harvester, J.
    pub drawn_j: f64,
    /// Delivered to the load, J.
    pub delivered_j: f64,
    /// Net change of output storage, J.
    pub stored_j: f64,
    /// (delivered + stored) / drawn, when enough was drawn.
    pub efficiency: Option<f64>,
}

/// Efficiency of one input-voltage bin (intervals spent at least 90 % in
/// `Harvesting` or `Sagging` only).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EfficiencyBin {
    /// Lower edge, V.
    pub input_v_low: f64,
    /// Upper edge, V.
    pub input_v_high: f64,
    /// Time with the input in the bin, s.
    pub seconds: f64,
    /// Energy drawn, J.
    pub drawn_j: f64,
    /// Energy delivered plus stored, J.
    pub converted_j: f64,
    /// converted / drawn.
    pub efficiency: Option<f64>,
}

/// One day's budget (24 h blocks of run time from the first report).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DayBudget {
    /// 0 for the first day.
    pub day: u32,
    /// Seconds of data in the day.
    pub covered_s: f64,
    /// Energy drawn from the harvester, J.
    pub drawn_j: f64,
    /// Energy delivered to the load, J.
    pub delivered_j: f64,
    /// Net change of storage, J.
    pub stored_j: f64,
    /// Seconds in CutOff or Stalled.
    pub outage_s: f64,
    /// No outage, and storage ended the day no lower than it began.
    pub energy_neutral: bool,
}

impl DayBudget {
    /// Whether the day was energy-neutral, in words (text and HTML reports).
    pub const fn neutrality(&self) -> &'static str {
        if self.energy_neutral {
            "energy-neutral"
        } else {
            "not energy-neutral"
        }
    }
}

/// A transition as the node reported it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Transition {
    /// When, s of run time.
    pub t_s: f64,
    /// From.
    pub from: String,
    /// To.
    pub to: String,
    /// Cause.
    pub cause: String,
}

/// Everything the report says about one run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunReport {
    /// [`REPORT_SCHEMA`].
    pub schema: String,
    /// The log's header.
    pub header: Option<LogHeader>,
    /// Each boot seen.
    pub boots: Vec<BootInfo>,
    /// First to last report, s.
    pub duration_s: f64,
    /// Time covered by received reports, s.
    pub covered_s: f64,
    /// covered / duration.
    pub coverage: f64,
    /// Recording gaps (port lost), s of host time.
    pub recording_gaps: u32,
    /// Time in each state.
    pub states: Vec<StateShare>,
    /// Every outage of the converter.
    pub outages: Vec<Outage>,
    /// Every time the load itself lost power, with the cause chain.
    pub load_outages: Vec<LoadOutage>,
    /// Hourly harvest against the node's predictions, and tomorrow's harvest.
    pub harvest: HarvestForecast,
    /// Energy totals.
    pub energy: EnergyTotals,
    /// Efficiency by input voltage.
    pub efficiency_by_input: Vec<EfficiencyBin>,
    /// Daily budgets.
    pub days: Vec<DayBudget>,
    /// Storage and duty-cycle advice, when the node configuration is known.
    pub sizing: Option<SizingAdvice>,
    /// Link quality.
    pub link: LinkStats,
    /// Transitions (the first 10,000).
    pub transitions: Vec<Transition>,
    /// Transitions beyond those listed.
    pub transitions_not_listed: u64,
    /// Reports, events and other messages decoded.
    pub message_counts: BTreeMap<String, u64>,
    /// Downsampled series for plots.
    pub series: Vec<series::Point>,
    /// Things the reader or the analysis noticed.
    pub warnings: Vec<String>,
}

impl RunReport {
    /// Seconds spent in the state named `state` (as in [`StateShare::state`]).
    pub fn seconds_in(&self, state: &str) -> Option<f64> {
        self.states
            .iter()
            .find(|s| s.state == state)
            .map(|s| s.seconds)
    }
}
