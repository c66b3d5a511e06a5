//! Forecasts of when the converter's input will be cut off, and the averages
//! the brown-out forecast ([`crate::brownout`]) is computed from.
//!
//! * [`InputTrend`]: an ordinary least-squares line through the *square* of the
//!   input voltage over a window of points, each the mean of one block of time.
//!   A capacitive source under constant power falls linearly in V², so the
//!   fit is exact there; for the accelerating falls of a sunset or a cell's
//!   knee it answers earlier than a line through V would (the safe side). No
//!   forecast when flat, rising, or too noisy (r² below one half).
//! * [`FadeTrend`]: the input power and voltage together; a source whose power
//!   fades to nothing (a sunset) is followed along a power law in the time
//!   left, its voltage along the diode law's logarithm ([`Trend::fade_time_to`]).
//! * [`HeldDip`]: how far the input falls below its interval mean, held, so
//!   the trends of means are read down to where a comparator on samples trips.
//! * [`CutoffForecaster`]: the input voltage's trend over the last ten minutes
//!   and over the last half hour, and the fading power's over the last ten
//!   minutes, answering with the earliest; the long one sees a slow decline
//!   before the recent one can tell it from noise.
//! * [`TimeAverage`]: the mean of a current or power held over intervals,
//!   exponentially weighted (EWMA) over a time constant, so a load that draws
//!   in short bursts is averaged over many of its periods.

use gleaner_protocol::ConverterModel;
use heapless::HistoryBuf;

use crate::wide::Wide;

/// Points kept by each trend.
pub const TREND_POINTS: usize = 16;
/// Fewest points for a forecast.
pub const MIN_TREND_POINTS: usize = 4;
/// Block length of the long trend: 16 blocks of 2 minutes span 32 minutes.
pub const LONG_TREND_BLOCK_MS: u32 = 120_000;
/// Block length of the recent trend: 16 blocks of 40 s span 10.7 minutes.
pub const RECENT_TREND_BLOCK_MS: u32 = 40_000;
/// Time constant of the load's current average (10 minutes): long enough to
/// span many periods of a duty-cycled load (a burst a minute gives ten), short
/// enough to follow a load that is shed.
pub const LOAD_AVERAGE_MS: u32 = 600_000;
/// Time constant of the converter output's power average (2 minutes): the
/// harvest changes with clouds and sunset, so it is followed more closely.
pub const HARVEST_AVERAGE_MS: u32 = 120_000;
/// Fewest points for the logarithmic decline (a curvature needs more than a line).
pub const MIN_LOG_DECLINE_POINTS: usize = 6;
/// Voltages enter the logarithmic-decline fit in units of 10 µV, times in seconds.
const LOG_V_UNIT_UV: u32 = 10;
/// One in Q16 fixed point.
const Q16: i128 = 1 << 16;

/// Sums for a least-squares parabola `v = a + b t + c t²` (t relative to the
/// newest point, which is t = 0).
#[derive(Debug, Default)]
struct QuadSums {
    n: i128,
    t: i128,
    t2: i128,
    t3: i128,
    t4: i128,
    v: i128,
    tv: i128,
    t2v: i128,
}

impl QuadSums {
    fn add(&mut self, t: i128, v: i128) {
        let t2 = t.sat_mul(t);
        self.n = self.n.sat_add(1);
        self.t = self.t.sat_add(t);
        self.t2 = self.t2.sat_add(t2);
        self.t3 = self.t3.sat_add(t2.sat_mul(t));
        self.t4 = self.t4.sat_add(t2.sat_mul(t2));
        self.v = self.v.sat_add(v);
        self.tv = self.tv.sat_add(t.sat_mul(v));
        self.t2v = self.t2v.sat_add(t2.sat_mul(v));
    }

    /// Determinant of the 3x3 matrix with rows `r`.
    fn det(r: [[i128; 3]; 3]) -> Option<i128> {
        let [[a, b, c], [d, e, f], [g, h, i]] = r;
        let m1 = e.wide_mul(i)?.wide_sub(f.wide_mul(h)?)?;
        let m2 = d.wide_mul(i)?.wide_sub(f.wide_mul(g)?)?;
        let m3 = d.wide_mul(h)?.wide_sub(e.wide_mul(g)?)?;
        a.wide_mul(m1)?
            .wide_sub(b.wide_mul(m2)?)?
            .wide_add(c.wide_mul(m3)?)
    }

    /// Cramer's rule: the determinant of the normal equations and the three
    /// numerators, so that `a = d0 / d`, `b = d1 / d`, `c = d2 / d`.
    fn solve(&self) -> Option<(i128, [i128; 3])> {
        let m = [
            [self.n, self.t, self.t2],
            [self.t, self.t2, self.t3],
            [self.t2, self.t3, self.t4],
        ];
        let y = [self.v, self.tv, self.t2v];
        let d = Self::det(m)?;
        let mut numerators = [0i128; 3];
        for (k, out) in numerators.iter_mut().enumerate() {
            let mut mk = m;
            for (row, &yi) in mk.iter_mut().zip(&y) {
                *row.get_mut(k)? = yi;
            }
            *out = Self::det(mk)?;
        }
        Some((d, numerators))
    }
}

/// `e^(-x)` for `x` in Q16, in Q16: `2^(-x log2 e)`, the fraction by its
/// Taylor polynomial to the fifth power (error below 2e-4).
fn exp_neg_q16(x_q16: i128) -> i128 {
    if x_q16 <= 0 {
        return Q16;
    }
    // e^-23 is below 2^-32: nothing is left of it in Q16. The rest in 64 bits
    // (small on a 32-bit core).
    let Ok(x) = i64::try_from(x_q16) else {
        return 0;
    };
    if x >= 23 << 16 {
        return 0;
    }
    // log2(e) = 1.442695 in Q16.
    let y = x.saturating_mul(94_548) >> 16;
    let whole = y >> 16;
    let u = y & 0xFFFF; // fraction of a halving, Q16
                        // 2^(-u) = e^(-u ln2): 1 - k u + (k u)²/2 - (k u)³/6 + (k u)⁴/24, k u in Q16.
    let ku = u.saturating_mul(45_426) >> 16; // ln 2 in Q16
    let ku2 = ku.saturating_mul(ku) >> 16;
    let ku3 = ku2.saturating_mul(ku) >> 16;
    let ku4 = ku3.saturating_mul(ku) >> 16;
    let ku5 = ku4.saturating_mul(ku) >> 16;
    let frac = (1i64 << 16)
        .saturating_sub(ku)
        .saturating_add(ku2 / 2)
        .saturating_sub(ku3 / 6)
        .saturating_add(ku4 / 24)
        .saturating_sub(ku5 / 120);
    i128::from(frac >> whole)
}

