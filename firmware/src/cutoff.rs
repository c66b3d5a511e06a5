//! The cutoff state machine: what the converter is doing and why it changed.
//!
//! Every sample is classified against the thresholds; a condition that asks for
//! another state must hold without a break for `debounce_ms` before the state
//! changes. The start threshold sits above the hold threshold (hysteresis), so
//! a converter that stopped for lack of input restarts only once the input has
//! really come back.

use gleaner_protocol::{ConverterState, Event, Thresholds, TransitionCause};

/// What the state machine looks at for one sample.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Observation {
    /// Harvester voltage.
    pub input_uv: u32,
    /// Harvester current.
    pub input_na: u32,
    /// Output (load or storage) voltage.
    pub output_uv: u32,
    /// Latest forecast of time until the input falls to the hold threshold.
    pub input_cutoff_in_ms: Option<u32>,
}

/// The state a sample asks for in `state`, with the reason, or None to stay.
/// Input starvation is checked first, then a fault, then the milder conditions.
///
/// A converter that stops lets its input rise to the source's open-circuit
/// voltage, which may sit between hold and start: so an idle input current
/// with the input below start is a cutoff too. An idle input current with the
/// input able to start the converter and the output not up is a stall, which
/// ends once the converter draws again with the output not collapsed.
/// Leaving `Sagging` needs the input a full margin clear of the sagging band
/// (`hold + 2 * margin`) and the forecast beyond twice the horizon (hysteresis).
pub fn wanted_transition(
    state: ConverterState,
    time_in_state_ms: u64,
    seen: &Observation,
    t: &Thresholds,
) -> Option<(ConverterState, TransitionCause)> {
    use ConverterState::*;
    use TransitionCause::*;
    let input_low = seen.input_uv < t.hold_uv;
    let input_near = seen.input_uv < t.hold_uv.saturating_add(t.sag_margin_uv);
    let can_start = seen.input_uv >= t.start_uv;
    let output_up = seen.output_uv >= t.output_up_uv;
    let output_down = seen.output_uv < t.output_down_uv;
    let input_clear = seen.input_uv >= t.hold_uv.saturating_add(t.sag_margin_uv.saturating_mul(2));
    let forecast_short = seen
        .input_cutoff_in_ms
        .is_some_and(|ms| ms <= t.forecast_horizon_ms);
    let forecast_clear = seen
        .input_cutoff_in_ms
        .is_none_or(|ms| ms > t.forecast_horizon_ms.saturating_mul(2));
    let idle = seen.input_na < t.input_idle_na;
    match state {
        Idle if output_up && !input_low && !idle => Some((Harvesting, OutputUp)),
        Idle if can_start => Some((ColdStart, InputAboveStart)),
        Idle if !idle && !input_low => Some((ColdStart, ConverterStarted)),
        ColdStart if input_low => Some((Idle, InputBelowHold)),
        ColdStart if output_up => Some((Harvesting, OutputUp)),
        ColdStart if time_in_state_ms >= u64::from(t.cold_start_timeout_ms) => {
            Some((Stalled, ColdStartTimeout))
        }
        Harvesting | Sagging if input_low => Some((CutOff, InputBelowHold)),
        Harvesting | Sagging if idle && !can_start => Some((CutOff, ConverterIdle)),
        Harvesting | Sagging if output_down => Some((Stalled, OutputCollapsed)),
        Harvesting | Sagging if idle && !output_up => Some((Stalled, ConverterIdle)),
        Harvesting if input_near => Some((Sagging, InputNearHold)),
        Harvesting if forecast_short => Some((Sagging, ForecastUnderHorizon)),
        Sagging if input_clear && forecast_clear => Some((Harvesting, Recovered)),
        CutOff if can_start => Some((ColdStart, InputAboveStart)),
        Stalled if input_low => Some((CutOff, InputBelowHold)),
        Stalled if !idle && !output_down => Some((Harvesting, Recovered)),
        _ => None,
    }
}

/// Share of the forecast horizon a short forecast must last before it raises
/// `Sagging`: a passing cloud's dip is over before then, a sunset is not.
pub const FORECAST_CONFIRM_DIVISOR: u32 = 4;

