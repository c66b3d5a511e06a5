//! Aggregation of samples over one report interval.

use gleaner_protocol::{ChannelStats, ConverterState, ReportFlags, Sample, StateDurations};

/// Running minimum, maximum and sum of one channel.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Running {
    min: u32,
    max: u32,
    sum: u64,
}

impl Default for Running {
    fn default() -> Self {
        Running {
            min: u32::MAX,
            max: 0,
            sum: 0,
        }
    }
}

impl Running {
    fn add(&mut self, value: u32) {
        self.min = self.min.min(value);
        self.max = self.max.max(value);
        self.sum = self.sum.saturating_add(u64::from(value));
    }

    fn stats(&self, count: u32) -> ChannelStats {
        if count == 0 {
            return ChannelStats::default();
        }
        let mean = self.sum.checked_div(u64::from(count)).unwrap_or(0);
        let mean = u32::try_from(mean).unwrap_or(u32::MAX);
        ChannelStats::from_min_mean_max(self.min, mean, self.max)
    }
}

/// Everything gathered in the interval so far.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct IntervalStats {
    count: u32,
    input_uv: Running,
    input_na: Running,
    output_uv: Running,
    output_na: Running,
    state_ms: StateDurations,
    state_us_carry: u64,
    flags: ReportFlags,
}

/// The finished interval's channel statistics.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct ChannelSummary {
    /// Samples in the interval.
    pub count: u32,
    /// Input voltage.
    pub input_uv: ChannelStats,
    /// Input current.
    pub input_na: ChannelStats,
    /// Output voltage.
    pub output_uv: ChannelStats,
    /// Output current.
    pub output_na: ChannelStats,
    /// Time per state.
    pub state_ms: StateDurations,
    /// Flags raised by any sample.
    pub flags: ReportFlags,
}

impl IntervalStats {
    /// Adds one sample, and `dt_us` of time spent in `state` before it.
    pub fn add(&mut self, sample: &Sample, flags: ReportFlags, state: ConverterState, dt_us: u64) {
        self.count = self.count.saturating_add(1);
        self.input_uv.add(sample.input_uv);
        self.input_na.add(sample.input_na);
        self.output_uv.add(sample.output_uv);
        self.output_na.add(sample.output_na);
        self.flags.insert(flags.0);
        self.add_time(state, dt_us);
    }

    /// Adds time in `state` without a sample (a failed conversion).
    pub fn add_time(&mut self, state: ConverterState, dt_us: u64) {
        // Whole milliseconds go to the state; the rest is carried so that the
        // durations add up to the interval length.
        let total_us = self.state_us_carry.saturating_add(dt_us);
        let ms = u32::try_from(total_us / 1000).unwrap_or(u32::MAX);
        self.state_us_carry = total_us % 1000;
        let slot = self.state_ms.get_mut(state);
        *slot = slot.saturating_add(ms);
    }

    /// Raises flags without a sample.
    pub fn flag(&mut self, flag: u8) {
        self.flags.insert(flag);
    }

    /// The summary so far.
    pub fn summary(&self) -> ChannelSummary {
        ChannelSummary {
            count: self.count,
            input_uv: self.input_uv.stats(self.count),
            input_na: self.input_na.stats(self.count),
            output_uv: self.output_uv.stats(self.count),
            output_na: self.output_na.stats(self.count),
            state_ms: self.state_ms,
            flags: self.flags,
        }
    }

    /// Starts a new interval, keeping the sub-millisecond time carry.
    pub fn restart(&mut self) {
        let carry = self.state_us_carry;
        *self = IntervalStats {
            state_us_carry: carry,
            ..IntervalStats::default()
        };
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn min_mean_max_and_state_time() {
        let mut s = IntervalStats::default();
        for (i, v) in [100u32, 300, 200].into_iter().enumerate() {
            let sample = Sample {
                input_uv: v,
                input_na: 10,
                output_uv: v * 2,
                output_na: 0,
            };
            let state = if i == 2 {
                ConverterState::Sagging
            } else {
                ConverterState::Harvesting
            };
            s.add(&sample, ReportFlags::default(), state, 333_400);
        }
        let sum = s.summary();
        assert_eq!(sum.count, 3);
        assert_eq!(
            (sum.input_uv.min(), sum.input_uv.mean, sum.input_uv.max()),
            (100, 200, 300)
        );
        assert_eq!(sum.output_uv.mean, 400);
        // 333.4 ms per sample: 666 ms (carry 0.8) then 333 + 1 from the carry.
        assert_eq!(sum.state_ms.harvesting_ms, 666);
        assert_eq!(sum.state_ms.sagging_ms, 334);
    }

    #[test]
    fn empty_interval_is_all_zero() {
        assert_eq!(
            IntervalStats::default().summary().input_uv,
            ChannelStats::default()
        );
    }
}