/// Time until a value falling along a logarithmic curve reaches `level`.
///
/// A solar cell's voltage (and a converter input held at a fraction of it)
/// goes as `V = c + b ln(G)`; towards sunset the light `G` falls about
/// linearly, so `V(t) = V0 + b ln(1 - t / τ)`: a fall that speeds up. From a
/// parabola fitted to the window, slope `V'` and curvature `V''` (both
/// negative) give `τ = V' / V''` and `b = -V' τ`, and the level is reached at
/// `t = τ (1 - e^(-(V0 - level) / b))`. A capacitor emptied at constant power
/// (`V² = A - B t`) gives nearly the same time by this formula, so it serves
/// there too. None when not falling, or not speeding up (a line is the
/// other trends' case).
fn log_decline_ms(sums: &QuadSums, level: i128) -> Option<u32> {
    let (d, [d0, d1, d2]) = sums.solve()?;
    if d <= 0 || d1 >= 0 || d2 >= 0 {
        return None;
    }
    // τ = V'/V'' = b / (2 c) = d1 / (2 d2), seconds.
    let tau_s = d1.wide_div(d2.wide_mul(2)?)?;
    // b_log = -V' τ, in value units.
    let slope_q16 = d1.wide_mul(Q16)?.wide_div(d)?;
    let b_log = slope_q16.checked_neg()?.wide_mul(tau_s)? >> 16;
    let v0 = d0.wide_div(d)?;
    if v0 <= level {
        return Some(0);
    }
    if b_log <= 0 {
        return None;
    }
    let x_q16 = v0.wide_sub(level)?.wide_mul(Q16)?.wide_div(b_log)?;
    let remaining_q16 = Q16.wide_sub(exp_neg_q16(x_q16))?;
    let ms = tau_s.wide_mul(1000)?.wide_mul(remaining_q16)? >> 16;
    u32::try_from(ms).ok()
}

/// Input voltages are fitted in units of 256 µV, squared, so the sums of a
/// window stay well inside 128 bits.
const V_UNIT_UV: u64 = 256;

