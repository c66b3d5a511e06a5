//! Forecast quality against simulator ground truth, with the prognostics
//! metrics of Saxena et al., "Metrics for evaluating performance of
//! prognostic techniques", PHM 2008: coverage, α-accuracy, signed error and
//! flapping, over a window before each true event.
//!
//! Each corpus scenario runs through the firmware `Node`; its reports carry
//! the node's forecasts, and the protocol 1 forecasts ("today's") are
//! replayed from the same reports for a side-by-side comparison.

use std::fmt::Write;

use gleaner_firmware::brownout::storage_runout_ms;
use gleaner_protocol::{ConverterState, Report, Uplink, UplinkBody};

use crate::sim::run::engine::VirtualNode;
use crate::sim::scenarios::corpus::{corpus_entry, CorpusKind};
use crate::sim::GroundTruth;

/// α of the α-accuracy: a forecast within ±20 % of the true remaining time.
pub const ALPHA: f64 = 0.2;
/// Sagging counts as early enough this long before a cutoff, s.
pub const SAGGING_LEAD_S: f64 = 900.0;

/// The node may leave Sagging for an outage this long before the true cutoff,
/// s: at dusk a converter whose output is full stops drawing input before its
/// comparator trips, and the node calls the idle input a cutoff (up to 263 s
/// early on the 200-scenario corpus of seed 1).
pub const OUTAGE_SEEN_EARLY_S: f64 = 300.0;

/// ... or this long after it, s (the debounce, with room).
pub const OUTAGE_SEEN_LATE_S: f64 = 120.0;

/// One report's forecasts, at the end of its interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ForecastPoint {
    /// Simulated time, s.
    pub t_s: f64,
    /// The node's time to input cutoff, s.
    pub cutoff_s: Option<f64>,
    /// The node's time to brown-out, s.
    pub brownout_s: Option<f64>,
    /// Protocol 1's time to cutoff (a line through 16 reports), s.
    pub old_cutoff_s: Option<f64>,
    /// Protocol 1's storage run-out (one interval's load power, down to output-down), s.
    pub old_brownout_s: Option<f64>,
}

/// What one scenario run gives the scorer.
#[derive(Debug, Clone)]
pub struct ScenarioRun {
    /// The corpus kind.
    pub kind: CorpusKind,
    /// Forecasts of every report.
    pub points: Vec<ForecastPoint>,
    /// (time, entered Sagging?) of the node's transitions into and out of Sagging,
    /// with `Some(true)` entering, `Some(false)` leaving to Harvesting, `None` leaving to a cutoff.
    pub sagging: Vec<(f64, Option<bool>)>,
    /// What really happened.
    pub truth: GroundTruth,
    /// Seconds from the start before which nothing is judged (the corpus
    /// entry's settling time).
    pub settles_s: f64,
}

impl ScenarioRun {
    /// The part of the run from `from_s` to `to_s`: its reports, Sagging
    /// changes, brown-outs and converter changes (with the last change
    /// before it, so a start before the part still bounds its first
    /// cutoff's run-up), and its length as the elapsed time.
    pub fn part(&self, from_s: f64, to_s: f64) -> ScenarioRun {
        let within = |t: f64| t >= from_s && t < to_s;
        let mut truth = self.truth.clone();
        let before = truth.changes.iter().rposition(|c| c.t_s < from_s);
        truth.changes = before
            .into_iter()
            .map(|i| truth.changes[i])
            .chain(truth.changes.iter().copied().filter(|c| within(c.t_s)))
            .collect();
        truth.brownouts_s.retain(|&t| within(t));
        truth.load_powered_s.retain(|&t| t < to_s);
        truth.elapsed_s = (truth.elapsed_s.min(to_s) - from_s).max(0.0);
        ScenarioRun {
            kind: self.kind,
            points: self
                .points
                .iter()
                .copied()
                .filter(|p| within(p.t_s))
                .collect(),
            sagging: self
                .sagging
                .iter()
                .copied()
                .filter(|s| within(s.0))
                .collect(),
            truth,
            settles_s: 0.0,
        }
    }

    /// The part that is judged: everything after the settling time.
    pub fn judged(&self) -> ScenarioRun {
        self.part(self.settles_s, f64::INFINITY)
    }

