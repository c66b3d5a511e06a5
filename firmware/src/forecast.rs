//! Forecasts: when the converter's input will be cut off, and when the load
//! will brown out.
//!
//! * [`InputTrend`]: an ordinary least-squares line through the *square* of the
//!   input voltage over a window of points, each the mean of one block of time.
//!   A capacitive source under constant power falls linearly in V², so the
//!   fit is exact there; for the accelerating falls of a sunset or a cell's
//!   knee it answers earlier than a line through V would (the safe side). No
//!   forecast when flat, rising, or too noisy (r² below one half).
//! * [`CutoffForecaster`]: the input voltage's trend over the last reports and
//!   over the last half hour, and the input power's over the last half hour,
//!   answering with the earliest; the long ones see a slow decline long before
//!   the short one can tell it from noise, and the power sees a fading source.
//! * [`PowerAverage`]: the mean power of a stream of interval energies,
//!   exponentially weighted (EWMA) over a time constant, so a load that draws
//!   in short bursts is averaged over many of its periods.
//! * [`storage_runout_ms`]: how long storage carries a constant power down to
//!   a voltage, `t = C (V1² - V2²) / (2 P)`.
//! * [`brownout_ms`]: the time until the load browns out, from the usable
//!   storage energy, the net drain, and the input cutoff when one is in sight.

use heapless::HistoryBuf;

/// Points kept by each trend.
pub const TREND_POINTS: usize = 16;
/// Fewest points for a forecast.
pub const MIN_TREND_POINTS: usize = 4;
/// Block length of the long trend: 16 blocks of 2 minutes span 32 minutes.
pub const LONG_TREND_BLOCK_MS: u32 = 120_000;
/// Block length of the input power's trend: 16 blocks of 40 s span 10.7 minutes.
pub const POWER_TREND_BLOCK_MS: u32 = 40_000;
/// Time constant of the load's power average (10 minutes): long enough to
/// span many periods of a duty-cycled load (a burst a minute gives ten), short
/// enough to follow a load that is shed.
pub const LOAD_AVERAGE_MS: u32 = 600_000;
/// Time constant of the converter output's power average (2 minutes): the
/// harvest changes with clouds and sunset, so it is followed more closely.
pub const HARVEST_AVERAGE_MS: u32 = 120_000;
/// Input voltages are fitted in units of 256 µV, squared, so the sums of a
/// window stay well inside 128 bits.
const V_UNIT_UV: u64 = 256;

/// The square of `uv` in (256 µV)² units.
fn squared(uv: u32) -> i128 {
    let v = i128::from(u64::from(uv) / V_UNIT_UV);
    v.saturating_mul(v)
}

/// Least-squares sums of `(t, y)` points with `t` relative to the newest point.
#[derive(Debug, Default)]
struct Sums {
    n: i128,
    t: i128,
    y: i128,
    tt: i128,
    ty: i128,
    yy: i128,
}

impl Sums {
    fn add(&mut self, t: i128, y: i128) {
        self.n = self.n.saturating_add(1);
        self.t = self.t.saturating_add(t);
        self.y = self.y.saturating_add(y);
        self.tt = self.tt.saturating_add(t.saturating_mul(t));
        self.ty = self.ty.saturating_add(t.saturating_mul(y));
        self.yy = self.yy.saturating_add(y.saturating_mul(y));
    }

    /// Time from t = 0 until the fitted line falls to `level`; None when not
    /// falling or r² < 1/2.
    fn time_to(&self, level: i128) -> Option<u32> {
        let n = self.n;
        let sxx = n
            .checked_mul(self.tt)?
            .checked_sub(self.t.checked_mul(self.t)?)?;
        let sxy = n
            .checked_mul(self.ty)?
            .checked_sub(self.t.checked_mul(self.y)?)?;
        let syy = n
            .checked_mul(self.yy)?
            .checked_sub(self.y.checked_mul(self.y)?)?;
        if sxx <= 0 || sxy >= 0 {
            return None; // all points at one time, or not falling
        }
        // r² = sxy² / (sxx syy) >= 1/2, compared without division.
        if sxy.checked_mul(sxy)?.checked_mul(2)? < sxx.checked_mul(syy)? {
            return None;
        }
        // Fitted value at t = 0 minus the level, over the falling rate:
        // t = (sy sxx - st sxy - level n sxx) / (n (-sxy)).
        let above = self
            .y
            .checked_mul(sxx)?
            .checked_sub(self.t.checked_mul(sxy)?)?
            .checked_sub(level.checked_mul(n)?.checked_mul(sxx)?)?;
        if above <= 0 {
            return Some(0);
        }
        let ms = above.checked_div(n.checked_mul(sxy.checked_neg()?)?)?;
        Some(u32::try_from(ms).unwrap_or(u32::MAX))
    }
}

