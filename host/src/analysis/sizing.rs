//! Storage sizing and duty-cycle advice.
//!
//! * A capacitor swinging from `V_max` to `V_min` gives `E = C (V_max² - V_min²) / 2`
//!   (capacitor energy, any physics text), so carrying a load through an outage
//!   that needs `E` takes `C = 2 E / (V_max² - V_min²)`.
//! * A duty-cycled load that sleeps at `P_sleep` and works at `P_active` for a
//!   fraction `d` of the time averages `P_sleep + d (P_active - P_sleep)`; the
//!   largest `d` a harvest of `P_h` sustains is `(P_h - P_sleep) / (P_active - P_sleep)`.

use anyhow::{bail, Result};
use serde::Serialize;

/// Margin applied to the computed capacitance: capacitors are specified to
/// about ±20 % and lose capacitance as they age (common practice).
pub const DEFAULT_MARGIN: f64 = 1.3;

/// `C = 2 E / (V_max² - V_min²)`, in farads.
pub fn capacitance_for(energy_j: f64, v_max: f64, v_min: f64) -> Option<f64> {
    let swing = v_max * v_max - v_min * v_min;
    (swing > 0.0 && energy_j >= 0.0).then(|| 2.0 * energy_j / swing)
}

/// The largest duty cycle (0 to 1) a harvest sustains; None when even sleep
/// needs more than the harvest gives.
pub fn max_duty_cycle(converted_w: f64, sleep_w: f64, active_w: f64) -> Option<f64> {
    if converted_w < sleep_w {
        return None;
    }
    if active_w <= sleep_w {
        return Some(1.0);
    }
    Some(((converted_w - sleep_w) / (active_w - sleep_w)).clamp(0.0, 1.0))
}

/// Storage and duty-cycle advice.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SizingAdvice {
    /// The outage the storage must bridge, s.
    pub outage_s: f64,
    /// Mean load power while supplied, W.
    pub load_w: f64,
    /// Energy the load needs over the outage, J.
    pub energy_needed_j: f64,
    /// Highest usable storage voltage, V.
    pub v_max: f64,
    /// Lowest usable storage voltage, V.
    pub v_min: f64,
    /// Capacitance without margin, F.
    pub capacitance_exact_f: Option<f64>,
    /// Margin applied.
    pub margin: f64,
    /// Recommended capacitance, F.
    pub capacitance_f: Option<f64>,
    /// Mean converted power (out of the converter, into load and storage), W.
    pub converted_w: f64,
    /// Load power asleep, W.
    pub sleep_w: f64,
    /// Load power active, W.
    pub active_w: f64,
    /// Largest sustainable duty cycle, 0 to 1.
    pub max_duty_cycle: Option<f64>,
}

/// The figures advice is computed from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Figures {
    /// Outage to bridge, s.
    pub outage_s: f64,
    /// Mean load power while supplied, W.
    pub load_w: f64,
    /// Highest usable storage voltage, V.
    pub v_max: f64,
    /// Lowest usable storage voltage, V.
    pub v_min: f64,
    /// Margin on the capacitance.
    pub margin: f64,
    /// Mean converted power (out of the converter), W.
    pub converted_w: f64,
    /// Load power asleep, W.
    pub sleep_w: f64,
    /// Load power active, W.
    pub active_w: f64,
}

/// Computes the advice from the figures.
pub fn advise(f: Figures) -> SizingAdvice {
    let Figures {
        outage_s,
        load_w,
        v_max,
        v_min,
        margin,
        converted_w,
        sleep_w,
        active_w,
    } = f;
    let energy_needed_j = load_w * outage_s;
    let exact = capacitance_for(energy_needed_j, v_max, v_min);
    SizingAdvice {
        outage_s,
        load_w,
        energy_needed_j,
        v_max,
        v_min,
        capacitance_exact_f: exact,
        margin,
        capacitance_f: exact.map(|c| c * margin),
        converted_w,
        sleep_w,
        active_w,
        max_duty_cycle: max_duty_cycle(converted_w, sleep_w, active_w),
    }
}

/// The planner's inputs, checked.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanInputs {
    /// Mean converted power (out of the converter), W.
    pub converted_w: f64,
    /// Load power asleep, W.
    pub sleep_w: f64,
    /// Load power active, W.
    pub active_w: f64,
    /// Planned duty cycle, 0 to 1 (for the mean load during an outage).
    pub duty_cycle: f64,
    /// Longest outage to ride through, hours (as the user gives it).
    pub outage_h: f64,
    /// Highest storage voltage, V.
    pub v_max: f64,
    /// Lowest usable storage voltage, V.
    pub v_min: f64,
    /// Margin on the capacitance.
    pub margin: f64,
}

