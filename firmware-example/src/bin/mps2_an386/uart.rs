//! UART0 of the MPS2 board: an Arm CMSDK APB UART at `0x4000_4000`, as an
//! `embedded_io::Write` for the App's wire frames.
//!
//! Where it sits: the far end of `App::send`; QEMU's `-serial` takes the
//! bytes (a file, stdio or a TCP socket).
//!
//! Registers (CMSDK APB UART, Arm DDI 0479): DATA +0x00, STATE +0x04 (bit 0
//! TX buffer full), CTRL +0x08 (bit 0 TX enable), BAUDDIV +0x10 (≥ 16).
//! Without TX enable QEMU never drains the transmit buffer and a writer
//! polling STATE would wait forever.
#![allow(unsafe_code)]

use core::convert::Infallible;

/// UART0's base address on mps2-an386.
const UART0_BASE: usize = 0x4000_4000;
const DATA: usize = 0x00;
const STATE: usize = 0x04;
const CTRL: usize = 0x08;
const BAUDDIV: usize = 0x10;
const STATE_TX_FULL: u32 = 1 << 0;
const CTRL_TX_ENABLE: u32 = 1 << 0;

/// The smallest divider the CMSDK UART accepts.
const BAUDDIV_MIN: u32 = 16;

/// UART0, transmit only. Own it once: it is the board's only UART0.
#[derive(Debug)]
pub struct Uart0 {
    _private: (),
}

impl Uart0 {
    /// Programs the divider (`f_PCLK / baud`, at least 16: 217 is
    /// 115,200 baud at 25 MHz; QEMU ignores the rate) and enables the
    /// transmitter.
    pub fn new(bauddiv: u32) -> Self {
        let uart = Uart0 { _private: () };
        uart.write_reg(BAUDDIV, bauddiv.max(BAUDDIV_MIN));
        uart.write_reg(CTRL, CTRL_TX_ENABLE);
        uart
    }

    fn write_reg(&self, offset: usize, value: u32) {
        // SAFETY: UART0_BASE + offset is one of the CMSDK UART's 32-bit
        // registers on this board (a device mapping, always present);
        // the write is volatile and aligned, and `Uart0` is the only user.
        unsafe { core::ptr::write_volatile((UART0_BASE + offset) as *mut u32, value) }
    }

    fn read_reg(&self, offset: usize) -> u32 {
        // SAFETY: as in `write_reg`; reading STATE has no side effect.
        unsafe { core::ptr::read_volatile((UART0_BASE + offset) as *const u32) }
    }

    fn write_byte(&mut self, byte: u8) {
        while self.read_reg(STATE) & STATE_TX_FULL != 0 {
            core::hint::spin_loop();
        }
        self.write_reg(DATA, u32::from(byte));
    }
}

impl embedded_io::ErrorType for Uart0 {
    type Error = Infallible;
}

impl embedded_io::Write for Uart0 {
    fn write(&mut self, buf: &[u8]) -> Result<usize, Self::Error> {
        for &b in buf {
            self.write_byte(b);
        }
        Ok(buf.len())
    }

    fn flush(&mut self) -> Result<(), Self::Error> {
        // The CMSDK UART has no TX-empty flag beyond "not full"; waiting for
        // that is as far as software can see.
        while self.read_reg(STATE) & STATE_TX_FULL != 0 {
            core::hint::spin_loop();
        }
        Ok(())
    }
}
