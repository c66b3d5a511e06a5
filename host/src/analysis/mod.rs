//! Turning a recorded run into answers: did the node stay up, how much did it
//! harvest, where did the converter lose efficiency, why did it go down, and
//! what storage or duty cycle would have kept it up.
//!
//! One module per question, each a small accumulator fed report by report
//! ([`energy`], [`states`], [`outages`], [`load_outages`], [`efficiency`],
//! [`days`], [`load_power`] and [`sizing`], [`harvest`], [`series`]; link
//! health comes from the [`crate::link::LinkTracker`]). [`Analyzer`] is the
//! thin driver: it places each message in run time and hands it on, and
//! [`Analyzer::finish`] gives a [`RunReport`] ([`report`]), which renders as
//! text, JSON ([`REPORT_SCHEMA`]) or an HTML page with SVG plots. Memory
//! stays flat however long the log.

pub mod checkpoint;
pub mod days;
pub mod efficiency;
pub mod energy;
pub mod harvest;
pub mod html;
pub mod load_outages;
pub mod load_power;
pub mod outages;
pub mod report;
pub mod series;
pub mod sizing;
pub mod spans;
pub mod states;
#[cfg(test)]
mod testing;
pub mod text;

use gleaner_protocol::{Hello, Report, UplinkBody};

use crate::failure::FailedAs;
use crate::link::tracker::TrackError;
use crate::link::{LinkStats, LinkTracker, Tracked};
use crate::log::split::LogItem;
use crate::log::{LogHeader, MarkerKind, Record, RecordBody};
pub use efficiency::{EFFICIENCY_BIN_UV, EFFICIENCY_BIN_V};
pub use outages::MAX_TRANSITIONS;
pub use report::*;

/// Names of the message kinds, in wire order, for `message_counts`.
const MESSAGE_KINDS: [&str; UplinkBody::KIND_NAMES.len()] = UplinkBody::KIND_NAMES;

/// A host clock step smaller than this is taken for latency and drift, s.
pub const CLOCK_JUMP_MIN_S: f64 = 60.0;

/// Where messages fall in run time: node uptime, with each new boot placed
/// after the last by the host's clock. Within a boot the host clock must
/// keep pace with the node's (or a steady multiple of it, as a sped-up
/// virtual node's): a step between two messages of more than
/// [`CLOCK_JUMP_MIN_S`] and twice the node time between them is the host
/// clock jumping (an NTP correction, a computer without a clock battery
/// booting in 1970). It is noted, and left out of placing later boots.
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
struct RunClock {
    boot_base_s: f64,
    current_boot: Option<u32>,
    last_t_s: f64,
    /// The last message's host time less the jumps seen, µs.
    last_host_us: i128,
    last_uptime_s: f64,
    /// The host clock's jumps so far, µs.
    jumped_us: i128,
    /// Where the host clock jumped (run time, s) and by how much (s).
    jumps: Vec<(f64, f64)>,
    /// Start of the first report's interval.
    first_t_s: Option<f64>,
}

impl RunClock {
    /// Places a message; true when it starts a new boot after another.
    fn place(&mut self, boot: u32, uptime_s: f64, host_time_us: u64) -> (f64, bool) {
        let mut host_us = i128::from(host_time_us) - self.jumped_us;
        let mut rebooted = false;
        if self.current_boot != Some(boot) {
            if self.current_boot.is_some() {
                // Place a new boot after the last one: the host time between
                // them, less the time the node had already been up.
                let host_gap_s = (host_us - self.last_host_us).max(0) as f64 / 1e6;
                self.boot_base_s = self.last_t_s + (host_gap_s - uptime_s).max(0.0) - uptime_s;
                rebooted = true;
            }
            self.current_boot = Some(boot);
        } else if self.current_boot.is_some() {
            let node_s = uptime_s - self.last_uptime_s;
            let step_s = (host_us - self.last_host_us) as f64 / 1e6 - node_s;
            if step_s.abs() > CLOCK_JUMP_MIN_S && step_s.abs() > 2.0 * node_s.abs() {
                self.jumps.push((self.boot_base_s + uptime_s, step_s));
                let step_us = (step_s * 1e6) as i128;
                self.jumped_us += step_us;
                host_us -= step_us;
            }
        }
        let t_s = self.boot_base_s + uptime_s;
        self.last_t_s = self.last_t_s.max(t_s);
        self.last_host_us = host_us;
        self.last_uptime_s = uptime_s;
        (t_s, rebooted)
    }