/// The square of `uv` in (256 µV)² units.
fn squared(uv: u32) -> i128 {
    let v = i128::from(u64::from(uv) / V_UNIT_UV);
    v.sat_mul(v)
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
        self.n = self.n.sat_add(1);
        self.t = self.t.sat_add(t);
        self.y = self.y.sat_add(y);
        self.tt = self.tt.sat_add(t.sat_mul(t));
        self.ty = self.ty.sat_add(t.sat_mul(y));
        self.yy = self.yy.sat_add(y.sat_mul(y));
    }

    /// The centred sums `(sxx, sxy)`: n Σt² - (Σt)² and n Σty - Σt Σy.
    fn centred(&self) -> Option<(i128, i128)> {
        let n = self.n;
        let sxx = n.wide_mul(self.tt)?.wide_sub(self.t.wide_mul(self.t)?)?;
        let sxy = n.wide_mul(self.ty)?.wide_sub(self.t.wide_mul(self.y)?)?;
        Some((sxx, sxy))
    }

    /// The fitted line's value at t = 0 and its slope in Q16, per unit of t.
    fn line(&self) -> Option<(i128, i128)> {
        let (sxx, sxy) = self.centred()?;
        if sxx <= 0 {
            return None;
        }
        let slope_q16 = sxy.wide_mul(Q16)?.wide_div(sxx)?;
        let at_zero = self
            .y
            .wide_mul(sxx)?
            .wide_sub(self.t.wide_mul(sxy)?)?
            .wide_div(self.n.wide_mul(sxx)?)?;
        Some((at_zero, slope_q16))
    }

    /// The centred sums `(sxx, sxy)` of a line that falls with r² >= 1/2.
    fn clear_fall(&self) -> Option<(i128, i128)> {
        let (sxx, sxy) = self.centred()?;
        let syy = self
            .n
            .wide_mul(self.yy)?
            .wide_sub(self.y.wide_mul(self.y)?)?;
        if sxx <= 0 || sxy >= 0 {
            return None; // all points at one time, or not falling
        }
        // r² = sxy² / (sxx syy) >= 1/2, compared without division.
        if sxy.wide_mul(sxy)?.wide_mul(2)? < sxx.wide_mul(syy)? {
            return None;
        }
        Some((sxx, sxy))
    }

    /// True when the fitted line falls with r² >= 1/2.
    fn falls_clearly(&self) -> bool {
        self.clear_fall().is_some()
    }

    /// Time from t = 0 until the fitted line falls to `level`; None when not
    /// falling or r² < 1/2.
    fn time_to(&self, level: i128) -> Option<u32> {
        let n = self.n;
        let (sxx, sxy) = self.clear_fall()?;
        // Fitted value at t = 0 minus the level, over the falling rate:
        // t = (sy sxx - st sxy - level n sxx) / (n (-sxy)).
        let above = self
            .y
            .wide_mul(sxx)?
            .wide_sub(self.t.wide_mul(sxy)?)?
            .wide_sub(level.wide_mul(n)?.wide_mul(sxx)?)?;
        if above <= 0 {
            return Some(0);
        }
        let ms = above.wide_div(n.wide_mul(sxy.checked_neg()?)?)?;
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

/// A sliding window of `(time, values)` points, each the mean over a block of
/// at least `block_ms` (0: every pushed value is a point). The first value
/// is the one fitted by [`Trend::time_to_reach`] and [`Trend::log_decline_to`].
#[derive(Debug, Clone)]
pub struct Trend<const W: usize> {
    fit: Fit,
    block_ms: u32,
    /// (time in ms, wrapping at 2^32, values): differences of times stay
    /// right over any window shorter than 24 days.
    points: HistoryBuf<(u32, [u32; W]), TREND_POINTS>,
    /// Start of the block being gathered (wrapping ms); meaningful while
    /// `block_count` is not zero.
    block_start_ms: u32,
    /// Sum of the block's times after its start, ms: a point stands at the
    /// mean time of its values, not at the block's end.
    block_time_sum: u32,
    block_sum: [u64; W],
    /// Intervals in the block (saturating: a block of a few minutes holds
    /// far fewer than 65,535).
    block_count: u16,
    /// Intervals in the block that knew each value.
    value_counts: [u16; W],
}

/// A point's value that no interval of its block knew.
pub const UNKNOWN: u32 = u32::MAX;

/// A trend of one value.
pub type InputTrend = Trend<1>;

/// A trend of the input voltage (µV, fitted) and the input power (nW) together.
pub type FadeTrend = Trend<2>;

impl InputTrend {
    /// Adds the mean value of an interval centred on `t_ms`.
    pub fn push(&mut self, t_ms: u64, value: u32) {
        self.push_values(t_ms, [value]);
    }
}

impl<const W: usize> Trend<W> {
    /// An empty window of blocks of `block_ms`, fitted as `fit` says.
    pub const fn new(fit: Fit, block_ms: u32) -> Self {
        Trend {
            fit,
            block_ms,
            points: HistoryBuf::new(),
            block_start_ms: 0,
            block_time_sum: 0,
            block_sum: [0; W],
            block_count: 0,
            value_counts: [0; W],
        }
    }

    /// Adds the mean values of an interval centred on `t_ms`; [`UNKNOWN`]
    /// for a value the interval does not know (the block's point averages
    /// the intervals that knew it, or is unknown itself).
    pub fn push_values(&mut self, t_ms: u64, values: [u32; W]) {
        // Wrapping on purpose: only differences of times are used.
        #[allow(clippy::cast_possible_truncation)]
        let t_wrapped = t_ms as u32;
        if self.block_count == 0 {
            self.block_start_ms = t_wrapped;
        }
        let offset = t_wrapped.wrapping_sub(self.block_start_ms);
        self.block_time_sum = self.block_time_sum.saturating_add(offset);
        let known = self.block_sum.iter_mut().zip(self.value_counts.iter_mut());
        for ((sum, count), value) in known.zip(values) {
            if value != UNKNOWN {
                *sum = sum.saturating_add(u64::from(value));
                *count = count.saturating_add(1);
            }
        }
        self.block_count = self.block_count.saturating_add(1);
        if offset < self.block_ms {
            return;
        }
        let mut means = [UNKNOWN; W];
        for ((mean, &sum), &count) in means
            .iter_mut()
            .zip(&self.block_sum)
            .zip(&self.value_counts)
        {
            if let Some(m) = sum.checked_div(u64::from(count)) {
                *mean = u32::try_from(m).unwrap_or(UNKNOWN).min(UNKNOWN - 1);
            }
        }
        let mean_offset = self
            .block_time_sum
            .checked_div(u32::from(self.block_count))
            .unwrap_or(0);
        let t_point = self.block_start_ms.wrapping_add(mean_offset);
        self.points.write((t_point, means));
        self.block_time_sum = 0;
        self.block_sum = [0; W];
        self.block_count = 0;
        self.value_counts = [0; W];
    }

    /// Forgets every point (after a restart of the converter, say).
    pub fn clear(&mut self) {
        self.points.clear();
        self.block_time_sum = 0;
        self.block_sum = [0; W];
        self.block_count = 0;
        self.value_counts = [0; W];
    }

    /// Milliseconds from the newest point to `now_ms` (wrapping times).
    fn age_ms(&self, now_ms: u64) -> u32 {
        #[allow(clippy::cast_possible_truncation)]
        let now = now_ms as u32;
        self.points
            .recent()
            .map_or(0, |&(t, _)| now.wrapping_sub(t))
    }

    /// The points oldest first, each as (ms relative to the newest point, so
    /// "now" is 0 and the rest negative; values). The wrapping difference is
    /// read as signed: at most 24 days back.
    fn since_newest(&self) -> impl Iterator<Item = (i32, [u32; W])> + '_ {
        let t_now = self.points.recent().map_or(0, |&(t, _)| t);
        #[allow(clippy::cast_possible_wrap)]
        self.points
            .oldest_ordered()
            .map(move |&(t, v)| (t.wrapping_sub(t_now) as i32, v))
    }

    /// The first value of every point, as `(ms since newest, value)`.
    fn firsts(&self) -> impl Iterator<Item = (i32, u32)> + '_ {
        self.since_newest()
            .map(|(t, v)| (t, v.first().copied().unwrap_or(0)))
    }

    /// Milliseconds from the newest point until a logarithmic decline fitted
    /// to the values reaches `threshold`: `V0 + b ln(1 - t / τ)`, read from the
    /// window's slope and curvature (the fall of a solar input towards sunset).
    pub fn log_decline_to(&self, threshold: u32) -> Option<u32> {
        if self.points.len() < MIN_LOG_DECLINE_POINTS {
            return None;
        }
        let mut sums = QuadSums::default();
        for (dt_ms, v) in self.firsts() {
            sums.add(i128::from(dt_ms / 1000), i128::from(v / LOG_V_UNIT_UV));
        }
        log_decline_ms(&sums, i128::from(threshold / LOG_V_UNIT_UV))
    }

    /// Milliseconds from the newest point until the fitted line reaches
    /// `threshold`: Some(0) when it already has, None when not falling or too noisy.
    pub fn time_to_reach(&self, threshold: u32) -> Option<u32> {
        if self.points.len() < MIN_TREND_POINTS {
            return None;
        }
        let mut sums = Sums::default();
        for (dt_ms, v) in self.firsts() {
            sums.add(i128::from(dt_ms), self.fit.apply(v));
        }
        sums.time_to(self.fit.apply(threshold))
    }
}

