//! The end of the harvesting day, learned: a source whose input is cut off at
//! about the same hour every day (a sunset, a shadow that falls at the same
//! time, a heater switched off each evening) is cut off about a day after the
//! last time, give or take the day-to-day drift of that hour.
//!
//! A cutoff counts as a day's end when the converter stays off for at least
//! [`NIGHT_MIN_MS`] after it (a night, far longer than a cloud), so it is
//! learned at the next start. With two day ends learned, their spacing gives
//! the drift (a sunset moves by minutes a day through the year); with one,
//! the next is taken a day later.
//!
//! Before the evening's fall shows in the input, the trends of the input
//! cannot tell a sunset from a cloud: while the output is full the converter
//! draws only what the load needs and the source's power is seen in the
//! load's bursts alone. The learned hour needs none of that, so it is the
//! forecast within its look-ahead; the trends answer everywhere else.

use core::num::NonZeroU32;

/// One day, ms (the node has no calendar: days are counted from boot).
pub const DAY_MS: u64 = 86_400_000;
/// A cutoff is a day's end when the converter stays off at least this long
/// after it (4 hours: a night, not a cloud or a dip of the source).
pub const NIGHT_MIN_MS: u64 = 4 * 3_600_000;
/// Largest day-to-day drift of the day's end taken from two learned ends
/// (30 minutes; a sunset moves by a few minutes a day at most at moderate
/// latitudes, from memory). A larger difference is not a drift, and the
/// next end is taken a day after the last.
pub const MAX_DRIFT_MS: u64 = 1_800_000;
/// Days a learned end is carried forward without being seen again.
pub const KEEP_DAYS: u64 = 3;
/// The learned end answers from this many forecast horizons before it.
pub const LOOKAHEAD_HORIZONS: u64 = 4;

/// A time since boot kept in whole seconds (4 bytes with its `None`; 136
/// years of uptime), at least one.
type Stamp = Option<NonZeroU32>;

fn stamp(ms: u64) -> Stamp {
    NonZeroU32::new(u32::try_from(ms / 1000).unwrap_or(u32::MAX).max(1))
}

fn ms_of(stamp: Stamp) -> Option<u64> {
    stamp.map(|s| u64::from(s.get()).saturating_mul(1000))
}

/// The learned day ends and the cutoff that may become the next one.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct DayEnd {
    /// The latest cutoff since the converter last started.
    candidate: Stamp,
    /// The last learned day end.
    last: Stamp,
    /// The one before it.
    previous: Stamp,
}

impl DayEnd {
    /// Nothing learned.
    pub const fn new() -> Self {
        DayEnd {
            candidate: None,
            last: None,
            previous: None,
        }
    }

    /// The converter's input was cut off at `now_ms`.
    pub fn on_cutoff(&mut self, now_ms: u64) {
        self.candidate = stamp(now_ms);
    }

    /// The converter started again at `now_ms`: the last cutoff was a day's
    /// end if the converter stayed off a night.
    pub fn on_start(&mut self, now_ms: u64) {
        if let Some(cutoff_ms) = ms_of(self.candidate.take()) {
            if now_ms.saturating_sub(cutoff_ms) >= NIGHT_MIN_MS {
                self.previous = self.last;
                self.last = stamp(cutoff_ms);
            }
        }
    }

    /// The spacing of consecutive day ends: a day plus the drift of the two
    /// learned ends when it is small, else a day.
    fn period_ms(&self) -> u64 {
        let (Some(last), Some(previous)) = (ms_of(self.last), ms_of(self.previous)) else {
            return DAY_MS;
        };
        let spacing = last.saturating_sub(previous);
        // Two ends several days apart: the drift per day of their spacing.
        let days = spacing.saturating_add(DAY_MS / 2) / DAY_MS;
        let Some(per_day) = spacing.checked_div(days) else {
            return DAY_MS;
        };
        if per_day.abs_diff(DAY_MS) <= MAX_DRIFT_MS {
            per_day
        } else {
            DAY_MS
        }
    }

