//! The analysis side: JSON stability, the HTML page and its plots, CSV
//! exports that reproduce the totals, and sizing advice that works.

use std::collections::BTreeSet;

use gleaner::analysis::{
    analyze_file, html, sizing, RunReport, NAMES_RENAMED_SINCE_V1, RENAMED_SINCE_V1, REPORT_SCHEMA,
};
use gleaner::export::export_csv;
use gleaner::sim::run::engine::simulate_to_log;
use gleaner::sim::Scenario;
use gleaner_tests::scenario;

/// Simulates `s` straight into a log (no pseudo-terminal) and reports on it.
fn simulated(
    s: Scenario,
    dir: &std::path::Path,
) -> (std::path::PathBuf, RunReport, gleaner::sim::GroundTruth) {
    let log = dir.join("sim.gleanlog");
    let truth = simulate_to_log(
        s,
        11,
        &log,
        1_700_000_000_000_000,
        &gleaner::progress::none(),
    )
    .unwrap();
    let report = analyze_file(&log).unwrap();
    (log, report, truth)
}

/// Every key path of a JSON value with its type; arrays contribute their
/// first element's shape.
fn shape(value: &serde_json::Value, path: String, out: &mut BTreeSet<String>) {
    use serde_json::Value::*;
    match value {
        Object(map) => {
            out.insert(format!("{path}: object"));
            for (k, v) in map {
                shape(v, format!("{path}.{k}"), out);
            }
        }
        Array(items) => {
            out.insert(format!("{path}: array"));
            if let Some(first) = items.first() {
                shape(first, format!("{path}[]"), out);
            }
        }
        String(_) => drop(out.insert(format!("{path}: string"))),
        Number(_) => drop(out.insert(format!("{path}: number"))),
        Bool(_) => drop(out.insert(format!("{path}: bool"))),
        Null => drop(out.insert(format!("{path}: null"))),
    }
}

#[test]
fn json_schema_is_stable() {
    // Pinned in tests/data/report-shape.txt; a change there is a schema change
    // (bump REPORT_SCHEMA and update docs/report-json.md).
    let dir = tempfile::tempdir().unwrap();
    let (_, report, _) = simulated(scenario("stalled-converter", None), dir.path());
    let value = serde_json::to_value(&report).unwrap();
    assert_eq!(value["schema"], "gleaner.report.v2");
    let mut paths = BTreeSet::new();
    shape(&value, String::new(), &mut paths);
    let got: Vec<String> = paths.into_iter().collect();
    let pinned = include_str!("../data/report-shape.txt");
    let expected: Vec<String> = pinned.lines().map(str::to_string).collect();
    if got != expected {
        std::fs::write(
            std::env::temp_dir().join("report-shape.txt"),
            got.join("\n") + "\n",
        )
        .unwrap();
    }
    assert_eq!(
        got, expected,
        "JSON shape changed; new shape written to the temp dir"
    );
}

#[test]
fn the_html_page_has_one_valid_svg_per_plot() {
    let dir = tempfile::tempdir().unwrap();
    let (_, report, _) = simulated(scenario("boiler-pipe", Some(2.0)), dir.path());
    let page = html::render(&report).unwrap();
    assert!(page.starts_with("<!DOCTYPE html>"));
    // Opens with no network: no scripts, no external resources.
    assert!(!page.contains("<script"));
    assert!(!page.contains("src=\"http") && !page.contains("href=\"http"));
    let figures: Vec<&str> = page.split("<figure>").skip(1).collect();
    assert_eq!(figures.len(), html::PLOT_TITLES.len());
    for (figure, title) in figures.iter().zip(html::PLOT_TITLES) {
        assert!(figure.contains(title));
        let start = figure.find("<svg").unwrap();
        let end = figure.find("</svg>").unwrap() + "</svg>".len();
        let svg = &figure[start..end];
        let doc =
            roxmltree::Document::parse(svg).unwrap_or_else(|e| panic!("{title}: invalid SVG: {e}"));
        assert_eq!(doc.root_element().tag_name().name(), "svg");
        let lines = doc
            .descendants()
            .filter(|n| n.has_tag_name("polyline") || n.has_tag_name("path"))
            .count();
        assert!(lines >= 1, "{title} draws something");
    }
}

#[test]
fn csv_export_reproduces_the_report_totals() {
    let dir = tempfile::tempdir().unwrap();
    let (log, report, _) = simulated(scenario("boiler-pipe", Some(3.0)), dir.path());
    let done = export_csv(
        std::slice::from_ref(&log),
        &dir.path().join("out"),
        &gleaner::progress::none(),
    )
    .unwrap();
    let text = std::fs::read_to_string(&done.reports_path).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let (drawn_col, delivered_col, cut_col) =
        (col("drawn_nj"), col("delivered_nj"), col("cutoff_ms"));
    let (mut drawn, mut delivered, mut cut_ms, mut rows) = (0u64, 0u64, 0u64, 0u64);
    for line in lines {
        let cells: Vec<&str> = line.split(',').collect();
        assert_eq!(cells.len(), header.len());
        drawn += cells[drawn_col].parse::<u64>().unwrap();
        delivered += cells[delivered_col].parse::<u64>().unwrap();
        cut_ms += cells[cut_col].parse::<u64>().unwrap();
        rows += 1;
    }
    assert_eq!(rows, done.reports);
    assert_eq!(drawn as f64 / 1e9, report.energy.drawn_j);
    assert_eq!(delivered as f64 / 1e9, report.energy.delivered_j);
    let cut_s = report.seconds_in("cutoff").unwrap();
    assert!((cut_ms as f64 / 1e3 - cut_s).abs() < 1e-6);
    let events = std::fs::read_to_string(&done.events_path).unwrap();
    assert_eq!(events.lines().count() as u64 - 1, done.events);
    assert_eq!(done.events as usize, report.transitions.len());
}