/// How a trend's values are fitted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Fit {
    /// A line through the squares of voltages (µV): linear in stored energy.
    Squared,
    /// A line through the values themselves.
    Linear,
}

impl Fit {
    fn apply(self, value: u32) -> i128 {
        match self {
            Fit::Squared => squared(value),
            Fit::Linear => i128::from(value),
        }
    }
}

/// A sliding window of `(time, value)` points, each the mean over a block of
/// at least `block_ms` (0: every pushed value is a point).
#[derive(Debug, Clone)]
pub struct InputTrend {
    fit: Fit,
    block_ms: u32,
    /// (time in ms, wrapping at 2^32, value): differences of times stay
    /// right over any window shorter than 24 days.
    points: HistoryBuf<(u32, u32), TREND_POINTS>,
    /// Start of the block being gathered (wrapping ms); meaningful while
    /// `block_count` is not zero.
    block_start_ms: u32,
    block_sum: u64,
    block_count: u32,
}

impl InputTrend {
    /// An empty window of blocks of `block_ms`, fitted as `fit` says.
    pub const fn new(fit: Fit, block_ms: u32) -> Self {
        InputTrend {
            fit,
            block_ms,
            points: HistoryBuf::new(),
            block_start_ms: 0,
            block_sum: 0,
            block_count: 0,
        }
    }

    /// Adds the mean value of an interval that ended at `t_ms`.
    pub fn push(&mut self, t_ms: u64, value: u32) {
        // Wrapping on purpose: only differences of times are used.
        #[allow(clippy::cast_possible_truncation)]
        let t_wrapped = t_ms as u32;
        if self.block_count == 0 {
            self.block_start_ms = t_wrapped;
        }
        self.block_sum = self.block_sum.saturating_add(u64::from(value));
        self.block_count = self.block_count.saturating_add(1);
        if t_wrapped.wrapping_sub(self.block_start_ms) < self.block_ms {
            return;
        }
        let mean = self
            .block_sum
            .checked_div(u64::from(self.block_count))
            .unwrap_or(0);
        self.points
            .write((t_wrapped, u32::try_from(mean).unwrap_or(u32::MAX)));
        self.block_sum = 0;
        self.block_count = 0;
    }

    /// Forgets every point (after a restart of the converter, say).
    pub fn clear(&mut self) {
        self.points.clear();
        self.block_sum = 0;
        self.block_count = 0;
    }

    /// Milliseconds from the newest point until the fitted line reaches
    /// `threshold`: Some(0) when it already has, None when not falling or too noisy.
    pub fn time_to_reach(&self, threshold: u32) -> Option<u32> {
        if self.points.len() < MIN_TREND_POINTS {
            return None;
        }
        let &(t_now, _) = self.points.recent()?;
        let mut sums = Sums::default();
        for &(t, v) in self.points.oldest_ordered() {
            // Time relative to the newest point (so "now" is t = 0), in ms.
            // Wrapping difference read as signed: at most 24 days back.
            #[allow(clippy::cast_possible_wrap)]
            let dt = t.wrapping_sub(t_now) as i32;
            sums.add(i128::from(dt), self.fit.apply(v));
        }
        sums.time_to(self.fit.apply(threshold))
    }
}

/// What the cutoff forecast looks at, per interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct InputSeen {
    /// Mean input voltage.
    pub input_uv: u32,
    /// Mean input power (energy drawn over the interval).
    pub input_nw: u32,
}

/// Time to input cutoff, the earliest answer of three trends: the input
/// voltage (fitted in V²) over the last reports and over the last half hour,
/// and the input power over the last half hour. While the converter draws all
/// a fading source can give (a sunset, a failing cell), the power falls
/// steadily long before the voltage does; the converter stops when the current
/// it can draw at the hold voltage is no more than its idle current.
#[derive(Debug, Clone)]
pub struct CutoffForecaster {
    short: InputTrend,
    long: InputTrend,
    power: InputTrend,
}

