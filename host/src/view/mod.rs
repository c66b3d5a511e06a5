//! The live view: a model of what the node is doing, fed message by message,
//! shown either as plain lines (one per report) or full-screen.

pub mod observer;
pub mod plain;
pub mod tui;

use std::collections::VecDeque;

use gleaner_firmware::meter::efficiency_ppm;
use gleaner_protocol::{ConverterState, Event, Hello, Report, UplinkBody};

use crate::link::{LinkStats, Tracked};

/// Reports kept for the charts.
pub const HISTORY: usize = 600;
/// Events kept for the list.
pub const EVENTS: usize = 8;

/// One report in the chart history: (uptime s, input V, output V, input mW, output mW).
pub type HistoryPoint = (f64, f64, f64, f64, f64);

/// What the live view knows.
#[derive(Debug, Clone, Default)]
pub struct LiveState {
    /// The node's latest `Hello`.
    pub hello: Option<Hello>,
    /// The latest report.
    pub report: Option<Report>,
    /// Node uptime of the latest message, ms.
    pub uptime_ms: u64,
    /// The state now.
    pub state: Option<ConverterState>,
    /// Uptime when the state was entered, ms (None: before we attached).
    pub state_since_ms: Option<u64>,
    /// Energy drawn since attaching, nJ.
    pub drawn_nj: u128,
    /// Energy delivered since attaching, nJ.
    pub delivered_nj: u128,
    /// Storage change since attaching, nJ.
    pub stored_nj: i128,
    /// Totals since the node's last reset, from its `Hello` plus what came after.
    pub since_reset: Option<(u128, u128, i128)>,
    /// The latest change of the load's supply, with uptime in ms.
    pub last_load: Option<(u64, gleaner_protocol::LoadEvent)>,
    /// Latest events, newest last, with uptime in ms.
    pub events: VecDeque<(u64, Event)>,
    /// (uptime s, input V, output V, input mW, output mW) of recent reports.
    pub history: VecDeque<HistoryPoint>,
    /// Link counters.
    pub link: LinkStats,
    /// Reports received.
    pub reports: u64,
}

impl LiveState {
    /// Takes one message.
    pub fn update(&mut self, tracked: &Tracked, link: &LinkStats) {
        self.link = *link;
        self.uptime_ms = tracked.message.uptime_ms;
        if tracked.reboot {
            self.state = None;
            self.state_since_ms = None;
        }
        match &tracked.message.body {
            UplinkBody::Hello(h) => {
                let t = h.totals;
                self.since_reset = Some((
                    u128::from(t.drawn_nj),
                    u128::from(t.delivered_nj),
                    i128::from(t.stored_nj),
                ));
                self.hello = Some(h.clone());
            }
            UplinkBody::Report(r) => {
                self.reports += 1;
                self.drawn_nj += u128::from(r.drawn_nj);
                self.delivered_nj += u128::from(r.delivered_nj);
                self.stored_nj += i128::from(r.stored_nj);
                if let Some((d, v, s)) = self.since_reset.as_mut() {
                    *d += u128::from(r.drawn_nj);
                    *v += u128::from(r.delivered_nj);
                    *s += i128::from(r.stored_nj);
                }
                if self.state != Some(r.state) {
                    self.state = Some(r.state);
                    self.state_since_ms = None;
                }
                let secs = f64::from(r.interval_ms.max(1)) / 1e3;
                self.history.push_back((
                    tracked.message.uptime_ms as f64 / 1e3,
                    f64::from(r.input_uv.mean) / 1e6,
                    f64::from(r.output_uv.mean) / 1e6,
                    r.drawn_nj as f64 / 1e6 / secs,
                    r.delivered_nj as f64 / 1e6 / secs,
                ));
                while self.history.len() > HISTORY {
                    self.history.pop_front();
                }
                self.report = Some(r.clone());
            }
            UplinkBody::Event(e) => {
                self.state = Some(e.to);
                self.state_since_ms = Some(tracked.message.uptime_ms);
                self.events.push_back((tracked.message.uptime_ms, *e));
                while self.events.len() > EVENTS {
                    self.events.pop_front();
                }
            }
            UplinkBody::Load(e) => self.last_load = Some((tracked.message.uptime_ms, *e)),
            UplinkBody::Samples(_) | UplinkBody::Reply(_) | UplinkBody::Harvest(_) => {}
        }
    }

    /// Efficiency of the latest report interval, 0 to 1.
    pub fn window_efficiency(&self) -> Option<f64> {
        let r = self.report.as_ref()?;
        efficiency_ppm(r.drawn_nj, r.delivered_nj, r.stored_nj).map(|p| f64::from(p) / 1e6)
    }

    /// Efficiency since the node's last reset (or since attaching).
    pub fn total_efficiency(&self) -> Option<f64> {
        let (d, v, s) =
            self.since_reset
                .unwrap_or((self.drawn_nj, self.delivered_nj, self.stored_nj));
        efficiency_ppm(
            u64::try_from(d).unwrap_or(u64::MAX),
            u64::try_from(v).unwrap_or(u64::MAX),
            i64::try_from(s).unwrap_or(0),
        )
        .map(|p| f64::from(p) / 1e6)
    }

    /// Seconds in the present state, when known.
    pub fn time_in_state_s(&self) -> Option<f64> {
        self.state_since_ms
            .map(|since| self.uptime_ms.saturating_sub(since) as f64 / 1e3)
    }
}
