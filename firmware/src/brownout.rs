//! Time to brown-out: how long the output storage keeps the load above its
//! minimum supply voltage, counting the harvest still coming in, the input
//! cutoff when one is in sight, and the shedding the node will do.
//!
//! The load is taken to draw a constant current (a microcontroller and its
//! peripherals on the storage directly or behind a linear regulator; common
//! practice) and the converter to deliver a constant power (it holds its
//! input at the source's working point whatever its output voltage). Storage
//! `C` at `V` then follows `C dV/dt = P / V - I`, and the time from `V` down
//! to `Vmin` is the integral of `C v dv / (I v - P)`:
//!
//! `t = C [ (V - Vmin) / I + (P / I²) ln((I V - P) / (I Vmin - P)) ]`
//!
//! (none when `I Vmin <= P`: the storage settles above the minimum). With no
//! harvest it is `C (V - Vmin) / I`; the net drain at the present voltage
//! alone would say `C V (V - Vmin) / (I V - P)`, shorter, because the load's
//! power falls with the voltage while the harvest's does not.

use crate::meter::storage_level_nj;
use crate::wide::Wide;

/// Power in nW of a current `na` at `uv` (nA µV = 1e-15 W).
pub fn power_nw(na: i64, uv: u32) -> i64 {
    na.saturating_mul(i64::from(uv)) / 1_000_000
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

/// One in Q30.
const Q30: i64 = 1 << 30;
/// ln 2 in Q30.
const LN2_Q30: i64 = 744_261_118;

/// `ln(x)` in Q30 for `x >= 1`: whole halvings counted, the rest `m` in
/// [1, 2) by `2 atanh((m - 1) / (m + 1))` to the ninth power (error below
/// 1e-6). 64-bit only: small on a 32-bit core.
#[inline(never)]
fn ln_q30(x: u64) -> Option<i64> {
    let halvings = x.checked_ilog2()?;
    // m in Q30: the 31 bits from the top set bit down.
    let m = i64::try_from(x.checked_shl(63u32.checked_sub(halvings)?)? >> 33).ok()?;
    let z = m
        .checked_sub(Q30)?
        .checked_shl(30)?
        .checked_div(m.checked_add(Q30)?)?;
    let z2 = z.checked_mul(z)? >> 30;
    let mut term = z;
    let mut series = 0i64;
    for odd in [1i64, 3, 5, 7, 9] {
        series = series.checked_add(term.checked_div(odd)?)?;
        term = term.checked_mul(z2)? >> 30;
    }
    i64::from(halvings)
        .checked_mul(LN2_Q30)?
        .checked_add(series.checked_mul(2)?)
}

/// `ln(num / den)` in Q30 for `num >= den > 0`.
fn ln_ratio_q30(num: u64, den: u64) -> Option<i64> {
    if den == 0 || num < den {
        return None;
    }
    Some(ln_q30(num)?.saturating_sub(ln_q30(den)?).max(0))
}

/// The integer square root (Newton's method from above).
fn isqrt(n: u64) -> u64 {
    if n < 2 {
        return n;
    }
    // A power of two above the root: Newton's steps then fall onto it.
    let mut x = 1u64 << (n.ilog2() / 2).saturating_add(1);
    loop {
        let next = x.saturating_add(n.checked_div(x).unwrap_or(0)) / 2;
        if next >= x {
            return x;
        }
        x = next;
    }
}

/// Milliseconds for `c_uf` of storage to fall from `from_uv` to `to_uv` under
/// a load of `load_na` (constant current) while the converter delivers
/// `supply_nw` (constant power): the closed form in the module docs. None
/// when it never gets there (no load, or the harvest holds the storage above
/// `to_uv`); Some(0) when already below.
pub fn drain_time_ms(
    c_uf: u32,
    from_uv: u32,
    to_uv: u32,
    load_na: i64,
    supply_nw: i64,
) -> Option<u64> {
    if from_uv <= to_uv {
        return Some(0);
    }
    let p = supply_nw.max(0);
    if load_na <= 0 {
        return None;
    }
    // Net drain at a voltage, in 1e-15 W (nA µV): I v - P.
    let drain_at = |uv: u32| {
        load_na
            .saturating_mul(i64::from(uv))
            .saturating_sub(p.saturating_mul(1_000_000))
    };
    let (high, low) = (drain_at(from_uv), drain_at(to_uv));
    if low <= 0 {
        return None;
    }
    // C (V - Vmin) / I: µF µV / nA = 1e-3 s, so ms.
    let linear = i64::from(c_uf)
        .saturating_mul(i64::from(from_uv.saturating_sub(to_uv)))
        .checked_div(load_na)?;
    // C P / I² ln(..): µF nW / nA² = 1e3 s = 1e6 ms; the logarithm in Q30.
    let log = if p == 0 {
        0
    } else {
        let ln = ln_ratio_q30(high.unsigned_abs(), low.unsigned_abs())?;
        let i = i128::from(load_na);
        let scale = i128::from(c_uf)
            .sat_mul(i128::from(p))
            .sat_mul(1_000_000)
            .wide_div(i.sat_mul(i))?;
        i64::try_from(scale.sat_mul(i128::from(ln)) >> 30).unwrap_or(i64::MAX)
    };
    u64::try_from(linear.saturating_add(log)).ok()
}

/// What the brown-out forecast is computed from.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct DrainOutlook {
    /// Output storage, µF.
    pub storage_uf: u32,
    /// Storage voltage (smoothed), µV.
    pub storage_uv: u32,
    /// The load's minimum supply voltage, µV.
    pub min_uv: u32,
    /// The load's current averaged over its duty period, nA.
    pub load_na: i64,
    /// The converter's output power averaged, nW (counted only while converting).
    pub supply_nw: i64,
    /// True while the converter delivers.
    pub converting: bool,
    /// Forecast time until the converter's input is cut off, while converting.
    pub input_cutoff_in_ms: Option<u32>,
    /// Current that shedding will take off the load, nA, when the load is not
    /// shed now and the node knows it (0: nothing to anticipate).
    pub shed_na: i64,
    /// The node sheds once the brown-out forecast falls within this, ms.
    pub shed_horizon_ms: u32,
}