impl FadeTrend {
    /// Milliseconds from the newest point until the input voltage reaches
    /// `threshold` while the source's power fades away: a power law in the
    /// time left for the power, the diode law's logarithm for the voltage.
    /// Points whose power is [`UNKNOWN`] count for the voltage only.
    pub fn fade_time_to(&self, threshold: u32) -> Option<u32> {
        let (mut voltage, mut power_line, mut power) =
            (Sums::default(), Sums::default(), QuadSums::default());
        for (dt_ms, [v, p]) in self.since_newest() {
            let t_s = i128::from(dt_ms / 1000);
            voltage.add(t_s, i128::from(v));
            if p != UNKNOWN {
                power_line.add(t_s, i128::from(p));
                power.add(t_s, i128::from(p));
            }
        }
        if power.n < MIN_LOG_DECLINE_POINTS as i128 || !power_line.falls_clearly() {
            return None; // a flat or noisy power is no fading source
        }
        fade_ms(&voltage, &power, i128::from(threshold))
    }
}

/// Time until the input voltage reaches `level` as a source fades out.
///
/// A harvester whose light or heat runs out (a sunset) gives a power that
/// falls to nothing as a power of the time left, `P = A (T - t)^k`; then
/// `T - t = k P / -P'` and, from the curvature, `k = 1 / (1 - P P'' / P'²)`
/// (a line is k = 1; a fall that slows as it nears nothing, k > 1). A cell's
/// voltage goes with the logarithm of its power (the diode law), so the
/// voltage is a logarithmic decline `V0 + B ln(1 - t / τ)` with `τ = T - t`
/// and `B = -V' τ`, and reaches the level at `τ (1 - e^(-(V0 - level) / B))`.
/// The power is fitted by a parabola and the voltage by a line, `t` in
/// seconds. None unless both fall (the caller checks that the power's fall
/// is clear of noise).
fn fade_ms(voltage: &Sums, power: &QuadSums, level: i128) -> Option<u32> {
    const K_MIN_Q16: i128 = Q16 / 2;
    const K_MAX_Q16: i128 = 4 * Q16;
    let (d, [d0, d1, d2]) = power.solve()?;
    if d <= 0 || d0 <= 0 || d1 >= 0 {
        return None;
    }
    let p0 = d0.wide_div(d)?; // nW
    let p1_q16 = d1.wide_mul(Q16)?.wide_div(d)?; // nW/s, Q16
    let p2_q32 = d2.wide_mul(2 << 32)?.wide_div(d)?; // nW/s², Q32
    if p1_q16 >= 0 {
        return None;
    }
    // r = P P'' / P'² in Q16 (the 2^32 of P'' cancels the (2^16)² of P'²).
    let r_q16 = p0
        .wide_mul(p2_q32)?
        .wide_mul(Q16)?
        .wide_div(p1_q16.wide_mul(p1_q16)?)?;
    let k_q16 = if r_q16 >= Q16 {
        K_MAX_Q16
    } else {
        Q16.wide_mul(Q16)?
            .wide_div(Q16.wide_sub(r_q16)?)?
            .clamp(K_MIN_Q16, K_MAX_Q16)
    };
    let tau_ms = k_q16
        .wide_mul(p0)?
        .wide_mul(1000)?
        .wide_div(p1_q16.checked_neg()?)?;
    let (v0, slope_q16) = voltage.line()?;
    if slope_q16 >= 0 {
        return None;
    }
    if v0 <= level {
        return Some(0);
    }
    // B = -V' τ, µV.
    let b = slope_q16
        .checked_neg()?
        .wide_mul(tau_ms)?
        .wide_div(1000 * Q16)?;
    if b <= 0 {
        return None;
    }
    let x_q16 = v0.wide_sub(level)?.wide_mul(Q16)?.wide_div(b)?;
    let ms = tau_ms.wide_mul(Q16.wide_sub(exp_neg_q16(x_q16))?)? >> 16;
    u32::try_from(ms).ok()
}

/// What the cutoff forecast looks at, per interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct InputSeen {
    /// Mean input voltage.
    pub input_uv: u32,
    /// Lowest input voltage of the interval.
    pub input_min_uv: u32,
    /// Highest input voltage of the interval.
    pub input_max_uv: u32,
    /// Highest input current of the interval.
    pub input_max_na: u32,
    /// Mean input power (energy drawn over the interval).
    pub input_nw: u32,
    /// Length of the interval, µs.
    pub length_us: u64,
    /// Mean output voltage (a regulated output sits at its ceiling while the
    /// converter throttles its input).
    pub output_uv: u32,
}

/// The output counts as held at its regulated ceiling within this share of
/// it, ppm (0.1 %: well above the noise of an interval mean, below the fall
/// of a storage that the converter no longer keeps full).
pub const REGULATION_BAND_PPM: u32 = 1_000;

/// True when a regulated output at `output_uv` is held at its ceiling (the
/// converter throttles its input).
pub fn output_held(output_uv: u32, ceiling_uv: u32) -> bool {
    let band = u64::from(ceiling_uv)
        .saturating_mul(u64::from(REGULATION_BAND_PPM))
        .checked_div(PPM)
        .unwrap_or(0);
    u64::from(output_uv).saturating_add(band) >= u64::from(ceiling_uv)
}

/// Parts per million.
const PPM: u64 = 1_000_000;

/// True when an interval's lowest input sample fell at least halfway from
/// its highest towards `fraction_ppm` of it: a load burst asked more than the
/// source gives, and the converter worked at its full-power point for a moment.
fn reached_full_power(seen: &InputSeen, fraction_ppm: u32) -> bool {
    let halfway_ppm = PPM.saturating_add(u64::from(fraction_ppm)) / 2;
    u64::from(seen.input_min_uv).saturating_mul(PPM)
        <= u64::from(seen.input_max_uv).saturating_mul(halfway_ppm)
}

