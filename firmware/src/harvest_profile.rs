//! Tomorrow's harvest: a per-time-of-day profile learned on the node, in
//! integers and fixed memory, with two published predictors side by side.
//!
//! * EWMA per slot (Kansal, Hsu, Zahedi, Srivastava, "Power management in
//!   energy harvesting sensor networks", ACM TECS 6(4), 2007):
//!   `E(d, n) = a E(d-1, n) + (1 - a) e(d-1, n)`.
//! * WCMA (Piorno, Bergonzini, Atienza, Rosing, "Prediction and management in
//!   energy harvested wireless sensor nodes", Wireless VITAE 2009): the next
//!   slot is `a e(d, n) + GAP (1 - a) M(d, n + 1)`, where `M` is the mean of
//!   the same slot over the past `D` days and `GAP` weighs how today's last
//!   `K` slots compared with their own past means (weights `k / K`).
//!
//! A day is [`SLOTS`] slots of [`SLOT_MS`]; slots are counted from boot (the
//! node has no calendar), so the host maps them to clock time.

/// Slots in a day.
pub const SLOTS: usize = 24;
/// Length of a slot: one hour.
pub const SLOT_MS: u32 = 3_600_000;
/// Past days the WCMA mean looks at.
pub const WCMA_DAYS: usize = 4;
/// Today's slots the WCMA conditioning factor looks at.
pub const WCMA_K: usize = 3;
/// Weight of the previous estimate in the EWMA, per mille (0.5; a value
/// from the range the EWMA paper explores, from memory).
pub const EWMA_KEEP_PERMILLE: u64 = 500;
/// Weight of the present slot in WCMA, per mille (0.7, from memory of the
/// WCMA paper's recommended range).
pub const WCMA_ALPHA_PERMILLE: u64 = 700;
/// [`SLOTS`] as the slot counter's type.
const SLOTS_U32: u32 = 24;
const _: () = assert!(SLOTS_U32 as usize == SLOTS);
/// Slots kept: the past `WCMA_DAYS` days and today.
const HISTORY: usize = SLOTS * (WCMA_DAYS + 1);

/// What one finished slot brought and what had been predicted for it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SlotOutcome {
    /// Slot of the day (0 to `SLOTS - 1`, counted from boot).
    pub slot: u16,
    /// Energy harvested in it, µJ.
    pub harvested_uj: u32,
    /// The EWMA profile's prediction made before the slot began.
    pub ewma_predicted_uj: Option<u32>,
    /// The WCMA prediction made before the slot began.
    pub wcma_predicted_uj: Option<u32>,
    /// The EWMA profile's total for the next 24 hours.
    pub next_day_uj: Option<u64>,
}

/// The learned profile.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct HarvestProfile {
    ewma_uj: [u32; SLOTS],
    /// Every slot's harvest on a ring, by absolute slot number.
    history_uj: [u32; HISTORY],
    /// Slots finished since boot.
    finished: u32,
    predicted: (Option<u32>, Option<u32>),
}

impl Default for HarvestProfile {
    fn default() -> Self {
        Self::new()
    }
}

fn saturate(v: u64) -> u32 {
    u32::try_from(v).unwrap_or(u32::MAX)
}

impl HarvestProfile {
    /// Nothing learned yet.
    pub const fn new() -> Self {
        HarvestProfile {
            ewma_uj: [0; SLOTS],
            history_uj: [0; HISTORY],
            finished: 0,
            predicted: (None, None),
        }
    }

    /// The harvest of the slot `back` slots before the newest finished one (0:
    /// the newest), when it is still kept.
    fn past(&self, back: usize) -> Option<u32> {
        let finished = usize::try_from(self.finished).ok()?;
        if back >= finished || back >= HISTORY {
            return None;
        }
        let index = finished.checked_sub(1)?.checked_sub(back)? % HISTORY;
        self.history_uj.get(index).copied()
    }

    /// Mean over the past days of one slot of the day, given as `from_newest`
    /// slots before the newest finished slot (-1: the next slot).
    fn days_mean(&self, from_newest: isize) -> Option<u64> {
        let (mut sum, mut days) = (0u64, 0u64);
        for day in 1..=WCMA_DAYS {
            let back = day.saturating_mul(SLOTS).checked_add_signed(from_newest)?;
            if let Some(v) = self.past(back) {
                sum = sum.saturating_add(u64::from(v));
                days = days.saturating_add(1);
            }
        }
        sum.checked_div(days)
    }

    /// WCMA's prediction for the next slot.
    fn wcma_next(&self) -> Option<u32> {
        let now = u64::from(self.past(0)?);
        let mean_next = self.days_mean(-1)?;
        // GAP: weighted ratio of today's last K slots to their past means, per
        // mille; the newest slot weighs K / K, the oldest 1 / K.
        let (mut weighted, mut weights) = (0u64, 0u64);
        for back in 0..WCMA_K {
            let weight = u64::try_from(WCMA_K.saturating_sub(back)).unwrap_or(0);
            let (Some(today), Some(mean)) = (
                self.past(back),
                self.days_mean(isize::try_from(back).unwrap_or(0)),
            ) else {
                continue;
            };
            if mean == 0 {
                continue; // night: no ratio to take
            }
            let ratio = u64::from(today)
                .saturating_mul(1000)
                .checked_div(mean)
                .unwrap_or(0);
            weighted = weighted.saturating_add(ratio.saturating_mul(weight));
            weights = weights.saturating_add(weight);
        }
        let gap = weighted.checked_div(weights).unwrap_or(1000);
        let conditioned = gap.saturating_mul(mean_next) / 1000;
        let prediction = WCMA_ALPHA_PERMILLE
            .saturating_mul(now)
            .saturating_add((1000 - WCMA_ALPHA_PERMILLE).saturating_mul(conditioned))
            / 1000;
        Some(saturate(prediction))
    }

