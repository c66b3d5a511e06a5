//! The report as one self-contained HTML page: every section of the text
//! report ([`Section::ALL`]), with SVG plots where a picture reads faster
//! than a table. No scripts and nothing fetched from the network, so it opens
//! offline; it prints with each plot and table kept on one page.

mod plots;

use std::fmt::Write;

use super::text::{duration, energy, power, Section};
use super::RunReport;

pub use plots::state_colour;

/// Titles of the plots, in page order.
pub const PLOT_TITLES: [&str; 6] = [
    "Input and output voltage",
    "Input and output power",
    "Cumulative energy",
    "State timeline",
    "Efficiency by input voltage",
    "Daily energy budget",
];

const STYLE: &str = "body{font-family:sans-serif;max-width:960px;margin:2em auto;color:#222;padding:0 1em}\
table{border-collapse:collapse;margin:0.5em 0}td,th{padding:2px 10px;border-bottom:1px solid #ddd;text-align:left}\
td.n{text-align:right;font-variant-numeric:tabular-nums}figure{margin:1em 0}svg{max-width:100%;height:auto}\
.legend span{display:inline-block;padding:2px 8px;margin-right:4px}.note{color:#555}\
@media print{body{max-width:none;margin:0}figure,table,h2{break-inside:avoid}h2{break-after:avoid}section{break-before:auto}}";

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn percent(x: Option<f64>) -> String {
    x.map_or("-".into(), |e| format!("{:.1} %", e * 100.0))
}

/// A plot in a figure, or a note saying why it could not be drawn.
fn figure(page: &mut String, title: &str, drawn: plots::Drawn) {
    match drawn {
        Ok(svg) => {
            let _ = write!(
                page,
                "<figure><figcaption>{}</figcaption>\n{svg}\n</figure>\n",
                escape(title)
            );
        }
        Err(e) => {
            let _ = writeln!(
                page,
                "<p class=\"note\">{}: not drawn ({e})</p>",
                escape(title)
            );
        }
    }
}

/// A table: header cells, then rows of cells (already escaped where needed).
fn table(page: &mut String, header: &[&str], rows: impl IntoIterator<Item = Vec<String>>) {
    page.push_str("<table><tr>");
    for h in header {
        let _ = write!(page, "<th>{h}</th>");
    }
    page.push_str("</tr>\n");
    for row in rows {
        page.push_str("<tr>");
        for cell in row {
            let _ = write!(page, "<td>{cell}</td>");
        }
        page.push_str("</tr>\n");
    }
    page.push_str("</table>\n");
}

/// Renders the page.
pub fn render(r: &RunReport) -> Result<String, Box<dyn std::error::Error>> {
    let source = r.header.as_ref().map_or("unknown".to_string(), |h| {
        format!("{} ({})", h.source, h.started)
    });
    let mut page = String::new();
    let _ = write!(
        page,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>Gleaner report: {}</title>\n<style>{STYLE}</style></head><body>\n\
         <h1>Gleaner report</h1>\n<p>{}</p>\n<nav><p>",
        escape(&source),
        escape(&source)
    );
    for s in Section::ALL {
        let _ = write!(page, "<a href=\"#{}\">{}</a> · ", s.id(), s.title());
    }
    page.push_str("</p></nav>\n");
    for section in Section::ALL {
        let _ = writeln!(
            page,
            "<section id=\"{}\"><h2>{}</h2>",
            section.id(),
            section.title()
        );
        match section {
            Section::Run => run(&mut page, r),
            Section::Energy => energy_section(&mut page, r),
            Section::States => states(&mut page, r),
            Section::LoadOutages => load_outages(&mut page, r),
            Section::ConverterOutages => converter_outages(&mut page, r),
            Section::EfficiencyByInput => efficiency(&mut page, r),
            Section::DailyBudget => daily_budget(&mut page, r),
            Section::HarvestPrediction => harvest(&mut page, r),
            Section::StorageAndDutyCycle => sizing(&mut page, r),
            Section::Link => link(&mut page, r),
        }
        page.push_str("</section>\n");
    }
    page.push_str("</body></html>\n");
    Ok(page)
}

fn run(page: &mut String, r: &RunReport) {
    let rows = [
        ("duration", duration(r.duration_s)),
        (
            "coverage",
            format!(
                "{:.1} % ({} with data, {} recording gaps)",
                r.coverage * 100.0,
                duration(r.covered_s),
                r.recording_gaps
            ),
        ),
        ("reboots", r.link.reboots.to_string()),
    ];
    table(
        page,
        &["", ""],
        rows.into_iter().map(|(k, v)| vec![k.to_string(), v]),
    );
    boots(page, r);
    figure(
        page,
        PLOT_TITLES[0],
        plots::time_plot(
            r,
            PLOT_TITLES[0],
            "volts",
            &[
                ("input", plotters::style::BLUE, |p| p.input_v),
                ("output", plotters::style::RED, |p| p.output_v),
            ],
            true,
        ),
    );
    state_legend(page);
}

