//! The report as one self-contained HTML page with SVG plots (no network
//! needed to open it): voltages over time with the state as coloured bands,
//! power, cumulative energy, and efficiency against input voltage.

use std::fmt::Write;

use plotters::prelude::*;

use super::text::{duration, energy};
use super::RunReport;

/// Titles of the plots, in page order.
pub const PLOT_TITLES: [&str; 4] = [
    "Input and output voltage",
    "Input and output power",
    "Cumulative energy",
    "Efficiency by input voltage",
];

const WIDTH: u32 = 900;
const HEIGHT: u32 = 320;

/// Colours of the states, in wire order.
const STATE_COLOURS: [RGBColor; 6] = [
    RGBColor(200, 200, 200), // idle
    RGBColor(170, 200, 240), // cold start
    RGBColor(190, 235, 190), // harvesting
    RGBColor(250, 225, 150), // sagging
    RGBColor(245, 170, 170), // cut off
    RGBColor(210, 160, 230), // stalled
];

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn hours(t: f64, t0: f64) -> f64 {
    (t - t0) / 3600.0
}

fn range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    if hi - lo < 1e-12 {
        return (lo - 0.5, hi + 0.5);
    }
    let pad = (hi - lo) * 0.05;
    (lo - pad, hi + pad)
}

type PlotResult = Result<(), Box<dyn std::error::Error>>;

/// A line of a time plot: legend, colour, value of a point.
type LineSpec<'a> = (&'a str, RGBColor, fn(&super::series::Point) -> f64);

fn time_plot(
    svg: &mut String,
    r: &RunReport,
    title: &str,
    y_label: &str,
    lines: &[LineSpec<'_>],
    state_bands: bool,
) -> PlotResult {
    let pts = &r.series;
    let t0 = pts.first().map_or(0.0, |p| p.t_s);
    let (x0, x1) = range(pts.iter().map(|p| hours(p.t_s, t0)));
    let (y0, y1) = range(lines.iter().flat_map(|(_, _, f)| pts.iter().map(f)));
    let root = SVGBackend::with_string(svg, (WIDTH, HEIGHT)).into_drawing_area();
    root.fill(&WHITE)?;
    let mut chart = ChartBuilder::on(&root)
        .caption(title, ("sans-serif", 18))
        .margin(10)
        .x_label_area_size(35)
        .y_label_area_size(60)
        .build_cartesian_2d(x0..x1, y0..y1)?;
    chart
        .configure_mesh()
        .x_desc("hours from start")
        .y_desc(y_label)
        .draw()?;
    if state_bands {
        for w in pts.windows(2) {
            let colour = STATE_COLOURS[usize::from(w[0].state).min(5)];
            chart.draw_series(std::iter::once(Rectangle::new(
                [(hours(w[0].t_s, t0), y0), (hours(w[1].t_s, t0), y1)],
                colour.mix(0.5).filled(),
            )))?;
        }
    }
    for (name, colour, f) in lines {
        let colour = *colour;
        chart
            .draw_series(LineSeries::new(
                pts.iter().map(|p| (hours(p.t_s, t0), f(p))),
                colour.stroke_width(2),
            ))?
            .label(*name)
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(2))
            });
    }
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.8))
        .border_style(BLACK)
        .draw()?;
    root.present()?;
    Ok(())
}

fn efficiency_plot(svg: &mut String, r: &RunReport) -> PlotResult {
    let bins: Vec<(f64, f64)> = r
        .efficiency_by_input
        .iter()
        .filter_map(|b| {
            b.efficiency
                .map(|e| ((b.input_v_low + b.input_v_high) / 2.0, e * 100.0))
        })
        .collect();
    let (x0, x1) = range(bins.iter().map(|b| b.0));
    let root = SVGBackend::with_string(svg, (WIDTH, HEIGHT)).into_drawing_area();
    root.fill(&WHITE)?;
    let mut chart = ChartBuilder::on(&root)
        .caption(PLOT_TITLES[3], ("sans-serif", 18))
        .margin(10)
        .x_label_area_size(35)
        .y_label_area_size(60)
        .build_cartesian_2d(x0..x1, 0.0..100.0)?;
    chart
        .configure_mesh()
        .x_desc("input voltage (V)")
        .y_desc("efficiency (%)")
        .draw()?;
    chart.draw_series(LineSeries::new(bins.iter().copied(), BLUE.stroke_width(2)))?;
    chart.draw_series(
        bins.iter()
            .map(|&(x, y)| Circle::new((x, y), 3, BLUE.filled())),
    )?;
    root.present()?;
    Ok(())
}

