//! The steady-state test: min and max of every channel in time buckets,
//! amortised O(1) per sample.

use crate::num::{Real, lanes};

use super::settings::{MonitorConfig, Steady};

const BUCKETS: usize = 8;
pub(super) const STEADY_CHANNELS: usize = 5;

/// Min and max of each channel over a stretch of time. An empty span has
/// `min = MAX` and `max = −MAX`, so including and merging need no branches.
#[derive(Clone, Copy, Debug)]
struct Span<R> {
    min: [R; STEADY_CHANNELS],
    max: [R; STEADY_CHANNELS],
}

#[inline]
fn lesser<R: Real>(a: R, b: R) -> R {
    if b.less_not_nan(a) { b } else { a }
}

#[inline]
fn greater<R: Real>(a: R, b: R) -> R {
    if a.less_not_nan(b) { b } else { a }
}

impl<R: Real> Span<R> {
    fn empty() -> Self {
        Self {
            min: [R::MAX; STEADY_CHANNELS],
            max: [-R::MAX; STEADY_CHANNELS],
        }
    }

    // One copy in the image: it is called from four places.
    #[inline(never)]
    fn merge(&mut self, other: &Self) {
        lanes::<STEADY_CHANNELS>(|i| {
            self.min[i] = lesser(self.min[i], other.min[i]);
            self.max[i] = greater(self.max[i], other.max[i]);
        });
    }

    /// Includes one sample; returns whether it widened the span.
    #[inline]
    fn include(&mut self, v: &[R; STEADY_CHANNELS]) -> bool {
        let mut widened = false;
        lanes::<STEADY_CHANNELS>(|i| {
            let x = v[i];
            if x.less_not_nan(self.min[i]) {
                self.min[i] = x;
                widened = true;
            }
            if self.max[i].less_not_nan(x) {
                self.max[i] = x;
                widened = true;
            }
        });
        widened
    }
}

/// Steady-state test over time buckets: amortised O(1) per sample.
///
/// The duration is split into 8 buckets; each keeps the min and max of every
/// channel. The flag says that the last 8 complete buckets and the current
/// one, together at least the configured duration, stayed within the bands.
#[derive(Clone, Copy, Debug)]
pub(super) struct SteadyTracker<R> {
    bucket_ms: u32,
    bucket_start_ms: u32,
    current: Span<R>,
    done: [Span<R>; BUCKETS],
    /// Merge of `done`, refreshed when a bucket completes.
    done_merged: Span<R>,
    /// Merge of the complete buckets that outlive the next rotation (all
    /// but the oldest), built one bucket per sample while the current one
    /// fills: `survivors` of them so far, oldest first. When the current
    /// bucket closes, `done_merged` is this merge and the closed bucket, so
    /// no sample pays for merging every bucket.
    surviving: Span<R>,
    survivors: usize,
    next: usize,
    completed: usize,
    /// Absolute part of each band (the temperatures), and relative part (the
    /// powers, as a fraction of the larger magnitude).
    band_abs: [R; STEADY_CHANNELS],
    band_rel: [R; STEADY_CHANNELS],
    started: bool,
    /// The last verdict: a sample inside the spans seen so far cannot change
    /// it, which spares the band test on most samples.
    steady: bool,
}

impl<R: Real> SteadyTracker<R> {
    pub(super) fn new(config: &impl MonitorConfig) -> Self {
        Self::with(&config.monitor_settings().steady)
    }

    /// A tracker for the steady-state settings `s`.
    fn with(s: &Steady) -> Self {
        let bucket_ms = (s.duration_s * 1000.0 / BUCKETS as f64).clamp(1.0, u32::MAX as f64) as u32;
        let z = 0.0;
        Self {
            bucket_ms,
            bucket_start_ms: 0,
            current: Span::empty(),
            done: [Span::empty(); BUCKETS],
            done_merged: Span::empty(),
            surviving: Span::empty(),
            survivors: 0,
            next: 0,
            completed: 0,
            band_abs: [s.hot_band_k, s.cold_band_k, z, z, z].map(R::from_f64),
            band_rel: [
                z,
                z,
                s.heat_in_band_rel,
                s.work_band_rel,
                s.heat_out_band_rel,
            ]
            .map(R::from_f64),
            started: false,
            steady: false,
        }
    }

    pub(super) fn restart(&mut self, t_ms: u32) {
        self.started = true;
        self.bucket_start_ms = t_ms;
        self.current = Span::empty();
        self.done = [Span::empty(); BUCKETS];
        self.done_merged = Span::empty();
        self.surviving = Span::empty();
        self.survivors = 0;
        self.completed = 0;
        self.next = 0;
        self.steady = false;
    }

