//! The analog front-end as built: which ADC inputs take which channel, the
//! current-sense amplifiers and the resistors around them.
//! `docs/stm32l432-front-end.md` draws the same thing; keep the two in step.
//!
//! The ADC converts against VDDA (on the 32-pin package VREF+ is VDDA inside
//! the chip), nominally 3.3 V from the Nucleo's regulator. Each channel is
//! converted 16 times in hardware and the sum shifted right by 2: 14-bit
//! results. VDDA is not taken on trust: every scan also converts the internal
//! reference, and [`raw_sample`] rescales the counts to what they would be
//! at exactly the nominal VDDA, from the factory measurement of that
//! reference (see [`vdda_uv`]).
//!
//! This file needs nothing from the chip: `tests/tests/stm32l432_front_end.rs`
//! compiles it on the host and checks it against the converter's transfer
//! function.

use gleaner_firmware::calibration::Adc;
use gleaner_firmware::config::DEFAULT_CALIBRATION;
use gleaner_firmware::front_end::{CurrentChannel, FrontEnd, VoltageChannel};
use gleaner_firmware::RawSample;
use gleaner_protocol::Calibration;

/// Bits of a converter result after 16x oversampling and a 2-bit shift.
pub const ADC_BITS: u8 = 14;
/// Highest code.
pub const TOP_CODE: u16 = (1 << ADC_BITS) - 1;
/// Bits of one conversion, the resolution the factory reference value has.
const CONVERSION_BITS: u8 = 12;
/// VDDA at which the factory measured the internal reference (`VREFINT_CAL`),
/// mV: 3.0 V (from memory of the datasheet; `adc.rs` checks it against
/// embassy-stm32's own constant when the board is built).
pub const FACTORY_VDDA_MV: u32 = 3_000;
/// The VDDA the front-end constants assume, µV.
pub const NOMINAL_VDDA_UV: u32 = 3_300_000;

// Input (harvester) voltage: PA0 (A0, ADC1_IN5), wired straight to the
// converter's input: 3.3 V full scale, 201 µV per count.

/// Input current: a high-side shunt between the harvester and the converter,
/// read by a current-sense amplifier (gain 50) whose output goes to PA1 (A1,
/// ADC1_IN6). 10 Ω: 6.6 mA full scale, 0.4 µA per count, 66 mV drop at full
/// scale.
pub const INPUT_SHUNT_MILLIOHM: u32 = 10_000;
/// Output voltage: PA3 (A2, ADC1_IN8) behind a divider of two equal
/// resistors (6.6 V full scale), with 100 nF from the pin to ground to feed
/// the sampling capacitor.
pub const OUTPUT_DIVIDER_OHM: (u32, u32) = (1_000_000, 1_000_000);
/// Output current: a shunt in the load's supply read by a second
/// current-sense amplifier (gain 50) on PA4 (A3, ADC1_IN9). 1 Ω: 66 mA full
/// scale, 4 µA per count.
pub const OUTPUT_SHUNT_MILLIOHM: u32 = 1_000;
/// Gain of both current-sense amplifiers, V/V.
pub const SENSE_AMPLIFIER_GAIN: u32 = 50;

/// Every channel's scale: 14-bit counts of the nominal VDDA.
const ADC: Adc = Adc {
    bits: ADC_BITS,
    reference_uv: NOMINAL_VDDA_UV,
};

/// This front-end in the firmware library's terms.
pub const FRONT_END: FrontEnd = FrontEnd {
    result_bits: ADC_BITS,
    input_voltage: VoltageChannel {
        adc: ADC,
        divider_top_ohm: 0,
        divider_bottom_ohm: 1,
    },
    input_current: CurrentChannel {
        adc: ADC,
        shunt_milliohm: INPUT_SHUNT_MILLIOHM,
        gain: SENSE_AMPLIFIER_GAIN,
    },
    output_voltage: VoltageChannel {
        adc: ADC,
        divider_top_ohm: OUTPUT_DIVIDER_OHM.0,
        divider_bottom_ohm: OUTPUT_DIVIDER_OHM.1,
    },
    output_current: CurrentChannel {
        adc: ADC,
        shunt_milliohm: OUTPUT_SHUNT_MILLIOHM,
        gain: SENSE_AMPLIFIER_GAIN,
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

/// VDDA in µV, from the internal reference's 14-bit result and its factory
/// value (`VREFINT_CAL`, a 12-bit conversion at [`FACTORY_VDDA_MV`]). None for a
/// reference reading of zero (a converter fault).
pub const fn vdda_uv(reference_code: u16, factory_code: u16) -> Option<u32> {
    if reference_code == 0 {
        return None;
    }
    let factory = (factory_code as u64) << (ADC_BITS - CONVERSION_BITS);
    let uv = FACTORY_VDDA_MV as u64 * 1000 * factory / reference_code as u64;
    if uv > u32::MAX as u64 {
        None
    } else {
        Some(uv as u32)
    }
}

/// A result as counts of the nominal VDDA; a result at the top code stays
/// the top code (flagged as clipped by the node), and none goes past it.
pub const fn at_nominal_vdda(code: u16, vdda_uv: u32) -> u32 {
    if code >= TOP_CODE {
        return TOP_CODE as u32;
    }
    let scaled = code as u64 * vdda_uv as u64 / NOMINAL_VDDA_UV as u64;
    if scaled > TOP_CODE as u64 {
        TOP_CODE as u32
    } else {
        scaled as u32
    }
}

// Worked checks, evaluated when the board is compiled. The reference read at
// the factory's own VDDA gives that VDDA back (3.000 V). A typical factory
// value of 1655 (1.2125 V of 3.0 V in 12 bits; the reference is 1.212 V
// typical, from memory of the datasheet) read as 6016 in 14 bits at the
// nominal 3.3 V gives 3.3 V to 0.1 %: 3e6 x 1655 x 4 / 6016 = 3,301,196 µV.
// Counts taken at that VDDA are stretched by the same 0.04 %.
const _: () = assert!(matches!(vdda_uv(1655 * 4, 1655), Some(3_000_000)));
const _: () = assert!(matches!(vdda_uv(6016, 1655), Some(3_301_196)));
const _: () = assert!(at_nominal_vdda(8000, 3_301_196) == 8002);
const _: () = assert!(at_nominal_vdda(TOP_CODE - 1, 3_600_000) == TOP_CODE as u32);
const _: () = assert!(vdda_uv(0, 1655).is_none());

/// The scan's results (input voltage, input current, output voltage, output
/// current, internal reference) as the node's raw sample. Without a usable
/// reference reading the counts are passed on at the nominal VDDA.
pub fn raw_sample(results: [u16; 5], factory_code: u16) -> RawSample {
    let [input_voltage, input_current, output_voltage, output_current, reference] = results;
    let vdda = match vdda_uv(reference, factory_code) {
        Some(uv) => uv,
        None => NOMINAL_VDDA_UV,
    };
    RawSample {
        input_voltage: at_nominal_vdda(input_voltage, vdda),
        input_current: at_nominal_vdda(input_current, vdda),
        output_voltage: at_nominal_vdda(output_voltage, vdda),
        output_current: at_nominal_vdda(output_current, vdda),
    }
}
