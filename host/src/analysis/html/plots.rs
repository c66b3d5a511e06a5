//! The page's plots, drawn as SVG text with plotters: voltages over time on
//! coloured state bands, the state timeline, power, cumulative energy, the
//! daily energy budget, and efficiency by input voltage with the time spent
//! in each bin.

use gleaner_protocol::ConverterState;
use plotters::prelude::*;

use crate::analysis::series::Point;
use crate::analysis::{EfficiencyBin, RunReport};

/// What a plot function returns: the SVG, or why it could not be drawn.
pub type Drawn = Result<String, Box<dyn std::error::Error>>;

const WIDTH: u32 = 900;
const HEIGHT: u32 = 320;

/// The colour of a state's band and legend.
pub fn state_colour(state: ConverterState) -> RGBColor {
    match state {
        ConverterState::Idle => RGBColor(200, 200, 200),
        ConverterState::ColdStart => RGBColor(170, 200, 240),
        ConverterState::Harvesting => RGBColor(190, 235, 190),
        ConverterState::Sagging => RGBColor(250, 225, 150),
        ConverterState::CutOff => RGBColor(245, 170, 170),
        ConverterState::Stalled => RGBColor(210, 160, 230),
    }
}

/// The colour of a state given by its wire index (idle's grey for an
/// unknown one).
fn band_colour(index: u8) -> RGBColor {
    ConverterState::ALL
        .get(usize::from(index))
        .map_or(state_colour(ConverterState::Idle), |&state| {
            state_colour(state)
        })
}

fn hours(t: f64, t0: f64) -> f64 {
    (t - t0) / 3600.0
}

/// The span of `values` with 5 % padding (a unit span when there is none).
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

/// A line of a time plot: legend, colour, value of a point.
pub type LineSpec<'a> = (&'a str, RGBColor, fn(&Point) -> f64);

/// The drawing area of one plot.
type Area<'a> = DrawingArea<SVGBackend<'a>, plotters::coord::Shift>;

/// What a plot's drawing returns.
type Painted = Result<(), Box<dyn std::error::Error>>;

/// One plot as SVG text: a white page `height` tall, painted by `paint`.
fn svg(height: u32, paint: impl FnOnce(&Area) -> Painted) -> Drawn {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, height)).into_drawing_area();
        root.fill(&WHITE)?;
        paint(&root)?;
        root.present()?;
    }
    Ok(svg)
}

/// A chart with the page's caption, margin and axis areas (`y_label_width`
/// for the labels on the left).
fn chart_on<'a, 'b>(
    root: &'a Area<'b>,
    title: &str,
    y_label_width: u32,
) -> ChartBuilder<'a, 'b, SVGBackend<'b>> {
    let mut builder = ChartBuilder::on(root);
    builder
        .caption(title, ("sans-serif", 18))
        .margin(10)
        .x_label_area_size(35)
        .y_label_area_size(y_label_width);
    builder
}

/// The legend box of the series drawn with labels.
fn legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.8))
        .border_style(BLACK)
        .draw()
}

