//! The Gleaner node on an nRF52840 (pin-out of the nRF52840 DK).
//!
//! RTC1 wakes the core about 100 times a second; each wake converts the four
//! channels on the SAADC ([`adc`]) and hands them to the firmware's `Node`,
//! which does the metering, the cutoff state machine, the forecast and the
//! framing. Frames go to the host on UARTE0 ([`link`]); commands come back on
//! the same UART. Between samples the core sleeps in `WFE`. Accepted
//! configurations are kept in the last two flash pages and survive resets.
//!
//! The wiring and the front-end values are in `docs/nrf52840-front-end.md`
//! and [`front_end`].

#![no_std]
#![no_main]

mod adc;
mod clock;
mod front_end;
mod link;

#[cfg(feature = "defmt")]
use defmt_rtt as _;

use cortex_m_rt::entry;
use gleaner_firmware::config_store;
use gleaner_firmware::flash_slots::FlashSlots;
use gleaner_firmware::sampler::Sampler;
use gleaner_firmware::{Node, NodeParts};
use gleaner_protocol::ConfigSource;
use nrf52840_hal::clocks::{Clocks, LfOscConfiguration};
use nrf52840_hal::gpio::{p0, p1, Level};
use nrf52840_hal::nvmc::Nvmc;
use nrf52840_hal::pac;
use nrf52840_hal::Rng;

use crate::adc::FourChannelAdc;
use crate::clock::{SampleClock, SAMPLE_PERIOD_US};

/// First byte of the two configuration pages; memory.x keeps code out of them.
const CONFIG_PAGES: usize = 0x000F_E000;
/// Two 4 KiB pages.
const CONFIG_PAGES_LEN: usize = 2 * 4096;
/// How often the SAADC's offset is measured again, µs.
const OFFSET_CALIBRATION_PERIOD_US: u64 = 600_000_000;

/// Stops here for good: only reached if the board's own constants are wrong,
/// which the first run on a bench shows at once.
fn halt() -> ! {
    #[cfg(feature = "defmt")]
    defmt::error!("gleaner node: cannot start, halted");
    loop {
        cortex_m::asm::wfi();
    }
}

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    // The firmware library is panic-free by lint; anything else resets the
    // node, and the host sees the new boot in the next Hello.
    #[cfg(feature = "defmt")]
    defmt::error!("gleaner node: panic, resetting");
    cortex_m::peripheral::SCB::sys_reset()
}

/// The configuration pages as the flash driver wants them.
fn config_pages() -> &'static mut [u8] {
    // SAFETY: memory.x leaves these pages out of FLASH, so no code or data
    // lives there, and `main` calls this once, so the slice has no alias. The
    // NVMC driver only reads it directly and writes it through the NVMC.
    unsafe { core::slice::from_raw_parts_mut(CONFIG_PAGES as *mut u8, CONFIG_PAGES_LEN) }
}

#[entry]
fn main() -> ! {
    let (Some(p), Some(mut core)) = (pac::Peripherals::take(), pac::CorePeripherals::take()) else {
        halt()
    };
    // The DK has the inductor for the DC/DC regulator: half the current of the LDO.
    p.POWER.dcdcen.write(|w| w.dcdcen().enabled());
    // Crystal clocks: accurate baud rate and sample times.
    let _clocks = Clocks::new(p.CLOCK)
        .enable_ext_hfosc()
        .set_lfclk_src_external(LfOscConfiguration::NoExternalNoBypass)
        .start_lfclk();

    let port0 = p0::Parts::new(p.P0);
    let port1 = p1::Parts::new(p.P1);
    let txd = port0.p0_06.into_push_pull_output(Level::High).degrade();
    let rxd = port0.p0_08.into_floating_input().degrade();
    let Some(mut to_host) = link::start(p.UARTE0, txd, rxd) else {
        halt()
    };
    // High = load on; the node drops it when the storage is forecast to run out.
    let load_pin = port1.p1_08.into_push_pull_output(Level::High).degrade();

    let Some(mut storage) = FlashSlots::new(Nvmc::new(p.NVMC, config_pages()), 0) else {
        halt()
    };
    let loaded = config_store::load(&mut storage);
    let mut config = loaded.config;
    if loaded.source == ConfigSource::Defaults {
        config.calibration = front_end::CALIBRATION;
    }
    let boot_id = Rng::new(p.RNG).random_u32();
    // The factory-programmed device id (FICR DEVICEID, two words): the node's identity.
    let node_id = (u64::from(p.FICR.deviceid[1].read().bits()) << 32)
        | u64::from(p.FICR.deviceid[0].read().bits());

    let mut adc = FourChannelAdc::new(p.SAADC);
    let Some(mut clock) = SampleClock::start(p.RTC1) else {
        halt()
    };
    // Pending interrupts (never enabled in the NVIC) wake WFE.
    core.SCB.set_sevonpend();

    #[cfg(feature = "defmt")]
    defmt::info!(
        "gleaner node: boot {=u32:#010x}, configuration {}",
        boot_id,
        loaded.source
    );
    let mut node = Node::new(NodeParts {
        config,
        config_source: loaded.source,
        node_id,
        boot_id,
        sample_period_us: SAMPLE_PERIOD_US,
        load_pin,
        storage,
    });
    let mut next_offset_calibration_us = OFFSET_CALIBRATION_PERIOD_US;
    #[cfg(feature = "defmt")]
    let (mut last_state, mut last_lost) = (node.state(), 0u32);

    loop {
        while let Some(byte) = link::take() {
            node.on_received(&[byte]);
        }
        if clock.sample_due() {
            let t_us = clock.now_us();
            match adc.sample() {
                Ok(raw) => node.on_sample(t_us, &raw),
                Err(_error) => {
                    #[cfg(feature = "defmt")]
                    defmt::warn!("sampling failed: {}", _error);
                    node.on_sampler_error(t_us);
                }
            }
            if t_us >= next_offset_calibration_us {
                let _ = adc.calibrate_offset();
                next_offset_calibration_us = t_us.saturating_add(OFFSET_CALIBRATION_PERIOD_US);
            }
        }
        // A failed transfer loses that frame; its sequence number tells the host.
        let _ = node.write_pending(&mut to_host);
        #[cfg(feature = "defmt")]
        {
            let state = node.state();
            if state != last_state {
                defmt::info!("state {} -> {}", last_state, state);
                last_state = state;
            }
            let lost = link::overflowed();
            if lost != last_lost {
                defmt::warn!("receive queue full: {=u32} bytes lost", lost);
                last_lost = lost;
            }
        }
        // Asleep until the next sample tick or a received byte. A wake-up that
        // came while working is latched, so WFE returns at once and nothing waits.
        cortex_m::asm::wfe();
    }
}
