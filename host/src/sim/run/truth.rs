//! Ground truth: what really happened in a simulated run, to judge what the
//! node reported against.

use serde::Serialize;

use crate::sim::models::converter::{OffReason, StepOutcome};

/// A change of the converter's true state.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ConverterChange {
    /// When, seconds from the start.
    pub t_s: f64,
    /// Converting after the change?
    pub converting: bool,
    /// Why it is off, when it is.
    pub reason: Option<OffReason>,
}

/// True energies and state changes of a run.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct GroundTruth {
    /// Energy drawn from the source, J.
    pub drawn_j: f64,
    /// Energy the load took, J.
    pub delivered_j: f64,
    /// Energy the converter put out (into storage and load), J.
    pub converted_j: f64,
    /// Output storage energy at the start and now, J.
    pub storage_start_j: f64,
    /// Output storage energy now, J.
    pub storage_now_j: f64,
    /// Every change of the converter's state.
    pub changes: Vec<ConverterChange>,
    /// Samples simulated.
    pub samples: u64,
    /// Simulated time so far, s.
    pub elapsed_s: f64,
    /// When the load first had power, s.
    pub load_first_powered_s: Option<f64>,
    /// Times the load lost power after it first had it (brown-outs).
    pub load_brownouts: u32,
    /// Time without power after it first had it, s.
    pub load_unpowered_s: f64,
    /// When the load lost power (after it first had it), s from the start.
    pub brownouts_s: Vec<f64>,
    /// When the load got power (the first time and after each brown-out), s.
    pub load_powered_s: Vec<f64>,
    #[serde(skip)]
    load_powered: bool,
    #[serde(skip)]
    last: Option<(f64, f64, f64, f64)>,
}

impl GroundTruth {
    /// Notes whether the load had power at `t_s`, `dt_s` after the last step.
    pub fn note_load(&mut self, t_s: f64, dt_s: f64, powered: bool) {
        if powered && self.load_first_powered_s.is_none() {
            self.load_first_powered_s = Some(t_s);
        }
        if powered && !self.load_powered {
            self.load_powered_s.push(t_s);
        }
        if self.load_first_powered_s.is_some() {
            if self.load_powered && !powered {
                self.load_brownouts += 1;
                self.brownouts_s.push(t_s);
            }
            if !powered {
                self.load_unpowered_s += dt_s;
            }
        }
        self.load_powered = powered;
    }

    /// Adds one step ending at `t_s` (trapezoidal rule on the true powers).
    pub fn add(&mut self, t_s: f64, step: &StepOutcome, output_capacitance_f: f64) {
        let p_in = step.input_v * step.input_a;
        let p_load = step.output_v * step.load_a;
        let storage = 0.5 * output_capacitance_f * step.output_v * step.output_v;
        match self.last {
            Some((t0, p_in0, p_load0, p_conv0)) => {
                let dt = t_s - t0;
                self.drawn_j += 0.5 * (p_in0 + p_in) * dt;
                self.delivered_j += 0.5 * (p_load0 + p_load) * dt;
                self.converted_j += 0.5 * (p_conv0 + step.converted_w) * dt;
            }
            None => self.storage_start_j = storage,
        }
        self.storage_now_j = storage;
        self.last = Some((t_s, p_in, p_load, step.converted_w));
        self.samples += 1;
        self.elapsed_s = t_s;
        let converting = step.off.is_none();
        let changed = match self.changes.last() {
            Some(last) => last.converting != converting || last.reason != step.off,
            None => true,
        };
        if changed {
            self.changes.push(ConverterChange {
                t_s,
                converting,
                reason: step.off,
            });
        }
    }

    /// When the converter stopped for lack of input (cutoffs), s.
    pub fn cutoffs_s(&self) -> impl Iterator<Item = f64> + '_ {
        self.changes
            .iter()
            .filter(|c| !c.converting && c.reason == Some(OffReason::Starved))
            .map(|c| c.t_s)
    }

    /// When the converter started converting, s.
    pub fn starts_s(&self) -> impl Iterator<Item = f64> + '_ {
        self.changes.iter().filter(|c| c.converting).map(|c| c.t_s)
    }

    /// True run efficiency: (delivered + storage gain) / drawn.
    pub fn efficiency(&self) -> Option<f64> {
        (self.drawn_j > 0.0)
            .then(|| (self.delivered_j + self.storage_now_j - self.storage_start_j) / self.drawn_j)
    }
}