impl Default for CutoffForecaster {
    fn default() -> Self {
        Self::new()
    }
}

impl CutoffForecaster {
    /// Empty trends.
    pub const fn new() -> Self {
        CutoffForecaster {
            short: InputTrend::new(Fit::Squared, 0),
            long: InputTrend::new(Fit::Squared, LONG_TREND_BLOCK_MS),
            power: InputTrend::new(Fit::Linear, POWER_TREND_BLOCK_MS),
        }
    }

    /// Adds an interval's means.
    pub fn push(&mut self, t_ms: u64, seen: InputSeen) {
        self.short.push(t_ms, seen.input_uv);
        self.long.push(t_ms, seen.input_uv);
        self.power.push(t_ms, seen.input_nw);
    }

    /// Forgets everything (the converter restarted).
    pub fn clear(&mut self) {
        self.short.clear();
        self.long.clear();
        self.power.clear();
    }

    /// Milliseconds until the input is cut off at `hold_uv` (with the
    /// converter idle below `idle_na`), the earliest of the trends.
    pub fn time_to_cutoff(&self, hold_uv: u32, idle_na: u32) -> Option<u32> {
        // µV · nA = 1e-15 W = 1e-6 nW.
        let idle_nw = u64::from(hold_uv).saturating_mul(u64::from(idle_na)) / 1_000_000;
        [
            self.short.time_to_reach(hold_uv),
            self.long.time_to_reach(hold_uv),
            self.power
                .time_to_reach(u32::try_from(idle_nw).unwrap_or(u32::MAX)),
        ]
        .into_iter()
        .flatten()
        .min()
    }
}

/// Mean power of interval energies, exponentially weighted over a time
/// constant; until one time constant has passed, the plain mean since the start.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct PowerAverage {
    mean_nw: i64,
    weight_us: u64,
}

impl PowerAverage {
    /// No data yet.
    pub const fn new() -> Self {
        PowerAverage {
            mean_nw: 0,
            weight_us: 0,
        }
    }

    /// Adds `energy_nj` taken over `length_us`, averaging over `time_constant_ms`.
    pub fn push(&mut self, energy_nj: i64, length_us: u64, time_constant_ms: u32) {
        if length_us == 0 {
            return;
        }
        let tau_us = u64::from(time_constant_ms).saturating_mul(1000).max(1);
        self.weight_us = self.weight_us.saturating_add(length_us).min(tau_us);
        let power = i128::from(energy_nj)
            .saturating_mul(1_000_000)
            .checked_div(i128::from(length_us))
            .unwrap_or(0);
        let step = power
            .saturating_sub(i128::from(self.mean_nw))
            .saturating_mul(i128::from(length_us.min(self.weight_us)))
            .checked_div(i128::from(self.weight_us))
            .unwrap_or(0);
        let mean = i128::from(self.mean_nw).saturating_add(step);
        self.mean_nw = i64::try_from(mean).unwrap_or(if mean < 0 { i64::MIN } else { i64::MAX });
    }

    /// The average, nW (0 before any data).
    pub const fn mean_nw(&self) -> i64 {
        self.mean_nw
    }
}

/// Stored energy `C V² / 2` in nJ (µF µV² = 1e-18 J).
pub fn storage_level_nj(c_uf: u32, v_uv: u32) -> i64 {
    let v2 = u128::from(v_uv).saturating_mul(u128::from(v_uv));
    let nj = u128::from(c_uf).saturating_mul(v2) / 2_000_000_000;
    i64::try_from(nj).unwrap_or(i64::MAX)
}

/// Storage energy that a constant-current load can use between `v_uv` and
/// `min_uv`, counted at the present power: `C V (V - Vmin)`, nJ (negative
/// below the minimum).
///
/// A load drawing a constant current (a microcontroller on the storage
/// directly or behind a linear regulator; common practice) takes power in
/// proportion to the voltage, so from `C V dV/dt = -P V / V0` storage lasts
/// `t = C V0 (V0 - Vmin) / P0`: the same as this energy over the present
/// power. (`C (V² - Vmin²) / 2` over it would be a constant-power load's time,
/// shorter by `(V + Vmin) / 2V`.)
pub fn usable_at_constant_current_nj(c_uf: u32, v_uv: u32, min_uv: u32) -> i64 {
    let above = i128::from(v_uv).saturating_sub(i128::from(min_uv));
    let nj = i128::from(c_uf)
        .saturating_mul(i128::from(v_uv))
        .saturating_mul(above)
        / 1_000_000_000;
    i64::try_from(nj).unwrap_or(if nj < 0 { i64::MIN } else { i64::MAX })
}