/// How long the condition for a transition from `from` with `cause` must
/// hold: the debounce time; for Sagging raised by a forecast, and for leaving
/// Sagging once the input and forecast are clear, a quarter of the horizon
/// (a forecast missing for a few minutes while clouds pass does not end a
/// warning that the next minutes renew).
pub fn hold_time_ms(from: ConverterState, cause: TransitionCause, t: &Thresholds) -> u32 {
    let confirm = t
        .debounce_ms
        .max(t.forecast_horizon_ms / FORECAST_CONFIRM_DIVISOR);
    match (from, cause) {
        (_, TransitionCause::ForecastUnderHorizon) => confirm,
        (ConverterState::Sagging, TransitionCause::Recovered) => confirm,
        _ => t.debounce_ms,
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Pending {
    to: ConverterState,
    cause: TransitionCause,
    since_ms: u64,
    /// What was seen when the condition first held.
    trigger: Observation,
}

/// The debounced state machine.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CutoffDetector {
    state: ConverterState,
    entered_ms: u64,
    pending: Option<Pending>,
}

impl Default for CutoffDetector {
    fn default() -> Self {
        Self::new(0)
    }
}

impl CutoffDetector {
    /// Starts in `Idle` at `now_ms`.
    pub const fn new(now_ms: u64) -> Self {
        CutoffDetector {
            state: ConverterState::Idle,
            entered_ms: now_ms,
            pending: None,
        }
    }

    /// The present state.
    pub const fn state(&self) -> ConverterState {
        self.state
    }

    /// When the present state was entered.
    pub const fn entered_ms(&self) -> u64 {
        self.entered_ms
    }

    /// Classifies one observation at `now_ms`; returns the event when the state changes.
    pub fn update(&mut self, now_ms: u64, seen: &Observation, t: &Thresholds) -> Option<Event> {
        let in_state = now_ms.saturating_sub(self.entered_ms);
        let Some((to, cause)) = wanted_transition(self.state, in_state, seen, t) else {
            self.pending = None;
            return None;
        };
        let pending = match self.pending {
            Some(p) if p.to == to => p,
            _ => Pending {
                to,
                cause,
                since_ms: now_ms,
                trigger: *seen,
            },
        };
        let hold_ms = hold_time_ms(self.state, pending.cause, t);
        if now_ms.saturating_sub(pending.since_ms) < u64::from(hold_ms) {
            self.pending = Some(pending);
            return None;
        }
        let event = Event {
            from: self.state,
            to,
            cause: pending.cause,
            trigger_input_uv: pending.trigger.input_uv,
            trigger_output_uv: pending.trigger.output_uv,
            input_uv: seen.input_uv,
            output_uv: seen.output_uv,
        };
        self.state = to;
        self.entered_ms = now_ms;
        self.pending = None;
        Some(event)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::DEFAULT_THRESHOLDS as T;
    use ConverterState::*;
    use TransitionCause::*;

    /// Input classes against the default thresholds (start 0.8 V, hold 0.7 V,
    /// margin 50 mV, output up 2.0 V, down 1.6 V).
    const DEAD: u32 = 100_000;
    const LOW: u32 = 650_000; // below hold
    const NEAR: u32 = 720_000; // above hold, inside the sag margin
    const MID: u32 = 770_000; // between hold + margin and start
    const GOOD: u32 = 1_000_000; // above start
    const OUT_UP: u32 = 2_500_000;
    const OUT_MID: u32 = 1_800_000;
    const OUT_DOWN: u32 = 1_000_000;

    const DRAWING: u32 = 500_000; // input current of a running converter

    fn obs(input_uv: u32, output_uv: u32) -> Observation {
        Observation {
            input_uv,
            input_na: DRAWING,
            output_uv,
            input_cutoff_in_ms: None,
        }
    }

    fn idle(input_uv: u32, output_uv: u32) -> Observation {
        Observation {
            input_na: 0,
            ..obs(input_uv, output_uv)
        }
    }

    /// The full table: every state against every input class.
    #[test]
    fn transition_table() {
        let o = |i, out| obs(i, out);
        type Row = (
            ConverterState,
            Observation,
            Option<(ConverterState, TransitionCause)>,
        );
        let cases: &[Row] = &[
            (Idle, o(DEAD, OUT_DOWN), None),
            (Idle, o(GOOD, OUT_DOWN), Some((ColdStart, InputAboveStart))),
            (Idle, o(GOOD, OUT_UP), Some((Harvesting, OutputUp))),
            (Idle, o(LOW, OUT_UP), None),
            (ColdStart, o(GOOD, OUT_DOWN), None),
            (ColdStart, o(MID, OUT_MID), None),
            (ColdStart, o(LOW, OUT_DOWN), Some((Idle, InputBelowHold))),
            (ColdStart, o(GOOD, OUT_UP), Some((Harvesting, OutputUp))),
            (Harvesting, o(GOOD, OUT_UP), None),
            (Harvesting, o(MID, OUT_MID), None),
            (Harvesting, o(NEAR, OUT_UP), Some((Sagging, InputNearHold))),
            (Harvesting, o(LOW, OUT_UP), Some((CutOff, InputBelowHold))),
            (
                Harvesting,
                o(GOOD, OUT_DOWN),
                Some((Stalled, OutputCollapsed)),
            ),
            (Harvesting, o(LOW, OUT_DOWN), Some((CutOff, InputBelowHold))),
            (Sagging, o(NEAR, OUT_UP), None),
            (Sagging, o(MID, OUT_UP), None),
            (Sagging, o(GOOD, OUT_UP), Some((Harvesting, Recovered))),
            (Sagging, o(LOW, OUT_UP), Some((CutOff, InputBelowHold))),
            (Sagging, o(NEAR, OUT_DOWN), Some((Stalled, OutputCollapsed))),
            (CutOff, o(LOW, OUT_DOWN), None),
            (CutOff, o(MID, OUT_UP), None),
            (
                CutOff,
                o(GOOD, OUT_DOWN),
                Some((ColdStart, InputAboveStart)),
            ),
            (Stalled, o(GOOD, OUT_DOWN), None),
            (Stalled, o(GOOD, OUT_UP), Some((Harvesting, Recovered))),
            (Stalled, o(LOW, OUT_DOWN), Some((CutOff, InputBelowHold))),
            // Idle input current: the converter is not drawing.
            (Idle, idle(GOOD, OUT_UP), Some((ColdStart, InputAboveStart))),
            (Idle, idle(MID, OUT_DOWN), None),
            (Idle, o(MID, OUT_DOWN), Some((ColdStart, ConverterStarted))),
            (Harvesting, idle(MID, OUT_UP), Some((CutOff, ConverterIdle))),
            (Sagging, idle(NEAR, OUT_MID), Some((CutOff, ConverterIdle))),
            (
                Harvesting,
                idle(GOOD, OUT_MID),
                Some((Stalled, ConverterIdle)),
            ),
            (Harvesting, idle(GOOD, OUT_UP), None), // output in regulation: a pause
            (Stalled, idle(GOOD, OUT_UP), None),
            (Stalled, o(GOOD, OUT_MID), Some((Harvesting, Recovered))), // drawing again
        ];
        for (state, seen, expected) in cases {
            assert_eq!(
                wanted_transition(*state, 0, seen, &T),
                *expected,
                "{state:?} {seen:?}"
            );
        }
    }

    #[test]
    fn forecast_under_horizon_sags_and_clears() {
        let mut seen = obs(GOOD, OUT_UP);
        seen.input_cutoff_in_ms = Some(T.forecast_horizon_ms);
        assert_eq!(
            wanted_transition(Harvesting, 0, &seen, &T),
            Some((Sagging, ForecastUnderHorizon))
        );
        assert_eq!(wanted_transition(Sagging, 0, &seen, &T), None);
        seen.input_cutoff_in_ms = Some(T.forecast_horizon_ms + 1);
        assert_eq!(wanted_transition(Harvesting, 0, &seen, &T), None);
        // Hysteresis: recovery needs the forecast beyond twice the horizon.
        assert_eq!(wanted_transition(Sagging, 0, &seen, &T), None);
        seen.input_cutoff_in_ms = Some(2 * T.forecast_horizon_ms + 1);
        assert_eq!(
            wanted_transition(Sagging, 0, &seen, &T),
            Some((Harvesting, Recovered))
        );
    }

    #[test]
    fn sagging_is_raised_and_left_after_a_quarter_horizon() -> Result<(), &'static str> {
        // Default horizon 60 s, debounce 200 ms: the forecast needs 15 s.
        let mut detector = CutoffDetector::new(0);
        let mut seen = obs(GOOD, OUT_UP);
        for ms in (0..=300).step_by(100) {
            detector.update(ms, &seen, &T);
        }
        assert_eq!(detector.state(), Harvesting);
        seen.input_cutoff_in_ms = Some(30_000);
        let confirm = u64::from(T.forecast_horizon_ms / FORECAST_CONFIRM_DIVISOR);
        assert!(confirm > u64::from(T.debounce_ms));
        // A dip of the forecast shorter than that (a passing cloud) does nothing.
        for ms in (1_000..1_000 + confirm).step_by(100) {
            assert_eq!(detector.update(ms, &seen, &T), None);
        }
        let event = detector
            .update(1_000 + confirm, &seen, &T)
            .ok_or("Sagging after a quarter horizon")?;
        assert_eq!((event.to, event.cause), (Sagging, ForecastUnderHorizon));
        // Leaving needs as long: a forecast gone for less (clouds hide the
        // trend) keeps the warning up.
        let start = 1_000 + confirm + 100;
        seen.input_cutoff_in_ms = None;
        for ms in (start..start + confirm).step_by(100) {
            assert_eq!(detector.update(ms, &seen, &T), None);
        }
        let event = detector
            .update(start + confirm, &seen, &T)
            .ok_or("Harvesting after a quarter horizon clear")?;
        assert_eq!((event.to, event.cause), (Harvesting, Recovered));
        // Other transitions keep the debounce time.
        assert_eq!(hold_time_ms(Stalled, Recovered, &T), T.debounce_ms);
        assert_eq!(hold_time_ms(Sagging, InputBelowHold, &T), T.debounce_ms);
        Ok(())
    }

    #[test]
    fn cold_start_timeout_edges() {
        let seen = obs(GOOD, OUT_MID);
        let timeout = u64::from(T.cold_start_timeout_ms);
        assert_eq!(wanted_transition(ColdStart, timeout - 1, &seen, &T), None);
        assert_eq!(
            wanted_transition(ColdStart, timeout, &seen, &T),
            Some((Stalled, ColdStartTimeout))
        );
    }

    #[test]
    fn hysteresis_between_hold_and_start() {
        // Input at 0.75 V: above hold, below start. A running converter keeps
        // running; a stopped one stays stopped.
        let seen = obs(750_000, OUT_UP);
        assert_eq!(wanted_transition(Harvesting, 0, &seen, &T), None);
        assert_eq!(
            wanted_transition(CutOff, 0, &obs(750_000, OUT_DOWN), &T),
            None
        );
        // Exactly at the thresholds.
        assert_eq!(
            wanted_transition(CutOff, 0, &obs(T.start_uv, OUT_DOWN), &T).map(|w| w.0),
            Some(ColdStart)
        );
        assert_eq!(
            wanted_transition(CutOff, 0, &obs(T.start_uv - 1, OUT_DOWN), &T),
            None
        );
        assert_eq!(
            wanted_transition(Sagging, 0, &obs(T.hold_uv, OUT_UP), &T),
            None
        );
        let clear = T.hold_uv + 2 * T.sag_margin_uv;
        assert_eq!(
            wanted_transition(Sagging, 0, &obs(clear - 1, OUT_UP), &T),
            None
        );
        assert_eq!(
            wanted_transition(Sagging, 0, &obs(clear, OUT_UP), &T).map(|w| w.0),
            Some(Harvesting)
        );
        assert_eq!(
            wanted_transition(Sagging, 0, &obs(T.hold_uv - 1, OUT_UP), &T).map(|w| w.0),
            Some(CutOff)
        );
    }

    fn harvesting_detector() -> CutoffDetector {
        CutoffDetector {
            state: Harvesting,
            entered_ms: 0,
            pending: None,
        }
    }

    #[test]
    fn debounce_one_tick_short_exactly_at_and_past() {
        let low = obs(LOW, OUT_UP);
        let mut d = harvesting_detector();
        let start = 1_000;
        let debounce = u64::from(T.debounce_ms);
        for t in start..start + debounce {
            assert_eq!(d.update(t, &low, &T), None, "one tick short at {t}");
        }
        let event = d.update(start + debounce, &low, &T);
        assert_eq!(
            event.map(|e| (e.from, e.to, e.cause)),
            Some((Harvesting, CutOff, InputBelowHold)),
            "exactly at the debounce time"
        );
        assert_eq!(d.state(), CutOff);
        assert_eq!(d.entered_ms(), start + debounce);
        // One tick past a fresh condition in another detector also switches.
        let mut late = harvesting_detector();
        late.update(0, &low, &T);
        assert!(late.update(debounce + 1, &low, &T).is_some());
    }

    #[test]
    fn a_break_in_the_condition_restarts_the_debounce() {
        let low = obs(LOW, OUT_UP);
        let good = obs(GOOD, OUT_UP);
        let mut d = harvesting_detector();
        let debounce = u64::from(T.debounce_ms);
        d.update(0, &low, &T);
        d.update(debounce - 1, &good, &T);
        assert_eq!(d.update(debounce, &low, &T), None);
        assert_eq!(d.update(2 * debounce - 1, &low, &T), None);
        assert!(d.update(2 * debounce, &low, &T).is_some());
    }

    #[test]
    fn a_changed_target_restarts_the_debounce() {
        // Near hold first (-> Sagging), then below hold (-> CutOff): the CutOff
        // debounce counts from when the input went below hold.
        let mut d = harvesting_detector();
        let debounce = u64::from(T.debounce_ms);
        d.update(0, &obs(NEAR, OUT_UP), &T);
        d.update(debounce / 2, &obs(LOW, OUT_UP), &T);
        assert_eq!(d.update(debounce, &obs(LOW, OUT_UP), &T), None);
        let e = d.update(debounce / 2 + debounce, &obs(LOW, OUT_UP), &T);
        assert_eq!(e.map(|e| e.to), Some(CutOff));
    }
}
