//! Channel health: the faults the `sensor_fault` rule sees, and the check for
//! a channel stuck on one value.

use serde::Serialize;

use crate::num::Real;

use super::sample::Channel;
use super::steady::STEADY_CHANNELS;

/// The state of the channels, as the `sensor_fault` rule sees it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Faults {
    /// Channels invalid in the latest sample, as [`Channel::bit`]s.
    pub invalid: u8,
    /// Channels that repeated the same value `stuck_samples` times in a row.
    pub stuck: u8,
    /// The latest sample came later than `stale_s` after the one before.
    pub stale: bool,
    /// Since when the channels have been faulty, if they are now.
    pub since_ms: Option<u32>,
}

impl Faults {
    /// Whether any channel is faulty.
    pub const fn any(&self) -> bool {
        self.since_ms.is_some()
    }
}

/// Consecutive-repeat counters for the stuck check.
#[derive(Clone, Copy, Debug)]
pub(super) struct StuckCheck<R> {
    pub(super) last: [R; STEADY_CHANNELS],
    pub(super) repeats: [u32; STEADY_CHANNELS],
    pub(super) limit: u32,
}

impl<R: Real> StuckCheck<R> {
    pub(super) fn update(&mut self, v: &[R; STEADY_CHANNELS], present: u8) -> u8 {
        if self.limit == 0 {
            return 0;
        }
        let mut stuck = 0;
        // The second hot sensor is checked by the diagnosis, against the first.
        let counters = self.last.iter_mut().zip(self.repeats.iter_mut());
        for ((ch, &x), (last, repeats)) in Channel::ALL.iter().zip(v).zip(counters) {
            if present & ch.bit() == 0 {
                *repeats = 0;
                continue;
            }
            if x == *last {
                *repeats = repeats.saturating_add(1);
            } else {
                *repeats = 1;
                *last = x;
            }
            if *repeats >= self.limit {
                stuck |= ch.bit();
            }
        }
        stuck
    }
}
