//! An invented fleet: virtual nodes made from the built-in scenarios (taken
//! in turn, each with a seed, name and identity of its own), simulated over
//! the same days into one log each, on every core.

use std::path::{Path, PathBuf};

use anyhow::{bail, Result};

use crate::sim::run::engine::simulate_to_log;
use crate::sim::scenarios::scenario::{Scenario, BUILTIN};

/// When the fleet's logs start: 2026-06-01 00:00 UTC, an invented date kept
/// fixed so a fleet is the same on every run.
pub const FLEET_START_US: u64 = 1_780_272_000_000_000;

/// The scenarios of a fleet of `nodes` over `days`.
pub fn fleet_scenarios(nodes: usize, days: f64, seed: u64) -> Result<Vec<Scenario>> {
    if !(days > 0.0 && days <= 366.0) {
        bail!("--days must be above 0 and at most 366, got {days}");
    }
    if nodes == 0 || nodes > 10_000 {
        bail!("--nodes must be 1 to 10000, got {nodes}");
    }
    (0..nodes)
        .map(|i| {
            let (kind, _) = BUILTIN[i % BUILTIN.len()];
            let mut s = Scenario::builtin(kind)?;
            s.name = format!("{kind}-{i:03}");
            s.seed = seed.wrapping_mul(10_007).wrapping_add(i as u64);
            s.duration_h = days * 24.0;
            s.description = format!("Invented fleet node {i}: {}", s.description);
            s.node.name = Some(format!("fleet-{i:03}"));
            s.validate()?;
            Ok(s)
        })
        .collect()
}

/// Simulates the fleet into `dir` (one `NAME.gleanlog` per node), advancing
/// `progress` by simulated seconds; returns the logs in node order.
pub fn simulate_fleet(
    scenarios: Vec<Scenario>,
    dir: &Path,
    progress: &indicatif::ProgressBar,
) -> Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir)?;
    let jobs: Vec<(Scenario, PathBuf)> = scenarios
        .into_iter()
        .map(|s| {
            let path = dir.join(format!("{}.gleanlog", s.name));
            (s, path)
        })
        .collect();
    let done = crate::parallel::map_in_order(jobs.len(), crate::parallel::workers(), |i| {
        let (scenario, path) = &jobs[i];
        let hidden = crate::progress::none();
        let seconds = scenario.duration_s() as u64;
        let result = simulate_to_log(scenario.clone(), 1, path, FLEET_START_US, &hidden);
        progress.inc(seconds);
        result.map(|_| path.clone())
    });
    done.into_iter().collect()
}
