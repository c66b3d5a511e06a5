//! Turning a recorded run into answers: did the node stay up, how much did it
//! harvest, where did the converter lose efficiency, why did it go down, and
//! what storage or duty cycle would have kept it up.
//!
//! [`Analyzer`] takes the log's records one at a time (memory stays flat) and
//! [`Analyzer::finish`] gives a [`RunReport`], which renders as text, JSON
//! ([`REPORT_SCHEMA`]) or an HTML page with SVG plots.

pub mod harvest;
pub mod html;
pub mod load_outages;
pub mod series;
pub mod sizing;
pub mod text;

use std::collections::BTreeMap;

use gleaner_firmware::meter::efficiency_ppm;
use gleaner_protocol::{ConverterState, Event, Hello, Report, UplinkBody};
use serde::Serialize;

use crate::failure::FailedAs;
use crate::link::tracker::TrackError;
use crate::link::{LinkStats, LinkTracker, Tracked};
use crate::log::split::LogItem;
use crate::log::{LogHeader, MarkerKind, Record, RecordBody};
use harvest::{HarvestForecast, HarvestSlots};
use load_outages::{LoadOutage, LoadOutages};
use series::{Sample, Series};
use sizing::{advise, Figures, SizingAdvice, DEFAULT_MARGIN};

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

/// Width of the efficiency-by-input-voltage bins, V.
pub const EFFICIENCY_BIN_V: f64 = EFFICIENCY_BIN_UV as f64 / 1e6;
/// Width of the efficiency-by-input-voltage bins, µV: an interval goes to
/// bin `input_uv_mean / EFFICIENCY_BIN_UV` (integer division, as
/// host/sql/efficiency_by_input.sql does).
pub const EFFICIENCY_BIN_UV: u32 = 50_000;

/// One node boot as its `Hello` describes it.
#[derive(Debug, Clone, PartialEq, Serialize)]
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
}