    /// Milliseconds from `now_ms` to the next day end expected, when it is
    /// at most `LOOKAHEAD_HORIZONS` times `horizon_ms` away and no more than
    /// [`KEEP_DAYS`] after the last one seen; None otherwise.
    pub fn time_to_next(&self, now_ms: u64, horizon_ms: u32) -> Option<u32> {
        let last = ms_of(self.last)?;
        let period = self.period_ms();
        let lookahead = u64::from(horizon_ms).saturating_mul(LOOKAHEAD_HORIZONS);
        (1..=KEEP_DAYS)
            .map(|k| last.saturating_add(period.saturating_mul(k)))
            .find(|&expected| expected > now_ms)
            .map(|expected| expected.saturating_sub(now_ms))
            .filter(|&left| left <= lookahead)
            .and_then(|left| u32::try_from(left).ok())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const HOUR: u64 = 3_600_000;
    const HORIZON_MS: u32 = 1_800_000;

    /// A day end at `cutoff_ms` and a start the next morning.
    fn night(end: &mut DayEnd, cutoff_ms: u64, start_ms: u64) {
        end.on_cutoff(cutoff_ms);
        end.on_start(start_ms);
    }

    #[test]
    fn nothing_is_forecast_before_a_night_was_seen() {
        let mut end = DayEnd::new();
        assert_eq!(end.time_to_next(10 * HOUR, HORIZON_MS), None);
        // A cutoff without a restart yet, or a restart an hour later (a cloud).
        end.on_cutoff(19 * HOUR);
        assert_eq!(end.time_to_next(20 * HOUR, HORIZON_MS), None);
        end.on_start(20 * HOUR);
        assert_eq!(end.time_to_next(42 * HOUR, HORIZON_MS), None);
    }

    #[test]
    fn a_day_end_recurs_a_day_later_within_the_look_ahead() {
        let mut end = DayEnd::new();
        night(&mut end, 19 * HOUR, 30 * HOUR);
        // Next end 43 h after boot; the look-ahead is 4 × 30 min = 2 h.
        assert_eq!(end.time_to_next(40 * HOUR, HORIZON_MS), None);
        assert_eq!(end.time_to_next(41 * HOUR, HORIZON_MS), Some(7_200_000));
        assert_eq!(
            end.time_to_next(43 * HOUR - 600_000, HORIZON_MS),
            Some(600_000)
        );
        // Past it (a later sunset today), nothing until the next day's end.
        assert_eq!(end.time_to_next(43 * HOUR + 1, HORIZON_MS), None);
        assert_eq!(end.time_to_next(66 * HOUR, HORIZON_MS), Some(HOUR as u32));
    }

    #[test]
    fn two_day_ends_give_the_drift() {
        let mut end = DayEnd::new();
        // Sunset four minutes later each day: 19:00, then 19:04.
        let drift = 240_000;
        night(&mut end, 19 * HOUR, 30 * HOUR);
        night(&mut end, 43 * HOUR + drift, 54 * HOUR);
        assert_eq!(end.period_ms(), DAY_MS + drift);
        // Expected at 67 h + 8 min; asked 10 minutes before it.
        let expected = 67 * HOUR + 2 * drift;
        assert_eq!(
            end.time_to_next(expected - 600_000, HORIZON_MS),
            Some(600_000)
        );
    }

    #[test]
    fn a_missed_day_spreads_the_drift_and_a_jump_is_no_drift() {
        let mut end = DayEnd::new();
        night(&mut end, 19 * HOUR, 30 * HOUR);
        // Two days later, six minutes later: three minutes a day.
        night(&mut end, 67 * HOUR + 360_000, 78 * HOUR);
        assert_eq!(end.period_ms(), DAY_MS + 180_000);
        // A storm ended a day three hours early: the next is a day later.
        night(&mut end, 88 * HOUR, 102 * HOUR);
        assert_eq!(end.period_ms(), DAY_MS);
    }

    #[test]
    fn a_learned_end_is_dropped_after_the_days_it_is_kept() {
        let mut end = DayEnd::new();
        night(&mut end, 19 * HOUR, 30 * HOUR);
        let last_kept = 19 * HOUR + KEEP_DAYS * DAY_MS;
        assert_eq!(
            end.time_to_next(last_kept - HOUR, HORIZON_MS),
            Some(HOUR as u32)
        );
        assert_eq!(end.time_to_next(last_kept + HOUR, HORIZON_MS), None);
    }
}
