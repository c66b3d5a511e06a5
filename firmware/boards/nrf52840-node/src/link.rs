//! The serial link to the host on UARTE0 (the nRF52840 DK routes P0.06 and
//! P0.08 to its USB virtual COM port), 115200 baud, 8N1.
//!
//! Sending is the HAL's blocking EasyDMA writer. Receiving runs in the UART's
//! interrupt: the UARTE keeps only a few bytes in its FIFO, and a frame to the
//! host takes up to 17 ms to send, so bytes are moved into a queue as they
//! arrive, whatever the main loop is doing. The interrupt also wakes the core
//! from `WFE`.

use core::cell::RefCell;

use cortex_m::interrupt::{free, Mutex};
use embedded_io::{Read, ReadReady};
use heapless::Deque;
use nrf52840_hal::gpio::{Floating, Input, Output, Pin, PushPull};
use nrf52840_hal::pac::{interrupt, Interrupt, NVIC, UARTE0};
use nrf52840_hal::uarte::{Baudrate, Parity, Pins, Uarte, UarteRx, UarteTx};

/// Received bytes kept until the main loop takes them: two of the longest
/// command frames.
pub const RX_QUEUE_LEN: usize = 256;
/// Bytes the transmitter copies per EasyDMA transfer.
const TX_CHUNK_LEN: usize = 64;

/// The transmit half, written by the node.
pub type Transmitter = UarteTx<UARTE0>;

struct Receiver {
    rx: UarteRx<UARTE0>,
    queue: Deque<u8, RX_QUEUE_LEN>,
    overflowed: u32,
}

impl Receiver {
    /// Takes a finished byte, if any, and starts the next one-byte transfer.
    fn service(&mut self) {
        while let Ok(true) = self.rx.read_ready() {
            let mut byte = [0u8; 1];
            if let Ok(1) = self.rx.read(&mut byte) {
                if self.queue.push_back(byte[0]).is_err() {
                    self.overflowed = self.overflowed.saturating_add(1);
                }
            }
        }
    }
}

static RECEIVER: Mutex<RefCell<Option<Receiver>>> = Mutex::new(RefCell::new(None));

#[interrupt]
fn UARTE0_UART0() {
    free(|cs| {
        if let Some(receiver) = RECEIVER.borrow(cs).borrow_mut().as_mut() {
            receiver.service();
        }
    });
}

/// Starts UARTE0 on the given pins; the receive side starts listening at once.
/// None if called twice.
pub fn start(
    uarte0: UARTE0,
    txd: Pin<Output<PushPull>>,
    rxd: Pin<Input<Floating>>,
) -> Option<Transmitter> {
    // Each received byte ends a one-byte transfer: that event interrupts.
    uarte0.intenset.write(|w| w.endrx().set());
    let pins = Pins {
        txd,
        rxd,
        cts: None,
        rts: None,
    };
    let uarte = Uarte::new(uarte0, pins, Parity::EXCLUDED, Baudrate::BAUD115200);
    let tx_buf = cortex_m::singleton!(: [u8; TX_CHUNK_LEN] = [0; TX_CHUNK_LEN])?;
    let rx_buf = cortex_m::singleton!(: [u8; 1] = [0; 1])?;
    let (tx, rx) = uarte.split(tx_buf, rx_buf).ok()?;
    let mut receiver = Receiver {
        rx,
        queue: Deque::new(),
        overflowed: 0,
    };
    receiver.service();
    free(|cs| RECEIVER.borrow(cs).replace(Some(receiver)));
    // SAFETY: the handler only takes the `RECEIVER` mutex, which is set up
    // above; no critical section in this program relies on this interrupt
    // being masked.
    unsafe { NVIC::unmask(Interrupt::UARTE0_UART0) };
    Some(tx)
}

/// The oldest received byte, if any.
pub fn take() -> Option<u8> {
    free(|cs| {
        RECEIVER
            .borrow(cs)
            .borrow_mut()
            .as_mut()
            .and_then(|receiver| receiver.queue.pop_front())
    })
}

/// Bytes lost because the queue was full (the host's command then times out
/// and says so).
#[cfg_attr(not(feature = "defmt"), allow(dead_code))]
pub fn overflowed() -> u32 {
    free(|cs| {
        RECEIVER
            .borrow(cs)
            .borrow()
            .as_ref()
            .map_or(0, |receiver| receiver.overflowed)
    })
}
