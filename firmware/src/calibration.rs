//! Calibration: raw ADC counts to microvolts and nanoamps.
//!
//! The front-end is described by textbook relations: an ADC of `N` bits and
//! reference `Vref` has an LSB of `Vref / 2^N` (the code-width convention of
//! IEEE Std 1241); a divider scales by `R_bottom / (R_top + R_bottom)`; a shunt
//! current is `V / R` after the amplifier's gain. Each channel ends up as a
//! [`ChannelCal`]: a Q20 fixed-point scale and an offset.

use gleaner_protocol::{Calibration, ChannelCal, ReportFlags, Sample};

/// Fractional bits of [`ChannelCal::units_per_count_q20`].
pub const SCALE_FRACTION_BITS: u32 = 20;

/// One reading of the four channels as raw ADC counts.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RawSample {
    /// Counts of the input voltage channel.
    pub input_voltage: u32,
    /// Counts of the input current channel.
    pub input_current: u32,
    /// Counts of the output voltage channel.
    pub output_voltage: u32,
    /// Counts of the output current channel.
    pub output_current: u32,
}

/// The ADC shared by the channels.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Adc {
    /// Resolution in bits.
    pub bits: u8,
    /// Reference voltage in microvolts (full scale).
    pub reference_uv: u32,
}

impl Adc {
    /// Highest count the ADC can return, `2^bits - 1`.
    pub const fn max_count(self) -> u32 {
        match 1u32.checked_shl(self.bits as u32) {
            Some(full) => full.saturating_sub(1),
            None => u32::MAX,
        }
    }
}

/// `units_per_count * 2^20 = numerator * 2^20 / (2^bits * denominator)`, rounded.
///
/// This and the two channel formulas below are `const`, so a board's fixed
/// front-end is calibrated when the firmware is compiled.
const fn q20_scale(numerator: u128, denominator: u128, bits: u8) -> Option<u64> {
    let Some(scaled) = numerator.checked_shl(SCALE_FRACTION_BITS) else {
        return None;
    };
    let Some(divisor) = denominator.checked_shl(bits as u32) else {
        return None;
    };
    let Some(sum) = scaled.checked_add(divisor / 2) else {
        return None;
    };
    let Some(rounded) = sum.checked_div(divisor) else {
        return None;
    };
    if rounded == 0 || rounded > u64::MAX as u128 {
        return None;
    }
    // Within u64: checked just above.
    #[allow(clippy::cast_possible_truncation)]
    Some(rounded as u64)
}

/// A voltage channel read through a resistive divider (`r_top_ohm` from the
/// signal to the ADC pin, `r_bottom_ohm` from the pin to ground). A direct
/// connection is `r_top_ohm = 0`. None when a value is zero or the scale overflows.
pub const fn voltage_divider(adc: Adc, r_top_ohm: u32, r_bottom_ohm: u32) -> Option<ChannelCal> {
    let Some(total) = (r_top_ohm as u128).checked_add(r_bottom_ohm as u128) else {
        return None;
    };
    let Some(numerator) = (adc.reference_uv as u128).checked_mul(total) else {
        return None;
    };
    match q20_scale(numerator, r_bottom_ohm as u128, adc.bits) {
        Some(units_per_count_q20) => Some(ChannelCal {
            units_per_count_q20,
            offset: 0,
        }),
        None => None,
    }
}

/// A current channel: a shunt of `shunt_milliohm` whose voltage is amplified by
/// `gain` before the ADC. Current in nA = shunt µV * 10^6 / (gain * shunt mΩ).
pub const fn current_shunt(adc: Adc, shunt_milliohm: u32, gain: u32) -> Option<ChannelCal> {
    let Some(numerator) = (adc.reference_uv as u128).checked_mul(1_000_000) else {
        return None;
    };
    let Some(denominator) = (shunt_milliohm as u128).checked_mul(gain as u128) else {
        return None;
    };
    match q20_scale(numerator, denominator, adc.bits) {
        Some(units_per_count_q20) => Some(ChannelCal {
            units_per_count_q20,
            offset: 0,
        }),
        None => None,
    }
}

/// Fractional bits of a reference point's counts: the mean of a burst of
/// readings is finer than one count.
pub const COUNT_FRACTION_BITS: u32 = 8;

/// A reference reading: the mean counts seen while a known value was applied.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReferencePoint {
    /// Mean counts the ADC returned, in 1/2^[`COUNT_FRACTION_BITS`] counts.
    pub counts_q8: u64,
    /// The value applied, in channel units (µV or nA).
    pub value: u32,
}