    /// The settling part (a solar node's first afternoon and night), when
    /// there is one.
    pub fn settling(&self) -> Option<ScenarioRun> {
        (self.settles_s > 0.0).then(|| self.part(0.0, self.settles_s))
    }
}

/// Protocol 1's forecasts, replayed from reports as the node computed them.
#[derive(Debug)]
struct OldForecasts {
    trend: std::collections::VecDeque<(f64, f64)>,
    /// The node's output storage, µF.
    c_uf: u32,
    /// The converter's stop voltage, V.
    hold_v: f64,
    /// Output-down, µV (what protocol 1 counted down to).
    down_uv: u32,
}

impl OldForecasts {
    /// Replaying for a node configured as `config`.
    fn new(config: &gleaner_protocol::NodeConfig) -> Self {
        OldForecasts {
            trend: std::collections::VecDeque::new(),
            c_uf: config.output_storage_uf,
            hold_v: f64::from(config.thresholds.hold_uv) / 1e6,
            down_uv: config.thresholds.output_down_uv,
        }
    }

    fn push(&mut self, t_s: f64, r: &Report) -> (Option<f64>, Option<f64>) {
        let (c_uf, hold_v, down_uv) = (self.c_uf, self.hold_v, self.down_uv);
        let converting = matches!(
            r.state,
            ConverterState::Harvesting | ConverterState::Sagging
        );
        if r.state == ConverterState::ColdStart {
            self.trend.clear();
        }
        let cutoff = if converting {
            self.trend
                .push_back((t_s, f64::from(r.input_uv.mean) / 1e6));
            if self.trend.len() > 16 {
                self.trend.pop_front();
            }
            line_time_to(&self.trend, hold_v)
        } else {
            None
        };
        // Protocol 1's own formula: one interval's load power, down to output-down.
        let load_nw = r
            .delivered_nj
            .saturating_mul(1000)
            .checked_div(u64::from(r.interval_ms))
            .unwrap_or(0);
        let runout = storage_runout_ms(c_uf, r.output_uv.mean, down_uv, load_nw)
            .map(|ms| f64::from(ms) / 1e3);
        (cutoff, runout)
    }
}

/// Least-squares line through the points: time from the newest until it
/// reaches `level`, None when not falling or r² < 1/2.
fn line_time_to(points: &std::collections::VecDeque<(f64, f64)>, level: f64) -> Option<f64> {
    let n = points.len() as f64;
    if points.len() < 4 {
        return None;
    }
    let (t0, _) = *points.back()?;
    let (mut st, mut sv, mut stt, mut stv, mut svv) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for &(t, v) in points {
        let t = t - t0;
        st += t;
        sv += v;
        stt += t * t;
        stv += t * v;
        svv += v * v;
    }
    let sxx = n * stt - st * st;
    let sxy = n * stv - st * sv;
    let syy = n * svv - sv * sv;
    if sxx <= 0.0 || sxy >= 0.0 || 2.0 * sxy * sxy < sxx * syy {
        return None;
    }
    let slope = sxy / sxx;
    let now = (sv - slope * st) / n;
    Some(((now - level) / -slope).max(0.0))
}

/// Runs scenario `index` of the corpus from `seed`; `shed_pin_wired` false
/// makes the load ignore the load-shed pin.
pub fn run_corpus_scenario(
    seed: u64,
    index: usize,
    shed_pin_wired: bool,
) -> anyhow::Result<ScenarioRun> {
    let entry = corpus_entry(seed, index)?;
    let mut old = OldForecasts::new(&entry.scenario.node_config()?);
    let mut run = ScenarioRun {
        kind: entry.kind,
        points: Vec::new(),
        sagging: Vec::new(),
        truth: GroundTruth::default(),
        settles_s: entry.settles_s,
    };
    let mut node = VirtualNode::new(entry.scenario, 1)?;
    node.wire_shed_pin(shed_pin_wired);
    let mut bytes = Vec::new();
    let mut stop_at_s = f64::INFINITY;
    while !node.finished() && node.now_us() as f64 / 1e6 < stop_at_s {
        node.step();
        node.drain_frames(&mut bytes);
        for frame in bytes.split_mut(|&b| b == 0).filter(|f| !f.is_empty()) {
            if let Ok(message) = gleaner_protocol::decode_frame::<Uplink>(frame) {
                run.take(&message, &mut old);
            }
        }
        bytes.clear();
        // Stop 15 minutes after the first brown-out judged: the forecasts
        // before it are what count.
        if stop_at_s.is_infinite() {
            let judged = node
                .truth()
                .brownouts_s
                .iter()
                .find(|&&t| t >= run.settles_s);
            if let Some(&t) = judged {
                stop_at_s = t + 900.0;
            }
        }
    }
    run.truth = node.truth().clone();
    Ok(run)
}

