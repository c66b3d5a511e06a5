//! The analog front-end as built: which SAADC inputs take which channel, the
//! gain of each, and the resistors around them. `docs/nrf52840-front-end.md`
//! draws the same thing; keep the two in step.
//!
//! The SAADC uses its internal 0.6 V reference, 14-bit results and 16x
//! oversampling in burst mode. A single-ended channel spans `0.6 V / gain` over
//! `2^14` codes; a differential channel spans `±0.6 V / gain` over `±2^13`.

use gleaner_firmware::calibration::Adc;
use gleaner_firmware::config::DEFAULT_CALIBRATION;
use gleaner_firmware::front_end::{CurrentChannel, FrontEnd, VoltageChannel};
use gleaner_firmware::RawSample;
use gleaner_protocol::Calibration;

/// Result resolution of a single-ended conversion, bits.
pub const ADC_BITS: u8 = 14;
/// Highest single-ended code.
pub const SINGLE_ENDED_TOP: i16 = (1 << ADC_BITS) - 1;
/// Highest positive differential code.
pub const DIFFERENTIAL_TOP: i16 = (1 << (ADC_BITS - 1)) - 1;

/// Input (harvester) voltage: AIN0 = P0.02, single-ended, gain 1/2 (1.2 V full
/// scale), wired straight to the converter's input.
pub const INPUT_VOLTAGE_FULL_SCALE_UV: u32 = 1_200_000;
/// Input current: AIN1 = P0.03 (+, harvester side) and AIN2 = P0.04 (−,
/// converter side) across a high-side shunt, differential, gain 4 (±150 mV).
pub const INPUT_CURRENT_FULL_SCALE_UV: u32 = 150_000;
/// The input shunt, mΩ.
pub const INPUT_SHUNT_MILLIOHM: u32 = 10_000;
/// Output voltage: AIN4 = P0.28, single-ended, gain 1/4 (2.4 V at the pin)
/// behind a divider of two equal resistors, so 4.8 V full scale.
pub const OUTPUT_VOLTAGE_FULL_SCALE_UV: u32 = 2_400_000;
/// Output divider, top and bottom, Ω.
pub const OUTPUT_DIVIDER_OHM: (u32, u32) = (1_000_000, 1_000_000);
/// Output current: AIN6 = P0.30 (+, load side) and AIN7 = P0.31 (−, ground)
/// across a low-side shunt in the load's return, differential, gain 4.
pub const OUTPUT_CURRENT_FULL_SCALE_UV: u32 = 150_000;
/// The output shunt, mΩ.
pub const OUTPUT_SHUNT_MILLIOHM: u32 = 10_000;

/// A single-ended channel's scale: `full_scale_uv` over `2^14` codes.
const fn single(full_scale_uv: u32) -> Adc {
    Adc {
        bits: ADC_BITS,
        reference_uv: full_scale_uv,
    }
}

/// A differential channel's scale: its positive half has one bit less.
const fn differential(full_scale_uv: u32) -> Adc {
    Adc {
        bits: ADC_BITS - 1,
        reference_uv: full_scale_uv,
    }
}

/// This front-end in the firmware library's terms (the SAADC's gain is in
/// each channel's full scale, so no amplifier gain).
pub const FRONT_END: FrontEnd = FrontEnd {
    result_bits: ADC_BITS,
    input_voltage: VoltageChannel {
        adc: single(INPUT_VOLTAGE_FULL_SCALE_UV),
        divider_top_ohm: 0,
        divider_bottom_ohm: 1,
    },
    input_current: CurrentChannel {
        adc: differential(INPUT_CURRENT_FULL_SCALE_UV),
        shunt_milliohm: INPUT_SHUNT_MILLIOHM,
        gain: 1,
    },
    output_voltage: VoltageChannel {
        adc: single(OUTPUT_VOLTAGE_FULL_SCALE_UV),
        divider_top_ohm: OUTPUT_DIVIDER_OHM.0,
        divider_bottom_ohm: OUTPUT_DIVIDER_OHM.1,
    },
    output_current: CurrentChannel {
        adc: differential(OUTPUT_CURRENT_FULL_SCALE_UV),
        shunt_milliohm: OUTPUT_SHUNT_MILLIOHM,
        gain: 1,
    },
};

/// Nominal calibration of this front-end, before a two-point trim from the
/// host, worked out when the firmware is compiled.
pub const CALIBRATION: Calibration = match FRONT_END.calibration() {
    Some(calibration) => calibration,
    // Never taken: the assertion below fails the build first.
    None => DEFAULT_CALIBRATION,
};
const _: () = assert!(
    FRONT_END.calibration().is_some(),
    "a divider, shunt or gain of this front-end is zero"
);

/// A single-ended result as counts: below zero (offset noise) reads 0, the
/// top code stays the top code (flagged as clipped by the node).
fn single_ended_counts(code: i16) -> u32 {
    u32::try_from(code.clamp(0, SINGLE_ENDED_TOP)).unwrap_or(0)
}

/// A differential result as counts: reverse current reads 0; a result at the
/// positive limit becomes the single-ended top code so the node flags it.
fn differential_counts(code: i16) -> u32 {
    if code >= DIFFERENTIAL_TOP {
        single_ended_counts(SINGLE_ENDED_TOP)
    } else {
        u32::try_from(code.max(0)).unwrap_or(0)
    }
}

/// The SAADC's four results (in scan order: input voltage, input current,
/// output voltage, output current) as the node's raw sample.
pub fn raw_sample(results: [i16; 4]) -> RawSample {
    let [input_voltage, input_current, output_voltage, output_current] = results;
    RawSample {
        input_voltage: single_ended_counts(input_voltage),
        input_current: differential_counts(input_current),
        output_voltage: single_ended_counts(output_voltage),
        output_current: differential_counts(output_current),
    }
}