/// The last stretch of a forecast: the storage drained from `from_uv` to the
/// minimum, starting `before_ms` from now, with `supply_nw` still coming in.
#[derive(Debug, Clone, Copy)]
struct LastDrain {
    before_ms: u64,
    from_uv: u32,
    supply_nw: i64,
}

/// Time until the load browns out, counting the shedding the node will do on
/// the way.
///
/// * Converter stopped: the load alone drains the storage.
/// * Converting with an input cutoff in sight: storage drains at the net rate
///   until the cutoff, then under the load alone (the cause chain "input cut
///   off, then storage ran out").
/// * Converting with no cutoff in sight: the harvest and the load together,
///   None while the harvest holds the storage above the minimum.
pub fn brownout_ms(o: &DrainOutlook) -> Option<u32> {
    if o.storage_uv <= o.min_uv {
        return Some(0);
    }
    let last = last_drain(o);
    let as_is = drain_time_ms(
        o.storage_uf,
        last.from_uv,
        o.min_uv,
        o.load_na,
        last.supply_nw,
    )?;
    let total = last
        .before_ms
        .saturating_add(with_planned_shed(o, &last, as_is)?);
    Some(u32::try_from(total).unwrap_or(u32::MAX))
}

/// Where the final drain starts: now, or at the input cutoff with the storage
/// left after draining at today's net rate until then.
fn last_drain(o: &DrainOutlook) -> LastDrain {
    let now = LastDrain {
        before_ms: 0,
        from_uv: o.storage_uv,
        supply_nw: if o.converting { o.supply_nw } else { 0 },
    };
    let Some(cutoff_ms) = o.input_cutoff_in_ms.filter(|_| o.converting) else {
        return now;
    };
    // Energy taken from storage until the cutoff at the present net rate, nJ.
    let net_nw = power_nw(o.load_na, o.storage_uv).saturating_sub(o.supply_nw);
    let used_nj = net_nw.saturating_mul(i64::from(cutoff_ms)) / 1000;
    let left_nj = storage_level_nj(o.storage_uf, o.storage_uv).saturating_sub(used_nj);
    if left_nj <= storage_level_nj(o.storage_uf, o.min_uv) {
        // Storage runs out before the cutoff: the harvest counts to the end.
        return now;
    }
    // V = sqrt(2 E / C): nJ / µF = 1e-3 V², so µV² = 2e9 nJ / µF.
    let v2 = left_nj
        .saturating_mul(2_000)
        .checked_div(i64::from(o.storage_uf))
        .unwrap_or(0)
        .saturating_mul(1_000_000);
    LastDrain {
        before_ms: u64::from(cutoff_ms),
        from_uv: u32::try_from(isqrt(v2.unsigned_abs())).unwrap_or(u32::MAX),
        supply_nw: 0,
    }
}

