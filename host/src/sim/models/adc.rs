//! The measuring front-end: dividers, shunts, amplifier gain and an N-bit ADC
//! with a reference error and noise, producing the raw counts the node sees.

use gleaner_firmware::calibration::{current_shunt, voltage_divider, Adc};
use gleaner_firmware::RawSample;
use gleaner_protocol::Calibration;
use rand::Rng;
use rand_distr::StandardNormal;
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

impl FrontEndParams {
    /// The front-end of the firmware's default calibration.
    pub fn default_board() -> Self {
        FrontEndParams {
            adc_bits: 12,
            reference_v: 3.3,
            reference_error_ppm: 0.0,
            noise_lsb: 0.0,
            input_divider_top_ohm: 0,
            input_divider_bottom_ohm: 1,
            input_shunt_milliohm: 1_000,
            input_gain: 50,
            output_divider_top_ohm: 1_000_000,
            output_divider_bottom_ohm: 1_000_000,
            output_shunt_milliohm: 10_000,
            output_gain: 50,
            errors: ChannelErrors::default(),
        }
    }

    fn adc(&self) -> Adc {
        Adc {
            bits: self.adc_bits,
            reference_uv: (self.reference_v * 1e6).round() as u32,
        }
    }

    /// The nominal calibration a node would be given for this front-end.
    pub fn calibration(&self) -> Option<Calibration> {
        let adc = self.adc();
        Some(Calibration {
            adc_bits: self.adc_bits,
            input_voltage: voltage_divider(
                adc,
                self.input_divider_top_ohm,
                self.input_divider_bottom_ohm,
            )?,
            input_current: current_shunt(adc, self.input_shunt_milliohm, self.input_gain)?,
            output_voltage: voltage_divider(
                adc,
                self.output_divider_top_ohm,
                self.output_divider_bottom_ohm,
            )?,
            output_current: current_shunt(adc, self.output_shunt_milliohm, self.output_gain)?,
        })
    }

    fn convert(&self, pin_v: f64, rng: &mut impl Rng) -> u32 {
        let reference = self.reference_v * (1.0 + self.reference_error_ppm * 1e-6);
        let lsb = reference / f64::from(1u32 << self.adc_bits);
        let noise = if self.noise_lsb > 0.0 {
            rng.sample::<f64, _>(StandardNormal) * self.noise_lsb
        } else {
            0.0
        };
        let max = f64::from((1u32 << self.adc_bits) - 1);
        (pin_v / lsb + noise).round().clamp(0.0, max) as u32
    }

    /// The counts for true input and output voltages (V) and currents (A).
    pub fn sample(
        &self,
        input_v: f64,
        input_a: f64,
        output_v: f64,
        output_a: f64,
        rng: &mut impl Rng,
    ) -> RawSample {
        let divide = |v: f64, top: u32, bottom: u32| {
            v * f64::from(bottom) / (f64::from(top) + f64::from(bottom))
        };
        let amplify =
            |a: f64, milliohm: u32, gain: u32| a * f64::from(milliohm) * 1e-3 * f64::from(gain);
        let e = &self.errors;
        let (input_v, input_a) = (e.input_voltage.read(input_v), e.input_current.read(input_a));
        let (output_v, output_a) = (
            e.output_voltage.read(output_v),
            e.output_current.read(output_a),
        );
        RawSample {
            input_voltage: self.convert(
                divide(
                    input_v,
                    self.input_divider_top_ohm,
                    self.input_divider_bottom_ohm,
                ),
                rng,
            ),
            input_current: self.convert(
                amplify(input_a, self.input_shunt_milliohm, self.input_gain),
                rng,
            ),
            output_voltage: self.convert(
                divide(
                    output_v,
                    self.output_divider_top_ohm,
                    self.output_divider_bottom_ohm,
                ),
                rng,
            ),
            output_current: self.convert(
                amplify(output_a, self.output_shunt_milliohm, self.output_gain),
                rng,
            ),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use gleaner_firmware::calibration::calibrate;
    use rand::SeedableRng;

    #[test]
    fn counts_calibrate_back_to_the_true_values_within_one_lsb() {
        let fe = FrontEndParams::default_board();
        let cal = fe.calibration().unwrap();
        let mut rng = rand_pcg::Pcg64Mcg::seed_from_u64(1);
        let raw = fe.sample(1.234, 0.0123, 3.1, 0.00045, &mut rng);
        let (s, _) = calibrate(&cal, &raw);
        assert!((f64::from(s.input_uv) - 1_234_000.0).abs() <= 806.0 / 2.0 + 1.0);
        assert!((f64::from(s.input_na) - 12_300_000.0).abs() <= 16_114.0 / 2.0 + 1.0);
        assert!((f64::from(s.output_uv) - 3_100_000.0).abs() <= 1_612.0 / 2.0 + 1.0);
        assert!((f64::from(s.output_na) - 450_000.0).abs() <= 1_612.0 / 2.0 + 1.0);
    }

    #[test]
    fn a_reference_error_scales_every_reading() {
        let mut fe = FrontEndParams::default_board();
        fe.reference_error_ppm = 10_000.0; // 1 % high reference reads 1 % low
        let cal = fe.calibration().unwrap();
        let mut rng = rand_pcg::Pcg64Mcg::seed_from_u64(1);
        let (s, _) = calibrate(&cal, &fe.sample(2.0, 0.0, 0.0, 0.0, &mut rng));
        let ratio = f64::from(s.input_uv) / 2_000_000.0;
        assert!((ratio - 1.0 / 1.01).abs() < 5e-4, "{ratio}");
    }
}
