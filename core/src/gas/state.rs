//! The gas, its states and the entropy change between two states.

use crate::units::MOLAR_GAS_CONSTANT as R;

/// Relative tolerance for "the same value": an end condition equal to the
/// current value, a `to_start` on the same path, a closed cycle.
pub(crate) const REL_TOL: f64 = 1e-9;

/// `|a − b| ≤ REL_TOL · max(|a|, |b|)`.
pub(crate) fn rel_eq(a: f64, b: f64) -> bool {
    libm::fabs(a - b) <= REL_TOL * libm::fmax(libm::fabs(a), libm::fabs(b))
}

/// `true` when `x` is finite and strictly positive.
pub(crate) fn positive_finite(x: f64) -> bool {
    x.is_finite() && x > 0.0
}

/// `ln(a/b)` for positive finite `a`, `b`, robust against the quotient
/// overflowing or underflowing.
pub(crate) fn ln_ratio(a: f64, b: f64) -> f64 {
    let q = a / b;
    if positive_finite(q) {
        libm::log(q)
    } else {
        libm::log(a) - libm::log(b)
    }
}

/// An amount of ideal gas with constant heat capacities.
///
/// Built by [`Gas::with_gamma`] or [`Gas::with_dof`]; both validate, so a
/// `Gas` always has `n > 0` and `γ > 1`, all finite.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Gas {
    moles_mol: f64,
    gamma: f64,
    cv_molar_j_per_mol_k: f64,
}

impl Gas {
    /// `moles_mol` of gas with heat-capacity ratio `gamma` (`Cv = R/(γ−1)`).
    ///
    /// ```
    /// use heatbound::gas::{Gas, GasError};
    /// let air = Gas::with_gamma(1.0, 1.4)?;
    /// assert!((air.cv_molar_j_per_mol_k() - 2.5 * heatbound::MOLAR_GAS_CONSTANT).abs() < 1e-12);
    /// assert_eq!(Gas::with_gamma(1.0, 1.0), Err(GasError::InvalidGamma));
    /// assert_eq!(Gas::with_gamma(0.0, 1.4), Err(GasError::InvalidMoles));
    /// # Ok::<(), GasError>(())
    /// ```
    pub fn with_gamma(moles_mol: f64, gamma: f64) -> Result<Self, GasError> {
        if !positive_finite(moles_mol) {
            return Err(GasError::InvalidMoles);
        }
        if !(gamma.is_finite() && gamma > 1.0) {
            return Err(GasError::InvalidGamma);
        }
        let cv = R / (gamma - 1.0);
        if !positive_finite(cv) {
            return Err(GasError::InvalidGamma);
        }
        Ok(Self {
            moles_mol,
            gamma,
            cv_molar_j_per_mol_k: cv,
        })
    }

    /// `moles_mol` of gas with `dof` quadratic degrees of freedom
    /// (`Cv = dof/2·R`, `γ = 1 + 2/dof`): 3 for a monatomic gas, 5 for a
    /// diatomic one near room temperature.
    ///
    /// ```
    /// use heatbound::gas::{Gas, GasError};
    /// let helium = Gas::with_dof(0.05, 3.0)?;
    /// assert!((helium.gamma() - 5.0 / 3.0).abs() < 1e-15);
    /// assert_eq!(Gas::with_dof(1.0, 0.0), Err(GasError::InvalidDof));
    /// # Ok::<(), GasError>(())
    /// ```
    pub fn with_dof(moles_mol: f64, dof: f64) -> Result<Self, GasError> {
        if !positive_finite(moles_mol) {
            return Err(GasError::InvalidMoles);
        }
        if !positive_finite(dof) {
            return Err(GasError::InvalidDof);
        }
        let gamma = 1.0 + 2.0 / dof;
        let cv = 0.5 * dof * R;
        // A huge dof rounds γ to exactly 1: the adiabat exponents would
        // divide by zero, so it is rejected like an invalid γ.
        if !(gamma > 1.0 && positive_finite(cv)) {
            return Err(GasError::InvalidDof);
        }
        Ok(Self {
            moles_mol,
            gamma,
            cv_molar_j_per_mol_k: cv,
        })
    }

