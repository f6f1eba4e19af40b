//! The coolant flow meter's pulse counter: TIM2 counts the meter's rising
//! edges in hardware and [`FlowPulses::take`] returns the count since the
//! previous call.
//!
//! Where it sits: the first stage of the heat-out channel.
//!
//! ```text
//! flow meter --PA0 (A0)--> TIM2 input filter --> TIM2 CNT (external clock mode 1)
//!     --> FlowPulses::take --> Calorimeter (sliding gate) --> App::tick --> heat_out_w
//! ```
//!
//! A timer rather than an edge interrupt: the peripheral keeps the count,
//! so no edge is lost while the CPU is busy or interrupts are masked, a
//! noisy or chattering line costs no CPU time at all, and the input filter
//! drops glitches shorter than about 3 µs. TIM2 is 32 bits wide and
//! free-running; `take` differences two readings with wrapping arithmetic,
//! so the counter is never written after start-up.

use embassy_stm32::Peri;
use embassy_stm32::gpio::Pull;
use embassy_stm32::peripherals::{PA0, TIM2};
use embassy_stm32::timer::input_capture::CapturePin;
use embassy_stm32::timer::low_level::{
    FilterValue, InputCaptureMode, InputTISelection, SlaveMode, Timer, TriggerSource,
};
use embassy_stm32::timer::{Ch1, Channel};
use heatbound_firmware_example::drivers::flow::PulseCounter;

/// The input filter: 8 agreeing samples at f_DTS/32 (84 MHz / 32 =
/// 2.6 MHz), about 3 µs. A turbine meter's pulses are milliseconds long.
const FILTER: FilterValue = FilterValue::FDTS_DIV32_N8;

/// Flow-meter pulses counted by TIM2 on PA0 (TIM2_CH1, AF1).
pub struct FlowPulses<'d> {
    timer: Timer<'d, TIM2>,
    /// Holds PA0 in its timer-input function for as long as we count.
    _pin: CapturePin<'d, TIM2, Ch1>,
    /// The counter at the previous [`PulseCounter::take`].
    last: u32,
}

impl<'d> FlowPulses<'d> {
    /// Starts counting rising edges on PA0, with the internal pull-up on
    /// (an open-collector meter output still wants an external pull-up:
    /// see the README's wiring table).
    pub fn new(tim: Peri<'d, TIM2>, pin: Peri<'d, PA0>) -> Self {
        let pin = CapturePin::new(pin, Pull::Up);
        let timer = Timer::new(tim);
        // TI1 (PA0) through the filter and the edge detector as TI1FP1,
        // which clocks the counter (RM0390, TIM2 to TIM5, "External clock
        // source mode 1").
        timer.set_input_ti_selection(Channel::Ch1, InputTISelection::Normal);
        timer.set_input_capture_filter(Channel::Ch1, FILTER);
        timer.set_input_capture_mode(Channel::Ch1, InputCaptureMode::Rising);
        timer.set_trigger_source(TriggerSource::TI1FP1);
        timer.set_slave_mode(SlaveMode::EXT_CLOCK_MODE);
        // Count through the whole 32-bit range; the prescaler is 0 after
        // the reset in `Timer::new`, so every edge counts once.
        timer.set_max_compare_value(u32::MAX);
        timer.start();
        let last = timer.regs_gp32().cnt().read();
        FlowPulses {
            timer,
            _pin: pin,
            last,
        }
    }
}

impl PulseCounter for FlowPulses<'_> {
    fn take(&mut self) -> u32 {
        let now = self.timer.regs_gp32().cnt().read();
        let pulses = now.wrapping_sub(self.last);
        self.last = now;
        pulses
    }
}
