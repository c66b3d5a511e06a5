//! The live stream for other tools: every message from the node and every
//! link change as one JSON object per line (JSON Lines), schema
//! `gleaner.stream.v1` (docs/stream-json-lines.md). Units are in the key
//! names; report keys are the CSV export's column names.

use std::io::Write;
use std::time::Duration;

use gleaner_protocol::{Outcome, UplinkBody};
use serde::ser::{Serialize, SerializeMap, Serializer};
use serde_json::{json, Value};

use crate::columns::{self, Cell, Column};
use crate::link::{LinkStats, Tracked};
use crate::recorder::PortObserver;

/// The schema name every line carries.
pub const STREAM_SCHEMA: &str = "gleaner.stream.v1";

/// The line for one message: `kind` (a wire kind name: hello, report, event,
/// samples, reply, load, harvest), the node, the boot, sequence and times,
/// then the message's own fields.
pub fn message_line(t: &Tracked, host_time_us: u64, node: &NodeSeen) -> Value {
    serde_json::to_value(Line {
        tracked: t,
        host_time_us,
        node,
    })
    .unwrap_or(Value::Null)
}

/// The line for the port going away or coming back.
pub fn link_line(connected: bool, detail: &str, host_time_us: u64, node: &NodeSeen) -> Value {
    json!({
        "schema": STREAM_SCHEMA,
        "kind": "link",
        "node_id": node.id,
        "node_name": node.name,
        "host_time_us": host_time_us,
        "connected": connected,
        "detail": detail,
    })
}

/// One message as a line of the stream,
/// serialized straight from the message with no intermediate map.
#[derive(Debug, Clone, Copy)]
pub struct Line<'a> {
    /// The message.
    pub tracked: &'a Tracked,
    /// When the host received it, µs since the Unix epoch.
    pub host_time_us: u64,
    /// The node it came from.
    pub node: &'a NodeSeen,
}

impl Serialize for Line<'_> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let (t, m) = (self.tracked, &self.tracked.message);
        let mut map = serializer.serialize_map(None)?;
        map.serialize_entry("schema", STREAM_SCHEMA)?;
        map.serialize_entry("kind", UplinkBody::KIND_NAMES[m.body.kind_index()])?;
        map.serialize_entry("node_id", &self.node.id)?;
        map.serialize_entry("node_name", &self.node.name)?;
        map.serialize_entry("boot", &t.boot_index)?;
        map.serialize_entry("seq", &m.seq)?;
        map.serialize_entry("uptime_ms", &m.uptime_ms)?;
        map.serialize_entry("host_time_us", &self.host_time_us)?;
        map.serialize_entry("lost_before", &t.lost_before)?;
        body_entries(&mut map, &m.body)?;
        map.end()
    }
}

/// The cells of `message` in `columns`, as JSON entries (a missing number
/// is null).
fn column_entries<M: SerializeMap, T>(
    map: &mut M,
    columns: &[Column<T>],
    message: &T,
) -> Result<(), M::Error> {
    for column in columns {
        match (column.cell)(message) {
            Cell::Int(v) => map.serialize_entry(column.name, &v)?,
            Cell::Missing => map.serialize_entry(column.name, &())?,
            Cell::Text(t) => map.serialize_entry(column.name, t)?,
            Cell::Flag(f) => map.serialize_entry(column.name, &f)?,
        }
    }
    Ok(())
}