impl ScenarioRun {
    /// Keeps what `message` says of the forecasts and of Sagging.
    fn take(&mut self, message: &Uplink, old: &mut OldForecasts) {
        let t_s = message.uptime_ms as f64 / 1e3;
        match &message.body {
            UplinkBody::Report(r) => {
                let (old_cutoff_s, old_brownout_s) = old.push(t_s, r);
                self.points.push(ForecastPoint {
                    t_s,
                    cutoff_s: r.input_cutoff_in_ms.map(|ms| f64::from(ms) / 1e3),
                    brownout_s: r.brownout_in_ms.map(|ms| f64::from(ms) / 1e3),
                    old_cutoff_s,
                    old_brownout_s,
                });
            }
            UplinkBody::Event(e) if e.to == ConverterState::Sagging => {
                self.sagging.push((t_s, Some(true)));
            }
            UplinkBody::Event(e) if e.from == ConverterState::Sagging => {
                let recovered = e.to == ConverterState::Harvesting;
                self.sagging.push((t_s, recovered.then_some(false)));
            }
            _ => {}
        }
    }
}

/// One forecast judged against the truth.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Judged {
    /// Which event (to keep flapping within one run-up).
    pub event: usize,
    /// True time left, s.
    pub remaining_s: f64,
    /// The forecast, s.
    pub forecast_s: Option<f64>,
}

/// The four prognostics figures.
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct Metrics {
    /// Forecasts judged.
    pub count: usize,
    /// Share of reports carrying a forecast.
    pub coverage: f64,
    /// Share within ±α of the true remaining time (a missing forecast is a miss).
    pub alpha_accuracy: f64,
    /// Median of (forecast - truth) / truth; positive is optimistic.
    pub median_signed_error: f64,
    /// Median |ln(f_i / f_i-1)| between successive forecasts of one run-up.
    pub flapping: f64,
}

fn median(mut values: Vec<f64>) -> f64 {
    if values.is_empty() {
        return f64::NAN;
    }
    values.sort_by(f64::total_cmp);
    let mid = values.len() / 2;
    if values.len() % 2 == 1 {
        values[mid]
    } else {
        (values[mid - 1] + values[mid]) / 2.0
    }
}

/// The metrics of a set of judged forecasts.
pub fn metrics(judged: &[Judged]) -> Metrics {
    let count = judged.len();
    if count == 0 {
        return Metrics::default();
    }
    let with: Vec<(&Judged, f64)> = judged
        .iter()
        .filter_map(|j| j.forecast_s.map(|f| (j, f)))
        .collect();
    let within = with
        .iter()
        .filter(|(j, f)| (f - j.remaining_s).abs() <= ALPHA * j.remaining_s)
        .count();
    let errors = with
        .iter()
        .map(|(j, f)| (f - j.remaining_s) / j.remaining_s)
        .collect();
    let flaps = judged
        .windows(2)
        .filter(|w| w[0].event == w[1].event)
        .filter_map(|w| Some((w[0].forecast_s?.max(1.0), w[1].forecast_s?.max(1.0))))
        .map(|(a, b)| (b / a).ln().abs())
        .collect();
    Metrics {
        count,
        coverage: with.len() as f64 / count as f64,
        alpha_accuracy: within as f64 / count as f64,
        median_signed_error: median(errors),
        flapping: median(flaps),
    }
}

