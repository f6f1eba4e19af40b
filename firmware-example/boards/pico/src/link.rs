//! The host link's receive side: whatever the UART interrupt has buffered,
//! taken without waiting.
//!
//! Where it sits: between UART0's receive ring buffer and [`App::receive`].
//!
//! ```text
//! GP1 (RX) --UART0 IRQ--> BufferedUartRx ring buffer --Rx::drain--> App::receive(bytes, t_ms)
//! ```
//!
//! embassy-rp's blocking `Read` on a `BufferedUartRx` spins until a byte
//! arrives, which would stall sampling on a quiet link. Its async `read`
//! instead takes what is buffered, reports a line error, or returns
//! `Pending`; polled once with a no-op waker it is exactly the non-blocking
//! read the App needs. The receive interrupt keeps filling the buffer
//! while a tick runs, and a line error (noise, a break when the adapter is
//! unplugged) is cleared here, which also re-enables the
//! receive interrupt that the driver masks after an error.
//!
//! [`App::receive`]: heatbound_firmware_example::app::App::receive

use core::pin::pin;
use core::task::{Context, Poll, Waker};

use embassy_rp::uart::BufferedUartRx;

/// Bytes taken from the ring buffer per [`App::receive`] call.
///
/// [`App::receive`]: heatbound_firmware_example::app::App::receive
const CHUNK: usize = 64;

/// Reads per [`Rx::drain`] call at most: enough to empty the ring buffer
/// (`RX_BUFFER_LEN` in main.rs) with room for a few line errors, and a bound
/// on the time one call can take however the line misbehaves.
const MAX_READS: usize = 16;

/// The link's receive side.
pub struct Rx {
    rx: BufferedUartRx,
}

impl Rx {
    /// Receives through `rx`.
    pub fn new(rx: BufferedUartRx) -> Self {
        Rx { rx }
    }

    /// Hands the bytes buffered so far to `sink`, in chunks; returns at
    /// once when there are none. A line error (overrun, break, parity,
    /// framing) is cleared and skipped: the bytes around it are lost, and
    /// the command they belonged to fails its check on the App's side
    /// (with the `defmt` feature, embassy-rp logs the error).
    pub fn drain(&mut self, mut sink: impl FnMut(&[u8])) {
        let mut buf = [0u8; CHUNK];
        let mut cx = Context::from_waker(Waker::noop());
        for _ in 0..MAX_READS {
            let polled = {
                let read = pin!(embedded_io_async::Read::read(&mut self.rx, &mut buf));
                read.poll(&mut cx)
            };
            match polled {
                Poll::Ready(Ok(n)) if n > 0 => sink(buf.get(..n).unwrap_or(&[])),
                Poll::Ready(Ok(_)) | Poll::Pending => return,
                Poll::Ready(Err(_)) => {}
            }
        }
    }
}
