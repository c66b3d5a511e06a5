//! Spans of time that open at one message and close at a later one (an
//! outage of the converter or of the load), the last perhaps still open when
//! the log ends.

/// A span with a start, an end and a length, and whether it was still open
/// when the log ended.
pub trait Span {
    /// Ends the span at `end_s` (never before it started); `ongoing` when
    /// the log ended first.
    fn end_at(&mut self, end_s: f64, ongoing: bool);
}

/// Implements [`Span`] for report types with `start_s`, `end_s`,
/// `duration_s` and `ongoing` fields: the closing rule, written once.
macro_rules! span_with_fields {
    ($($kind:ty),*) => {$(
        impl Span for $kind {
            fn end_at(&mut self, end_s: f64, ongoing: bool) {
                self.end_s = end_s.max(self.start_s);
                self.duration_s = self.end_s - self.start_s;
                self.ongoing = ongoing;
            }
        }
    )*};
}

span_with_fields!(super::report::Outage, super::load_outages::LoadOutage);

/// The span under way, if any, and those ended, in order.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Spans<T> {
    open: Option<T>,
    done: Vec<T>,
}

impl<T> Default for Spans<T> {
    fn default() -> Self {
        Spans {
            open: None,
            done: Vec::new(),
        }
    }
}

impl<T: Span> Spans<T> {
    /// True while a span is under way.
    pub fn is_open(&self) -> bool {
        self.open.is_some()
    }

    /// Starts `span` unless one is under way (the first start stands).
    pub fn open(&mut self, span: T) {
        self.open.get_or_insert(span);
    }

    /// Ends the span under way, if any, at `t_s`.
    pub fn close_at(&mut self, t_s: f64, ongoing: bool) {
        if let Some(mut span) = self.open.take() {
            span.end_at(t_s, ongoing);
            self.done.push(span);
        }
    }

    /// Every span, in order, one still under way ended at `end_s` as ongoing.
    pub fn finish(mut self, end_s: f64) -> Vec<T> {
        self.close_at(end_s, true);
        self.done
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A span of the simplest kind: start, end, length, ongoing.
    #[derive(Debug, Clone, PartialEq)]
    struct Plain {
        start_s: f64,
        end_s: f64,
        duration_s: f64,
        ongoing: bool,
    }
    span_with_fields!(Plain);

    fn at(start_s: f64) -> Plain {
        Plain {
            start_s,
            end_s: start_s,
            duration_s: 0.0,
            ongoing: true,
        }
    }

    #[test]
    fn spans_close_in_order_never_before_they_start_and_the_last_may_stay_open() {
        let mut spans = Spans::default();
        spans.open(at(10.0));
        spans.open(at(12.0)); // already under way: the first start stands
        spans.close_at(25.0, false);
        spans.close_at(30.0, false); // nothing under way: no span
        spans.open(at(40.0));
        spans.close_at(35.0, false); // a clock step back: zero length, not negative
        spans.open(at(50.0));
        assert!(spans.is_open());
        let all = spans.finish(80.0);
        let shown: Vec<(f64, f64, f64, bool)> = all
            .iter()
            .map(|s| (s.start_s, s.end_s, s.duration_s, s.ongoing))
            .collect();
        assert_eq!(
            shown,
            [
                (10.0, 25.0, 15.0, false),
                (40.0, 40.0, 0.0, false),
                (50.0, 80.0, 30.0, true)
            ]
        );
    }
}
