//! The Gleaner node on an STM32L432KC (NUCLEO-L432KC), on embassy-stm32's
//! low-power executor.
//!
//! One task: an embassy-time `Ticker` paces sampling at 100 Hz; each tick
//! converts the four channels and the internal reference on ADC1
//! ([`adc`]) with the core asleep while DMA collects them, and hands them to
//! the firmware's `Node`, which does the metering, the cutoff state machine,
//! the forecasts and the framing. Between ticks the executor puts the chip in
//! Stop 1: the time driver hands over to the RTC's wake-up timer (LSE), and
//! USART2, clocked by HSI16 with its wake-up from Stop enabled, wakes the
//! core for a command byte from the host. Frames out leave from a transmit
//! ring; the chip stays out of Stop until the last byte is on the line.
//! Accepted configurations are kept in the last two flash pages and survive
//! resets.
//!
//! The wiring and the front-end values are in `docs/stm32l432-front-end.md`
//! and [`front_end`].

#![no_std]
#![no_main]

mod adc;
mod front_end;

#[cfg(feature = "defmt")]
use defmt_rtt as _;

use embassy_executor::Spawner;
use embassy_futures::select::{select3, Either3};
use embassy_stm32::flash::Flash;
use embassy_stm32::gpio::{Level, Output, Speed};
use embassy_stm32::rcc::{StopMode, WakeGuard};
use embassy_stm32::rng::{self, Rng};
use embassy_stm32::usart::{self, BufferedUart};
use embassy_stm32::{bind_interrupts, peripherals};
use embassy_time::{Duration, Ticker, TICK_HZ};
use embedded_io_async::{Read, Write};
use gleaner_firmware::config_store;
use gleaner_firmware::flash_slots::FlashSlots;
use gleaner_firmware::{Node, NodeParts};
use gleaner_protocol::{ConfigSource, MAX_UPLINK_FRAME_LEN};

use crate::adc::{AdcPins, FourChannelAdc};

bind_interrupts!(struct Irqs {
    USART2 => usart::BufferedInterruptHandler<peripherals::USART2>;
    RNG => rng::InterruptHandler<peripherals::RNG>;
});

/// Time between samples, µs: 100 samples per second.
const SAMPLE_PERIOD_US: u32 = 10_000;
const _: () = assert!(
    (SAMPLE_PERIOD_US as u64 * TICK_HZ).is_multiple_of(1_000_000),
    "the sample period is a whole number of embassy-time ticks"
);
/// First byte of the two configuration pages, counted from the start of
/// flash; memory.x keeps code out of them.
const CONFIG_PAGES: u32 = 256 * 1024 - 2 * 2048;
/// Bytes of the receive ring: a few of the longest command frames.
const RX_RING: usize = 256;
/// Bytes of the transmit ring: a few of the longest frames.
const TX_RING: usize = 4 * MAX_UPLINK_FRAME_LEN;
/// Shortest wait worth a trip into Stop 1 (waking takes microseconds; the
/// RTC's wake-up timer counts in about half a millisecond).
const MIN_STOP_PAUSE: Duration = Duration::from_millis(2);

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

/// MSI at 16 MHz for the core and the ADC; HSI16 for USART2 (its clock in
/// Stop); the LSE crystal for the RTC, which keeps time in Stop. The debug
/// port stays powered in Stop only in the defmt build (it costs current).
fn chip_config() -> embassy_stm32::Config {
    use embassy_stm32::rcc::{mux, LsConfig, MSIRange, Sysclk};
    let mut config = embassy_stm32::Config::default();
    config.rcc.msi = Some(MSIRange::RANGE16M);
    config.rcc.sys = Sysclk::MSI;
    config.rcc.hsi = true;
    config.rcc.ls = LsConfig::default_lse();
    config.rcc.mux.usart2sel = mux::Usartsel::HSI;
    config.rcc.mux.adcsel = mux::Adcsel::SYS;
    config.min_stop_pause = MIN_STOP_PAUSE;
    config.enable_debug_during_sleep = cfg!(feature = "defmt");
    config
}

