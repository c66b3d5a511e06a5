//! A supercapacitor as a source: capacitance, series resistance and leakage,
//! stored energy `E = C V² / 2`.

use serde::{Deserialize, Serialize};

/// Parameters of a supercapacitor source.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SupercapParams {
    /// Capacitance, F.
    pub capacitance_f: f64,
    /// Equivalent series resistance, Ω.
    pub series_ohm: f64,
    /// Leakage modelled as a parallel resistance, Ω.
    pub leakage_ohm: f64,
    /// Voltage at the start of the run, V.
    pub initial_v: f64,
}

/// A supercapacitor discharging into the converter.
#[derive(Debug, Clone, PartialEq)]
pub struct Supercap {
    params: SupercapParams,
    cell_v: f64,
}

impl Supercap {
    /// A capacitor charged to its initial voltage.
    pub fn new(params: SupercapParams) -> Self {
        Supercap {
            params,
            cell_v: params.initial_v.max(0.0),
        }
    }

    /// Voltage of the ideal capacitor inside (the open-circuit voltage).
    pub fn open_circuit_voltage(&self) -> f64 {
        self.cell_v
    }

    /// Stored energy `C V² / 2`, J.
    pub fn energy_j(&self) -> f64 {
        0.5 * self.params.capacitance_f * self.cell_v * self.cell_v
    }

    /// Terminal current at terminal voltage `v`.
    pub fn current_at(&self, v: f64) -> f64 {
        (self.cell_v - v) / self.params.series_ohm
    }

    /// Supplies `current_a` for `dt_s`; leakage drains it too.
    pub fn advance(&mut self, dt_s: f64, current_a: f64) {
        let leak = self.cell_v / self.params.leakage_ohm;
        self.cell_v =
            (self.cell_v - (current_a + leak) * dt_s / self.params.capacitance_f).max(0.0);
    }
}

impl crate::sim::models::source::SourceModel for Supercap {
    fn current_at(&self, v: f64) -> f64 {
        Supercap::current_at(self, v)
    }
    fn open_circuit_voltage(&self) -> f64 {
        Supercap::open_circuit_voltage(self)
    }
    fn advance(&mut self, dt_s: f64, current_a: f64) {
        Supercap::advance(self, dt_s, current_a);
    }
    fn condition(&self) -> f64 {
        Supercap::open_circuit_voltage(self)
    }
    fn boxed_clone(&self) -> Box<dyn crate::sim::models::source::SourceModel> {
        Box::new(self.clone())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn energy_and_discharge_follow_the_textbook() {
        // Any physics text: 10 F at 2.7 V holds 36.45 J.
        let params = SupercapParams {
            capacitance_f: 10.0,
            series_ohm: 0.1,
            leakage_ohm: 1e12,
            initial_v: 2.7,
        };
        let mut cap = Supercap::new(params);
        assert!((cap.energy_j() - 36.45).abs() < 1e-12);
        // Constant current t = C dV / I: 10 mA for 1800 s takes 1.8 V off.
        for _ in 0..1800 {
            cap.advance(1.0, 0.01);
        }
        assert!((cap.open_circuit_voltage() - 0.9).abs() < 1e-6);
    }
}