/// The fields of a message body.
fn body_entries<M: SerializeMap>(map: &mut M, body: &UplinkBody) -> Result<(), M::Error> {
    match body {
        UplinkBody::Report(r) => column_entries(map, &columns::REPORT, r),
        UplinkBody::Event(e) => column_entries(map, &columns::EVENT, e),
        UplinkBody::Load(e) => column_entries(map, &columns::LOAD, e),
        UplinkBody::Harvest(h) => {
            map.serialize_entry("slot", &h.slot)?;
            map.serialize_entry("slot_ms", &h.slot_ms)?;
            map.serialize_entry("harvested_uj", &h.harvested_uj)?;
            map.serialize_entry("ewma_predicted_uj", &h.ewma_predicted_uj)?;
            map.serialize_entry("wcma_predicted_uj", &h.wcma_predicted_uj)?;
            map.serialize_entry("next_day_uj", &h.next_day_uj)
        }
        UplinkBody::Samples(b) => {
            map.serialize_entry("first_index", &b.first_index)?;
            map.serialize_entry("remaining", &b.remaining)?;
            map.serialize_entry("period_us", &b.period_us)?;
            let samples: Vec<Value> = b
                .samples
                .iter()
                .map(|s| {
                    json!({
                        "input_uv": s.input_uv, "input_na": s.input_na,
                        "output_uv": s.output_uv, "output_na": s.output_na,
                    })
                })
                .collect();
            map.serialize_entry("samples", &samples)
        }
        UplinkBody::Reply(r) => {
            let (outcome, reason) = match &r.outcome {
                Outcome::Pong => ("pong", None),
                Outcome::Accepted => ("accepted", None),
                Outcome::Refused(why) => ("refused", Some(why.to_string())),
            };
            map.serialize_entry("request_id", &r.request_id)?;
            map.serialize_entry("outcome", outcome)?;
            map.serialize_entry("reason", &reason)
        }
        UplinkBody::Hello(h) => {
            // The node's introduction as `node info --json` gives it, less
            // the keys the line has already.
            let info = serde_json::to_value(crate::cli::node::NodeInfo::from_hello(h))
                .unwrap_or(Value::Null);
            if let Value::Object(fields) = info {
                for (key, value) in fields
                    .iter()
                    .filter(|(k, _)| !matches!(k.as_str(), "schema" | "node_id"))
                {
                    map.serialize_entry(key, value)?;
                }
            }
            Ok(())
        }
    }
}

/// The node as last introduced by its `Hello` (null until one arrives).
#[derive(Debug, Clone, Default)]
pub struct NodeSeen {
    /// 16 hex digits.
    pub id: Option<String>,
    /// The name set in its configuration, if any.
    pub name: Option<String>,
}

impl NodeSeen {
    /// Learns the node from a message (only a `Hello` tells).
    pub fn learn(&mut self, body: &UplinkBody) {
        if let UplinkBody::Hello(h) = body {
            self.id = Some(format!("{:016x}", h.node_id));
            self.name = (!h.config.name.is_empty()).then(|| h.config.name.to_string());
        }
    }
}

/// Wraps another observer and writes the stream to `out` as messages come.
/// When the reader of the stream goes away (a closed pipe), streaming stops:
/// the wrapped observer carries on, unless `stop_when_closed`.
pub struct Streamed<'a> {
    inner: &'a mut dyn PortObserver,
    out: Box<dyn Write + 'a>,
    node: NodeSeen,
    stop_when_closed: bool,
    /// Set when writing the stream failed; nothing more is written.
    pub closed: Option<std::io::Error>,
}

impl<'a> Streamed<'a> {
    /// Streams to `out` around `inner`.
    pub fn new(
        inner: &'a mut dyn PortObserver,
        out: Box<dyn Write + 'a>,
        stop_when_closed: bool,
    ) -> Self {
        Streamed {
            inner,
            out,
            node: NodeSeen::default(),
            stop_when_closed,
            closed: None,
        }
    }

    fn write(&mut self, line: &impl Serialize) {
        write_line(&mut self.out, &mut self.closed, self.stop_when_closed, line);
    }
}

/// Writes one line unless the stream has closed; a failure closes it.
fn write_line(
    out: &mut dyn Write,
    closed: &mut Option<std::io::Error>,
    quietly: bool,
    line: &impl Serialize,
) {
    if closed.is_some() {
        return;
    }
    let written = serde_json::to_writer(&mut *out, line)
        .map_err(std::io::Error::from)
        .and_then(|()| out.write_all(b"\n"))
        .and_then(|()| out.flush());
    if let Err(e) = written {
        if !quietly {
            eprintln!("warning: the JSON Lines stream stopped ({e}); the rest goes on");
        }
        *closed = Some(e);
    }
}

