//! The nRF52840 board's front-end, checked on the host: its source file is
//! compiled here as it is on the board (it needs nothing from the chip).
//!
//! Expected values come from the SAADC transfer function of the nRF52840
//! product specification (from memory): `RESULT = (V_P - V_N) * GAIN /
//! REFERENCE * 2^(RESOLUTION - m)`, with `m = 0` single-ended and `m = 1`
//! differential, the internal reference 0.6 V; and from Ohm's law and the
//! divider ratio for the resistors.

mod board_front_end;
#[allow(dead_code)]
#[path = "../../firmware/boards/nrf52840-node/src/front_end.rs"]
mod front_end;

use gleaner_firmware::calibration::calibrate;
use gleaner_protocol::ReportFlags;

/// The code the SAADC would return for `volts` across its inputs.
fn code(volts: f64, gain: f64, differential: bool) -> i16 {
    let m = if differential { 1 } else { 0 };
    (volts * gain / 0.6 * f64::from(1u32 << (14 - m))).round() as i16
}

#[test]
fn nominal_readings_come_back_in_channel_units() {
    let cal = front_end::CALIBRATION;
    assert_eq!(cal.adc_bits, 14);
    // A 0.45 V harvester drawing 2.0 mA through the 10 Ω input shunt (20 mV),
    // a 3.3 V output (1.65 V at the pin behind the 1:2 divider) with 1.2 mA
    // through the 10 Ω return shunt (12 mV).
    let results = [
        code(0.45, 0.5, false),
        code(0.020, 4.0, true),
        code(1.65, 0.25, false),
        code(0.012, 4.0, true),
    ];
    assert_eq!(results, [6144, 1092, 11264, 655]);
    let (sample, flags) = calibrate(&cal, &front_end::raw_sample(results));
    assert_eq!(flags, ReportFlags::default());
    // Within one code: 73.2 µV, 1.83 µA, 293 µV, 1.83 µA.
    assert!(sample.input_uv.abs_diff(450_000) <= 74, "{sample:?}");
    assert!(sample.input_na.abs_diff(2_000_000) <= 1_831, "{sample:?}");
    assert!(sample.output_uv.abs_diff(3_300_000) <= 293, "{sample:?}");
    assert!(sample.output_na.abs_diff(1_200_000) <= 1_831, "{sample:?}");
}

#[test]
fn one_code_is_the_documented_resolution() {
    let cal = front_end::CALIBRATION;
    // 1.2 V / 2^14, 150 mV / 2^13 / 10 Ω, 2 * 2.4 V / 2^14, 150 mV / 2^13 / 10 Ω.
    let expected = [73.2421875, 1831.0546875, 292.96875, 1831.0546875];
    board_front_end::assert_one_code(&cal, expected);
}

#[test]
fn limits_and_reverse_current_are_mapped_for_the_node() {
    let cal = front_end::CALIBRATION;
    // Offset noise below zero on a dark cell and reverse current read 0, unflagged.
    let raw = front_end::raw_sample([-3, -40, 0, -1]);
    assert_eq!(
        (
            raw.input_voltage,
            raw.input_current,
            raw.output_voltage,
            raw.output_current
        ),
        (0, 0, 0, 0)
    );
    assert_eq!(calibrate(&cal, &raw).1, ReportFlags::default());
    // A differential channel at its positive limit is flagged as clipped.
    let raw = front_end::raw_sample([100, front_end::DIFFERENTIAL_TOP, 100, 100]);
    let (_, flags) = calibrate(&cal, &raw);
    assert!(flags.contains(ReportFlags::ADC_CLIPPED));
    // So is a single-ended one at its top code.
    let raw = front_end::raw_sample([front_end::SINGLE_ENDED_TOP, 100, 100, 100]);
    assert!(calibrate(&cal, &raw).1.contains(ReportFlags::ADC_CLIPPED));
    // One code below the differential limit is a plain reading of 14.996 mA.
    let raw = front_end::raw_sample([100, front_end::DIFFERENTIAL_TOP - 1, 100, 100]);
    let (sample, flags) = calibrate(&cal, &raw);
    assert_eq!(flags, ReportFlags::default());
    assert!(sample.input_na.abs_diff(14_996_338) <= 2, "{sample:?}");
}

#[test]
fn the_settings_block_of_the_guide_gives_the_firmware_calibration() {
    // The guide's `[front_end]` block, as a user would paste it.
    let guide = include_str!("../../docs/nrf52840-front-end.md");
    let params = board_front_end::guide_front_end(guide);
    assert_eq!(params.calibration(), Some(front_end::CALIBRATION));
    // And the firmware's description, written in that form, is the same.
    let written = gleaner::front_end::FrontEndParams::from_front_end(&front_end::FRONT_END);
    assert_eq!(written.front_end(), front_end::FRONT_END);
    assert_eq!(written.channel_adc, params.channel_adc);
}
