//! The measuring front-end as built, in the form people write it in
//! scenario and settings files: one ADC (bits, reference) shared by the four
//! channels unless a channel has its own scale (`[front_end.channel_adc.NAME]`:
//! a differential channel, a channel at another gain of the converter), the
//! dividers, shunts and amplifier gains, and the errors of the board as built
//! (what the virtual node's ADC adds and a two-point trim removes). It becomes
//! the firmware's [`FrontEnd`], from which every calibration is derived.

use gleaner_firmware::calibration::Adc;
use gleaner_firmware::front_end::{CurrentChannel, FrontEnd, VoltageChannel, DEFAULT_FRONT_END};
use gleaner_protocol::Calibration;
use serde::{Deserialize, Serialize};

/// The front-end as built.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FrontEndParams {
    /// ADC resolution, bits.
    pub adc_bits: u8,
    /// Nominal ADC reference, V.
    pub reference_v: f64,
    /// Actual reference error, parts per million (what calibration would remove).
    #[serde(default)]
    pub reference_error_ppm: f64,
    /// RMS noise at the ADC input, in LSB.
    #[serde(default)]
    pub noise_lsb: f64,
    /// Input divider top resistor, Ω (0: direct).
    pub input_divider_top_ohm: u32,
    /// Input divider bottom resistor, Ω.
    pub input_divider_bottom_ohm: u32,
    /// Input shunt, mΩ.
    pub input_shunt_milliohm: u32,
    /// Input current amplifier gain.
    pub input_gain: u32,
    /// Output divider top resistor, Ω.
    pub output_divider_top_ohm: u32,
    /// Output divider bottom resistor, Ω.
    pub output_divider_bottom_ohm: u32,
    /// Output shunt, mΩ.
    pub output_shunt_milliohm: u32,
    /// Output current amplifier gain.
    pub output_gain: u32,
    /// Errors of each channel as built (what two-point calibration removes).
    #[serde(default)]
    pub errors: ChannelErrors,
    /// Channels read at a scale of their own (default: `adc_bits` over `reference_v`).
    #[serde(default)]
    pub channel_adc: ChannelAdcs,
}

/// A channel's own ADC scale: `full_scale_v` over `2^bits` codes.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChannelAdc {
    /// Bits spanning the full scale (one less than the result for the
    /// positive half of a differential channel).
    pub bits: u8,
    /// Voltage at the pin that reads full scale, V.
    pub full_scale_v: f64,
}

/// The channels that have a scale of their own.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChannelAdcs {
    /// Harvester voltage.
    #[serde(default)]
    pub input_voltage: Option<ChannelAdc>,
    /// Harvester current.
    #[serde(default)]
    pub input_current: Option<ChannelAdc>,
    /// Load voltage.
    #[serde(default)]
    pub output_voltage: Option<ChannelAdc>,
    /// Load current.
    #[serde(default)]
    pub output_current: Option<ChannelAdc>,
}

/// A channel's error: it reads `value * (1 + gain_error_ppm / 10^6) + offset`.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChannelError {
    /// Gain error, parts per million (15000: reads 1.5 % high).
    #[serde(default)]
    pub gain_error_ppm: f64,
    /// Offset, in the channel's unit (V for voltages, A for currents).
    #[serde(default)]
    pub offset: f64,
}

impl ChannelError {
    /// What the channel takes `value` to be.
    pub fn read(&self, value: f64) -> f64 {
        value * (1.0 + self.gain_error_ppm * 1e-6) + self.offset
    }
}

/// The four channels' errors.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChannelErrors {
    /// Harvester voltage.
    #[serde(default)]
    pub input_voltage: ChannelError,
    /// Harvester current.
    #[serde(default)]
    pub input_current: ChannelError,
    /// Load voltage.
    #[serde(default)]
    pub output_voltage: ChannelError,
    /// Load current.
    #[serde(default)]
    pub output_current: ChannelError,
}

fn volts(uv: u32) -> f64 {
    f64::from(uv) / 1e6
}

fn microvolts(v: f64) -> u32 {
    (v * 1e6).round().clamp(0.0, f64::from(u32::MAX)) as u32
}

impl FrontEndParams {
    /// The firmware's default front-end ([`DEFAULT_FRONT_END`]), exact.
    pub fn default_board() -> Self {
        Self::from_front_end(&DEFAULT_FRONT_END)
    }

