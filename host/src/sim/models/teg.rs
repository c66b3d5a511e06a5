//! A thermoelectric generator: open-circuit voltage `S ΔT` behind an internal
//! resistance; maximum power `Voc² / (4 R)` into a matched load (maximum power
//! transfer theorem, Alexander and Sadiku, Fundamentals of Electric Circuits, 4.8).

use serde::{Deserialize, Serialize};

/// Parameters of a thermoelectric generator.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TegParams {
    /// Seebeck coefficient of the module, V/K (about 0.05 for a 127-couple module).
    pub seebeck_v_per_k: f64,
    /// Internal resistance, Ω.
    pub internal_ohm: f64,
}

/// A thermoelectric generator at a temperature difference.
#[derive(Debug, Clone, PartialEq)]
pub struct Teg {
    params: TegParams,
    delta_k: f64,
}

impl Teg {
    /// A generator with no temperature difference yet.
    pub fn new(params: TegParams) -> Self {
        Teg {
            params,
            delta_k: 0.0,
        }
    }

    /// Sets the temperature difference across the module.
    pub fn set_delta_k(&mut self, delta_k: f64) {
        self.delta_k = delta_k;
    }

    /// `S ΔT`.
    pub fn open_circuit_voltage(&self) -> f64 {
        self.params.seebeck_v_per_k * self.delta_k.max(0.0)
    }

    /// Terminal current at terminal voltage `v`.
    pub fn current_at(&self, v: f64) -> f64 {
        (self.open_circuit_voltage() - v) / self.params.internal_ohm
    }

    /// Power into a load resistance.
    pub fn power_into(&self, load_ohm: f64) -> f64 {
        let i = self.open_circuit_voltage() / (self.params.internal_ohm + load_ohm);
        i * i * load_ohm
    }
}

/// A thermoelectric generator on a pipe heated in cycles: the pipe sets its
/// temperature difference.
#[derive(Debug, Clone)]
pub struct HeatedTeg {
    teg: Teg,
    pipe: crate::sim::models::environment::Pipe,
}

impl HeatedTeg {
    /// `teg` on `pipe`, at the pipe's first temperature.
    pub fn new(mut teg: Teg, mut pipe: crate::sim::models::environment::Pipe) -> Self {
        teg.set_delta_k(pipe.advance(0.0, 0.0));
        HeatedTeg { teg, pipe }
    }
}

impl crate::sim::models::source::SourceModel for HeatedTeg {
    fn set_conditions(&mut self, t_s: f64, dt_s: f64) {
        self.teg.set_delta_k(self.pipe.advance(t_s, dt_s));
    }
    fn current_at(&self, v: f64) -> f64 {
        self.teg.current_at(v)
    }
    fn open_circuit_voltage(&self) -> f64 {
        self.teg.open_circuit_voltage()
    }
    fn condition(&self) -> f64 {
        self.teg.open_circuit_voltage()
    }
    fn boxed_clone(&self) -> Box<dyn crate::sim::models::source::SourceModel> {
        Box::new(self.clone())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn maximum_power_transfer_worked_example() {
        // S 0.05 V/K, dT 10 K, R 2 Ohm: Voc 0.5 V, 31.25 mW at 2 Ohm, 27.78 mW at 4 Ohm.
        let mut teg = Teg::new(TegParams {
            seebeck_v_per_k: 0.05,
            internal_ohm: 2.0,
        });
        teg.set_delta_k(10.0);
        assert!((teg.open_circuit_voltage() - 0.5).abs() < 1e-12);
        assert!((teg.power_into(2.0) - 0.031_25).abs() < 1e-12);
        assert!((teg.power_into(4.0) - 0.027_777_78).abs() < 1e-8);
    }
}
