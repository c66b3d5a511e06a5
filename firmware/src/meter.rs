//! Metering: power, lossless energy accumulation and efficiency.
//!
//! Power is `µV * nA` = femtowatts, exact in `u64`. Energy is integrated with
//! the trapezoidal rule over the real sample times; each step adds
//! `(p1 + p2) * dt_us` in units of `1 / (2 * 10^12)` nJ, and what does not make a
//! whole nanojoule is carried to the next step, so nothing is ever truncated:
//! after any number of steps the total equals the exact trapezoidal sum.

/// Numerator units per nanojoule: `fW * µs / 2 = 0.5e-21 J`, so `2e12` per nJ.
const UNITS_PER_NJ: u64 = 2_000_000_000_000;
const UNITS_PER_NJ_WIDE: u128 = UNITS_PER_NJ as u128;

/// Power in femtowatts of a voltage and a current.
pub const fn power_fw(uv: u32, na: u32) -> u64 {
    (uv as u64).saturating_mul(na as u64)
}

/// Femtowatts to nanowatts, rounded down.
pub const fn fw_to_nw(fw: u64) -> u64 {
    fw / 1_000_000
}

/// Integrates power over time without losing precision.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct EnergyIntegrator {
    total_nj: u64,
    carry: u64,
    last: Option<(u64, u64)>,
}

impl EnergyIntegrator {
    /// A zero total with no previous point.
    pub const fn new() -> Self {
        EnergyIntegrator {
            total_nj: 0,
            carry: 0,
            last: None,
        }
    }

    /// Adds the point `(t_us, power_fw)`: the trapezoid back to the previous point
    /// is integrated. A time that does not move forward restarts the integration
    /// from this point without adding energy.
    pub fn add(&mut self, t_us: u64, power_fw: u64) {
        if let Some((last_t, last_p)) = self.last {
            if let Some(dt) = t_us.checked_sub(last_t).filter(|&dt| dt > 0) {
                self.add_trapezoid(last_p.saturating_add(power_fw), dt);
            }
        }
        self.last = Some((t_us, power_fw));
    }

    fn add_trapezoid(&mut self, power_sum_fw: u64, dt_us: u64) {
        // Fast path in u64 (covers 1 W for 4 s per step), exact u128 otherwise.
        let step = power_sum_fw
            .checked_mul(dt_us)
            .and_then(|s| s.checked_add(self.carry));
        match step {
            Some(units) => {
                self.total_nj = self.total_nj.saturating_add(units / UNITS_PER_NJ);
                self.carry = units % UNITS_PER_NJ;
            }
            None => {
                let units = u128::from(power_sum_fw)
                    .saturating_mul(u128::from(dt_us))
                    .saturating_add(u128::from(self.carry));
                let whole = units / UNITS_PER_NJ_WIDE;
                self.total_nj = self
                    .total_nj
                    .saturating_add(u64::try_from(whole).unwrap_or(u64::MAX));
                self.carry = u64::try_from(units % UNITS_PER_NJ_WIDE).unwrap_or(0);
            }
        }
    }

    /// Whole nanojoules so far.
    pub const fn total_nj(&self) -> u64 {
        self.total_nj
    }

    /// The total with the carried fraction, in nJ (for tests and diagnostics).
    pub fn total_nj_exact(&self) -> (u64, u64) {
        (self.total_nj, self.carry)
    }
}

/// Energy a capacitor of `c_uf` holds at `v_uv`: `E = C V² / 2`, in nJ (the
/// output storage's level; a change of level is energy stored or taken).
///
/// Units: µF * µV² = 10^-18 J, so divide by `2 * 10^9` for nJ.
pub fn storage_level_nj(c_uf: u32, v_uv: u32) -> i64 {
    let v2 = u128::from(v_uv).saturating_mul(u128::from(v_uv));
    let nj = u128::from(c_uf).saturating_mul(v2) / 2_000_000_000;
    i64::try_from(nj).unwrap_or(i64::MAX)
}

/// Below this much drawn energy an efficiency is not stated (1 µJ).
pub const EFFICIENCY_FLOOR_NJ: u64 = 1_000;

/// Conversion efficiency as an energy ratio, in parts per million:
/// `(delivered + stored) / drawn`. Never a mean of instantaneous ratios.
///
/// None when it would be noise rather than a measurement: less than
/// `EFFICIENCY_FLOOR_NJ` drawn; a storage change larger than what was drawn
/// (while the converter idles, the load lives on storage, and the ratio is
/// the small difference of two large terms over a small one); or a ratio above
/// one, which no converter achieves (measurement noise, or the storage
/// estimate from a smoothed voltage lagging a short window).
pub fn efficiency_ppm(drawn_nj: u64, delivered_nj: u64, stored_nj: i64) -> Option<u32> {
    if drawn_nj < EFFICIENCY_FLOOR_NJ || stored_nj.unsigned_abs() > drawn_nj {
        return None;
    }
    let out = i128::from(delivered_nj)
        .saturating_add(i128::from(stored_nj))
        .max(0);
    let ppm = out
        .saturating_mul(1_000_000)
        .checked_div(i128::from(drawn_nj))?;
    if ppm > 1_000_000 {
        return None;
    }
    u32::try_from(ppm).ok()
}

/// Input and output energy of the converter, integrated per sample.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Meter {
    /// Energy drawn from the harvester.
    pub input: EnergyIntegrator,
    /// Energy delivered to the load.
    pub output: EnergyIntegrator,
}

impl Meter {
    /// A meter at zero.
    pub const fn new() -> Self {
        Meter {
            input: EnergyIntegrator::new(),
            output: EnergyIntegrator::new(),
        }
    }