    /// A front-end in this form: the input voltage channel's scale is the
    /// shared one, any other channel that differs has its own.
    pub fn from_front_end(fe: &FrontEnd) -> Self {
        let shared = fe.input_voltage.adc;
        let own = |adc: Adc| {
            (adc != shared).then(|| ChannelAdc {
                bits: adc.bits,
                full_scale_v: volts(adc.reference_uv),
            })
        };
        FrontEndParams {
            adc_bits: fe.result_bits,
            reference_v: volts(shared.reference_uv),
            reference_error_ppm: 0.0,
            noise_lsb: 0.0,
            input_divider_top_ohm: fe.input_voltage.divider_top_ohm,
            input_divider_bottom_ohm: fe.input_voltage.divider_bottom_ohm,
            input_shunt_milliohm: fe.input_current.shunt_milliohm,
            input_gain: fe.input_current.gain,
            output_divider_top_ohm: fe.output_voltage.divider_top_ohm,
            output_divider_bottom_ohm: fe.output_voltage.divider_bottom_ohm,
            output_shunt_milliohm: fe.output_current.shunt_milliohm,
            output_gain: fe.output_current.gain,
            errors: ChannelErrors::default(),
            channel_adc: ChannelAdcs {
                input_voltage: None,
                input_current: own(fe.input_current.adc),
                output_voltage: own(fe.output_voltage.adc),
                output_current: own(fe.output_current.adc),
            },
        }
    }

    /// The ADC scale of a channel with `own` scale or the shared one.
    fn adc_of(&self, own: Option<ChannelAdc>) -> Adc {
        match own {
            Some(c) => Adc {
                bits: c.bits,
                reference_uv: microvolts(c.full_scale_v),
            },
            None => Adc {
                bits: self.adc_bits,
                reference_uv: microvolts(self.reference_v),
            },
        }
    }

    /// This front-end in the firmware's terms.
    pub fn front_end(&self) -> FrontEnd {
        let own = &self.channel_adc;
        FrontEnd {
            result_bits: self.adc_bits,
            input_voltage: VoltageChannel {
                adc: self.adc_of(own.input_voltage),
                divider_top_ohm: self.input_divider_top_ohm,
                divider_bottom_ohm: self.input_divider_bottom_ohm,
            },
            input_current: CurrentChannel {
                adc: self.adc_of(own.input_current),
                shunt_milliohm: self.input_shunt_milliohm,
                gain: self.input_gain,
            },
            output_voltage: VoltageChannel {
                adc: self.adc_of(own.output_voltage),
                divider_top_ohm: self.output_divider_top_ohm,
                divider_bottom_ohm: self.output_divider_bottom_ohm,
            },
            output_current: CurrentChannel {
                adc: self.adc_of(own.output_current),
                shunt_milliohm: self.output_shunt_milliohm,
                gain: self.output_gain,
            },
        }
    }

    /// The nominal calibration a node would be given for this front-end;
    /// None when a divider, shunt or gain is zero or a scale overflows.
    pub fn calibration(&self) -> Option<Calibration> {
        self.front_end().calibration()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_default_board_is_the_firmware_default_front_end() {
        let params = FrontEndParams::default_board();
        assert_eq!(params.front_end(), DEFAULT_FRONT_END);
        assert_eq!(params.channel_adc, ChannelAdcs::default());
        assert_eq!(
            params.calibration(),
            Some(gleaner_firmware::config::DEFAULT_CALIBRATION)
        );
    }

    #[test]
    fn a_channel_with_its_own_scale_is_read_at_it() {
        let mut params = FrontEndParams::default_board();
        params.channel_adc.output_current = Some(ChannelAdc {
            bits: 11,
            full_scale_v: 1.65,
        });
        let fe = params.front_end();
        assert_eq!(
            fe.output_current.adc,
            Adc {
                bits: 11,
                reference_uv: 1_650_000
            }
        );
        // The others keep the shared 12 bits over 3.3 V.
        assert_eq!(fe.input_current.adc, DEFAULT_FRONT_END.input_current.adc);
        // 1.65 V / 2048 codes over 10 Ω at gain 50: 1.611 µA per count, as
        // 3.3 V / 4096 gives.
        let cal = params.calibration().unwrap();
        assert_eq!(
            cal.output_current,
            gleaner_firmware::config::DEFAULT_CALIBRATION.output_current
        );
    }
}