/// The forecasts of `points` in the `window_s` before each event of
/// `events_s`, but after the latest of `starts_s` before it.
pub fn judge(
    points: &[ForecastPoint],
    events_s: &[f64],
    starts_s: &[f64],
    window_s: f64,
    forecast: impl Fn(&ForecastPoint) -> Option<f64>,
    first_event: usize,
) -> Vec<Judged> {
    let mut out = Vec::new();
    for (k, &t_event) in events_s.iter().enumerate() {
        let since = starts_s
            .iter()
            .copied()
            .filter(|&s| s < t_event)
            .fold(t_event - window_s, f64::max);
        for p in points.iter().filter(|p| p.t_s > since && p.t_s < t_event) {
            out.push(Judged {
                event: first_event + k,
                remaining_s: t_event - p.t_s,
                forecast_s: forecast(p),
            });
        }
    }
    out
}

/// Leads of Sagging before each cutoff the node saw coming from Sagging (0 when
/// it went to the cutoff straight from Harvesting), and the false alarms
/// (Sagging that ended back in Harvesting).
pub fn sagging_leads(run: &ScenarioRun) -> (Vec<f64>, usize) {
    let cutoffs: Vec<f64> = run.truth.cutoffs_s().collect();
    let mut leads = Vec::new();
    let mut false_alarms = 0;
    let mut since: Option<f64> = None;
    for &(t, change) in &run.sagging {
        match change {
            Some(true) => since = Some(t),
            Some(false) => {
                since = None;
                false_alarms += 1;
            }
            None => {
                // Left Sagging for an outage: match the true cutoff it saw.
                let near = cutoffs
                    .iter()
                    .find(|&&c| t >= c - OUTAGE_SEEN_EARLY_S && t <= c + OUTAGE_SEEN_LATE_S);
                if let (Some(s), Some(&c)) = (since, near) {
                    leads.push((c - s).max(0.0));
                }
                since = None;
            }
        }
    }
    (leads, false_alarms)
}

/// The node's figures for one kind of corpus scenario.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KindScore {
    /// The kind.
    pub kind: CorpusKind,
    /// Time to brown-out, last 2 h.
    pub brownout: Metrics,
    /// Time to cutoff, last hour.
    pub cutoff: Metrics,
    /// Share of cutoffs with Sagging raised at least 15 minutes before.
    pub sagging_early_share: f64,
    /// Sagging that ended back in Harvesting, per simulated day.
    pub false_sagging_per_day: f64,
}

/// Figures of a whole corpus, today's (replayed) and the node's side by side.
#[derive(Debug, Clone, Default)]
pub struct CorpusScore {
    /// Scenarios run.
    pub scenarios: usize,
    /// Simulated days.
    pub days: f64,
    /// True brown-outs judged.
    pub brownouts: usize,
    /// True cutoffs judged.
    pub cutoffs: usize,
    /// Time to brown-out over the last 2 h: (today, new).
    pub brownout: (Metrics, Metrics),
    /// Time to cutoff over the last 2 h: (today, new).
    pub cutoff_2h: (Metrics, Metrics),
    /// Time to cutoff over the last hour: (today, new).
    pub cutoff_1h: (Metrics, Metrics),
    /// Cutoffs the node had been Sagging for at least 15 minutes before, share.
    pub sagging_early_share: f64,
    /// Sagging that ended back in Harvesting, per simulated day.
    pub false_sagging_per_day: f64,
    /// The node's figures by corpus kind.
    pub by_kind: Vec<KindScore>,
    /// The node's figures on the solar runs' first afternoon and evening,
    /// before it has seen a night (not in the figures above).
    pub first_evening: Option<KindScore>,
    /// Minutes the load was without power: (shedding on, shedding off), when compared.
    pub brownout_minutes: Option<(f64, f64)>,
}

