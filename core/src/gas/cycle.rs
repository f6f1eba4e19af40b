//! Fixed-capacity sequences of process steps: closed cycles and open paths.

use super::process::{EndCondition, Process, ProcessError, Step};
use super::state::{Gas, State, delta_s};

/// A heat in or out smaller than this fraction of the largest energy in the
/// cycle is rounding, and is classified as neither.
const TINY_HEAT: f64 = 1e-12;

/// A cycle or open path of up to `N` steps of one gas, from a start state.
///
/// Each [`Cycle::push`] runs its step from the current state at once, so an
/// unreachable end condition is reported at the step that has it. No heap:
/// the steps live in an `[Step; N]`.
///
/// ```
/// use heatbound::gas::{Cycle, EndCondition, Gas, Process, State};
/// // Carnot cycle between 600 K and 300 K.
/// let gas = Gas::with_gamma(1.0, 1.4)?;
/// let s1 = State::from_p_t(&gas, 1e6, 600.0)?;
/// let v4 = s1.volume_m3() * 2f64.powf(1.0 / 0.4); // on s1's adiabat at 300 K
/// let mut c: Cycle<4> = Cycle::new(gas, s1);
/// c.push(Process::Isothermal, EndCondition::VolumeRatio(3.0))?;
/// c.push(Process::Adiabatic, EndCondition::TemperatureK(300.0))?;
/// c.push(Process::Isothermal, EndCondition::VolumeM3(v4))?;
/// c.push(Process::Adiabatic, EndCondition::ToStart)?;
/// let s = c.summary()?;
/// assert!((s.efficiency.ok_or("open")? - 0.5).abs() < 1e-12);
/// assert!((s.carnot_efficiency.ok_or("open")? - 0.5).abs() < 1e-12);
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Cycle<const N: usize> {
    gas: Gas,
    start: State,
    steps: [Step; N],
    len: usize,
}

impl<const N: usize> Cycle<N> {
    /// An empty cycle of `gas` starting at `start`.
    ///
    /// ```
    /// use heatbound::gas::{Cycle, Gas, State};
    /// let gas = Gas::with_dof(0.05, 3.0)?;
    /// let c: Cycle<8> = Cycle::new(gas, State::from_p_t(&gas, 1e5, 320.0)?);
    /// assert!(c.is_empty() && c.capacity() == 8);
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn new(gas: Gas, start: State) -> Self {
        Self {
            gas,
            start,
            steps: [Step::zero(Process::Isochoric, start); N],
            len: 0,
        }
    }

    /// Runs `process` from the current state to `end` and appends the step.
    ///
    /// [`EndCondition::ToStart`] returns to this cycle's start state. A full
    /// cycle, or a step the process cannot make, is an error and leaves the
    /// cycle unchanged.
    ///
    /// ```
    /// use heatbound::gas::{Cycle, CycleError, EndCondition, Gas, Process, ProcessError, State};
    /// let gas = Gas::with_gamma(1.0, 1.4)?;
    /// let mut c: Cycle<1> = Cycle::new(gas, State::from_p_t(&gas, 1e5, 300.0)?);
    /// let step = c.push(Process::Isobaric, EndCondition::TemperatureK(600.0))?;
    /// assert!((step.heat_j - gas.heat_capacity_p_j_per_k() * 300.0).abs() < 1e-9);
    /// assert_eq!(
    ///     c.push(Process::Isobaric, EndCondition::ToStart),
    ///     Err(CycleError::Full { capacity: 1 })
    /// );
    /// let mut c: Cycle<4> = Cycle::new(gas, State::from_p_t(&gas, 1e5, 300.0)?);
    /// assert_eq!(
    ///     c.push(Process::Isochoric, EndCondition::VolumeRatio(2.0)),
    ///     Err(CycleError::Process(ProcessError::ConstantVolume))
    /// );
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn push(&mut self, process: Process, end: EndCondition) -> Result<&Step, CycleError> {
        let from = self.current();
        let slot = self
            .steps
            .get_mut(self.len)
            .ok_or(CycleError::Full { capacity: N })?;
        *slot = process
            .run(&self.gas, &from, end, &self.start)
            .map_err(CycleError::Process)?;
        self.len += 1;
        Ok(slot)
    }

    /// The steps run so far, in order.
    pub fn steps(&self) -> &[Step] {
        self.steps.get(..self.len).unwrap_or(&[])
    }

    /// The gas.
    pub fn gas(&self) -> &Gas {
        &self.gas
    }

    /// The start state.
    pub fn start(&self) -> &State {
        &self.start
    }

    /// The current state: the last step's end, or the start.
    pub fn current(&self) -> State {
        self.steps().last().map_or(self.start, |s| s.end)
    }

    /// Number of steps so far.
    pub fn len(&self) -> usize {
        self.len
    }

    /// `true` before the first step.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// The most steps this cycle holds, `N`.
    pub fn capacity(&self) -> usize {
        N
    }