    /// Amount of gas `n` (mol).
    pub fn moles_mol(&self) -> f64 {
        self.moles_mol
    }

    /// Heat-capacity ratio `γ = Cp/Cv`.
    pub fn gamma(&self) -> f64 {
        self.gamma
    }

    /// Molar heat capacity at constant volume `Cv` (J/(mol·K)).
    pub fn cv_molar_j_per_mol_k(&self) -> f64 {
        self.cv_molar_j_per_mol_k
    }

    /// Molar heat capacity at constant pressure `Cp = Cv + R` (J/(mol·K)).
    pub fn cp_molar_j_per_mol_k(&self) -> f64 {
        self.cv_molar_j_per_mol_k + R
    }

    /// Heat capacity of the whole amount at constant volume `n·Cv` (J/K).
    pub fn heat_capacity_v_j_per_k(&self) -> f64 {
        self.moles_mol * self.cv_molar_j_per_mol_k
    }

    /// Heat capacity of the whole amount at constant pressure `n·Cp` (J/K).
    pub fn heat_capacity_p_j_per_k(&self) -> f64 {
        self.moles_mol * self.cp_molar_j_per_mol_k()
    }

    /// `n·R` (J/K), so that `pV = nR·T`.
    pub fn nr_j_per_k(&self) -> f64 {
        self.moles_mol * R
    }
}

/// Why a [`Gas`] could not be built.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum GasError {
    /// The amount of gas is not positive and finite.
    InvalidMoles,
    /// The heat-capacity ratio is not finite and greater than 1.
    InvalidGamma,
    /// The degrees of freedom are not positive and finite.
    InvalidDof,
}

impl core::fmt::Display for GasError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            Self::InvalidMoles => "moles must be positive and finite",
            Self::InvalidGamma => "gamma must be finite and greater than 1",
            Self::InvalidDof => "degrees of freedom (dof) must be positive and finite",
        })
    }
}

impl core::error::Error for GasError {}

/// An equilibrium state of a [`Gas`]: pressure, volume and temperature,
/// always positive, finite and consistent with `pV = nRT` for the gas it was
/// built with.
///
/// Build it from any two of the three with [`State::from_p_t`],
/// [`State::from_p_v`] or [`State::from_v_t`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct State {
    pressure_pa: f64,
    volume_m3: f64,
    temperature_k: f64,
}

impl State {
    /// The state at `pressure_pa` and `temperature_k`; `V = nRT/p`.
    ///
    /// ```
    /// use heatbound::gas::{Gas, State, StateError};
    /// let air = Gas::with_gamma(1.0, 1.4)?;
    /// let s = State::from_p_t(&air, 101_325.0, 273.15)?;
    /// assert!((s.volume_m3() - 0.022_413_969_5).abs() < 1e-9); // molar volume, from memory
    /// assert_eq!(State::from_p_t(&air, -1.0, 300.0), Err(StateError::InvalidPressure));
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn from_p_t(gas: &Gas, pressure_pa: f64, temperature_k: f64) -> Result<Self, StateError> {
        check(pressure_pa, StateError::InvalidPressure)?;
        check(temperature_k, StateError::InvalidTemperature)?;
        Self::p_t(gas, pressure_pa, temperature_k).ok_or(StateError::OutOfRange)
    }

    /// The state at `pressure_pa` and `volume_m3`; `T = pV/(nR)`.
    ///
    /// ```
    /// use heatbound::gas::{Gas, State};
    /// let air = Gas::with_gamma(1.0, 1.4)?;
    /// let s = State::from_p_v(&air, 100_000.0, 0.025)?;
    /// assert!((s.temperature_k() - 2500.0 / heatbound::MOLAR_GAS_CONSTANT).abs() < 1e-9);
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn from_p_v(gas: &Gas, pressure_pa: f64, volume_m3: f64) -> Result<Self, StateError> {
        check(pressure_pa, StateError::InvalidPressure)?;
        check(volume_m3, StateError::InvalidVolume)?;
        Self::p_v(gas, pressure_pa, volume_m3).ok_or(StateError::OutOfRange)
    }

