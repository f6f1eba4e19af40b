//! The App's millisecond clock and the sample pacing, from the RP2040's
//! microsecond timer.
//!
//! Where it sits: between the hardware timer and every `t_ms` the App is
//! given.
//!
//! ```text
//! TIMER (1 MHz, via embassy-time) --low 32 bits--> MsClock::update --> t_ms --> Pacer::due --> App::tick
//! ```
//!
//! The App wants a wrapping `u32` millisecond count. Dividing the 64-bit
//! microsecond count by 1000 would link a 64-bit division routine (about
//! 1.2 KiB on the Cortex-M0+); this carries the remainder instead, from the
//! difference of successive 32-bit readings, which is exact as long as
//! `update` runs at least once per 71 minutes (the 32-bit microsecond
//! wrap). The main loop calls it continuously. Both types take time as an
//! argument (STYLE §3).

/// Milliseconds since the first reading, wrapping, from a free-running
/// 32-bit microsecond counter.
#[derive(Clone, Copy, Debug)]
pub struct MsClock {
    last_us: u32,
    rem_us: u32,
    ms: u32,
}

impl MsClock {
    /// A clock reading 0 at the microsecond count `us`.
    pub const fn new(us: u32) -> Self {
        MsClock {
            last_us: us,
            rem_us: 0,
            ms: 0,
        }
    }

    /// The milliseconds at the microsecond count `us` (a later reading
    /// than the previous one, less than 2³² µs on).
    pub fn update(&mut self, us: u32) -> u32 {
        let elapsed_us = us.wrapping_sub(self.last_us);
        self.last_us = us;
        // rem_us < 1000 before, so this cannot overflow for elapsed_us
        // below 2³² − 1000; saturate for the impossible rest.
        let total_us = self.rem_us.saturating_add(elapsed_us);
        self.ms = self.ms.wrapping_add(total_us / 1000);
        self.rem_us = total_us % 1000;
        self.ms
    }
}

/// Says when the next sample is due: every `period_ms`, on a fixed rhythm.
#[derive(Clone, Copy, Debug)]
pub struct Pacer {
    period_ms: u32,
    next_ms: u32,
}

impl Pacer {
    /// Samples every `period_ms`, the first one period after `t_ms`.
    pub const fn new(period_ms: u32, t_ms: u32) -> Self {
        Pacer {
            period_ms,
            next_ms: t_ms.wrapping_add(period_ms),
        }
    }

    /// Whether a sample is due at `t_ms`; if so, the next one is scheduled.
    /// The rhythm is kept (no drift from a late tick), but after falling
    /// more than a whole period behind (a debugger halt, a bus stuck for a
    /// while) it restarts from `t_ms` rather than running the missed
    /// samples back to back.
    pub fn due(&mut self, t_ms: u32) -> bool {
        if !reached(t_ms, self.next_ms) {
            return false;
        }
        self.next_ms = self.next_ms.wrapping_add(self.period_ms);
        if reached(t_ms, self.next_ms) {
            self.next_ms = t_ms.wrapping_add(self.period_ms);
        }
        true
    }
}

/// `t_ms` is at or after `deadline_ms` on the wrapping clock (the two are
/// less than 2³¹ ms, 24 days, apart).
fn reached(t_ms: u32, deadline_ms: u32) -> bool {
    t_ms.wrapping_sub(deadline_ms) < 1 << 31
}

// Host-run: `./host-test.sh` (the crate itself builds for the RP2040 only).
#[cfg(test)]
mod tests {
    use super::{MsClock, Pacer};

    #[test]
    fn ms_clock_is_exact_across_the_microsecond_wrap() {
        let start = u32::MAX - 5_000_000; // the 32-bit µs count wraps 5 s in
        let mut clock = MsClock::new(start);
        let (mut us, mut total_us, mut x) = (start, 0u64, 12_345u32);
        for _ in 0..200_000 {
            // xorshift: uneven steps of 0..3 ms between readings
            x ^= x << 13;
            x ^= x >> 17;
            x ^= x << 5;
            let step = x % 3_000;
            us = us.wrapping_add(step);
            total_us += u64::from(step);
            assert_eq!(u64::from(clock.update(us)), total_us / 1_000);
        }
    }

    #[test]
    fn pacer_keeps_the_rhythm_and_restarts_after_a_long_stall() {
        let mut p = Pacer::new(100, 0);
        assert!(!p.due(99));
        assert!(p.due(100));
        assert!(!p.due(150));
        assert!(p.due(205)); // late, but the next is still due at 300
        assert!(p.due(300));
        assert!(p.due(1_300)); // a second late: one sample, not ten
        assert!(!p.due(1_350));
        assert!(p.due(1_400));
    }

    #[test]
    fn pacer_works_across_the_millisecond_wrap() {
        let mut p = Pacer::new(100, u32::MAX - 50);
        assert!(!p.due(u32::MAX));
        assert!(p.due(49));
        assert!(!p.due(100));
        assert!(p.due(149));
    }
}
