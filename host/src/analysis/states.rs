//! Time in each converter state over the run.

use gleaner_protocol::{ConverterState, Report};

use super::report::StateShare;

/// Sums the time of each state from the reports' per-state durations.
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct StateTimes {
    seconds: [f64; ConverterState::COUNT],
}

/// The index of a state in wire order.
pub(crate) fn state_index(state: ConverterState) -> usize {
    ConverterState::ALL
        .iter()
        .position(|s| *s == state)
        .unwrap_or(0)
}

/// One report's seconds in each state, in wire order.
pub(crate) fn report_state_s(r: &Report) -> [f64; ConverterState::COUNT] {
    let mut state_s = [0.0; ConverterState::COUNT];
    for state in ConverterState::ALL {
        state_s[state_index(state)] = f64::from(r.state_ms.get(state)) / 1e3;
    }
    state_s
}

impl StateTimes {
    /// Adds one report's time in each state.
    pub fn push(&mut self, r: &Report) {
        for (total, s) in self.seconds.iter_mut().zip(report_state_s(r)) {
            *total += s;
        }
    }

    /// Seconds in all states together.
    pub fn total_s(&self) -> f64 {
        self.seconds.iter().sum()
    }

    /// Each state's seconds and share of `covered_s`.
    pub fn finish(&self, covered_s: f64) -> Vec<StateShare> {
        ConverterState::ALL
            .iter()
            .map(|s| {
                let seconds = self.seconds[state_index(*s)];
                StateShare {
                    state: s.name().into(),
                    seconds,
                    share: if covered_s > 0.0 {
                        seconds / covered_s
                    } else {
                        0.0
                    },
                }
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::report;

    #[test]
    fn shares_of_each_state() {
        let mut times = StateTimes::default();
        let mut r = report(0, 0, 0);
        r.state_ms.idle_ms = 0;
        r.state_ms.harvesting_ms = 7_500;
        r.state_ms.sagging_ms = 2_500;
        times.push(&r);
        r.state_ms.harvesting_ms = 0;
        r.state_ms.sagging_ms = 0;
        r.state_ms.cutoff_ms = 10_000;
        times.push(&r);
        // 7.5 s + 2.5 s + 10 s = 20 s: shares 0.375, 0.125 and 0.5.
        assert_eq!(times.total_s(), 20.0);
        let shares = times.finish(20.0);
        let of = |name: &str| {
            shares
                .iter()
                .find(|s| s.state == name)
                .map(|s| (s.seconds, s.share))
        };
        assert_eq!(of("harvesting"), Some((7.5, 0.375)));
        assert_eq!(of("sagging"), Some((2.5, 0.125)));
        assert_eq!(of("cutoff"), Some((10.0, 0.5)));
        assert_eq!(of("idle"), Some((0.0, 0.0)));
        assert_eq!(shares.len(), ConverterState::COUNT);
    }
}
