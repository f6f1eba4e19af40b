//! The local acknowledge button: debouncing and edge detection.
//!
//! Where it sits: between the button's pin, read every `BUTTON_POLL_MS`
//! (10 ms) by the main loop, and `App::acknowledge_all`.
//!
//! ```text
//! B1 (PC13, low = pressed) --every 10 ms--> Debouncer::update --press--> App::acknowledge_all
//! ```
//!
//! A level counts only after [`STABLE_READS`] agreeing reads in a row (30 ms
//! at the 10 ms poll), which outlasts contact bounce, and only the change
//! from released to pressed is reported: holding the button acknowledges
//! once. The starting level is taken as settled, so a button held through a
//! reset does not acknowledge at boot.

/// Agreeing reads needed before a new level counts.
pub const STABLE_READS: u8 = 3;

/// A debounced, edge-detecting view of one push button.
pub struct Debouncer {
    /// The settled level (true = pressed).
    pressed: bool,
    /// Reads in a row that disagree with the settled level.
    disagreeing: u8,
}

impl Debouncer {
    /// A debouncer that starts settled at `pressed`.
    pub const fn new(pressed: bool) -> Self {
        Debouncer {
            pressed,
            disagreeing: 0,
        }
    }

    /// Feeds one raw read; true exactly once per debounced press.
    pub fn update(&mut self, pressed: bool) -> bool {
        if pressed == self.pressed {
            self.disagreeing = 0;
            return false;
        }
        self.disagreeing = self.disagreeing.saturating_add(1);
        if self.disagreeing < STABLE_READS {
            return false;
        }
        self.pressed = pressed;
        self.disagreeing = 0;
        pressed
    }
}