    /// Records the harvest of the slot that just ended and predicts the next.
    pub fn end_slot(&mut self, harvested_uj: u32) -> SlotOutcome {
        let slot_index = usize::try_from(self.finished).unwrap_or(0) % SLOTS;
        let learned = self.finished >= SLOTS_U32;
        if let Some(estimate) = self.ewma_uj.get_mut(slot_index) {
            *estimate = if learned {
                saturate(
                    EWMA_KEEP_PERMILLE
                        .saturating_mul(u64::from(*estimate))
                        .saturating_add(
                            (1000 - EWMA_KEEP_PERMILLE).saturating_mul(u64::from(harvested_uj)),
                        )
                        / 1000,
                )
            } else {
                harvested_uj
            };
        }
        if let Some(cell) = self
            .history_uj
            .get_mut(usize::try_from(self.finished).unwrap_or(0) % HISTORY)
        {
            *cell = harvested_uj;
        }
        let (ewma_predicted_uj, wcma_predicted_uj) = self.predicted;
        self.finished = self.finished.saturating_add(1);
        let day_known = self.finished >= SLOTS_U32;
        let next_slot = usize::try_from(self.finished).unwrap_or(0) % SLOTS;
        self.predicted = (
            day_known.then(|| self.ewma_uj.get(next_slot).copied().unwrap_or(0)),
            self.wcma_next(),
        );
        SlotOutcome {
            slot: u16::try_from(slot_index).unwrap_or(0),
            harvested_uj,
            ewma_predicted_uj,
            wcma_predicted_uj,
            next_day_uj: day_known.then(|| self.ewma_uj.iter().map(|&v| u64::from(v)).sum()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn day(scale: u32) -> [u32; SLOTS] {
        // An invented clear day: nothing at night, a triangle peaking at noon.
        let mut d = [0u32; SLOTS];
        for (h, v) in d.iter_mut().enumerate() {
            let h = h as i64;
            if (6..18).contains(&h) {
                *v = scale * (6 - (h - 12).abs()) as u32;
            }
        }
        d
    }

    #[test]
    fn a_repeated_day_is_predicted_exactly() {
        let mut p = HarvestProfile::new();
        let mut last = None;
        for _ in 0..6 {
            for &e in &day(1000) {
                last = Some(p.end_slot(e));
            }
        }
        // After several identical days EWMA knows every slot; WCMA gives its
        // formula with GAP = 1: 0.7 e(n - 1) + 0.3 M(n), computed here in f64.
        let d = day(1000);
        for (n, &e) in d.iter().enumerate() {
            let out = p.end_slot(e);
            assert_eq!(out.ewma_predicted_uj, Some(e), "slot {n}");
            let previous = f64::from(d[(n + SLOTS - 1) % SLOTS]);
            let expected = 0.7 * previous + 0.3 * f64::from(e);
            let got = f64::from(out.wcma_predicted_uj.unwrap_or(u32::MAX));
            assert!(
                (got - expected).abs() <= 1.0,
                "slot {n}: {got} vs {expected}"
            );
        }
        assert_eq!(last.and_then(|o| o.next_day_uj), Some(36_000));
    }

    #[test]
    fn ewma_follows_the_published_recurrence() {
        // E(d, n) = 0.5 E(d-1, n) + 0.5 e(d-1, n): after days of 1000 then 2000
        // at one slot, the estimate is 1500.
        let mut p = HarvestProfile::new();
        for scale in [1, 2] {
            for &e in &day(1000 * scale) {
                p.end_slot(e);
            }
        }
        // Slot 12 (noon): day 1 gave 6000, day 2 12000: 0.5 * 6000 + 0.5 * 12000.
        assert_eq!(p.ewma_uj[12], 9000);
    }

    #[test]
    fn wcma_scales_the_past_by_how_today_compares() {
        // Four days of a clear profile, then a day at half: by the afternoon
        // WCMA predicts about half of the past mean, EWMA still the past.
        let mut p = HarvestProfile::new();
        for _ in 0..4 {
            for &e in &day(1000) {
                p.end_slot(e);
            }
        }
        let dim = day(500);
        for &e in dim.iter().take(14) {
            p.end_slot(e);
        }
        let next = p.end_slot(dim[14]);
        // Slot 14's own prediction was made at the end of slot 13:
        // 0.7 * e(13) + 0.3 * GAP * M(14) = 0.7 * 2500 + 0.3 * 0.5 * 4000 = 2350.
        assert_eq!(next.wcma_predicted_uj, Some(2350));
        assert_eq!(next.ewma_predicted_uj, Some(4000));
    }
}
