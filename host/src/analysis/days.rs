//! Daily energy budgets: 24-hour blocks of run time from the start of the
//! first report, with energy in and out, outage time and whether the day was
//! energy neutral.

use std::collections::BTreeMap;

use gleaner_protocol::Report;

use super::energy::joules;
use super::report::DayBudget;

/// Seconds in a budget day.
pub const DAY_S: f64 = 86_400.0;

#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
struct Day {
    covered_s: f64,
    drawn_nj: u128,
    delivered_nj: u128,
    stored_nj: i128,
    outage_s: f64,
}

/// Sums each day's reports.
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct DailyBudgets {
    days: BTreeMap<u32, Day>,
}

/// Seconds of a report spent without output (cutoff or stalled).
pub fn outage_s(r: &Report) -> f64 {
    f64::from(r.state_ms.cutoff_ms + r.state_ms.stalled_ms) / 1e3
}

impl DailyBudgets {
    /// Adds a report that started at `start_s` of run time, the run having
    /// started at `first_s`.
    pub fn push(&mut self, start_s: f64, first_s: f64, r: &Report) {
        let day = ((start_s - first_s).max(0.0) / DAY_S).floor() as u32;
        let d = self.days.entry(day).or_default();
        d.covered_s += f64::from(r.interval_ms) / 1e3;
        d.drawn_nj += u128::from(r.drawn_nj);
        d.delivered_nj += u128::from(r.delivered_nj);
        d.stored_nj += i128::from(r.stored_nj);
        d.outage_s += outage_s(r);
    }

    /// The days, first first.
    pub fn finish(&self) -> Vec<DayBudget> {
        self.days
            .iter()
            .map(|(&day, d)| DayBudget {
                day,
                covered_s: d.covered_s,
                drawn_j: d.drawn_nj as f64 / 1e9,
                delivered_j: d.delivered_nj as f64 / 1e9,
                stored_j: joules(d.stored_nj),
                outage_s: d.outage_s,
                energy_neutral: d.outage_s == 0.0 && d.stored_nj >= 0,
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::report;

    #[test]
    fn reports_fall_into_24_hour_blocks_from_the_first() {
        let mut days = DailyBudgets::default();
        let first = 1_000.0;
        days.push(
            first,
            first,
            &report(2_000_000_000, 1_000_000_000, 500_000_000),
        );
        // 86,399 s after the start: still day 0; 86,400 s: day 1.
        days.push(first + 86_399.0, first, &report(1_000_000_000, 0, 0));
        let mut dark = report(0, 1_000_000_000, -2_000_000_000);
        dark.state_ms.cutoff_ms = 4_000;
        days.push(first + DAY_S, first, &dark);
        let out = days.finish();
        assert_eq!(out.len(), 2);
        assert_eq!(
            (out[0].day, out[0].covered_s, out[0].drawn_j),
            (0, 20.0, 3.0)
        );
        assert!(out[0].energy_neutral, "no outage, storage ended up 0.5 J");
        assert_eq!(
            (out[1].day, out[1].stored_j, out[1].outage_s),
            (1, -2.0, 4.0)
        );
        assert!(!out[1].energy_neutral);
    }
}
