//! Harvest prediction judged on a year of hourly irradiance: the firmware's own
//! profile (EWMA and WCMA, integer, as on the node) against the naive "same
//! as yesterday", through the simulator's solar cell at its maximum-power
//! point.

use gleaner_firmware::harvest_profile::{HarvestProfile, SLOTS};

use crate::sim::models::solar::PvCell;

/// Mean absolute percentage errors of one predictor.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct PredictorError {
    /// Over hour slots with harvest (at least 5 % of the year's largest hour),
    /// each predicted before it began.
    pub slot_mape: f64,
    /// Over whole days, the day's total predicted at its start; None for WCMA,
    /// which predicts one slot ahead only.
    pub daily_mape: Option<f64>,
}

/// EWMA, WCMA and the naive predictor side by side.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct HarvestEval {
    /// The EWMA profile.
    pub ewma: PredictorError,
    /// WCMA.
    pub wcma: PredictorError,
    /// Same as yesterday.
    pub naive: PredictorError,
    /// Hour slots judged.
    pub slots: usize,
    /// Days judged.
    pub days: usize,
}

/// Energy of each hour, µJ, for hourly irradiance (W/m²) through `cell` at
/// `celsius`, at the maximum-power point.
pub fn hourly_energy_uj(hourly_w_m2: &[f64], cell: &PvCell, celsius: f64) -> Vec<u32> {
    hourly_w_m2
        .iter()
        .map(|&g| {
            if g <= 0.0 {
                return 0;
            }
            let p_w = cell.at(g, celsius).curve_points().p_mp.max(0.0);
            (p_w * 3600.0 * 1e6).round().min(f64::from(u32::MAX)) as u32
        })
        .collect()
}

#[derive(Debug, Default)]
struct Errors {
    sum: f64,
    count: usize,
}

impl Errors {
    fn add(&mut self, predicted: f64, actual: f64) {
        self.sum += (predicted - actual).abs() / actual;
        self.count += 1;
    }

    fn mean(&self) -> f64 {
        if self.count == 0 {
            f64::NAN
        } else {
            self.sum / self.count as f64
        }
    }
}

/// Feeds the hours to the node's profile and scores each predictor. The
/// first `warm_up_days` days only teach.
pub fn evaluate(hourly_uj: &[u32], warm_up_days: usize) -> HarvestEval {
    let largest = hourly_uj.iter().copied().max().unwrap_or(0);
    let floor = f64::from(largest) * 0.05;
    let mut profile = HarvestProfile::new();
    let (mut ewma, mut wcma, mut naive) = (Errors::default(), Errors::default(), Errors::default());
    let (mut ewma_day, mut naive_day) = (Errors::default(), Errors::default());
    // The day ahead as predicted at its start: EWMA's profile total, and yesterday's total.
    let mut day_ahead: Option<(f64, f64)> = None;
    let mut today = 0.0f64;
    for (i, &actual) in hourly_uj.iter().enumerate() {
        let out = profile.end_slot(actual);
        let judged = i >= warm_up_days * SLOTS;
        let yesterday = i.checked_sub(SLOTS).map(|j| f64::from(hourly_uj[j]));
        let a = f64::from(actual);
        if judged {
            if let (Some(e), Some(w), Some(n)) =
                (out.ewma_predicted_uj, out.wcma_predicted_uj, yesterday)
            {
                if a >= floor && a > 0.0 {
                    ewma.add(f64::from(e), a);
                    wcma.add(f64::from(w), a);
                    naive.add(n, a);
                }
            }
        }
        today += a;
        if (i + 1) % SLOTS == 0 {
            if let (true, Some((e, n))) = (judged && today > 0.0, day_ahead) {
                ewma_day.add(e, today);
                naive_day.add(n, today);
            }
            day_ahead = out.next_day_uj.map(|e| (e as f64, today));
            today = 0.0;
        }
    }
    let err = |slot: &Errors, day: Option<&Errors>| PredictorError {
        slot_mape: slot.mean(),
        daily_mape: day.map(Errors::mean),
    };
    HarvestEval {
        ewma: err(&ewma, Some(&ewma_day)),
        wcma: err(&wcma, None),
        naive: err(&naive, Some(&naive_day)),
        slots: ewma.count,
        days: ewma_day.count,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_steady_sky_is_predicted_by_all_and_a_change_is_not() {
        // Invented: ten identical days, then the same days at 60 %.
        let day: Vec<u32> = (0..24)
            .map(|h: i64| {
                if (6..18).contains(&h) {
                    1000 * (6 - (h - 12).abs()) as u32 + 500
                } else {
                    0
                }
            })
            .collect();
        let mut year: Vec<u32> = Vec::new();
        for _ in 0..10 {
            year.extend(&day);
        }
        let steady = evaluate(&year, 5);
        assert!(steady.ewma.slot_mape < 1e-9 && steady.naive.slot_mape < 1e-9);
        assert_eq!(steady.ewma.daily_mape, Some(0.0));
        assert_eq!(steady.naive.daily_mape, Some(0.0));
        assert_eq!(steady.days, 5);
        for _ in 0..3 {
            year.extend(day.iter().map(|&v| v * 3 / 5));
        }
        let changed = evaluate(&year, 5);
        // Yesterday is wrong on the first dark day only; EWMA remembers the
        // bright days longer.
        assert!(changed.naive.slot_mape > 0.0, "{changed:?}");
        assert!(
            changed.ewma.slot_mape > changed.naive.slot_mape,
            "{changed:?}"
        );
        // Day totals: 5 steady days right, then 1/0.6 - 1 = 66.7 % off once.
        let naive_daily = changed.naive.daily_mape.unwrap();
        assert!(
            (naive_daily - (2.0 / 3.0) / 8.0).abs() < 1e-3,
            "{changed:?}"
        );
    }
}
