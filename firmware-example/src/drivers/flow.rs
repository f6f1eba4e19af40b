//! Coolant flow meter and calorimetry: pulses and two temperatures in,
//! `heat_out_w` out.
//!
//! Where it sits: the optional third power channel.
//!
//! ```text
//! PulseCounter::take --> FlowMeter (gate of G intervals) --> volume_flow_m3_s
//! TemperatureSource (inlet, outlet) ------------------------+
//!     --> heatbound::sensor::power::heat_flow_volumetric_w --> Sample::heat_out_w
//! ```
//!
//! A turbine meter gives a few pulses per sample at bench flows (about
//! 9 pulses/s for 1.2 L/min at 450 pulses/L), so one sample's count is
//! quantised to ±1 pulse in 1. [`FlowMeter`] therefore sums the last `G`
//! intervals (a sliding gate) before converting, trading a little lag for
//! resolution. The conversion itself, [`volume_flow_m3_s`], is a pure
//! function.

use core::fmt;

use heatbound::sensor::power::{self, PowerError};

use crate::drivers::TemperatureSource;

/// Something that counts flow-meter pulses: a timer in external-clock mode,
/// an edge interrupt's counter, or a simulation.
///
/// ```
/// use heatbound_firmware_example::drivers::flow::PulseCounter;
/// struct Fixed(u32);
/// impl PulseCounter for Fixed {
///     fn take(&mut self) -> u32 { self.0 }
/// }
/// assert_eq!(Fixed(3).take(), 3);
/// ```
pub trait PulseCounter {
    /// Pulses since the previous call (the counter restarts from zero).
    fn take(&mut self) -> u32;
}

/// Why a flow figure is not available.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum FlowError {
    /// The interval is zero.
    NoInterval,
    /// The K-factor is not a positive finite number.
    BadKFactor,
}

impl fmt::Display for FlowError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            FlowError::NoInterval => "flow interval is zero",
            FlowError::BadKFactor => "flow-meter K-factor must be positive and finite",
        })
    }
}

impl core::error::Error for FlowError {}

/// Volumetric flow, m³/s, from `pulses` counted over `interval_ms` by a
/// meter of `k_factor_pulses_per_l` pulses per litre.
///
/// ```
/// use heatbound_firmware_example::drivers::flow::volume_flow_m3_s;
/// // 450 pulses/L, 90 pulses in 10 s: 0.2 L in 10 s = 2e-5 m³/s.
/// let q = volume_flow_m3_s(90, 10_000, 450.0)?;
/// assert!((q - 2e-5).abs() < 1e-12);
/// assert!(volume_flow_m3_s(1, 0, 450.0).is_err());
/// # Ok::<(), heatbound_firmware_example::drivers::flow::FlowError>(())
/// ```
pub fn volume_flow_m3_s(
    pulses: u32,
    interval_ms: u32,
    k_factor_pulses_per_l: f32,
) -> Result<f32, FlowError> {
    if interval_ms == 0 {
        return Err(FlowError::NoInterval);
    }
    if !(k_factor_pulses_per_l.is_finite() && k_factor_pulses_per_l > 0.0) {
        return Err(FlowError::BadKFactor);
    }
    // Litres per millisecond is m³/s.
    Ok(pulses as f32 / k_factor_pulses_per_l / interval_ms as f32)
}

/// A flow meter read through a sliding gate of the last `G` sample
/// intervals (G ≥ 1; 10 at 10 Hz is a one-second gate).
///
/// ```
/// use heatbound_firmware_example::drivers::flow::FlowMeter;
/// let mut meter = FlowMeter::<4>::new(450.0);
/// assert_eq!(meter.record(0, 0), None); // the first call only starts the gate
/// for (i, pulses) in [1, 0, 1, 1].into_iter().enumerate() {
///     meter.record(100 * (i as u32 + 1), pulses);
/// }
/// // 3 pulses in 400 ms at 450 pulses/L
/// let q = meter.flow_m3_s().unwrap().unwrap();
/// assert!((q - 3.0 / 450.0 / 400.0).abs() < 1e-12);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FlowMeter<const G: usize> {
    k_factor_pulses_per_l: f32,
    pulses: [u32; G],
    intervals_ms: [u32; G],
    next: usize,
    last_ms: Option<u32>,
}

impl<const G: usize> FlowMeter<G> {
    /// An empty gate for a meter of `k_factor_pulses_per_l` pulses per
    /// litre.
    pub const fn new(k_factor_pulses_per_l: f32) -> Self {
        FlowMeter {
            k_factor_pulses_per_l,
            pulses: [0; G],
            intervals_ms: [0; G],
            next: 0,
            last_ms: None,
        }
    }

    /// Records `pulses` counted up to `t_ms`; returns the gated flow
    /// ([`Self::flow_m3_s`]) once there is an interval.
    pub fn record(&mut self, t_ms: u32, pulses: u32) -> Option<Result<f32, FlowError>> {
        let last = self.last_ms.replace(t_ms)?;
        if G == 0 {
            return None;
        }
        let i = self.next % G;
        if let (Some(p), Some(d)) = (self.pulses.get_mut(i), self.intervals_ms.get_mut(i)) {
            *p = pulses;
            *d = t_ms.wrapping_sub(last);
        }
        self.next = (i + 1) % G;
        self.flow_m3_s()
    }