    /// The state at `volume_m3` and `temperature_k`; `p = nRT/V`.
    ///
    /// ```
    /// use heatbound::gas::{Gas, State, StateError};
    /// let air = Gas::with_gamma(1.0, 1.4)?;
    /// let s = State::from_v_t(&air, 0.001, 300.0)?;
    /// assert!((s.pressure_pa() - 300_000.0 * heatbound::MOLAR_GAS_CONSTANT).abs() < 1e-6);
    /// assert_eq!(State::from_v_t(&air, f64::NAN, 300.0), Err(StateError::InvalidVolume));
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn from_v_t(gas: &Gas, volume_m3: f64, temperature_k: f64) -> Result<Self, StateError> {
        check(volume_m3, StateError::InvalidVolume)?;
        check(temperature_k, StateError::InvalidTemperature)?;
        Self::v_t(gas, volume_m3, temperature_k).ok_or(StateError::OutOfRange)
    }

    /// Pressure `p` (Pa).
    pub fn pressure_pa(&self) -> f64 {
        self.pressure_pa
    }

    /// Volume `V` (m³).
    pub fn volume_m3(&self) -> f64 {
        self.volume_m3
    }

    /// Temperature `T` (K).
    pub fn temperature_k(&self) -> f64 {
        self.temperature_k
    }

    /// `true` when `p`, `V` and `T` all agree with `other`'s to a relative
    /// 1e-9: the test for "the cycle has closed".
    ///
    /// ```
    /// use heatbound::gas::{Gas, State};
    /// let air = Gas::with_gamma(1.0, 1.4)?;
    /// let a = State::from_p_t(&air, 100_000.0, 300.0)?;
    /// let b = State::from_p_t(&air, 100_000.0 * (1.0 + 1e-12), 300.0)?;
    /// assert!(a.approx_eq(&b));
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn approx_eq(&self, other: &State) -> bool {
        rel_eq(self.pressure_pa, other.pressure_pa)
            && rel_eq(self.volume_m3, other.volume_m3)
            && rel_eq(self.temperature_k, other.temperature_k)
    }

    /// Builds from validated `p`, `T`; `None` if `V` is not representable.
    pub(crate) fn p_t(gas: &Gas, p: f64, t: f64) -> Option<Self> {
        Self::checked(p, gas.nr_j_per_k() * t / p, t)
    }

    /// Builds from validated `p`, `V`; `None` if `T` is not representable.
    pub(crate) fn p_v(gas: &Gas, p: f64, v: f64) -> Option<Self> {
        Self::checked(p, v, p * v / gas.nr_j_per_k())
    }

    /// Builds from validated `V`, `T`; `None` if `p` is not representable.
    pub(crate) fn v_t(gas: &Gas, v: f64, t: f64) -> Option<Self> {
        Self::checked(gas.nr_j_per_k() * t / v, v, t)
    }

    /// A state whose three values the caller has made consistent; `None`
    /// unless all are positive and finite.
    pub(crate) fn checked(p: f64, v: f64, t: f64) -> Option<Self> {
        (positive_finite(p) && positive_finite(v) && positive_finite(t)).then_some(Self {
            pressure_pa: p,
            volume_m3: v,
            temperature_k: t,
        })
    }
}

fn check(x: f64, err: StateError) -> Result<(), StateError> {
    if positive_finite(x) { Ok(()) } else { Err(err) }
}

/// Why a [`State`] could not be built.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum StateError {
    /// The pressure is not positive and finite.
    InvalidPressure,
    /// The volume is not positive and finite.
    InvalidVolume,
    /// The temperature is not positive and finite.
    InvalidTemperature,
    /// The third quantity, derived from `pV = nRT`, overflows or underflows.
    OutOfRange,
}

impl core::fmt::Display for StateError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            Self::InvalidPressure => "pressure must be positive and finite",
            Self::InvalidVolume => "volume must be positive and finite",
            Self::InvalidTemperature => "temperature must be positive and finite",
            Self::OutOfRange => "the state is out of range (pV = nRT overflows or underflows)",
        })
    }
}

