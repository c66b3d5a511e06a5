//! Time-to-cutoff forecasts.
//!
//! * [`InputTrend`]: an ordinary least-squares line through the input voltage of
//!   the last [`TREND_POINTS`] reports; when it falls steadily, the time until it
//!   reaches the hold threshold. No forecast when it is flat, rising, or too noisy
//!   (coefficient of determination r² below one half).
//! * [`storage_runout_ms`]: how long output storage can carry a constant load
//!   power down to a voltage, `t = C (V1² - V2²) / (2 P)`.

use heapless::HistoryBuf;

/// Reports kept for the trend.
pub const TREND_POINTS: usize = 16;
/// Fewest points for a forecast.
pub const MIN_TREND_POINTS: usize = 4;

/// A sliding window of `(time, input voltage)` points.
#[derive(Debug, Clone)]
pub struct InputTrend {
    points: HistoryBuf<(u64, u32), TREND_POINTS>,
}

impl Default for InputTrend {
    fn default() -> Self {
        Self::new()
    }
}

impl InputTrend {
    /// An empty window.
    pub const fn new() -> Self {
        InputTrend {
            points: HistoryBuf::new(),
        }
    }

    /// Adds the mean input voltage of an interval that ended at `t_ms`.
    pub fn push(&mut self, t_ms: u64, input_uv: u32) {
        self.points.write((t_ms, input_uv));
    }

    /// Forgets every point (after a restart of the converter, say).
    pub fn clear(&mut self) {
        self.points.clear();
    }

    /// Milliseconds from the newest point until the fitted line reaches
    /// `threshold_uv`: Some(0) when it already has, None when not falling or too noisy.
    pub fn time_to_reach(&self, threshold_uv: u32) -> Option<u32> {
        let n = self.points.len();
        if n < MIN_TREND_POINTS {
            return None;
        }
        let &(t_now, _) = self.points.recent()?;
        let (mut st, mut sv, mut stt, mut stv, mut svv) = (0i128, 0i128, 0i128, 0i128, 0i128);
        for &(t, v) in self.points.oldest_ordered() {
            // Time relative to the newest point (so "now" is t = 0), in ms.
            let t = i128::from(t).saturating_sub(i128::from(t_now));
            let v = i128::from(v);
            st = st.saturating_add(t);
            sv = sv.saturating_add(v);
            stt = stt.saturating_add(t.saturating_mul(t));
            stv = stv.saturating_add(t.saturating_mul(v));
            svv = svv.saturating_add(v.saturating_mul(v));
        }
        let n = i128::try_from(n).ok()?;
        let sxx = n.saturating_mul(stt).saturating_sub(st.saturating_mul(st));
        let sxy = n.saturating_mul(stv).saturating_sub(st.saturating_mul(sv));
        let syy = n.saturating_mul(svv).saturating_sub(sv.saturating_mul(sv));
        if sxx <= 0 || sxy >= 0 {
            return None; // all points at one time, or not falling
        }
        // r² = sxy² / (sxx syy) >= 1/2, compared without division.
        let sxy2 = sxy.checked_mul(sxy)?;
        if sxy2.checked_mul(2)? < sxx.checked_mul(syy)? {
            return None;
        }
        // Fitted value at t = 0 minus threshold, over the falling rate:
        // t = (sv sxx - st sxy - th n sxx) / (n (-sxy)).
        let th = i128::from(threshold_uv);
        let above = sv
            .checked_mul(sxx)?
            .checked_sub(st.checked_mul(sxy)?)?
            .checked_sub(th.checked_mul(n)?.checked_mul(sxx)?)?;
        if above <= 0 {
            return Some(0);
        }
        let ms = above.checked_div(n.checked_mul(sxy.checked_neg()?)?)?;
        Some(u32::try_from(ms).unwrap_or(u32::MAX))
    }
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_discharge_gives_the_exact_time() {
        // 1.0 V falling 1 mV per second, points every second: 0.7 V in 300 s.
        let mut trend = InputTrend::new();
        for s in 0..16u64 {
            trend.push(s * 1000, 1_015_000 - 1_000 * s as u32);
        }
        // Newest point is 1.000 V at t = 15 s.
        assert_eq!(trend.time_to_reach(700_000), Some(300_000));
        assert_eq!(trend.time_to_reach(1_200_000), Some(0));
    }

    #[test]
    fn rising_flat_or_short_input_gives_none() {
        let mut rising = InputTrend::new();
        let mut flat = InputTrend::new();
        for s in 0..10u64 {
            rising.push(s * 1000, 800_000 + 500 * s as u32);
            flat.push(s * 1000, 800_000);
        }
        assert_eq!(rising.time_to_reach(700_000), None);
        assert_eq!(flat.time_to_reach(700_000), None);
        let mut short = InputTrend::new();
        for s in 0..3u64 {
            short.push(s * 1000, 900_000 - 1000 * s as u32);
        }
        assert_eq!(short.time_to_reach(700_000), None);
    }

    #[test]
    fn noise_without_a_trend_gives_none() {
        // Alternating +-20 mV around a 1 uV/s fall: r² is tiny.
        let mut trend = InputTrend::new();
        for s in 0..16u64 {
            let wobble: i64 = if s % 2 == 0 { 20_000 } else { -20_000 };
            trend.push(s * 1000, (900_000 - s as i64 + wobble) as u32);
        }
        assert_eq!(trend.time_to_reach(700_000), None);
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
    }
}
