//! Diagnostic lines on semihosting stderr without `core::fmt`: a line is
//! built from string pieces and unsigned integers in a fixed buffer and
//! written with one semihosting call.
//!
//! Where it sits: beside the UART, for what the scripts read from QEMU's
//! stderr (`stack.high_water_bytes=`, `run.*`, the boot line, failures and
//! panics). `heprintln!` would link the formatting machinery (about 3 KB of
//! flash with its call sites) into an image that must fit 64 KiB; the
//! `measure` build, which is never flashed anywhere, still uses it.
//!
//! ```text
//! Line::new().str("run.t_ms=").u32(t_ms).emit()  --SYS_WRITE-->  QEMU stderr: "run.t_ms=600000\n"
//! ```

use cortex_m_semihosting::hio;

/// Bytes a line holds, newline included; a longer line is cut short.
const LINE_CAP: usize = 128;

/// One line of diagnostics being built.
pub struct Line {
    buf: [u8; LINE_CAP],
    len: usize,
}

impl Line {
    /// An empty line.
    pub const fn new() -> Self {
        Line {
            buf: [0; LINE_CAP],
            len: 0,
        }
    }

    /// Appends `s`, as much of it as fits before the newline's place.
    pub fn str(&mut self, s: &str) -> &mut Self {
        self.bytes(s.as_bytes());
        self
    }

    /// Appends `v` in decimal.
    pub fn u32(&mut self, v: u32) -> &mut Self {
        self.u64(u64::from(v))
    }

    /// Appends `v` in decimal, by long division of its four 16-bit limbs
    /// in 32-bit arithmetic: no 64-bit division routine in the image.
    #[inline(never)]
    pub fn u64(&mut self, v: u64) -> &mut Self {
        let mut limbs = [
            (v >> 48) as u32,
            (v >> 32) as u32 & 0xFFFF,
            (v >> 16) as u32 & 0xFFFF,
            v as u32 & 0xFFFF,
        ];
        // u64::MAX has 20 digits.
        let mut digits = [0u8; 20];
        let mut start = digits.len();
        for slot in digits.iter_mut().rev() {
            let mut rem = 0u32;
            for limb in limbs.iter_mut() {
                let cur = (rem << 16) | *limb;
                *limb = cur / 10;
                rem = cur % 10;
            }
            *slot = b'0' + rem as u8;
            start -= 1;
            if limbs.iter().all(|l| *l == 0) {
                break;
            }
        }
        if let Some(d) = digits.get(start..) {
            self.bytes(d);
        }
        self
    }

    /// Appends `v` in decimal (a `usize` is 32 bits here).
    pub fn usize(&mut self, v: usize) -> &mut Self {
        self.u64(v as u64)
    }

    /// Appends `true` or `false`.
    pub fn bool(&mut self, v: bool) -> &mut Self {
        self.str(if v { "true" } else { "false" })
    }

    /// Ends the line with a newline and writes it to semihosting stderr;
    /// nothing happens if the host has no stderr to give.
    #[inline(never)]
    pub fn emit(&mut self) {
        if let Some(slot) = self.buf.get_mut(self.len) {
            *slot = b'\n';
            self.len += 1;
        }
        if let (Ok(mut stderr), Some(line)) = (hio::hstderr(), self.buf.get(..self.len)) {
            // A failed write has nowhere better to be reported.
            let _ = stderr.write_all(line);
        }
    }

    // Out of line, as are `u64` and `emit`: a line is a row of calls, not
    // of inlined copies.
    #[inline(never)]
    fn bytes(&mut self, b: &[u8]) {
        // One place is kept for the newline.
        let end = LINE_CAP - 1;
        if let Some(room) = self.buf.get_mut(self.len..end) {
            let n = room.len().min(b.len());
            if let (Some(dst), Some(src)) = (room.get_mut(..n), b.get(..n)) {
                dst.copy_from_slice(src);
                self.len += n;
            }
        }
    }
}
