//! Reversible ideal-gas processes: one step from a state to an end condition.

use super::state::{Gas, State, delta_s, ln_ratio, positive_finite, rel_eq};

/// A reversible process of an ideal gas.
///
/// All but [`Process::Isochoric`] are polytropes `p·V^k = const`:
/// isothermal `k = 1`, adiabatic `k = γ`, isobaric `k = 0`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Process {
    /// Constant temperature (`pV = const`); heat is exchanged at `T`.
    Isothermal,
    /// Reversible adiabatic, i.e. isentropic (`pV^γ = const`, `Q = 0`).
    Adiabatic,
    /// Constant volume (`W = 0`).
    Isochoric,
    /// Constant pressure (`W = pΔV`).
    Isobaric,
    /// `p·V^exponent = const`, for any finite exponent.
    Polytropic {
        /// The polytropic exponent `k`.
        exponent: f64,
    },
}

impl Process {
    /// The name used in cycle files and reports: `isothermal`, `adiabatic`,
    /// `isochoric`, `isobaric` or `polytropic`.
    ///
    /// ```
    /// use heatbound::gas::Process;
    /// assert_eq!(Process::Polytropic { exponent: 1.3 }.name(), "polytropic");
    /// ```
    pub fn name(&self) -> &'static str {
        match self {
            Self::Isothermal => "isothermal",
            Self::Adiabatic => "adiabatic",
            Self::Isochoric => "isochoric",
            Self::Isobaric => "isobaric",
            Self::Polytropic { .. } => "polytropic",
        }
    }

    /// Runs the process from `from` until `end` is met.
    ///
    /// `cycle_start` is the state [`EndCondition::ToStart`] returns to; for a
    /// lone step pass whatever state that condition should mean. The returned
    /// [`Step`] satisfies `Q = W + ΔU`; an adiabatic step has `Q = 0` and
    /// `ΔS = 0` exactly.
    ///
    /// An end condition the process cannot reach (a new volume at constant
    /// volume, a start state off the adiabat, ...) is an error. A condition
    /// equal to the current value within a relative 1e-9 is a zero step.
    ///
    /// ```
    /// use heatbound::gas::{EndCondition, Gas, Process, ProcessError, State};
    /// let gas = Gas::with_gamma(1.0, 1.4)?;
    /// let s1 = State::from_p_t(&gas, 100_000.0, 300.0)?;
    /// let step = Process::Isothermal.run(&gas, &s1, EndCondition::VolumeRatio(2.0), &s1)?;
    /// let w = gas.nr_j_per_k() * 300.0 * 2f64.ln(); // W = nRT ln(V2/V1)
    /// assert!((step.work_j - w).abs() < 1e-9 && (step.heat_j - w).abs() < 1e-9);
    ///
    /// let err = Process::Isochoric.run(&gas, &s1, EndCondition::VolumeRatio(2.0), &s1);
    /// assert_eq!(err, Err(ProcessError::ConstantVolume));
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn run(
        &self,
        gas: &Gas,
        from: &State,
        end: EndCondition,
        cycle_start: &State,
    ) -> Result<Step, ProcessError> {
        end.validate()?;
        let step = match *self {
            Self::Isochoric => isochoric(gas, from, end, cycle_start)?,
            Self::Isothermal => polytrope(gas, from, end, cycle_start, *self, 1.0)?,
            Self::Adiabatic => polytrope(gas, from, end, cycle_start, *self, gas.gamma())?,
            Self::Isobaric => polytrope(gas, from, end, cycle_start, *self, 0.0)?,
            Self::Polytropic { exponent } => {
                if !exponent.is_finite() {
                    return Err(ProcessError::InvalidExponent);
                }
                polytrope(gas, from, end, cycle_start, *self, exponent)?
            }
        };
        let finite = [
            step.heat_j,
            step.work_j,
            step.delta_u_j,
            step.delta_s_j_per_k,
        ]
        .iter()
        .all(|x| x.is_finite());
        if finite {
            Ok(step)
        } else {
            Err(ProcessError::OutOfRange)
        }
    }
}

impl core::fmt::Display for Process {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.name())
    }
}