/// Runs `count` corpus scenarios from `seed` on every core and scores them;
/// with `compare_shedding`, runs each again with the load ignoring the shed pin.
pub fn score_corpus(
    seed: u64,
    count: usize,
    compare_shedding: bool,
) -> anyhow::Result<CorpusScore> {
    let workers = crate::parallel::workers();
    let whole = parallel_map(count, workers, |i| run_corpus_scenario(seed, i, true))?;
    let runs: Vec<ScenarioRun> = whole.iter().map(ScenarioRun::judged).collect();
    let settling: Vec<ScenarioRun> = whole.iter().filter_map(ScenarioRun::settling).collect();
    let pooled = Pooled::of(&runs);
    let metrics_of = |(old, new): &(Vec<Judged>, Vec<Judged>)| (metrics(old), metrics(new));
    let mut score = CorpusScore {
        scenarios: count,
        days: pooled.days,
        brownouts: pooled.brownouts,
        cutoffs: pooled.cutoffs,
        brownout: metrics_of(&pooled.brownout),
        cutoff_2h: metrics_of(&pooled.cutoff_2h),
        cutoff_1h: metrics_of(&pooled.cutoff_1h),
        sagging_early_share: pooled.sagging_early_share(),
        false_sagging_per_day: pooled.false_sagging_per_day(),
        by_kind: CorpusKind::ALL
            .iter()
            .map(|&kind| kind_score(kind, &runs))
            .collect(),
        first_evening: (!settling.is_empty())
            .then(|| kind_score(CorpusKind::SolarEvening, &settling)),
        brownout_minutes: None,
    };
    if compare_shedding {
        let unshed = parallel_map(count, workers, |i| run_corpus_scenario(seed, i, false))?;
        let minutes =
            |rs: &[ScenarioRun]| rs.iter().map(|r| r.truth.load_unpowered_s).sum::<f64>() / 60.0;
        score.brownout_minutes = Some((minutes(&whole), minutes(&unshed)));
    }
    Ok(score)
}

/// The forecasts of many runs judged and pooled: (protocol 1's, the node's)
/// for each question, with the Sagging leads and the counts they are shares of.
#[derive(Debug, Default)]
struct Pooled {
    brownout: (Vec<Judged>, Vec<Judged>),
    cutoff_2h: (Vec<Judged>, Vec<Judged>),
    cutoff_1h: (Vec<Judged>, Vec<Judged>),
    leads: Vec<f64>,
    false_alarms: usize,
    brownouts: usize,
    cutoffs: usize,
    days: f64,
}

impl Pooled {
    fn of<'a>(runs: impl IntoIterator<Item = &'a ScenarioRun>) -> Self {
        let mut pooled = Pooled::default();
        for run in runs {
            pooled.add(run);
        }
        pooled
    }

    fn add(&mut self, run: &ScenarioRun) {
        let t = &run.truth;
        let starts: Vec<f64> = t.starts_s().collect();
        let cutoffs: Vec<f64> = t.cutoffs_s().collect();
        let both = |into: &mut (Vec<Judged>, Vec<Judged>),
                    events: &[f64],
                    since: &[f64],
                    window_s: f64,
                    old: fn(&ForecastPoint) -> Option<f64>,
                    new: fn(&ForecastPoint) -> Option<f64>,
                    first: usize| {
            into.0
                .extend(judge(&run.points, events, since, window_s, old, first));
            into.1
                .extend(judge(&run.points, events, since, window_s, new, first));
        };
        let (bo, lp) = (&t.brownouts_s, &t.load_powered_s);
        let brownout = (
            |p: &ForecastPoint| p.old_brownout_s,
            |p: &ForecastPoint| p.brownout_s,
        );
        let cutoff = (
            |p: &ForecastPoint| p.old_cutoff_s,
            |p: &ForecastPoint| p.cutoff_s,
        );
        both(
            &mut self.brownout,
            bo,
            lp,
            7200.0,
            brownout.0,
            brownout.1,
            self.brownouts,
        );
        both(
            &mut self.cutoff_2h,
            &cutoffs,
            &starts,
            7200.0,
            cutoff.0,
            cutoff.1,
            self.cutoffs,
        );
        both(
            &mut self.cutoff_1h,
            &cutoffs,
            &starts,
            3600.0,
            cutoff.0,
            cutoff.1,
            self.cutoffs,
        );
        self.brownouts += bo.len();
        self.cutoffs += cutoffs.len();
        let (leads, false_alarms) = sagging_leads(run);
        self.leads.extend(leads);
        self.false_alarms += false_alarms;
        self.days += t.elapsed_s / 86_400.0;
    }

    /// Share of cutoffs with Sagging raised at least [`SAGGING_LEAD_S`] before.
    fn sagging_early_share(&self) -> f64 {
        let early = self.leads.iter().filter(|&&l| l >= SAGGING_LEAD_S).count();
        early as f64 / self.cutoffs.max(1) as f64
    }

    /// Sagging that ended back in Harvesting, per simulated day.
    fn false_sagging_per_day(&self) -> f64 {
        self.false_alarms as f64 / self.days.max(1e-9)
    }
}