/// The input voltage the converter's stop comparator watches, estimated from
/// an interval's input.
///
/// A converter that holds its input at a fraction of the open-circuit voltage
/// works at that point while it converts at full power, and the node measures
/// it (the interval's mean). Once a regulated output is full (`output_held`),
/// the converter draws only what the load takes, in bursts at that point (its
/// comparator still looks there) with its input resting near open circuit in
/// between. A load burst that asks more than the source gives shows the point
/// itself (the interval's lowest sample); without one, the highest sample
/// reads about the open-circuit voltage, a little under it for a soft source
/// (`softness_ppm`, learned by [`Softness`]), and the point is the fraction of it.
pub fn watched_input_uv(
    seen: &InputSeen,
    converter: &ConverterModel,
    output_held: bool,
    softness_ppm: u32,
) -> u32 {
    let fraction = converter.mppt_fraction_ppm;
    if fraction == 0 || !converter.output_regulated {
        return seen.input_uv;
    }
    if reached_full_power(seen, fraction) {
        return seen.input_min_uv;
    }
    if !output_held {
        return seen.input_uv;
    }
    let watched = u64::from(seen.input_max_uv)
        .saturating_mul(u64::from(fraction))
        .saturating_mul(u64::from(softness_ppm))
        .checked_div(PPM.saturating_mul(PPM))
        .unwrap_or(0);
    u32::try_from(watched).unwrap_or(u32::MAX)
}

/// The power the source could give at the converter's full-power point, nW,
/// or [`UNKNOWN`]: the interval's mean while the converter works at full
/// power; the lowest voltage times the highest current when a load burst
/// reached full power while the output was held (a fractional-MPPT converter
/// whose output is regulated); unknown between such bursts (the converter
/// takes only what the load needs).
pub fn available_nw(seen: &InputSeen, converter: &ConverterModel, output_held: bool) -> u32 {
    let fraction = converter.mppt_fraction_ppm;
    if fraction == 0 || !converter.output_regulated {
        return seen.input_nw;
    }
    if reached_full_power(seen, fraction) {
        // µV · nA = 1e-15 W = 1e-6 nW.
        let nw = u64::from(seen.input_min_uv)
            .saturating_mul(u64::from(seen.input_max_na))
            .checked_div(PPM)
            .unwrap_or(0);
        return u32::try_from(nw).unwrap_or(UNKNOWN - 1).min(UNKNOWN - 1);
    }
    if output_held {
        UNKNOWN
    } else {
        seen.input_nw
    }
}

/// How far a throttled input sits under the open-circuit voltage, learned
/// from the load's bursts: when one asks more than the source gives, the
/// converter works at its full-power point for a moment and the interval's
/// lowest sample reads the watched point itself, so
/// `lowest / (fraction × highest)` is open circuit over the throttled
/// reading. A burst that did not quite reach full power reads more than the
/// truth, so the smallest ratio since the converter started is kept
/// (slightly small when a cloud passed within an interval: the safe side).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Softness {
    /// 0 until learned.
    ratio_ppm: u32,
}

impl Softness {
    /// Nothing learned.
    pub const fn new() -> Self {
        Softness { ratio_ppm: 0 }
    }

    /// The ratio, ppm; one (the throttled reading taken for open circuit)
    /// until learned.
    pub const fn ratio_ppm(&self) -> u32 {
        if self.ratio_ppm == 0 {
            1_000_000
        } else {
            self.ratio_ppm
        }
    }

    /// Learns from an interval with the output held (`fraction_ppm` of the
    /// converter) when a burst in it reached full power.
    pub fn push(&mut self, seen: &InputSeen, fraction_ppm: u32) {
        if !reached_full_power(seen, fraction_ppm) {
            return;
        }
        let reading = u64::from(seen.input_max_uv).saturating_mul(u64::from(fraction_ppm));
        let Some(ratio) = u64::from(seen.input_min_uv)
            .saturating_mul(PPM)
            .saturating_mul(PPM)
            .checked_div(reading)
        else {
            return;
        };
        let ratio = u32::try_from(ratio.max(PPM)).unwrap_or(u32::MAX);
        self.ratio_ppm = if self.ratio_ppm == 0 {
            ratio
        } else {
            self.ratio_ppm.min(ratio)
        };
    }

    /// Forgets what was learned.
    pub fn clear(&mut self) {
        *self = Softness::new();
    }
}

/// Time constant over which a held dip is forgotten (10 minutes: several of a
/// duty-cycled load's bursts, so the deepest of them is kept between them).
pub const DIP_HOLD_MS: u32 = 600_000;

/// The deepest recent fall of a value below its interval mean (the input
/// pulled down when a load burst makes the converter work at full power; the
/// storage at the bottom of a burst), held and forgotten exponentially over
/// [`DIP_HOLD_MS`]. A comparator trips on a sample, not on a mean, so a level
/// is reached when the mean is this far above it.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct HeldDip {
    dip_uv: u32,
}

impl HeldDip {
    /// Nothing seen yet.
    pub const fn new() -> Self {
        HeldDip { dip_uv: 0 }
    }

    /// Adds an interval of `length_us` whose lowest sample was `dip_uv` below
    /// its mean.
    pub fn push(&mut self, dip_uv: u32, length_us: u64) {
        let hold_us = u64::from(DIP_HOLD_MS).saturating_mul(1000);
        let elapsed = length_us.min(hold_us);
        let forgotten = u64::from(self.dip_uv)
            .saturating_mul(elapsed)
            .checked_div(hold_us)
            .unwrap_or(0);
        self.dip_uv = self
            .dip_uv
            .saturating_sub(u32::try_from(forgotten).unwrap_or(u32::MAX))
            .max(dip_uv);
    }

    /// Forgets everything.
    pub fn clear(&mut self) {
        *self = HeldDip::new();
    }

    /// The held dip, µV.
    pub const fn dip_uv(&self) -> u32 {
        self.dip_uv
    }
}