impl core::error::Error for StateError {}

/// Entropy change of the gas between two states (J/K), as a state function:
/// `ΔS = n·Cv·ln(T2/T1) + n·R·ln(V2/V1)`.
///
/// It holds for any change between equilibrium states, reversible or not,
/// for example a free (Joule) expansion, which has `Q = W = 0`.
///
/// ```
/// use heatbound::gas::{Gas, State, delta_s};
/// let gas = Gas::with_gamma(1.0, 1.4)?;
/// // Free expansion into vacuum: T unchanged, V doubles, ΔS = nR ln 2.
/// let before = State::from_v_t(&gas, 0.01, 300.0)?;
/// let after = State::from_v_t(&gas, 0.02, 300.0)?;
/// let ds = delta_s(&gas, &before, &after);
/// assert!((ds - heatbound::MOLAR_GAS_CONSTANT * 2f64.ln()).abs() < 1e-12);
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn delta_s(gas: &Gas, s1: &State, s2: &State) -> f64 {
    gas.heat_capacity_v_j_per_k() * ln_ratio(s2.temperature_k, s1.temperature_k)
        + gas.nr_j_per_k() * ln_ratio(s2.volume_m3, s1.volume_m3)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gas_validation() {
        assert_eq!(Gas::with_gamma(f64::NAN, 1.4), Err(GasError::InvalidMoles));
        assert_eq!(
            Gas::with_gamma(f64::INFINITY, 1.4),
            Err(GasError::InvalidMoles)
        );
        assert_eq!(Gas::with_gamma(-1.0, 1.4), Err(GasError::InvalidMoles));
        assert_eq!(Gas::with_gamma(1.0, 0.9), Err(GasError::InvalidGamma));
        assert_eq!(
            Gas::with_gamma(1.0, f64::INFINITY),
            Err(GasError::InvalidGamma)
        );
        assert_eq!(
            Gas::with_gamma(1.0, 1.0 + 1e-300),
            Err(GasError::InvalidGamma)
        );
        assert_eq!(Gas::with_dof(1.0, -3.0), Err(GasError::InvalidDof));
        assert_eq!(Gas::with_dof(1.0, 1e300), Err(GasError::InvalidDof));
        assert_eq!(Gas::with_dof(1.0, f64::NAN), Err(GasError::InvalidDof));
        let g = Gas::with_dof(2.0, 5.0).unwrap();
        assert!((g.gamma() - 1.4).abs() < 1e-15);
        assert!((g.heat_capacity_p_j_per_k() - 2.0 * 3.5 * R).abs() < 1e-12);
    }

    #[test]
    fn states_are_consistent() {
        let g = Gas::with_gamma(0.5, 1.4).unwrap();
        let a = State::from_p_t(&g, 2e5, 400.0).unwrap();
        let b = State::from_p_v(&g, a.pressure_pa(), a.volume_m3()).unwrap();
        let c = State::from_v_t(&g, a.volume_m3(), a.temperature_k()).unwrap();
        assert!(a.approx_eq(&b) && a.approx_eq(&c));
        assert_eq!(
            State::from_p_t(&g, 0.0, 1.0),
            Err(StateError::InvalidPressure)
        );
        assert_eq!(
            State::from_p_t(&g, 1.0, f64::NAN),
            Err(StateError::InvalidTemperature)
        );
        assert_eq!(
            State::from_p_v(&g, 1e300, 1e300),
            Err(StateError::OutOfRange)
        );
        assert_eq!(
            State::from_v_t(&g, 1e300, 1e-300),
            Err(StateError::OutOfRange)
        );
    }

    #[test]
    fn delta_s_survives_extreme_ratios() {
        let g = Gas::with_gamma(1.0, 1.4).unwrap();
        let a = State::checked(1.0, 1e-300, 1e-300).unwrap();
        let b = State::checked(1.0, 1e300, 1e300).unwrap();
        let ds = delta_s(&g, &a, &b);
        assert!(ds.is_finite() && ds > 0.0);
    }
}