/// Milliseconds that `c_uf` of storage at `from_uv` can supply `load_nw` before
/// falling to `to_uv`. None without storage or load; Some(0) when already below.
pub fn storage_runout_ms(c_uf: u32, from_uv: u32, to_uv: u32, load_nw: u64) -> Option<u32> {
    if c_uf == 0 || load_nw == 0 {
        return None;
    }
    if from_uv <= to_uv {
        return Some(0);
    }
    // µF * µV² = 1e-18 J; / nW = 1e-9 s; so ms = C V² / (2 P) / 1e6.
    let v1 = u128::from(from_uv).checked_mul(u128::from(from_uv))?;
    let v2 = u128::from(to_uv).checked_mul(u128::from(to_uv))?;
    let numerator = u128::from(c_uf).checked_mul(v1.checked_sub(v2)?)?;
    let ms = numerator.checked_div(u128::from(load_nw).checked_mul(2_000_000)?)?;
    Some(u32::try_from(ms).unwrap_or(u32::MAX))
}

/// What the brown-out forecast is computed from.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct DrainOutlook {
    /// Storage energy above the load's minimum voltage, nJ (negative: below it).
    pub usable_nj: i64,
    /// Load power averaged over its duty period, nW.
    pub load_nw: i64,
    /// Converter output less load power, nW (negative while storage drains).
    pub net_nw: i64,
    /// True while the converter delivers (its output still counts).
    pub converting: bool,
    /// Forecast time until the converter's input is cut off, while converting.
    pub input_cutoff_in_ms: Option<u32>,
}

/// Milliseconds at `drain_nw` until `energy_nj` is used up (None when not draining).
fn drain_ms(energy_nj: i64, drain_nw: i64) -> Option<u64> {
    if drain_nw <= 0 {
        return None;
    }
    // nJ / nW = s.
    let ms = i128::from(energy_nj.max(0))
        .saturating_mul(1000)
        .checked_div(i128::from(drain_nw))?;
    Some(u64::try_from(ms).unwrap_or(u64::MAX))
}