/// The length of a final drain that lasts `as_is_ms` as things stand, once
/// the node's own shedding is counted: it sheds when the forecast falls
/// within its horizon, and from then on the load draws `shed_na` less, so
/// the storage left at that point lasts as many times longer as the drain
/// is smaller (the rates compared at the drain's start). None when the shed
/// load no longer drains the storage.
fn with_planned_shed(o: &DrainOutlook, last: &LastDrain, as_is_ms: u64) -> Option<u64> {
    if o.shed_na <= 0 {
        return Some(as_is_ms);
    }
    let drain_with = |load_na: i64| power_nw(load_na, last.from_uv).saturating_sub(last.supply_nw);
    let (full, shed) = (
        drain_with(o.load_na),
        drain_with(o.load_na.saturating_sub(o.shed_na)),
    );
    if full <= 0 {
        return Some(as_is_ms);
    }
    if shed <= 0 {
        return None;
    }
    // The stretch of the drain that falls within the horizon when shedding starts.
    let horizon = u64::from(o.shed_horizon_ms);
    let total = last.before_ms.saturating_add(as_is_ms);
    let shed_part = as_is_ms.min(horizon.min(total));
    let stretched = i128::from(shed_part)
        .sat_mul(i128::from(full))
        .wide_div(i128::from(shed))
        .unwrap_or(0);
    let stretched = u64::try_from(stretched).unwrap_or(u64::MAX);
    Some(as_is_ms.saturating_sub(shed_part).saturating_add(stretched))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn power_of_a_current() {
        // 50 µA at 2.6 V is 130 µW.
        assert_eq!(power_nw(50_000, 2_600_000), 130_000);
        assert_eq!(power_nw(-1_000, 3_000_000), -3_000);
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
    fn logarithms_match_the_float_function() {
        for (num, den) in [
            (2, 1),
            (3, 1),
            (1_000_003, 999_999),
            (7_389_056, 1_000_000),
            (1 << 40, 3),
        ] {
            let got = ln_ratio_q30(num, den).map_or(f64::NAN, |l| l as f64 / (1u64 << 30) as f64);
            let want = (num as f64 / den as f64).ln();
            assert!((got - want).abs() < 2e-6, "{num}/{den}: {got} vs {want}");
        }
        assert_eq!(ln_ratio_q30(5, 5), Some(0));
        assert_eq!(ln_ratio_q30(4, 5), None);
        for n in [
            0u64,
            1,
            2,
            3,
            4,
            15,
            16,
            17,
            1 << 40,
            7_650_000_000_000,
            u64::MAX,
        ] {
            let r = isqrt(n);
            assert!(
                r * r <= n && (r + 1).checked_mul(r + 1).is_none_or(|s| s > n),
                "{n}"
            );
        }
    }

    #[test]
    fn constant_current_drain_worked_example() {
        // Any physics text: 10 F from 2.7 V to 0.9 V at a constant 10 mA lasts
        // t = C dV / I = 1800 s.
        assert_eq!(
            drain_time_ms(10_000_000, 2_700_000, 900_000, 10_000_000, 0),
            Some(1_800_000)
        );
        assert_eq!(drain_time_ms(10, 800_000, 900_000, 10, 0), Some(0));
        assert_eq!(drain_time_ms(10, 1_000_000, 900_000, 0, 0), None);
    }

    /// `C dV/dt = P / V - I` stepped in 1 ms (RK4) from `v` until `v_min`, s.
    fn integrated_s(c: f64, v: f64, v_min: f64, i: f64, p: f64) -> f64 {
        let slope = |v: f64| (p / v - i) / c;
        let (mut v, mut t, h) = (v, 0.0, 1e-3);
        while v > v_min {
            let k1 = slope(v);
            let k2 = slope(v + h * k1 / 2.0);
            let k3 = slope(v + h * k2 / 2.0);
            let k4 = slope(v + h * k3);
            v += h * (k1 + 2.0 * k2 + 2.0 * k3 + k4) / 6.0;
            t += h;
        }
        t
    }

    #[test]
    fn a_harvest_under_a_constant_current_load_follows_the_closed_form() {
        // 1 F from 3 V to 2 V, 1 mA load, 1 mW harvest: by hand
        // C [(V - Vmin) / I + P / I² ln((I V - P) / (I Vmin - P))]
        // = 1000 s + 1000 s ln 2 = 1693.147 s; stepping the equation agrees.
        let got = drain_time_ms(1_000_000, 3_000_000, 2_000_000, 1_000_000, 1_000_000)
            .map_or(f64::NAN, |ms| ms as f64);
        assert!((got - 1_693_147.2).abs() < 2.0, "{got}");
        let stepped = integrated_s(1.0, 3.0, 2.0, 1e-3, 1e-3);
        assert!((got / 1e3 - stepped).abs() < 0.01, "{got} vs {stepped}");
        // The net drain at 3 V alone (2 mW of the 3 J above 2 V at constant
        // current, C V (V - Vmin) = 3 J) would say 1500 s: 11 % short.
        // A harvest that meets the load at the minimum holds it there.
        assert_eq!(
            drain_time_ms(1_000_000, 3_000_000, 2_000_000, 1_000_000, 2_000_000),
            None
        );
    }

    fn stopped() -> DrainOutlook {
        // 10 F at 2.7 V, load minimum 0.9 V, 10 mA: 1800 s on storage alone.
        DrainOutlook {
            storage_uf: 10_000_000,
            storage_uv: 2_700_000,
            min_uv: 900_000,
            load_na: 10_000_000,
            supply_nw: 0,
            converting: false,
            input_cutoff_in_ms: None,
            shed_na: 0,
            shed_horizon_ms: 600_000,
        }
    }

    #[test]
    fn brownout_follows_the_cause_chain() {
        assert_eq!(brownout_ms(&stopped()), Some(1_800_000));
        // A stopped converter's supply does not count, whatever its average says.
        let lagging = DrainOutlook {
            supply_nw: 5_000_000,
            ..stopped()
        };
        assert_eq!(brownout_ms(&lagging), Some(1_800_000));
        // Charging (30 mW in, 27 mW out at 2.7 V) with no cutoff in sight: none.
        let charging = DrainOutlook {
            supply_nw: 30_000_000,
            converting: true,
            ..stopped()
        };
        assert_eq!(brownout_ms(&charging), None);
        // The same, but the input is cut off in 600 s: 1.8 J more in storage
        // (36.45 J + 1.8 J = 38.25 J, V = sqrt(2 E / C) = 2.76586 V), then
        // 10 F (2.76586 V - 0.9 V) / 10 mA = 1865.86 s on storage.
        let sunset = DrainOutlook {
            input_cutoff_in_ms: Some(600_000),
            ..charging
        };
        let got = brownout_ms(&sunset).map_or(-1, i64::from);
        assert!((got - 2_465_862).abs() <= 1, "{got}");
        // Draining so fast (20 mW short) that storage is gone before a cutoff
        // in 2000 s: the harvest counts to the end, by the closed form.
        let heavier = DrainOutlook {
            supply_nw: 7_000_000,
            input_cutoff_in_ms: Some(2_000_000),
            ..sunset
        };
        assert_eq!(
            brownout_ms(&heavier).map(u64::from),
            drain_time_ms(10_000_000, 2_700_000, 900_000, 10_000_000, 7_000_000)
        );
        // Already below the load's minimum.
        let empty = DrainOutlook {
            storage_uv: 899_000,
            ..stopped()
        };
        assert_eq!(brownout_ms(&empty), Some(0));
    }

    #[test]
    fn the_shedding_to_come_stretches_the_last_part() {
        // 1800 s as things stand. Shedding 4 mA starts when 600 s are left;
        // those last 600 s at 10 mA last 600 s x 10 / 6 = 1000 s: 2200 s in all.
        let planned = DrainOutlook {
            shed_na: 4_000_000,
            ..stopped()
        };
        assert_eq!(brownout_ms(&planned), Some(2_200_000));
        // Within the horizon already: the node sheds now; 300 s become 500 s.
        let near = DrainOutlook {
            min_uv: 2_400_000,
            ..planned
        };
        assert_eq!(brownout_ms(&near), Some(500_000));
        // Shedding takes the whole load: no brown-out in sight once shed.
        let all = DrainOutlook {
            shed_na: 10_000_000,
            ..stopped()
        };
        assert_eq!(brownout_ms(&all), None);
    }
}