/// The node's figures over the runs of one kind.
fn kind_score(kind: CorpusKind, runs: &[ScenarioRun]) -> KindScore {
    let pooled = Pooled::of(runs.iter().filter(|r| r.kind == kind));
    KindScore {
        kind,
        brownout: metrics(&pooled.brownout.1),
        cutoff: metrics(&pooled.cutoff_1h.1),
        sagging_early_share: pooled.sagging_early_share(),
        false_sagging_per_day: pooled.false_sagging_per_day(),
    }
}

/// `f(0..count)` on `workers` threads, in order; the first error, if any.
fn parallel_map<T: Send>(
    count: usize,
    workers: usize,
    f: impl Fn(usize) -> anyhow::Result<T> + Sync,
) -> anyhow::Result<Vec<T>> {
    crate::parallel::map_in_order(count, workers, f)
        .into_iter()
        .collect()
}

impl CorpusScore {
    /// The figures as JSON (schema `gleaner.score.v1`), protocol 1's and the
    /// node's side by side.
    pub fn to_json(&self) -> serde_json::Value {
        use serde_json::json;
        let pair = |(today, node): (Metrics, Metrics)| json!({ "protocol_1": today, "node": node });
        json!({
            "schema": "gleaner.score.v1",
            "scenarios": self.scenarios,
            "days": self.days,
            "brownouts": self.brownouts,
            "cutoffs": self.cutoffs,
            "brownout_last_2h": pair(self.brownout),
            "cutoff_last_2h": pair(self.cutoff_2h),
            "cutoff_last_1h": pair(self.cutoff_1h),
            "sagging_15min_early_share": self.sagging_early_share,
            "false_sagging_per_day": self.false_sagging_per_day,
            "by_kind": self.by_kind.iter().map(|k| json!({
                "kind": k.kind.name(),
                "brownout_last_2h": k.brownout,
                "cutoff_last_1h": k.cutoff,
                "sagging_15min_early_share": k.sagging_early_share,
                "false_sagging_per_day": k.false_sagging_per_day,
            })).collect::<Vec<_>>(),
            "solar_first_evening": self.first_evening.map(|k| json!({
                "brownout_last_2h": k.brownout,
                "cutoff_last_1h": k.cutoff,
                "sagging_15min_early_share": k.sagging_early_share,
                "false_sagging_per_day": k.false_sagging_per_day,
            })),
            "load_off_minutes": self.brownout_minutes.map(|(on, off)| json!({
                "shedding": on, "no_shedding": off,
            })),
        })
    }

    /// The figures as a table, today's and the new side by side.
    pub fn render(&self) -> String {
        let mut o = String::new();
        let _ = writeln!(
            o,
            "{} invented scenarios, {:.1} simulated days, {} brown-outs, {} cutoffs",
            self.scenarios, self.days, self.brownouts, self.cutoffs
        );
        self.render_side_by_side(&mut o);
        let _ = writeln!(
            o,
            "Sagging raised >= 15 min before a cutoff: {:.1} % of cutoffs; false Sagging: {:.2} per simulated day",
            self.sagging_early_share * 100.0,
            self.false_sagging_per_day
        );
        for k in &self.by_kind {
            render_kind(&mut o, k.kind.name(), k);
        }
        if let Some(k) = &self.first_evening {
            let _ = writeln!(
                o,
                "solar runs judged from noon of their second day; their first afternoon and night, before the node has seen a night:"
            );
            render_kind(&mut o, "first evening", k);
        }
        if let Some((on, off)) = self.brownout_minutes {
            let _ = writeln!(
                o,
                "load without power: {on:.0} min with load shedding, {off:.0} min without"
            );
        }
        o
    }

