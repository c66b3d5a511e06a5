//! Hand-made reports for the accumulators' unit tests.

use gleaner_protocol::{ChannelStats, ConverterState, Report, ReportFlags, StateDurations};

/// A 10-second report of idle time with the given energies, nJ, and 1 V,
/// 1 mA on every channel (tests change what they check).
pub fn report(drawn_nj: u64, delivered_nj: u64, stored_nj: i64) -> Report {
    let volts = ChannelStats::from_min_mean_max(1_000_000, 1_000_000, 1_000_000);
    let amps = ChannelStats::from_min_mean_max(1_000_000, 1_000_000, 1_000_000);
    Report {
        interval_ms: 10_000,
        sample_count: 1_000,
        input_uv: volts,
        input_na: amps,
        output_uv: volts,
        output_na: amps,
        drawn_nj,
        delivered_nj,
        stored_nj,
        state: ConverterState::Idle,
        state_ms: StateDurations {
            idle_ms: 10_000,
            ..Default::default()
        },
        input_cutoff_in_ms: None,
        brownout_in_ms: None,
        load_nw: 0,
        net_nw: 0,
        load_powered: true,
        load_shed: false,
        flags: ReportFlags::default(),
    }
}
