//! Conditions that drive the sources over time: daylight with passing clouds,
//! and the temperature difference across a thermoelectric generator.
//!
//! Every profile is deterministic for a given seed.

use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64Mcg;
use serde::{Deserialize, Serialize};

/// Daylight on a cell: a clear-sky arc from sunrise to sunset, dimmed by clouds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DaylightParams {
    /// Hour of sunrise (0-24).
    pub sunrise_hour: f64,
    /// Hour of sunset (0-24), after sunrise.
    pub sunset_hour: f64,
    /// Irradiance on the cell at solar noon under a clear sky, W/m².
    pub peak_w_m2: f64,
    /// Irradiance at night (room lights, street lights), W/m².
    #[serde(default)]
    pub night_w_m2: f64,
    /// Mean number of clouds per daylight hour.
    #[serde(default)]
    pub clouds_per_hour: f64,
    /// Mean duration of a cloud, minutes.
    #[serde(default = "default_cloud_minutes")]
    pub cloud_minutes: f64,
    /// Fraction of light a cloud lets through, lowest (darkest cloud).
    #[serde(default = "default_cloud_transmission")]
    pub cloud_transmission: f64,
    /// Measured irradiance instead of the arc: value `k` is the mean over hour
    /// `[k, k + 1)` of the run's first day (a TMY file's row ending at
    /// `k + 1`:00), interpolated linearly between hour centres. Clouds are
    /// then not added.
    #[serde(default)]
    pub hourly_w_m2: Vec<f64>,
}

fn default_cloud_minutes() -> f64 {
    10.0
}

fn default_cloud_transmission() -> f64 {
    0.2
}

#[derive(Debug, Clone, Copy, PartialEq)]
struct Cloud {
    start_s: f64,
    end_s: f64,
    transmission: f64,
}

/// Irradiance over time for a run starting at `start_hour` of day one.
#[derive(Debug, Clone, PartialEq)]
pub struct Daylight {
    params: DaylightParams,
    start_hour: f64,
    clouds: Vec<Cloud>,
}

impl Daylight {
    /// Draws the clouds for `duration_s` from `seed`.
    pub fn new(params: DaylightParams, start_hour: f64, duration_s: f64, seed: u64) -> Self {
        let mut rng = Pcg64Mcg::seed_from_u64(seed);
        let mut clouds = Vec::new();
        if params.clouds_per_hour > 0.0 {
            let rate_per_s = params.clouds_per_hour / 3600.0;
            let mut t = 0.0;
            loop {
                // Poisson arrivals, exponential durations.
                t += -(1.0 - rng.random::<f64>()).ln() / rate_per_s;
                if t > duration_s {
                    break;
                }
                let length = -(1.0 - rng.random::<f64>()).ln() * params.cloud_minutes * 60.0;
                let low = params.cloud_transmission.clamp(0.0, 1.0);
                let transmission = low + (1.0 - low) * rng.random::<f64>() * 0.6;
                clouds.push(Cloud {
                    start_s: t,
                    end_s: t + length,
                    transmission,
                });
            }
        }
        Daylight {
            params,
            start_hour,
            clouds,
        }
    }

    /// Irradiance from the hourly table at `hour` (hours since the table's start).
    fn table_at(&self, hour: f64) -> f64 {
        let table = &self.params.hourly_w_m2;
        // Value i is the mean of hour (i - 1, i]: place it at i - 0.5.
        let x = hour + 0.5;
        let i = x.floor().max(0.0) as usize;
        let frac = x - x.floor();
        let at = |k: usize| table.get(k).copied().unwrap_or(0.0).max(0.0);
        if i == 0 {
            return at(0) * frac;
        }
        at(i - 1) + (at(i) - at(i - 1)) * frac
    }

    /// Clear-sky irradiance at `t_s` after the start.
    pub fn clear_sky(&self, t_s: f64) -> f64 {
        if !self.params.hourly_w_m2.is_empty() {
            return self.table_at(self.start_hour + t_s / 3600.0);
        }
        let hour = (self.start_hour + t_s / 3600.0).rem_euclid(24.0);
        let p = &self.params;
        let day = if hour > p.sunrise_hour && hour < p.sunset_hour {
            let phase = (hour - p.sunrise_hour) / (p.sunset_hour - p.sunrise_hour);
            p.peak_w_m2 * (std::f64::consts::PI * phase).sin().powf(1.2)
        } else {
            0.0
        };
        day.max(p.night_w_m2)
    }