    /// Adds one calibrated sample taken at `t_us`.
    pub fn add(&mut self, t_us: u64, sample: &gleaner_protocol::Sample) {
        self.input
            .add(t_us, power_fw(sample.input_uv, sample.input_na));
        self.output
            .add(t_us, power_fw(sample.output_uv, sample.output_na));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ramp_integrates_exactly() {
        // Trapezoidal rule is exact for linear power: a 0 -> 20 mW ramp over
        // 100 s is 1.0 J (references: numpy.trapezoid on the same ramp).
        let mut e = EnergyIntegrator::new();
        for i in 0..=1000u64 {
            let p_fw = 20_000_000_000_000 * i / 1000; // 20 mW = 2e13 fW
            e.add(i * 100_000, p_fw);
        }
        assert_eq!(e.total_nj_exact(), (1_000_000_000, 0));
    }

    #[test]
    fn piecewise_linear_matches_the_analytic_integral() {
        // 1 mW for 10 s, ramp to 3 mW over 10 s, hold 5 s: 10 + 20 + 15 = 45 mJ.
        let points = [(0u64, 1u64), (10, 1), (20, 3), (25, 3)];
        let mut e = EnergyIntegrator::new();
        let mw = 1_000_000_000_000u64;
        for w in points.windows(2) {
            let (t0, p0) = w[0];
            let (t1, p1) = w[1];
            for k in 0..1000u64 {
                let t = t0 * 1_000_000 + (t1 - t0) * 1_000 * k;
                let p = p0 * mw + (p1 - p0) * mw * k / 1000;
                e.add(t, p);
            }
        }
        e.add(25_000_000, 3 * mw);
        assert_eq!(e.total_nj(), 45_000_000);
    }

    #[test]
    fn a_day_at_one_kilohertz_loses_nothing() {
        // 1.234567 uW sampled every 1 ms adds 1.234567 nJ per step: a fraction of
        // a nanojoule each time, which truncation would lose (0.23 nJ/step = 19 %).
        let p_fw = 1_234_567_000;
        let mut e = EnergyIntegrator::new();
        let steps: u64 = 86_400_000;
        for i in 0..=steps {
            e.add(i * 1_000, p_fw);
        }
        let exact_nj = 1.234_567e-6 * 86_400.0 * 1e9;
        let got = e.total_nj() as f64;
        assert!(
            (got - exact_nj).abs() / exact_nj < 1e-6,
            "{got} vs {exact_nj}"
        );
        // and it is the exact integer sum, carry included
        assert_eq!(e.total_nj_exact().0, 106_666_588);
    }

    #[test]
    #[ignore = "takes minutes; run with --ignored --release"]
    fn a_year_at_one_kilohertz_loses_nothing() {
        let p_fw = 1_234_567_000;
        let mut e = EnergyIntegrator::new();
        let steps: u64 = 365 * 86_400_000;
        for i in 0..=steps {
            e.add(i * 1_000, p_fw);
        }
        let exact_nj = 1.234_567e-6 * 365.0 * 86_400.0 * 1e9;
        assert!((e.total_nj() as f64 - exact_nj).abs() / exact_nj < 1e-6);
    }

    #[test]
    fn backwards_time_restarts_without_energy() {
        let mut e = EnergyIntegrator::new();
        e.add(1_000, 1_000_000_000_000);
        e.add(500, 1_000_000_000_000);
        assert_eq!(e.total_nj(), 0);
        e.add(1_500, 1_000_000_000_000);
        assert_eq!(e.total_nj(), 1_000); // 1 mW for 1 ms = 1 uJ
    }

    #[test]
    fn capacitor_energy_worked_examples() {
        // Any physics text: 10 F at 2.7 V holds 36.45 J; 2.7 -> 0.9 V frees 32.4 J.
        assert_eq!(storage_level_nj(10_000_000, 2_700_000), 36_450_000_000);
        assert_eq!(
            storage_level_nj(10_000_000, 900_000) - storage_level_nj(10_000_000, 2_700_000),
            -32_400_000_000
        );
        // 100 uF from 3.3 to 1.8 V: 0.3825 mJ.
        assert_eq!(
            storage_level_nj(100, 1_800_000) - storage_level_nj(100, 3_300_000),
            -382_500
        );
        assert_eq!(storage_level_nj(0, 3_300_000), 0);
    }

    #[test]
    fn efficiency_is_an_energy_ratio() {
        // Common practice: 50 s at 10 mW in with eta 0.8, then 50 s at 2 mW with
        // eta 0.4: 0.5 J in, 0.44 J out, 0.73333 (a mean of ratios would say 0.6).
        let drawn = 500_000_000 + 100_000_000;
        let delivered = 400_000_000 + 40_000_000;
        assert_eq!(efficiency_ppm(drawn, delivered, 0), Some(733_333));
        assert_eq!(efficiency_ppm(0, 0, 0), None);
        assert_eq!(efficiency_ppm(999, 500, 0), None);
        // A capacitor charging takes part of the output: still counted.
        assert_eq!(efficiency_ppm(1_000_000, 500_000, 300_000), Some(800_000));
        // Idle: 5 µJ of noise drawn, the load fed 50 µJ from storage, whose
        // estimate fell 40 µJ: 200 % is noise, not stated.
        assert_eq!(efficiency_ppm(5_000, 50_000, -40_000), None);
        // Above one without storage in it: noise as well.
        assert_eq!(efficiency_ppm(5_000, 9_000, 0), None);
        assert_eq!(efficiency_ppm(5_000, 5_000, 0), Some(1_000_000));
    }
}