/// One row per boot: the node, its firmware and configuration.
fn boots(page: &mut String, r: &RunReport) {
    table(
        page,
        &[
            "boot",
            "node",
            "boot id",
            "firmware",
            "protocol",
            "configuration",
            "start / stop",
            "load minimum",
            "storage",
            "converter",
            "shed load",
        ],
        r.boots.iter().map(|b| {
            let name = if b.node_name.is_empty() {
                String::new()
            } else {
                format!(" “{}”", escape(&b.node_name))
            };
            vec![
                b.index.to_string(),
                format!("{}{name}", escape(&b.node_id)),
                format!("{:08x}", b.boot_id),
                escape(&b.firmware),
                escape(&b.protocol),
                escape(&b.config_source),
                format!("{:.3} V / {:.3} V", b.start_v, b.stop_v),
                format!("{:.3} V", b.load_min_v),
                format!("{} F", b.storage_f),
                escape(&b.converter_words()),
                b.shed_load_words()
                    .unwrap_or_else(|| "not stated".to_owned()),
            ]
        }),
    );
}

/// The colours of the state bands.
fn state_legend(page: &mut String) {
    page.push_str("<p class=\"legend\">");
    for state in gleaner_protocol::ConverterState::ALL {
        let colour = state_colour(state);
        let _ = write!(
            page,
            "<span style=\"background:rgb({},{},{})\">{}</span>",
            colour.0,
            colour.1,
            colour.2,
            state.name()
        );
    }
    page.push_str("</p>\n");
}

fn energy_section(page: &mut String, r: &RunReport) {
    let e = &r.energy;
    let rows = [
        ("drawn from the harvester", energy(e.drawn_j)),
        ("delivered to the load", energy(e.delivered_j)),
        ("stored (net)", energy(e.stored_j)),
        (
            "efficiency ((delivered + stored) / drawn)",
            percent(e.efficiency),
        ),
    ];
    table(
        page,
        &["", ""],
        rows.into_iter().map(|(k, v)| vec![k.to_string(), v]),
    );
    let watts: [plots::LineSpec<'_>; 2] = [
        ("input", plotters::style::BLUE, |p| p.input_w * 1e3),
        ("output", plotters::style::RED, |p| p.output_w * 1e3),
    ];
    figure(
        page,
        PLOT_TITLES[1],
        plots::time_plot(r, PLOT_TITLES[1], "milliwatts", &watts, false),
    );
    let joules: [plots::LineSpec<'_>; 2] = [
        ("drawn", plotters::style::BLUE, |p| p.drawn_total_j),
        ("delivered", plotters::style::RED, |p| p.delivered_total_j),
    ];
    figure(
        page,
        PLOT_TITLES[2],
        plots::time_plot(r, PLOT_TITLES[2], "joules", &joules, false),
    );
}

fn states(page: &mut String, r: &RunReport) {
    table(
        page,
        &["state", "time", "share"],
        r.states.iter().filter(|s| s.seconds > 0.0).map(|s| {
            vec![
                escape(&s.state),
                duration(s.seconds),
                format!("{:.1} %", s.share * 100.0),
            ]
        }),
    );
    figure(
        page,
        PLOT_TITLES[3],
        plots::state_timeline(r, PLOT_TITLES[3]),
    );
}

fn load_outages(page: &mut String, r: &RunReport) {
    if r.load_outages.is_empty() {
        page.push_str("<p>None: the load kept its supply throughout.</p>\n");
        return;
    }
    table(
        page,
        &["start", "duration", "cause", "what happened"],
        r.load_outages.iter().map(|o| {
            vec![
                duration(o.start_s),
                duration(o.duration_s),
                escape(&o.cause),
                format!(
                    "{}{}",
                    escape(&o.chain),
                    if o.ongoing {
                        "; ongoing at end of log"
                    } else {
                        ""
                    }
                ),
            ]
        }),
    );
}

fn converter_outages(page: &mut String, r: &RunReport) {
    if r.outages.is_empty() {
        page.push_str("<p>None: the converter ran throughout.</p>\n");
        return;
    }
    table(
        page,
        &[
            "start",
            "duration",
            "cause",
            "node's reason",
            "input before",
            "storage before",
        ],
        r.outages.iter().map(|o| {
            vec![
                duration(o.start_s),
                format!(
                    "{}{}",
                    duration(o.duration_s),
                    if o.ongoing { " (ongoing)" } else { "" }
                ),
                o.cause.words().to_string(),
                escape(&o.node_cause),
                format!("{:.3} V", o.input_v_before),
                format!("{:.3} V", o.storage_v_before),
            ]
        }),
    );
}