    /// Irradiance with clouds at `t_s`.
    pub fn irradiance(&self, t_s: f64) -> f64 {
        let clear = self.clear_sky(t_s);
        if !self.params.hourly_w_m2.is_empty() {
            return clear;
        }
        let shade = self
            .clouds
            .iter()
            .filter(|c| t_s >= c.start_s && t_s < c.end_s)
            .map(|c| c.transmission)
            .fold(1.0, f64::min);
        (clear * shade).max(self.params.night_w_m2.min(clear))
    }
}

/// Temperature difference across a generator on a pipe heated in cycles.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PipeParams {
    /// Difference while the heating runs, K.
    pub running_delta_k: f64,
    /// Difference it decays to while the heating is off, K.
    pub idle_delta_k: f64,
    /// One on/off cycle, minutes.
    pub cycle_minutes: f64,
    /// Fraction of the cycle the heating runs.
    pub duty: f64,
    /// Thermal time constant of the pipe, minutes.
    pub time_constant_minutes: f64,
}

/// The pipe's temperature difference as a first-order lag behind the heating.
#[derive(Debug, Clone, PartialEq)]
pub struct Pipe {
    params: PipeParams,
    delta_k: f64,
}

impl Pipe {
    /// A cold pipe.
    pub fn new(params: PipeParams) -> Self {
        Pipe {
            params,
            delta_k: params.idle_delta_k,
        }
    }

    /// Advances to `t_s` by `dt_s`; returns the temperature difference.
    pub fn advance(&mut self, t_s: f64, dt_s: f64) -> f64 {
        let p = &self.params;
        let cycle_s = p.cycle_minutes * 60.0;
        let running = (t_s.rem_euclid(cycle_s)) < p.duty * cycle_s;
        let target = if running {
            p.running_delta_k
        } else {
            p.idle_delta_k
        };
        let tau = (p.time_constant_minutes * 60.0).max(1e-3);
        self.delta_k += (target - self.delta_k) * (1.0 - (-dt_s / tau).exp());
        self.delta_k
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params(clouds: f64) -> DaylightParams {
        DaylightParams {
            sunrise_hour: 6.0,
            sunset_hour: 18.0,
            peak_w_m2: 100.0,
            night_w_m2: 0.0,
            clouds_per_hour: clouds,
            cloud_minutes: 10.0,
            cloud_transmission: 0.2,
            hourly_w_m2: Vec::new(),
        }
    }

    #[test]
    fn an_hourly_table_is_interpolated_between_hour_centres() {
        let mut p = params(0.0);
        p.hourly_w_m2 = vec![0.0, 100.0, 300.0];
        let day = Daylight::new(p, 0.0, 3.0 * 3600.0, 1);
        assert_eq!(day.irradiance(1.5 * 3600.0), 100.0); // centre of hour [1, 2)
        assert_eq!(day.irradiance(2.0 * 3600.0), 200.0);
        assert_eq!(day.irradiance(2.5 * 3600.0), 300.0);
    }

    #[test]
    fn clear_sky_peaks_at_noon_and_is_dark_at_night() {
        let day = Daylight::new(params(0.0), 0.0, 86_400.0, 1);
        assert!((day.irradiance(12.0 * 3600.0) - 100.0).abs() < 1e-9);
        assert_eq!(day.irradiance(3.0 * 3600.0), 0.0);
        assert!(day.irradiance(9.0 * 3600.0) < 100.0);
    }

    #[test]
    fn clouds_only_dim_and_are_repeatable() {
        let a = Daylight::new(params(2.0), 0.0, 86_400.0, 7);
        let b = Daylight::new(params(2.0), 0.0, 86_400.0, 7);
        assert_eq!(a, b);
        assert!(!a.clouds.is_empty());
        for i in 0..1000 {
            let t = i as f64 * 86.4;
            assert!(a.irradiance(t) <= a.clear_sky(t) + 1e-12);
        }
    }

    #[test]
    fn pipe_approaches_its_target() {
        let mut pipe = Pipe::new(PipeParams {
            running_delta_k: 20.0,
            idle_delta_k: 2.0,
            cycle_minutes: 60.0,
            duty: 0.5,
            time_constant_minutes: 1.0,
        });
        let mut d = 0.0;
        for s in 0..1200 {
            d = pipe.advance(s as f64, 1.0);
        }
        assert!((d - 20.0).abs() < 0.01);
    }
}
