//! Fixed example messages shared by the protocol tests.
#![allow(dead_code, missing_docs)]

use gleaner_protocol::*;

pub fn example_config() -> NodeConfig {
    NodeConfig {
        calibration: Calibration {
            adc_bits: 12,
            input_voltage: ChannelCal {
                units_per_count_q20: 844_800_000,
                offset: 0,
            },
            input_current: ChannelCal {
                units_per_count_q20: 16_896_000_000,
                offset: -12,
            },
            output_voltage: ChannelCal {
                units_per_count_q20: 1_689_600_000,
                offset: 0,
            },
            output_current: ChannelCal {
                units_per_count_q20: 1_689_600_000,
                offset: 3,
            },
        },
        thresholds: Thresholds {
            start_uv: 800_000,
            hold_uv: 700_000,
            sag_margin_uv: 50_000,
            output_up_uv: 2_000_000,
            output_down_uv: 1_600_000,
            debounce_ms: 200,
            cold_start_timeout_ms: 10_000,
            forecast_horizon_ms: 60_000,
            input_idle_na: 2_000,
            load_min_uv: 1_800_000,
            load_restart_uv: 2_000_000,
            brownout_horizon_ms: 1_800_000,
        },
        report_interval_ms: 1_000,
        output_storage_uf: 100_000,
        load_restore_ms: 30_000,
        shed_load_na: 40_000,
        name: NodeName::try_from("greenhouse-3").unwrap(),
        converter: ConverterModel {
            mppt_fraction_ppm: 780_000,
            output_regulated: true,
        },
    }
}

pub fn example_hello() -> Uplink {
    Uplink {
        seq: 0,
        uptime_ms: 12,
        body: UplinkBody::Hello(Hello {
            protocol: PROTOCOL_VERSION,
            firmware: FirmwareVersion {
                major: 0,
                minor: 1,
                patch: 0,
            },
            node_id: 0x0123_4567_89AB_CDEF,
            boot_id: 0xC0FF_EE01,
            sample_period_us: 10_000,
            config: example_config(),
            config_source: ConfigSource::Stored,
            totals: EnergyTotals {
                drawn_nj: 123_456_789,
                delivered_nj: 98_765_432,
                stored_nj: -1_234,
            },
        }),
    }
}

/// A typical report: a solar node at 1.2 V in, 3.3 V out, 1 s interval at 100 Hz.
pub fn example_report() -> Uplink {
    Uplink {
        seq: 4_321,
        uptime_ms: 3_600_000,
        body: UplinkBody::Report(Report {
            interval_ms: 1_000,
            sample_count: 100,
            input_uv: ChannelStats::from_min_mean_max(1_180_000, 1_200_000, 1_215_000),
            input_na: ChannelStats::from_min_mean_max(950_000, 1_000_000, 1_040_000),
            output_uv: ChannelStats::from_min_mean_max(3_290_000, 3_300_000, 3_301_000),
            output_na: ChannelStats::from_min_mean_max(8_000, 250_000, 4_000_000),
            drawn_nj: 1_200_000,
            delivered_nj: 825_000,
            stored_nj: 0,
            state: ConverterState::Harvesting,
            state_ms: StateDurations {
                harvesting_ms: 1_000,
                ..StateDurations::default()
            },
            input_cutoff_in_ms: None,
            brownout_in_ms: Some(5_400_000),
            load_nw: 825_000,
            net_nw: 10_000,
            load_powered: true,
            load_shed: false,
            flags: ReportFlags::default(),
        }),
    }
}

pub fn example_event() -> Uplink {
    Uplink {
        seq: 4_322,
        uptime_ms: 3_600_250,
        body: UplinkBody::Event(Event {
            from: ConverterState::Harvesting,
            to: ConverterState::CutOff,
            cause: TransitionCause::InputBelowHold,
            trigger_input_uv: 699_000,
            trigger_output_uv: 3_200_000,
            input_uv: 690_000,
            output_uv: 3_100_000,
        }),
    }
}

/// An hour of harvest with both predictions.
pub fn example_harvest() -> Uplink {
    Uplink {
        seq: 4_401,
        uptime_ms: 7_200_000,
        body: UplinkBody::Harvest(SlotHarvest {
            slot: 1,
            slot_ms: 3_600_000,
            harvested_uj: 180_000,
            ewma_predicted_uj: Some(200_000),
            wcma_predicted_uj: Some(185_000),
            next_day_uj: Some(1_900_000),
        }),
    }
}

/// The load browned out 31 minutes after the input was cut off.
pub fn example_load_event() -> Uplink {
    Uplink {
        seq: 4_400,
        uptime_ms: 5_460_250,
        body: UplinkBody::Load(LoadEvent {
            powered: false,
            cause: LoadCause::InputCutOff,
            output_uv: 1_799_000,
            input_uv: 310_000,
            converter: ConverterState::CutOff,
            converter_state_ms: 1_860_000,
            net_nw: -97_000,
        }),
    }
}

pub fn example_samples(n: usize) -> Uplink {
    let mut samples = heapless::Vec::new();
    for i in 0..n.min(SAMPLES_PER_BLOCK) {
        let _ = samples.push(Sample {
            input_uv: 1_200_000 + i as u32 * 800,
            input_na: 1_000_000,
            output_uv: 3_300_000,
            output_na: 250_000,
        });
    }
    Uplink {
        seq: 7,
        uptime_ms: 5_000,
        body: UplinkBody::Samples(SampleBlock {
            first_index: 0,
            remaining: 992,
            period_us: 1_000,
            samples,
        }),
    }
}

pub fn example_reply() -> Uplink {
    Uplink {
        seq: 9,
        uptime_ms: 5_100,
        body: UplinkBody::Reply(Reply {
            request_id: 77,
            outcome: Outcome::Refused(Refusal::HoldNotBelowStart),
        }),
    }
}

pub fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}