/// Time until the load browns out.
///
/// * Converter stopped: the load alone drains the storage (at least the averaged
///   load power, whatever the lagging net average still says).
/// * Converting with an input cutoff in sight: storage drains at the net rate
///   until the cutoff, then at the load's rate (the cause chain "input cut off,
///   then storage ran out").
/// * Converting with no cutoff in sight: the net drain, None while charging.
pub fn brownout_ms(o: &DrainOutlook) -> Option<u32> {
    if o.usable_nj <= 0 {
        return Some(0);
    }
    let net_drain = o.net_nw.saturating_neg();
    let ms = if !o.converting {
        drain_ms(o.usable_nj, net_drain.max(o.load_nw))?
    } else if let Some(cutoff_ms) = o.input_cutoff_in_ms {
        let until_cutoff_nj = i128::from(net_drain.max(0))
            .saturating_mul(i128::from(cutoff_ms))
            .checked_div(1000)
            .unwrap_or(0);
        let left = i128::from(o.usable_nj).saturating_sub(until_cutoff_nj);
        if left <= 0 {
            drain_ms(o.usable_nj, net_drain)?
        } else {
            let left = i64::try_from(left).unwrap_or(i64::MAX);
            u64::from(cutoff_ms).saturating_add(drain_ms(left, o.load_nw)?)
        }
    } else {
        drain_ms(o.usable_nj, net_drain)?
    };
    Some(u32::try_from(ms).unwrap_or(u32::MAX))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn capacitor_discharge_at_constant_power_gives_the_exact_time() {
        // A capacitor under constant power falls linearly in V² (any physics
        // text: C (V1² - V2²) = 2 P t). 1 F at 2 mW: V² falls 0.004 V²/s.
        // From 1.2 V, 0.7 V is reached after (1.44 - 0.49) / 0.004 = 237.5 s.
        let mut trend = InputTrend::new(Fit::Squared, 0);
        let v_at = |s: f64| (1.44 - 0.004 * (s - 15.0)).sqrt();
        for s in 0..16u64 {
            trend.push(s * 1000, (v_at(s as f64) * 1e6).round() as u32);
        }
        let got = trend.time_to_reach(700_000).unwrap();
        assert!((got as f64 - 237_500.0).abs() < 500.0, "{got}");
        assert_eq!(trend.time_to_reach(1_300_000), Some(0));
    }

    #[test]
    fn rising_flat_or_short_input_gives_none() {
        let mut rising = InputTrend::new(Fit::Squared, 0);
        let mut flat = InputTrend::new(Fit::Squared, 0);
        for s in 0..10u64 {
            rising.push(s * 1000, 800_000 + 500 * s as u32);
            flat.push(s * 1000, 800_000);
        }
        assert_eq!(rising.time_to_reach(700_000), None);
        assert_eq!(flat.time_to_reach(700_000), None);
        let mut short = InputTrend::new(Fit::Squared, 0);
        for s in 0..3u64 {
            short.push(s * 1000, 900_000 - 1000 * s as u32);
        }
        assert_eq!(short.time_to_reach(700_000), None);
    }

    #[test]
    fn noise_without_a_trend_gives_none() {
        // Alternating +-20 mV around a 1 uV/s fall: r² is tiny.
        let mut trend = InputTrend::new(Fit::Squared, 0);
        for s in 0..16u64 {
            let wobble: i64 = if s % 2 == 0 { 20_000 } else { -20_000 };
            trend.push(s * 1000, (900_000 - s as i64 + wobble) as u32);
        }
        assert_eq!(trend.time_to_reach(700_000), None);
    }

    #[test]
    fn blocks_average_their_intervals() {
        // Blocks of 2 min from 10 s intervals: one point per 13 pushes (the
        // block closes on the first interval at or past 120 s from its start).
        let mut trend = InputTrend::new(Fit::Squared, LONG_TREND_BLOCK_MS);
        for i in 0..13u64 {
            trend.push(i * 10_000, 1_000_000 + (i as u32) * 1000);
        }
        assert_eq!(trend.points.len(), 1);
        assert_eq!(trend.points.recent(), Some(&(120_000, 1_006_000)));
        // Times wrap at 2^32 ms (49.7 days); a window across the wrap still fits.
        let mut wrapped = InputTrend::new(Fit::Linear, 0);
        let start = u64::from(u32::MAX) - 35_000;
        for i in 0..8u64 {
            wrapped.push(start + i * 10_000, 800_000 - 1_000 * i as u32);
        }
        // Newest 793 mV, falling 0.1 mV/s: 700 mV in 930 s.
        assert_eq!(wrapped.time_to_reach(700_000), Some(930_000));
    }

    #[test]
    fn the_long_trend_sees_a_slow_fall_the_short_one_cannot() {
        // A 10 µV per 10 s fall, under ±1 mV of alternating noise: 16 short
        // points see mostly noise, 16 blocks of 2 min see the fall.
        let mut f = CutoffForecaster::new();
        let mut short_only = InputTrend::new(Fit::Squared, 0);
        for i in 0..400u64 {
            let wobble: i64 = if i % 2 == 0 { 1000 } else { -1000 };
            let v = (900_000 - 10 * i as i64 + wobble) as u32;
            f.push(
                i * 10_000,
                InputSeen {
                    input_uv: v,
                    input_nw: 100_000,
                },
            );
            short_only.push(i * 10_000, v);
        }
        assert_eq!(short_only.time_to_reach(700_000), None);
        let ms = f.time_to_cutoff(700_000, 2_000).unwrap();
        // The line through V: (0.896 - 0.7) V at 1 µV/s = 196,000 s. The V²
        // fit answers earlier (the safe side): (0.896² - 0.7²) / (2 · 0.896 · 1e-6)
        // = 174,560 s.
        assert!((173_000_000..=176_000_000).contains(&ms), "{ms}");
    }

    #[test]
    fn power_average_starts_as_a_plain_mean_then_forgets() {
        let mut avg = PowerAverage::new();
        // 1 mJ over 10 s = 100 µW, then nothing for 10 s: mean 50 µW.
        avg.push(1_000_000, 10_000_000, 600_000);
        assert_eq!(avg.mean_nw(), 100_000);
        avg.push(0, 10_000_000, 600_000);
        assert_eq!(avg.mean_nw(), 50_000);
        // A burst load: 6 mJ in one 10 s interval of each minute, 100 µW mean.
        let mut burst = PowerAverage::new();
        for i in 0..600 {
            let nj = if i % 6 == 0 { 6_000_000 } else { 0 };
            burst.push(nj, 10_000_000, LOAD_AVERAGE_MS);
        }
        let mean = burst.mean_nw();
        assert!((80_000..=120_000).contains(&mean), "{mean}");
    }

    #[test]
    fn storage_runout_worked_example() {
        // Any physics text: 10 F from 2.7 V to 0.9 V at 10 mW constant power:
        // t = C (V1² - V2²) / (2 P) = 10 * (7.29 - 0.81) / 0.02 = 3240 s.
        assert_eq!(
            storage_runout_ms(10_000_000, 2_700_000, 900_000, 10_000_000),
            Some(3_240_000)
        );
        assert_eq!(storage_runout_ms(0, 2_700_000, 900_000, 10), None);
        assert_eq!(storage_runout_ms(10, 900_000, 2_700_000, 10), Some(0));
        // Any physics text: 10 F at 2.7 V holds 36.45 J; above 0.9 V, 32.4 J.
        let usable =
            storage_level_nj(10_000_000, 2_700_000) - storage_level_nj(10_000_000, 900_000);
        assert_eq!(usable, 32_400_000_000);
    }

    #[test]
    fn constant_current_run_out_worked_example() {
        // Any physics text: 10 F from 2.7 V to 0.9 V at a constant 10 mA lasts
        // t = C dV / I = 1800 s. At 2.7 V the load takes 27 mW.
        let usable = usable_at_constant_current_nj(10_000_000, 2_700_000, 900_000);
        assert_eq!(usable, 48_600_000_000);
        let stopped = DrainOutlook {
            usable_nj: usable,
            load_nw: 27_000_000,
            net_nw: -27_000_000,
            converting: false,
            input_cutoff_in_ms: None,
        };
        assert_eq!(brownout_ms(&stopped), Some(1_800_000));
        assert!(usable_at_constant_current_nj(10, 800_000, 900_000) < 0);
    }

    #[test]
    fn brownout_follows_the_cause_chain() {
        // 32.4 J usable (the 10 F example), load 10 mW: 3240 s with the converter stopped,
        // even while a lagging net average still shows a small drain.
        let stopped = DrainOutlook {
            usable_nj: 32_400_000_000,
            load_nw: 10_000_000,
            net_nw: -1_000_000,
            converting: false,
            input_cutoff_in_ms: None,
        };
        assert_eq!(brownout_ms(&stopped), Some(3_240_000));
        // Charging with no cutoff in sight: no brown-out.
        let charging = DrainOutlook {
            net_nw: 5_000_000,
            converting: true,
            ..stopped
        };
        assert_eq!(brownout_ms(&charging), None);
        // Charging, but the input is cut off in 600 s: then 3240 s on storage.
        let sunset = DrainOutlook {
            input_cutoff_in_ms: Some(600_000),
            ..charging
        };
        assert_eq!(brownout_ms(&sunset), Some(3_840_000));
        // Draining 5 mW net until a cutoff in 1000 s (5 J), then 27.4 J at 10 mW.
        let heavy = DrainOutlook {
            net_nw: -5_000_000,
            input_cutoff_in_ms: Some(1_000_000),
            ..charging
        };
        assert_eq!(brownout_ms(&heavy), Some(1_000_000 + 2_740_000));
        // Draining so fast that storage is gone before the cutoff.
        let heavier = DrainOutlook {
            net_nw: -20_000_000,
            input_cutoff_in_ms: Some(2_000_000),
            ..charging
        };
        assert_eq!(brownout_ms(&heavier), Some(1_620_000));
        // Already below the load's minimum.
        let empty = DrainOutlook {
            usable_nj: -5,
            ..stopped
        };
        assert_eq!(brownout_ms(&empty), Some(0));
    }
}