/// Time to input cutoff, the earliest answer of two trends: the input
/// voltage fitted in V² over the last ten minutes and over the last half hour
/// (there also along a logarithmic decline), and the input power with the
/// voltage over the last ten minutes. While the converter draws all a fading source
/// can give (a sunset), the power tells how long the source has left and the
/// voltage follows it down ([`Trend::fade_time_to`]).
///
/// The hold comparator trips on the first sample under the hold voltage, not on
/// an interval's mean, so the trends of the mean are read down to the hold
/// voltage plus the input's deepest recent dip below its mean within an
/// interval ([`HeldDip`]: a load burst that makes the converter work at full
/// power pulls its input down to where the comparator looks).
#[derive(Debug, Clone)]
pub struct CutoffForecaster {
    /// Input voltage and power over the last ten minutes.
    recent: FadeTrend,
    /// Input voltage over the last half hour.
    long: InputTrend,
    /// How far the input falls below the watched point within an interval, held.
    dip: HeldDip,
    /// Highest interval mean of the output since the converter started, µV.
    output_ceiling_uv: u32,
    /// How far the throttled input sits under open circuit.
    softness: Softness,
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
            recent: FadeTrend::new(Fit::Squared, RECENT_TREND_BLOCK_MS),
            long: InputTrend::new(Fit::Squared, LONG_TREND_BLOCK_MS),
            dip: HeldDip::new(),
            output_ceiling_uv: 0,
            softness: Softness::new(),
        }
    }

    /// Adds the means of an interval centred on `t_ms`, read as `converter` says.
    pub fn push(&mut self, t_ms: u64, seen: InputSeen, converter: &ConverterModel) {
        self.output_ceiling_uv = self.output_ceiling_uv.max(seen.output_uv);
        let held = output_held(seen.output_uv, self.output_ceiling_uv);
        if held && converter.output_regulated && converter.mppt_fraction_ppm > 0 {
            self.softness.push(&seen, converter.mppt_fraction_ppm);
        }
        let watched = watched_input_uv(&seen, converter, held, self.softness.ratio_ppm());
        let available = available_nw(&seen, converter, held);
        self.recent.push_values(t_ms, [watched, available]);
        self.long.push(t_ms, watched);
        self.dip
            .push(watched.saturating_sub(seen.input_min_uv), seen.length_us);
    }

    /// Forgets everything (the converter restarted).
    pub fn clear(&mut self) {
        self.recent.clear();
        self.long.clear();
        self.dip.clear();
        self.output_ceiling_uv = 0;
        self.softness.clear();
    }

    /// Milliseconds from `now_ms` until the input is cut off at `hold_uv`.
    pub fn time_to_cutoff(&self, now_ms: u64, hold_uv: u32) -> Option<u32> {
        let trip_uv = hold_uv.saturating_add(self.dip.dip_uv());
        let from_now = |age_ms: u32, ms: Option<u32>| ms.map(|ms| ms.saturating_sub(age_ms));
        let (recent_age, long_age) = (self.recent.age_ms(now_ms), self.long.age_ms(now_ms));
        let long = self.long.time_to_reach(trip_uv);
        // The curve is read only where the half hour is a steady fall (the
        // line through it is good): a cloud's dip and recovery is no sunset.
        let curve = long.and_then(|_| self.long.log_decline_to(trip_uv));
        // A source whose power fades follows the fade model; the voltage
        // trends lag its acceleration.
        from_now(recent_age, self.recent.fade_time_to(trip_uv)).or_else(|| {
            [
                from_now(recent_age, self.recent.time_to_reach(trip_uv)),
                from_now(long_age, long),
                from_now(long_age, curve),
            ]
            .into_iter()
            .flatten()
            .min()
        })
    }
}

/// A quantity held over intervals of time (a current, a power), averaged
/// with each interval weighted by its length and exponentially forgotten
/// (EWMA) over a time constant; until one time constant has passed, the plain
/// mean since the start (or since [`TimeAverage::clear`]).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct TimeAverage {
    mean: i64,
    weight_us: u64,
}

impl TimeAverage {
    /// No data yet.
    pub const fn new() -> Self {
        TimeAverage {
            mean: 0,
            weight_us: 0,
        }
    }

    /// Adds `value` held over `length_us`, averaging over `time_constant_ms`.
    pub fn push(&mut self, value: i64, length_us: u64, time_constant_ms: u32) {
        if length_us == 0 {
            return;
        }
        let tau_us = u64::from(time_constant_ms).saturating_mul(1000).max(1);
        self.weight_us = self.weight_us.saturating_add(length_us).min(tau_us);
        let step = i128::from(value)
            .sat_sub(i128::from(self.mean))
            .sat_mul(i128::from(length_us.min(self.weight_us)))
            .wide_div(i128::from(self.weight_us))
            .unwrap_or(0);
        let mean = i128::from(self.mean).sat_add(step);
        self.mean = i64::try_from(mean).unwrap_or(if mean < 0 { i64::MIN } else { i64::MAX });
    }

    /// Adds the power of `energy_nj` taken over `length_us`: the mean is in nW.
    pub fn push_energy(&mut self, energy_nj: i64, length_us: u64, time_constant_ms: u32) {
        let power = i128::from(energy_nj)
            .sat_mul(1_000_000)
            .wide_div(i128::from(length_us))
            .unwrap_or(0);
        let power = i64::try_from(power).unwrap_or(if power < 0 { i64::MIN } else { i64::MAX });
        self.push(power, length_us, time_constant_ms);
    }

    /// Forgets everything (the next value starts a new plain mean).
    pub fn clear(&mut self) {
        *self = TimeAverage::new();
    }

    /// The average (0 before any data).
    pub const fn mean(&self) -> i64 {
        self.mean
    }