impl PortObserver for Streamed<'_> {
    fn inner(&mut self) -> Option<&mut dyn PortObserver> {
        Some(&mut *self.inner)
    }

    fn message(&mut self, tracked: &Tracked, host_time_us: u64, stats: &LinkStats) {
        self.node.learn(&tracked.message.body);
        let line = Line {
            tracked,
            host_time_us,
            node: &self.node,
        };
        write_line(
            &mut self.out,
            &mut self.closed,
            self.stop_when_closed,
            &line,
        );
        self.inner.message(tracked, host_time_us, stats);
    }

    fn tick(&mut self, stats: &LinkStats, idle_for: Duration) -> bool {
        let done = self.inner.tick(stats, idle_for);
        done || (self.stop_when_closed && self.closed.is_some())
    }

    fn link_changed(&mut self, connected: bool, detail: &str, host_time_us: u64) {
        let line = link_line(connected, detail, host_time_us, &self.node);
        self.write(&line);
        self.inner.link_changed(connected, detail, host_time_us);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::export::report_header;
    use crate::link::LinkTracker;
    use gleaner_protocol::*;

    fn tracked(body: UplinkBody) -> Tracked {
        let mut tracker = LinkTracker::new();
        let msg = Uplink {
            seq: 7,
            uptime_ms: 60_000,
            body,
        };
        tracker.accept(msg).unwrap().unwrap()
    }

    #[test]
    fn report_lines_carry_every_export_column_with_its_value() {
        let report = Report {
            interval_ms: 1000,
            sample_count: 100,
            input_uv: ChannelStats::from_min_mean_max(740_000, 750_000, 760_000),
            input_na: ChannelStats::from_min_mean_max(1_000, 2_000, 3_000),
            output_uv: ChannelStats::from_min_mean_max(3_200_000, 3_300_000, 3_300_000),
            output_na: ChannelStats::from_min_mean_max(0, 300, 4_000),
            drawn_nj: 1_500,
            delivered_nj: 990,
            stored_nj: -12,
            state: ConverterState::Sagging,
            state_ms: StateDurations {
                sagging_ms: 1000,
                ..Default::default()
            },
            input_cutoff_in_ms: Some(125_000),
            brownout_in_ms: None,
            load_nw: 5,
            net_nw: -3,
            load_powered: true,
            load_shed: false,
            flags: ReportFlags::default(),
        };
        let line = message_line(
            &tracked(UplinkBody::Report(report)),
            1_700_000_000_000_000,
            &NodeSeen::default(),
        );
        let keys: Vec<&str> = line
            .as_object()
            .unwrap()
            .keys()
            .map(String::as_str)
            .collect();
        for column in report_header().split(',') {
            assert!(keys.contains(&column), "{column} missing from {line}");
        }
        assert_eq!(line["kind"], "report");
        assert_eq!(line["input_uv_min"], 740_000);
        assert_eq!(line["stored_nj"], -12);
        assert_eq!(line["state"], "sagging");
        assert_eq!(line["input_cutoff_in_ms"], 125_000);
        assert_eq!(line["brownout_in_ms"], Value::Null);
        assert_eq!(line["seq"], 7);
        assert_eq!(line["node_id"], Value::Null);
    }

    #[test]
    fn a_hello_line_keeps_the_stream_schema_and_names_the_node() {
        let mut config = gleaner_firmware::config::default_config();
        config.name = NodeName::try_from("vent-7").unwrap();
        let hello = Hello {
            protocol: PROTOCOL_VERSION,
            firmware: FirmwareVersion {
                major: 1,
                minor: 2,
                patch: 3,
            },
            node_id: 0xfeed_0000_0000_0001,
            boot_id: 9,
            sample_period_us: 1000,
            config,
            config_source: ConfigSource::Stored,
            totals: EnergyTotals::default(),
        };
        let mut node = NodeSeen::default();
        node.learn(&UplinkBody::Hello(hello.clone()));
        let line = message_line(&tracked(UplinkBody::Hello(hello)), 0, &node);
        assert_eq!(line["schema"], STREAM_SCHEMA);
        assert_eq!(line["kind"], "hello");
        assert_eq!(line["node_id"], "feed000000000001");
        assert_eq!(line["node_name"], "vent-7");
        assert_eq!(line["settings"]["name"], "vent-7");
    }

    #[test]
    fn a_closed_reader_stops_the_stream_but_not_the_inner_observer() {
        struct Counting(u32);
        impl PortObserver for Counting {
            fn message(&mut self, _: &Tracked, _: u64, _: &LinkStats) {
                self.0 += 1;
            }
            fn tick(&mut self, _: &LinkStats, _: Duration) -> bool {
                false
            }
        }
        struct Closed;
        impl Write for Closed {
            fn write(&mut self, _: &[u8]) -> std::io::Result<usize> {
                Err(std::io::ErrorKind::BrokenPipe.into())
            }
            fn flush(&mut self) -> std::io::Result<()> {
                Ok(())
            }
        }
        let mut inner = Counting(0);
        let mut streamed = Streamed::new(&mut inner, Box::new(Closed), false);
        let t = tracked(UplinkBody::Reply(Reply {
            request_id: 1,
            outcome: Outcome::Pong,
        }));
        streamed.message(&t, 0, &LinkStats::default());
        streamed.message(&t, 0, &LinkStats::default());
        assert!(streamed.closed.is_some());
        assert!(!streamed.tick(&LinkStats::default(), Duration::ZERO));
        drop(streamed);
        assert_eq!(inner.0, 2);
    }
}