    /// The four figures of each question, protocol 1's and the node's.
    fn render_side_by_side(&self, o: &mut String) {
        let _ = writeln!(
            o,
            "{:<34} {:>9} {:>9} {:>12} {:>9}   {:>9} {:>9} {:>12} {:>9}",
            "(today | new)",
            "coverage",
            "within20%",
            "median err",
            "flapping",
            "coverage",
            "within20%",
            "median err",
            "flapping"
        );
        for (name, (a, b)) in [
            ("time to brown-out, last 2 h", self.brownout),
            ("time to cutoff, last 2 h", self.cutoff_2h),
            ("time to cutoff, last hour", self.cutoff_1h),
        ] {
            let _ = writeln!(
                o,
                "{name:<34} {:>8.1}% {:>8.1}% {:>+11.1}% {:>9.3}   {:>8.1}% {:>8.1}% {:>+11.1}% {:>9.3}",
                a.coverage * 100.0,
                a.alpha_accuracy * 100.0,
                a.median_signed_error * 100.0,
                a.flapping,
                b.coverage * 100.0,
                b.alpha_accuracy * 100.0,
                b.median_signed_error * 100.0,
                b.flapping
            );
        }
    }
}

/// One kind's line: the node's figures.
fn render_kind(o: &mut String, name: &str, k: &KindScore) {
    let _ = writeln!(
        o,
        "  {name:<17} brown-out {:>5.1}% within, {:>+6.1}% err | cutoff (last hour) {:>5.1}% within, {:>+6.1}% err | Sagging >= 15 min {:>5.1}%, false {:.2}/day",
        k.brownout.alpha_accuracy * 100.0,
        k.brownout.median_signed_error * 100.0,
        k.cutoff.alpha_accuracy * 100.0,
        k.cutoff.median_signed_error * 100.0,
        k.sagging_early_share * 100.0,
        k.false_sagging_per_day
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn metrics_of_hand_made_forecasts() {
        // Truth 100 s and 50 s left; forecasts 110 s (+10 %) and 70 s (+40 %),
        // then one missing.
        let judged = [
            Judged {
                event: 0,
                remaining_s: 100.0,
                forecast_s: Some(110.0),
            },
            Judged {
                event: 0,
                remaining_s: 50.0,
                forecast_s: Some(70.0),
            },
            Judged {
                event: 0,
                remaining_s: 10.0,
                forecast_s: None,
            },
        ];
        let m = metrics(&judged);
        assert_eq!(m.count, 3);
        assert!((m.coverage - 2.0 / 3.0).abs() < 1e-12);
        assert!((m.alpha_accuracy - 1.0 / 3.0).abs() < 1e-12);
        assert!((m.median_signed_error - 0.25).abs() < 1e-12);
        assert!((m.flapping - (70.0f64 / 110.0).ln().abs()).abs() < 1e-12);
    }

    #[test]
    fn the_old_line_matches_a_straight_fall() {
        let points: std::collections::VecDeque<(f64, f64)> = (0..16)
            .map(|s| (s as f64 * 10.0, 1.0 - 0.001 * s as f64))
            .collect();
        // Newest 0.985 V at t = 150 s, falling 0.1 mV/s: 0.7 V in 2850 s.
        let t = line_time_to(&points, 0.7).unwrap();
        assert!((t - 2850.0).abs() < 1e-6, "{t}");
    }

    #[test]
    fn a_part_of_a_run_keeps_its_events_and_the_start_before_it() {
        use crate::sim::models::converter::OffReason;
        use crate::sim::run::truth::ConverterChange;
        let point = |t_s| ForecastPoint {
            t_s,
            cutoff_s: Some(1.0),
            brownout_s: None,
            old_cutoff_s: None,
            old_brownout_s: None,
        };
        let change = |t_s, converting| ConverterChange {
            t_s,
            converting,
            reason: (!converting).then_some(OffReason::Starved),
        };
        let mut truth = GroundTruth::default();
        // Started at 0, cut off at 10 000 s, started at 40 000, cut off at 100 000.
        truth.changes = vec![
            change(0.0, true),
            change(10_000.0, false),
            change(40_000.0, true),
            change(100_000.0, false),
        ];
        truth.brownouts_s = vec![20_000.0, 110_000.0];
        truth.load_powered_s = vec![0.0, 45_000.0];
        truth.elapsed_s = 111_000.0;
        let run = ScenarioRun {
            kind: CorpusKind::SolarEvening,
            points: vec![point(5_000.0), point(60_000.0), point(99_000.0)],
            sagging: vec![(9_000.0, Some(true)), (98_000.0, Some(true))],
            truth,
            settles_s: 50_000.0,
        };
        let judged = run.judged();
        assert_eq!(judged.points.len(), 2);
        assert_eq!(judged.sagging, vec![(98_000.0, Some(true))]);
        assert_eq!(
            judged.truth.cutoffs_s().collect::<Vec<_>>(),
            vec![100_000.0]
        );
        // The start at 40 000 s still bounds the run-up to the judged cutoff.
        assert_eq!(judged.truth.starts_s().collect::<Vec<_>>(), vec![40_000.0]);
        assert_eq!(judged.truth.brownouts_s, vec![110_000.0]);
        assert_eq!(judged.truth.elapsed_s, 61_000.0);
        let first = run.settling().expect("a settling part");
        assert_eq!(first.truth.cutoffs_s().collect::<Vec<_>>(), vec![10_000.0]);
        assert_eq!(first.truth.brownouts_s, vec![20_000.0]);
        assert_eq!(first.truth.elapsed_s, 50_000.0);
        assert_eq!(first.points.len(), 1);
    }

    #[test]
    fn judging_keeps_the_window_after_the_last_start() {
        let points: Vec<ForecastPoint> = (0..10)
            .map(|i| ForecastPoint {
                t_s: i as f64 * 100.0,
                cutoff_s: Some(1000.0 - i as f64 * 100.0),
                brownout_s: None,
                old_cutoff_s: None,
                old_brownout_s: None,
            })
            .collect();
        let judged = judge(&points, &[1000.0], &[250.0], 700.0, |p| p.cutoff_s, 0);
        // After 300 s (the window's start, later than the start at 250 s) and
        // before the event: 400 s to 900 s.
        assert_eq!(judged.len(), 6);
        assert_eq!(metrics(&judged).alpha_accuracy, 1.0);
    }
}

#[cfg(test)]
mod corpus_tests {
    use super::*;

    #[test]
    fn the_node_forecasts_beat_protocol_1_on_a_small_corpus() {
        // 16 invented scenarios, four of each kind (the full 200 run in
        // `gleaner sim score`). Floors: no worse than the replayed protocol 1
        // forecasts where they are judged alike, and the flapping target.
        let s = score_corpus(3, 16, false).unwrap();
        assert!(s.brownouts >= 8 && s.cutoffs >= 4, "{}", s.render());
        let (old, new) = s.brownout;
        assert!(new.alpha_accuracy > old.alpha_accuracy, "{}", s.render());
        assert!(
            new.flapping <= 0.05 && new.flapping < old.flapping,
            "{}",
            s.render()
        );
        // Counting down to the load's own minimum, not output-down: not optimistic.
        assert!(new.median_signed_error <= 0.05, "{}", s.render());
        let (old, new) = s.cutoff_1h;
        assert!(new.coverage > old.coverage, "{}", s.render());
        assert!(new.alpha_accuracy >= old.alpha_accuracy, "{}", s.render());
        assert!(
            new.median_signed_error < old.median_signed_error,
            "{}",
            s.render()
        );
        // Floors under what this corpus gave when they were set (brown-out
        // 83 % within ±20 %, cutoff 89 %, Sagging 15 minutes ahead of every
        // cutoff, with the solar nodes judged after their first night), so a
        // change that loses much of it fails here.
        assert!(s.brownout.1.alpha_accuracy >= 0.75, "{}", s.render());
        assert!(s.cutoff_1h.1.alpha_accuracy >= 0.8, "{}", s.render());
        assert!(s.sagging_early_share >= 0.9, "{}", s.render());
        assert!(s.false_sagging_per_day <= 1.0, "{}", s.render());
        // The first evenings, before a night was seen, are scored apart.
        let first = s.first_evening.expect("solar runs have a first evening");
        assert!(first.cutoff.count > 0, "{}", s.render());
    }
}
