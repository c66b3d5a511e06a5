//! Loads on the converter output.

use serde::{Deserialize, Serialize};

/// A browned-out sensor node restarts this far above its minimum, V (a
/// microcontroller's brown-out reset hysteresis; common practice).
pub const RESTART_MARGIN_V: f64 = 0.15;

/// What the converter feeds.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case", deny_unknown_fields)]
pub enum LoadParams {
    /// A duty-cycled sensor node: a sleep current plus periodic active bursts,
    /// and an optional non-essential part the load-shed pin can switch off.
    SensorNode {
        /// Current while asleep, A.
        sleep_a: f64,
        /// Extra current while active, A.
        active_a: f64,
        /// Time between active bursts, s.
        period_s: f64,
        /// Length of one burst, s.
        active_s: f64,
        /// Below this supply voltage the node browns out and draws nothing, V.
        min_v: f64,
        /// Current of the non-essential part (display, second radio), A.
        #[serde(default)]
        sheddable_a: f64,
    },
    /// A light-emitting diode: `I = Is (exp(V / (n Vt)) - 1)` (Shockley).
    Led {
        /// Saturation current Is, A.
        saturation_a: f64,
        /// `n Vt`, V.
        n_vt: f64,
    },
}

impl LoadParams {
    /// Mean current drawn at supply `v` over the `dt_s` before `t_s` (the
    /// front-end's filter averages bursts shorter than a sample); `shed`
    /// switches off the non-essential part; a browned-out sensor node
    /// (`powered` false) draws nothing.
    pub fn current_at(&self, v: f64, t_s: f64, dt_s: f64, shed: bool, powered: bool) -> f64 {
        match *self {
            LoadParams::SensorNode {
                sleep_a,
                active_a,
                period_s,
                active_s,
                min_v,
                sheddable_a,
            } => {
                if !powered || v < min_v {
                    return 0.0;
                }
                // Active time up to t: whole periods plus the part of this one.
                let active_until = |t: f64| {
                    (t / period_s).floor() * active_s + t.rem_euclid(period_s).min(active_s)
                };
                let duty = if dt_s > 0.0 {
                    ((active_until(t_s) - active_until(t_s - dt_s)) / dt_s).clamp(0.0, 1.0)
                } else {
                    f64::from(u8::from(t_s.rem_euclid(period_s) < active_s))
                };
                let extra = if shed { 0.0 } else { sheddable_a };
                sleep_a + duty * active_a + extra
            }
            LoadParams::Led { saturation_a, n_vt } => {
                let _ = powered;
                if v <= 0.0 {
                    0.0
                } else {
                    saturation_a * ((v / n_vt).exp() - 1.0)
                }
            }
        }
    }

    /// Whether a load that was `powered` is powered at supply `v`: a sensor
    /// node browns out at its minimum (a supply pinned exactly there means it
    /// could not be fed) and restarts 0.15 V above it.
    pub fn powered_at(&self, v: f64, powered: bool) -> bool {
        match *self {
            LoadParams::SensorNode { min_v, .. } => {
                if powered {
                    v > min_v + 1e-6
                } else {
                    v >= min_v + RESTART_MARGIN_V
                }
            }
            LoadParams::Led { .. } => true,
        }
    }

    /// The current the load-shed pin switches off, A (0 for a load without one).
    pub fn sheddable_a(&self) -> f64 {
        match *self {
            LoadParams::SensorNode { sheddable_a, .. } => sheddable_a,
            LoadParams::Led { .. } => 0.0,
        }
    }

    /// The load's minimum supply voltage and its restart voltage, V, for a
    /// load that browns out.
    pub fn supply_window_v(&self) -> Option<(f64, f64)> {
        match *self {
            LoadParams::SensorNode { min_v, .. } => Some((min_v, min_v + RESTART_MARGIN_V)),
            LoadParams::Led { .. } => None,
        }
    }

    /// A red LED (invented parameters): about 2.1 V at 1 mA, 2.3 V at 10 mA.
    pub fn red_led() -> Self {
        LoadParams::Led {
            saturation_a: 9.2e-14,
            n_vt: 0.0905,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn red_led_forward_voltage_is_that_of_the_trade() {
        // Handbook range for red LEDs (from memory): about 1.8-2.2 V near 1 mA,
        // and at least the photon energy bound hc/(q lambda) = 1.98 V at 625 nm.
        let led = LoadParams::red_led();
        let v_at = |i: f64| {
            crate::sim::models::numeric::bisect(0.0, 5.0, |v| {
                led.current_at(v, 0.0, 0.0, false, true) - i
            })
        };
        assert!((1.98..=2.2).contains(&v_at(1e-3)), "{}", v_at(1e-3));
        assert!((2.2..=2.4).contains(&v_at(10e-3)), "{}", v_at(10e-3));
    }

    #[test]
    fn sensor_node_bursts_and_sheds() {
        let load = LoadParams::SensorNode {
            sleep_a: 5e-6,
            active_a: 5e-3,
            period_s: 10.0,
            active_s: 0.5,
            min_v: 1.8,
            sheddable_a: 1e-3,
        };
        assert!((load.current_at(3.0, 0.2, 0.0, false, true) - (5e-6 + 5e-3 + 1e-3)).abs() < 1e-15);
        // A 1 s sample holding the 0.5 s burst averages it: half the active current.
        assert!((load.current_at(3.0, 10.75, 1.0, true, true) - (5e-6 + 2.5e-3)).abs() < 1e-12);
        assert!((load.current_at(3.0, 5.0, 0.0, true, true) - 5e-6).abs() < 1e-15);
        assert_eq!(load.current_at(3.0, 5.0, 0.0, true, false), 0.0);
        assert_eq!(load.current_at(1.5, 0.2, 0.0, false, true), 0.0);
        assert!(
            !load.powered_at(1.9, false)
                && load.powered_at(2.06, false)
                && load.powered_at(1.81, true)
        );
        assert!(!load.powered_at(1.8, true));
    }
}