    /// The cycle's figures; an error when there are no steps.
    ///
    /// Steps are classified as heat-receiving or heat-rejecting by the sign
    /// of their whole-step heat, which is exact for these processes since
    /// `dQ` keeps one sign along each (see [`Process`]). Heats below 1e-12
    /// of the largest energy in the cycle count as neither.
    ///
    /// ```
    /// use heatbound::gas::{Cycle, CycleError, EndCondition, Gas, Process, State};
    /// let gas = Gas::with_gamma(1.0, 1.4)?;
    /// let mut path: Cycle<2> = Cycle::new(gas, State::from_p_t(&gas, 1e5, 300.0)?);
    /// assert_eq!(path.summary(), Err(CycleError::Empty));
    /// path.push(Process::Polytropic { exponent: 1.3 }, EndCondition::PressureRatio(5.0))?;
    /// let s = path.summary()?;
    /// assert!(!s.closed && s.efficiency.is_none() && s.carnot_efficiency.is_none());
    /// assert!(s.net_work_j < 0.0); // compression: work done on the gas
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn summary(&self) -> Result<CycleSummary, CycleError> {
        let steps = self.steps();
        let last = steps.last().ok_or(CycleError::Empty)?;
        let scale = steps.iter().fold(0.0_f64, |m, s| {
            m.max(libm::fabs(s.heat_j))
                .max(libm::fabs(s.work_j))
                .max(libm::fabs(s.delta_u_j))
        });
        // Heat below rounding is no heat: rounding in a step's heat is
        // relative to the gas's internal energy (n·Cv·T), not to the step's
        // own size, so a step of nearly nothing cannot pass for heat in.
        let t_top = steps
            .iter()
            .fold(self.start.temperature_k(), |m, s| m.max(s.t_max_k()));
        let u_scale = libm::fabs(self.gas.heat_capacity_v_j_per_k() * t_top);
        let tiny = TINY_HEAT * scale.max(u_scale);
        let mut net_work_j = 0.0;
        let (mut heat_in_j, mut entropy_in_j_per_k) = (0.0, 0.0);
        let (mut heat_out_j, mut entropy_out_j_per_k) = (0.0, 0.0);
        let t0 = self.start.temperature_k();
        let (mut t_max_k, mut t_min_k) = (t0, t0);
        for s in steps {
            net_work_j += s.work_j;
            if s.heat_j > tiny {
                heat_in_j += s.heat_j;
                entropy_in_j_per_k += s.delta_s_j_per_k;
            } else if s.heat_j < -tiny {
                heat_out_j -= s.heat_j;
                entropy_out_j_per_k -= s.delta_s_j_per_k;
            }
            // T is monotone along every process here, so the extremes of
            // the cycle are among the step end points.
            t_max_k = t_max_k.max(s.t_max_k());
            t_min_k = t_min_k.min(s.t_min_k());
        }
        let closed = last.end.approx_eq(&self.start);
        let ratio = |num: f64, den: f64| {
            let r = num / den;
            (closed && den > 0.0 && num.is_finite() && r.is_finite()).then_some(r)
        };
        let mean_in = ratio(heat_in_j, entropy_in_j_per_k).filter(|t| *t > 0.0);
        let mean_out = ratio(heat_out_j, entropy_out_j_per_k).filter(|t| *t > 0.0);
        Ok(CycleSummary {
            closed,
            step_count: steps.len(),
            net_work_j,
            heat_in_j,
            heat_out_j,
            efficiency: if heat_in_j > 0.0 {
                ratio(net_work_j, heat_in_j)
            } else {
                None
            },
            carnot_efficiency: ratio(t_max_k - t_min_k, t_max_k),
            t_max_k,
            t_min_k,
            mean_heat_in_temperature_k: if heat_in_j > 0.0 { mean_in } else { None },
            mean_heat_out_temperature_k: if heat_out_j > 0.0 { mean_out } else { None },
            // ΔS is a state function: from the start to the last end state,
            // exactly 0 when the last step returned `to_start`.
            total_delta_s_j_per_k: delta_s(&self.gas, &self.start, &last.end),
        })
    }
}

/// The figures of a cycle or open path.
///
/// For an open path (`closed == false`) the efficiency, the Carnot bound and
/// the mean temperatures are `None`; so is any ratio whose denominator is
/// not positive.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub struct CycleSummary {
    /// The last end state equals the start (relative 1e-9 on p, V and T).
    pub closed: bool,
    /// Number of steps.
    pub step_count: usize,
    /// Net work done by the gas, the sum of the step works (J).
    pub net_work_j: f64,
    /// Heat in: the sum of the positive step heats (J).
    pub heat_in_j: f64,
    /// Heat out: minus the sum of the negative step heats (J).
    pub heat_out_j: f64,
    /// Thermal efficiency `net_work_j / heat_in_j`.
    pub efficiency: Option<f64>,
    /// Carnot bound `1 − t_min_k / t_max_k` between the cycle's extreme
    /// temperatures.
    pub carnot_efficiency: Option<f64>,
    /// Highest temperature reached (K).
    pub t_max_k: f64,
    /// Lowest temperature reached (K).
    pub t_min_k: f64,
    /// Heat-weighted mean temperature of heat addition: heat in over the
    /// entropy change of the heat-receiving steps (K).
    pub mean_heat_in_temperature_k: Option<f64>,
    /// Heat-weighted mean temperature of heat rejection: heat out over minus
    /// the entropy change of the heat-rejecting steps (K). For a reversible
    /// cycle `η = 1 − T_out/T_in`.
    pub mean_heat_out_temperature_k: Option<f64>,
    /// Entropy change of the gas from start to end (J/K); 0 for a closed
    /// cycle.
    pub total_delta_s_j_per_k: f64,
}

