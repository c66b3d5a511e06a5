//! A photovoltaic cell or small module: the single-diode model
//!
//! `I = IL - I0 (exp((V + I Rs) / a) - 1) - (V + I Rs) / Rsh`, with `a = n Ns Vth`,
//!
//! with its parameters scaled to irradiance and cell temperature as in De Soto,
//! Klein and Beckman, "Improvement and validation of a model for photovoltaic
//! array performance", Solar Energy 80 (2006) 78-88 (the relations pvlib's
//! `calcparams_desoto` implements).

use serde::{Deserialize, Serialize};

use crate::sim::models::numeric::{bisect, golden_max};

/// Boltzmann constant over the elementary charge, V/K (exact since the 2019 SI,
/// CODATA 2018 values of k and e).
pub const BOLTZMANN_OVER_CHARGE: f64 = 1.380_649e-23 / 1.602_176_634e-19;
/// Boltzmann constant in eV/K (CODATA 2018).
pub const BOLTZMANN_EV: f64 = 8.617_333_262e-5;

/// Thermal voltage `kT/q` at `kelvin`.
pub fn thermal_voltage(kelvin: f64) -> f64 {
    BOLTZMANN_OVER_CHARGE * kelvin
}

/// The five single-diode parameters at one operating condition.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SingleDiode {
    /// Photocurrent IL, A.
    pub photocurrent_a: f64,
    /// Diode saturation current I0, A.
    pub saturation_current_a: f64,
    /// Series resistance Rs, Ω.
    pub series_ohm: f64,
    /// Shunt resistance Rsh, Ω.
    pub shunt_ohm: f64,
    /// Modified ideality `a = n Ns Vth`, V.
    pub n_ns_vth: f64,
}

/// The key points of an I-V curve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CurvePoints {
    /// Short-circuit current, A.
    pub i_sc: f64,
    /// Open-circuit voltage, V.
    pub v_oc: f64,
    /// Current at maximum power, A.
    pub i_mp: f64,
    /// Voltage at maximum power, V.
    pub v_mp: f64,
    /// Maximum power, W.
    pub p_mp: f64,
}

impl SingleDiode {
    /// Terminal current at terminal voltage `v`, solved by Newton's method on
    /// the implicit equation (bracketed by bisection if Newton strays).
    pub fn current_at(&self, v: f64) -> f64 {
        let p = self;
        let f = |i: f64| {
            let vd = v + i * p.series_ohm;
            p.photocurrent_a
                - p.saturation_current_a * ((vd / p.n_ns_vth).exp() - 1.0)
                - vd / p.shunt_ohm
                - i
        };
        let df = |i: f64| {
            let vd = v + i * p.series_ohm;
            -p.saturation_current_a * (vd / p.n_ns_vth).exp() * p.series_ohm / p.n_ns_vth
                - p.series_ohm / p.shunt_ohm
                - 1.0
        };
        // f is strictly decreasing in i; start from the photocurrent.
        let mut i = p.photocurrent_a;
        for _ in 0..100 {
            let step = f(i) / df(i);
            if !step.is_finite() {
                break;
            }
            let next = i - step;
            if (next - i).abs() <= 1e-15 * (1.0 + i.abs()) {
                return next;
            }
            i = next;
        }
        if f(i).abs() < 1e-12 {
            return i;
        }
        let span = p.photocurrent_a.abs() + v.abs() / p.shunt_ohm + 10.0;
        bisect(-span, span, f)
    }

    /// Open-circuit voltage: the `V` where the current is zero.
    pub fn open_circuit_voltage(&self) -> f64 {
        let p = self;
        if p.photocurrent_a <= 0.0 {
            return 0.0;
        }
        let f = |v: f64| {
            p.photocurrent_a
                - p.saturation_current_a * ((v / p.n_ns_vth).exp() - 1.0)
                - v / p.shunt_ohm
        };
        let upper = p.n_ns_vth * (p.photocurrent_a / p.saturation_current_a + 1.0).ln() + 1e-9;
        bisect(0.0, upper.max(1e-9), f)
    }