    /// The flow over the gate, m³/s; `None` before the first interval.
    pub fn flow_m3_s(&self) -> Option<Result<f32, FlowError>> {
        let ms: u32 = self
            .intervals_ms
            .iter()
            .fold(0, |a, &d| a.saturating_add(d));
        if ms == 0 {
            return None;
        }
        let n: u32 = self.pulses.iter().fold(0, |a, &p| a.saturating_add(p));
        Some(volume_flow_m3_s(n, ms, self.k_factor_pulses_per_l))
    }
}

/// What a calorimeter read failed on.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum CalorimeterError<A, B> {
    /// The inlet temperature source.
    Inlet(A),
    /// The outlet temperature source.
    Outlet(B),
    /// The flow figure ([`FlowError`]).
    Flow(FlowError),
    /// The heat-flow conversion (temperatures outside the water range).
    Conversion(PowerError),
}

impl<A: fmt::Debug, B: fmt::Debug> fmt::Display for CalorimeterError<A, B> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CalorimeterError::Inlet(e) => write!(f, "coolant inlet temperature: {e:?}"),
            CalorimeterError::Outlet(e) => write!(f, "coolant outlet temperature: {e:?}"),
            CalorimeterError::Flow(e) => write!(f, "coolant flow: {e}"),
            CalorimeterError::Conversion(e) => write!(f, "coolant heat flow: {e}"),
        }
    }
}

impl<A: fmt::Debug, B: fmt::Debug> core::error::Error for CalorimeterError<A, B> {}

/// The application's heat-out channel: `Ok(None)` when heat out is not
/// measured (the monitor then infers it), `Ok(Some(w))` for a reading,
/// `Err` for a failed one (the channel reads NaN).
pub trait HeatOut {
    /// Why a reading failed.
    type Error: fmt::Debug;

    /// Starts measuring at `t_ms` (opens a counting gate, discards what was
    /// counted before). The application calls it once at start-up.
    fn start(&mut self, t_ms: u32) {
        let _ = t_ms;
    }

    /// The heat rejected to the coolant, W, for the sample at `t_ms`.
    fn heat_out_w(&mut self, t_ms: u32) -> Result<Option<f32>, Self::Error>;
}

/// No heat-out measurement: the monitor infers `Q_out = Q_in − W`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct NoHeatOut;

impl HeatOut for NoHeatOut {
    type Error = core::convert::Infallible;

    fn heat_out_w(&mut self, _t_ms: u32) -> Result<Option<f32>, Self::Error> {
        Ok(None)
    }
}

/// Coolant calorimetry: a pulse-counting flow meter at the inlet plus inlet
/// and outlet temperatures, `ρ(T_in)·V̇·c_p·(T_out − T_in)`.
///
/// With no pulses in the gate the coolant is standing and carries no heat:
/// the reading is 0 W whatever the temperatures (which may then be outside
/// the water range, near boiling).
#[derive(Clone, Copy, Debug)]
pub struct Calorimeter<P, TI, TO, const G: usize> {
    counter: P,
    inlet: TI,
    outlet: TO,
    meter: FlowMeter<G>,
}

impl<P, TI, TO, const G: usize> Calorimeter<P, TI, TO, G>
where
    P: PulseCounter,
    TI: TemperatureSource,
    TO: TemperatureSource,
{
    /// A calorimeter from a pulse `counter` of a meter with
    /// `k_factor_pulses_per_l`, and the `inlet` and `outlet` sensors.
    pub const fn new(counter: P, k_factor_pulses_per_l: f32, inlet: TI, outlet: TO) -> Self {
        Calorimeter {
            counter,
            inlet,
            outlet,
            meter: FlowMeter::new(k_factor_pulses_per_l),
        }
    }

    /// The gated flow so far, m³/s.
    pub fn flow_m3_s(&self) -> Option<Result<f32, FlowError>> {
        self.meter.flow_m3_s()
    }
}

impl<P, TI, TO, const G: usize> HeatOut for Calorimeter<P, TI, TO, G>
where
    P: PulseCounter,
    TI: TemperatureSource,
    TO: TemperatureSource,
{
    type Error = CalorimeterError<TI::Error, TO::Error>;

    fn start(&mut self, t_ms: u32) {
        let _ = self.counter.take();
        self.meter = FlowMeter::new(self.meter.k_factor_pulses_per_l);
        let _ = self.meter.record(t_ms, 0);
    }

    fn heat_out_w(&mut self, t_ms: u32) -> Result<Option<f32>, Self::Error> {
        let pulses = self.counter.take();
        // Read both sensors every time, so a failing one is seen at once.
        let t_in = self.inlet.read_c().map_err(CalorimeterError::Inlet);
        let t_out = self.outlet.read_c().map_err(CalorimeterError::Outlet);
        let Some(flow) = self.meter.record(t_ms, pulses) else {
            // Not started: this call only opened the gate. An error, not
            // `None`, so the monitor does not decide that heat out is unmeasured.
            return Err(CalorimeterError::Flow(FlowError::NoInterval));
        };
        let flow_m3_s = flow.map_err(CalorimeterError::Flow)?;
        let (t_in, t_out) = (t_in?, t_out?);
        if flow_m3_s == 0.0 {
            return Ok(Some(0.0));
        }
        power::heat_flow_volumetric_w(flow_m3_s, t_in, t_in, t_out)
            .map(Some)
            .map_err(CalorimeterError::Conversion)
    }
}
