//! The bytes of a recorded run before the CSV reader sees them: a logger's
//! preamble skipped, and blank-separated columns turned into tab-separated
//! ones. Both stream: nothing holds more than a buffer of the file.
use std::cell::Cell;
use std::io::{self, BufRead, Read};
use std::rc::Rc;

/// Reads past the first `lines` lines of `input`, in bounded steps (a
/// preamble line may be of any length). Returns the lines and bytes skipped;
/// fewer lines than asked means the input ended first.
pub(super) fn skip_lines<R: BufRead>(input: &mut R, lines: u32) -> io::Result<(u32, u64)> {
    let (mut skipped, mut bytes) = (0u32, 0u64);
    while skipped < lines {
        let buf = input.fill_buf()?;
        if buf.is_empty() {
            break;
        }
        let n = match buf.iter().position(|&b| b == b'\n') {
            Some(i) => {
                skipped += 1;
                i + 1
            }
            None => buf.len(),
        };
        input.consume(n);
        bytes += n as u64;
    }
    Ok((skipped, bytes))
}

/// Columns separated by runs of blanks (spaces or tabs), as loggers write
/// aligned tables, as tab-separated text: each run between two fields one
/// tab, blanks at the start and end of a line dropped, blanks inside double
/// quotes kept. Line breaks stay where they are, so line numbers hold.
/// `consumed` counts the bytes read from `inner`, for progress.
pub(super) struct Blanks<R> {
    inner: R,
    buf: Box<[u8]>,
    start: usize,
    end: usize,
    in_quotes: bool,
    /// A run of blanks after a field, not yet known to end the line.
    pending: bool,
    line_start: bool,
    consumed: Rc<Cell<u64>>,
}

impl<R: Read> Blanks<R> {
    pub(super) fn new(inner: R, consumed: Rc<Cell<u64>>) -> Self {
        Self {
            inner,
            buf: vec![0; 1 << 16].into_boxed_slice(),
            start: 0,
            end: 0,
            in_quotes: false,
            pending: false,
            line_start: true,
            consumed,
        }
    }
}

impl<R: Read> Read for Blanks<R> {
    fn read(&mut self, out: &mut [u8]) -> io::Result<usize> {
        let mut n = 0;
        // Two bytes of room: a pending tab and the byte after it.
        while n + 2 <= out.len() {
            if self.start == self.end {
                if n > 0 {
                    break;
                }
                let got = self.inner.read(&mut self.buf)?;
                if got == 0 {
                    break;
                }
                self.consumed.set(self.consumed.get() + got as u64);
                (self.start, self.end) = (0, got);
            }
            let Some(&b) = self.buf.get(self.start) else {
                break;
            };
            self.start += 1;
            if self.in_quotes {
                self.in_quotes = b != b'"';
                out[n] = b;
                n += 1;
                continue;
            }
            match b {
                b' ' | b'\t' => self.pending = !self.line_start,
                b'\n' | b'\r' => {
                    self.pending = false;
                    self.line_start = true;
                    out[n] = b;
                    n += 1;
                }
                _ => {
                    if self.pending {
                        out[n] = b'\t';
                        n += 1;
                        self.pending = false;
                    }
                    self.line_start = false;
                    self.in_quotes = b == b'"';
                    out[n] = b;
                    n += 1;
                }
            }
        }
        Ok(n)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn squeeze(text: &str) -> String {
        let mut out = String::new();
        Blanks::new(text.as_bytes(), Rc::default())
            .read_to_string(&mut out)
            .unwrap();
        out
    }

    #[test]
    fn blank_runs_become_one_tab() {
        assert_eq!(
            squeeze("  a   b\t\t c  \n1 2  3\r\n"),
            "a\tb\tc\n1\t2\t3\r\n"
        );
        assert_eq!(
            squeeze("\"TC1 Kopf\"  \"a  b\" x\n"),
            "\"TC1 Kopf\"\t\"a  b\"\tx\n"
        );
        assert_eq!(squeeze(""), "");
        assert_eq!(squeeze("   \n\n x"), "\n\nx");
    }

    #[test]
    fn the_preamble_is_skipped_line_by_line() {
        let mut input =
            io::BufReader::with_capacity(4, "logger X\nstart 08:00\na,b\n1,2\n".as_bytes());
        assert_eq!(skip_lines(&mut input, 2).unwrap(), (2, 21));
        let mut rest = String::new();
        input.read_to_string(&mut rest).unwrap();
        assert_eq!(rest, "a,b\n1,2\n");
        let mut short = "one line".as_bytes();
        assert_eq!(skip_lines(&mut short, 3).unwrap(), (0, 8));
    }
}