    /// Adds a sample at `t_ms`; returns whether every channel has stayed in
    /// band for at least the configured duration.
    pub(super) fn push(&mut self, t_ms: u32, v: &[R; STEADY_CHANNELS]) -> bool {
        if !self.started {
            self.restart(t_ms);
        }
        let elapsed = t_ms.wrapping_sub(self.bucket_start_ms);
        let rotated = elapsed >= self.bucket_ms;
        if rotated {
            self.close(t_ms, elapsed);
        } else if self.survivors < BUCKETS - 1 {
            // One bucket per sample; most samples have none left to merge.
            self.merge_survivors(self.survivors + 1);
        }
        let widened = self.current.include(v);
        if self.completed < BUCKETS {
            return false;
        }
        if !rotated && !widened {
            return self.steady;
        }
        let mut all = self.done_merged;
        all.merge(&self.current);
        let mut steady = true;
        for i in 0..STEADY_CHANNELS {
            let (lo, hi) = (all.min[i], all.max[i]);
            let scale = greater(hi.abs(), lo.abs());
            steady &= hi - lo <= self.band_abs[i] + self.band_rel[i] * scale;
        }
        self.steady = steady;
        steady
    }

    /// Closes the current bucket, and any empty ones after it: once per
    /// bucket, so out of line.
    #[inline(never)]
    fn close(&mut self, t_ms: u32, mut elapsed: u32) {
        // Close the current bucket, and any empty ones after it.
        let mut closed = 0;
        while elapsed >= self.bucket_ms && closed <= BUCKETS {
            // Moved out rather than copied and cleared: one copy, and no
            // memmove routine in a controller's image.
            let closed_span = core::mem::replace(&mut self.current, Span::empty());
            if closed == 0 {
                // The usual close: one bucket, after the merge of the
                // others was built sample by sample.
                if self.survivors < BUCKETS - 1 {
                    self.merge_survivors(BUCKETS - 1);
                }
                let mut merged = core::mem::replace(&mut self.surviving, Span::empty());
                merged.merge(&closed_span);
                self.done_merged = merged;
            }
            if let Some(slot) = self.done.get_mut(self.next) {
                *slot = closed_span;
            }
            self.next = (self.next + 1) % BUCKETS;
            self.completed = (self.completed + 1).min(BUCKETS);
            self.bucket_start_ms = self.bucket_start_ms.wrapping_add(self.bucket_ms);
            elapsed -= self.bucket_ms;
            closed += 1;
        }
        if elapsed >= self.bucket_ms {
            self.bucket_start_ms = t_ms;
        }
        if closed > 1 {
            self.merge_all();
        }
        // `surviving` was moved out at the first close above.
        self.survivors = 0;
    }

    /// `done_merged` from every complete bucket: after a gap that closed
    /// empty buckets too.
    #[cold]
    #[inline(never)]
    fn merge_all(&mut self) {
        let mut merged = Span::empty();
        for b in &self.done {
            merged.merge(b);
        }
        self.done_merged = merged;
    }

    /// Merges into `surviving` the next complete buckets, oldest first,
    /// until `until` of the `BUCKETS − 1` newest are in: the bucket at
    /// `next`, the oldest, is left out, since the next close replaces it.
    #[inline(never)]
    fn merge_survivors(&mut self, until: usize) {
        while self.survivors < until.min(BUCKETS - 1) {
            self.survivors += 1;
            if let Some(b) = self.done.get((self.next + self.survivors) % BUCKETS) {
                self.surviving.merge(b);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The merge kept for the complete buckets, built one bucket per sample,
    /// is the merge of every complete bucket after each sample, through
    /// irregular spacing and gaps that close several buckets at once.
    #[test]
    fn merged_buckets_match_a_full_merge() {
        let mut tracker = SteadyTracker::<f32>::with(&Steady::default());
        let bucket_ms = tracker.bucket_ms;
        // A fixed linear congruential sequence: any stream would do.
        let mut state = 0x2545_f491_u32;
        let mut next = move || {
            state = state.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            state >> 8
        };
        let mut t_ms = 0u32;
        for i in 0..20_000u32 {
            let r = next();
            t_ms += match r % 97 {
                0 => bucket_ms * (1 + r % 3),
                1 => bucket_ms / 2,
                _ => 50 + r % 250,
            };
            let x = (next() % 1000) as f32 / 100.0;
            let v = [600.0 + x, 300.0 - x, 1000.0 + 3.0 * x, 150.0 - x, 850.0 + x];
            let steady = tracker.push(t_ms, &v);

            let mut full = Span::empty();
            for b in &tracker.done {
                full.merge(b);
            }
            assert_eq!(tracker.done_merged.min, full.min, "sample {i}");
            assert_eq!(tracker.done_merged.max, full.max, "sample {i}");
            if tracker.completed == BUCKETS {
                full.merge(&tracker.current);
                let in_band = (0..STEADY_CHANNELS).all(|c| {
                    let (lo, hi) = (full.min[c], full.max[c]);
                    hi - lo <= tracker.band_abs[c] + tracker.band_rel[c] * hi.abs().max(lo.abs())
                });
                assert_eq!(steady, in_band, "sample {i}");
            }
        }
    }
}