    /// Short-circuit current, open-circuit voltage and maximum-power point.
    pub fn curve_points(&self) -> CurvePoints {
        let v_oc = self.open_circuit_voltage();
        let i_sc = self.current_at(0.0);
        let (v_mp, p_mp) = golden_max(0.0, v_oc, |v| v * self.current_at(v));
        CurvePoints {
            i_sc,
            v_oc,
            i_mp: p_mp / v_mp.max(f64::MIN_POSITIVE),
            v_mp,
            p_mp,
        }
    }
}

/// Reference parameters of a cell at standard conditions (1000 W/m², 25 °C),
/// from which [`PvCell::at`] derives the parameters at any condition.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PvCell {
    /// Photocurrent at reference conditions, A.
    pub photocurrent_ref_a: f64,
    /// Saturation current at reference conditions, A.
    pub saturation_current_ref_a: f64,
    /// Series resistance, Ω.
    pub series_ohm: f64,
    /// Shunt resistance at reference irradiance, Ω.
    pub shunt_ref_ohm: f64,
    /// The diode's modified ideality factor at reference temperature, as a
    /// voltage: `a = n Ns k T / q` (ideality factor n, Ns cells in series,
    /// thermal voltage kT/q), V. Scales with absolute temperature.
    pub ideality_voltage_ref_v: f64,
    /// Temperature coefficient of the short-circuit current, A/K: the
    /// photocurrent is `Iph = (G / Gref) (Iph,ref + coefficient (T - Tref))`.
    #[serde(default)]
    pub short_circuit_tempco_a_per_k: f64,
    /// Band gap at reference temperature, eV (1.121 for silicon).
    #[serde(default = "default_band_gap")]
    pub band_gap_ev: f64,
    /// Relative temperature dependence of the band gap, 1/K (-0.0002677 for silicon).
    #[serde(default = "default_band_gap_slope")]
    pub band_gap_slope_per_k: f64,
}

fn default_band_gap() -> f64 {
    1.121
}

fn default_band_gap_slope() -> f64 {
    -0.0002677
}

/// Reference irradiance, W/m².
pub const REFERENCE_IRRADIANCE: f64 = 1000.0;
/// Reference cell temperature, K.
pub const REFERENCE_KELVIN: f64 = 298.15;

impl PvCell {
    /// Parameters at `irradiance` W/m² and `cell_celsius` °C (De Soto et al. 2006):
    /// IL scales with irradiance (plus the temperature coefficient), I0 with
    /// `T³ exp(Eg_ref/(k Tref) - Eg/(k T))`, Rsh inversely with irradiance,
    /// `a` with T; Rs is constant.
    pub fn at(&self, irradiance: f64, cell_celsius: f64) -> SingleDiode {
        let t = cell_celsius + 273.15;
        let s = irradiance.max(0.0) / REFERENCE_IRRADIANCE;
        let eg = self.band_gap_ev * (1.0 + self.band_gap_slope_per_k * (t - REFERENCE_KELVIN));
        let photocurrent_a = s
            * (self.photocurrent_ref_a
                + self.short_circuit_tempco_a_per_k * (t - REFERENCE_KELVIN));
        let saturation_current_a = self.saturation_current_ref_a
            * (t / REFERENCE_KELVIN).powi(3)
            * (self.band_gap_ev / (BOLTZMANN_EV * REFERENCE_KELVIN) - eg / (BOLTZMANN_EV * t))
                .exp();
        let shunt_ohm = if s > 0.0 {
            self.shunt_ref_ohm / s
        } else {
            f64::INFINITY
        };
        SingleDiode {
            photocurrent_a,
            saturation_current_a,
            series_ohm: self.series_ohm,
            shunt_ohm,
            n_ns_vth: self.ideality_voltage_ref_v * t / REFERENCE_KELVIN,
        }
    }
}

impl PvCell {
    /// An invented small indoor module: three cells in series, about 6 cm², for
    /// window-lit rooms. Voc near 1.1 V at 1 W/m² and 1.8 V in full sun.
    pub fn indoor_module() -> Self {
        PvCell {
            photocurrent_ref_a: 0.05,
            saturation_current_ref_a: 1e-9,
            series_ohm: 0.5,
            shunt_ref_ohm: 400.0,
            ideality_voltage_ref_v: 0.1,
            short_circuit_tempco_a_per_k: 2.5e-5,
            band_gap_ev: default_band_gap(),
            band_gap_slope_per_k: default_band_gap_slope(),
        }
    }

