//! The harvester: one of the source models, with the conditions that drive it.

use serde::{Deserialize, Serialize};

use crate::sim::models::cell::{CellParams, PrimaryCell};
use crate::sim::models::environment::{Daylight, DaylightParams, Pipe, PipeParams};
use crate::sim::models::numeric::bisect;
use crate::sim::models::solar::{LitCell, PvCell};
use crate::sim::models::supercap::{Supercap, SupercapParams};
use crate::sim::models::teg::{HeatedTeg, Teg, TegParams};

/// A source as a scenario describes it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case", deny_unknown_fields)]
pub enum SourceParams {
    /// A primary cell.
    Cell {
        /// Cell parameters.
        #[serde(flatten)]
        cell: CellParams,
    },
    /// A solar cell or module under daylight.
    Solar {
        /// Cell parameters at standard conditions.
        cell: PvCell,
        /// The light over the day.
        daylight: DaylightParams,
        /// Cell temperature, °C.
        #[serde(default = "default_cell_celsius")]
        cell_celsius: f64,
    },
    /// A charged supercapacitor.
    Supercap {
        /// Capacitor parameters.
        #[serde(flatten)]
        cap: SupercapParams,
    },
    /// A thermoelectric generator on a pipe heated in cycles.
    Thermoelectric {
        /// Generator parameters.
        generator: TegParams,
        /// The pipe's heating cycle.
        pipe: PipeParams,
    },
}

fn default_cell_celsius() -> f64 {
    25.0
}

/// What every source model answers, whatever drives it. A new kind of
/// source is one file implementing this, plus its parameters in
/// [`SourceParams`] and one arm in [`Source::new`].
pub trait SourceModel: std::fmt::Debug + Send {
    /// Updates the conditions (light, temperature) for time `t_s`.
    fn set_conditions(&mut self, _t_s: f64, _dt_s: f64) {}
    /// Terminal current at terminal voltage `v`, A (decreasing in `v`).
    fn current_at(&self, v: f64) -> f64;
    /// Open-circuit voltage now, V.
    fn open_circuit_voltage(&self) -> f64;
    /// Draws `current_a` for `dt_s` (what discharges cells and capacitors).
    fn advance(&mut self, _dt_s: f64, _current_a: f64) {}
    /// A number describing the source's state for ground truth: depth of
    /// discharge, irradiance, capacitor voltage or temperature difference.
    fn condition(&self) -> f64;
    /// A copy of the model in its present state.
    fn boxed_clone(&self) -> Box<dyn SourceModel>;
}

/// A source being simulated: one of the models behind [`SourceModel`].
#[derive(Debug)]
pub struct Source(Box<dyn SourceModel>);

impl Clone for Source {
    fn clone(&self) -> Self {
        Source(self.0.boxed_clone())
    }
}

impl Source {
    /// Builds the source for a run of `duration_s` starting at `start_hour`.
    pub fn new(params: &SourceParams, start_hour: f64, duration_s: f64, seed: u64) -> Self {
        Source(match params {
            SourceParams::Cell { cell } => Box::new(PrimaryCell::new(*cell)),
            SourceParams::Solar {
                cell,
                daylight,
                cell_celsius,
            } => {
                let daylight = Daylight::new(daylight.clone(), start_hour, duration_s, seed);
                Box::new(LitCell::new(*cell, daylight, *cell_celsius))
            }
            SourceParams::Supercap { cap } => Box::new(Supercap::new(*cap)),
            SourceParams::Thermoelectric { generator, pipe } => {
                Box::new(HeatedTeg::new(Teg::new(*generator), Pipe::new(*pipe)))
            }
        })
    }

    /// Updates the conditions (light, temperature) for time `t_s`.
    pub fn set_conditions(&mut self, t_s: f64, dt_s: f64) {
        self.0.set_conditions(t_s, dt_s);
    }

    /// Terminal current at terminal voltage `v`, A (decreasing in `v`).
    pub fn current_at(&self, v: f64) -> f64 {
        self.0.current_at(v)
    }

    /// Open-circuit voltage now, V.
    pub fn open_circuit_voltage(&self) -> f64 {
        self.0.open_circuit_voltage()
    }

    /// Where a resistive input of `ohms` meets the source curve: `(V, I)`.
    pub fn resistive_operating_point(&self, ohms: f64) -> (f64, f64) {
        let voc = self.open_circuit_voltage();
        if voc <= 0.0 {
            return (0.0, 0.0);
        }
        let v = bisect(0.0, voc, |v| self.current_at(v) - v / ohms);
        (v, self.current_at(v).max(0.0))
    }

    /// The voltage at or above `v_from` where the source delivers `power_w`
    /// (used when the converter throttles its input).
    pub fn voltage_for_power(&self, v_from: f64, power_w: f64) -> f64 {
        let voc = self.open_circuit_voltage();
        bisect(v_from.min(voc), voc, |v| v * self.current_at(v) - power_w)
    }

    /// Draws `current_a` for `dt_s` (discharges cells and capacitors).
    pub fn advance(&mut self, dt_s: f64, current_a: f64) {
        self.0.advance(dt_s, current_a);
    }

    /// A number describing the source's state for ground truth.
    pub fn condition(&self) -> f64 {
        self.0.condition()
    }
}
