//! UART0 of the MPS2 board: an Arm CMSDK APB UART at `0x4000_4000`, split
//! into a transmitter ([`Uart0Tx`], an `embedded_io::Write` for the App's wire
//! frames) and a receiver ([`Uart0Rx`], polled without waiting for the
//! host's command bytes).
//!
//! Where it sits: the far end of `App::send` and the near end of
//! `App::receive`; QEMU's `-serial` takes and gives the bytes (a file,
//! stdio or a TCP socket).
//!
//! Registers (CMSDK APB UART, Arm DDI 0479): DATA +0x00 (write: transmit;
//! read: the received byte, which empties the receive buffer), STATE +0x04
//! (bit 0 TX buffer full, bit 1 RX buffer full), CTRL +0x08 (bit 0 TX
//! enable, bit 1 RX enable), BAUDDIV +0x10 (≥ 16). Without TX enable QEMU
//! never drains the transmit buffer and a writer polling STATE would wait
//! forever; without RX enable QEMU hands the UART no input at all.
//!
//! The UART has no FIFO, only a one-byte buffer each way. QEMU holds back
//! further input (in its chardev, or the TCP connection's buffers) until
//! the byte is read, so nothing is lost while the firmware is busy; the
//! receiver only has to be polled often enough for the latency it wants.
#![allow(unsafe_code)]

use core::convert::Infallible;

/// UART0's base address on mps2-an386.
const UART0_BASE: usize = 0x4000_4000;
const DATA: usize = 0x00;
const STATE: usize = 0x04;
const CTRL: usize = 0x08;
const BAUDDIV: usize = 0x10;
const STATE_TX_FULL: u32 = 1 << 0;
const STATE_RX_FULL: u32 = 1 << 1;
const CTRL_TX_ENABLE: u32 = 1 << 0;
const CTRL_RX_ENABLE: u32 = 1 << 1;

/// The smallest divider the CMSDK UART accepts.
const BAUDDIV_MIN: u32 = 16;

/// Programs the divider (`f_PCLK / baud`, at least 16: 217 is 115,200 baud
/// at 25 MHz; QEMU ignores the rate), enables the transmitter and the
/// receiver, and hands out the two halves; `None` after the first call, so
/// each half is the only user of its direction.
pub fn uart0(bauddiv: u32) -> Option<(Uart0Tx, Uart0Rx)> {
    // A take-once flag that needs no atomic swap (absent on Armv6-M, which
    // clippy builds this binary for too).
    cortex_m::singleton!(: () = ())?;
    write_reg(BAUDDIV, bauddiv.max(BAUDDIV_MIN));
    write_reg(CTRL, CTRL_TX_ENABLE | CTRL_RX_ENABLE);
    Some((Uart0Tx { _private: () }, Uart0Rx { _private: () }))
}

fn write_reg(offset: usize, value: u32) {
    // SAFETY: UART0_BASE + offset is one of the CMSDK UART's 32-bit
    // registers on this board (a device mapping, always present); the write
    // is volatile and aligned. Writes go to BAUDDIV and CTRL once, from
    // `uart0` before either half exists, and to DATA from `Uart0Tx` only
    // (writing DATA transmits; it does not touch the receive buffer).
    unsafe { core::ptr::write_volatile((UART0_BASE + offset) as *mut u32, value) }
}

fn read_reg(offset: usize) -> u32 {
    // SAFETY: as in `write_reg`, volatile and aligned. Reading STATE has no
    // side effect; reading DATA empties the receive buffer, and only
    // `Uart0Rx` reads DATA.
    unsafe { core::ptr::read_volatile((UART0_BASE + offset) as *const u32) }
}

/// UART0's transmitter.
#[derive(Debug)]
pub struct Uart0Tx {
    _private: (),
}

impl Uart0Tx {
    fn write_byte(&mut self, byte: u8) {
        while read_reg(STATE) & STATE_TX_FULL != 0 {
            core::hint::spin_loop();
        }
        write_reg(DATA, u32::from(byte));
    }
}

impl embedded_io::ErrorType for Uart0Tx {
    type Error = Infallible;
}

impl embedded_io::Write for Uart0Tx {
    fn write(&mut self, buf: &[u8]) -> Result<usize, Self::Error> {
        for &b in buf {
            self.write_byte(b);
        }
        Ok(buf.len())
    }

    fn flush(&mut self) -> Result<(), Self::Error> {
        // The CMSDK UART has no TX-empty flag beyond "not full"; waiting for
        // that is as far as software can see.
        while read_reg(STATE) & STATE_TX_FULL != 0 {
            core::hint::spin_loop();
        }
        Ok(())
    }
}

/// UART0's receiver.
#[derive(Debug)]
pub struct Uart0Rx {
    _private: (),
}

impl Uart0Rx {
    /// Moves the bytes received so far into `buf`, never waiting for one:
    /// stops at the first poll that finds the receive buffer empty, or when
    /// `buf` is full, so one call costs at most `buf.len()` bytes' worth of
    /// polling whatever the host sends. Returns the bytes written.
    pub fn read_available(&mut self, buf: &mut [u8]) -> usize {
        let mut n = 0;
        for slot in buf.iter_mut() {
            if read_reg(STATE) & STATE_RX_FULL == 0 {
                break;
            }
            // DATA's low byte is the received byte; the upper bits read 0.
            *slot = (read_reg(DATA) & 0xFF) as u8;
            n += 1;
        }
        n
    }
}