/// Where a step ends.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum EndCondition {
    /// At this volume (m³).
    VolumeM3(f64),
    /// At this pressure (Pa).
    PressurePa(f64),
    /// At this temperature (K).
    TemperatureK(f64),
    /// At `V_end / V_start` equal to this ratio.
    VolumeRatio(f64),
    /// At `p_end / p_start` equal to this ratio.
    PressureRatio(f64),
    /// Back at the cycle's start state.
    ToStart,
}

impl EndCondition {
    fn validate(&self) -> Result<(), ProcessError> {
        match *self {
            Self::VolumeM3(x)
            | Self::PressurePa(x)
            | Self::TemperatureK(x)
            | Self::VolumeRatio(x)
            | Self::PressureRatio(x) => {
                if positive_finite(x) {
                    Ok(())
                } else {
                    Err(ProcessError::InvalidEndValue)
                }
            }
            Self::ToStart => Ok(()),
        }
    }
}

/// One completed process step: its end points and energy account.
///
/// Signs: `heat_j` is heat into the gas, `work_j` is work done by the gas,
/// and `heat_j = work_j + delta_u_j`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub struct Step {
    /// The process run.
    pub process: Process,
    /// The state the step started from.
    pub start: State,
    /// The state the step ended at.
    pub end: State,
    /// Heat into the gas `Q` (J).
    pub heat_j: f64,
    /// Work done by the gas `W` (J).
    pub work_j: f64,
    /// Change of internal energy `ΔU = n·Cv·ΔT` (J).
    pub delta_u_j: f64,
    /// Change of the gas's entropy `ΔS` (J/K).
    pub delta_s_j_per_k: f64,
}

impl Step {
    /// A step that goes nowhere.
    pub(crate) fn zero(process: Process, at: State) -> Self {
        Self {
            process,
            start: at,
            end: at,
            heat_j: 0.0,
            work_j: 0.0,
            delta_u_j: 0.0,
            delta_s_j_per_k: 0.0,
        }
    }

    /// The highest temperature reached along the step (K).
    ///
    /// Along every process here `T` is monotone between the end points
    /// (isochoric `T ∝ p`, polytropic `T ∝ V^(1−k)` with `V` monotone), so
    /// the larger end-point temperature is the maximum.
    ///
    /// ```
    /// use heatbound::gas::{EndCondition, Gas, Process, State};
    /// let gas = Gas::with_gamma(1.0, 1.4)?;
    /// let s1 = State::from_p_t(&gas, 100_000.0, 300.0)?;
    /// let step = Process::Isobaric.run(&gas, &s1, EndCondition::TemperatureK(500.0), &s1)?;
    /// assert_eq!((step.t_min_k(), step.t_max_k()), (300.0, 500.0));
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn t_max_k(&self) -> f64 {
        libm::fmax(self.start.temperature_k(), self.end.temperature_k())
    }

    /// The lowest temperature reached along the step (K); see
    /// [`Step::t_max_k`] for why the end points suffice.
    pub fn t_min_k(&self) -> f64 {
        libm::fmin(self.start.temperature_k(), self.end.temperature_k())
    }
}

/// Why a process step could not be run.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ProcessError {
    /// The polytropic exponent is not finite.
    InvalidExponent,
    /// An end value or ratio is not positive and finite.
    InvalidEndValue,
    /// The end condition asks for a new volume at constant volume.
    ConstantVolume,
    /// The end condition asks for a new pressure along a constant-pressure
    /// path (isobaric, or polytropic with exponent 0).
    ConstantPressure,
    /// The end condition asks for a new temperature along a
    /// constant-temperature path (isothermal, or polytropic with exponent 1).
    ConstantTemperature,
    /// `to_start`: the cycle's start state is not on this process's path
    /// through the current state.
    StartNotOnPath {
        /// The process that cannot reach the start.
        process: Process,
    },
    /// The end state or the energies overflow or underflow `f64`.
    OutOfRange,
}

