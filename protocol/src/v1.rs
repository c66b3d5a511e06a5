//! Protocol 1, frozen: the messages of nodes and logs from before protocol 2,
//! so a host keeps reading them.
//!
//! Only the types whose layout changed are repeated here; everything else
//! (calibration, channel statistics, samples, replies, states, causes) is the
//! same on the wire and shared with the current protocol. Each type converts
//! into its current form with [`From`]; fields protocol 1 did not have are
//! filled as documented on each conversion.

use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use crate::config::{Calibration, NodeName};
use crate::frame::Message;
use crate::uplink::{
    ChannelStats, ConfigSource, ConverterState, EnergyTotals, Reply, ReportFlags, SampleBlock,
    StateDurations, TransitionCause,
};
use crate::version::{FirmwareVersion, ProtocolVersion};

/// Protocol 1's thresholds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub struct Thresholds {
    pub start_uv: u32,
    pub hold_uv: u32,
    pub sag_margin_uv: u32,
    pub output_up_uv: u32,
    pub output_down_uv: u32,
    pub debounce_ms: u32,
    pub cold_start_timeout_ms: u32,
    pub forecast_horizon_ms: u32,
    pub input_idle_na: u32,
}

/// Protocol 1's configuration.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub struct NodeConfig {
    pub calibration: Calibration,
    pub thresholds: Thresholds,
    pub report_interval_ms: u32,
    pub output_storage_uf: u32,
    pub load_restore_ms: u32,
}

/// Protocol 1's `Hello` (no node id).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub struct Hello {
    pub protocol: ProtocolVersion,
    pub firmware: FirmwareVersion,
    pub boot_id: u32,
    pub sample_period_us: u32,
    pub config: NodeConfig,
    pub config_source: ConfigSource,
    pub totals: EnergyTotals,
}

/// Protocol 1's transition event (values at switch-over only).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub struct Event {
    pub from: ConverterState,
    pub to: ConverterState,
    pub cause: TransitionCause,
    pub input_uv: u32,
    pub output_uv: u32,
}

/// Protocol 1's report (storage run-out from one interval's load power).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub struct Report {
    pub interval_ms: u32,
    pub sample_count: u32,
    pub input_uv: ChannelStats,
    pub input_na: ChannelStats,
    pub output_uv: ChannelStats,
    pub output_na: ChannelStats,
    pub drawn_nj: u64,
    pub delivered_nj: u64,
    pub stored_nj: i64,
    pub state: ConverterState,
    pub state_ms: StateDurations,
    pub input_cutoff_in_ms: Option<u32>,
    pub storage_runout_in_ms: Option<u32>,
    pub load_shed: bool,
    pub flags: ReportFlags,
}

/// Protocol 1's message kinds.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub enum UplinkBody {
    Hello(Hello),
    Report(Report),
    Event(Event),
    Samples(SampleBlock),
    Reply(Reply),
}

/// Protocol 1's envelope.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub struct Uplink {
    pub seq: u16,
    pub uptime_ms: u64,
    pub body: UplinkBody,
}

impl Message for Uplink {
    const FIELDS_BEFORE_KIND: usize = 2;
    const KNOWN_KINDS: u64 = 5;
}

/// Protocol 1 had no load thresholds: its storage forecast counted down to
/// `output_down_uv`, so that stands in for the load's minimum, `output_up_uv`
/// for its restart, and the forecast horizon for the brown-out horizon. The
/// name is empty and the converter unknown.
impl From<NodeConfig> for crate::NodeConfig {
    fn from(c: NodeConfig) -> Self {
        let t = c.thresholds;
        crate::NodeConfig {
            calibration: c.calibration,
            thresholds: crate::Thresholds {
                start_uv: t.start_uv,
                hold_uv: t.hold_uv,
                sag_margin_uv: t.sag_margin_uv,
                output_up_uv: t.output_up_uv,
                output_down_uv: t.output_down_uv,
                debounce_ms: t.debounce_ms,
                cold_start_timeout_ms: t.cold_start_timeout_ms,
                forecast_horizon_ms: t.forecast_horizon_ms,
                input_idle_na: t.input_idle_na,
                load_min_uv: t.output_down_uv,
                load_restart_uv: t.output_up_uv,
                brownout_horizon_ms: t.forecast_horizon_ms,
            },
            report_interval_ms: c.report_interval_ms,
            output_storage_uf: c.output_storage_uf,
            load_restore_ms: c.load_restore_ms,
            shed_load_na: 0,
            name: NodeName::new(),
            converter: crate::ConverterModel::UNKNOWN,
        }
    }
}

/// Node id 0: protocol 1 nodes did not say who they were.
impl From<Hello> for crate::Hello {
    fn from(h: Hello) -> Self {
        crate::Hello {
            protocol: h.protocol,
            firmware: h.firmware,
            node_id: 0,
            boot_id: h.boot_id,
            sample_period_us: h.sample_period_us,
            config: h.config.into(),
            config_source: h.config_source,
            totals: h.totals,
        }
    }
}

/// The trigger values are the switch-over values (all protocol 1 sent).
impl From<Event> for crate::Event {
    fn from(e: Event) -> Self {
        crate::Event {
            from: e.from,
            to: e.to,
            cause: e.cause,
            trigger_input_uv: e.input_uv,
            trigger_output_uv: e.output_uv,
            input_uv: e.input_uv,
            output_uv: e.output_uv,
        }
    }
}

/// nW from nJ over ms.
fn mean_nw(nj: i128, interval_ms: u32) -> i128 {
    nj.saturating_mul(1000)
        .checked_div(i128::from(interval_ms))
        .unwrap_or(0)
}

/// The storage run-out stands in for the brown-out forecast; load and net
/// power are the interval's own means (protocol 1 averaged nothing longer);
/// the load counts as powered, since protocol 1 did not watch it.
impl From<Report> for crate::Report {
    fn from(r: Report) -> Self {
        let load = mean_nw(i128::from(r.delivered_nj), r.interval_ms);
        let net = mean_nw(i128::from(r.stored_nj), r.interval_ms);
        crate::Report {
            interval_ms: r.interval_ms,
            sample_count: r.sample_count,
            input_uv: r.input_uv,
            input_na: r.input_na,
            output_uv: r.output_uv,
            output_na: r.output_na,
            drawn_nj: r.drawn_nj,
            delivered_nj: r.delivered_nj,
            stored_nj: r.stored_nj,
            state: r.state,
            state_ms: r.state_ms,
            input_cutoff_in_ms: r.input_cutoff_in_ms,
            brownout_in_ms: r.storage_runout_in_ms,
            load_nw: u64::try_from(load).unwrap_or(0),
            net_nw: i64::try_from(net).unwrap_or(0),
            load_powered: true,
            load_shed: r.load_shed,
            flags: r.flags,
        }
    }
}

impl From<Uplink> for crate::Uplink {
    fn from(m: Uplink) -> Self {
        let body = match m.body {
            UplinkBody::Hello(h) => crate::UplinkBody::Hello(h.into()),
            UplinkBody::Report(r) => crate::UplinkBody::Report(r.into()),
            UplinkBody::Event(e) => crate::UplinkBody::Event(e.into()),
            UplinkBody::Samples(s) => crate::UplinkBody::Samples(s),
            UplinkBody::Reply(r) => crate::UplinkBody::Reply(r),
        };
        crate::Uplink {
            seq: m.seq,
            uptime_ms: m.uptime_ms,
            body,
        }
    }
}
