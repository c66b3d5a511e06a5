//! The virtual bench: instruments wired to the node's four channels in place
//! of the harvester and the load, set while the node runs (to calibrate it
//! as on a real bench). A channel not set reads the scenario's physics.

use std::sync::{Arc, Mutex};

use anyhow::{bail, Context, Result};

/// What the bench applies to each channel (V or A); None: the scenario's value.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct BenchLevels {
    /// Voltage on the harvester input, V.
    pub input_v: Option<f64>,
    /// Current into the harvester input, A.
    pub input_a: Option<f64>,
    /// Voltage on the load output, V.
    pub output_v: Option<f64>,
    /// Current out of the load output, A.
    pub output_a: Option<f64>,
}

impl BenchLevels {
    /// The four true values the front-end sees: the bench's where set, else
    /// `physics` (input V, input A, output V, output A).
    pub fn over(&self, physics: [f64; 4]) -> [f64; 4] {
        let [iv, ia, ov, oa] = physics;
        [
            self.input_v.unwrap_or(iv),
            self.input_a.unwrap_or(ia),
            self.output_v.unwrap_or(ov),
            self.output_a.unwrap_or(oa),
        ]
    }
}

/// The bench, shared between whoever sets it and the running node.
#[derive(Debug, Clone, Default)]
pub struct Bench(Arc<Mutex<BenchLevels>>);

impl Bench {
    /// The levels now.
    pub fn levels(&self) -> BenchLevels {
        self.0.lock().map(|l| *l).unwrap_or_default()
    }

    /// Obeys one line: `input_v 0.1`, `input_a 0.002`, `output_v 3.3`,
    /// `output_a 0.0005` (V or A), `CHANNEL off` (back to the scenario) or
    /// `off` (every channel); returns what it did, for people.
    pub fn obey(&self, line: &str) -> Result<String> {
        let words: Vec<&str> = line.split_whitespace().collect();
        let mut levels = self.0.lock().map_err(|_| anyhow::anyhow!("bench lock"))?;
        match words.as_slice() {
            ["off"] => {
                *levels = BenchLevels::default();
                Ok("bench: every channel off".into())
            }
            [channel, value] => {
                let slot = match *channel {
                    "input_v" => &mut levels.input_v,
                    "input_a" => &mut levels.input_a,
                    "output_v" => &mut levels.output_v,
                    "output_a" => &mut levels.output_a,
                    other => {
                        bail!("unknown channel '{other}' (input_v, input_a, output_v, output_a)")
                    }
                };
                if *value == "off" {
                    *slot = None;
                    return Ok(format!("bench: {channel} off"));
                }
                let level: f64 = value
                    .parse()
                    .ok()
                    .filter(|v: &f64| v.is_finite() && *v >= 0.0)
                    .with_context(|| format!("'{value}' is not a level of at least 0"))?;
                *slot = Some(level);
                Ok(format!("bench: {channel} = {level}"))
            }
            _ => bail!("say CHANNEL LEVEL (input_v 0.1), CHANNEL off, or off"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn set_channels_replace_the_physics_and_off_restores_it() {
        let bench = Bench::default();
        let physics = [0.5, 0.001, 3.0, 0.0002];
        assert_eq!(bench.levels().over(physics), physics);
        bench.obey("input_v 0.1").unwrap();
        bench.obey("output_a 0.002").unwrap();
        assert_eq!(bench.levels().over(physics), [0.1, 0.001, 3.0, 0.002]);
        bench.obey("input_v off").unwrap();
        assert_eq!(bench.levels().over(physics), [0.5, 0.001, 3.0, 0.002]);
        bench.obey("off").unwrap();
        assert_eq!(bench.levels().over(physics), physics);
        assert!(bench.obey("input_v -1").is_err());
        assert!(bench.obey("mains_v 230").is_err());
        assert!(bench.obey("input_v").is_err());
    }
}