/// The factory-programmed 96-bit unique id, folded to 64 bits (its last
/// word, the lot number's tail, is mixed into the upper half).
fn device_id() -> u64 {
    let uid = embassy_stm32::uid::uid();
    let word = |at: usize| {
        let mut bytes = [0u8; 4];
        bytes.copy_from_slice(uid.get(at..at + 4).unwrap_or(&[0; 4]));
        u32::from_le_bytes(bytes)
    };
    (u64::from(word(4) ^ word(8)) << 32) | u64::from(word(0))
}

/// A random per-boot value from the RNG, which runs on HSI48; the 48 MHz
/// oscillator is switched off again afterwards (it draws hundreds of µA).
fn boot_id(rng: embassy_stm32::Peri<'_, peripherals::RNG>) -> u32 {
    let value = Rng::new(rng, Irqs).next_u32();
    embassy_stm32::pac::RCC
        .crrcr()
        .modify(|w| w.set_hsi48on(false));
    value
}

#[embassy_executor::main(
    executor = "embassy_stm32::executor::Executor",
    entry = "cortex_m_rt::entry"
)]
async fn main(_spawner: Spawner) {
    let p = embassy_stm32::init(chip_config());
    // USART2 runs in Stop 1 but not in Stop 2: never deeper than Stop 1.
    let _stop_1_at_most = WakeGuard::new(StopMode::Stop2);

    let mut uart_config = usart::Config::default();
    uart_config.baudrate = 115_200;
    let (mut rx_ring, mut tx_ring) = ([0u8; RX_RING], [0u8; TX_RING]);
    // RX on PA15, TX on PA2: the ST-LINK's virtual COM port.
    let Ok(uart) = BufferedUart::new(
        p.USART2,
        p.PA15,
        p.PA2,
        &mut tx_ring,
        &mut rx_ring,
        Irqs,
        uart_config,
    ) else {
        halt()
    };
    // A byte arriving in Stop 1 wakes the core (the USART asks for HSI16).
    embassy_stm32::pac::USART2
        .cr1()
        .modify(|w| w.set_uesm(true));
    let (mut to_host, mut from_host) = uart.split();
    // High = load on; the node drops it when the storage is forecast to run out.
    let load_pin = Output::new(p.PA8, Level::High, Speed::Low);

    let Some(mut storage) = FlashSlots::new(Flash::new_blocking(p.FLASH), CONFIG_PAGES) else {
        halt()
    };
    let loaded = config_store::load(&mut storage);
    let mut config = loaded.config;
    if loaded.source == ConfigSource::Defaults {
        config.calibration = front_end::CALIBRATION;
    }
    let boot_id = boot_id(p.RNG);

    let mut adc = FourChannelAdc::new(
        p.ADC1,
        p.DMA1_CH1,
        AdcPins {
            input_voltage: p.PA0,
            input_current: p.PA1,
            output_voltage: p.PA3,
            output_current: p.PA4,
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

    // The ticker catches up after a late tick, so the n-th tick is at n
    // sample periods: the sample's time, without clock reads.
    let mut ticker = Ticker::every(Duration::from_micros(SAMPLE_PERIOD_US.into()));
    let mut samples: u64 = 0;
    let mut received = [0u8; 64];
    let mut frame = [0u8; MAX_UPLINK_FRAME_LEN];
    // Held while frames are leaving: USART2 cannot send from Stop.
    let mut sending: Option<WakeGuard> = None;
    loop {
        let sent = async {
            match sending {
                Some(_) => to_host.flush().await,
                None => core::future::pending().await,
            }
        };
        match select3(ticker.next(), from_host.read(&mut received), sent).await {
            Either3::First(()) => {
                samples += 1;
                let raw = adc.sample().await;
                node.on_sample(samples * u64::from(SAMPLE_PERIOD_US), &raw);
            }
            Either3::Second(Ok(n)) => node.on_received(received.get(..n).unwrap_or(&[])),
            // A framing or overrun error loses those bytes; the host's
            // command times out and is sent again.
            Either3::Second(Err(_)) => {}
            // The last byte is out (or the line failed): Stop is allowed again.
            Either3::Third(_) => sending = None,
        }
        // Frames wait in the transmit ring while sampling goes on. A failed
        // transfer loses that frame; its sequence number tells the host.
        while let Some(bytes) = node.next_frame(&mut frame) {
            sending.get_or_insert_with(|| WakeGuard::new(StopMode::Stop1));
            if to_host.write_all(bytes).await.is_err() {
                break;
            }
        }
    }
}
