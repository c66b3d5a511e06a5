//! Converter outages and the transitions that make them: from a transition
//! into `CutOff` or `Stalled` until the next one out of both. A transition
//! whose event was lost shows up as a changed state in the next report; an
//! outage under way when the log starts begins with the first report.

use gleaner_protocol::{ConverterState, Event};

use super::report::{Outage, OutageCause, Transition};
use super::spans::Spans;

/// Transitions listed before the rest are only counted.
pub const MAX_TRANSITIONS: usize = 10_000;

/// Follows the converter's state through events and reports.
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct ConverterOutages {
    state: Option<ConverterState>,
    outages: Spans<Outage>,
    transitions: Vec<Transition>,
    not_listed: u64,
    /// The last report's mean input and output voltage, V.
    last_v: (f64, f64),
}

/// What the outages and transitions came to.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct OutageList {
    /// Every outage, in order.
    pub outages: Vec<Outage>,
    /// The first [`MAX_TRANSITIONS`] transitions.
    pub transitions: Vec<Transition>,
    /// Transitions beyond those listed.
    pub not_listed: u64,
}

impl ConverterOutages {
    /// A transition the node reported at `t_s`.
    pub fn push_event(&mut self, t_s: f64, e: &Event) {
        self.set_state(t_s, e.from, e.to, e.cause.name());
    }

    /// A report that ended at `t_s` after `length_s`, in `state`, with these
    /// mean input and output voltages.
    pub fn push_report(
        &mut self,
        t_s: f64,
        length_s: f64,
        state: ConverterState,
        volts: (f64, f64),
    ) {
        match self.state {
            Some(known) if known != state => self.set_state(t_s, known, state, "seen-in-report"),
            Some(_) => {}
            None => {
                self.state = Some(state);
                if state.is_outage() {
                    self.set_state(t_s - length_s, state, state, "in-progress-at-start");
                }
            }
        }
        self.last_v = volts;
    }

    /// The node rebooted (or the log ended) at `t_s`: an open outage ends
    /// there, and the next state is learned afresh.
    pub fn close_at(&mut self, t_s: f64, ongoing: bool) {
        self.outages.close_at(t_s, ongoing);
    }

    /// Forgets the state (a new boot starts from its first message).
    pub fn forget_state(&mut self) {
        self.state = None;
    }

    fn set_state(&mut self, t_s: f64, from: ConverterState, to: ConverterState, cause: &str) {
        if self.transitions.len() < MAX_TRANSITIONS {
            self.transitions.push(Transition {
                t_s,
                from: from.name().into(),
                to: to.name().into(),
                cause: cause.into(),
            });
        } else {
            self.not_listed += 1;
        }
        if to.is_outage() && !self.outages.is_open() {
            self.outages.open(Outage {
                start_s: t_s,
                end_s: t_s,
                duration_s: 0.0,
                cause: if to == ConverterState::Stalled {
                    OutageCause::ConverterFault
                } else {
                    OutageCause::StarvedOfInput
                },
                node_cause: cause.into(),
                input_v_before: self.last_v.0,
                storage_v_before: self.last_v.1,
                ongoing: true,
            });
        } else if !to.is_outage() {
            self.close_at(t_s, false);
        }
        self.state = Some(to);
    }

    /// Ends the run at `end_s` (an outage still open is ongoing).
    pub fn finish(self, end_s: f64) -> OutageList {
        OutageList {
            outages: self.outages.finish(end_s),
            transitions: self.transitions,
            not_listed: self.not_listed,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use gleaner_protocol::{ConverterState as S, TransitionCause};

    fn event(from: S, to: S, cause: TransitionCause) -> Event {
        Event {
            from,
            to,
            cause,
            trigger_input_uv: 0,
            trigger_output_uv: 0,
            input_uv: 0,
            output_uv: 0,
        }
    }

    #[test]
    fn an_outage_runs_from_cutoff_to_the_first_state_out_of_it() {
        let mut o = ConverterOutages::default();
        o.push_report(10.0, 10.0, S::Harvesting, (0.45, 3.1));
        o.push_event(
            100.0,
            &event(S::Sagging, S::CutOff, TransitionCause::InputBelowHold),
        );
        o.push_event(
            400.0,
            &event(S::CutOff, S::ColdStart, TransitionCause::InputAboveStart),
        );
        o.push_event(
            460.0,
            &event(S::ColdStart, S::Harvesting, TransitionCause::OutputUp),
        );
        let list = o.finish(500.0);
        // Cut off at 100 s; the cold start at 400 s ends it.
        assert_eq!(list.outages.len(), 1);
        let first = &list.outages[0];
        assert_eq!(
            (first.start_s, first.end_s, first.duration_s),
            (100.0, 400.0, 300.0)
        );
        assert_eq!(first.cause, OutageCause::StarvedOfInput);
        assert_eq!((first.input_v_before, first.storage_v_before), (0.45, 3.1));
        assert!(!first.ongoing);
        assert_eq!(list.transitions.len(), 3);
    }

    #[test]
    fn a_stall_is_a_converter_fault_and_one_open_at_the_end_is_ongoing() {
        let mut o = ConverterOutages::default();
        o.push_event(
            50.0,
            &event(S::Harvesting, S::Stalled, TransitionCause::ConverterIdle),
        );
        let list = o.finish(80.0);
        assert_eq!(list.outages[0].cause, OutageCause::ConverterFault);
        assert_eq!(
            (list.outages[0].duration_s, list.outages[0].ongoing),
            (30.0, true)
        );
    }

    #[test]
    fn reports_fill_in_lost_events_and_an_outage_under_way_at_the_start() {
        let mut o = ConverterOutages::default();
        // The log starts in cutoff: the outage began with the first report's interval.
        o.push_report(20.0, 10.0, S::CutOff, (0.2, 2.0));
        // The event back to harvesting was lost; the next report says so.
        o.push_report(30.0, 10.0, S::Harvesting, (0.5, 2.5));
        let list = o.finish(30.0);
        assert_eq!(
            (list.outages[0].start_s, list.outages[0].end_s),
            (10.0, 30.0)
        );
        let causes: Vec<&str> = list.transitions.iter().map(|t| t.cause.as_str()).collect();
        assert_eq!(causes, ["in-progress-at-start", "seen-in-report"]);
    }
}