    /// True once the average spans `time_constant_ms` of data.
    pub fn spans(&self, time_constant_ms: u32) -> bool {
        self.weight_us >= u64::from(time_constant_ms).saturating_mul(1000)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn capacitor_discharge_at_constant_power_gives_the_exact_time() -> Result<(), &'static str> {
        // A capacitor under constant power falls linearly in V² (any physics
        // text: C (V1² - V2²) = 2 P t). 1 F at 2 mW: V² falls 0.004 V²/s.
        // From 1.2 V, 0.7 V is reached after (1.44 - 0.49) / 0.004 = 237.5 s.
        let mut trend = InputTrend::new(Fit::Squared, 0);
        let v_at = |s: f64| (1.44 - 0.004 * (s - 15.0)).sqrt();
        for s in 0..16u64 {
            trend.push(s * 1000, (v_at(s as f64) * 1e6).round() as u32);
        }
        let got = trend.time_to_reach(700_000).ok_or("a forecast")?;
        assert!((got as f64 - 237_500.0).abs() < 500.0, "{got}");
        assert_eq!(trend.time_to_reach(1_300_000), Some(0));
        Ok(())
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
        // block closes on the first interval at or past 120 s from its start),
        // standing at the mean time of its intervals (60 s) with their mean.
        let mut trend = InputTrend::new(Fit::Squared, LONG_TREND_BLOCK_MS);
        for i in 0..13u64 {
            trend.push(i * 10_000, 1_000_000 + (i as u32) * 1000);
        }
        assert_eq!(trend.points.len(), 1);
        assert_eq!(trend.points.recent(), Some(&(60_000, [1_006_000])));
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
    fn block_trends_see_a_slow_fall_single_reports_cannot() -> Result<(), &'static str> {
        // A 10 µV per 10 s fall, under ±1 mV of alternating noise: 16 single
        // reports see mostly noise, blocks of 40 s and 2 min see the fall.
        let mut f = CutoffForecaster::new();
        let mut short_only = InputTrend::new(Fit::Squared, 0);
        for i in 0..400u64 {
            let wobble: i64 = if i % 2 == 0 { 1000 } else { -1000 };
            let v = (900_000 - 10 * i as i64 + wobble) as u32;
            f.push(
                i * 10_000,
                InputSeen {
                    input_uv: v,
                    input_min_uv: v,
                    input_max_uv: v,
                    input_max_na: 100,
                    input_nw: 100_000,
                    length_us: 10_000_000,
                    output_uv: 3_300_000,
                },
                &ConverterModel::UNKNOWN,
            );
            short_only.push(i * 10_000, v);
        }
        assert_eq!(short_only.time_to_reach(700_000), None);
        let ms = f
            .time_to_cutoff(399 * 10_000, 700_000)
            .ok_or("a forecast")?;
        // The line through V: (0.896 - 0.7) V at 1 µV/s = 196,000 s. The V²
        // fit answers earlier (the safe side): (0.896² - 0.7²) / (2 · 0.896 · 1e-6)
        // = 174,560 s; the ten-minute window's noisier slope earlier still.
        assert!((157_000_000..=176_000_000).contains(&ms), "{ms}");
        Ok(())
    }

    #[test]
    fn exp_matches_the_float_function() {
        for x in [0.0f64, 0.1, 0.5, 1.0, 2.0, 3.3, 7.0] {
            let got = exp_neg_q16((x * 65536.0) as i128) as f64 / 65536.0;
            assert!((got - (-x).exp()).abs() < 2e-4, "{x}: {got}");
        }
        assert_eq!(exp_neg_q16(40 * Q16), 0);
    }

