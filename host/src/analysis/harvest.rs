//! Harvest prediction: each hour slot the node learned, what its EWMA and WCMA
//! profiles had predicted for it, their errors, tomorrow's harvest and the
//! energy-neutral duty cycle it sustains.

use gleaner_protocol::SlotHarvest;
use serde::{Deserialize, Serialize};

/// Slots kept for the report (a month of hours); the errors count them all.
pub const MAX_SLOTS_LISTED: usize = 24 * 31;

/// One slot of harvest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SlotRow {
    /// End of the slot, s of run time.
    pub t_s: f64,
    /// Slot of the day, counted from the node's boot.
    pub slot: u16,
    /// Energy drawn from the harvester in it, J.
    pub drawn_j: f64,
    /// The EWMA prediction, J.
    pub ewma_j: Option<f64>,
    /// The WCMA prediction, J.
    pub wcma_j: Option<f64>,
}

/// What the report says of harvest prediction.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HarvestForecast {
    /// The slots (at most [`MAX_SLOTS_LISTED`]).
    pub slots: Vec<SlotRow>,
    /// Mean absolute percentage error of EWMA over slots with harvest.
    pub ewma_mape: Option<f64>,
    /// The same for WCMA.
    pub wcma_mape: Option<f64>,
    /// Harvest the node predicts for the next 24 hours, J.
    pub next_day_j: Option<f64>,
    /// The largest duty cycle that harvest sustains (energy-neutral operation).
    pub energy_neutral_duty: Option<f64>,
}

/// Collects slot messages.
#[derive(Debug, Default, serde::Serialize, serde::Deserialize)]
pub struct HarvestSlots {
    slots: Vec<SlotRow>,
    ewma_errors: (f64, u64),
    wcma_errors: (f64, u64),
    next_day_j: Option<f64>,
    largest_j: f64,
}

/// A slot counts for the percentage error when it harvested at least this
/// share of the largest slot seen (night slots have no percentage).
const MAPE_FLOOR: f64 = 0.05;

impl HarvestSlots {
    /// Nothing seen.
    pub fn new() -> Self {
        Self::default()
    }

    /// Takes one slot message at `t_s` of run time.
    pub fn push(&mut self, t_s: f64, h: &SlotHarvest) {
        let j = |uj: u32| f64::from(uj) / 1e6;
        let row = SlotRow {
            t_s,
            slot: h.slot,
            drawn_j: j(h.harvested_uj),
            ewma_j: h.ewma_predicted_uj.map(j),
            wcma_j: h.wcma_predicted_uj.map(j),
        };
        self.largest_j = self.largest_j.max(row.drawn_j);
        if let Some(next) = h.next_day_uj {
            self.next_day_j = Some(next as f64 / 1e6);
        }
        if self.slots.len() < MAX_SLOTS_LISTED {
            self.slots.push(row);
        } else {
            self.add_errors(&row);
        }
    }

    fn add_errors(&mut self, row: &SlotRow) {
        if row.drawn_j <= 0.0 || row.drawn_j < MAPE_FLOOR * self.largest_j {
            return;
        }
        for (predicted, acc) in [
            (row.ewma_j, &mut self.ewma_errors),
            (row.wcma_j, &mut self.wcma_errors),
        ] {
            if let Some(p) = predicted {
                acc.0 += (p - row.drawn_j).abs() / row.drawn_j;
                acc.1 += 1;
            }
        }
    }

    /// The figures; the duty cycle from the load's sleep and active power and
    /// the conversion efficiency (Kansal et al.'s energy-neutral operation:
    /// a day's converted harvest pays a day of sleep plus the active share).
    pub fn finish(
        mut self,
        sleep_w: f64,
        active_w: f64,
        efficiency: Option<f64>,
    ) -> HarvestForecast {
        let listed = std::mem::take(&mut self.slots);
        for row in &listed {
            self.add_errors(row);
        }
        let mape = |(sum, n): (f64, u64)| (n > 0).then(|| sum / n as f64);
        let energy_neutral_duty = match (self.next_day_j, efficiency) {
            (Some(day_j), Some(eta)) if active_w > sleep_w => {
                Some(((eta * day_j / 86_400.0 - sleep_w) / (active_w - sleep_w)).clamp(0.0, 1.0))
            }
            _ => None,
        };
        HarvestForecast {
            slots: listed,
            ewma_mape: mape(self.ewma_errors),
            wcma_mape: mape(self.wcma_errors),
            next_day_j: self.next_day_j,
            energy_neutral_duty,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn slot(harvested_uj: u32, ewma: Option<u32>, wcma: Option<u32>) -> SlotHarvest {
        SlotHarvest {
            slot: 0,
            slot_ms: 3_600_000,
            harvested_uj,
            ewma_predicted_uj: ewma,
            wcma_predicted_uj: wcma,
            next_day_uj: Some(8_640_000),
        }
    }

    #[test]
    fn errors_skip_night_and_duty_balances_a_day() {
        let mut h = HarvestSlots::new();
        h.push(3600.0, &slot(1_000_000, Some(1_100_000), Some(950_000)));
        h.push(7200.0, &slot(2_000_000, Some(1_500_000), Some(2_100_000)));
        h.push(10800.0, &slot(0, Some(100), Some(0))); // night: no percentage
                                                       // 8.64 J a day at 50 % efficiency is 50 µW; sleep 10 µW, active 1010 µW:
                                                       // (50 - 10) / 1000 = 4 %.
        let f = h.finish(10e-6, 1010e-6, Some(0.5));
        assert!((f.ewma_mape.unwrap() - (0.1 + 0.25) / 2.0).abs() < 1e-12);
        assert!((f.wcma_mape.unwrap() - (0.05 + 0.05) / 2.0).abs() < 1e-12);
        assert!((f.energy_neutral_duty.unwrap() - 0.04).abs() < 1e-12);
        assert_eq!(f.slots.len(), 3);
    }
}
