//! What the load drew while it was supplied: the starting figures of storage
//! and duty-cycle sizing ([`super::sizing`]).

use gleaner_protocol::Report;

use super::days::outage_s;

/// The load's power figures over the supplied intervals (no cutoff or
/// stalled time, an output voltage), and the highest output voltage seen.
#[derive(Debug, Clone, Default, serde::Serialize, serde::Deserialize)]
pub struct LoadPower {
    supplied_s: f64,
    supplied_delivered_j: f64,
    sleep_w: Option<f64>,
    active_w: f64,
    max_output_v: f64,
}

impl LoadPower {
    /// Adds one report.
    pub fn push(&mut self, r: &Report) {
        let length_s = f64::from(r.interval_ms) / 1e3;
        let output_v = f64::from(r.output_uv.mean) / 1e6;
        if outage_s(r) == 0.0 && r.output_uv.mean > 0 {
            self.supplied_s += length_s;
            self.supplied_delivered_j += r.delivered_nj as f64 / 1e9;
            // Asleep and active: the output current's extremes at the mean voltage.
            let low = output_v * f64::from(r.output_na.min()) / 1e9;
            let high = output_v * f64::from(r.output_na.max()) / 1e9;
            if low > 0.0 {
                self.sleep_w = Some(self.sleep_w.map_or(low, |s: f64| s.min(low)));
            }
            self.active_w = self.active_w.max(high);
        }
        self.max_output_v = self.max_output_v.max(output_v);
    }

    /// Mean load power while supplied, W (0 when never supplied).
    pub fn load_w(&self) -> f64 {
        if self.supplied_s > 0.0 {
            self.supplied_delivered_j / self.supplied_s
        } else {
            0.0
        }
    }

    /// The load asleep, W (0 when never seen).
    pub fn sleep_w(&self) -> f64 {
        self.sleep_w.unwrap_or(0.0)
    }

    /// The load active, W.
    pub fn active_w(&self) -> f64 {
        self.active_w
    }

    /// The highest mean output voltage of any report, V.
    pub fn max_output_v(&self) -> f64 {
        self.max_output_v
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::report;
    use gleaner_protocol::ChannelStats;

    #[test]
    fn power_while_supplied_from_energy_and_current_extremes() {
        let mut load = LoadPower::default();
        // 3 V, 10 µA to 5 mA, 0.3 J in 10 s: 30 mW mean, 30 µW asleep, 15 mW active.
        let mut r = report(0, 300_000_000, 0);
        r.output_uv = ChannelStats::from_min_mean_max(3_000_000, 3_000_000, 3_000_000);
        r.output_na = ChannelStats::from_min_mean_max(10_000, 100_000, 5_000_000);
        load.push(&r);
        // An interval in cutoff says nothing about the load, but its voltage counts.
        let mut down = report(0, 0, 0);
        down.state_ms.cutoff_ms = 10_000;
        down.output_uv = ChannelStats::from_min_mean_max(3_300_000, 3_300_000, 3_300_000);
        load.push(&down);
        assert!((load.load_w() - 0.03).abs() < 1e-15);
        assert!((load.sleep_w() - 30e-6).abs() < 1e-15);
        assert!((load.active_w() - 0.015).abs() < 1e-15);
        assert_eq!(load.max_output_v(), 3.3);
    }

    #[test]
    fn nothing_supplied_gives_zeros() {
        let mut load = LoadPower::default();
        let mut down = report(0, 0, 0);
        down.state_ms.stalled_ms = 10_000;
        load.push(&down);
        assert_eq!(
            (load.load_w(), load.sleep_w(), load.active_w()),
            (0.0, 0.0, 0.0)
        );
    }
}