impl core::fmt::Display for ProcessError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Self::InvalidExponent => f.write_str("the polytropic exponent must be finite"),
            Self::InvalidEndValue => f.write_str("the end value must be positive and finite"),
            Self::ConstantVolume => f.write_str("cannot change volume at constant volume"),
            Self::ConstantPressure => f.write_str("cannot change pressure at constant pressure"),
            Self::ConstantTemperature => {
                f.write_str("cannot change temperature at constant temperature")
            }
            Self::StartNotOnPath { process } => {
                let path = match process {
                    Process::Isothermal => "isotherm",
                    Process::Adiabatic => "adiabat",
                    Process::Isochoric => "isochore",
                    Process::Isobaric => "isobar",
                    Process::Polytropic { .. } => "polytrope",
                };
                write!(
                    f,
                    "cannot return to the start state: it is not on the same {path} as the current state"
                )
            }
            Self::OutOfRange => {
                f.write_str("the end state is out of range (overflow or underflow)")
            }
        }
    }
}

impl core::error::Error for ProcessError {}

/// Assembles a step from its end state and work; `ΔU` from the temperatures
/// and `Q = W + ΔU`.
fn finish(gas: &Gas, process: Process, from: &State, end: State, work_j: f64) -> Step {
    let delta_u_j = gas.heat_capacity_v_j_per_k() * (end.temperature_k() - from.temperature_k());
    Step {
        process,
        start: *from,
        end,
        heat_j: work_j + delta_u_j,
        work_j,
        delta_u_j,
        delta_s_j_per_k: delta_s(gas, from, &end),
    }
}

fn isochoric(
    gas: &Gas,
    from: &State,
    end: EndCondition,
    start: &State,
) -> Result<Step, ProcessError> {
    let (p1, v1, t1) = (from.pressure_pa(), from.volume_m3(), from.temperature_k());
    let to = match end {
        EndCondition::VolumeM3(v) if rel_eq(v, v1) => Some(*from),
        EndCondition::VolumeRatio(r) if rel_eq(r, 1.0) => Some(*from),
        EndCondition::VolumeM3(_) | EndCondition::VolumeRatio(_) => {
            return Err(ProcessError::ConstantVolume);
        }
        EndCondition::PressurePa(p) => State::checked(p, v1, t1 * (p / p1)),
        EndCondition::PressureRatio(r) => State::checked(p1 * r, v1, t1 * r),
        EndCondition::TemperatureK(t) => State::checked(p1 * (t / t1), v1, t),
        EndCondition::ToStart if rel_eq(start.volume_m3(), v1) => Some(*start),
        EndCondition::ToStart => {
            return Err(ProcessError::StartNotOnPath {
                process: Process::Isochoric,
            });
        }
    }
    .ok_or(ProcessError::OutOfRange)?;
    if to == *from {
        return Ok(Step::zero(Process::Isochoric, *from));
    }
    Ok(finish(gas, Process::Isochoric, from, to, 0.0))
}

/// `φ(x) = (eˣ − 1)/x`, continuous through `x = 0` where it is 1.
fn phi(x: f64) -> f64 {
    if libm::fabs(x) < 1e-5 {
        // Taylor series; the next term, x⁴/120, is below 1e-22 here.
        1.0 + x * (0.5 + x * (1.0 / 6.0 + x / 24.0))
    } else {
        libm::expm1(x) / x
    }
}