/// Two-point calibration: the line through two reference readings gives the
/// gain and offset. None when the points do not rise, or the result is out of range.
pub fn two_point(low: ReferencePoint, high: ReferencePoint) -> Option<ChannelCal> {
    let count_span = high
        .counts_q8
        .checked_sub(low.counts_q8)
        .filter(|&d| d > 0)?;
    let value_span = high.value.checked_sub(low.value).filter(|&d| d > 0)?;
    let shift = SCALE_FRACTION_BITS + COUNT_FRACTION_BITS;
    let scaled = u128::from(value_span).checked_shl(shift)?;
    let count_span = u128::from(count_span);
    let q20 = scaled
        .checked_add(count_span / 2)?
        .checked_div(count_span)?;
    let q20 = u64::try_from(q20).ok().filter(|&q| q > 0)?;
    let low_scaled = u128::from(low.counts_q8)
        .checked_mul(u128::from(q20))?
        .checked_add(1 << (shift - 1))?
        >> shift;
    let offset = i128::from(low.value).checked_sub(i128::try_from(low_scaled).ok()?)?;
    Some(ChannelCal {
        units_per_count_q20: q20,
        offset: i32::try_from(offset).ok()?,
    })
}

/// The counts, in 1/2^[`COUNT_FRACTION_BITS`] counts, at which `cal` gives
/// `value` (the inverse of [`apply`]); None for a value at or below the
/// offset, which does not tell its counts.
pub fn counts_q8_for(cal: &ChannelCal, value: u32) -> Option<u64> {
    inverse(cal, value, COUNT_FRACTION_BITS)
}

/// `round((value - offset) * 2^(20 + fraction_bits) / scale)`: the counts
/// behind `value` in 1/2^`fraction_bits` counts; None at or below the offset.
fn inverse(cal: &ChannelCal, value: u32, fraction_bits: u32) -> Option<u64> {
    let shifted = i128::from(value).checked_sub(i128::from(cal.offset))?;
    if shifted <= 0 || cal.units_per_count_q20 == 0 {
        return None;
    }
    let q = i128::from(cal.units_per_count_q20);
    let counts = shifted
        .checked_mul(1i128.checked_shl(SCALE_FRACTION_BITS.checked_add(fraction_bits)?)?)?
        .checked_add(q / 2)?
        .checked_div(q)?;
    u64::try_from(counts).ok()
}

/// `round(counts * q20 / 2^20)`, None on overflow.
fn scale_counts(units_per_count_q20: u64, counts: u32) -> Option<u64> {
    let product = u64::from(counts).checked_mul(units_per_count_q20)?;
    Some(product.checked_add(1 << (SCALE_FRACTION_BITS - 1))? >> SCALE_FRACTION_BITS)
}

/// Applies one channel's calibration. Channels are unipolar: a result below
/// zero (offset correction of a near-zero reading) reads 0; a result beyond
/// `u32` saturates and sets the returned out-of-range flag.
pub fn apply(cal: &ChannelCal, counts: u32) -> (u32, bool) {
    let Some(scaled) = scale_counts(cal.units_per_count_q20, counts) else {
        return (u32::MAX, true);
    };
    let value = i128::from(scaled).saturating_add(i128::from(cal.offset));
    if value < 0 {
        (0, false)
    } else {
        match u32::try_from(value) {
            Ok(v) => (v, false),
            Err(_) => (u32::MAX, true),
        }
    }
}

/// Calibrates all four channels and flags clipping (a count at or above the
/// ADC's top code) and out-of-range results. A count of 0 is not flagged: on a
/// unipolar front-end it is a real zero (a dark solar cell).
pub fn calibrate(cal: &Calibration, raw: &RawSample) -> (Sample, ReportFlags) {
    let top = Adc {
        bits: cal.adc_bits,
        reference_uv: 0,
    }
    .max_count();
    let mut flags = ReportFlags::default();
    let mut channel = |cal: &ChannelCal, counts: u32| {
        if counts >= top {
            flags.insert(ReportFlags::ADC_CLIPPED);
        }
        let (value, out_of_range) = apply(cal, counts);
        if out_of_range {
            flags.insert(ReportFlags::OUT_OF_RANGE);
        }
        value
    };
    let sample = Sample {
        input_uv: channel(&cal.input_voltage, raw.input_voltage),
        input_na: channel(&cal.input_current, raw.input_current),
        output_uv: channel(&cal.output_voltage, raw.output_voltage),
        output_na: channel(&cal.output_current, raw.output_current),
    };
    (sample, flags)
}

/// The counts a channel would read for `value` (inverse of [`apply`], rounded,
/// clamped to `max_count`). Used by simulators and tests to synthesise readings.
pub fn counts_for(cal: &ChannelCal, value: u32, max_count: u32) -> u32 {
    inverse(cal, value, 0)
        .map_or(0, |counts| u32::try_from(counts).unwrap_or(u32::MAX))
        .min(max_count)
}

#[cfg(test)]
mod tests {
    use super::*;

    const ADC12: Adc = Adc {
        bits: 12,
        reference_uv: 3_300_000,
    };

    fn units_per_count(cal: &ChannelCal) -> f64 {
        cal.units_per_count_q20 as f64 / (1u64 << 20) as f64
    }

