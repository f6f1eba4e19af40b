//! Which reading is wrong: a consistency diagnosis from the first and
//! second laws and, with a second hot sensor, their agreement.
//!
//! ```text
//! Monitor::window_integrals --> Window --> diagnose --> Diagnosis
//!                                  |           ^
//!                                  '-> Ua::learn (first steady window, unless configured)
//! ```
//!
//! The method is data reconciliation with gross-error detection and
//! identification: residuals of the relations the readings must satisfy,
//! their covariance from the channels' systematic uncertainties
//! (`V = A Σ Aᵀ`, correlations kept), the global test, the measurement
//! test, and the generalized likelihood ratio (GLR) for a single constant
//! bias, refined on the exact relations. A channel is named a suspect only
//! when it is the one channel whose bias, removed, restores every relation.
//! `docs/diagnosis.md` is the specification, with the table of which faults
//! can be told apart with which channels present.
//!
//! The diagnosis runs at summary rate, not per sample: the monitor only
//! integrates the two extra quantities it needs (`∫T_hot dt` and
//! `∫(T_hot − T_hot2) dt`). Generic over [`Real`](crate::num::Real): `f32`
//! on a controller, `f64` on the host.

mod error;
pub mod linear;
mod model;
mod tracker;
mod ua;
mod verdict;

pub use error::DiagnosisError;
pub use model::{Relation, Window};
pub use tracker::{DiagnosisConfig, Tracker, overlaps_learning};
pub use ua::{Losses, Ua, UaSource};
pub use verdict::{
    CHI2_95, Candidate, Diagnosis, Residual, Settings, Unavailable, diagnose, judge,
};
