//! The Gleaner node on an nRF52840 (pin-out of the nRF52840 DK), on the
//! embassy executor and embassy-nrf.
//!
//! One task: an embassy-time `Ticker` (RTC1, running while the core sleeps)
//! paces sampling at 100 Hz; each tick converts the four channels on the
//! SAADC ([`adc`]) with the core asleep, and hands them to the firmware's
//! `Node`, which does the metering, the cutoff state machine, the forecasts
//! and the framing. Between ticks the task waits for command bytes from the
//! host on UARTE0 (`BufferedUarte`: received by EasyDMA into a ring, no work
//! per byte); frames out go into its transmit ring and leave by EasyDMA while
//! sampling goes on. Accepted configurations are kept in the last two flash
//! pages (NVMC) and survive resets.
//!
//! The wiring and the front-end values are in `docs/nrf52840-front-end.md`
//! and [`front_end`].

#![no_std]
#![no_main]

mod adc;
mod front_end;

#[cfg(feature = "defmt")]
use defmt_rtt as _;

use embassy_executor::Spawner;
use embassy_futures::select::{select, Either};
use embassy_nrf::buffered_uarte::{self, BufferedUarte};
use embassy_nrf::gpio::{Level, Output, OutputDrive};
use embassy_nrf::nvmc::Nvmc;
use embassy_nrf::rng::Rng;
use embassy_nrf::uarte::{self, Baudrate};
use embassy_nrf::{bind_interrupts, peripherals};
use embassy_time::{Duration, Ticker, TICK_HZ};
use embedded_io_async::Write;
use gleaner_firmware::config_store;
use gleaner_firmware::flash_slots::FlashSlots;
use gleaner_firmware::{Node, NodeParts};
use gleaner_protocol::{ConfigSource, MAX_UPLINK_FRAME_LEN};

use crate::adc::{AdcPins, FourChannelAdc};

bind_interrupts!(struct Irqs {
    UARTE0 => buffered_uarte::InterruptHandler<peripherals::UARTE0>;
});

/// Time between samples in ticks of RTC1, embassy-time's clock (32,768 Hz):
/// 328 ticks, the nearest to 10 ms.
const SAMPLE_PERIOD_TICKS: u64 = 328;
/// The same to the nearest microsecond, for `Hello` (10,010 µs).
const SAMPLE_PERIOD_US: u32 = ((SAMPLE_PERIOD_TICKS * 1_000_000 + TICK_HZ / 2) / TICK_HZ) as u32;
/// First byte of the two configuration pages; memory.x keeps code out of them.
const CONFIG_PAGES: u32 = 0x000F_E000;
/// How often the SAADC's offset is measured again, in samples (10 minutes).
const OFFSET_CALIBRATION_EVERY: u32 = 600_000_000 / SAMPLE_PERIOD_US;
/// Bytes of the receive ring: a few of the longest command frames.
const RX_RING: usize = 256;
/// Bytes of the transmit ring: a few of the longest frames.
const TX_RING: usize = 4 * MAX_UPLINK_FRAME_LEN;

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

/// Crystal clocks (accurate baud rate and sample times) and the DC/DC
/// regulator (the DK has its inductor: half the current of the LDO).
fn chip_config() -> embassy_nrf::config::Config {
    use embassy_nrf::config::{Config, HfclkSource, LfclkSource};
    let mut config = Config::default();
    config.hfclk_source = HfclkSource::ExternalXtal;
    config.lfclk_source = LfclkSource::ExternalXtal;
    config.dcdc.reg1 = true;
    config
}

/// The factory-programmed device id (FICR DEVICEID, two words).
fn device_id() -> u64 {
    let ficr = nrf_pac::FICR;
    (u64::from(ficr.deviceid(1).read()) << 32) | u64::from(ficr.deviceid(0).read())
}

#[embassy_executor::main]
async fn main(_spawner: Spawner) {
    let p = embassy_nrf::init(chip_config());

    let mut uart_config = uarte::Config::default();
    uart_config.baudrate = Baudrate::Baud115200;
    let (mut rx_ring, mut tx_ring) = ([0u8; RX_RING], [0u8; TX_RING]);
    // RX on P0.08, TX on P0.06: the DK's USB virtual COM port.
    let uart = BufferedUarte::new(
        p.UARTE0,
        p.TIMER0,
        p.PPI_CH0,
        p.PPI_CH1,
        p.PPI_GROUP0,
        p.P0_08,
        p.P0_06,
        Irqs,
        uart_config,
        &mut rx_ring,
        &mut tx_ring,
    );
    let (mut from_host, mut to_host) = uart.split();
    // High = load on; the node drops it when the storage is forecast to run out.
    let load_pin = Output::new(p.P1_08, Level::High, OutputDrive::Standard);

    let Some(mut storage) = FlashSlots::new(Nvmc::new(p.NVMC), CONFIG_PAGES) else {
        halt()
    };
    let loaded = config_store::load(&mut storage);
    let mut config = loaded.config;
    if loaded.source == ConfigSource::Defaults {
        config.calibration = front_end::CALIBRATION;
    }
    let boot_id = Rng::new_blocking(p.RNG).blocking_next_u32();

    let mut adc = FourChannelAdc::new(
        p.SAADC,
        AdcPins {
            input_voltage: p.P0_02,
            input_shunt: (p.P0_03, p.P0_04),
            output_voltage: p.P0_28,
            output_shunt: (p.P0_30, p.P0_31),
        },
    );

    #[cfg(feature = "defmt")]
    defmt::info!(
        "gleaner node: boot {=u32:#010x}, stored configuration {=bool}",
        boot_id,
        loaded.source == ConfigSource::Stored
    );
    let mut node = Node::new(NodeParts {
        config,
        config_source: loaded.source,
        node_id: device_id(),
        boot_id,
        sample_period_us: SAMPLE_PERIOD_US,
        load_pin,
        storage,
    });

    // The ticker runs on RTC1 and catches up after a late tick, so the n-th
    // tick is at n sample periods: the sample's time, exact to the
    // microsecond, without clock reads (TICK_HZ is a power of two).
    let mut ticker = Ticker::every(Duration::from_ticks(SAMPLE_PERIOD_TICKS));
    let mut samples: u64 = 0;
    let mut until_calibration: u32 = 0;
    let mut received = [0u8; 64];
    let mut frame = [0u8; MAX_UPLINK_FRAME_LEN];
    loop {
        match select(ticker.next(), from_host.read(&mut received)).await {
            Either::First(()) => {
                // The first tick, and every ten minutes: the SAADC's offset
                // (it drifts with temperature).
                if until_calibration == 0 {
                    adc.calibrate_offset().await;
                    until_calibration = OFFSET_CALIBRATION_EVERY;
                }
                until_calibration -= 1;
                samples += 1;
                let raw = adc.sample().await;
                node.on_sample(samples * SAMPLE_PERIOD_TICKS * 1_000_000 / TICK_HZ, &raw);
            }
            Either::Second(Ok(n)) => node.on_received(received.get(..n).unwrap_or(&[])),
            // A framing or overrun error loses those bytes; the host's
            // command times out and is sent again.
            Either::Second(Err(_)) => {}
        }
        // Frames wait in the transmit ring while sampling goes on. A failed
        // transfer loses that frame; its sequence number tells the host.
        while let Some(bytes) = node.next_frame(&mut frame) {
            if to_host.write_all(bytes).await.is_err() {
                break;
            }
        }
    }
}
