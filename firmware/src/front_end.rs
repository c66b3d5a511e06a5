//! The measuring front-end, described once: for each of the four channels,
//! the ADC scale it is read at and the network in front of it (a divider for
//! a voltage, a shunt and an amplifier for a current). The defaults, the
//! boards, the host's settings and the virtual node's ADC all derive their
//! calibration from a [`FrontEnd`]; [`crate::calibration`] holds the formulas.

use gleaner_protocol::Calibration;

use crate::calibration::{current_shunt, voltage_divider, Adc};

/// A voltage read through a divider (`divider_top_ohm` from the signal to
/// the pin, `divider_bottom_ohm` from the pin to ground; top 0 reads the
/// signal directly).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct VoltageChannel {
    /// The ADC scale this channel is read at.
    pub adc: Adc,
    /// Divider resistor from the signal to the pin, Ω.
    pub divider_top_ohm: u32,
    /// Divider resistor from the pin to ground, Ω.
    pub divider_bottom_ohm: u32,
}

/// A current read as the voltage across a shunt, amplified.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CurrentChannel {
    /// The ADC scale this channel is read at.
    pub adc: Adc,
    /// The shunt, mΩ.
    pub shunt_milliohm: u32,
    /// Gain of the amplifier between the shunt and the pin (1: none).
    pub gain: u32,
}

/// The four channels, and the width of the ADC's results (the top code is
/// `2^result_bits - 1`, flagged as clipped by the node).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FrontEnd {
    /// Width of a result, bits.
    pub result_bits: u8,
    /// Harvester voltage.
    pub input_voltage: VoltageChannel,
    /// Harvester current.
    pub input_current: CurrentChannel,
    /// Load (converter output) voltage.
    pub output_voltage: VoltageChannel,
    /// Load current.
    pub output_current: CurrentChannel,
}

impl FrontEnd {
    /// The nominal calibration of this front-end (before a two-point trim);
    /// None when a divider, shunt or gain is zero or a scale overflows.
    /// `const`: a fixed front-end is calibrated at compile time.
    pub const fn calibration(&self) -> Option<Calibration> {
        let v = (&self.input_voltage, &self.output_voltage);
        let i = (&self.input_current, &self.output_current);
        let (Some(input_voltage), Some(output_voltage)) = (
            voltage_divider(v.0.adc, v.0.divider_top_ohm, v.0.divider_bottom_ohm),
            voltage_divider(v.1.adc, v.1.divider_top_ohm, v.1.divider_bottom_ohm),
        ) else {
            return None;
        };
        let (Some(input_current), Some(output_current)) = (
            current_shunt(i.0.adc, i.0.shunt_milliohm, i.0.gain),
            current_shunt(i.1.adc, i.1.shunt_milliohm, i.1.gain),
        ) else {
            return None;
        };
        Some(Calibration {
            adc_bits: self.result_bits,
            input_voltage,
            input_current,
            output_voltage,
            output_current,
        })
    }
}

/// The ADC the defaults assume: 12 bits, 3.3 V reference.
pub const DEFAULT_ADC: Adc = Adc {
    bits: 12,
    reference_uv: 3_300_000,
};

/// The front-end the defaults describe: input read directly (up to 3.3 V),
/// input current through 1 Ω at gain 50 (16.1 µA per count), output through a
/// 1 MΩ / 1 MΩ divider (up to 6.6 V), output current through 10 Ω at gain 50.
pub const DEFAULT_FRONT_END: FrontEnd = FrontEnd {
    result_bits: DEFAULT_ADC.bits,
    input_voltage: VoltageChannel {
        adc: DEFAULT_ADC,
        divider_top_ohm: 0,
        divider_bottom_ohm: 1,
    },
    input_current: CurrentChannel {
        adc: DEFAULT_ADC,
        shunt_milliohm: 1_000,
        gain: 50,
    },
    output_voltage: VoltageChannel {
        adc: DEFAULT_ADC,
        divider_top_ohm: 1_000_000,
        divider_bottom_ohm: 1_000_000,
    },
    output_current: CurrentChannel {
        adc: DEFAULT_ADC,
        shunt_milliohm: 10_000,
        gain: 50,
    },
};

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_default_front_end_gives_the_documented_steps() -> Result<(), &'static str> {
        // LSB = 3.3 V / 4096 = 805.66 µV (IEEE Std 1241 code width); through
        // 1 Ω at gain 50 that is 16.11 µA; behind a 1:1 divider 1611.3 µV;
        // through 10 Ω at gain 50, 1.611 µA.
        let cal = DEFAULT_FRONT_END.calibration().ok_or("a calibration")?;
        let per_count = |q20: u64| q20 as f64 / f64::from(1u32 << 20);
        assert!((per_count(cal.input_voltage.units_per_count_q20) - 805.664).abs() < 0.001);
        assert!((per_count(cal.input_current.units_per_count_q20) - 16_113.28).abs() < 0.01);
        assert!((per_count(cal.output_voltage.units_per_count_q20) - 1_611.328).abs() < 0.001);
        assert!((per_count(cal.output_current.units_per_count_q20) - 1_611.328).abs() < 0.001);
        assert_eq!(cal.adc_bits, 12);
        Ok(())
    }

    #[test]
    fn channels_may_each_have_their_own_scale() -> Result<(), &'static str> {
        // A 14-bit converter whose current channels are differential (13 bits
        // for the positive half) at a 150 mV span, the voltages single-ended.
        let mut fe = DEFAULT_FRONT_END;
        fe.result_bits = 14;
        fe.input_current.adc = Adc {
            bits: 13,
            reference_uv: 150_000,
        };
        fe.input_current.shunt_milliohm = 10_000;
        fe.input_current.gain = 1;
        let cal = fe.calibration().ok_or("a calibration")?;
        // 150 mV / 8192 over 10 Ω = 1.831 µA per count.
        let na = cal.input_current.units_per_count_q20 as f64 / f64::from(1u32 << 20);
        assert!((na - 1_831.05).abs() < 0.01, "{na}");
        assert_eq!(cal.adc_bits, 14);
        // A zero shunt is no front-end.
        fe.output_current.shunt_milliohm = 0;
        assert_eq!(fe.calibration(), None);
        Ok(())
    }
}
