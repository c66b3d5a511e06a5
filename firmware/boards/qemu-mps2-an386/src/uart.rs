//! UART0 of the MPS2 board: the CMSDK APB UART at 0x4000_4000.
//!
//! Registers (offsets): DATA 0x0, STATE 0x4 (bit 0 TX full, bit 1 RX full),
//! CTRL 0x8 (bit 0 TX enable, bit 1 RX enable), BAUDDIV 0x10. QEMU drops TX
//! bytes unless TX is enabled.

use core::future::poll_fn;
use core::ptr::{read_volatile, write_volatile};
use core::task::Poll;

use embassy_sync::waitqueue::AtomicWaker;

/// Woken when a byte may have arrived. This board leaves the UART's own
/// receive interrupt unwired (no device vector table); the clock's tick wakes
/// it instead, and QEMU holds input back while the one-byte buffer is full,
/// so nothing is lost.
pub static RECEIVED: AtomicWaker = AtomicWaker::new();

const BASE: usize = 0x4000_4000;
const DATA: *mut u32 = BASE as *mut u32;
const STATE: *mut u32 = (BASE + 0x4) as *mut u32;
const CTRL: *mut u32 = (BASE + 0x8) as *mut u32;
const BAUDDIV: *mut u32 = (BASE + 0x10) as *mut u32;

const STATE_TX_FULL: u32 = 1 << 0;
const STATE_RX_FULL: u32 = 1 << 1;
const CTRL_TX_ENABLE: u32 = 1 << 0;
const CTRL_RX_ENABLE: u32 = 1 << 1;

/// The board's system clock.
pub const SYSTEM_CLOCK_HZ: u32 = 25_000_000;

/// UART0, owned once.
pub struct Uart0 {
    _private: (),
}

impl Uart0 {
    /// Enables UART0 at `baud` for transmit and receive.
    pub fn new(baud: u32) -> Self {
        // SAFETY: fixed, always-mapped peripheral registers of this board;
        // this is the only code that touches them and it runs single-threaded.
        unsafe {
            write_volatile(BAUDDIV, SYSTEM_CLOCK_HZ / baud.max(1));
            write_volatile(CTRL, CTRL_TX_ENABLE | CTRL_RX_ENABLE);
            // One read of DATA: harmless on hardware, and it tells QEMU's
            // character backend to deliver input that arrived while RX was
            // still disabled (enabling RX alone does not).
            let _ = read_volatile(DATA);
        }
        Uart0 { _private: () }
    }

    /// A received byte, if one is waiting.
    pub fn read_byte(&mut self) -> Option<u8> {
        // SAFETY: as in `new`.
        unsafe {
            if read_volatile(STATE) & STATE_RX_FULL != 0 {
                Some((read_volatile(DATA) & 0xFF) as u8)
            } else {
                None
            }
        }
    }

    /// The next received byte, waiting (asleep) until one comes.
    pub async fn received(&mut self) -> u8 {
        poll_fn(|cx| {
            // Registered before looking, so a tick in between is not missed.
            RECEIVED.register(cx.waker());
            self.read_byte().map_or(Poll::Pending, Poll::Ready)
        })
        .await
    }

    fn write_byte(&mut self, byte: u8) {
        // SAFETY: as in `new`.
        unsafe {
            while read_volatile(STATE) & STATE_TX_FULL != 0 {}
            write_volatile(DATA, u32::from(byte));
        }
    }
}

impl embedded_io::ErrorType for Uart0 {
    type Error = core::convert::Infallible;
}

impl embedded_io::Write for Uart0 {
    fn write(&mut self, buf: &[u8]) -> Result<usize, Self::Error> {
        for &b in buf {
            self.write_byte(b);
        }
        Ok(buf.len())
    }

    fn flush(&mut self) -> Result<(), Self::Error> {
        Ok(())
    }
}
