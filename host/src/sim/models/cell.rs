//! A primary cell (alkaline-class): open-circuit voltage falling and internal
//! resistance rising with depth of discharge.
//!
//! The shape is common practice for alkaline cells: about 1.6 V open circuit
//! when fresh, a long slope through 1.2-1.3 V, and a knee to 0.8-0.9 V when
//! spent (handbook figures, from memory). Values between table points are
//! interpolated linearly.

use serde::{Deserialize, Serialize};

/// Open-circuit voltage (V) at depth of discharge 0, 0.1, ..., 1.0, then into
/// deep discharge past the rated end point (1.1, 1.2).
const OCV_TABLE: [f64; 13] = [
    1.60, 1.50, 1.44, 1.39, 1.35, 1.31, 1.27, 1.22, 1.15, 1.04, 0.85, 0.70, 0.45,
];
/// Internal resistance multiplier at the same depths.
const RESISTANCE_TABLE: [f64; 13] = [
    1.0, 1.05, 1.1, 1.2, 1.3, 1.45, 1.65, 2.0, 2.8, 4.5, 9.0, 15.0, 30.0,
];
/// Deepest discharge modelled.
const MAX_DEPTH: f64 = 1.2;

fn interpolate(table: &[f64; 13], depth: f64) -> f64 {
    let x = depth.clamp(0.0, MAX_DEPTH) * 10.0;
    let i = (x.floor() as usize).min(11);
    let frac = x - i as f64;
    table[i] + (table[i + 1] - table[i]) * frac
}

/// Parameters of a primary cell.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CellParams {
    /// Usable capacity, mAh.
    pub capacity_mah: f64,
    /// Internal resistance when fresh, Ω.
    pub fresh_resistance_ohm: f64,
    /// Depth of discharge at the start of the run, 0 (fresh) to 1 (rated end point).
    #[serde(default)]
    pub initial_depth: f64,
}

/// A primary cell being discharged.
#[derive(Debug, Clone, PartialEq)]
pub struct PrimaryCell {
    params: CellParams,
    drawn_coulomb: f64,
}

impl PrimaryCell {
    /// A cell at its initial depth of discharge.
    pub fn new(params: CellParams) -> Self {
        let capacity_c = params.capacity_mah * 3.6;
        PrimaryCell {
            params,
            drawn_coulomb: params.initial_depth.clamp(0.0, 1.0) * capacity_c,
        }
    }

    /// Depth of discharge: 0 fresh, 1 at the rated end point, up to 1.2 in deep discharge.
    pub fn depth(&self) -> f64 {
        (self.drawn_coulomb / (self.params.capacity_mah * 3.6)).clamp(0.0, MAX_DEPTH)
    }

    /// Open-circuit voltage now.
    pub fn open_circuit_voltage(&self) -> f64 {
        interpolate(&OCV_TABLE, self.depth())
    }

    /// Internal resistance now.
    pub fn resistance(&self) -> f64 {
        self.params.fresh_resistance_ohm * interpolate(&RESISTANCE_TABLE, self.depth())
    }

    /// Terminal current at terminal voltage `v` (Thevenin model).
    pub fn current_at(&self, v: f64) -> f64 {
        (self.open_circuit_voltage() - v) / self.resistance()
    }

    /// Draws `current_a` for `dt_s`.
    pub fn advance(&mut self, dt_s: f64, current_a: f64) {
        self.drawn_coulomb += current_a.max(0.0) * dt_s;
    }
}

impl crate::sim::models::source::SourceModel for PrimaryCell {
    fn current_at(&self, v: f64) -> f64 {
        PrimaryCell::current_at(self, v)
    }
    fn open_circuit_voltage(&self) -> f64 {
        PrimaryCell::open_circuit_voltage(self)
    }
    fn advance(&mut self, dt_s: f64, current_a: f64) {
        PrimaryCell::advance(self, dt_s, current_a);
    }
    fn condition(&self) -> f64 {
        self.depth()
    }
    fn boxed_clone(&self) -> Box<dyn crate::sim::models::source::SourceModel> {
        Box::new(self.clone())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fresh_and_spent_voltages_are_those_of_the_trade() {
        // Common practice: fresh alkaline 1.55-1.65 V open circuit, spent 0.8-0.9 V.
        let params = CellParams {
            capacity_mah: 1.0,
            fresh_resistance_ohm: 0.2,
            initial_depth: 0.0,
        };
        let mut cell = PrimaryCell::new(params);
        assert!((1.55..=1.65).contains(&cell.open_circuit_voltage()));
        cell.advance(3.6, 1.0); // 1 mAh drawn: spent
        assert!((0.8..=0.9).contains(&cell.open_circuit_voltage()));
        assert!(cell.resistance() > 5.0 * 0.2);
    }

    #[test]
    fn thevenin_terminal_current() {
        let cell = PrimaryCell::new(CellParams {
            capacity_mah: 2500.0,
            fresh_resistance_ohm: 0.2,
            initial_depth: 0.0,
        });
        // 1.6 V behind 0.2 Ohm held at 1.5 V: 0.5 A.
        assert!((cell.current_at(1.5) - 0.5).abs() < 1e-12);
    }
}
