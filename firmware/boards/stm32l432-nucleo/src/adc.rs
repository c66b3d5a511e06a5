//! The four channels and the internal reference on ADC1, converted in one
//! sequence by embassy-stm32's driver. Each result is 16x oversampled in
//! hardware; DMA moves the five results to memory and the core sleeps until
//! the transfer is done (`read().await`). The converter's offset is
//! calibrated by the driver when it starts.

use embassy_stm32::adc::vals::{OversamplingRatio, OversamplingShift, Rovsm, Trovs};
use embassy_stm32::adc::{Adc, AdcChannel, AdcConfig, AnyAdcChannel, SampleTime};
use embassy_stm32::{bind_interrupts, dma, peripherals, Peri};
use gleaner_firmware::RawSample;

use crate::front_end::{raw_sample, FACTORY_VDDA_MV};

bind_interrupts!(struct Irqs {
    DMA1_CHANNEL1 => dma::InterruptHandler<peripherals::DMA1_CH1>;
});

const _: () = assert!(
    FACTORY_VDDA_MV == embassy_stm32::adc::VREF_CALIB_MV,
    "the internal reference's factory VDDA"
);

/// Sampling time of the channels driven by a low impedance (the two
/// amplifiers, the harvester): 47.5 ADC clocks, 3 µs at 16 MHz.
const DRIVEN: SampleTime = SampleTime::CYCLES47_5;
/// Sampling time of the output divider (500 kΩ, with 100 nF at the pin):
/// 247.5 ADC clocks, 15 µs at 16 MHz.
const DIVIDED: SampleTime = SampleTime::CYCLES247_5;
/// Sampling time of the internal reference (at least 4 µs, from memory of
/// the datasheet): 92.5 ADC clocks, 5.8 µs at 16 MHz.
const REFERENCE: SampleTime = SampleTime::CYCLES92_5;

/// The ADC pins, as `docs/stm32l432-front-end.md` routes them.
pub struct AdcPins<'d> {
    /// PA0 (A0, IN5): input voltage.
    pub input_voltage: Peri<'d, peripherals::PA0>,
    /// PA1 (A1, IN6): input current, from its sense amplifier.
    pub input_current: Peri<'d, peripherals::PA1>,
    /// PA3 (A2, IN8): output voltage, behind its divider.
    pub output_voltage: Peri<'d, peripherals::PA3>,
    /// PA4 (A3, IN9): output current, from its sense amplifier.
    pub output_current: Peri<'d, peripherals::PA4>,
}

/// The five-result scan.
pub struct FourChannelAdc<'d> {
    adc: Adc<'d, peripherals::ADC1>,
    dma: Peri<'d, peripherals::DMA1_CH1>,
    channels: [(AnyAdcChannel<'d, peripherals::ADC1>, SampleTime); 5],
    /// The factory's 12-bit reading of the internal reference.
    factory_reference: u16,
}

impl<'d> FourChannelAdc<'d> {
    /// Sets up the scan, in the order of [`RawSample`]'s fields, then the
    /// internal reference.
    pub fn new(
        adc: Peri<'d, peripherals::ADC1>,
        dma: Peri<'d, peripherals::DMA1_CH1>,
        pins: AdcPins<'d>,
    ) -> Self {
        let config = AdcConfig {
            oversampling_ratio: Some(OversamplingRatio::RATIO16),
            oversampling_shift: Some(OversamplingShift::SHIFT2),
            oversampling_mode: Some((Rovsm::CONTINUED, Trovs::AUTOMATIC, true)),
            ..AdcConfig::default()
        };
        let adc = Adc::new_with_config(adc, config);
        let reference = adc.enable_vrefint();
        let channels = [
            (pins.input_voltage.degrade_adc(), DRIVEN),
            (pins.input_current.degrade_adc(), DRIVEN),
            (pins.output_voltage.degrade_adc(), DIVIDED),
            (pins.output_current.degrade_adc(), DRIVEN),
            (reference.degrade_adc(), REFERENCE),
        ];
        let factory_reference = embassy_stm32::pac::VREFINTCAL.data().read();
        FourChannelAdc {
            adc,
            dma,
            channels,
            factory_reference,
        }
    }

    /// One scan of the four channels and the reference.
    pub async fn sample(&mut self) -> RawSample {
        let mut results = [0u16; 5];
        let sequence = self.channels.iter_mut().map(|(ch, time)| (ch, *time));
        self.adc
            .read(self.dma.reborrow(), Irqs, sequence, &mut results)
            .await;
        raw_sample(results, self.factory_reference)
    }
}
