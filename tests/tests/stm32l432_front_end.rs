//! The STM32L432 board's front-end, checked on the host: its source file is
//! compiled here as it is on the board (it needs nothing from the chip).
//!
//! Expected values come from the STM32L4 ADC's transfer function (from memory
//! of the reference manual): a single-ended 12-bit result is
//! `V / VREF+ * 4096`; 16x hardware oversampling sums 16 results and a 2-bit
//! shift leaves `V / VREF+ * 16384`. VREF+ is VDDA on the 32-pin package. The
//! internal reference's factory value `VREFINT_CAL` is its 12-bit result at
//! VDDA = 3.0 V, so `VDDA = 3.0 V * VREFINT_CAL / VREFINT_DATA` (the
//! reference manual's formula, from memory). The amplifier gain, the shunts
//! and the divider follow Ohm's law.

mod board_front_end;
#[allow(dead_code)]
#[path = "../../firmware/boards/stm32l432-nucleo/src/front_end.rs"]
mod front_end;

use gleaner_firmware::calibration::calibrate;
use gleaner_protocol::ReportFlags;

/// A factory value of the internal reference: 1.212 V (typical, from memory
/// of the datasheet) read at 3.0 V in 12 bits.
const FACTORY_CODE: u16 = 1655;
/// The internal reference, volts, that [`FACTORY_CODE`] stands for.
const REFERENCE_V: f64 = 3.0 * FACTORY_CODE as f64 / 4096.0;

/// The 14-bit code the ADC returns for `volts` at the pin with VDDA `vdda`.
fn code(volts: f64, vdda: f64) -> u16 {
    (volts / vdda * 16384.0).round().min(16383.0) as u16
}

/// The five results of a scan with VDDA at `vdda`: the four channels for a
/// 0.45 V harvester drawing 2.0 mA through the 10 Ω input shunt (1.0 V after
/// the gain of 50), a 3.3 V output (1.65 V behind the 1:2 divider) with
/// 12 mA through the 1 Ω output shunt (0.6 V after the gain), then the
/// internal reference.
fn scan(vdda: f64) -> [u16; 5] {
    [
        code(0.45, vdda),
        code(1.0, vdda),
        code(1.65, vdda),
        code(0.6, vdda),
        code(REFERENCE_V, vdda),
    ]
}

#[test]
fn nominal_readings_come_back_in_channel_units_whatever_the_supply() {
    let cal = front_end::CALIBRATION;
    assert_eq!(cal.adc_bits, 14);
    // At the nominal 3.3 V, and with the regulator 60 mV low or 90 mV high:
    // the reference reading rescales the counts, so the figures hold.
    for vdda in [3.3, 3.24, 3.39] {
        let results = scan(vdda);
        let (sample, flags) = calibrate(&cal, &front_end::raw_sample(results, FACTORY_CODE));
        assert_eq!(flags, ReportFlags::default(), "at {vdda} V");
        // Within two codes (the reference reading's rounding adds one):
        // 2 x 201 µV, 2 x 0.40 µA, 2 x 403 µV, 2 x 4.0 µA.
        assert!(
            sample.input_uv.abs_diff(450_000) <= 403,
            "{vdda}: {sample:?}"
        );
        assert!(
            sample.input_na.abs_diff(2_000_000) <= 806,
            "{vdda}: {sample:?}"
        );
        assert!(
            sample.output_uv.abs_diff(3_300_000) <= 806,
            "{vdda}: {sample:?}"
        );
        assert!(
            sample.output_na.abs_diff(12_000_000) <= 8_057,
            "{vdda}: {sample:?}"
        );
    }
    // Without the rescaling a 3.39 V supply would read 2.7 % low.
    let raw_unscaled = u64::from(scan(3.39)[2]) * 2 * 3_300_000 / 16_384;
    assert!(raw_unscaled.abs_diff(3_300_000) > 80_000, "{raw_unscaled}");
}

#[test]
fn one_code_is_the_documented_resolution() {
    let cal = front_end::CALIBRATION;
    // 3.3 V / 2^14; 3.3 V / 2^14 / 50 / 10 Ω; 2 x 3.3 V / 2^14;
    // 3.3 V / 2^14 / 50 / 1 Ω.
    let expected = [201.416015625, 402.83203125, 402.83203125, 4028.3203125];
    board_front_end::assert_one_code(&cal, expected);
}

#[test]
fn the_supply_is_worked_out_from_the_internal_reference() {
    // Read at the factory's own 3.0 V, the reference gives 3.0 V back.
    assert_eq!(
        front_end::vdda_uv(FACTORY_CODE * 4, FACTORY_CODE),
        Some(3_000_000)
    );
    // At 3.3 V it reads 6,018 (1.2122 V / 3.3 V x 16384): 3.3001 V.
    let reading = code(REFERENCE_V, 3.3);
    assert_eq!(reading, 6018);
    let vdda = front_end::vdda_uv(reading, FACTORY_CODE).unwrap();
    assert!(vdda.abs_diff(3_300_000) < 1_000, "{vdda}");
    // A reference reading of zero (a converter fault) gives no supply, and
    // the counts pass at the nominal VDDA.
    assert_eq!(front_end::vdda_uv(0, FACTORY_CODE), None);
    let raw = front_end::raw_sample([100, 200, 300, 400, 0], FACTORY_CODE);
    assert_eq!(
        (
            raw.input_voltage,
            raw.input_current,
            raw.output_voltage,
            raw.output_current
        ),
        (100, 200, 300, 400)
    );
}

#[test]
fn a_result_at_the_top_is_flagged_and_a_rescaled_one_never_passes_it() {
    let cal = front_end::CALIBRATION;
    let top = front_end::TOP_CODE;
    // At the top code, whatever the supply: clipped.
    let raw = front_end::raw_sample([100, top, 100, 100, 6018], FACTORY_CODE);
    assert_eq!(raw.input_current, u32::from(top));
    assert!(calibrate(&cal, &raw).1.contains(ReportFlags::ADC_CLIPPED));
    // Just below it with VDDA 3.39 V: stretched up to the top, not past it.
    let raw = front_end::raw_sample(
        [top - 1, 100, 100, 100, code(REFERENCE_V, 3.39)],
        FACTORY_CODE,
    );
    assert_eq!(raw.input_voltage, u32::from(top));
    // A dark cell reads 0, unflagged.
    let raw = front_end::raw_sample([0, 0, 0, 0, 6018], FACTORY_CODE);
    assert_eq!(calibrate(&cal, &raw).1, ReportFlags::default());
}

#[test]
fn the_settings_block_of_the_guide_gives_the_firmware_calibration() {
    // The guide's `[front_end]` block, as a user would paste it.
    let guide = include_str!("../../docs/stm32l432-front-end.md");
    let params = board_front_end::guide_front_end(guide);
    assert_eq!(params.calibration(), Some(front_end::CALIBRATION));
    let written = gleaner::front_end::FrontEndParams::from_front_end(&front_end::FRONT_END);
    assert_eq!(written.front_end(), front_end::FRONT_END);
}
