//! Stack high-water mark: the window below the stack pointer is filled with a
//! pattern at boot, and at the end the deepest word no longer holding it
//! tells how much stack the run used, counted from the top of the stack
//! (`_stack_start` of cortex-m-rt), so `main`'s own frame, which holds the
//! `Node`, is included.

use core::ptr::{read_volatile, write_volatile};

/// Bytes below the top of the stack that are painted and watched.
pub const WINDOW: usize = 32 * 1024;
const PATTERN: u32 = 0xA5C3_5A3C;
/// Left alone under the current frame while painting.
const MARGIN: usize = 256;

extern "C" {
    /// The initial stack pointer, from cortex-m-rt's linker script.
    static _stack_start: u32;
}

/// The top of the stack and the painted range below it.
pub struct StackWatch {
    top: usize,
    bottom: usize,
}

impl StackWatch {
    /// Paints the window. Call first thing in `main`.
    pub fn paint() -> Self {
        let top = core::ptr::addr_of!(_stack_start) as usize;
        let sp = cortex_m::register::msp::read() as usize;
        let bottom = top.saturating_sub(WINDOW);
        let mut at = bottom;
        while at < sp.saturating_sub(MARGIN) {
            // SAFETY: the window lies in the 4 MiB of RAM below the initial
            // stack pointer (memory.x), above `.bss` with room to spare, and
            // below the live frames (MARGIN); nothing else uses it yet.
            unsafe { write_volatile(at as *mut u32, PATTERN) };
            at += 4;
        }
        StackWatch { top, bottom }
    }

    /// Bytes of stack used so far, counted from the boot stack pointer.
    pub fn used(&self) -> usize {
        let mut at = self.bottom;
        // SAFETY: reads of the window painted in `paint`.
        while at < self.top && unsafe { read_volatile(at as *const u32) } == PATTERN {
            at += 4;
        }
        self.top - at
    }
}
