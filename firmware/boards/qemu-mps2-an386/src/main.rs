//! The Gleaner node on an emulated Cortex-M4F (QEMU `mps2-an386`).
//!
//! SysTick paces sampling at 100 Hz; a stand-in signal source (a draining
//! cell) gives the counts; the real `Node` does everything else and talks over
//! UART0, receiving commands on the same UART. After the cell has run out and
//! [`RUN_AFTER_CUTOFF_S`] more seconds have passed, it exits QEMU through
//! semihosting with success. A panic exits with failure.

#![no_std]
#![no_main]

mod stack;
mod stand_in;
mod uart;

use core::sync::atomic::{AtomicU32, Ordering};

use cortex_m::peripheral::syst::SystClkSource;
use cortex_m_rt::{entry, exception};
use cortex_m_semihosting::debug;
use gleaner_firmware::config::default_config;
use gleaner_firmware::config_store::{MemoryStorage, STORE_LEN};
use gleaner_firmware::load_shed::NoPin;
use gleaner_firmware::sampler::Sampler;
use gleaner_firmware::{Node, NodeParts};
use gleaner_protocol::{ConfigSource, ConverterState};

/// Time between samples.
const SAMPLE_PERIOD_US: u32 = 10_000;
/// Seconds to keep running after the cutoff, so the outage is reported.
const RUN_AFTER_CUTOFF_S: u64 = 10;
/// Hard stop, whatever happens.
const RUN_AT_MOST_S: u64 = 300;
/// Line rate.
const BAUD: u32 = 115_200;
/// The emulated node's fixed identity (the emulator has no factory id).
const EMULATED_NODE_ID: u64 = 0x0E4D_0000_0000_0001;

static TICKS: AtomicU32 = AtomicU32::new(0);

#[exception]
fn SysTick() {
    TICKS.fetch_add(1, Ordering::Relaxed);
}

fn exit(success: bool) -> ! {
    debug::exit(if success {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    loop {
        cortex_m::asm::wfi();
    }
}

/// Prints `gleaner node: stack used N bytes` on the host's standard output.
fn report_stack(used: usize) {
    let mut digits = [0u8; 10];
    let mut n = used;
    let mut start = digits.len();
    loop {
        start -= 1;
        digits[start] = b'0' + (n % 10) as u8;
        n /= 10;
        if n == 0 || start == 0 {
            break;
        }
    }
    if let Ok(mut out) = cortex_m_semihosting::hio::hstdout() {
        let _ = out.write_all(b"gleaner node: stack used ");
        let _ = out.write_all(&digits[start..]);
        let _ = out.write_all(b" bytes\n");
    }
}

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    // No formatting machinery here: it would cost kilobytes of flash.
    if let Ok(mut out) = cortex_m_semihosting::hio::hstdout() {
        let _ = out.write_all(b"gleaner node: panic\n");
    }
    exit(false)
}

#[entry]
fn main() -> ! {
    let stack = stack::StackWatch::paint();
    let Some(mut core) = cortex_m::Peripherals::take() else {
        exit(false)
    };
    core.SYST.set_clock_source(SystClkSource::Core);
    core.SYST
        .set_reload(uart::SYSTEM_CLOCK_HZ / 1_000_000 * SAMPLE_PERIOD_US - 1);
    core.SYST.clear_current();
    core.SYST.enable_interrupt();
    core.SYST.enable_counter();

    let mut serial = uart::Uart0::new(BAUD);
    let config = default_config();
    let mut source = stand_in::DrainingCell::new(config.calibration, u64::from(SAMPLE_PERIOD_US));
    // No flash on this machine: configurations live in RAM until reset.
    let mut node = Node::new(NodeParts {
        config,
        config_source: ConfigSource::Defaults,
        node_id: EMULATED_NODE_ID,
        boot_id: 0x0E4D_0001,
        sample_period_us: SAMPLE_PERIOD_US,
        load_pin: NoPin,
        storage: MemoryStorage::<STORE_LEN>::new(),
    });
    let _ = node.write_pending(&mut serial);

    let mut done_ticks = 0u32;
    let mut cutoff_at_us: Option<u64> = None;
    loop {
        while TICKS.load(Ordering::Relaxed) == done_ticks {
            if let Some(byte) = serial.read_byte() {
                node.on_received(&[byte]);
            } else {
                cortex_m::asm::wfi();
            }
        }
        done_ticks = done_ticks.wrapping_add(1);
        let t_us = source.now_us();
        match source.sample() {
            Ok(raw) => node.on_sample(t_us, &raw),
            Err(_) => node.on_sampler_error(t_us),
        }
        while let Some(byte) = serial.read_byte() {
            node.on_received(&[byte]);
        }
        let _ = node.write_pending(&mut serial);
        if cutoff_at_us.is_none() && node.state() == ConverterState::CutOff {
            cutoff_at_us = Some(t_us);
        }
        let after_cutoff =
            cutoff_at_us.is_some_and(|at| t_us >= at + RUN_AFTER_CUTOFF_S * 1_000_000);
        if after_cutoff || t_us >= RUN_AT_MOST_S * 1_000_000 {
            report_stack(stack.used());
            exit(true);
        }
    }
}