#[test]
fn recommended_storage_carries_the_load_through_the_outage() {
    // Run the greenhouse day, take the report's storage advice, fit that
    // capacitance and run it again: the load must never brown out once powered.
    let dir = tempfile::tempdir().unwrap();
    let base = scenario("greenhouse-day", None);
    let (_, report, truth) = simulated(base.clone(), dir.path());
    assert!(
        truth.load_brownouts >= 1,
        "the stock storage does not last the night"
    );
    let advice = report.sizing.clone().unwrap();
    let c = advice.capacitance_f.unwrap();
    // C = 2E / (Vmax² - Vmin²) with E = P t (capacitor energy, any physics text).
    let expected = 2.0 * advice.load_w * advice.outage_s
        / (advice.v_max.powi(2) - advice.v_min.powi(2))
        * advice.margin;
    assert!((c - expected).abs() / expected < 1e-12);
    let mut bigger = base;
    bigger.converter.output_capacitance_f = c;
    bigger.node.output_storage_uf = Some((c * 1e6) as u32);
    let dir2 = tempfile::tempdir().unwrap();
    let (_, _, truth2) = simulated(bigger, dir2.path());
    assert_eq!(
        truth2.load_brownouts, 0,
        "with {c:.3} F the load rides through the night: {truth2:?}"
    );
    assert_eq!(advice.margin, sizing::DEFAULT_MARGIN);
}

#[test]
fn report_of_a_fault_names_the_converter() {
    let dir = tempfile::tempdir().unwrap();
    let (_, report, _) = simulated(scenario("stalled-converter", None), dir.path());
    let text = gleaner::analysis::text::render(&report);
    assert!(text.contains("converter fault"), "{text}");
    assert!(text.contains("OUTAGES (1)"));
}

#[test]
fn parquet_export_reads_back_with_the_report_totals() {
    use arrow_array::{Array, Int64Array, StringArray, TimestampMicrosecondArray};
    let dir = tempfile::tempdir().unwrap();
    let (log, report, _) = simulated(scenario("boiler-pipe", Some(3.0)), dir.path());
    let done = gleaner::export::export_parquet(
        std::slice::from_ref(&log),
        &dir.path().join("out"),
        &gleaner::progress::none(),
    )
    .unwrap();
    let reports_file = dir.path().join("out-reports.parquet");
    assert!(done.files.contains(&reports_file), "{:?}", done.files);
    let file = std::fs::File::open(&reports_file).unwrap();
    let builder =
        parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(file).unwrap();
    // The file says what it is and where it came from.
    let kv = builder
        .metadata()
        .file_metadata()
        .key_value_metadata()
        .unwrap();
    let value = |key: &str| {
        kv.iter()
            .find(|k| k.key == key)
            .and_then(|k| k.value.clone())
    };
    assert_eq!(
        value("gleaner.schema").as_deref(),
        Some("gleaner.dataset.v1")
    );
    assert!(value("gleaner.node").unwrap().contains("calibration"));
    let drawn_field = builder
        .schema()
        .field_with_name("drawn_nj")
        .unwrap()
        .clone();
    assert_eq!(
        drawn_field.metadata().get("unit").map(String::as_str),
        Some("nJ")
    );
    let reader = builder.build().unwrap();
    let int = |batch: &arrow_array::RecordBatch, name: &str| -> i64 {
        let col = batch.column_by_name(name).unwrap();
        col.as_any()
            .downcast_ref::<Int64Array>()
            .unwrap()
            .values()
            .iter()
            .sum()
    };
    let (mut drawn, mut rows, mut cut_ms) = (0i64, 0usize, 0i64);
    for batch in reader {
        let batch = batch.unwrap();
        drawn += int(&batch, "drawn_nj");
        cut_ms += int(&batch, "cutoff_ms");
        let state = batch.column_by_name("state").unwrap();
        let state = state.as_any().downcast_ref::<StringArray>().unwrap();
        assert!(state.len() == batch.num_rows() && !state.value(0).is_empty());
        let time = batch.column_by_name("host_time").unwrap();
        let time = time
            .as_any()
            .downcast_ref::<TimestampMicrosecondArray>()
            .unwrap();
        assert_eq!(time.timezone(), Some("+00:00"));
        assert!(time.value(0) >= 1_700_000_000_000_000);
        rows += batch.num_rows();
    }
    assert_eq!(Some(&(rows as u64)), done.rows.get("reports"));
    assert_eq!(drawn as f64 / 1e9, report.energy.drawn_j);
    let cut_s = report.seconds_in("cutoff").unwrap();
    assert!((cut_ms as f64 / 1e3 - cut_s).abs() < 1e-6);
    assert_eq!(
        done.rows.get("events").copied().unwrap_or(0) as usize,
        report.transitions.len()
    );
}

