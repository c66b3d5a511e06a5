//! A stand-in for the analog front-end, which QEMU does not have: a
//! deterministic, invented draining cell behind a small step-up stage, turned
//! into the raw counts the default calibration expects. Clearly not a
//! measurement; everything after it is the real firmware.

use gleaner_firmware::calibration::counts_for;
use gleaner_firmware::sampler::{ErrorType, Sampler};
use gleaner_firmware::RawSample;
use gleaner_protocol::Calibration;

/// Input voltage at boot, µV.
const START_UV: i64 = 1_450_000;
/// Fall of the input per second, µV.
const DRAIN_UV_PER_S: i64 = 50_000;
/// The stage stops below this input, µV.
const HOLD_UV: i64 = 700_000;
/// Input resistance of the stage, Ω.
const INPUT_OHMS: i64 = 100;
/// Output voltage while converting, µV.
const OUTPUT_UV: i64 = 2_400_000;
/// Conversion efficiency of the stand-in stage, percent.
const EFFICIENCY_PERCENT: i64 = 70;

/// The draining cell, sampled every `period_us`.
pub struct DrainingCell {
    calibration: Calibration,
    t_us: u64,
    period_us: u64,
    running: bool,
    output_uv: i64,
    last_output_na: i64,
}

impl DrainingCell {
    /// Starts at boot, sampled every `period_us`.
    pub fn new(calibration: Calibration, period_us: u64) -> Self {
        DrainingCell {
            calibration,
            t_us: 0,
            period_us,
            running: true,
            output_uv: OUTPUT_UV,
            last_output_na: 0,
        }
    }

    /// The time of the next sample, µs since boot.
    pub fn now_us(&self) -> u64 {
        self.t_us
    }

    fn counts(&self, cal: &gleaner_protocol::ChannelCal, value: i64) -> u32 {
        let max = match 1u32.checked_shl(u32::from(self.calibration.adc_bits)) {
            Some(full) => full.saturating_sub(1),
            None => u32::MAX,
        };
        counts_for(cal, u32::try_from(value.max(0)).unwrap_or(u32::MAX), max)
    }
}

impl ErrorType for DrainingCell {
    type Error = core::convert::Infallible;
}

impl Sampler for DrainingCell {
    fn sample(&mut self) -> Result<RawSample, Self::Error> {
        let seconds_x1000 = i64::try_from(self.t_us / 1000).unwrap_or(i64::MAX);
        let open_uv = START_UV.saturating_sub(DRAIN_UV_PER_S.saturating_mul(seconds_x1000) / 1000);
        // Loaded by the stage through the cell's 2 Ω.
        let loaded_uv = open_uv.saturating_mul(INPUT_OHMS) / (INPUT_OHMS + 2);
        if self.running && loaded_uv < HOLD_UV {
            self.running = false;
        }
        let (input_uv, input_na) = if self.running {
            (loaded_uv, loaded_uv.saturating_mul(1000) / INPUT_OHMS)
        } else {
            // Stopped: the output capacitor drains through the load, 1 % per sample.
            self.output_uv = self.output_uv.saturating_mul(99) / 100;
            (open_uv, 0)
        };
        // Output current: 70 % of the input power at the output voltage while
        // converting (µV * nA / µV = nA), then the capacitor draining.
        let output_na = if self.running {
            input_uv.saturating_mul(input_na) / 100 * EFFICIENCY_PERCENT / OUTPUT_UV
        } else {
            self.last_output_na.saturating_mul(self.output_uv) / OUTPUT_UV
        };
        if self.running {
            self.last_output_na = output_na;
        }
        let c = &self.calibration;
        let raw = RawSample {
            input_voltage: self.counts(&c.input_voltage, input_uv),
            input_current: self.counts(&c.input_current, input_na),
            output_voltage: self.counts(&c.output_voltage, self.output_uv),
            output_current: self.counts(&c.output_current, output_na),
        };
        self.t_us = self.t_us.saturating_add(self.period_us);
        Ok(raw)
    }
}
