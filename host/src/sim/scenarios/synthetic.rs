//! A fast generator of long, deterministic logs of real frames (no physics):
//! a node on a daily harvest cycle reporting once per `interval_s`, with a
//! cutoff every night. For memory and speed tests of the analysis, and for
//! benchmarks.

use std::io::Read;

use gleaner_protocol::{
    encode_frame, ChannelStats, ConfigSource, ConverterState, EnergyTotals, Event, Hello, Report,
    ReportFlags, StateDurations, TransitionCause, Uplink, UplinkBody, MAX_UPLINK_FRAME_LEN,
    PROTOCOL_VERSION,
};

use crate::log::{LogHeader, LogWriter, FORMAT_VERSION};

/// The message of second `t` of the run, and an event when the state changes then.
fn messages_at(t: u64, interval_s: u64, seq: &mut u16) -> Vec<Uplink> {
    let mut out = Vec::new();
    let mut push = |body: UplinkBody, uptime_ms: u64| {
        out.push(Uplink {
            seq: *seq,
            uptime_ms,
            body,
        });
        *seq = seq.wrapping_add(1);
    };
    if let Some(event) = day_change(t, interval_s) {
        push(UplinkBody::Event(event), t * 1000);
    }
    push(
        UplinkBody::Report(report_at(t, interval_s)),
        t * 1000 + 1000,
    );
    out
}

/// The invented day: light from 06:00 to 19:00.
fn is_day(t: u64) -> bool {
    let hour = (t % 86_400) as f64 / 3_600.0;
    (6.0..19.0).contains(&hour)
}

/// The converter's cutoff at dusk or its restart at dawn, when the interval
/// ending at `t` crossed one.
fn day_change(t: u64, interval_s: u64) -> Option<Event> {
    let day = is_day(t);
    if t == 0 || day == is_day(t.saturating_sub(interval_s)) {
        return None;
    }
    let (from, to, cause) = if day {
        (
            ConverterState::CutOff,
            ConverterState::Harvesting,
            TransitionCause::Recovered,
        )
    } else {
        (
            ConverterState::Harvesting,
            ConverterState::CutOff,
            TransitionCause::InputBelowHold,
        )
    };
    Some(Event {
        from,
        to,
        cause,
        trigger_input_uv: 699_000,
        trigger_output_uv: 3_000_000,
        input_uv: 700_000,
        output_uv: 3_000_000,
    })
}

/// The report of the interval ending at `t`: a sine of light over the day.
fn report_at(t: u64, interval_s: u64) -> Report {
    let hour = (t % 86_400) as f64 / 3_600.0;
    let day = is_day(t);
    let state = if day {
        ConverterState::Harvesting
    } else {
        ConverterState::CutOff
    };
    let light = if day {
        ((hour - 6.0) / 13.0 * std::f64::consts::PI).sin()
    } else {
        0.0
    };
    let input_uv = if day {
        800_000 + (light * 600_000.0) as u32
    } else {
        100_000
    };
    let input_na = (light * 5_000_000.0) as u32;
    let drawn_nj =
        u64::from(input_uv) * u64::from(input_na) / 1_000_000_000 * interval_s * 1000 / 1000;
    let ms = (interval_s * 1000) as u32;
    let mut state_ms = StateDurations::default();
    *state_ms.get_mut(state) = ms;
    Report {
        interval_ms: ms,
        sample_count: (interval_s * 100) as u32,
        input_uv: ChannelStats::from_min_mean_max(
            input_uv.saturating_sub(5_000),
            input_uv,
            input_uv + 5_000,
        ),
        input_na: ChannelStats::from_min_mean_max(input_na / 2, input_na, input_na + input_na / 4),
        output_uv: ChannelStats::from_min_mean_max(3_250_000, 3_300_000, 3_300_000),
        output_na: ChannelStats::from_min_mean_max(8_000, 60_000, 4_000_000),
        drawn_nj,
        delivered_nj: drawn_nj * 7 / 10,
        stored_nj: 0,
        state,
        state_ms,
        input_cutoff_in_ms: None,
        brownout_in_ms: None,
        load_nw: (drawn_nj * 7 / 10)
            .saturating_mul(1_000_000)
            .checked_div(u64::from(ms) * 1000)
            .unwrap_or(0),
        net_nw: 0,
        load_powered: true,
        load_shed: !day,
        flags: ReportFlags::default(),
    }
}

