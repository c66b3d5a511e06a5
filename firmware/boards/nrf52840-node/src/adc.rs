//! The four channels on the SAADC, converted in one scan.
//!
//! The HAL's SAADC driver converts one single-ended channel at a time; this
//! node needs two of its channels differential (across the shunts) and all
//! four taken close together, so the scan is set up here on the PAC. Each
//! channel is oversampled 16x in burst mode, which the SAADC allows in scan
//! mode, and the 14-bit averages land in RAM by EasyDMA.

use core::sync::atomic::{compiler_fence, Ordering};

use gleaner_firmware::sampler::{Error, ErrorKind, ErrorType, Sampler};
use gleaner_firmware::RawSample;
use nrf52840_hal::pac::saadc::ch::config::{GAIN_A, MODE_A, TACQ_A};
use nrf52840_hal::pac::saadc::ch::pseln::PSELN_A;
use nrf52840_hal::pac::saadc::ch::pselp::PSELP_A;
use nrf52840_hal::pac::SAADC;

use crate::front_end::raw_sample;

/// Polls of a busy-wait before the SAADC counts as stuck. One conversion scan
/// takes about 1.3 ms; this allows several times that at 64 MHz.
const SPIN_LIMIT: u32 = 400_000;

/// Why a scan failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum AdcError {
    /// The SAADC did not finish in time.
    Timeout,
    /// It finished with fewer results than channels.
    ShortScan,
}

impl Error for AdcError {
    fn kind(&self) -> ErrorKind {
        match self {
            AdcError::Timeout => ErrorKind::Timeout,
            AdcError::ShortScan => ErrorKind::Hardware,
        }
    }
}

/// One channel of the scan: gain, acquisition time and inputs (a negative
/// input of `NC` makes it single-ended).
struct ChannelSetup {
    gain: GAIN_A,
    acquisition: TACQ_A,
    positive: PSELP_A,
    negative: PSELN_A,
}

/// The scan, in the order of [`RawSample`]'s fields; values as in
/// [`crate::front_end`].
const SCAN: [ChannelSetup; 4] = [
    // Input voltage: AIN0, single-ended, gain 1/2.
    ChannelSetup {
        gain: GAIN_A::GAIN1_2,
        acquisition: TACQ_A::_10US,
        positive: PSELP_A::ANALOG_INPUT0,
        negative: PSELN_A::NC,
    },
    // Input current: AIN1 - AIN2, gain 4.
    ChannelSetup {
        gain: GAIN_A::GAIN4,
        acquisition: TACQ_A::_10US,
        positive: PSELP_A::ANALOG_INPUT1,
        negative: PSELN_A::ANALOG_INPUT2,
    },
    // Output voltage: AIN4, single-ended, gain 1/4, behind a divider of
    // 500 kΩ Thevenin resistance: the longest acquisition time.
    ChannelSetup {
        gain: GAIN_A::GAIN1_4,
        acquisition: TACQ_A::_40US,
        positive: PSELP_A::ANALOG_INPUT4,
        negative: PSELN_A::NC,
    },
    // Output current: AIN6 - AIN7, gain 4.
    ChannelSetup {
        gain: GAIN_A::GAIN4,
        acquisition: TACQ_A::_10US,
        positive: PSELP_A::ANALOG_INPUT6,
        negative: PSELN_A::ANALOG_INPUT7,
    },
];

/// The SAADC set up for the four channels of [`crate::front_end`].
pub struct FourChannelAdc {
    saadc: SAADC,
    results: [i16; 4],
}

impl FourChannelAdc {
    /// Configures the channels and runs the offset calibration.
    pub fn new(saadc: SAADC) -> Self {
        saadc.enable.write(|w| w.enable().enabled());
        saadc.resolution.write(|w| w.val()._14bit());
        saadc.oversample.write(|w| w.oversample().over16x());
        saadc.samplerate.write(|w| w.mode().task());
        for (ch, setup) in saadc.ch.iter().zip(SCAN) {
            let mode = if setup.negative == PSELN_A::NC {
                MODE_A::SE
            } else {
                MODE_A::DIFF
            };
            ch.config.write(|w| {
                w.refsel().internal().gain().variant(setup.gain);
                w.tacq().variant(setup.acquisition).mode().variant(mode);
                w.resp().bypass().resn().bypass().burst().enabled()
            });
            ch.pselp.write(|w| w.pselp().variant(setup.positive));
            ch.pseln.write(|w| w.pseln().variant(setup.negative));
        }
        for ch in saadc.ch.iter().skip(SCAN.len()) {
            ch.pselp.write(|w| w.pselp().nc());
        }
        let mut adc = FourChannelAdc {
            saadc,
            results: [0; 4],
        };
        // A failed calibration leaves the factory offset: readings stay usable.
        let _ = adc.calibrate_offset();
        adc
    }

    /// Measures and removes the SAADC's offset (worth repeating when the
    /// temperature has moved by more than a few kelvin).
    pub fn calibrate_offset(&mut self) -> Result<(), AdcError> {
        self.saadc.events_calibratedone.reset();
        self.saadc
            .tasks_calibrateoffset
            .write(|w| w.tasks_calibrateoffset().set_bit());
        self.wait(|s| s.events_calibratedone.read().bits() != 0)?;
        self.saadc.events_calibratedone.reset();
        Ok(())
    }

    fn wait(&self, done: impl Fn(&SAADC) -> bool) -> Result<(), AdcError> {
        for _ in 0..SPIN_LIMIT {
            if done(&self.saadc) {
                return Ok(());
            }
            core::hint::spin_loop();
        }
        Err(AdcError::Timeout)
    }

    /// Converts the four channels once.
    pub fn convert(&mut self) -> Result<[i16; 4], AdcError> {
        let address = self.results.as_mut_ptr() as u32;
        let count = self.results.len() as u16;
        // SAFETY: EasyDMA writes `count` 16-bit results to `address`, which is
        // `self.results`: in RAM, exactly `count` results long, and borrowed
        // mutably by this call until the END event below says the transfer is
        // over (or the SAADC is stopped on a timeout).
        self.saadc
            .result
            .ptr
            .write(|w| unsafe { w.ptr().bits(address) });
        self.saadc
            .result
            .maxcnt
            .write(|w| unsafe { w.maxcnt().bits(count) });
        compiler_fence(Ordering::SeqCst);
        self.saadc.events_started.reset();
        self.saadc.events_end.reset();
        self.saadc.tasks_start.write(|w| w.tasks_start().set_bit());
        let outcome = self
            .wait(|s| s.events_started.read().bits() != 0)
            .and_then(|()| {
                self.saadc
                    .tasks_sample
                    .write(|w| w.tasks_sample().set_bit());
                self.wait(|s| s.events_end.read().bits() != 0)
            });
        if outcome.is_err() {
            self.saadc.tasks_stop.write(|w| w.tasks_stop().set_bit());
            let _ = self.wait(|s| s.events_stopped.read().bits() != 0);
            self.saadc.events_stopped.reset();
        }
        compiler_fence(Ordering::SeqCst);
        outcome?;
        if self.saadc.result.amount.read().bits() != u32::from(count) {
            return Err(AdcError::ShortScan);
        }
        Ok(self.results)
    }
}

impl ErrorType for FourChannelAdc {
    type Error = AdcError;
}

impl Sampler for FourChannelAdc {
    fn sample(&mut self) -> Result<RawSample, AdcError> {
        self.convert().map(raw_sample)
    }
}
