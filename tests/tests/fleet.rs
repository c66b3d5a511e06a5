//! A fleet as a dataset: an invented fleet of virtual nodes exported into
//! the partitioned Parquet dataset, the report's questions asked in SQL
//! (host/sql) on DuckDB and on Spark (local mode), and every answer compared
//! with `gleaner report` for the same node. pandas and Polars must read the
//! time and energy columns with no casts.

use std::collections::BTreeMap;
use std::path::Path;
use std::process::Command;

use gleaner::analysis::{analyze_file, RunReport, EFFICIENCY_BIN_V};
use gleaner::sim::scenarios::fleet::{fleet_scenarios, simulate_fleet};
use gleaner_tests::{reference_python, workspace};
use serde_json::Value;

/// Runs host/sql on both engines over `dataset`.
fn sql_answers(dataset: &Path) -> Value {
    let python = reference_python().expect("the test checked for the reference Python");
    let out = Command::new(&python)
        .arg(workspace().join("tests/reference/fleet_sql.py"))
        .arg(dataset)
        .arg(workspace().join("host/sql"))
        .arg("--spark")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// `a` equals `b` within 1e-9 relative (or 1e-9 absolute near zero).
fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1.0)
}

/// Joules as the integer nanojoules they were summed from.
fn nj(joules: f64) -> i64 {
    (joules * 1e9).round() as i64
}

/// The rows of `query` for `node`.
fn rows<'a>(engine: &'a Value, query: &str, node: &str) -> Vec<&'a Value> {
    engine[query]
        .as_array()
        .unwrap_or_else(|| panic!("{query} missing"))
        .iter()
        .filter(|r| r["node_id"] == node)
        .collect()
}

/// Every per-node figure the SQL gives, checked against the report.
fn check_node(engine: &Value, name: &str, node: &str, r: &RunReport) {
    let at = |what: &str| format!("{name}, node {node}: {what}");
    let totals = rows(engine, "node_totals", node);
    let t = totals
        .first()
        .unwrap_or_else(|| panic!("{}", at("no totals")));
    assert_eq!(
        t["drawn_nj"].as_i64(),
        Some(nj(r.energy.drawn_j)),
        "{}",
        at("drawn")
    );
    assert_eq!(
        t["delivered_nj"].as_i64(),
        Some(nj(r.energy.delivered_j)),
        "{}",
        at("delivered")
    );
    assert_eq!(
        t["stored_nj"].as_i64(),
        Some(nj(r.energy.stored_j)),
        "{}",
        at("stored")
    );
    if let Some(e) = r.energy.efficiency {
        // The report rounds down to whole ppm.
        let sql = t["efficiency"].as_f64().unwrap();
        assert!(
            sql - e >= -1e-12 && sql - e < 1e-6,
            "{}",
            at(&format!("efficiency {sql} vs {e}"))
        );
    }
    for s in &r.states {
        let key = format!("{}_s", s.state.replace('-', "_"));
        assert!(
            close(t[key.as_str()].as_f64().unwrap(), s.seconds),
            "{}",
            at(&key)
        );
    }
    let bins = rows(engine, "efficiency_by_input", node);
    assert_eq!(bins.len(), r.efficiency_by_input.len(), "{}", at("bins"));
    for (sql, b) in bins.iter().zip(&r.efficiency_by_input) {
        assert_eq!(
            sql["bin"].as_i64(),
            Some((b.input_v_low / EFFICIENCY_BIN_V).round() as i64)
        );
        assert!(
            close(sql["seconds"].as_f64().unwrap(), b.seconds),
            "{}",
            at("bin seconds")
        );
        assert_eq!(
            sql["drawn_nj"].as_i64(),
            Some(nj(b.drawn_j)),
            "{}",
            at("bin drawn")
        );
        assert_eq!(
            sql["converted_nj"].as_i64(),
            Some(nj(b.converted_j)),
            "{}",
            at("bin converted")
        );
    }
    let days = rows(engine, "daily_budget", node);
    assert_eq!(days.len(), r.days.len(), "{}", at("days"));
    for (sql, d) in days.iter().zip(&r.days) {
        assert_eq!(sql["day"].as_i64(), Some(i64::from(d.day)));
        assert_eq!(
            sql["drawn_nj"].as_i64(),
            Some(nj(d.drawn_j)),
            "{}",
            at("day drawn")
        );
        assert_eq!(
            sql["stored_nj"].as_i64(),
            Some(nj(d.stored_j)),
            "{}",
            at("day stored")
        );
        assert!(
            close(sql["outage_s"].as_f64().unwrap(), d.outage_s),
            "{}",
            at("day outage")
        );
    }
    let outages = rows(engine, "converter_outages", node);
    let o = outages
        .first()
        .unwrap_or_else(|| panic!("{}", at("no outage row")));
    assert_eq!(
        o["outages"].as_u64(),
        Some(r.outages.len() as u64),
        "{}",
        at("outages")
    );
    let total: f64 = r.outages.iter().map(|o| o.duration_s).sum();
    assert!(
        close(o["outage_s"].as_f64().unwrap(), total),
        "{}",
        at("outage time")
    );
    let longest = r.outages.iter().map(|o| o.duration_s).fold(0.0, f64::max);
    assert!(
        close(o["longest_outage_s"].as_f64().unwrap(), longest),
        "{}",
        at("longest")
    );
    let sizing = rows(engine, "sizing_inputs", node);
    let (sql, advice) = (sizing[0], r.sizing.as_ref().unwrap());
    assert!(
        close(sql["load_w"].as_f64().unwrap(), advice.load_w),
        "{}",
        at("load power")
    );
    assert!(
        close(sql["active_w"].as_f64().unwrap(), advice.active_w),
        "{}",
        at("active power")
    );
    let sleep = sql["sleep_w"].as_f64().unwrap_or(0.0);
    assert!(close(sleep, advice.sleep_w), "{}", at("sleep power"));
    assert!(
        close(sql["output_v_max"].as_f64().unwrap(), advice.v_max),
        "{}",
        at("v max")
    );
    let mut by_cause: BTreeMap<&str, u64> = BTreeMap::new();
    for l in &r.load_outages {
        *by_cause.entry(l.cause.as_str()).or_default() += 1;
    }
    let sql_causes: BTreeMap<&str, u64> = rows(engine, "load_outages", node)
        .iter()
        .map(|l| (l["cause"].as_str().unwrap(), l["outages"].as_u64().unwrap()))
        .collect();
    assert_eq!(sql_causes, by_cause, "{}", at("load outages"));
    let link = rows(engine, "link_quality", node);
    assert_eq!(
        link[0]["lost_before"].as_u64(),
        Some(r.link.lost_frames),
        "{}",
        at("lost")
    );
}

