//! The virtual node's ADC: the front-end as built ([`FrontEndParams`]) with
//! its reference error, noise and channel errors, producing the raw counts
//! the node sees.

use gleaner_firmware::calibration::Adc;
use gleaner_firmware::RawSample;
use rand::Rng;
use rand_distr::StandardNormal;

pub use crate::front_end::{ChannelError, ChannelErrors, FrontEndParams};

impl FrontEndParams {
    /// Counts for `pin_v` at the pin of a channel read at `adc`'s scale
    /// (`2^bits` codes over its full scale, IEEE Std 1241 code width), held
    /// within the converter's results.
    fn convert(&self, pin_v: f64, adc: Adc, rng: &mut impl Rng) -> u32 {
        let full_scale = f64::from(adc.reference_uv) * 1e-6;
        let reference = full_scale * (1.0 + self.reference_error_ppm * 1e-6);
        let lsb = reference / (f64::from(adc.max_count()) + 1.0);
        let noise = if self.noise_lsb > 0.0 {
            rng.sample::<f64, _>(StandardNormal) * self.noise_lsb
        } else {
            0.0
        };
        let result_top = Adc {
            bits: self.adc_bits,
            reference_uv: adc.reference_uv,
        }
        .max_count();
        let max = f64::from(adc.max_count().min(result_top));
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
        let fe = self.front_end();
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
                fe.input_voltage.adc,
                rng,
            ),
            input_current: self.convert(
                amplify(input_a, self.input_shunt_milliohm, self.input_gain),
                fe.input_current.adc,
                rng,
            ),
            output_voltage: self.convert(
                divide(
                    output_v,
                    self.output_divider_top_ohm,
                    self.output_divider_bottom_ohm,
                ),
                fe.output_voltage.adc,
                rng,
            ),
            output_current: self.convert(
                amplify(output_a, self.output_shunt_milliohm, self.output_gain),
                fe.output_current.adc,
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
    fn a_channel_with_its_own_scale_is_sampled_at_it() {
        // The output current read differentially at 13 bits over 150 mV
        // through 10 Ω without gain (1.831 µA per count) on a converter with
        // 14-bit results.
        let mut fe = FrontEndParams::default_board();
        fe.adc_bits = 14;
        fe.output_gain = 1;
        fe.channel_adc.output_current = Some(crate::front_end::ChannelAdc {
            bits: 13,
            full_scale_v: 0.15,
        });
        let cal = fe.calibration().unwrap();
        let mut rng = rand_pcg::Pcg64Mcg::seed_from_u64(1);
        let raw = fe.sample(1.0, 0.0, 3.0, 0.012, &mut rng);
        assert_eq!(raw.output_current, 6554); // 120 mV / (150 mV / 8192)
        let (s, _) = calibrate(&cal, &raw);
        assert!((f64::from(s.output_na) - 12_000_000.0).abs() <= 1_831.0 / 2.0 + 1.0);
        // Beyond its full scale it stops at its own top code.
        let raw = fe.sample(1.0, 0.0, 3.0, 0.1, &mut rng);
        assert_eq!(raw.output_current, 8191);
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