fn efficiency(page: &mut String, r: &RunReport) {
    figure(
        page,
        PLOT_TITLES[4],
        plots::efficiency_by_input(r, PLOT_TITLES[4]),
    );
    table(
        page,
        &["input voltage", "time", "drawn", "efficiency"],
        r.efficiency_by_input
            .iter()
            .filter(|b| b.drawn_j > 0.0)
            .map(|b| {
                vec![
                    format!("{:.2} to {:.2} V", b.input_v_low, b.input_v_high),
                    duration(b.seconds),
                    energy(b.drawn_j),
                    percent(b.efficiency),
                ]
            }),
    );
}

fn daily_budget(page: &mut String, r: &RunReport) {
    page.push_str("<p class=\"note\">24 h blocks from the first interval report.</p>\n");
    figure(page, PLOT_TITLES[5], plots::daily_budget(r, PLOT_TITLES[5]));
    table(
        page,
        &["day", "drawn", "delivered", "stored", "outage", ""],
        r.days.iter().map(|d| {
            vec![
                d.day.to_string(),
                energy(d.drawn_j),
                energy(d.delivered_j),
                energy(d.stored_j),
                duration(d.outage_s),
                d.neutrality().into(),
            ]
        }),
    );
}

fn harvest(page: &mut String, r: &RunReport) {
    let h = &r.harvest;
    if h.slots.is_empty() {
        page.push_str("<p>No hour slot ended in this log (the node predicts harvest per hour of its own day).</p>\n");
        return;
    }
    let _ = writeln!(
        page,
        "<p>Mean error over slots with harvest: EWMA {}, WCMA {}; next 24 h predicted {}; energy-neutral duty cycle {}.</p>",
        percent(h.ewma_mape),
        percent(h.wcma_mape),
        h.next_day_j.map_or("-".to_string(), energy),
        percent(h.energy_neutral_duty)
    );
    let opt = |x: Option<f64>| x.map_or("-".to_string(), energy);
    table(
        page,
        &["at", "slot", "drawn", "EWMA predicted", "WCMA predicted"],
        h.slots.iter().rev().take(24).rev().map(|s| {
            vec![
                duration(s.t_s),
                s.slot.to_string(),
                energy(s.drawn_j),
                opt(s.ewma_j),
                opt(s.wcma_j),
            ]
        }),
    );
}

fn sizing(page: &mut String, r: &RunReport) {
    let Some(s) = &r.sizing else {
        page.push_str("<p>Not enough in this log to size storage.</p>\n");
        return;
    };
    let mut rows = Vec::new();
    if s.outage_s > 0.0 {
        rows.push(("longest outage", duration(s.outage_s)));
        rows.push(("load while supplied", power(s.load_w)));
        rows.push(("energy to bridge it", energy(s.energy_needed_j)));
        rows.push((
            "capacitance needed",
            s.capacitance_f.map_or("- (the highest storage voltage seen is not above the lowest usable one)".into(), |c| {
                format!(
                    "{c:.3} F between {:.2} V and {:.2} V (C = 2E / (Vmax² − Vmin²) = {:.3} F, times a {:.0} % margin)",
                    s.v_max,
                    s.v_min,
                    s.capacitance_exact_f.unwrap_or(0.0),
                    (s.margin - 1.0) * 100.0
                )
            }),
        ));
    } else {
        rows.push((
            "longest outage",
            "none: the present storage was enough".into(),
        ));
    }
    rows.push(("mean converted", power(s.converted_w)));
    rows.push((
        "load asleep / active",
        format!("{} / {}", power(s.sleep_w), power(s.active_w)),
    ));
    rows.push((
        "largest duty cycle",
        s.max_duty_cycle.map_or(
            "- (the converted power does not cover even the sleep power)".into(),
            |d| format!("{:.2} %", d * 100.0),
        ),
    ));
    table(
        page,
        &["", ""],
        rows.into_iter().map(|(k, v)| vec![k.to_string(), v]),
    );
}

fn link(page: &mut String, r: &RunReport) {
    let l = &r.link;
    let rows = [
        ("frames", l.frames),
        ("lost", l.lost_frames),
        ("CRC errors", l.crc_errors),
        ("framing errors", l.framing_errors),
        ("undecodable", l.decode_errors),
        ("duplicates", l.duplicates),
        ("reboots", l.reboots),
    ];
    table(
        page,
        &["", ""],
        rows.into_iter()
            .map(|(k, v)| vec![k.to_string(), v.to_string()]),
    );
    for w in &r.warnings {
        let _ = writeln!(page, "<p class=\"note\">warning: {}</p>", escape(w));
    }
}