/// Lines over time (hours from the start), optionally on state bands.
pub fn time_plot(
    r: &RunReport,
    title: &str,
    y_label: &str,
    lines: &[LineSpec<'_>],
    state_bands: bool,
) -> Drawn {
    let pts = &r.series;
    let t0 = pts.first().map_or(0.0, |p| p.t_s);
    let (x0, x1) = range(pts.iter().map(|p| hours(p.t_s, t0)));
    let (y0, y1) = range(lines.iter().flat_map(|(_, _, f)| pts.iter().map(f)));
    svg(HEIGHT, |root| {
        let mut chart = chart_on(root, title, 60).build_cartesian_2d(x0..x1, y0..y1)?;
        chart
            .configure_mesh()
            .x_desc("hours from start")
            .y_desc(y_label)
            .draw()?;
        if state_bands {
            chart.draw_series(pts.windows(2).map(|w| {
                Rectangle::new(
                    [(hours(w[0].t_s, t0), y0), (hours(w[1].t_s, t0), y1)],
                    band_colour(w[0].state).mix(0.5).filled(),
                )
            }))?;
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
        legend(&mut chart)?;
        Ok(())
    })
}

/// One row per state, a bar wherever the converter was in it.
pub fn state_timeline(r: &RunReport, title: &str) -> Drawn {
    let pts = &r.series;
    let t0 = pts.first().map_or(0.0, |p| p.t_s);
    let (x0, x1) = range(pts.iter().map(|p| hours(p.t_s, t0)));
    let rows = ConverterState::ALL.len() as f64;
    svg(220, |root| {
        let mut chart = chart_on(root, title, 90).build_cartesian_2d(x0..x1, 0.0..rows)?;
        chart
            .configure_mesh()
            .disable_y_mesh()
            .y_labels(ConverterState::ALL.len() * 2 + 1)
            .y_label_formatter(&|y| {
                let row = y.floor();
                let name = ConverterState::ALL
                    .get(row as usize)
                    .filter(|_| (y - row - 0.5).abs() < 0.01)
                    .map_or("", |s| s.name());
                name.to_string()
            })
            .x_desc("hours from start")
            .draw()?;
        chart.draw_series(pts.windows(2).map(|w| {
            let row = f64::from(w[0].state);
            Rectangle::new(
                [
                    (hours(w[0].t_s, t0), row + 0.15),
                    (hours(w[1].t_s, t0), row + 0.85),
                ],
                band_colour(w[0].state).filled(),
            )
        }))?;
        Ok(())
    })
}

/// Energy drawn and delivered per day as paired bars, with the storage change.
pub fn daily_budget(r: &RunReport, title: &str) -> Drawn {
    let days = &r.days;
    let top = days
        .iter()
        .flat_map(|d| [d.drawn_j, d.delivered_j, d.stored_j.abs()])
        .fold(0.0f64, f64::max)
        .max(1e-9)
        * 1.1;
    let bottom = days.iter().map(|d| d.stored_j).fold(0.0f64, f64::min) * 1.1;
    svg(HEIGHT, |root| {
        let mut chart = chart_on(root, title, 60)
            .build_cartesian_2d(0.0..(days.len().max(1) as f64), bottom..top)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .x_labels(days.len().clamp(1, 31) + 1)
            .x_label_formatter(&|x| format!("day {}", x.floor() as i64))
            .y_desc("joules")
            .draw()?;
        type Value = fn(&crate::analysis::DayBudget) -> f64;
        let bars: [(&str, RGBColor, f64, Value); 3] = [
            ("drawn from the harvester", BLUE, 0.1, |d| d.drawn_j),
            ("delivered to the load", RED, 0.37, |d| d.delivered_j),
            ("storage change", GREEN, 0.64, |d| d.stored_j),
        ];
        for (name, colour, offset, value) in bars {
            chart
                .draw_series(days.iter().enumerate().map(move |(i, d)| {
                    let x = i as f64 + offset;
                    Rectangle::new([(x, 0.0), (x + 0.25, value(d))], colour.mix(0.8).filled())
                }))?
                .label(name)
                .legend(move |(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 12, y + 5)], colour.filled())
                });
        }
        legend(&mut chart)?;
        Ok(())
    })
}

/// Efficiency (line, left axis) and hours spent converting (bars, right
/// axis) in each input-voltage bin.
pub fn efficiency_by_input(r: &RunReport, title: &str) -> Drawn {
    let EfficiencyPlot {
        bins,
        x: (x0, x1),
        most_hours,
        points,
    } = EfficiencyPlot::of(r);
    let grey = RGBColor(180, 180, 180);
    svg(HEIGHT, |root| {
        let mut chart = chart_on(root, title, 60)
            .right_y_label_area_size(60)
            .build_cartesian_2d(x0..x1, 0.0..100.0)?
            .set_secondary_coord(x0..x1, 0.0..most_hours);
        chart
            .configure_mesh()
            .x_desc("input voltage (V)")
            .y_desc("efficiency (%)")
            .draw()?;
        chart
            .configure_secondary_axes()
            .y_desc("hours in the bin")
            .draw()?;
        chart
            .draw_secondary_series(bins.iter().map(|b| {
                Rectangle::new(
                    [(b.input_v_low, 0.0), (b.input_v_high, b.seconds / 3600.0)],
                    grey.mix(0.5).filled(),
                )
            }))?
            .label("hours in the bin")
            .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 12, y + 5)], grey.filled()));
        chart
            .draw_series(LineSeries::new(
                points.iter().copied(),
                BLUE.stroke_width(2),
            ))?
            .label("efficiency")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], BLUE.stroke_width(2)));
        chart.draw_series(
            points
                .iter()
                .map(|&(x, y)| Circle::new((x, y), 3, BLUE.filled())),
        )?;
        legend(&mut chart)?;
        Ok(())
    })
}

/// What the efficiency plot draws: the bins with time in them, the voltage
/// range, the hours' axis top, and (middle of the bin, V; efficiency, %) of
/// the bins with an efficiency.
struct EfficiencyPlot<'a> {
    bins: Vec<&'a EfficiencyBin>,
    x: (f64, f64),
    most_hours: f64,
    points: Vec<(f64, f64)>,
}

impl<'a> EfficiencyPlot<'a> {
    fn of(r: &'a RunReport) -> Self {
        let bins: Vec<_> = r
            .efficiency_by_input
            .iter()
            .filter(|b| b.seconds > 0.0)
            .collect();
        let x = range(bins.iter().flat_map(|b| [b.input_v_low, b.input_v_high]));
        let most_hours = bins
            .iter()
            .map(|b| b.seconds / 3600.0)
            .fold(0.0f64, f64::max)
            .max(1e-6)
            * 1.1;
        let points = bins
            .iter()
            .filter_map(|b| {
                b.efficiency
                    .map(|e| ((b.input_v_low + b.input_v_high) / 2.0, e * 100.0))
            })
            .collect();
        EfficiencyPlot {
            bins,
            x,
            most_hours,
            points,
        }
    }
}
