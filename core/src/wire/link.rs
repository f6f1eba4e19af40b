//! Link tracking: sequence gaps, duplicates and restarts, seen from the host.

use super::frames::*;

// ---------------------------------------------------------------------------
// Link tracking
// ---------------------------------------------------------------------------

/// What one frame told a [`LinkTracker`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Link {
    /// A Hello.
    Hello,
    /// The first summary seen.
    First,
    /// The summary after the previous one.
    InOrder,
    /// `missing` summaries were lost before this one.
    Gap {
        /// How many.
        missing: u16,
    },
    /// The same sequence number again.
    Duplicate,
    /// The sequence went back: the controller restarted.
    Restart,
    /// An event frame (sequence is not tracked on events).
    Event,
    /// A reply to a command (not sequenced either).
    Reply,
}

impl core::fmt::Display for Link {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Link::Hello => f.write_str("hello"),
            Link::First => f.write_str("first summary"),
            Link::InOrder => f.write_str("in order"),
            Link::Gap { missing } => write!(f, "{missing} summaries missing"),
            Link::Duplicate => f.write_str("duplicate"),
            Link::Restart => f.write_str("restart"),
            Link::Event => f.write_str("event"),
            Link::Reply => f.write_str("reply"),
        }
    }
}

/// Counters of a [`LinkTracker`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LinkStats {
    /// Summaries seen.
    pub summaries: u64,
    /// Summaries missing from sequence gaps.
    pub missing_summaries: u64,
    /// Summaries that repeated the previous sequence number.
    pub duplicates: u64,
    /// Times the sequence went back (a controller restart).
    pub restarts: u64,
    /// Hellos seen.
    pub hellos: u64,
}

/// Follows the summary sequence numbers: gaps, duplicates and restarts.
///
/// With `d = seq − previous (mod 2^16)`: `d = 1` is in order; `2 ≤ d < 2^15`
/// is a gap of `d − 1` missing summaries; `d = 0` is a duplicate, or a
/// restart right after a Hello; `d ≥ 2^15` means the sequence went back, a
/// restart (normally announced by a Hello, counted even if the Hello was
/// lost). After a restart the new sequence is the baseline.
///
/// ```
/// use heatbound::wire::{Frame, Link, LinkTracker, Summary};
/// let s = |seq| Frame::Summary(Summary { seq, ..Summary::default() });
/// let mut link = LinkTracker::new();
/// assert_eq!(link.observe(&s(65534)), Link::First);
/// assert_eq!(link.observe(&s(1)), Link::Gap { missing: 2 }); // 65535 and 0 lost
/// assert_eq!(link.observe(&s(1)), Link::Duplicate);
/// assert_eq!(link.observe(&s(0)), Link::Restart);
/// assert_eq!(link.stats().missing_summaries, 2);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LinkTracker {
    last_seq: Option<u16>,
    after_hello: bool,
    stats: LinkStats,
}

impl LinkTracker {
    /// A tracker that has seen nothing.
    pub const fn new() -> Self {
        Self {
            last_seq: None,
            after_hello: false,
            stats: LinkStats {
                summaries: 0,
                missing_summaries: 0,
                duplicates: 0,
                restarts: 0,
                hellos: 0,
            },
        }
    }

    /// Takes note of `frame`.
    pub fn observe(&mut self, frame: &Frame) -> Link {
        let seq = match frame {
            Frame::Hello(_) => {
                self.stats.hellos += 1;
                self.after_hello = true;
                return Link::Hello;
            }
            Frame::Event(_) => return Link::Event,
            Frame::Reply(_) => return Link::Reply,
            Frame::Summary(s) => s.seq,
        };
        self.stats.summaries += 1;
        let after_hello = core::mem::take(&mut self.after_hello);
        let Some(last) = self.last_seq.replace(seq) else {
            return Link::First;
        };
        match seq.wrapping_sub(last) {
            1 => Link::InOrder,
            0 if !after_hello => {
                self.stats.duplicates += 1;
                Link::Duplicate
            }
            d if d >= 0x8000 || d == 0 => {
                self.stats.restarts += 1;
                Link::Restart
            }
            d => {
                self.stats.missing_summaries += u64::from(d - 1);
                Link::Gap { missing: d - 1 }
            }
        }
    }

    /// The counters so far.
    pub const fn stats(&self) -> &LinkStats {
        &self.stats
    }
}