impl PlanInputs {
    /// Checks every field; the error names the field.
    pub fn validate(&self) -> Result<()> {
        let nonneg = |name: &str, v: f64| -> Result<()> {
            if !(v.is_finite() && v >= 0.0) {
                bail!("{name} must be a number of at least 0, got {v}");
            }
            Ok(())
        };
        nonneg("--converted-w", self.converted_w)?;
        nonneg("--sleep-w", self.sleep_w)?;
        nonneg("--active-w", self.active_w)?;
        nonneg("--outage-h", self.outage_h)?;
        if !(0.0..=1.0).contains(&self.duty_cycle) {
            bail!(
                "--duty-cycle must be between 0 and 1, got {}",
                self.duty_cycle
            );
        }
        if self.active_w < self.sleep_w {
            bail!(
                "--active-w ({}) must be at least --sleep-w ({})",
                self.active_w,
                self.sleep_w
            );
        }
        if !(self.v_max.is_finite() && self.v_min.is_finite() && self.v_min >= 0.0) {
            bail!("--v-max and --v-min must be numbers, --v-min at least 0");
        }
        if self.v_max <= self.v_min {
            bail!(
                "--v-max ({}) must be above --v-min ({})",
                self.v_max,
                self.v_min
            );
        }
        if !(self.margin.is_finite() && self.margin >= 1.0) {
            bail!("--margin must be at least 1, got {}", self.margin);
        }
        Ok(())
    }

    /// Advice for these numbers.
    pub fn advise(&self) -> Result<SizingAdvice> {
        self.validate()?;
        let load_w = self.sleep_w + self.duty_cycle * (self.active_w - self.sleep_w);
        Ok(advise(Figures {
            outage_s: self.outage_h * 3600.0,
            load_w,
            v_max: self.v_max,
            v_min: self.v_min,
            margin: self.margin,
            converted_w: self.converted_w,
            sleep_w: self.sleep_w,
            active_w: self.active_w,
        }))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn capacitance_worked_example() {
        // Capacitor energy (any physics text, e.g. Halliday, Resnick and Walker,
        // from memory): 10 F from 2.7 V to 0.9 V frees 32.4 J; a 10 mW load for
        // 3240 s needs exactly that, so it needs 10 F.
        let c = capacitance_for(0.010 * 3240.0, 2.7, 0.9).unwrap();
        assert!((c - 10.0).abs() < 1e-9);
        // 100 uF from 3.3 to 1.8 V holds 0.3825 mJ.
        assert!((capacitance_for(0.3825e-3, 3.3, 1.8).unwrap() - 100e-6).abs() < 1e-12);
        assert_eq!(capacitance_for(1.0, 1.0, 2.0), None);
    }

    #[test]
    fn duty_cycle_balances_the_harvest() {
        // 1 mW harvest, 10 uW sleep, 10 mW active: d = 0.99 mW / 9.99 mW.
        let d = max_duty_cycle(1e-3, 10e-6, 10e-3).unwrap();
        assert!((d - 0.099_099_099).abs() < 1e-9);
        assert_eq!(max_duty_cycle(5e-6, 10e-6, 1e-3), None);
    }

    #[test]
    fn planner_errors_name_the_field() {
        let ok = PlanInputs {
            converted_w: 1e-3,
            sleep_w: 1e-5,
            active_w: 1e-2,
            duty_cycle: 0.01,
            outage_h: 1.0,
            v_max: 3.3,
            v_min: 1.8,
            margin: 1.3,
        };
        let advice = ok.advise().unwrap();
        let load = 1e-5 + 0.01 * (1e-2 - 1e-5);
        assert!((advice.energy_needed_j - load * 3600.0).abs() < 1e-12);
        let bad = PlanInputs {
            v_min: 3.5,
            ..ok.clone()
        };
        assert!(bad.advise().unwrap_err().to_string().contains("--v-max"));
        let bad = PlanInputs {
            active_w: 1e-6,
            ..ok.clone()
        };
        assert!(bad.advise().unwrap_err().to_string().contains("--active-w"));
        let bad = PlanInputs {
            duty_cycle: 2.0,
            ..ok
        };
        assert!(bad
            .advise()
            .unwrap_err()
            .to_string()
            .contains("--duty-cycle"));
    }
}
