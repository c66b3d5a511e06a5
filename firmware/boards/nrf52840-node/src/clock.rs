//! Time and sample pacing from RTC1 on the 32.768 kHz clock.
//!
//! The RTC's counter has 24 bits (it wraps every 512 s); [`SampleClock`]
//! extends it to 64 bits, which is enough as long as it is read at least once
//! per wrap (every sample does). Compare register 0 fires once per sample
//! period and wakes the core from `WFE`.

use nrf52840_hal::pac::{Interrupt, NVIC, RTC1};
use nrf52840_hal::rtc::{Rtc, RtcCompareReg, RtcInterrupt};

/// Ticks between samples at 32,768 ticks/s (prescaler 0): 328 ticks is 10.0098 ms, about 100 samples/s.
pub const SAMPLE_PERIOD_TICKS: u32 = 328;
/// The same in whole microseconds, for the node's `Hello`.
pub const SAMPLE_PERIOD_US: u32 = 10_010;

const COUNTER_MASK: u32 = 0x00FF_FFFF;
/// The RTC needs a compare value at least this many ticks ahead to fire.
const MIN_TICKS_AHEAD: u32 = 2;

/// Microseconds since boot and the sample tick.
pub struct SampleClock {
    rtc: Rtc<RTC1>,
    wraps: u64,
    last_counter: u32,
    next_compare: u32,
}

impl SampleClock {
    /// Starts RTC1 (the low-frequency clock must be running).
    pub fn start(rtc1: RTC1) -> Option<Self> {
        let mut rtc = Rtc::new(rtc1, 0).ok()?;
        rtc.enable_interrupt(RtcInterrupt::Compare0, None);
        rtc.enable_counter();
        let mut clock = SampleClock {
            rtc,
            wraps: 0,
            last_counter: 0,
            next_compare: 0,
        };
        clock.arm(0);
        Some(clock)
    }

    fn ticks(&mut self) -> u64 {
        let counter = self.rtc.get_counter() & COUNTER_MASK;
        if counter < self.last_counter {
            self.wraps = self.wraps.saturating_add(1);
        }
        self.last_counter = counter;
        (self.wraps << 24) | u64::from(counter)
    }

    /// Microseconds since the RTC started.
    pub fn now_us(&mut self) -> u64 {
        // ticks * 10^6 / 32768 = ticks * 15625 / 512, exact for whole ticks.
        self.ticks().saturating_mul(15_625) >> 9
    }

    /// Sets compare 0 one period after `from`, or just ahead of the counter if
    /// that moment has already passed (a late sample is then not followed by
    /// a 512-second wait for the counter to come round).
    fn arm(&mut self, from: u32) {
        let now = self.rtc.get_counter() & COUNTER_MASK;
        let mut next = from.wrapping_add(SAMPLE_PERIOD_TICKS) & COUNTER_MASK;
        let ahead = next.wrapping_sub(now) & COUNTER_MASK;
        if !(MIN_TICKS_AHEAD..=SAMPLE_PERIOD_TICKS).contains(&ahead) {
            next = now.wrapping_add(MIN_TICKS_AHEAD) & COUNTER_MASK;
        }
        self.next_compare = next;
        let _ = self.rtc.set_compare(RtcCompareReg::Compare0, next);
    }

    /// True once per sample period; re-arms the compare for the next one.
    pub fn sample_due(&mut self) -> bool {
        if !self.rtc.is_event_triggered(RtcInterrupt::Compare0) {
            return false;
        }
        self.rtc.reset_event(RtcInterrupt::Compare0);
        NVIC::unpend(Interrupt::RTC1);
        self.arm(self.next_compare);
        true
    }
}
