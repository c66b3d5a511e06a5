//! embassy-time's clock on SysTick: one tick per sample period (the
//! `tick-hz-100` rate), counted in 64 bits, the timer queue checked on every
//! tick. The tick also wakes the receive side of the UART (see `uart`).

use core::cell::{Cell, RefCell};
use core::task::Waker;

use cortex_m::peripheral::syst::SystClkSource;
use cortex_m::peripheral::SYST;
use cortex_m_rt::exception;
use critical_section::Mutex;
use embassy_time_driver::{Driver, TICK_HZ};
use embassy_time_queue_utils::Queue;

/// SysTick as embassy-time's driver.
struct SysTickClock {
    ticks: Mutex<Cell<u64>>,
    queue: Mutex<RefCell<Queue>>,
}

embassy_time_driver::time_driver_impl!(static CLOCK: SysTickClock = SysTickClock {
    ticks: Mutex::new(Cell::new(0)),
    queue: Mutex::new(RefCell::new(Queue::new())),
});

impl Driver for SysTickClock {
    fn now(&self) -> u64 {
        critical_section::with(|cs| self.ticks.borrow(cs).get())
    }

    fn schedule_wake(&self, at: u64, waker: &Waker) {
        critical_section::with(|cs| {
            if at <= self.ticks.borrow(cs).get() {
                waker.wake_by_ref();
            } else {
                self.queue.borrow_ref_mut(cs).schedule_wake(at, waker);
            }
        });
    }
}

/// Starts SysTick at [`TICK_HZ`] from a core clock of `core_hz`.
pub fn start(mut syst: SYST, core_hz: u32) {
    let per_tick = u64::from(core_hz) / TICK_HZ;
    syst.set_clock_source(SystClkSource::Core);
    syst.set_reload(u32::try_from(per_tick.saturating_sub(1)).unwrap_or(0x00FF_FFFF));
    syst.clear_current();
    syst.enable_interrupt();
    syst.enable_counter();
}

#[exception]
fn SysTick() {
    critical_section::with(|cs| {
        let ticks = CLOCK.ticks.borrow(cs);
        ticks.set(ticks.get() + 1);
        CLOCK.queue.borrow_ref_mut(cs).next_expiration(ticks.get());
    });
    crate::uart::RECEIVED.wake();
}