/// The node id of synthetic logs (invented).
pub const SYNTHETIC_NODE_ID: u64 = 0x5157_0000_0000_0001;

/// Streams a synthetic log of `seconds` of reports as bytes, generated on demand.
pub struct SyntheticLog {
    seconds: u64,
    interval_s: u64,
    next_t: u64,
    seq: u16,
    buf: Vec<u8>,
    pos: usize,
    writer: Option<LogWriter<Vec<u8>>>,
    start_us: u64,
}

impl SyntheticLog {
    /// A log of `seconds` of reports every `interval_s` seconds.
    pub fn new(seconds: u64, interval_s: u64) -> Self {
        let header = LogHeader {
            format_version: FORMAT_VERSION,
            writer: "gleaner synthetic".into(),
            host: "synthetic".into(),
            started: "2026-01-01T00:00:00Z".into(),
            source: "synthetic node (invented daily cycle)".into(),
        };
        let writer =
            LogWriter::to_writer(Vec::new(), std::path::Path::new("synthetic"), &header).ok();
        let mut log = SyntheticLog {
            seconds,
            interval_s: interval_s.max(1),
            next_t: 0,
            seq: 0,
            buf: Vec::new(),
            pos: 0,
            writer,
            start_us: 1_767_225_600_000_000,
        };
        log.emit_hello();
        log
    }

    /// The same log without the analysis checkpoints a recording leaves
    /// (for measuring the analysis alone).
    pub fn without_checkpoints(mut self) -> Self {
        if let Some(writer) = self.writer.as_mut() {
            writer.follow_with(None);
        }
        self
    }

    fn emit_hello(&mut self) {
        let hello = Uplink {
            seq: 0,
            uptime_ms: 0,
            body: UplinkBody::Hello(Hello {
                protocol: PROTOCOL_VERSION,
                firmware: gleaner_firmware::FIRMWARE_VERSION,
                node_id: SYNTHETIC_NODE_ID,
                boot_id: 0x5157_0001,
                sample_period_us: 10_000,
                config: gleaner_firmware::config::default_config(),
                config_source: ConfigSource::Defaults,
                totals: EnergyTotals::default(),
            }),
        };
        self.seq = 1;
        self.write_message(&hello, self.start_us);
    }

    fn write_message(&mut self, message: &Uplink, host_time_us: u64) {
        let mut frame = [0u8; MAX_UPLINK_FRAME_LEN];
        if let (Ok(bytes), Some(w)) = (encode_frame(message, &mut frame), self.writer.as_mut()) {
            let _ = w.append_frame(host_time_us, &bytes[..bytes.len() - 1]);
        }
    }

    fn refill(&mut self) -> bool {
        self.pos = 0;
        // Generate about a thousand reports per refill.
        for _ in 0..1000 {
            if self.next_t >= self.seconds {
                break;
            }
            for m in messages_at(self.next_t, self.interval_s, &mut self.seq) {
                self.write_message(&m, self.start_us + m.uptime_ms * 1000);
            }
            self.next_t += self.interval_s;
        }
        self.buf = match self.writer.as_mut() {
            Some(writer) => writer.take_written().unwrap_or_default(),
            None => Vec::new(),
        };
        !self.buf.is_empty()
    }
}

impl Read for SyntheticLog {
    fn read(&mut self, dest: &mut [u8]) -> std::io::Result<usize> {
        if self.pos >= self.buf.len() && !self.refill() {
            return Ok(0);
        }
        let n = dest.len().min(self.buf.len() - self.pos);
        dest[..n].copy_from_slice(&self.buf[self.pos..self.pos + n]);
        self.pos += n;
        Ok(n)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::log::{LogReader, RecordBody};

    #[test]
    fn a_day_of_synthetic_log_reads_back() {
        let mut reader = LogReader::new(SyntheticLog::new(86_400, 60));
        let records: Vec<_> = reader.by_ref().collect();
        assert!(reader.warnings().is_empty(), "{:?}", reader.warnings());
        let frames = records
            .iter()
            .filter(|r| matches!(r.body, RecordBody::Frame(_)))
            .count();
        // 1 Hello + 1440 reports + 2 events (dawn and dusk).
        assert_eq!(frames, 1 + 1440 + 2);
    }
}