    /// The jumps in words, for the report's warnings.
    fn jump_warnings(&self) -> impl Iterator<Item = String> + '_ {
        self.jumps.iter().map(|&(t_s, step_s)| {
            format!(
                "the host clock jumped {} by {} at run time {}; times in this report follow the node's clock",
                if step_s > 0.0 { "forward" } else { "back" },
                text::duration(step_s.abs()),
                text::duration(t_s)
            )
        })
    }
}

/// Streams a run's records into a [`RunReport`].
#[derive(Default, serde::Serialize, serde::Deserialize)]
pub struct Analyzer {
    tracker: LinkTracker,
    header: Option<LogHeader>,
    boots: Vec<BootInfo>,
    config: Option<Hello>,
    clock: RunClock,
    covered_s: f64,
    gaps: u32,
    states: states::StateTimes,
    energy: energy::EnergySums,
    efficiency: efficiency::EfficiencyBins,
    days: days::DailyBudgets,
    outages: outages::ConverterOutages,
    load_outages: load_outages::LoadOutages,
    load: load_power::LoadPower,
    harvest: harvest::HarvestSlots,
    series: series::Series,
    counts: [u64; MESSAGE_KINDS.len()],
    warnings: Vec<String>,
}

impl Analyzer {
    /// An analyzer that has seen nothing.
    pub fn new() -> Self {
        Analyzer {
            series: series::Series::new(),
            ..Analyzer::default()
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
        let last_t_s = self.clock.last_t_s;
        let (t_s, rebooted) = self.clock.place(tracked.boot_index, uptime_s, host_time_us);
        if rebooted {
            self.outages.close_at(last_t_s, false);
            self.load_outages.close_at(last_t_s, false);
            self.outages.forget_state();
        }
        let body = &tracked.message.body;
        match body {
            UplinkBody::Hello(h) => self.add_hello(tracked.boot_index, h),
            UplinkBody::Report(r) => self.add_report(t_s, r),
            UplinkBody::Event(e) => self.outages.push_event(t_s, e),
            UplinkBody::Load(e) => self.load_outages.push(t_s, e),
            UplinkBody::Harvest(h) => self.harvest.push(t_s, h),
            UplinkBody::Samples(_) | UplinkBody::Reply(_) => {}
        }
        if let Some(count) = self.counts.get_mut(body.kind_index()) {
            *count += 1;
        }
    }

    fn add_hello(&mut self, index: u32, h: &Hello) {
        let info = BootInfo::of(index, h);
        match self.boots.iter_mut().find(|b| b.index == index) {
            Some(existing) => *existing = info,
            None => self.boots.push(info),
        }
        self.config = Some(h.clone());
    }

    fn add_report(&mut self, t_s: f64, r: &Report) {
        let length_s = f64::from(r.interval_ms) / 1e3;
        let first_s = *self.clock.first_t_s.get_or_insert(t_s - length_s);
        self.covered_s += length_s;
        self.states.push(r);
        self.energy.push(r);
        self.efficiency.push(r);
        self.days.push(t_s - length_s, first_s, r);
        self.load.push(r);
        let input_v = f64::from(r.input_uv.mean) / 1e6;
        let output_v = f64::from(r.output_uv.mean) / 1e6;
        self.outages
            .push_report(t_s, length_s, r.state, (input_v, output_v));
        let per_s = |nj: u64| nj as f64 / 1e9 / length_s.max(1e-9);
        self.series.add(series::Sample {
            t_s,
            length_s,
            input_v,
            output_v,
            input_w: per_s(r.drawn_nj),
            output_w: per_s(r.delivered_nj),
            drawn_total_j: self.energy.drawn_j(),
            delivered_total_j: self.energy.delivered_j(),
            state_s: states::report_state_s(r),
        });
    }

    /// The link counters so far.
    pub fn link_stats(&self) -> &LinkStats {
        self.tracker.stats()
    }

    /// Storage and duty-cycle advice from what the run showed.
    fn sizing(
        &self,
        hello: &Hello,
        longest_s: f64,
        energy: &EnergyTotals,
        duration_s: f64,
    ) -> sizing::SizingAdvice {
        let converted_w = if duration_s > 0.0 {
            (energy.delivered_j + energy.stored_j).max(0.0) / duration_s
        } else {
            0.0
        };
        sizing::advise(sizing::Figures {
            outage_s: longest_s,
            load_w: self.load.load_w(),
            v_max: self.load.max_output_v(),
            v_min: f64::from(hello.config.thresholds.load_min_uv) / 1e6,
            margin: sizing::DEFAULT_MARGIN,
            converted_w,
            sleep_w: self.load.sleep_w(),
            active_w: self.load.active_w(),
        })
    }

    /// Finishes the run.
    pub fn finish(mut self) -> RunReport {
        self.final_warnings();
        let end = self.clock.last_t_s;
        let duration_s = (end - self.clock.first_t_s.unwrap_or(end)).max(0.0);
        let outages = std::mem::take(&mut self.outages).finish(end);
        let longest_s = outages
            .outages
            .iter()
            .map(|o| o.duration_s)
            .fold(0.0, f64::max);
        let energy = self.energy.finish();
        let sizing = self
            .config
            .as_ref()
            .map(|hello| self.sizing(hello, longest_s, &energy, duration_s));
        let link = *self.tracker.stats();
        let covered = self.states.total_s().max(self.covered_s);
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
            states: self.states.finish(covered),
            outages: outages.outages,
            load_outages: self.load_outages.finish(end),
            harvest: self.harvest.finish(
                self.load.sleep_w(),
                self.load.active_w(),
                energy.efficiency,
            ),
            energy,
            efficiency_by_input: self.efficiency.finish(),
            days: self.days.finish(),
            sizing,
            link,
            transitions: outages.transitions,
            transitions_not_listed: outages.not_listed,
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

    /// Warnings about the whole log: no Hello, host clock jumps, a likely
    /// wrong baud rate.
    fn final_warnings(&mut self) {
        if self.boots.is_empty() && self.counts.iter().any(|&c| c > 0) {
            self.warn(
                "the log holds no Hello: firmware, node identity, calibration and thresholds are unknown (recording with this gleaner asks the node for one on every connect)"
                    .to_string(),
            );
        }
        let jumps: Vec<String> = self.clock.jump_warnings().collect();
        self.warnings.extend(jumps);
        if self.tracker.stats().likely_wrong_baud() {
            self.warnings.push(
                "most frames were damaged: the recording was probably made at the wrong baud rate"
                    .into(),
            );
        }
    }
}

/// Analyses a log file (`-`: standard input), streaming, on every core.
pub fn analyze_file(path: &std::path::Path) -> anyhow::Result<RunReport> {
    analyze_file_with(path, &Reading::default(), &crate::progress::none())
}

/// How logs are read for a report.
#[derive(Debug, Clone, Copy)]
pub struct Reading {
    /// Threads to read on.
    pub workers: usize,
    /// Go on from the log's last checkpoint ([`checkpoint`]) when it can be
    /// trusted, instead of reading every record (the report is the same).
    pub checkpoints: bool,
}

impl Default for Reading {
    fn default() -> Self {
        Reading {
            workers: crate::parallel::workers(),
            checkpoints: true,
        }
    }
}

/// As [`analyze_file`], read as `reading` says, advancing `progress` by the
/// bytes read.
pub fn analyze_file_with(
    path: &std::path::Path,
    reading: &Reading,
    progress: &indicatif::ProgressBar,
) -> anyhow::Result<RunReport> {
    analyze_as_one_run(&[path.to_path_buf()], reading, progress)
}

/// Analyses `paths`, in the order given, as one run: a recording rotated
/// into several logs. Warnings name their log when there are several. Only
/// the first log's checkpoint can stand for what came before it.
pub fn analyze_as_one_run(
    paths: &[std::path::PathBuf],
    reading: &Reading,
    progress: &indicatif::ProgressBar,
) -> anyhow::Result<RunReport> {
    let mut analyzer = Analyzer::new();
    let mut why_empty = None;
    for (i, path) in paths.iter().enumerate() {
        let resumed = (i == 0 && reading.checkpoints)
            .then(|| checkpoint::resume(path, reading.workers))
            .flatten();
        let from = resumed.map_or(0, |resumed| {
            analyzer = resumed.analyzer;
            progress.inc(resumed.offset);
            resumed.offset
        });
        // Several logs may advance one bar from several threads: add what was read.
        let summary = crate::log::split::read_log_from(
            path,
            from,
            reading.workers,
            &mut |n| progress.inc(n),
            |item| analyzer.add_item(item),
        )?;
        let name = log_name(path);
        let tell = |what: String| {
            if paths.len() > 1 {
                format!("{name}: {what}")
            } else {
                what
            }
        };
        if let Some(err) = &summary.io_error {
            analyzer.warn(tell(format!("reading stopped early: {err}")));
        }
        for w in &summary.warnings {
            analyzer.warn(tell(w.to_string()));
        }
        why_empty.get_or_insert_with(|| (name, empty_because(&summary)));
    }
    let report = analyzer.finish();
    if report.message_counts.values().sum::<u64>() == 0 {
        let (name, why) = why_empty.unwrap_or_default();
        return Err(anyhow::anyhow!("{name}: {why}").failed_as(crate::failure::Failure::BadInput));
    }
    Ok(report)
}

/// A log's name in messages.
fn log_name(path: &std::path::Path) -> String {
    if crate::files::is_stdio(path) {
        "standard input".to_string()
    } else {
        path.display().to_string()
    }
}

/// Why a log that gave no frames gave none.
fn empty_because(summary: &crate::log::split::ReadSummary) -> String {
    let not_a_log = summary
        .warnings
        .iter()
        .any(|w| matches!(w, crate::log::ReadWarning::NotALog));
    if summary.bytes == 0 && summary.io_error.is_none() {
        "is empty".to_string()
    } else if not_a_log {
        crate::log::ReadWarning::NotALog.to_string()
    } else {
        "holds no frames from a node (only the recorder's own marks)".to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use gleaner_protocol::Uplink;

    /// A 10-s report at `uptime_s`, received at host time `host_s`.
    fn feed(analyzer: &mut Analyzer, seq: u16, uptime_s: u64, host_s: u64) {
        let tracked = Tracked {
            boot_index: 0,
            reboot: false,
            lost_before: 0,
            message: Uplink {
                seq,
                uptime_ms: uptime_s * 1_000,
                body: UplinkBody::Report(testing::report(1_000, 0, 0)),
            },
        };
        analyzer.add_tracked(host_s * 1_000_000, &tracked);
    }

    fn jumps(report: &RunReport) -> Vec<&String> {
        report
            .warnings
            .iter()
            .filter(|w| w.contains("host clock jumped"))
            .collect()
    }

    #[test]
    fn a_host_clock_step_is_reported_and_durations_follow_the_node() {
        let mut analyzer = Analyzer::new();
        let start = 1_700_000_000;
        for i in 1..=6u16 {
            let uptime = 10 * u64::from(i);
            // NTP set the clock a day forward between the third and fourth report.
            let host = start + uptime + if i >= 4 { 86_400 } else { 0 };
            feed(&mut analyzer, i, uptime, host);
        }
        let report = analyzer.finish();
        assert_eq!(
            jumps(&report),
            ["the host clock jumped forward by 1d 00:00:00 at run time 40.0 s; times in this report follow the node's clock"]
        );
        assert_eq!(report.duration_s, 60.0, "six 10-s reports from uptime 0 s");
    }

    #[test]
    fn a_clock_set_back_is_reported_too_and_a_sped_up_node_is_not_a_jump() {
        let mut back = Analyzer::new();
        for (i, host) in [(1u16, 5_000u64), (2, 5_010), (3, 1_420)] {
            feed(&mut back, i, 10 * u64::from(i), host);
        }
        let report = back.finish();
        assert_eq!(jumps(&report).len(), 1);
        assert!(
            jumps(&report)[0].contains("jumped back by 01:00:00 at run time 30.0 s"),
            "{:?}",
            jumps(&report)
        );
        // A virtual node twenty times faster than the host: a steady pace.
        let mut fast = Analyzer::new();
        for i in 1..=50u16 {
            feed(&mut fast, i, 60 * u64::from(i), 1_000 + 3 * u64::from(i));
        }
        assert!(jumps(&fast.finish()).is_empty());
    }
}
