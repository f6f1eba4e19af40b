//! Ideal-gas processes, cycles and measured p-V loops.
//!
//! This module is the *design* branch of the data flow:
//!
//! ```text
//! design:  ideal-gas cycle file --> gas::Cycle --> reference efficiency (`heatbound cycle`)
//! rig:     sampled p-V loop     --> gas::indicated_work_j --> indicated power
//! ```
//!
//! It gives the reference figures a rig's measured efficiency is judged
//! against: the ideal cycle's efficiency, its Carnot bound and the
//! heat-weighted mean temperatures of heat addition and rejection. Nothing
//! here reads a sensor; the monitor consumes these figures as constants.
//!
//! The model is the ideal gas with constant heat capacities (the
//! "cold-air standard" of engineering thermodynamics): `pV = nRT`, molar
//! `Cv = R/(γ−1)`, `Cp = γ·Cv`, with `R` = [`crate::units::MOLAR_GAS_CONSTANT`].
//! Sign conventions: heat is *into* the gas, work is *by* the gas, so every
//! step satisfies `Q = W + ΔU`.
//!
//! Everything is `f64`, heap-free and panic-free: invalid input is a typed
//! error, never a NaN.
//!
//! ```
//! use heatbound::gas::{Cycle, EndCondition, Gas, Process, State};
//!
//! // An Otto cycle, r = 8, γ = 1.4: η = 1 − r^(1−γ) ≈ 0.56472.
//! let air = Gas::with_gamma(1.0, 1.4)?;
//! let start = State::from_p_t(&air, 100_000.0, 300.0)?;
//! let mut otto: Cycle<4> = Cycle::new(air, start);
//! otto.push(Process::Adiabatic, EndCondition::VolumeRatio(1.0 / 8.0))?;
//! otto.push(Process::Isochoric, EndCondition::TemperatureK(1800.0))?;
//! otto.push(Process::Adiabatic, EndCondition::VolumeRatio(8.0))?;
//! otto.push(Process::Isochoric, EndCondition::ToStart)?;
//! let summary = otto.summary()?;
//! assert!(summary.closed);
//! let eta = summary.efficiency.ok_or("no efficiency")?;
//! assert!((eta - (1.0 - 8f64.powf(-0.4))).abs() < 1e-12);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

mod cycle;
mod process;
mod pv;
mod state;

pub use cycle::{Cycle, CycleError, CycleSummary};
pub use process::{EndCondition, Process, ProcessError, Step};
pub use pv::{PvError, indicated_power_w, indicated_work_j, polytropic_exponent};
pub use state::{Gas, GasError, State, StateError, delta_s};
