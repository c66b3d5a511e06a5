//! A behavioural model of a low-voltage step-up stage (a blocking oscillator
//! or a small boost converter).
//!
//! * It cold-starts when the source's open-circuit voltage reaches `start_v`
//!   and stops when its loaded input falls below `stop_v`.
//! * Its input is either resistive (a blocking oscillator draws roughly like a
//!   resistor) or held at a fraction of the open-circuit voltage (the common
//!   fractional-Voc MPPT of harvesting converters).
//! * Its efficiency falls steeply at low input voltage (an invented but typical
//!   shape): `eta = peak (1 - exp(-(Vin - floor) / knee)) * P / (P + P_q)`.
//! * It charges an output capacitor that feeds the load, optionally regulated.
//! * A fault window stops conversion while the input stays healthy.

use serde::{Deserialize, Serialize};

use crate::sim::models::load::LoadParams;
use crate::sim::models::numeric::bisect;
use crate::sim::models::source::Source;

/// How the converter loads its source.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case", deny_unknown_fields)]
pub enum InputMode {
    /// Draws like a resistor of `ohms`.
    Resistive {
        /// Input resistance, Ω.
        ohms: f64,
    },
    /// Holds its input at `fraction` of the open-circuit voltage.
    FractionalVoc {
        /// 0 to 1, typically 0.7-0.8.
        fraction: f64,
    },
}

/// Converter parameters.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ConverterParams {
    /// Open-circuit input needed to cold-start, V.
    pub start_v: f64,
    /// The stop voltage: loaded input below which it stops (`hold_v` before), V.
    #[serde(alias = "hold_v")]
    pub stop_v: f64,
    /// How it loads the source.
    pub input: InputMode,
    /// Best efficiency, 0 to 1.
    pub peak_efficiency: f64,
    /// Input voltage at which efficiency reaches zero, V.
    pub efficiency_floor_v: f64,
    /// Input voltage scale of the efficiency roll-off, V.
    pub efficiency_knee_v: f64,
    /// Quiescent power that light loads lose, W.
    #[serde(default)]
    pub quiescent_w: f64,
    /// Output regulation voltage, V (none: the load sets the voltage).
    #[serde(default)]
    pub regulation_v: Option<f64>,
    /// Output storage capacitance, F.
    pub output_capacitance_f: f64,
    /// Output capacitor voltage at the start, V.
    #[serde(default)]
    pub initial_output_v: f64,
    /// A fault stops conversion from this time, s.
    #[serde(default)]
    pub fault_at_s: Option<f64>,
    /// ... for this long, s (forever when absent).
    #[serde(default)]
    pub fault_for_s: Option<f64>,
}

/// Why the converter is not converting.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum OffReason {
    /// The input is too low to start or to hold.
    Starved,
    /// The fault window is active.
    Fault,
}

/// The converter's state between steps.
#[derive(Debug, Clone, PartialEq)]
pub struct Converter {
    params: ConverterParams,
    running: bool,
    output_v: f64,
}

/// Everything that happened in one step, true values.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StepOutcome {
    /// Input voltage, V.
    pub input_v: f64,
    /// Input current, A.
    pub input_a: f64,
    /// Output voltage after the step, V.
    pub output_v: f64,
    /// Load current after the step, A.
    pub load_a: f64,
    /// Power out of the converter into storage and load, W.
    pub converted_w: f64,
    /// None while converting.
    pub off: Option<OffReason>,
}

impl Converter {
    /// A stopped converter with an empty output capacitor.
    pub fn new(params: ConverterParams) -> Self {
        Converter {
            params,
            running: false,
            output_v: params.initial_output_v.max(0.0),
        }
    }

    /// The parameters.
    pub fn params(&self) -> &ConverterParams {
        &self.params
    }

    /// Efficiency at input voltage `v_in` delivering `p_out` W.
    pub fn efficiency(&self, v_in: f64, p_out: f64) -> f64 {
        let p = &self.params;
        let roll_off = 1.0 - (-(v_in - p.efficiency_floor_v) / p.efficiency_knee_v.max(1e-9)).exp();
        let light_load = if p.quiescent_w > 0.0 {
            p_out / (p_out + p.quiescent_w)
        } else {
            1.0
        };
        (p.peak_efficiency * roll_off.max(0.0) * light_load).clamp(0.0, 1.0)
    }

    fn faulted(&self, t_s: f64) -> bool {
        match self.params.fault_at_s {
            Some(at) => t_s >= at && self.params.fault_for_s.is_none_or(|d| t_s < at + d),
            None => false,
        }
    }

    fn operating_point(&self, source: &Source) -> (f64, f64) {
        match self.params.input {
            InputMode::Resistive { ohms } => source.resistive_operating_point(ohms),
            InputMode::FractionalVoc { fraction } => {
                let v = source.open_circuit_voltage() * fraction;
                (v, source.current_at(v).max(0.0))
            }
        }
    }

    /// Starts or stops the converter at `t_s` and finds where its input
    /// works: (voltage, current, why it is off if it is).
    fn input_side(&mut self, t_s: f64, source: &Source) -> (f64, f64, Option<OffReason>) {
        let voc = source.open_circuit_voltage();
        let fault = self.faulted(t_s);
        if !self.running && !fault && voc >= self.params.start_v {
            self.running = true;
        }
        if fault {
            self.running = false;
            return (voc, 0.0, Some(OffReason::Fault));
        }
        if self.running {
            let (v_in, i_in) = self.operating_point(source);
            if v_in >= self.params.stop_v {
                return (v_in, i_in, None);
            }
            self.running = false;
        }
        (voc, 0.0, Some(OffReason::Starved))
    }