/// A step along `p·V^k = const` through `from`.
fn polytrope(
    gas: &Gas,
    from: &State,
    end: EndCondition,
    start: &State,
    process: Process,
    k: f64,
) -> Result<Step, ProcessError> {
    let (p1, v1, t1) = (from.pressure_pa(), from.volume_m3(), from.temperature_k());
    // The end state, with the specified quantity kept exact.
    let on_curve = |v2: f64| {
        let s = v1 / v2;
        (p1 * libm::pow(s, k), v2, t1 * libm::pow(s, k - 1.0))
    };
    let (p2, v2, t2) = match end {
        EndCondition::VolumeM3(v) => on_curve(v),
        EndCondition::VolumeRatio(r) => on_curve(v1 * r),
        EndCondition::PressurePa(_) | EndCondition::PressureRatio(_) => {
            let (p, ratio) = match end {
                EndCondition::PressurePa(p) => (p, p / p1),
                EndCondition::PressureRatio(r) => (p1 * r, r),
                _ => return Err(ProcessError::InvalidEndValue),
            };
            if k == 0.0 {
                if rel_eq(ratio, 1.0) {
                    return Ok(Step::zero(process, *from));
                }
                return Err(ProcessError::ConstantPressure);
            }
            let (_, v, t) = on_curve(v1 * libm::pow(ratio, -1.0 / k));
            (p, v, t)
        }
        EndCondition::TemperatureK(t) => {
            let ratio = t / t1;
            if k == 1.0 {
                if rel_eq(ratio, 1.0) {
                    return Ok(Step::zero(process, *from));
                }
                return Err(ProcessError::ConstantTemperature);
            }
            let (p, v, _) = on_curve(v1 * libm::pow(ratio, 1.0 / (1.0 - k)));
            (p, v, t)
        }
        EndCondition::ToStart => {
            // On the same polytrope when (p_s/p1)·(V_s/V1)^k = 1.
            let invariant = (start.pressure_pa() / p1) * libm::pow(start.volume_m3() / v1, k);
            if !rel_eq(invariant, 1.0) {
                return Err(ProcessError::StartNotOnPath { process });
            }
            (
                start.pressure_pa(),
                start.volume_m3(),
                start.temperature_k(),
            )
        }
    };
    let to = State::checked(p2, v2, t2).ok_or(ProcessError::OutOfRange)?;
    if to == *from {
        return Ok(Step::zero(process, *from));
    }
    let ln_r = ln_ratio(v2, v1);
    let step = match process {
        Process::Adiabatic => {
            // Q = 0 by construction, not by rounding, and ΔS = 0 with it.
            let mut s = finish(gas, process, from, to, 0.0);
            s.work_j = -s.delta_u_j;
            s.heat_j = 0.0;
            s.delta_s_j_per_k = 0.0;
            s
        }
        Process::Isothermal => finish(gas, process, from, to, p1 * v1 * ln_r),
        Process::Isobaric => finish(gas, process, from, to, p1 * (v2 - v1)),
        _ => {
            // W = (p1V1 − p2V2)/(k − 1) is 0/0 as k → 1. With r = V2/V1,
            // p2V2 = p1V1·r^(1−k), so W = p1V1·(r^(1−k) − 1)/(1 − k)
            //   = p1V1·ln r·φ((1 − k)·ln r), φ(x) = (eˣ − 1)/x,
            // which is smooth through k = 1 (φ(0) = 1: W = p1V1 ln r).
            let w = p1 * v1 * ln_r * phi((1.0 - k) * ln_r);
            let mut s = finish(gas, process, from, to, w);
            // Along p V^k = C, dQ = n Cv dT + p dV = (γ − k)/(γ − 1)·p dV.
            // p > 0 and V is monotone along the step, so dQ never changes
            // sign within it: classifying a step as heat-in or heat-out by
            // its whole-step Q is exact. Writing Q this way also makes
            // k = γ give Q = 0 exactly.
            s.heat_j = w * (gas.gamma() - k) / (gas.gamma() - 1.0);
            s
        }
    };
    Ok(step)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn air() -> (Gas, State) {
        let g = Gas::with_gamma(1.0, 1.4).unwrap();
        let s = State::from_p_t(&g, 1e5, 300.0).unwrap();
        (g, s)
    }

    fn run(p: Process, end: EndCondition) -> Result<Step, ProcessError> {
        let (g, s) = air();
        p.run(&g, &s, end, &s)
    }

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / a.abs().max(b.abs()).max(1e-300)
    }

    fn closes(s: &Step) {
        assert!(
            (s.heat_j - s.work_j - s.delta_u_j).abs()
                <= 1e-12
                    * s.heat_j
                        .abs()
                        .max(s.work_j.abs())
                        .max(s.delta_u_j.abs())
                        .max(1.0)
        );
    }

    #[test]
    fn polytropic_near_one_matches_isothermal() {
        let iso = run(Process::Isothermal, EndCondition::VolumeRatio(3.0)).unwrap();
        for k in [1.0 - 1e-9, 1.0, 1.0 + 1e-9, 1.0 + 1e-12] {
            let poly = run(
                Process::Polytropic { exponent: k },
                EndCondition::VolumeRatio(3.0),
            )
            .unwrap();
            assert!(rel(poly.work_j, iso.work_j) < 1e-6, "k = {k}");
            assert!(rel(poly.heat_j, iso.heat_j) < 1e-6, "k = {k}");
            assert!(rel(poly.end.pressure_pa(), iso.end.pressure_pa()) < 1e-6);
            assert!(poly.delta_u_j.abs() < 1e-5 * iso.work_j.abs());
            closes(&poly);
        }
    }

    #[test]
    fn polytropic_at_gamma_matches_adiabatic() {
        let ad = run(Process::Adiabatic, EndCondition::VolumeRatio(0.125)).unwrap();
        let poly = run(
            Process::Polytropic { exponent: 1.4 },
            EndCondition::VolumeRatio(0.125),
        )
        .unwrap();
        assert_eq!(ad.heat_j, 0.0);
        assert_eq!(ad.delta_s_j_per_k, 0.0);
        assert_eq!(poly.heat_j, 0.0);
        assert!(rel(poly.work_j, ad.work_j) < 1e-12);
        assert!(rel(poly.end.temperature_k(), ad.end.temperature_k()) < 1e-12);
        // Otto compression: T2 = T1 r^(γ−1), textbook.
        assert!(rel(ad.end.temperature_k(), 300.0 * 8f64.powf(0.4)) < 1e-12);
        closes(&ad);
    }

    #[test]
    fn polytropic_zero_is_isobaric() {
        let ib = run(Process::Isobaric, EndCondition::VolumeRatio(2.0)).unwrap();
        let poly = run(
            Process::Polytropic { exponent: 0.0 },
            EndCondition::VolumeRatio(2.0),
        )
        .unwrap();
        assert!(rel(ib.work_j, poly.work_j) < 1e-12);
        assert!(rel(ib.heat_j, poly.heat_j) < 1e-12);
        assert_eq!(poly.end.pressure_pa(), 1e5);
        closes(&ib);
    }

    #[test]
    fn every_end_condition_of_every_process() {
        let (g, s) = air();
        let procs = [
            Process::Isothermal,
            Process::Adiabatic,
            Process::Isochoric,
            Process::Isobaric,
            Process::Polytropic { exponent: 1.25 },
            Process::Polytropic { exponent: -0.5 },
        ];
        let ends = [
            EndCondition::VolumeM3(s.volume_m3() * 0.5),
            EndCondition::PressurePa(2e5),
            EndCondition::TemperatureK(450.0),
            EndCondition::VolumeRatio(0.5),
            EndCondition::PressureRatio(2.0),
            EndCondition::ToStart,
        ];
        for p in procs {
            for e in ends {
                match p.run(&g, &s, e, &s) {
                    Ok(step) => {
                        closes(&step);
                        assert!(step.end.pressure_pa().is_finite());
                        let e = step.end;
                        assert!(
                            rel(
                                e.pressure_pa() * e.volume_m3(),
                                g.nr_j_per_k() * e.temperature_k()
                            ) < 1e-12
                        );
                    }
                    Err(err) => assert!(
                        matches!(
                            (p, e, err),
                            (
                                Process::Isothermal,
                                EndCondition::TemperatureK(_),
                                ProcessError::ConstantTemperature
                            ) | (
                                Process::Isochoric,
                                EndCondition::VolumeM3(_) | EndCondition::VolumeRatio(_),
                                ProcessError::ConstantVolume
                            ) | (
                                Process::Isobaric,
                                EndCondition::PressurePa(_) | EndCondition::PressureRatio(_),
                                ProcessError::ConstantPressure
                            )
                        ),
                        "{p:?} {e:?} {err:?}"
                    ),
                }
            }
        }
    }

    #[test]
    fn unreachable_end_conditions_are_errors() {
        use EndCondition::*;
        use ProcessError::*;
        assert_eq!(
            run(Process::Isochoric, VolumeRatio(1.5)),
            Err(ConstantVolume)
        );
        assert_eq!(run(Process::Isochoric, VolumeM3(1.0)), Err(ConstantVolume));
        assert_eq!(
            run(Process::Isothermal, TemperatureK(301.0)),
            Err(ConstantTemperature)
        );
        assert_eq!(
            run(Process::Isobaric, PressurePa(2e5)),
            Err(ConstantPressure)
        );
        assert_eq!(
            run(Process::Isobaric, PressureRatio(0.5)),
            Err(ConstantPressure)
        );
        let k1 = Process::Polytropic { exponent: 1.0 };
        assert_eq!(run(k1, TemperatureK(400.0)), Err(ConstantTemperature));
        let k0 = Process::Polytropic { exponent: 0.0 };
        assert_eq!(run(k0, PressureRatio(3.0)), Err(ConstantPressure));
        let nan = Process::Polytropic { exponent: f64::NAN };
        assert_eq!(run(nan, VolumeRatio(2.0)), Err(InvalidExponent));
        for bad in [0.0, -1.0, f64::NAN, f64::INFINITY] {
            assert_eq!(
                run(Process::Isothermal, VolumeRatio(bad)),
                Err(InvalidEndValue)
            );
            assert_eq!(
                run(Process::Adiabatic, PressurePa(bad)),
                Err(InvalidEndValue)
            );
        }
        // to_start from a state that is not on the same path.
        let (g, s) = air();
        let elsewhere = State::from_p_t(&g, 3e5, 350.0).unwrap();
        for p in [
            Process::Isothermal,
            Process::Adiabatic,
            Process::Isochoric,
            Process::Isobaric,
            k1,
        ] {
            assert_eq!(
                p.run(&g, &elsewhere, ToStart, &s),
                Err(StartNotOnPath { process: p })
            );
        }
    }

    #[test]
    fn equal_conditions_are_zero_steps() {
        use EndCondition::*;
        let (g, s) = air();
        let z = run(Process::Isochoric, VolumeM3(s.volume_m3() * (1.0 + 1e-12))).unwrap();
        assert_eq!((z.heat_j, z.work_j, z.end), (0.0, 0.0, s));
        let z = run(Process::Isothermal, TemperatureK(300.0 * (1.0 - 1e-11))).unwrap();
        assert_eq!((z.heat_j, z.end), (0.0, s));
        let z = run(Process::Isobaric, PressureRatio(1.0)).unwrap();
        assert_eq!(z.work_j, 0.0);
        for p in [
            Process::Adiabatic,
            Process::Isothermal,
            Process::Isochoric,
            Process::Isobaric,
        ] {
            let z = p.run(&g, &s, ToStart, &s).unwrap();
            assert_eq!((z.heat_j, z.work_j, z.delta_s_j_per_k), (0.0, 0.0, 0.0));
        }
    }

    #[test]
    fn to_start_snaps_exactly() {
        let (g, s) = air();
        let mid = Process::Adiabatic
            .run(&g, &s, EndCondition::VolumeRatio(0.2), &s)
            .unwrap();
        let back = Process::Adiabatic
            .run(&g, &mid.end, EndCondition::ToStart, &s)
            .unwrap();
        assert_eq!(back.end, s);
        assert!(rel(back.work_j, -mid.work_j) < 1e-12);
    }

    #[test]
    fn extreme_inputs_give_errors_not_nan() {
        use EndCondition::*;
        let extremes = [1e-300, 1e-30, 1e30, 1e300, f64::MAX, f64::MIN_POSITIVE];
        let (g, s) = air();
        for k in [-1e6, -3.0, 1e-300, 0.5, 1.0 + 1e-15, 5.0, 1e6] {
            for x in extremes {
                for e in [
                    VolumeM3(x),
                    PressurePa(x),
                    TemperatureK(x),
                    VolumeRatio(x),
                    PressureRatio(x),
                ] {
                    let p = Process::Polytropic { exponent: k };
                    if let Ok(step) = p.run(&g, &s, e, &s) {
                        assert!(step.heat_j.is_finite() && step.work_j.is_finite());
                        assert!(step.delta_u_j.is_finite() && step.delta_s_j_per_k.is_finite());
                    }
                }
            }
        }
        let tiny = Gas::with_gamma(1e-300, 1.0 + 1e-12).unwrap();
        let s = State::from_p_t(&tiny, 1e5, 300.0).unwrap();
        for p in [
            Process::Isothermal,
            Process::Adiabatic,
            Process::Isochoric,
            Process::Isobaric,
        ] {
            if let Ok(step) = p.run(&tiny, &s, VolumeRatio(1e10), &s) {
                assert!(step.heat_j.is_finite() && step.work_j.is_finite());
            }
        }
    }
}
