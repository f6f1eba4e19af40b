//! The streaming decoder: resynchronises on delimiters, counts every loss.

use super::codec::*;
use super::error::*;
use super::frames::*;

/// Losses and deliveries of a [`Decoder`], by kind.
///
/// Every `0x00` delimiter the decoder sees ends exactly one of: an accepted
/// frame, a loss (`crc_errors`, `overlong`, `malformed`, `unknown_version`)
/// or an empty frame, so `frames + losses() + empty_frames` equals the
/// number of delimiters fed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DecoderStats {
    /// Frames accepted.
    pub frames: u64,
    /// Frames with a CRC mismatch.
    pub crc_errors: u64,
    /// Frames longer than the decoder's capacity.
    pub overlong: u64,
    /// Frames that failed COBS or postcard decoding, named an unknown kind,
    /// carried a non-finite integral or undefined bits.
    pub malformed: u64,
    /// Frames of another protocol version.
    pub unknown_version: u64,
    /// Non-delimiter bytes that did not end up in an accepted frame.
    pub bytes_discarded: u64,
    /// Delimiters with no bytes before them (consecutive `0x00`): not a loss,
    /// a sender may use them as idle fill or to resynchronise.
    pub empty_frames: u64,
}

impl DecoderStats {
    /// Frames lost, of every kind.
    pub const fn losses(&self) -> u64 {
        self.crc_errors + self.overlong + self.malformed + self.unknown_version
    }
}

/// A streaming decoder with a fixed buffer of `CAP` bytes (use
/// `MAX_FRAME_LEN`): accepts the stream in any chunking, resynchronises at
/// the next delimiter after garbage, an overlong frame or a bad CRC, and
/// counts every loss in [`DecoderStats`]. Never allocates, never panics.
///
/// A decoder started in the middle of a frame reports that frame's tail as a
/// loss.
///
/// ```
/// use heatbound::wire::{self, Decoder, Frame, Summary};
/// let mut stream = [0u8; 3 * wire::MAX_FRAME_LEN];
/// let mut len = 0;
/// for seq in 0..3 {
///     let frame = Frame::Summary(Summary { seq, ..Summary::default() });
///     len += wire::encode(&frame, &mut stream[len..]).unwrap();
/// }
/// stream[10] ^= 0xFF; // corrupt the first frame
///
/// let mut decoder = Decoder::<{ wire::MAX_FRAME_LEN }>::new();
/// let mut seqs = Vec::new();
/// for chunk in stream[..len].chunks(7) {
///     decoder.feed(chunk, |r| if let Ok(Frame::Summary(s)) = r { seqs.push(s.seq) });
/// }
/// assert_eq!(seqs, [1, 2]);
/// assert_eq!(decoder.stats().frames, 2);
/// assert_eq!(decoder.stats().losses(), 1);
/// ```
#[derive(Clone, Debug)]
pub struct Decoder<const CAP: usize> {
    buf: [u8; CAP],
    len: usize,
    overflowed: bool,
    stats: DecoderStats,
}

impl<const CAP: usize> Default for Decoder<CAP> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const CAP: usize> Decoder<CAP> {
    /// An empty decoder.
    pub const fn new() -> Self {
        Self {
            buf: [0; CAP],
            len: 0,
            overflowed: false,
            stats: DecoderStats {
                frames: 0,
                crc_errors: 0,
                overlong: 0,
                malformed: 0,
                unknown_version: 0,
                bytes_discarded: 0,
                empty_frames: 0,
            },
        }
    }

    /// Feeds `bytes`, calling `on_frame` once per frame or loss completed by
    /// a delimiter in them.
    pub fn feed(&mut self, bytes: &[u8], mut on_frame: impl FnMut(Result<Frame, FrameError>)) {
        for &b in bytes {
            if let Some(r) = self.push_byte(b) {
                on_frame(r);
            }
        }
    }

    /// Feeds one byte; returns the frame or loss it completes, if any.
    pub fn push_byte(&mut self, byte: u8) -> Option<Result<Frame, FrameError>> {
        if byte != 0 {
            if self.overflowed {
                self.stats.bytes_discarded += 1;
            } else if let Some(slot) = self.buf.get_mut(self.len) {
                *slot = byte;
                self.len += 1;
            } else {
                self.overflowed = true;
                self.stats.bytes_discarded += self.len as u64 + 1;
                self.len = 0;
            }
            return None;
        }
        let len = core::mem::take(&mut self.len);
        if core::mem::take(&mut self.overflowed) {
            self.stats.overlong += 1;
            return Some(Err(FrameError::Overlong));
        }
        if len == 0 {
            self.stats.empty_frames += 1;
            return None;
        }
        let result = match self.buf.get_mut(..len) {
            Some(frame) => decode_in_place(frame),
            None => Err(FrameError::Overlong),
        };
        match &result {
            Ok(_) => self.stats.frames += 1,
            Err(e) => {
                self.stats.bytes_discarded += len as u64;
                match e {
                    FrameError::Overlong => self.stats.overlong += 1,
                    FrameError::Crc => self.stats.crc_errors += 1,
                    FrameError::UnknownVersion(_) => self.stats.unknown_version += 1,
                    FrameError::Malformed(_) => self.stats.malformed += 1,
                }
            }
        }
        Some(result)
    }

    /// The counters so far.
    pub const fn stats(&self) -> &DecoderStats {
        &self.stats
    }

    /// Bytes of an unfinished frame held now (none once the frame has
    /// overflowed the buffer: see [`Decoder::has_unfinished`]).
    pub const fn pending(&self) -> usize {
        self.len
    }

    /// Whether bytes have arrived since the last delimiter, kept or
    /// discarded as overlong.
    pub const fn has_unfinished(&self) -> bool {
        self.len > 0 || self.overflowed
    }

    /// The stream ended, or the link dropped: ends an unfinished frame as a
    /// delimiter would, so that it is counted (an overflowed tail as
    /// `overlong`), and leaves the decoder ready for a new stream. Returns
    /// what a delimiter would have, or `None` when nothing was unfinished.
    pub fn end_stream(&mut self) -> Option<Result<Frame, FrameError>> {
        if self.has_unfinished() {
            self.push_byte(0)
        } else {
            None
        }
    }
}
