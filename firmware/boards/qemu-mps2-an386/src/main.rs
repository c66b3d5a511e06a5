//! The Gleaner node on an emulated Cortex-M4F (QEMU `mps2-an386`), on the
//! embassy executor as the real boards are.
//!
//! One task: an embassy-time `Ticker` paces sampling at 100 Hz (the clock is
//! SysTick, `clock.rs`), and between samples the task sleeps until a command
//! byte arrives on UART0 (`uart.rs`). A stand-in signal source (a draining
//! cell) gives the counts; the real `Node` does everything else and answers
//! on the same UART. After the cell has run out and
//! [`RUN_AFTER_CUTOFF_S`] more seconds have passed, it exits QEMU through
//! semihosting with success. A panic exits with failure.

#![no_std]
#![no_main]

mod clock;
mod stack;
mod stand_in;
mod uart;

use cortex_m_semihosting::debug;
use embassy_executor::Spawner;
use embassy_futures::select::{select, Either};
use embassy_time::{Duration, Ticker};
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

#[embassy_executor::main]
async fn main(_spawner: Spawner) {
    let stack = stack::StackWatch::paint();
    let Some(core) = cortex_m::Peripherals::take() else {
        exit(false)
    };
    clock::start(core.SYST, uart::SYSTEM_CLOCK_HZ);

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

    let mut ticker = Ticker::every(Duration::from_micros(u64::from(SAMPLE_PERIOD_US)));
    let mut cutoff_at_us: Option<u64> = None;
    loop {
        let byte = match select(ticker.next(), serial.received()).await {
            Either::First(()) => None,
            Either::Second(byte) => Some(byte),
        };
        if let Some(byte) = byte {
            node.on_received(&[byte]);
            let _ = node.write_pending(&mut serial);
            continue;
        }
        let t_us = source.now_us();
        match source.sample() {
            Ok(raw) => node.on_sample(t_us, &raw),
            Err(_) => node.on_sampler_error(t_us),
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