/// Renders the page.
pub fn render(r: &RunReport) -> Result<String, Box<dyn std::error::Error>> {
    let mut plots = vec![String::new(), String::new(), String::new(), String::new()];
    time_plot(
        &mut plots[0],
        r,
        PLOT_TITLES[0],
        "volts",
        &[
            ("input", BLUE, |p| p.input_v),
            ("output", RED, |p| p.output_v),
        ],
        true,
    )?;
    time_plot(
        &mut plots[1],
        r,
        PLOT_TITLES[1],
        "milliwatts",
        &[
            ("input", BLUE, |p| p.input_w * 1e3),
            ("output", RED, |p| p.output_w * 1e3),
        ],
        false,
    )?;
    time_plot(
        &mut plots[2],
        r,
        PLOT_TITLES[2],
        "joules",
        &[
            ("drawn", BLUE, |p| p.drawn_total_j),
            ("delivered", RED, |p| p.delivered_total_j),
        ],
        false,
    )?;
    efficiency_plot(&mut plots[3], r)?;

    let mut page = String::new();
    let source = r.header.as_ref().map_or("unknown".to_string(), |h| {
        format!("{} ({})", h.source, h.started)
    });
    let _ = write!(
        page,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>Gleaner report: {}</title>\n<style>body{{font-family:sans-serif;max-width:960px;margin:2em auto;color:#222}}table{{border-collapse:collapse}}td,th{{padding:2px 10px;border-bottom:1px solid #ddd;text-align:left}}.legend span{{display:inline-block;padding:2px 8px;margin-right:4px}}</style></head><body>\n",
        escape(&source)
    );
    let _ = writeln!(page, "<h1>Gleaner report</h1>\n<p>{}</p>", escape(&source));
    let _ = writeln!(
        page,
        "<table><tr><th>duration</th><td>{}</td></tr><tr><th>coverage</th><td>{:.1} %</td></tr><tr><th>energy drawn</th><td>{}</td></tr><tr><th>energy delivered</th><td>{}</td></tr><tr><th>storage change</th><td>{}</td></tr><tr><th>efficiency</th><td>{}</td></tr><tr><th>outages</th><td>{}</td></tr><tr><th>lost frames</th><td>{}</td></tr></table>",
        duration(r.duration_s),
        r.coverage * 100.0,
        energy(r.energy.drawn_j),
        energy(r.energy.delivered_j),
        energy(r.energy.stored_j),
        r.energy.efficiency.map_or("-".into(), |e| format!("{:.1} %", e * 100.0)),
        r.outages.len(),
        r.link.lost_frames
    );
    page.push_str("<p class=\"legend\">");
    for (state, colour) in gleaner_protocol::ConverterState::ALL
        .iter()
        .zip(STATE_COLOURS)
    {
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
    for (title, svg) in PLOT_TITLES.iter().zip(&plots) {
        let _ = write!(
            page,
            "<figure><figcaption>{}</figcaption>\n{}\n</figure>\n",
            escape(title),
            svg
        );
    }
    if !r.harvest.slots.is_empty() {
        let h = &r.harvest;
        let pct = |x: Option<f64>| x.map_or("-".to_string(), |v| format!("{:.1} %", v * 100.0));
        let _ = writeln!(
            page,
            "<h2>Harvest prediction</h2>\n<p>Mean error over slots with harvest: EWMA {}, WCMA {}; next 24 h predicted {}; energy-neutral duty cycle {}.</p>",
            pct(h.ewma_mape),
            pct(h.wcma_mape),
            h.next_day_j.map_or("-".to_string(), energy),
            pct(h.energy_neutral_duty)
        );
    }
    page.push_str("<h2>Load outages</h2>\n<table><tr><th>start</th><th>duration</th><th>cause</th><th>what happened</th></tr>\n");
    for o in &r.load_outages {
        let _ = writeln!(
            page,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            duration(o.start_s),
            duration(o.duration_s),
            escape(&o.cause),
            escape(&o.chain)
        );
    }
    page.push_str("</table>\n");
    page.push_str("<h2>Converter outages</h2>\n<table><tr><th>start</th><th>duration</th><th>cause</th><th>input before</th><th>storage before</th></tr>\n");
    for o in &r.outages {
        let _ = writeln!(
            page,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{:.3} V</td><td>{:.3} V</td></tr>",
            duration(o.start_s),
            duration(o.duration_s),
            o.cause.words(),
            o.input_v_before,
            o.storage_v_before
        );
    }
    page.push_str("</table>\n</body></html>\n");
    Ok(page)
}