    /// An invented larger outdoor module: four cells in series, about 60 cm².
    pub fn outdoor_module() -> Self {
        PvCell {
            photocurrent_ref_a: 0.5,
            saturation_current_ref_a: 2e-10,
            series_ohm: 0.2,
            shunt_ref_ohm: 50.0,
            ideality_voltage_ref_v: 0.13,
            short_circuit_tempco_a_per_k: 2.5e-4,
            band_gap_ev: default_band_gap(),
            band_gap_slope_per_k: default_band_gap_slope(),
        }
    }
}

/// A solar cell under daylight: its parameters follow the light.
#[derive(Debug, Clone)]
pub struct LitCell {
    /// Reference parameters.
    cell: PvCell,
    /// Light over time.
    daylight: crate::sim::models::environment::Daylight,
    /// Cell temperature, °C.
    cell_celsius: f64,
    /// Parameters at the present conditions.
    now: SingleDiode,
    /// Present irradiance, W/m².
    irradiance: f64,
}

impl LitCell {
    /// `cell` at `cell_celsius` under `daylight`, at its first light.
    pub fn new(
        cell: PvCell,
        daylight: crate::sim::models::environment::Daylight,
        cell_celsius: f64,
    ) -> Self {
        let irradiance = daylight.irradiance(0.0);
        LitCell {
            now: cell.at(irradiance, cell_celsius),
            cell,
            daylight,
            cell_celsius,
            irradiance,
        }
    }
}

impl crate::sim::models::source::SourceModel for LitCell {
    fn set_conditions(&mut self, t_s: f64, _dt_s: f64) {
        let light = self.daylight.irradiance(t_s);
        if light != self.irradiance {
            self.irradiance = light;
            self.now = self.cell.at(light, self.cell_celsius);
        }
    }
    fn current_at(&self, v: f64) -> f64 {
        self.now.current_at(v)
    }
    fn open_circuit_voltage(&self) -> f64 {
        self.now.open_circuit_voltage()
    }
    fn condition(&self) -> f64 {
        self.irradiance
    }
    fn boxed_clone(&self) -> Box<dyn crate::sim::models::source::SourceModel> {
        Box::new(self.clone())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thermal_voltage_matches_codata() {
        // CODATA 2018 via scipy.constants: kT/q at 300 K = 0.025851999786 V.
        assert!((thermal_voltage(300.0) - 0.025_851_999_786).abs() < 1e-12);
        assert!((thermal_voltage(298.15) - 0.025_692_579_121).abs() < 1e-12);
    }

    #[test]
    fn curve_points_satisfy_the_diode_equation() {
        // Hand check: at open circuit the diode and shunt take all the photocurrent.
        let p = SingleDiode {
            photocurrent_a: 0.05,
            saturation_current_a: 1e-9,
            series_ohm: 0.5,
            shunt_ohm: 1_000.0,
            n_ns_vth: 0.1,
        };
        let c = p.curve_points();
        let residual = p.photocurrent_a
            - p.saturation_current_a * ((c.v_oc / p.n_ns_vth).exp() - 1.0)
            - c.v_oc / p.shunt_ohm;
        assert!(residual.abs() < 1e-12);
        // Ideal-diode estimate a ln(IL/I0) = 1.7727 V, less a little for the shunt.
        assert!(c.v_oc < 0.1 * (0.05f64 / 1e-9).ln() && c.v_oc > 1.76);
        assert!(c.v_mp < c.v_oc && c.i_mp < c.i_sc);
        assert!((c.p_mp - c.v_mp * c.i_mp).abs() < 1e-12);
    }

    #[test]
    fn no_light_no_voltage() {
        let cell = PvCell::indoor_module();
        assert_eq!(cell.at(0.0, 25.0).open_circuit_voltage(), 0.0);
    }
}
