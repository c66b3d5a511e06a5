//! The four channels on the SAADC, converted in one scan by embassy-nrf's
//! driver: two single-ended (the voltages), two differential (across the
//! shunts), each with its own gain and acquisition time, 16x oversampled in
//! burst mode to 14-bit results. The core sleeps while the scan runs
//! (`sample().await`; the SAADC's END interrupt wakes it).

use embassy_nrf::saadc::{ChannelConfig, Config, Gain, Oversample, Resolution, Saadc, Time};
use embassy_nrf::{bind_interrupts, peripherals, saadc, Peri};
use gleaner_firmware::RawSample;

use crate::front_end::raw_sample;

bind_interrupts!(struct Irqs {
    SAADC => saadc::InterruptHandler;
});

/// The SAADC pins, as the DK routes them (see `docs/nrf52840-front-end.md`).
pub struct AdcPins<'d> {
    /// AIN0: input voltage.
    pub input_voltage: Peri<'d, peripherals::P0_02>,
    /// AIN1 - AIN2: across the input shunt.
    pub input_shunt: (Peri<'d, peripherals::P0_03>, Peri<'d, peripherals::P0_04>),
    /// AIN4: output voltage, behind its divider.
    pub output_voltage: Peri<'d, peripherals::P0_28>,
    /// AIN6 - AIN7: across the output shunt.
    pub output_shunt: (Peri<'d, peripherals::P0_30>, Peri<'d, peripherals::P0_31>),
}

/// The four-channel scan.
pub struct FourChannelAdc<'d> {
    saadc: Saadc<'d, 4>,
}

/// A channel with `gain` and acquisition `time` (the SAADC's internal 0.6 V
/// reference, as in [`crate::front_end`]).
fn with(mut channel: ChannelConfig<'_>, gain: Gain, time: Time) -> ChannelConfig<'_> {
    channel.gain = gain;
    channel.time = time;
    channel
}

impl<'d> FourChannelAdc<'d> {
    /// Sets up the scan, in the order of [`RawSample`]'s fields.
    pub fn new(saadc: Peri<'d, peripherals::SAADC>, pins: AdcPins<'d>) -> Self {
        let mut config = Config::default();
        config.resolution = Resolution::_14bit;
        config.oversample = Oversample::Over16x;
        let channels = [
            with(
                ChannelConfig::single_ended(pins.input_voltage),
                Gain::Gain1_2,
                Time::_10US,
            ),
            with(
                ChannelConfig::differential(pins.input_shunt.0, pins.input_shunt.1),
                Gain::Gain4,
                Time::_10US,
            ),
            // Behind a divider of 500 kΩ Thevenin resistance: the longest
            // acquisition time.
            with(
                ChannelConfig::single_ended(pins.output_voltage),
                Gain::Gain1_4,
                Time::_40US,
            ),
            with(
                ChannelConfig::differential(pins.output_shunt.0, pins.output_shunt.1),
                Gain::Gain4,
                Time::_10US,
            ),
        ];
        FourChannelAdc {
            saadc: Saadc::new(saadc, Irqs, config, channels),
        }
    }

    /// Measures the SAADC's offset again (it drifts with temperature).
    pub async fn calibrate_offset(&self) {
        self.saadc.calibrate().await;
    }

    /// One scan of the four channels.
    pub async fn sample(&mut self) -> RawSample {
        let mut results = [0i16; 4];
        self.saadc.sample(&mut results).await;
        raw_sample(results)
    }
}
