//! A time series of bounded size for plots: when it fills, neighbouring
//! buckets are merged and the bucket width doubles, so memory stays flat
//! however long the run.

use gleaner_protocol::ConverterState;
use serde::{Deserialize, Serialize};

/// Most buckets kept.
pub const MAX_BUCKETS: usize = 2048;

/// One bucket of reports.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Point {
    /// Start of the bucket, s of run time.
    pub t_s: f64,
    /// Mean input voltage, V.
    pub input_v: f64,
    /// Mean output voltage, V.
    pub output_v: f64,
    /// Mean input power, W.
    pub input_w: f64,
    /// Mean output (load) power, W.
    pub output_w: f64,
    /// Energy drawn since the start at the end of the bucket, J.
    pub drawn_total_j: f64,
    /// Energy delivered since the start at the end of the bucket, J.
    pub delivered_total_j: f64,
    /// The state index (wire order) held longest in the bucket.
    pub state: u8,
    /// Seconds of reports merged (weights the means).
    #[serde(skip)]
    weight_s: f64,
    #[serde(skip)]
    state_s: [f64; ConverterState::COUNT],
}

/// The bounded series.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(into = "Kept", from = "Kept")]
pub struct Series {
    points: Vec<Point>,
    width_s: f64,
    origin_s: Option<f64>,
}

/// One report's contribution.
#[derive(Debug, Clone, Copy)]
pub struct Sample {
    /// End of the report, s of run time.
    pub t_s: f64,
    /// Length of the report, s.
    pub length_s: f64,
    /// Mean input voltage, V.
    pub input_v: f64,
    /// Mean output voltage, V.
    pub output_v: f64,
    /// Mean input power, W.
    pub input_w: f64,
    /// Mean output power, W.
    pub output_w: f64,
    /// Cumulative drawn energy, J.
    pub drawn_total_j: f64,
    /// Cumulative delivered energy, J.
    pub delivered_total_j: f64,
    /// Seconds in each state during the report.
    pub state_s: [f64; ConverterState::COUNT],
}

/// A bucket as a checkpoint keeps it: every field, the weights the report
/// leaves out too.
type KeptPoint = ([f64; 7], u8, f64, [f64; ConverterState::COUNT]);

/// The series as a checkpoint keeps it.
#[derive(Serialize, Deserialize)]
struct Kept {
    points: Vec<KeptPoint>,
    width_s: f64,
    origin_s: Option<f64>,
}

impl From<Series> for Kept {
    fn from(series: Series) -> Self {
        let keep = |p: &Point| {
            let shown = [
                p.t_s,
                p.input_v,
                p.output_v,
                p.input_w,
                p.output_w,
                p.drawn_total_j,
                p.delivered_total_j,
            ];
            (shown, p.state, p.weight_s, p.state_s)
        };
        Kept {
            points: series.points.iter().map(keep).collect(),
            width_s: series.width_s,
            origin_s: series.origin_s,
        }
    }
}

impl From<Kept> for Series {
    fn from(kept: Kept) -> Self {
        let restore = |(shown, state, weight_s, state_s): KeptPoint| {
            let [t_s, input_v, output_v, input_w, output_w, drawn_total_j, delivered_total_j] =
                shown;
            Point {
                t_s,
                input_v,
                output_v,
                input_w,
                output_w,
                drawn_total_j,
                delivered_total_j,
                state,
                weight_s,
                state_s,
            }
        };
        Series {
            points: kept.points.into_iter().map(restore).collect(),
            width_s: kept.width_s,
            origin_s: kept.origin_s,
        }
    }
}

fn merge(a: &mut Point, b: &Point) {
    let w = a.weight_s + b.weight_s;
    if w > 0.0 {
        let mix = |x: f64, y: f64| (x * a.weight_s + y * b.weight_s) / w;
        a.input_v = mix(a.input_v, b.input_v);
        a.output_v = mix(a.output_v, b.output_v);
        a.input_w = mix(a.input_w, b.input_w);
        a.output_w = mix(a.output_w, b.output_w);
    }
    a.weight_s = w;
    a.drawn_total_j = b.drawn_total_j;
    a.delivered_total_j = b.delivered_total_j;
    for (x, y) in a.state_s.iter_mut().zip(b.state_s) {
        *x += y;
    }
    a.state = dominant(&a.state_s);
}

fn dominant(state_s: &[f64; ConverterState::COUNT]) -> u8 {
    let mut best = 0;
    for (i, &s) in state_s.iter().enumerate() {
        if s > state_s[best] {
            best = i;
        }
    }
    best as u8
}

impl Series {
    /// An empty series starting with 1 s buckets.
    pub fn new() -> Self {
        Series {
            points: Vec::new(),
            width_s: 1.0,
            origin_s: None,
        }
    }

    /// Adds a report.
    pub fn add(&mut self, s: Sample) {
        let origin = *self.origin_s.get_or_insert(s.t_s - s.length_s);
        let start = s.t_s - s.length_s;
        let bucket_t = origin + ((start - origin) / self.width_s).floor() * self.width_s;
        let point = Point {
            t_s: bucket_t,
            input_v: s.input_v,
            output_v: s.output_v,
            input_w: s.input_w,
            output_w: s.output_w,
            drawn_total_j: s.drawn_total_j,
            delivered_total_j: s.delivered_total_j,
            state: dominant(&s.state_s),
            weight_s: s.length_s.max(1e-9),
            state_s: s.state_s,
        };
        match self.points.last_mut() {
            Some(last) if last.t_s == bucket_t => merge(last, &point),
            _ => self.points.push(point),
        }
        if self.points.len() > MAX_BUCKETS {
            self.compact();
        }
    }

    fn compact(&mut self) {
        self.width_s *= 2.0;
        let origin = self.origin_s.unwrap_or(0.0);
        let mut merged: Vec<Point> = Vec::with_capacity(MAX_BUCKETS / 2 + 1);
        for mut p in self.points.drain(..) {
            p.t_s = origin + ((p.t_s - origin) / self.width_s).floor() * self.width_s;
            match merged.last_mut() {
                Some(last) if last.t_s == p.t_s => merge(last, &p),
                _ => merged.push(p),
            }
        }
        self.points = merged;
    }

    /// The buckets, oldest first.
    pub fn points(&self) -> &[Point] {
        &self.points
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stays_bounded_and_keeps_the_means() {
        let mut series = Series::new();
        for i in 0..100_000 {
            let t = (i + 1) as f64;
            series.add(Sample {
                t_s: t,
                length_s: 1.0,
                input_v: if i % 2 == 0 { 1.0 } else { 3.0 },
                output_v: 2.0,
                input_w: 0.0,
                output_w: 0.0,
                drawn_total_j: t,
                delivered_total_j: 0.0,
                state_s: [0.0, 0.0, 1.0, 0.0, 0.0, 0.0],
            });
        }
        assert!(series.points().len() <= MAX_BUCKETS);
        assert!(series.points().len() > MAX_BUCKETS / 4);
        for p in series.points() {
            assert!((p.input_v - 2.0).abs() < 1e-9);
            assert_eq!(p.state, 2);
        }
        assert_eq!(series.points().last().unwrap().drawn_total_j, 100_000.0);
    }
}