    /// Advances by `dt_s` at time `t_s`.
    pub fn step(
        &mut self,
        t_s: f64,
        dt_s: f64,
        source: &Source,
        load: &LoadParams,
        shed: bool,
        powered: bool,
    ) -> StepOutcome {
        let load = LoadDuring {
            load,
            t_s: t_s + dt_s,
            dt_s,
            shed,
            powered,
        };
        let (mut v_in, mut i_in, off) = self.input_side(t_s, source);
        let p_in = v_in * i_in;
        // Efficiency at the available output power (one fixed-point pass).
        let eta = self.efficiency(v_in, self.efficiency(v_in, p_in) * p_in);
        let mut p_out = eta * p_in;
        let v0 = self.output_v;
        let mut v_out = self.solve_output(v_in, p_out, &load);
        if let Some(v_reg) = self.params.regulation_v.filter(|&v_reg| v_out > v_reg) {
            v_out = v_reg;
            p_out = self.power_to_hold(v_reg, &load);
            // Throttle the input to what the output needs.
            let p_in_needed = if eta > 0.0 { p_out / eta } else { 0.0 };
            if p_in_needed < p_in && i_in > 0.0 {
                v_in = source.voltage_for_power(v_in, p_in_needed);
                i_in = source.current_at(v_in).max(0.0);
            }
        }
        self.output_v = v_out.max(0.0);
        // The current that really flowed: at a brown-out edge the solution sits
        // on the load's step, and the load got only what the balance leaves.
        let supplied = if p_out > 0.0 {
            p_out / self.output_v.max(v_in).max(0.05)
        } else {
            0.0
        };
        let into_storage = self.params.output_capacitance_f * (self.output_v - v0) / dt_s;
        let load_a = load
            .current_at(self.output_v)
            .min((supplied - into_storage).max(0.0));
        StepOutcome {
            input_v: v_in,
            input_a: i_in,
            output_v: self.output_v,
            load_a,
            converted_w: p_out,
            off,
        }
    }

    /// The output voltage after one step delivering `p_out` from an input at
    /// `v_in`, by backward Euler on the output node:
    /// C (v - v0) / dt = P / max(v, vin) - I_load(v).
    fn solve_output(&self, v_in: f64, p_out: f64, load: &LoadDuring) -> f64 {
        let c = self.params.output_capacitance_f;
        let v0 = self.output_v;
        let balance = |v: f64| {
            let supply = if p_out > 0.0 {
                p_out / v.max(v_in).max(0.05)
            } else {
                0.0
            };
            c * (v - v0) / load.dt_s - supply + load.current_at(v)
        };
        bisect(0.0, v0.max(v_in).max(1.0) * 4.0 + 10.0, balance)
    }

    /// The output power that holds the output at `v_reg` through one step.
    fn power_to_hold(&self, v_reg: f64, load: &LoadDuring) -> f64 {
        let c = self.params.output_capacitance_f;
        let needed = v_reg * (c * (v_reg - self.output_v) / load.dt_s + load.current_at(v_reg));
        needed.max(0.0)
    }
}

/// The load as the output sees it during one step (at the step's end).
struct LoadDuring<'a> {
    load: &'a LoadParams,
    t_s: f64,
    dt_s: f64,
    shed: bool,
    powered: bool,
}

impl LoadDuring<'_> {
    /// The load's current at output voltage `v`.
    fn current_at(&self, v: f64) -> f64 {
        self.load
            .current_at(v, self.t_s, self.dt_s, self.shed, self.powered)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::models::cell::CellParams;
    use crate::sim::models::source::SourceParams;

    fn params() -> ConverterParams {
        ConverterParams {
            start_v: 0.8,
            stop_v: 0.7,
            input: InputMode::Resistive { ohms: 40.0 },
            peak_efficiency: 0.8,
            efficiency_floor_v: 0.5,
            efficiency_knee_v: 0.3,
            quiescent_w: 0.0,
            regulation_v: None,
            output_capacitance_f: 100e-6,
            initial_output_v: 0.0,
            fault_at_s: None,
            fault_for_s: None,
        }
    }

    #[test]
    fn efficiency_falls_steeply_at_low_input() {
        let conv = Converter::new(params());
        let high = conv.efficiency(1.5, 0.01);
        let low = conv.efficiency(0.7, 0.01);
        assert!(high > 0.75 && low < 0.45, "{high} {low}");
        assert_eq!(conv.efficiency(0.5, 0.01), 0.0);
    }

    #[test]
    fn a_fresh_cell_lights_a_red_led_above_2_3_volts() {
        // Common practice: a single-transistor stage raises 1.5 V to the
        // 2.2-2.4 V a red LED needs.
        let source = Source::new(
            &SourceParams::Cell {
                cell: CellParams {
                    capacity_mah: 2500.0,
                    fresh_resistance_ohm: 0.2,
                    initial_depth: 0.1,
                },
            },
            0.0,
            0.0,
            1,
        );
        let mut conv = Converter::new(params());
        let led = LoadParams::red_led();
        let mut out = None;
        for i in 0..2000 {
            out = Some(conv.step(i as f64 * 0.001, 0.001, &source, &led, false, true));
        }
        let out = out.unwrap();
        assert!(out.off.is_none());
        assert!((1.4..=1.55).contains(&out.input_v), "{}", out.input_v);
        assert!((2.3..=2.45).contains(&out.output_v), "{}", out.output_v);
    }
}
