//! The monitor: samples in, second-law figures out, O(1) per sample.
//!
//! ```text
//! conversion --> Sample --> Monitor::push --> window + run integrals
//!                                    |--> Monitor::alarm_inputs --> AlarmSet::update
//!                                    '--> Monitor::window_metrics / totals_metrics (on demand)
//! ```
//!
//! ## Definitions
//! - Integration is by the trapezoidal rule between consecutive valid samples.
//!   A spacing longer than `max_gap_s` is not bridged: integration restarts
//!   after it. Invalid samples are skipped and counted, and their valid
//!   neighbours are joined when the spacing allows.
//! - `Q_in = ∫q_in dt`, `W = ∫w dt`, `Q_out = ∫q_out dt` when heat out is
//!   measured, else `Q_in − W`.
//! - Heat-weighted mean temperatures `T_h = Q_in / ∫(q_in/T_hot) dt` and
//!   `T_c = Q_out / ∫(q_out/T_cold) dt`.
//! - `η = W/Q_in`, `η_C = 1 − T_c/T_h`, `η_CA = 1 − √(T_c/T_h)`, margin
//!   `η_C − η`, second-law efficiency `η/η_C`.
//! - `S_gen = ∫(q_out/T_cold) dt + Q_loss/T0 − ∫(q_in/T_hot) dt`, with
//!   `Q_loss = Q_in − W − Q_out` only when heat out is measured; `σ̇ = S_gen`
//!   per second of integrated time; exergy destroyed `T0·S_gen` (Gouy–Stodola).
//!   `T0` is the configured ambient, else the cold-side mean: the time mean
//!   of `T_cold` when heat out is measured (a heat-weighted mean would be
//!   undefined once the coolant stops carrying heat), `T_c` when inferred.
//! - Heat pump and cooler: COP `Q_in/W` (heat delivered) or `Q_out/W` (heat
//!   drawn) against `T_h/(T_h − T_c)` or `T_c/(T_h − T_c)`; the entropy
//!   account changes sign with the direction of the heat flows.
//! - A figure whose denominator is ≤ 0 is `None`, never NaN or inf.
//!
//! ## Uncertainty (GUM, JCGM 100:2008, first-order law of propagation)
//! Each channel's standard uncertainty is a *systematic* error: an offset of
//! the hot or cold temperature, or a scale error of a power channel, shared
//! by every sample. Such errors do not average down over a window. The
//! monitor therefore keeps, beside the plain integrals, the sensitivities
//! `∫q_in/T_hot² dt` and `∫q_out/T_cold² dt` (and, with heat out inferred,
//! `∫q_in/T_cold dt` and `∫w/T_cold dt` separately), from which the partial
//! derivative of every figure with respect to each of the five systematic
//! errors follows exactly. Correlations are kept because each error's
//! partials are combined before squaring: `u(margin)` is not
//! `√(u(η_C)² + u(η)²)`. A configured `T0` is exact; the default `T0` is
//! itself measured, and a cold-side offset moves it one for one.
//!
//! ## Cost and precision
//! [`Monitor::push`] adds one interval to the window and to the run totals
//! and subtracts the interval that leaves the window: no rescan. The
//! window's sums are rebuilt from fresh ones every window and the run totals
//! are folded into `f64` ([`WindowSums`](crate::num::WindowSums)), so a run of weeks at 10 Hz does
//! not drift. The steady-state test keeps min/max per channel in 8 time buckets
//! of `duration_s/8`, amortised O(1). The monitor is generic over the
//! [`Real`](crate::num::Real) it computes in: `f32` on a controller, `f64` on the host.
//!
//! `size_of::<Monitor<64>>()` (f32) is 3 232 bytes on x86-64, and the
//! `alarm::AlarmSet` adds 232: together well under the
//! 8 KiB budget (a unit test checks it; `cargo run -p heatbound --example
//! sizes` prints the figures).

mod figures;
mod health;
mod integrals;
mod live;
mod rule_inputs;
mod sample;
mod settings;
mod steady;
mod trend;
mod uncertainty;

pub use figures::{AlarmFigures, ClearBands, Metrics};
pub use health::Faults;
pub use integrals::Integrals;
pub use live::{Monitor, MonitorError};
pub use rule_inputs::{AlarmInputs, RuleInputs, WindowAlarmInputs};
pub use sample::{Channel, Invalid, MAX_POWER_W, Pushed, Sample};
pub use settings::{
    FigureSettings, Health, Mode, MonitorConfig, MonitorSettings, Steady, Uncertainty,
};
pub use trend::{Line, TREND_POINTS, TrendTracker, Trends};
pub use uncertainty::Budget;
