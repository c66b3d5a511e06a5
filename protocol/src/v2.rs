//! Protocol 2, frozen: the messages of nodes and logs from before protocol 3,
//! so a host keeps reading them.
//!
//! Protocol 3 added what the node knows of its converter
//! ([`crate::ConverterModel`]) to the configuration; only the types holding
//! the configuration are repeated here. Each converts into its current form
//! with [`From`], the converter as [`crate::ConverterModel::UNKNOWN`].

use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use crate::config::{Calibration, NodeName, Thresholds};
use crate::frame::Message;
use crate::uplink::{
    ConfigSource, EnergyTotals, Event, LoadEvent, Reply, Report, SampleBlock, SlotHarvest,
};
use crate::version::{FirmwareVersion, ProtocolVersion};

/// Protocol 2's configuration (no converter model).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub struct NodeConfig {
    pub calibration: Calibration,
    pub thresholds: Thresholds,
    pub report_interval_ms: u32,
    pub output_storage_uf: u32,
    pub load_restore_ms: u32,
    pub name: NodeName,
}

/// Protocol 2's `Hello`.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub struct Hello {
    pub protocol: ProtocolVersion,
    pub firmware: FirmwareVersion,
    pub node_id: u64,
    pub boot_id: u32,
    pub sample_period_us: u32,
    pub config: NodeConfig,
    pub config_source: ConfigSource,
    pub totals: EnergyTotals,
}

/// Protocol 2's message kinds.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub enum UplinkBody {
    Hello(Hello),
    Report(Report),
    Event(Event),
    Samples(SampleBlock),
    Reply(Reply),
    Load(LoadEvent),
    Harvest(SlotHarvest),
}

/// Protocol 2's envelope.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[allow(missing_docs)]
pub struct Uplink {
    pub seq: u16,
    pub uptime_ms: u64,
    pub body: UplinkBody,
}

impl Message for Uplink {
    const FIELDS_BEFORE_KIND: usize = 2;
    const KNOWN_KINDS: u64 = 7;
}

/// The converter is unknown: protocol 2 nodes were not told.
impl From<NodeConfig> for crate::NodeConfig {
    fn from(c: NodeConfig) -> Self {
        crate::NodeConfig {
            calibration: c.calibration,
            thresholds: c.thresholds,
            report_interval_ms: c.report_interval_ms,
            output_storage_uf: c.output_storage_uf,
            load_restore_ms: c.load_restore_ms,
            shed_load_na: 0,
            name: c.name,
            converter: crate::ConverterModel::UNKNOWN,
        }
    }
}

impl From<Hello> for crate::Hello {
    fn from(h: Hello) -> Self {
        crate::Hello {
            protocol: h.protocol,
            firmware: h.firmware,
            node_id: h.node_id,
            boot_id: h.boot_id,
            sample_period_us: h.sample_period_us,
            config: h.config.into(),
            config_source: h.config_source,
            totals: h.totals,
        }
    }
}

impl From<Uplink> for crate::Uplink {
    fn from(m: Uplink) -> Self {
        let body = match m.body {
            UplinkBody::Hello(h) => crate::UplinkBody::Hello(h.into()),
            UplinkBody::Report(r) => crate::UplinkBody::Report(r),
            UplinkBody::Event(e) => crate::UplinkBody::Event(e),
            UplinkBody::Samples(s) => crate::UplinkBody::Samples(s),
            UplinkBody::Reply(r) => crate::UplinkBody::Reply(r),
            UplinkBody::Load(l) => crate::UplinkBody::Load(l),
            UplinkBody::Harvest(h) => crate::UplinkBody::Harvest(h),
        };
        crate::Uplink {
            seq: m.seq,
            uptime_ms: m.uptime_ms,
            body,
        }
    }
}
