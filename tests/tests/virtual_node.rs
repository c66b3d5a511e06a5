//! End to end through a pseudo-terminal: the virtual node's frames travel the
//! same serial path a real port uses, are recorded, and the report of the
//! recording is judged against the simulator's ground truth.

use gleaner::analysis::OutageCause;
use gleaner::sim::models::converter::OffReason;
use gleaner_protocol::{ConverterState, UplinkBody};
use gleaner_tests::{record_virtual_run, rel, scenario};

/// Checks one scenario against its ground truth.
fn judge(name: &str, hours: Option<f64>) -> usize {
    let dir = tempfile::tempdir().unwrap();
    let s = scenario(name, hours);
    let config = s.node_config().unwrap();
    let interval_s = f64::from(config.report_interval_ms) / 1e3;
    let debounce_s = f64::from(config.thresholds.debounce_ms) / 1e3;
    let (_, report, truth, messages) = record_virtual_run(s, dir.path()).unwrap();

    // Energies within 2 % and efficiency within 2 percentage points.
    assert!(
        rel(report.energy.drawn_j, truth.drawn_j) < 0.02,
        "{name}: drawn {} vs {}",
        report.energy.drawn_j,
        truth.drawn_j
    );
    assert!(
        rel(report.energy.delivered_j, truth.delivered_j) < 0.02,
        "{name}: delivered {} vs {}",
        report.energy.delivered_j,
        truth.delivered_j
    );
    let (eff, true_eff) = (
        report.energy.efficiency.unwrap(),
        truth.efficiency().unwrap(),
    );
    assert!(
        (eff - true_eff).abs() < 0.02,
        "{name}: efficiency {eff} vs {true_eff}"
    );
    // A clean link loses nothing.
    assert_eq!(
        (report.link.lost_frames, report.link.damaged()),
        (0, 0),
        "{name}"
    );
    assert_eq!(report.coverage, 1.0, "{name}");

    // Every true stop for lack of input, and every restart, seen within one
    // report interval (plus the configured debounce).
    let tolerance = interval_s + debounce_s + 0.5;
    let node_changes: Vec<(f64, ConverterState, ConverterState)> = messages
        .iter()
        .filter_map(|t| match &t.message.body {
            UplinkBody::Event(e) => Some((t.message.uptime_ms as f64 / 1e3, e.from, e.to)),
            _ => None,
        })
        .collect();
    let mut last_stop = 0.0;
    let mut checked = 0;
    for pair in truth.changes.windows(2) {
        let (before, change) = (&pair[0], &pair[1]);
        if before.converting && change.reason == Some(OffReason::Starved) {
            let seen = node_changes.iter().any(|&(t, _, to)| {
                matches!(to, ConverterState::CutOff | ConverterState::Idle)
                    && (t - change.t_s).abs() <= tolerance
            });
            assert!(seen, "{name}: converter stopped at {:.1} s, no cutoff reported near it: {node_changes:?}", change.t_s);
            last_stop = change.t_s;
            checked += 1;
        }
        if !before.converting && change.converting && before.reason == Some(OffReason::Starved) {
            let seen = node_changes.iter().any(|&(t, from, _)| {
                matches!(from, ConverterState::CutOff | ConverterState::Idle)
                    && t >= last_stop
                    && t <= change.t_s + tolerance
            });
            assert!(
                seen,
                "{name}: converter restarted at {:.1} s, not reported in time: {node_changes:?}",
                change.t_s
            );
            checked += 1;
        }
    }
    checked
}

#[test]
fn greenhouse_day_matches_ground_truth() {
    assert!(
        judge("greenhouse-day", None) >= 1,
        "the scenario has cutoffs and restarts to check"
    );
}

#[test]
fn crate_beacon_matches_ground_truth() {
    assert!(
        judge("crate-beacon", None) >= 1,
        "the scenario has cutoffs and restarts to check"
    );
}

#[test]
fn orchard_night_matches_ground_truth() {
    assert!(
        judge("orchard-night", None) >= 1,
        "the scenario has cutoffs and restarts to check"
    );
}

#[test]
fn boiler_pipe_matches_ground_truth() {
    assert!(
        judge("boiler-pipe", None) >= 4,
        "the scenario has cutoffs and restarts to check"
    );
}

#[test]
fn a_converter_fault_is_told_apart_from_a_starved_input() {
    assert_eq!(
        judge("stalled-converter", None),
        0,
        "no starved stops in this scenario"
    );
    let dir = tempfile::tempdir().unwrap();
    let (_, report, truth, _) =
        record_virtual_run(scenario("stalled-converter", None), dir.path()).unwrap();
    let fault = truth
        .changes
        .iter()
        .find(|c| c.reason == Some(OffReason::Fault))
        .unwrap();
    let back = truth
        .changes
        .iter()
        .find(|c| c.t_s > fault.t_s && c.converting)
        .unwrap();
    assert_eq!(report.outages.len(), 1, "{:?}", report.outages);
    let o = &report.outages[0];
    assert_eq!(o.cause, OutageCause::ConverterFault);
    // With the output in regulation a stopped converter looks like a pause
    // until the output falls below output_up (3.0 V here): minutes, not hours.
    assert!(
        o.start_s >= fault.t_s && o.start_s <= fault.t_s + 600.0,
        "{o:?}"
    );
    assert!(
        (o.end_s - back.t_s).abs() <= 2.0 + 0.5 + 1.0,
        "recovery seen within an interval: {o:?} vs {}",
        back.t_s
    );
    assert!(o.input_v_before > 0.9, "the input was healthy: {o:?}");
}

#[test]
fn the_drained_cell_cuts_off_near_0_7_volts_not_0_9() {
    // Common practice for a single-transistor stage: it holds on until the
    // input sags to about 0.7 V (bounded by the base-emitter voltage).
    let dir = tempfile::tempdir().unwrap();
    let (_, report, _, _) = record_virtual_run(scenario("crate-beacon", None), dir.path()).unwrap();
    let cutoff = report.outages.first().expect("the cell runs out");
    assert_eq!(cutoff.cause, OutageCause::StarvedOfInput);
    assert!(
        (0.65..=0.76).contains(&cutoff.input_v_before),
        "input before cutoff {}",
        cutoff.input_v_before
    );
}

#[test]
fn a_fresh_cell_keeps_the_led_above_2_3_volts() {
    // Common practice: the stage raises 1.5 V to the 2.2-2.4 V a red LED needs.
    let mut s = scenario("crate-beacon", Some(0.05));
    if let gleaner::sim::models::source::SourceParams::Cell { cell } = &mut s.source {
        cell.initial_depth = 0.1; // about 1.5 V
    }
    let dir = tempfile::tempdir().unwrap();
    let (_, report, _, messages) = record_virtual_run(s, dir.path()).unwrap();
    let reports: Vec<_> = messages
        .iter()
        .filter_map(|t| match &t.message.body {
            UplinkBody::Report(r) => Some(r.clone()),
            _ => None,
        })
        .collect();
    assert!(reports.len() > 10);
    for r in reports.iter().skip(1) {
        let input = f64::from(r.input_uv.mean) / 1e6;
        let output = f64::from(r.output_uv.mean) / 1e6;
        assert!((1.4..=1.55).contains(&input), "input {input}");
        assert!(output >= 2.3, "output {output} with input {input}");
    }
    assert!(report.outages.is_empty());
}
