//! One line per report, for logs, pipes and slow terminals.

use super::LiveState;
use crate::analysis::text::{duration, energy};

/// The line for the latest report.
pub fn report_line(s: &LiveState) -> Option<String> {
    let r = s.report.as_ref()?;
    let secs = f64::from(r.interval_ms.max(1)) / 1e3;
    let forecast = |ms: Option<u32>| ms.map_or("-".to_string(), |ms| duration(f64::from(ms) / 1e3));
    let brownout = if r.load_powered {
        forecast(r.brownout_in_ms)
    } else {
        "no power".into()
    };
    Some(format!(
        "t={:>10} {:<10} in {:.3} V {:>8.3} mA {:>8.3} mW | out {:.3} V {:>8.3} mA {:>8.3} mW | eff {:>6} (total {:>6}) | cutoff in {:>9} brown-out in {:>9} load {:>8.3} mW net {:>+8.3} mW | drawn {:>11} delivered {:>11}{} | lost {} crc {}",
        duration(s.uptime_ms as f64 / 1e3),
        r.state.name(),
        f64::from(r.input_uv.mean) / 1e6,
        f64::from(r.input_na.mean) / 1e6,
        r.drawn_nj as f64 / 1e6 / secs,
        f64::from(r.output_uv.mean) / 1e6,
        f64::from(r.output_na.mean) / 1e6,
        r.delivered_nj as f64 / 1e6 / secs,
        s.window_efficiency().map_or("-".into(), |e| format!("{:.1}%", e * 100.0)),
        s.total_efficiency().map_or("-".into(), |e| format!("{:.1}%", e * 100.0)),
        forecast(r.input_cutoff_in_ms),
        brownout,
        r.load_nw as f64 / 1e6,
        r.net_nw as f64 / 1e6,
        energy(s.drawn_nj as f64 / 1e9),
        energy(s.delivered_nj as f64 / 1e9),
        if r.load_shed { " | load shed" } else { "" },
        s.link.lost_frames,
        s.link.crc_errors,
    ))
}

/// The line for an event: the values that triggered it, and those at switch-over.
pub fn event_line(uptime_ms: u64, e: &gleaner_protocol::Event) -> String {
    format!(
        "t={:>10} EVENT {} -> {} ({}), input {:.3} V, output {:.3} V (at switch-over {:.3} V, {:.3} V)",
        duration(uptime_ms as f64 / 1e3),
        e.from.name(),
        e.to.name(),
        e.cause.name(),
        f64::from(e.trigger_input_uv) / 1e6,
        f64::from(e.trigger_output_uv) / 1e6,
        f64::from(e.input_uv) / 1e6,
        f64::from(e.output_uv) / 1e6
    )
}

/// The line for a change of the load's supply.
pub fn load_line(uptime_ms: u64, e: &gleaner_protocol::LoadEvent) -> String {
    let what = if e.powered {
        "LOAD POWERED".to_string()
    } else {
        format!("LOAD BROWN-OUT ({})", e.cause.name())
    };
    format!(
        "t={:>10} {what}, storage at {:.3} V, input {:.3} V, converter {} for {}, net {:+.3} mW",
        duration(uptime_ms as f64 / 1e3),
        f64::from(e.output_uv) / 1e6,
        f64::from(e.input_uv) / 1e6,
        e.converter.name(),
        duration(f64::from(e.converter_state_ms) / 1e3),
        e.net_nw as f64 / 1e6
    )
}
