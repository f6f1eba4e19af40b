//! The coolant flow meter's pulse counter: a PWM slice counting rising
//! edges on its B pin, in hardware.
//!
//! Where it sits: the first stage of the heat-out channel.
//!
//! ```text
//! turbine meter --pulses--> GP13 (PWM slice 6, B) --counter--> PwmPulseCounter::take
//!     --> flow::Calorimeter --> App::tick --> Sample::heat_out_w
//! ```
//!
//! The RP2040's PWM slices have an input mode in which the 16-bit counter
//! advances once per rising edge of the B pin (RP2040 datasheet, PWM chapter),
//! so no pulse depends on an interrupt being served in time. The counter is
//! never reset: [`PulseCounter::take`] returns the difference from the
//! previous reading, modulo 2¹⁶, so a pulse arriving between a read and a
//! reset cannot be lost. The counter wraps after 65,536 pulses, which a
//! bench turbine meter (a few hundred hertz at most) cannot reach within one
//! 100 ms sample.

use embassy_rp::pwm::Pwm;
use heatbound_firmware_example::drivers::flow::PulseCounter;

/// Pulses per litre of the coolant flow meter: the common hall-effect
/// turbine meters with a 1/2" body (YF-S201 class) are specified as
/// f = 7.5 Hz per L/min, which is 7.5 × 60 = 450 pulses per litre. That
/// is a nominal figure, and single units differ from it by several per
/// cent: for a calorimetric figure, calibrate the rig's own meter (count
/// the pulses for a measured volume) and put the result here.
pub const FLOW_K_FACTOR_PULSES_PER_L: f32 = 7.5 * 60.0;

/// A PWM slice in rising-edge counting mode as a [`PulseCounter`].
pub struct PwmPulseCounter {
    pwm: Pwm<'static>,
    last: u16,
}

impl PwmPulseCounter {
    /// Counts from `pwm`, which must have been made with
    /// [`Pwm::new_input`] in `InputMode::RisingEdge`, `top` = 0xFFFF and a
    /// divider of 1 (the defaults).
    pub fn new(pwm: Pwm<'static>) -> Self {
        let last = pwm.counter();
        PwmPulseCounter { pwm, last }
    }
}

impl PulseCounter for PwmPulseCounter {
    fn take(&mut self) -> u32 {
        let now = self.pwm.counter();
        let pulses = now.wrapping_sub(self.last);
        self.last = now;
        u32::from(pulses)
    }
}