/// Every field of `old` is in `new` with the same value (fields added since
/// are allowed).
fn old_fields_unchanged(old: &serde_json::Value, new: &serde_json::Value, path: &str) {
    match (old, new) {
        (serde_json::Value::Object(o), serde_json::Value::Object(n)) => {
            for (k, v) in o {
                // A field renamed since schema v1 is looked up by its new name.
                let generic = format!("{path}.{k}");
                let generic = generic
                    .split('[')
                    .map(|part| part.split_once(']').map_or(part, |(_, rest)| rest))
                    .collect::<Vec<_>>()
                    .join("[]");
                let name = RENAMED_SINCE_V1
                    .iter()
                    .find(|(old, _)| *old == generic)
                    .map_or(k.as_str(), |(_, new)| new);
                let field = n.get(name).unwrap_or_else(|| panic!("{path}.{k} is gone"));
                if k == "schema" {
                    // A log's report of the v1 build, or of this schema.
                    assert!(
                        matches!(v.as_str(), Some("gleaner.report.v1"))
                            || v.as_str() == Some(REPORT_SCHEMA),
                        "{v}"
                    );
                    assert_eq!(field.as_str(), Some(REPORT_SCHEMA));
                    continue;
                }
                old_fields_unchanged(v, field, &format!("{path}.{k}"));
            }
        }
        (serde_json::Value::Array(o), serde_json::Value::Array(n)) => {
            assert_eq!(o.len(), n.len(), "{path} length");
            for (i, (a, b)) in o.iter().zip(n).enumerate() {
                old_fields_unchanged(a, b, &format!("{path}[{i}]"));
            }
        }
        (serde_json::Value::Number(a), serde_json::Value::Number(b)) => {
            let (a, b) = (a.as_f64().unwrap(), b.as_f64().unwrap());
            assert!(
                (a - b).abs() <= 1e-12 * a.abs().max(b.abs()),
                "{path}: {a} vs {b}"
            );
        }
        (serde_json::Value::String(a), serde_json::Value::String(b)) => {
            let renamed = NAMES_RENAMED_SINCE_V1
                .iter()
                .find(|(old, _)| old == a)
                .map_or(a.as_str(), |(_, new)| new);
            assert_eq!(renamed, b, "{path}");
        }
        _ => assert_eq!(old, new, "{path}"),
    }
}

/// Today's report of the fixture log `name` (in tests/data), checked to
/// keep every figure of the JSON report the old build made of it.
fn fixture_reports_as_it_did(name: &str) -> gleaner::analysis::RunReport {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("data");
    let report = analyze_file(&dir.join(format!("{name}.gleanlog"))).unwrap();
    let new = serde_json::to_value(&report).unwrap();
    let old: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.join(format!("{name}.report.json"))).unwrap(),
    )
    .unwrap();
    old_fields_unchanged(&old, &new, "");
    report
}

#[test]
fn a_protocol_3_log_reports_as_it_did() {
    // The log and its JSON report were made by the protocol 3 build of this
    // tool (invented greenhouse evening, 6 h: Sagging, a cutoff, a load
    // brown-out after the storage carried it an hour); today's build keeps
    // every figure and says the node was not told its shed load.
    let report = fixture_reports_as_it_did("protocol3-greenhouse-evening");
    let boot = &report.boots[0];
    assert_eq!(boot.protocol, "3.0");
    assert_eq!(
        (boot.mppt_fraction, boot.output_regulated),
        (Some(0.78), true)
    );
    assert_eq!(boot.shed_load_a, None);
    assert_eq!(report.load_outages.len(), 1);
}

#[test]
fn a_protocol_2_log_reports_as_it_did() {
    // The log and its JSON report were made by the protocol 2 build of this
    // tool (invented greenhouse evening, 3.5 h: Sagging, a cutoff, a load
    // brown-out and harvest slots); today's build keeps every figure and
    // says the node was not told its converter.
    let report = fixture_reports_as_it_did("protocol2-greenhouse-evening");
    let boot = &report.boots[0];
    assert_eq!(boot.protocol, "2.0");
    assert_eq!((boot.mppt_fraction, boot.output_regulated), (None, false));
    assert_eq!(report.load_outages.len(), 1);
}

#[test]
fn a_protocol_1_log_reports_as_it_did() {
    // The log and its JSON report were made by the protocol 1 build of this
    // tool (invented orchard-night scenario, 1.5 h); the report of today's
    // build keeps every figure, and says the node is unknown.
    let report = fixture_reports_as_it_did("protocol1-orchard-night");
    assert_eq!(report.boots[0].node_id, "0000000000000000");
    assert_eq!(report.boots[0].protocol, "1.0");
    assert!(report.load_outages.is_empty());
}