impl BootInfo {
    /// How the converter was described to the node, in words.
    pub fn converter_words(&self) -> String {
        converter_words(self.mppt_fraction, self.output_regulated)
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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
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
#[derive(Debug, Clone, PartialEq, Serialize)]
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

/// A transition as the node reported it.
#[derive(Debug, Clone, PartialEq, Serialize)]
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

const MAX_TRANSITIONS: usize = 10_000;

/// Names of the message kinds, in wire order, for `message_counts`.
const MESSAGE_KINDS: [&str; UplinkBody::KIND_NAMES.len()] = UplinkBody::KIND_NAMES;

#[derive(Debug, Clone, Default)]
struct Bin {
    seconds: f64,
    drawn_nj: u128,
    converted_nj: i128,
}

#[derive(Debug, Clone, Default)]
struct Day {
    covered_s: f64,
    drawn_nj: u128,
    delivered_nj: u128,
    stored_nj: i128,
    outage_s: f64,
}

/// Streams a run's records into a [`RunReport`].
pub struct Analyzer {
    tracker: LinkTracker,
    header: Option<LogHeader>,
    boots: Vec<BootInfo>,
    config: Option<Hello>,
    boot_base_s: f64,
    current_boot: Option<u32>,
    last_t_s: f64,
    last_host_us: u64,
    first_t_s: Option<f64>,
    covered_s: f64,
    gaps: u32,
    state_s: [f64; ConverterState::COUNT],
    drawn_nj: u128,
    delivered_nj: u128,
    stored_nj: i128,
    bins: BTreeMap<i64, Bin>,
    days: BTreeMap<u32, Day>,
    state: Option<ConverterState>,
    open_outage: Option<Outage>,
    outages: Vec<Outage>,
    load_outages: LoadOutages,
    harvest: HarvestSlots,
    last_input_v: f64,
    last_output_v: f64,
    max_output_v: f64,
    sleep_w: Option<f64>,
    active_w: f64,
    supplied_s: f64,
    supplied_delivered_j: f64,
    transitions: Vec<Transition>,
    transitions_not_listed: u64,
    counts: [u64; MESSAGE_KINDS.len()],
    series: Series,
    warnings: Vec<String>,
}

impl Default for Analyzer {
    fn default() -> Self {
        Self::new()
    }
}

fn state_index(state: ConverterState) -> usize {
    ConverterState::ALL
        .iter()
        .position(|s| *s == state)
        .unwrap_or(0)
}

impl Analyzer {
    /// An analyzer that has seen nothing.
    pub fn new() -> Self {
        Analyzer {
            tracker: LinkTracker::new(),
            header: None,
            boots: Vec::new(),
            config: None,
            boot_base_s: 0.0,
            current_boot: None,
            last_t_s: 0.0,
            last_host_us: 0,
            first_t_s: None,
            covered_s: 0.0,
            gaps: 0,
            state_s: [0.0; ConverterState::COUNT],
            drawn_nj: 0,
            delivered_nj: 0,
            stored_nj: 0,
            bins: BTreeMap::new(),
            days: BTreeMap::new(),
            state: None,
            open_outage: None,
            outages: Vec::new(),
            load_outages: LoadOutages::new(),
            harvest: HarvestSlots::new(),
            last_input_v: 0.0,
            last_output_v: 0.0,
            max_output_v: 0.0,
            sleep_w: None,
            active_w: 0.0,
            supplied_s: 0.0,
            supplied_delivered_j: 0.0,
            transitions: Vec::new(),
            transitions_not_listed: 0,
            counts: [0; MESSAGE_KINDS.len()],
            series: Series::new(),
            warnings: Vec::new(),
        }
    }

    /// Notes a warning (for example from the log reader).
    pub fn warn(&mut self, warning: String) {
        self.warnings.push(warning);
    }

    /// Takes one log item (a record with its frame read ahead).
    pub fn add_item(&mut self, item: LogItem<'_>) {
        match item {
            LogItem::Frame {
                host_time_us,
                frame,
            } => {
                let placed = self.tracker.accept_ahead(frame);
                self.add_placed(host_time_us, placed);
            }
            LogItem::Other(record) => self.add_record(&record),
        }
    }

    fn add_placed(&mut self, host_time_us: u64, placed: Result<Option<Tracked>, TrackError>) {
        match placed {
            Ok(Some(tracked)) => self.add_tracked(host_time_us, &tracked),
            Ok(None) => {}
            Err(TrackError::Version(v)) => self.warnings.push(format!("a frame was skipped: {v}")),
            Err(TrackError::Frame(_)) => {}
        }
    }

    /// Takes one log record.
    pub fn add_record(&mut self, record: &Record) {
        match &record.body {
            RecordBody::Header(h) => {
                if self.header.is_none() {
                    self.header = Some(h.clone());
                }
            }
            RecordBody::Frame(bytes) => {
                let placed = self.tracker.accept_encoded(bytes);
                self.add_placed(record.host_time_us, placed);
            }
            RecordBody::Marker {
                kind: MarkerKind::PortLost,
                ..
            } => self.gaps += 1,
            RecordBody::Marker { .. } | RecordBody::Unknown(_) => {}
        }
    }

    /// Takes one decoded, placed message received at `host_time_us`.
    pub fn add_tracked(&mut self, host_time_us: u64, tracked: &Tracked) {
        let uptime_s = tracked.message.uptime_ms as f64 / 1000.0;
        if self.current_boot != Some(tracked.boot_index) {
            if self.current_boot.is_some() {
                // Place a new boot after the last one: the host time between
                // them, less the time the node had already been up.
                let host_gap_s = host_time_us.saturating_sub(self.last_host_us) as f64 / 1e6;
                self.boot_base_s = self.last_t_s + (host_gap_s - uptime_s).max(0.0) - uptime_s;
                self.close_outage_at(self.last_t_s, false);
                self.load_outages.close_at(self.last_t_s, false);
                self.state = None;
            }
            self.current_boot = Some(tracked.boot_index);
        }
        let t_s = self.boot_base_s + uptime_s;
        self.last_t_s = self.last_t_s.max(t_s);
        self.last_host_us = host_time_us;
        let body = &tracked.message.body;
        match body {
            UplinkBody::Hello(h) => self.add_hello(tracked.boot_index, h),
            UplinkBody::Report(r) => self.add_report(t_s, r),
            UplinkBody::Event(e) => self.add_event(t_s, e),
            UplinkBody::Load(e) => self.load_outages.push(t_s, e),
            UplinkBody::Harvest(h) => self.harvest.push(t_s, h),
            UplinkBody::Samples(_) | UplinkBody::Reply(_) => {}
        }
        if let Some(count) = self.counts.get_mut(body.kind_index()) {
            *count += 1;
        }
    }

    fn add_hello(&mut self, index: u32, h: &Hello) {
        let t = &h.config.thresholds;
        let info = BootInfo {
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
        };
        match self.boots.iter_mut().find(|b| b.index == index) {
            Some(existing) => *existing = info,
            None => self.boots.push(info),
        }
        self.config = Some(h.clone());
    }

    fn set_state(&mut self, t_s: f64, from: ConverterState, to: ConverterState, cause: &str) {
        if self.transitions.len() < MAX_TRANSITIONS {
            self.transitions.push(Transition {
                t_s,
                from: from.name().into(),
                to: to.name().into(),
                cause: cause.into(),
            });
        } else {
            self.transitions_not_listed += 1;
        }
        if to.is_outage() && self.open_outage.is_none() {
            self.open_outage = Some(Outage {
                start_s: t_s,
                end_s: t_s,
                duration_s: 0.0,
                cause: if to == ConverterState::Stalled {
                    OutageCause::ConverterFault
                } else {
                    OutageCause::StarvedOfInput
                },
                node_cause: cause.into(),
                input_v_before: self.last_input_v,
                storage_v_before: self.last_output_v,
                ongoing: true,
            });
        } else if !to.is_outage() {
            self.close_outage_at(t_s, false);
        }
        self.state = Some(to);
    }

    fn close_outage_at(&mut self, t_s: f64, ongoing: bool) {
        if let Some(mut outage) = self.open_outage.take() {
            outage.end_s = t_s.max(outage.start_s);
            outage.duration_s = outage.end_s - outage.start_s;
            outage.ongoing = ongoing;
            self.outages.push(outage);
        }
    }

    fn add_event(&mut self, t_s: f64, e: &Event) {
        self.set_state(t_s, e.from, e.to, e.cause.name());
    }

    fn add_report(&mut self, t_s: f64, r: &Report) {
        let length_s = f64::from(r.interval_ms) / 1e3;
        self.first_t_s.get_or_insert(t_s - length_s);
        self.covered_s += length_s;
        for state in ConverterState::ALL {
            self.state_s[state_index(state)] += f64::from(r.state_ms.get(state)) / 1e3;
        }
        self.drawn_nj += u128::from(r.drawn_nj);
        self.delivered_nj += u128::from(r.delivered_nj);
        self.stored_nj += i128::from(r.stored_nj);

        let input_v = f64::from(r.input_uv.mean) / 1e6;
        let output_v = f64::from(r.output_uv.mean) / 1e6;
        // Only intervals spent converting say anything about the converter.
        let converting_ms = r.state_ms.harvesting_ms + r.state_ms.sagging_ms;
        if r.drawn_nj > 0 && u64::from(converting_ms) * 10 >= u64::from(r.interval_ms) * 9 {
            let bin = i64::from(r.input_uv.mean / EFFICIENCY_BIN_UV);
            let b = self.bins.entry(bin).or_default();
            b.seconds += length_s;
            b.drawn_nj += u128::from(r.drawn_nj);
            b.converted_nj += i128::from(r.delivered_nj) + i128::from(r.stored_nj);
        }
        let outage_s = f64::from(r.state_ms.cutoff_ms + r.state_ms.stalled_ms) / 1e3;
        let day =
            ((t_s - length_s - self.first_t_s.unwrap_or(0.0)).max(0.0) / 86_400.0).floor() as u32;
        let d = self.days.entry(day).or_default();
        d.covered_s += length_s;
        d.drawn_nj += u128::from(r.drawn_nj);
        d.delivered_nj += u128::from(r.delivered_nj);
        d.stored_nj += i128::from(r.stored_nj);
        d.outage_s += outage_s;

        // Load figures for sizing: only while the load was supplied.
        let output_w = r.delivered_nj as f64 / 1e9 / length_s.max(1e-9);
        if outage_s == 0.0 && r.output_uv.mean > 0 {
            self.supplied_s += length_s;
            self.supplied_delivered_j += r.delivered_nj as f64 / 1e9;
            let low = output_v * f64::from(r.output_na.min()) / 1e9;
            let high = output_v * f64::from(r.output_na.max()) / 1e9;
            if low > 0.0 {
                self.sleep_w = Some(self.sleep_w.map_or(low, |s: f64| s.min(low)));
            }
            self.active_w = self.active_w.max(high);
        }
        self.max_output_v = self.max_output_v.max(output_v);

        // A transition whose event was lost shows up as a changed report state.
        if let Some(state) = self.state {
            if state != r.state {
                self.set_state(t_s, state, r.state, "seen-in-report");
            }
        } else {
            self.state = Some(r.state);
            if r.state.is_outage() {
                self.set_state(t_s - length_s, r.state, r.state, "in-progress-at-start");
            }
        }
        self.last_input_v = input_v;
        self.last_output_v = output_v;

        let mut state_s = [0.0; ConverterState::COUNT];
        for state in ConverterState::ALL {
            state_s[state_index(state)] = f64::from(r.state_ms.get(state)) / 1e3;
        }
        self.series.add(Sample {
            t_s,
            length_s,
            input_v,
            output_v,
            input_w: r.drawn_nj as f64 / 1e9 / length_s.max(1e-9),
            output_w,
            drawn_total_j: self.drawn_nj as f64 / 1e9,
            delivered_total_j: self.delivered_nj as f64 / 1e9,
            state_s,
        });
    }

    /// The link counters so far.
    pub fn link_stats(&self) -> &LinkStats {
        self.tracker.stats()
    }

    /// Finishes the run.
    pub fn finish(mut self) -> RunReport {
        if self.boots.is_empty() && self.counts.iter().any(|&c| c > 0) {
            self.warn(
                "the log holds no Hello: firmware, node identity, calibration and thresholds are unknown (recording with this gleaner asks the node for one on every connect)"
                    .to_string(),
            );
        }
        let end = self.last_t_s;
        self.close_outage_at(end, true);
        let load_outages = std::mem::take(&mut self.load_outages).finish(end);
        let first = self.first_t_s.unwrap_or(end);
        let duration_s = (end - first).max(0.0);
        let covered: f64 = self.state_s.iter().sum::<f64>().max(self.covered_s);
        let states = ConverterState::ALL
            .iter()
            .map(|s| {
                let seconds = self.state_s[state_index(*s)];
                StateShare {
                    state: s.name().into(),
                    seconds,
                    share: if covered > 0.0 {
                        seconds / covered
                    } else {
                        0.0
                    },
                }
            })
            .collect();
        let stored_nj = self
            .stored_nj
            .clamp(i128::from(i64::MIN), i128::from(i64::MAX)) as i64;
        let drawn_nj = u64::try_from(self.drawn_nj).unwrap_or(u64::MAX);
        let delivered_nj = u64::try_from(self.delivered_nj).unwrap_or(u64::MAX);
        let energy = EnergyTotals {
            drawn_j: self.drawn_nj as f64 / 1e9,
            delivered_j: self.delivered_nj as f64 / 1e9,
            stored_j: self.stored_nj as f64 / 1e9,
            efficiency: efficiency_ppm(drawn_nj, delivered_nj, stored_nj)
                .map(|ppm| f64::from(ppm) / 1e6),
        };
        let efficiency_by_input = self
            .bins
            .iter()
            .map(|(&bin, b)| {
                let drawn = u64::try_from(b.drawn_nj).unwrap_or(u64::MAX);
                let converted = i64::try_from(b.converted_nj).unwrap_or(i64::MAX);
                EfficiencyBin {
                    input_v_low: bin as f64 * EFFICIENCY_BIN_V,
                    input_v_high: (bin + 1) as f64 * EFFICIENCY_BIN_V,
                    seconds: b.seconds,
                    drawn_j: b.drawn_nj as f64 / 1e9,
                    converted_j: b.converted_nj as f64 / 1e9,
                    efficiency: efficiency_ppm(drawn, 0, converted).map(|ppm| f64::from(ppm) / 1e6),
                }
            })
            .collect();
        let days = self
            .days
            .iter()
            .map(|(&day, d)| DayBudget {
                day,
                covered_s: d.covered_s,
                drawn_j: d.drawn_nj as f64 / 1e9,
                delivered_j: d.delivered_nj as f64 / 1e9,
                stored_j: d.stored_nj as f64 / 1e9,
                outage_s: d.outage_s,
                energy_neutral: d.outage_s == 0.0 && d.stored_nj >= 0,
            })
            .collect();
        let sizing = self.config.as_ref().map(|hello| {
            let longest = self
                .outages
                .iter()
                .map(|o| o.duration_s)
                .fold(0.0, f64::max);
            let load_w = if self.supplied_s > 0.0 {
                self.supplied_delivered_j / self.supplied_s
            } else {
                0.0
            };
            let converted_w = if duration_s > 0.0 {
                (energy.delivered_j + energy.stored_j).max(0.0) / duration_s
            } else {
                0.0
            };
            let v_min = f64::from(hello.config.thresholds.load_min_uv) / 1e6;
            advise(Figures {
                outage_s: longest,
                load_w,
                v_max: self.max_output_v,
                v_min,
                margin: DEFAULT_MARGIN,
                converted_w,
                sleep_w: self.sleep_w.unwrap_or(0.0),
                active_w: self.active_w,
            })
        });
        let harvest = std::mem::take(&mut self.harvest).finish(
            self.sleep_w.unwrap_or(0.0),
            self.active_w,
            energy.efficiency,
        );
        let link = *self.tracker.stats();
        if link.likely_wrong_baud() {
            self.warnings.push(
                "most frames were damaged: the recording was probably made at the wrong baud rate"
                    .into(),
            );
        }
        RunReport {
            schema: REPORT_SCHEMA.into(),
            header: self.header,
            boots: self.boots,
            duration_s,
            covered_s: self.covered_s,
            coverage: if duration_s > 0.0 {
                (self.covered_s / duration_s).min(1.0)
            } else {
                0.0
            },
            recording_gaps: self.gaps,
            states,
            outages: self.outages,
            load_outages,
            harvest,
            energy,
            efficiency_by_input,
            days,
            sizing,
            link,
            transitions: self.transitions,
            transitions_not_listed: self.transitions_not_listed,
            message_counts: MESSAGE_KINDS
                .iter()
                .zip(self.counts)
                .filter(|(_, n)| *n > 0)
                .map(|(k, n)| (k.to_string(), n))
                .collect(),
            series: self.series.points().to_vec(),
            warnings: self.warnings,
        }
    }
}

/// Analyses a log file (`-`: standard input), streaming, on every core.
pub fn analyze_file(path: &std::path::Path) -> anyhow::Result<RunReport> {
    analyze_file_with(path, crate::parallel::workers(), &crate::progress::none())
}

/// As [`analyze_file`], reading on up to `workers` threads and advancing
/// `progress` by the bytes read.
pub fn analyze_file_with(
    path: &std::path::Path,
    workers: usize,
    progress: &indicatif::ProgressBar,
) -> anyhow::Result<RunReport> {
    let mut analyzer = Analyzer::new();
    // Several logs may advance one bar from several threads: add what was read.
    let summary = crate::log::split::read_log(path, workers, &mut |n| progress.inc(n), |item| {
        analyzer.add_item(item)
    })?;
    if let Some(err) = &summary.io_error {
        analyzer.warn(format!("reading stopped early: {err}"));
    }
    for w in &summary.warnings {
        analyzer.warn(w.to_string());
    }
    let report = analyzer.finish();
    if report.message_counts.values().sum::<u64>() == 0 {
        let not_a_log = summary
            .warnings
            .iter()
            .any(|w| matches!(w, crate::log::ReadWarning::NotALog));
        let name = if crate::files::is_stdio(path) {
            "standard input".to_string()
        } else {
            path.display().to_string()
        };
        let why = if summary.bytes == 0 && summary.io_error.is_none() {
            "is empty".to_string()
        } else if not_a_log {
            crate::log::ReadWarning::NotALog.to_string()
        } else {
            "holds no frames from a node (only the recorder's own marks)".to_string()
        };
        return Err(anyhow::anyhow!("{name}: {why}").failed_as(crate::failure::Failure::BadInput));
    }
    Ok(report)
}