#[test]
fn duckdb_and_spark_answer_the_reports_questions_as_the_report_does() {
    if reference_python().is_none() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let logs_dir = dir.path().join("logs");
    let dataset = dir.path().join("dataset");
    let scenarios = fleet_scenarios(6, 1.5, 3).unwrap();
    let logs = simulate_fleet(scenarios, &logs_dir, &gleaner::progress::none()).unwrap();
    let hidden = gleaner::progress::none();
    for log in &logs {
        gleaner::dataset::export_log(log, &dataset, &hidden).unwrap();
    }
    // Exporting a log again replaces its own files: nothing doubles.
    gleaner::dataset::export_log(&logs[0], &dataset, &hidden).unwrap();
    let answers = sql_answers(&dataset);

    let mut nodes = Vec::new();
    for log in &logs {
        let report = analyze_file(log).unwrap();
        let node = report.boots[0].node_id.clone();
        let name = log.file_name().unwrap().to_string_lossy().into_owned();
        for engine in ["duckdb", "spark"] {
            check_node(
                &answers[engine],
                &format!("{engine} {name}"),
                &node,
                &report,
            );
        }
        nodes.push(node);
    }
    nodes.sort();
    nodes.dedup();
    assert_eq!(nodes.len(), logs.len(), "every node has its own id");

    // Times and energies arrive typed, with no casts.
    let readers = &answers["readers"];
    assert_eq!(readers["pandas"]["host_time"], "datetime64[us, UTC]");
    assert_eq!(readers["pandas"]["drawn_nj"], "int64");
    assert!(readers["polars"]["host_time"]
        .as_str()
        .unwrap()
        .contains("UTC"));
    assert_eq!(readers["polars"]["stored_nj"], "Int64");
    let spark_types = &answers["spark"]["_types"];
    assert_eq!(spark_types["host_time"], "timestamp");
    assert_eq!(spark_types["drawn_nj"], "bigint");
    let total_reports: u64 = answers["duckdb"]["node_totals"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t["reports"].as_u64().unwrap())
        .sum();
    assert_eq!(readers["pandas"]["rows"].as_u64(), Some(total_reports));
}