/// Why a step could not be added, or a summary made.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum CycleError {
    /// The cycle already holds `capacity` steps.
    Full {
        /// The capacity `N`.
        capacity: usize,
    },
    /// The cycle has no steps.
    Empty,
    /// The step's process cannot reach its end condition.
    Process(ProcessError),
}

impl core::fmt::Display for CycleError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Self::Full { capacity } => write!(f, "too many steps: at most {capacity}"),
            Self::Empty => f.write_str("the cycle has no steps"),
            Self::Process(e) => core::fmt::Display::fmt(e, f),
        }
    }
}

impl core::error::Error for CycleError {
    fn source(&self) -> Option<&(dyn core::error::Error + 'static)> {
        match self {
            Self::Process(e) => Some(e),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn stirling(regen_cv_over_r: f64) -> CycleSummary {
        let gas = Gas::with_gamma(1.0, 1.0 + 1.0 / regen_cv_over_r).unwrap();
        let s = State::from_p_t(&gas, 1e5, 300.0).unwrap();
        let mut c: Cycle<4> = Cycle::new(gas, s);
        c.push(Process::Isothermal, EndCondition::VolumeRatio(0.5))
            .unwrap();
        c.push(Process::Isochoric, EndCondition::TemperatureK(600.0))
            .unwrap();
        c.push(Process::Isothermal, EndCondition::VolumeRatio(2.0))
            .unwrap();
        c.push(Process::Isochoric, EndCondition::ToStart).unwrap();
        c.summary().unwrap()
    }

    #[test]
    fn stirling_figures() {
        let s = stirling(1.5);
        assert!(s.closed);
        assert_eq!(s.total_delta_s_j_per_k, 0.0);
        let eta = s.efficiency.unwrap();
        let t_in = s.mean_heat_in_temperature_k.unwrap();
        let t_out = s.mean_heat_out_temperature_k.unwrap();
        assert!((eta - (1.0 - t_out / t_in)).abs() < 1e-12);
        assert!(eta < s.carnot_efficiency.unwrap());
        assert!((s.net_work_j - (s.heat_in_j - s.heat_out_j)).abs() < 1e-9);
    }

    #[test]
    fn open_path_has_no_ratios() {
        let gas = Gas::with_gamma(1.0, 1.4).unwrap();
        let mut c: Cycle<2> = Cycle::new(gas, State::from_p_t(&gas, 1e5, 300.0).unwrap());
        c.push(Process::Isobaric, EndCondition::VolumeRatio(2.0))
            .unwrap();
        let s = c.summary().unwrap();
        assert!(!s.closed);
        assert_eq!(s.efficiency, None);
        assert_eq!(s.carnot_efficiency, None);
        assert_eq!(s.mean_heat_in_temperature_k, None);
        assert_eq!(s.mean_heat_out_temperature_k, None);
        assert_eq!((s.t_min_k, s.t_max_k), (300.0, 600.0));
        assert!(s.heat_in_j > 0.0 && s.heat_out_j == 0.0);
    }

    #[test]
    fn failed_push_leaves_cycle_unchanged() {
        let gas = Gas::with_gamma(1.0, 1.4).unwrap();
        let mut c: Cycle<2> = Cycle::new(gas, State::from_p_t(&gas, 1e5, 300.0).unwrap());
        assert!(
            c.push(Process::Isothermal, EndCondition::TemperatureK(400.0))
                .is_err()
        );
        assert!(c.is_empty());
        let mut z: Cycle<0> = Cycle::new(gas, *c.start());
        assert_eq!(
            z.push(Process::Isobaric, EndCondition::VolumeRatio(2.0)),
            Err(CycleError::Full { capacity: 0 })
        );
    }

    #[test]
    fn zero_only_cycle_has_no_efficiency() {
        let gas = Gas::with_gamma(1.0, 1.4).unwrap();
        let mut c: Cycle<2> = Cycle::new(gas, State::from_p_t(&gas, 1e5, 300.0).unwrap());
        c.push(Process::Adiabatic, EndCondition::ToStart).unwrap();
        let s = c.summary().unwrap();
        assert!(s.closed);
        assert_eq!(s.efficiency, None);
        assert_eq!(s.carnot_efficiency, Some(0.0));
        assert_eq!(s.mean_heat_in_temperature_k, None);
    }
}
