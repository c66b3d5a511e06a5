//! The harvester: one of the source models, with the conditions that drive it.

use serde::{Deserialize, Serialize};

use crate::sim::models::cell::{CellParams, PrimaryCell};
use crate::sim::models::environment::{Daylight, DaylightParams, Pipe, PipeParams};
use crate::sim::models::numeric::bisect;
use crate::sim::models::solar::{PvCell, SingleDiode};
use crate::sim::models::supercap::{Supercap, SupercapParams};
use crate::sim::models::teg::{Teg, TegParams};

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

/// A source being simulated.
#[derive(Debug, Clone)]
pub enum Source {
    /// A primary cell.
    Cell(PrimaryCell),
    /// A solar cell; `now` holds its parameters at the present light.
    Solar {
        /// Reference parameters.
        cell: PvCell,
        /// Light over time.
        daylight: Daylight,
        /// Cell temperature, °C.
        cell_celsius: f64,
        /// Parameters at the present conditions.
        now: SingleDiode,
        /// Present irradiance, W/m².
        irradiance: f64,
    },
    /// A supercapacitor.
    Supercap(Supercap),
    /// A thermoelectric generator.
    Thermoelectric {
        /// The generator.
        teg: Teg,
        /// Its pipe.
        pipe: Pipe,
    },
}

impl Source {
    /// Builds the source for a run of `duration_s` starting at `start_hour`.
    pub fn new(params: &SourceParams, start_hour: f64, duration_s: f64, seed: u64) -> Self {
        match params {
            SourceParams::Cell { cell } => Source::Cell(PrimaryCell::new(*cell)),
            SourceParams::Solar {
                cell,
                daylight,
                cell_celsius,
            } => {
                let daylight = Daylight::new(daylight.clone(), start_hour, duration_s, seed);
                let irradiance = daylight.irradiance(0.0);
                Source::Solar {
                    cell: *cell,
                    now: cell.at(irradiance, *cell_celsius),
                    daylight,
                    cell_celsius: *cell_celsius,
                    irradiance,
                }
            }
            SourceParams::Supercap { cap } => Source::Supercap(Supercap::new(*cap)),
            SourceParams::Thermoelectric { generator, pipe } => {
                let mut pipe = Pipe::new(*pipe);
                let mut teg = Teg::new(*generator);
                teg.set_delta_k(pipe.advance(0.0, 0.0));
                Source::Thermoelectric { teg, pipe }
            }
        }
    }

    /// Updates the conditions (light, temperature) for time `t_s`.
    pub fn set_conditions(&mut self, t_s: f64, dt_s: f64) {
        match self {
            Source::Solar {
                cell,
                daylight,
                cell_celsius,
                now,
                irradiance,
            } => {
                let light = daylight.irradiance(t_s);
                if light != *irradiance {
                    *irradiance = light;
                    *now = cell.at(light, *cell_celsius);
                }
            }
            Source::Thermoelectric { teg, pipe } => teg.set_delta_k(pipe.advance(t_s, dt_s)),
            Source::Cell(_) | Source::Supercap(_) => {}
        }
    }

    /// Terminal current at terminal voltage `v`, A (decreasing in `v`).
    pub fn current_at(&self, v: f64) -> f64 {
        match self {
            Source::Cell(c) => c.current_at(v),
            Source::Solar { now, .. } => now.current_at(v),
            Source::Supercap(c) => c.current_at(v),
            Source::Thermoelectric { teg, .. } => teg.current_at(v),
        }
    }

    /// Open-circuit voltage now, V.
    pub fn open_circuit_voltage(&self) -> f64 {
        match self {
            Source::Cell(c) => c.open_circuit_voltage(),
            Source::Solar { now, .. } => now.open_circuit_voltage(),
            Source::Supercap(c) => c.open_circuit_voltage(),
            Source::Thermoelectric { teg, .. } => teg.open_circuit_voltage(),
        }
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
        match self {
            Source::Cell(c) => c.advance(dt_s, current_a),
            Source::Supercap(c) => c.advance(dt_s, current_a),
            Source::Solar { .. } | Source::Thermoelectric { .. } => {}
        }
    }

    /// A number describing the source's state for ground truth: depth of
    /// discharge, irradiance, capacitor voltage or temperature difference.
    pub fn condition(&self) -> f64 {
        match self {
            Source::Cell(c) => c.depth(),
            Source::Solar { irradiance, .. } => *irradiance,
            Source::Supercap(c) => c.open_circuit_voltage(),
            Source::Thermoelectric { teg, .. } => teg.open_circuit_voltage(),
        }
    }
}
