//! Energy totals: drawn from the harvester, delivered to the load, stored,
//! and the converter's efficiency over the run.

use gleaner_firmware::meter::efficiency_ppm;
use gleaner_protocol::Report;

use super::report::EnergyTotals;

/// Sums the energy of every report, exactly (integer nanojoules).
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct EnergySums {
    drawn_nj: u128,
    delivered_nj: u128,
    stored_nj: i128,
}

/// Nanojoules as joules.
pub(crate) fn joules(nj: i128) -> f64 {
    nj as f64 / 1e9
}

impl EnergySums {
    /// Adds one report's energy.
    pub fn push(&mut self, r: &Report) {
        self.drawn_nj += u128::from(r.drawn_nj);
        self.delivered_nj += u128::from(r.delivered_nj);
        self.stored_nj += i128::from(r.stored_nj);
    }

    /// Energy drawn so far, J.
    pub fn drawn_j(&self) -> f64 {
        self.drawn_nj as f64 / 1e9
    }

    /// Energy delivered so far, J.
    pub fn delivered_j(&self) -> f64 {
        self.delivered_nj as f64 / 1e9
    }

    /// The totals, with the node's efficiency rule (and its energy floor).
    pub fn finish(&self) -> EnergyTotals {
        let stored_nj = self
            .stored_nj
            .clamp(i128::from(i64::MIN), i128::from(i64::MAX)) as i64;
        let drawn_nj = u64::try_from(self.drawn_nj).unwrap_or(u64::MAX);
        let delivered_nj = u64::try_from(self.delivered_nj).unwrap_or(u64::MAX);
        EnergyTotals {
            drawn_j: self.drawn_j(),
            delivered_j: self.delivered_j(),
            stored_j: joules(self.stored_nj),
            efficiency: efficiency_ppm(drawn_nj, delivered_nj, stored_nj)
                .map(|ppm| f64::from(ppm) / 1e6),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::report;

    #[test]
    fn totals_are_exact_sums_and_efficiency_is_converted_over_drawn() {
        let mut sums = EnergySums::default();
        // Hand-computed: drawn 3 + 5 = 8 J, delivered 2 + 3 = 5 J, stored
        // +1 - 0.5 = 0.5 J: efficiency (5 + 0.5) / 8 = 0.6875.
        sums.push(&report(3_000_000_000, 2_000_000_000, 1_000_000_000));
        sums.push(&report(5_000_000_000, 3_000_000_000, -500_000_000));
        let t = sums.finish();
        assert_eq!((t.drawn_j, t.delivered_j, t.stored_j), (8.0, 5.0, 0.5));
        assert_eq!(t.efficiency, Some(0.6875));
    }

    #[test]
    fn no_efficiency_when_nothing_was_drawn() {
        let mut sums = EnergySums::default();
        sums.push(&report(0, 1_000, -1_000));
        assert_eq!(sums.finish().efficiency, None);
    }
}