    #[test]
    fn a_logarithmic_decline_is_extrapolated_along_its_curve() -> Result<(), &'static str> {
        // V(t) = 1.0 V + 0.08 V ln(1 - t / 3000 s), sampled every 120 s from
        // t = 0 to 1800 s (16 blocks): reaches 0.7 V at
        // t = 3000 (1 - e^(-0.3 / 0.08)) = 2929.45 s, i.e. 1129.45 s after the
        // newest point. The same formula in f64 (numpy.polyfit for the
        // parabola) gives 2153.3 s: a parabola over the window sees less
        // curvature than the curve has at its end, so the model still errs
        // late on a pure logarithm, though far less than a line does.
        let v = |t: f64| 1.0 + 0.08 * (1.0 - t / 3000.0).ln();
        let mut trend = InputTrend::new(Fit::Squared, 0);
        for i in 0..16u64 {
            let t = i as f64 * 120.0;
            trend.push(i * 120_000, (v(t) * 1e6).round() as u32);
        }
        let got = f64::from(trend.log_decline_to(700_000).ok_or("a curve")?) / 1e3;
        assert!((got - 2153.3).abs() < 5.0, "{got}");
        let line = f64::from(trend.time_to_reach(700_000).ok_or("a line")?) / 1e3;
        assert!(line > got, "{line} vs {got}");
        // A straight fall has no curvature: no answer from this model.
        let mut straight = InputTrend::new(Fit::Squared, 0);
        for i in 0..16u64 {
            straight.push(i * 120_000, 1_000_000 - 1_000 * i as u32);
        }
        assert_eq!(straight.log_decline_to(700_000), None);
        Ok(())
    }

    #[test]
    fn a_fading_source_is_followed_to_the_level() -> Result<(), &'static str> {
        // Worked example: the power fades as P = 400 µW ((T - t) / T)^1.5 with
        // T = 1800 s after the newest point, and the voltage follows the
        // diode law V = 0.3 V + 0.07 V ln(P / 1 nW). V reaches 0.8 V when
        // P = e^7.143 nW, at t = T (1 - (P / 400 µW)^(1 / 1.5)) = 1761.2 s.
        // The same model in f64 (numpy.polyfit: a parabola through P, a line
        // through V, 16 points 40 s apart) gives k = 1.444, τ = 1728.9 s and
        // 1712.4 s, 2.8 % early.
        let power = |t: f64| 400_000.0 * ((1800.0 - t) / 1800.0).powf(1.5);
        let mut trend = FadeTrend::new(Fit::Squared, 0);
        for i in 0..16u64 {
            let t = -600.0 + 40.0 * i as f64;
            let v = 0.3 + 0.07 * power(t).ln();
            trend.push_values(
                i * 40_000,
                [(v * 1e6).round() as u32, power(t).round() as u32],
            );
        }
        let got = f64::from(trend.fade_time_to(800_000).ok_or("a fade")?) / 1e3;
        assert!((got - 1712.4).abs() < 5.0, "{got}");
        // A power that holds (a converter throttled to its load's needs) is no fade.
        let mut steady = FadeTrend::new(Fit::Squared, 0);
        for i in 0..16u64 {
            let wobble = if i % 2 == 0 { 1_000 } else { 0 };
            steady.push_values(i * 40_000, [1_200_000 - 1_000 * i as u32, 200_000 + wobble]);
        }
        assert_eq!(steady.fade_time_to(800_000), None);
        Ok(())
    }

    /// An interval of a fractional-MPPT converter: mean, lowest and highest
    /// input, highest input current, mean output.
    fn interval(mean: u32, min: u32, max: u32, max_na: u32, output_uv: u32) -> InputSeen {
        InputSeen {
            input_uv: mean,
            input_min_uv: min,
            input_max_uv: max,
            input_max_na: max_na,
            input_nw: 150_000,
            length_us: 10_000_000,
            output_uv,
        }
    }

    const MPPT_80: ConverterModel = ConverterModel {
        mppt_fraction_ppm: 800_000,
        output_regulated: true,
    };

    #[test]
    fn the_watched_point_is_read_as_the_converter_works() {
        // Output held at 3.300 V (within 0.1 %: 3.2967 V and up).
        assert!(output_held(3_297_000, 3_300_000));
        assert!(!output_held(3_296_000, 3_300_000));
        let calm = interval(1_250_000, 1_249_000, 1_251_000, 200_000, 3_300_000);
        // Throttled, no burst at full power: 80 % of the highest sample,
        // 1.0008 V; with a source 3 % soft, 1.0308 V.
        assert_eq!(
            watched_input_uv(&calm, &MPPT_80, true, 1_000_000),
            1_000_800
        );
        assert_eq!(
            watched_input_uv(&calm, &MPPT_80, true, 1_030_000),
            1_030_824
        );
        // The storage falling (not held): the converter works at its point.
        assert_eq!(
            watched_input_uv(&calm, &MPPT_80, false, 1_030_000),
            1_250_000
        );
        // A burst pulled a sample from 1.251 V to 1.04 V, past halfway to
        // 80 % (1.1259 V): that sample is the point.
        let burst = interval(1_230_000, 1_040_000, 1_251_000, 3_000_000, 3_299_000);
        assert_eq!(
            watched_input_uv(&burst, &MPPT_80, true, 1_000_000),
            1_040_000
        );
        // Without a fraction, the mean is the point.
        assert_eq!(
            watched_input_uv(&burst, &ConverterModel::UNKNOWN, true, 1_000_000),
            1_230_000
        );
    }

    #[test]
    fn available_power_is_known_at_full_power_only() {
        let calm = interval(1_250_000, 1_249_000, 1_251_000, 200_000, 3_300_000);
        let burst = interval(1_230_000, 1_040_000, 1_251_000, 3_000_000, 3_299_000);
        // 1.04 V at 3 mA = 3.12 mW.
        assert_eq!(available_nw(&burst, &MPPT_80, true), 3_120_000);
        assert_eq!(available_nw(&calm, &MPPT_80, true), UNKNOWN);
        assert_eq!(available_nw(&calm, &MPPT_80, false), 150_000);
        assert_eq!(available_nw(&calm, &ConverterModel::UNKNOWN, true), 150_000);
    }

    #[test]
    fn softness_is_the_smallest_ratio_of_bursts_at_full_power() {
        let mut soft = Softness::new();
        assert_eq!(soft.ratio_ppm(), 1_000_000);
        // No burst at full power: nothing learned.
        soft.push(&interval(1_250_000, 1_249_000, 1_251_000, 0, 0), 800_000);
        assert_eq!(soft.ratio_ppm(), 1_000_000);
        // 1.04 / (0.8 · 1.25) = 1.04; then a burst that stopped short, 1.10.
        soft.push(&interval(1_200_000, 1_040_000, 1_250_000, 0, 0), 800_000);
        assert_eq!(soft.ratio_ppm(), 1_040_000);
        soft.push(&interval(1_200_000, 1_100_000, 1_250_000, 0, 0), 800_000);
        assert_eq!(soft.ratio_ppm(), 1_040_000);
        soft.clear();
        assert_eq!(soft.ratio_ppm(), 1_000_000);
    }

    #[test]
    fn blocks_average_the_values_they_know() {
        let mut trend = FadeTrend::new(Fit::Squared, 20_000);
        trend.push_values(0, [1_000_000, 300]);
        trend.push_values(10_000, [1_000_100, UNKNOWN]);
        trend.push_values(20_000, [1_000_200, 600]);
        // Voltage over three intervals, power over the two that knew it.
        assert_eq!(trend.points.recent(), Some(&(10_000, [1_000_100, 450])));
        for t in [30_000, 40_000, 50_000] {
            trend.push_values(t, [1_000_000, UNKNOWN]);
        }
        assert_eq!(trend.points.recent(), Some(&(40_000, [1_000_000, UNKNOWN])));
    }

    #[test]
    fn a_held_dip_keeps_the_deepest_and_forgets_slowly() {
        let mut dip = HeldDip::new();
        dip.push(100_000, 10_000_000);
        dip.push(20_000, 10_000_000);
        // The shallower dip does not replace the deep one: 10 s of 600 s forgotten.
        assert_eq!(dip.dip_uv(), 98_334);
        for _ in 0..29 {
            dip.push(0, 10_000_000);
        }
        // 30 intervals of 10 s: (1 - 1/60)^30 = 0.604 of it is left, near
        // e^(-0.5) = 0.607 for an exponential forgetting over 10 minutes.
        let left = f64::from(dip.dip_uv()) / 100_000.0;
        assert!((left - (-0.5f64).exp()).abs() < 0.005, "{left}");
        dip.push(150_000, 10_000_000);
        assert_eq!(dip.dip_uv(), 150_000);
        dip.clear();
        assert_eq!(dip.dip_uv(), 0);
    }

    #[test]
    fn time_average_starts_as_a_plain_mean_then_forgets() {
        let mut avg = TimeAverage::new();
        // 1 mJ over 10 s = 100 µW, then nothing for 10 s: mean 50 µW.
        avg.push_energy(1_000_000, 10_000_000, 600_000);
        assert_eq!(avg.mean(), 100_000);
        avg.push_energy(0, 10_000_000, 600_000);
        assert_eq!(avg.mean(), 50_000);
        // Cleared, it starts again from the next value.
        avg.clear();
        avg.push(7, 1_000_000, 600_000);
        assert_eq!(avg.mean(), 7);
        // A burst load: 6 mJ in one 10 s interval of each minute, 100 µW mean.
        let mut burst = TimeAverage::new();
        for i in 0..600 {
            let nj = if i % 6 == 0 { 6_000_000 } else { 0 };
            burst.push_energy(nj, 10_000_000, LOAD_AVERAGE_MS);
        }
        let mean = burst.mean();
        assert!((80_000..=120_000).contains(&mean), "{mean}");
    }
}
