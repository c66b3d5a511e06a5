//! Load outages: when the load itself lost power (its supply below its own
//! minimum), why, and the chain of what led there.

use gleaner_protocol::{LoadCause, LoadEvent};
use serde::{Deserialize, Serialize};

use super::spans::Spans;
use super::text::duration;

/// One time the load was without power.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LoadOutage {
    /// Brown-out, s of run time.
    pub start_s: f64,
    /// Supply back, s of run time (the end of the log while ongoing).
    pub end_s: f64,
    /// Length, s.
    pub duration_s: f64,
    /// Why: `input-cutoff`, `load-too-heavy` or `converter-fault`.
    pub cause: String,
    /// When the converter stopped before it (input cut off or fault), s of run time.
    pub converter_stopped_s: Option<f64>,
    /// How long storage carried the load after the converter stopped, s.
    pub storage_carried_s: Option<f64>,
    /// Storage (output) voltage at the brown-out, V.
    pub storage_v: f64,
    /// Converter output less load power at the brown-out, W (negative: draining).
    pub net_w: f64,
    /// The cause chain in words.
    pub chain: String,
    /// Still without power at the end of the log.
    pub ongoing: bool,
}

/// Collects load outages from load events.
#[derive(Debug, Default, serde::Serialize, serde::Deserialize)]
pub struct LoadOutages {
    outages: Spans<LoadOutage>,
}

/// The words of a cause chain.
fn chain(cause: LoadCause, start_s: f64, stopped_s: Option<f64>) -> String {
    let at = |s: f64| format!("at {}", duration(s));
    match (cause, stopped_s) {
        (LoadCause::InputCutOff, Some(stop)) => format!(
            "input cut off {}, storage carried the load {}, load browned out {}",
            at(stop),
            duration(start_s - stop),
            at(start_s)
        ),
        (LoadCause::ConverterFault, Some(stop)) => format!(
            "converter stalled {} with input healthy, storage carried the load {}, load browned out {}",
            at(stop),
            duration(start_s - stop),
            at(start_s)
        ),
        _ => format!(
            "load drew more than the harvest supplied while harvesting, load browned out {}",
            at(start_s)
        ),
    }
}

impl LoadOutages {
    /// Nothing seen yet.
    pub fn new() -> Self {
        Self::default()
    }

    /// Takes one load event at `t_s` of run time.
    pub fn push(&mut self, t_s: f64, e: &LoadEvent) {
        if e.powered {
            self.close_at(t_s, false);
            return;
        }
        if self.outages.is_open() {
            return;
        }
        let stopped_s = match e.cause {
            LoadCause::InputCutOff | LoadCause::ConverterFault => {
                Some(t_s - f64::from(e.converter_state_ms) / 1e3)
            }
            _ => None,
        };
        self.outages.open(LoadOutage {
            start_s: t_s,
            end_s: t_s,
            duration_s: 0.0,
            cause: e.cause.name().into(),
            converter_stopped_s: stopped_s,
            storage_carried_s: stopped_s.map(|s| t_s - s),
            storage_v: f64::from(e.output_uv) / 1e6,
            net_w: e.net_nw as f64 / 1e9,
            chain: chain(e.cause, t_s, stopped_s),
            ongoing: true,
        });
    }

    /// Closes an open outage at `t_s` (a reboot, or the end of the log).
    pub fn close_at(&mut self, t_s: f64, ongoing: bool) {
        self.outages.close_at(t_s, ongoing);
    }

    /// Every outage, the open one closed at `end_s` as ongoing.
    pub fn finish(self, end_s: f64) -> Vec<LoadOutage> {
        self.outages.finish(end_s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use gleaner_protocol::ConverterState;

    fn event(powered: bool, cause: LoadCause, converter_state_ms: u32) -> LoadEvent {
        LoadEvent {
            powered,
            cause,
            output_uv: 1_799_000,
            input_uv: 300_000,
            converter: ConverterState::CutOff,
            converter_state_ms,
            net_nw: -97_000,
        }
    }

    #[test]
    fn a_brownout_after_a_cutoff_tells_the_whole_chain() {
        let mut outages = LoadOutages::new();
        // Converter cut off at 1000 s; storage carried the load 31 min.
        outages.push(2860.0, &event(false, LoadCause::InputCutOff, 1_860_000));
        outages.push(2870.0, &event(false, LoadCause::InputCutOff, 1_870_000));
        outages.push(5000.0, &event(true, LoadCause::SupplyRestored, 0));
        let list = outages.finish(6000.0);
        assert_eq!(list.len(), 1);
        let o = &list[0];
        assert_eq!((o.start_s, o.end_s, o.duration_s), (2860.0, 5000.0, 2140.0));
        assert_eq!(o.converter_stopped_s, Some(1000.0));
        assert_eq!(o.storage_carried_s, Some(1860.0));
        assert_eq!(o.net_w, -97e-6);
        assert!(!o.ongoing);
        assert!(o.chain.starts_with("input cut off at "), "{}", o.chain);
        assert!(
            o.chain.contains("storage carried the load 00:31:00"),
            "{}",
            o.chain
        );
    }

    #[test]
    fn a_heavy_load_has_no_converter_stop_and_an_open_outage_is_ongoing() {
        let mut outages = LoadOutages::new();
        outages.push(100.0, &event(false, LoadCause::LoadTooHeavy, 50_000));
        let list = outages.finish(400.0);
        assert_eq!(list[0].converter_stopped_s, None);
        assert_eq!(list[0].cause, "load-too-heavy");
        assert!(list[0].ongoing);
        assert_eq!(list[0].duration_s, 300.0);
    }
}
