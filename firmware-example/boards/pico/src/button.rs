//! The local acknowledge button: debounced, and reported once per press.
//!
//! Where it sits: between the GPIO and [`App::acknowledge_all`].
//!
//! ```text
//! GP14 (to GND, pull-up) --is_low--> Debouncer::update(pressed, t_ms) --press--> App::acknowledge_all
//! ```
//!
//! A level counts only once it has held for [`Debouncer`]'s settle time,
//! and only the released → pressed edge is reported, so a held button (or
//! one stuck closed) acknowledges once, not on every sample. Time is an
//! argument (STYLE §3).
//!
//! [`App::acknowledge_all`]: heatbound_firmware_example::app::App::acknowledge_all

/// How long the button's level must hold before it counts, ms: longer than
/// a pushbutton's contact bounce (a few ms), short enough to feel instant.
pub const SETTLE_MS: u32 = 20;

/// A debounced, edge-detecting button.
#[derive(Clone, Copy, Debug)]
pub struct Debouncer {
    settle_ms: u32,
    /// The level last accepted.
    stable: bool,
    /// The level last seen, and since when.
    candidate: bool,
    since_ms: u32,
}

impl Debouncer {
    /// A debouncer that takes `pressed` (the level at boot, at `t_ms`) as
    /// its settled state, so a button held during boot is not a press.
    pub const fn new(settle_ms: u32, pressed: bool, t_ms: u32) -> Self {
        Debouncer {
            settle_ms,
            stable: pressed,
            candidate: pressed,
            since_ms: t_ms,
        }
    }

    /// The raw level `pressed` at `t_ms` (a wrapping millisecond clock);
    /// `true` once per press, when the pressed level has held for the
    /// settle time.
    pub fn update(&mut self, pressed: bool, t_ms: u32) -> bool {
        if pressed != self.candidate {
            self.candidate = pressed;
            self.since_ms = t_ms;
            return false;
        }
        if self.candidate != self.stable && t_ms.wrapping_sub(self.since_ms) >= self.settle_ms {
            self.stable = self.candidate;
            return self.stable;
        }
        false
    }
}

// Host-run: `./host-test.sh` (the crate itself builds for the RP2040 only).
#[cfg(test)]
mod tests {
    use super::Debouncer;

    fn presses(d: &mut Debouncer, pressed: bool, from_ms: u32, to_ms: u32) -> usize {
        (from_ms..to_ms).filter(|&t| d.update(pressed, t)).count()
    }

    #[test]
    fn a_bouncing_press_counts_once_after_the_settle_time() {
        let mut d = Debouncer::new(20, false, 0);
        for t in 100..110 {
            assert!(!d.update(t % 2 == 0, t)); // contact bounce
        }
        assert!(!d.update(true, 110));
        assert_eq!(presses(&mut d, true, 111, 130), 0); // not yet 20 ms
        assert!(d.update(true, 130));
        assert_eq!(presses(&mut d, true, 131, 400), 0); // held: no repeat
        assert_eq!(presses(&mut d, false, 400, 500), 0); // release is no press
        assert_eq!(presses(&mut d, true, 500, 600), 1); // the next press
    }

    #[test]
    fn a_glitch_shorter_than_the_settle_time_is_ignored() {
        let mut d = Debouncer::new(20, false, 0);
        assert_eq!(presses(&mut d, true, 0, 5), 0);
        assert_eq!(presses(&mut d, false, 5, 100), 0);
    }

    #[test]
    fn a_button_held_at_boot_is_not_a_press() {
        let mut d = Debouncer::new(20, true, 0);
        assert_eq!(presses(&mut d, true, 0, 100), 0);
        assert_eq!(presses(&mut d, false, 100, 200), 0);
        assert_eq!(presses(&mut d, true, 200, 300), 1);
    }

    #[test]
    fn the_settle_time_is_measured_across_the_millisecond_wrap() {
        let mut d = Debouncer::new(20, false, 0);
        assert!(!d.update(true, u32::MAX - 5));
        assert!(!d.update(true, 10)); // 16 ms on
        assert!(d.update(true, 14)); // 20 ms on
    }
}