    #[test]
    fn lsb_is_reference_over_two_to_the_bits() -> Result<(), &'static str> {
        // IEEE Std 1241 code width (from memory): 12 bit, 3.3 V -> 0.8056640625 mV.
        let direct = voltage_divider(ADC12, 0, 1).ok_or("no scale")?;
        assert!((units_per_count(&direct) - 805.6640625).abs() < 1e-3);
        // 16 bit at 2.048 V -> 31.25 uV exactly.
        let adc16 = Adc {
            bits: 16,
            reference_uv: 2_048_000,
        };
        assert_eq!(
            voltage_divider(adc16, 0, 1).map(|c| c.units_per_count_q20),
            Some(32_768_000)
        ); // 31.25 uV * 2^20
        Ok(())
    }

    #[test]
    fn divider_scales_by_total_over_bottom() -> Result<(), &'static str> {
        // Textbook divider: 1 MOhm over 470 kOhm, ratio 0.319728; 6 V at the top
        // gives 1.918367 V at the pin, i.e. 2381.1 counts of 805.66 uV.
        let cal = voltage_divider(ADC12, 1_000_000, 470_000).ok_or("no scale")?;
        let expected = 805.6640625 / 0.319_728_0;
        assert!((units_per_count(&cal) - expected).abs() / expected < 1e-6);
        let counts = counts_for(&cal, 6_000_000, ADC12.max_count());
        assert_eq!(counts, 2381);
        let (uv, flagged) = apply(&cal, counts);
        assert!(!flagged);
        assert!(
            (i64::from(uv) - 6_000_000).abs() < 2_520,
            "one LSB of the divided channel"
        );
        Ok(())
    }

    #[test]
    fn shunt_current_is_voltage_over_resistance() -> Result<(), &'static str> {
        // Common practice: 12 bit, 3.3 V, gain 50, 1 Ohm -> 16.113 uA per LSB.
        let cal = current_shunt(ADC12, 1_000, 50).ok_or("no scale")?;
        assert!((units_per_count(&cal) - 16_113.281_25).abs() < 1e-2);
        assert_eq!(apply(&cal, 100).0, 1_611_328);
        Ok(())
    }

    /// A reference point at `counts` whole counts.
    fn point(counts: u64, value: u32) -> ReferencePoint {
        ReferencePoint {
            counts_q8: counts << COUNT_FRACTION_BITS,
            value,
        }
    }

    #[test]
    fn two_point_recovers_gain_and_offset() -> Result<(), &'static str> {
        let cal = two_point(point(100, 150_000), point(3_100, 2_550_000))
            .ok_or("no line through the points")?;
        // Gain 800 uV/count, offset 150000 - 80000 = 70000 uV.
        assert_eq!(cal.units_per_count_q20, 800 << 20);
        assert_eq!(cal.offset, 70_000);
        assert_eq!(apply(&cal, 1_600).0, 1_350_000);
        assert_eq!(two_point(point(5, 10), point(5, 20)), None);
        assert_eq!(two_point(point(5, 20), point(9, 10)), None);
        Ok(())
    }

    #[test]
    fn fractional_mean_counts_keep_the_gain_exact() -> Result<(), &'static str> {
        // Means of 100.5 and 3100.5 counts for 150 mV and 2.55 V: the same
        // 800 uV/count, offset 150000 - 100.5 * 800 = 69600 uV.
        let half = 1 << (COUNT_FRACTION_BITS - 1);
        let low = ReferencePoint {
            counts_q8: (100 << COUNT_FRACTION_BITS) + half,
            value: 150_000,
        };
        let high = ReferencePoint {
            counts_q8: (3_100 << COUNT_FRACTION_BITS) + half,
            value: 2_550_000,
        };
        let cal = two_point(low, high).ok_or("no line")?;
        assert_eq!(cal.units_per_count_q20, 800 << 20);
        assert_eq!(cal.offset, 69_600);
        // counts_q8_for inverts apply, fractions included.
        assert_eq!(counts_q8_for(&cal, 150_000), Some(low.counts_q8));
        assert_eq!(counts_q8_for(&cal, 69_600), None);
        assert_eq!(counts_for(&cal, 2_550_000, ADC12.max_count()), 3_101);
        Ok(())
    }

    #[test]
    fn negative_results_read_zero_and_overflow_is_flagged() {
        let cal = ChannelCal {
            units_per_count_q20: 1 << 20,
            offset: -50,
        };
        assert_eq!(apply(&cal, 10), (0, false));
        let huge = ChannelCal {
            units_per_count_q20: u64::MAX,
            offset: 0,
        };
        assert_eq!(apply(&huge, 4_000), (u32::MAX, true));
    }

    #[test]
    fn clipping_is_flagged_at_the_top_code_only() {
        let cal = crate::config::default_config().calibration;
        let (_, flags) = calibrate(&cal, &RawSample::default());
        assert!(!flags.contains(ReportFlags::ADC_CLIPPED));
        let raw = RawSample {
            input_voltage: 4095,
            ..RawSample::default()
        };
        let (_, flags) = calibrate(&cal, &raw);
        assert!(flags.contains(ReportFlags::ADC_CLIPPED));
    }
}
