//! A simulated bench heat engine for software-in-the-loop runs: an
//! electrically heated Stirling-type engine with a water-cooled cold side,
//! its sensors, their noise and the faults the alarms and the consistency
//! diagnosis exist to catch.
//!
//! ```text
//! Scenario --> Rig::step(dt_s)     physics: two lumped masses, explicit Euler
//!              Rig::truth()        what really happens (for tests and reports)
//!              Rig::measured(t_ms) what the sensors report: noise + faults
//!              Rig::sample(t_ms)   the same, converted to a monitor Sample
//! ```
//!
//! The model is `no_std`, uses no heap and reads no clock: the caller
//! advances it with [`Rig::step`] and stamps each reading with its own time.
//! It computes in `f32` (the Cortex-M4F's FPU) with explicit Euler steps of
//! at most [`RigParams::max_substep_s`], and keeps the two temperatures as
//! compensated sums so the energy account closes to rounding.
//!
//! ## What each monitor channel means
//! | `Sample` field | sensor | meaning |
//! |---|---|---|
//! | `t_hot_k` | type-K thermocouple in the heater head | heater-head temperature |
//! | `t_cold_k` | Pt100 on the cooler | cold-side metal temperature |
//! | `heat_in_w` | heater V·I | electrical heater power: what the rig pays for |
//! | `work_w` | generator V·I | the engine's electrical output |
//! | `heat_out_w` | flow meter + inlet/outlet Pt100s | coolant calorimetry ṁ·c_p·(T_out − T_in) |
//! | `t_hot2_k` | a second type-K thermocouple in the heater head, when [`Rig::has_hot2`] | heater-head temperature again, with its own noise; only [`Rig::sample`] reports it |
//!
//! So the monitor's control volume is the heater head, the engine and the
//! cooler: heat enters at the head temperature, leaves into the coolant at
//! the cooler temperature, and the energy-balance residual
//! `Q_in − W − Q_out` is the loss to the room (plus any change in stored
//! energy during transients): `UA_h·(T_h − T_0)` from the head (0.15 W/K,
//! 56.4 W at the set point) and `UA_r·(T_c − T_0)` from the cold side
//! (0.3 W/K, 1.9 W), to a room at `T_0` = 293.15 K
//! ([`RigParams::head_room_ua_w_per_k`], [`RigParams::cold_room_ua_w_per_k`],
//! [`RigParams::ambient_k`]; [`Truth::room_loss_w`]). A balance that
//! writes the loss as `UA·(T_hot − T_0)`, as `[losses]` in `rig.toml`
//! does, sees UA = 0.155 W/K here ([`Truth::room_ua_w_per_k`]).
//!
//! ## The physics (truth)
//! See [`model`] for the equations. In words:
//! - the heater head (heat capacity `C_h`) receives the heater power and
//!   loses heat to the engine and, through its insulation, to the room;
//! - the engine draws `Q_eng = G_eng·(T_h − T_c)` and converts the fraction
//!   `f(load)·η_C(T_h, T_c)` of it into work, at the *current* true
//!   temperatures; `f` peaks at 0.35 at nominal load, so the engine is always
//!   below Carnot and generates entropy;
//! - the cold side (`C_c`) receives the rest and gives it to the coolant
//!   through a heat exchanger (ε-NTU), plus a little to the room.
//!
//! The truth therefore satisfies, at every instant,
//! `P_heater = dU/dt + W + Q_coolant + Q_room` with
//! `U = C_h·(T_h − T_0) + C_c·(T_c − T_0)`, and the entropy generation
//! `σ = dS/dt + Q_coolant/T_c + Q_room,h/T_0 + Q_room,c/T_0 − P_heater/T_h ≥ 0`
//! with `dS/dt = C_h·(dT_h/dt)/T_h + C_c·(dT_c/dt)/T_c` (the coolant's own
//! irreversibility, warming from `T_in` against a wall at `T_c`, lies outside
//! this boundary and is a further positive amount). [`Truth`] reports all of
//! these.
//!
//! ## Noise
//! Gaussian, seeded, bit-exact ([`noise`]), standard deviations from
//! [`NoiseParams`]: thermocouple 0.3 K, RTDs 0.05 K, powers 0.3 %, flow
//! 0.3 %. The noise of a reading depends only on the rig's seed and the
//! reading's `t_ms`, so the same seed and the same calls give identical
//! readings, and different seeds give different noise. The second hot
//! thermocouple draws from a generator of its own
//! ([`Pcg32::for_second_hot`](noise::Pcg32::for_second_hot)), at the
//! first one's 0.3 K, so fitting it shifts no other reading.
//!
//! The calorimeter's noise, √2 × 0.05 K on a 4.25 K rise, is 1.7 % of heat
//! out a sample: over the 60 s of the default steady test (max − min
//! within 5 %) the readings span about 11 %, so a monitor with the default
//! `[steady]` never calls this rig steady, and never learns UA from it.
//! `heat_out_band_rel = 0.15` fits the noise (UA is then learned at 60 s).
//!
//! ## Scenarios
//! Every fault starts at 120 s ([`scenario::FAULT_START_S`]); at 10 Hz the
//! consequence shows within 10 minutes. The alarm times are those of the
//! tests (`tests/rig_scenarios.rs`, seed 1, 10 Hz, `Monitor<64>` and
//! [`AlarmSet`](heatbound::alarm::AlarmSet), default on-delays of 5 s).
//!
//! | scenario | timeline | truth | alarms raised (seed 1) |
//! |---|---|---|---|
//! | `steady` | hot and steady from t = 0 | 669 K / 299.5 K, 500 W in, 86 W out | none over 30 min with `RigConfig::default()` (seeds 1–3) |
//! | `warm-up` | head at rest (coolant flowing), heater 0 → 500 W over 120 s | the head warms with a time constant of about 3 min | none over 20 min |
//! | `thermocouple-drift` | from 120 s the hot reading falls 50 K/min behind the truth (at most 90 % of the head's excess over ambient) | unchanged | `near_carnot` at 465 s; `negative_entropy_production` at 500.3 s and `beyond_carnot` at 500.4 s, when the reading is 317 K low (≈ 352 K against a true 669 K) |
//! | `coolant-loss` | from 120 s the flow falls to zero over 30 s | cold side heats up (≈ 0.25 K/s), η_C and the engine's efficiency fall, the head heats up | measured heat out collapses to 0; with `hot_max_k = 720 K` and `ambient_k = 293.15 K`, `over_temperature` at 578 s and nothing else (the readings stay possible). With the default T0 (the heat-weighted cold-side mean, undefined once heat out is gone) `negative_entropy_production` fires at 160.9 s instead |
//! | `open-thermocouple` | from 120 s the hot thermocouple is open circuit | unchanged | `t_hot_k` NaN, counted invalid; `sensor_fault` at 125.0 s (the 5 s on-delay) |
//! | `power-meter-scale-error` | from 120 s `work_w` reads 4× high | unchanged | `energy_balance` 126.6 s, `near_carnot` 127.8 s, `beyond_carnot` and `negative_entropy_production` 129.5 s |
//! | `hot2-drift` | the head has a second thermocouple; from 120 s it reads low by 20 K/min, up to 150 K (from 570 s) | unchanged | none: no rule watches the two hot sensors |
//! | `cold-offset` | from 120 s the cold-side Pt100 reads 25 K high (the coolant Pt100s are unaffected) | unchanged | none: the second law keeps a wide margin ([`scenario::COLD_OFFSET_K`]) |
//! | `heater-scale-error` | from 120 s `heat_in_w` reads 15 % high (the heater current channel) | unchanged | none: the apparent loss to the room grows to 133 W, which the energy-balance rule accepts |
//!
//! What the consistency diagnosis makes of them (`heatbound::diagnosis`;
//! `host-tools/tests/sim_diagnosis.rs`, seed 1, 10 Hz, `Monitor<64, f32>`,
//! T0 the room; "UA known" is `[losses] ua_w_per_k = 0.155` or UA learned
//! with the wider steady band above):
//!
//! | scenario | second law (and hot pair) only | with the first law (UA known) |
//! |---|---|---|
//! | `thermocouple-drift` | fails from 497 s; hot, heat_in and work each explain it: no suspect | fails from about 220 s; hot named from 494 s, bias −340 K (injected −338 K) |
//! | … with a second hot thermocouple | the pair fails from 127 s; hot named from 497 s | hot named from about 220 s |
//! | `power-meter-scale-error` | fails from 125 s; the second law cannot tell work from heat_in, hot or cold: no suspect | fails from 121 s; work (bias +2.99) and heat_in explain: no suspect |
//! | `hot2-drift` | the pair fails from 133 s; hot and hot2 both explain: no suspect | hot2 named once the drift passes about 90–100 K (384–420 s), bias −150 K |
//! | `cold-offset` | consistent (σ̇ 0.64 → 0.55 W/K) | consistent |
//! | `heater-scale-error` | consistent (σ̇ 0.64 → 0.78 W/K) | the first law is 75 W out from 122 s; heat_in (bias +0.150), work and heat_out explain: no suspect |
//!
//! The model ignores boiling: after a coolant loss the cold side passes
//! 100 °C at about 478 s, and from there on the numbers show
//! the trend, not a real rig's behaviour.
//!
//! ```
//! use heatbound_firmware_example::rig::{Rig, RigParams, Scenario};
//!
//! let mut rig = Rig::new(RigParams::bench_stirling(), Scenario::OpenThermocouple, 1)?;
//! for _ in 0..1300 {
//!     rig.step(0.1);
//! }
//! let s = rig.sample(130_000);
//! assert!(s.t_hot_k.is_nan()); // the converter's open-circuit flag
//! assert!(rig.truth().t_head_k > 600.0); // the head itself is fine
//! # Ok::<(), heatbound_firmware_example::rig::ParamsError>(())
//! ```

use heatbound::ZERO_CELSIUS_K;
use heatbound::monitor::Sample;
use heatbound::sensor::power;

pub mod model;
pub mod noise;
pub mod scenario;

pub use model::{NoiseParams, RigParams};
pub use scenario::{ParseScenarioError, Scenario};

use model::Flows;
use noise::Pcg32;

const ZERO_C_K: f32 = ZERO_CELSIUS_K as f32;

/// A rig parameter outside its physical range.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum ParamsError {
    /// `field` must be `expected`.
    OutOfRange {
        /// The [`RigParams`] field.
        field: &'static str,
        /// What it must be.
        expected: &'static str,
    },
}

impl core::fmt::Display for ParamsError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            ParamsError::OutOfRange { field, expected } => {
                write!(f, "rig parameter `{field}` must be finite and {expected}")
            }
        }
    }
}

impl core::error::Error for ParamsError {}

/// What really happens in the rig at the current instant. Temperatures in
/// kelvin, powers in watts.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Truth {
    /// Rig time, seconds since the start.
    pub t_s: f64,
    /// Heater-head temperature T_h, K.
    pub t_head_k: f32,
    /// Cold-side (cooler metal) temperature T_c, K.
    pub t_cold_k: f32,
    /// Room temperature T_0, K.
    pub ambient_k: f32,
    /// Coolant inlet temperature, K.
    pub coolant_inlet_k: f32,
    /// Coolant outlet temperature, K.
    pub coolant_outlet_k: f32,
    /// Coolant mass flow, kg/s.
    pub coolant_flow_kg_s: f32,
    /// Electrical heater power P_heater, W.
    pub heater_w: f32,
    /// Heat the engine draws from the head, Q_eng, W.
    pub engine_heat_in_w: f32,
    /// The engine's work output W, W.
    pub work_w: f32,
    /// Heat the engine rejects to the cold side, Q_cold = Q_eng − W, W.
    pub engine_heat_out_w: f32,
    /// Heat carried away by the coolant, W.
    pub coolant_heat_w: f32,
    /// Heat lost from the head to the room, W.
    pub head_room_loss_w: f32,
    /// Heat lost from the cold side to the room (negative when the room
    /// warms it), W.
    pub cold_room_loss_w: f32,
    /// Stored energy U = C_h·(T_h − T_0) + C_c·(T_c − T_0), J.
    pub stored_energy_j: f32,
    /// dT_h/dt, K/s.
    pub head_rate_k_per_s: f32,
    /// dT_c/dt, K/s.
    pub cold_rate_k_per_s: f32,
    /// η_C = 1 − T_c/T_h at the true temperatures (0 when T_h ≤ T_c).
    pub carnot_efficiency: f32,
    /// Entropy generation rate σ ≥ 0, W/K (boundary at the cooler wall; see
    /// the module docs).
    pub entropy_generation_w_per_k: f32,
}

impl Truth {
    /// Total heat lost to the room, from the head and the cold side, W.
    /// In the truth the heater's power is all accounted for:
    /// `heater_w = work_w + coolant_heat_w + room_loss_w() + dU/dt`.
    pub fn room_loss_w(&self) -> f32 {
        self.head_room_loss_w + self.cold_room_loss_w
    }

    /// The loss coefficient to the room referred to the hot side,
    /// `room_loss_w / (T_h − T_0)`, W/K: the UA of a heat balance that
    /// writes the whole loss as `UA·(T_hot − T_0)`, as the consistency
    /// diagnosis does (`[losses] ua_w_per_k`). `None` unless the head is
    /// above the room. The head's own [`RigParams::head_room_ua_w_per_k`]
    /// plus the cold side's loss over the head's excess: 0.155 W/K at the
    /// bench set point, so exact there and in any steady state.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, Scenario};
    /// let t = Rig::bench_stirling(Scenario::Steady, 1).truth();
    /// let ua = t.room_ua_w_per_k().unwrap();
    /// assert!((ua - 0.155).abs() < 0.001);
    /// assert!((ua * (t.t_head_k - t.ambient_k) - t.room_loss_w()).abs() < 1e-3);
    /// ```
    pub fn room_ua_w_per_k(&self) -> Option<f32> {
        let excess = self.t_head_k - self.ambient_k;
        (excess > 0.0).then(|| self.room_loss_w() / excess)
    }

    /// The engine's own efficiency W/Q_eng, if it draws heat.
    pub fn engine_efficiency(&self) -> Option<f32> {
        (self.engine_heat_in_w > 0.0).then(|| self.work_w / self.engine_heat_in_w)
    }

    /// The rig's efficiency W/P_heater (what the monitor estimates), if the
    /// heater is on.
    pub fn rig_efficiency(&self) -> Option<f32> {
        (self.heater_w > 0.0).then(|| self.work_w / self.heater_w)
    }
}

/// What the rig's sensors report at one instant, in their own units, with
/// noise and the scenario's faults applied: the inputs the bus-level
/// simulation turns into converter registers.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Measured {
    /// Hot thermocouple's hot-junction temperature as the converter reports
    /// it, °C; `None` when the thermocouple is open circuit (the converter's
    /// fault flag).
    pub hot_junction_c: Option<f32>,
    /// The thermocouple converter's cold-junction (board) temperature, °C.
    pub cold_junction_c: f32,
    /// Cold-side Pt100 temperature, °C.
    pub cold_side_c: f32,
    /// Heater voltage, V.
    pub heater_v: f32,
    /// Heater current, A.
    pub heater_a: f32,
    /// Generator voltage, V.
    pub generator_v: f32,
    /// Generator current as the current channel reports it, A.
    pub generator_a: f32,
    /// Coolant flow-meter pulse rate, pulses per second.
    pub coolant_flow_hz: f32,
    /// Coolant inlet Pt100 temperature, °C.
    pub coolant_inlet_c: f32,
    /// Coolant outlet Pt100 temperature, °C.
    pub coolant_outlet_c: f32,
}

impl Measured {
    /// The monitor's [`Sample`] at `t_ms`, through the core's conversions:
    /// V·I for the two powers and calorimetry for heat out (mass flow from the
    /// pulse rate at the inlet meter's density). A hot channel that is open
    /// reads NaN, which the monitor counts as invalid.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, Scenario};
    /// let rig = Rig::bench_stirling(Scenario::Steady, 3);
    /// let m = rig.measured(0);
    /// let s = m.to_sample(0, rig.params().flow_pulses_per_l);
    /// assert_eq!(s, rig.sample(0));
    /// assert!((s.t_cold_k - (m.cold_side_c + 273.15)).abs() < 1e-3);
    /// ```
    pub fn to_sample(&self, t_ms: u32, flow_pulses_per_l: f32) -> Sample {
        let t_hot_k = match self.hot_junction_c {
            Some(c) => c + ZERO_C_K,
            None => f32::NAN,
        };
        let heat_in_w = power::electrical_power_w(self.heater_v, self.heater_a).unwrap_or(f32::NAN);
        let work_w =
            power::electrical_power_w(self.generator_v, self.generator_a).unwrap_or(f32::NAN);
        Sample {
            t_ms,
            t_hot_k,
            t_cold_k: self.cold_side_c + ZERO_C_K,
            heat_in_w,
            work_w,
            heat_out_w: Some(self.calorimetry_w(flow_pulses_per_l)),
            t_hot2_k: None,
        }
    }

    /// Coolant calorimetry, W. Uses the core's
    /// [`heat_flow_w`](power::heat_flow_w); outside its water range (the
    /// cold side near boiling after a coolant loss) the same formula with the
    /// water properties clamped to the range, because a calorimeter with
    /// standing water honestly reads about zero.
    fn calorimetry_w(&self, flow_pulses_per_l: f32) -> f32 {
        let volume_m3_s = self.coolant_flow_hz / flow_pulses_per_l * 1e-3;
        let (t_in, t_out) = (self.coolant_inlet_c, self.coolant_outlet_c);
        let exact = power::mass_flow_kg_s(volume_m3_s, t_in)
            .and_then(|m| power::heat_flow_w(m, t_in, t_out));
        match exact {
            Ok(q) => q,
            Err(_) => {
                let m = volume_m3_s * model::water_density(t_in + ZERO_C_K);
                let cp = model::water_cp(0.5 * (t_in + t_out) + ZERO_C_K);
                m * cp * (t_out - t_in)
            }
        }
    }
}

/// The simulated rig: parameters, scenario, seed, time and the two
/// temperatures.
///
/// ```
/// use heatbound_firmware_example::rig::{Rig, Scenario};
///
/// let mut rig = Rig::bench_stirling(Scenario::WarmUp, 42);
/// let cold = rig.truth().t_head_k;
/// for _ in 0..600 {
///     rig.step(0.1); // one minute at 10 Hz
/// }
/// let t = rig.truth();
/// assert!(t.t_head_k > cold + 20.0);
/// assert!(t.entropy_generation_w_per_k >= 0.0);
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct Rig {
    params: RigParams,
    scenario: Scenario,
    seed: u64,
    // Whole microseconds, so that rig time is exact: 1200 steps of 0.1 s
    // are 120 s, not 120.0000018 s.
    t_us: u64,
    // Compensated sums: the value is `hi`, `lo` the rounding still owed.
    head_k: (f32, f32),
    cold_k: (f32, f32),
    /// Rig time at which the fault was put right, if it was.
    repaired_us: Option<u64>,
}

/// `hi + lo += inc`, Kahan–Babuška style: the small steps of a slow drift
/// are not lost to rounding against a temperature of several hundred K.
fn add_compensated(acc: &mut (f32, f32), inc: f32) {
    let y = inc + acc.1;
    let t = acc.0 + y;
    acc.1 = y - (t - acc.0);
    acc.0 = t;
}

impl Rig {
    /// A rig with `params` running `scenario`, its noise seeded with `seed`.
    /// `steady` and the fault scenarios start in steady state at the set
    /// point; `warm-up` starts at rest with the coolant flowing and the
    /// heater off.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, RigParams, Scenario};
    /// let rig = Rig::new(RigParams::bench_stirling(), Scenario::Steady, 1)?;
    /// assert!((rig.truth().t_head_k - 670.0).abs() < 5.0);
    ///
    /// let mut bad = RigParams::bench_stirling();
    /// bad.head_capacity_j_per_k = 0.0;
    /// assert!(Rig::new(bad, Scenario::Steady, 1).is_err());
    /// # Ok::<(), heatbound_firmware_example::rig::ParamsError>(())
    /// ```
    pub fn new(params: RigParams, scenario: Scenario, seed: u64) -> Result<Self, ParamsError> {
        params.validate()?;
        Ok(Self::new_valid(params, scenario, seed))
    }

    /// [`Rig::new`] with [`RigParams::bench_stirling`], which are valid, so
    /// this cannot fail.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, Scenario};
    /// let rig = Rig::bench_stirling(Scenario::CoolantLoss, 9);
    /// assert_eq!(rig.scenario(), Scenario::CoolantLoss);
    /// assert_eq!(rig.seed(), 9);
    /// ```
    pub fn bench_stirling(scenario: Scenario, seed: u64) -> Self {
        Self::new_valid(RigParams::bench_stirling(), scenario, seed)
    }

    fn new_valid(params: RigParams, scenario: Scenario, seed: u64) -> Self {
        let heater = if scenario.starts_hot() {
            params.heater_power_w
        } else {
            0.0
        };
        let (t_h, t_c) = model::steady_state(&params, heater, params.coolant_flow_kg_s);
        Self {
            params,
            scenario,
            seed,
            t_us: 0,
            head_k: (t_h, 0.0),
            cold_k: (t_c, 0.0),
            repaired_us: None,
        }
    }

    /// Puts the scenario's fault right from now on, as a technician would
    /// at the bench (reseats the thermocouple, reopens the coolant valve,
    /// corrects the shunt setting): from this rig time the sensors read the
    /// truth again and the coolant flows at its set point.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, Scenario};
    /// let mut rig = Rig::bench_stirling(Scenario::ThermocoupleDrift, 1);
    /// rig.step(300.0);
    /// let drifted = rig.truth().t_head_k - rig.sample(300_000).t_hot_k;
    /// assert!(drifted > 100.0); // 50 K/min for three minutes
    /// rig.repair();
    /// assert!((rig.truth().t_head_k - rig.sample(300_000).t_hot_k).abs() < 5.0);
    /// ```
    pub fn repair(&mut self) {
        if self.repaired_us.is_none() {
            self.repaired_us = Some(self.t_us);
        }
    }

    /// The parameters.
    pub fn params(&self) -> &RigParams {
        &self.params
    }

    /// The scenario.
    pub fn scenario(&self) -> Scenario {
        self.scenario
    }

    /// The noise seed.
    pub fn seed(&self) -> u64 {
        self.seed
    }

    /// Whether the head carries a second thermocouple, so that
    /// [`Rig::sample`] fills `t_hot2_k`: [`RigParams::hot2`], or a scenario
    /// that needs one ([`Scenario::needs_hot2`]).
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, Scenario};
    /// assert!(!Rig::bench_stirling(Scenario::Steady, 1).has_hot2());
    /// assert!(Rig::bench_stirling(Scenario::Hot2Drift, 1).has_hot2());
    /// ```
    pub fn has_hot2(&self) -> bool {
        self.params.hot2 || self.scenario.needs_hot2()
    }

    /// Rig time, seconds since the start.
    pub fn time_s(&self) -> f64 {
        self.t_us as f64 / 1e6
    }

    /// Heater power demanded at rig time `t_s`, W.
    fn heater_w_at(&self, t_s: f64) -> f32 {
        let p = self.params.heater_power_w;
        match self.scenario {
            Scenario::WarmUp if self.params.warm_up_ramp_s > 0.0 => {
                let x = (t_s / f64::from(self.params.warm_up_ramp_s)).clamp(0.0, 1.0);
                p * x as f32
            }
            _ => p,
        }
    }

    /// Coolant mass flow at rig time `t_s`, kg/s.
    fn coolant_flow_at(&self, t_s: f64) -> f32 {
        let m = self.params.coolant_flow_kg_s;
        let repaired = self.repaired_us.is_some_and(|r| t_s * 1e6 >= r as f64);
        match self.scenario {
            Scenario::CoolantLoss if !repaired => {
                let since = t_s - f64::from(scenario::FAULT_START_S);
                let x = (since / f64::from(scenario::COOLANT_RAMP_S)).clamp(0.0, 1.0);
                m * (1.0 - x as f32)
            }
            _ => m,
        }
    }

    fn flows_at(&self, t_us: u64) -> Flows {
        let t_s = t_us as f64 / 1e6;
        model::flows(
            &self.params,
            self.head_k.0,
            self.cold_k.0,
            self.heater_w_at(t_s),
            self.coolant_flow_at(t_s),
        )
    }

    /// Advances the physics by `dt_s` seconds (rig time counts whole
    /// microseconds; explicit Euler, sub-stepped
    /// to at most [`RigParams::max_substep_s`]; at most 10 000 sub-steps per
    /// call). A step that is not a positive finite number does nothing.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, Scenario};
    /// let mut rig = Rig::bench_stirling(Scenario::Steady, 1);
    /// rig.step(60.0);
    /// rig.step(f32::NAN); // ignored
    /// assert_eq!(rig.time_s(), 60.0);
    /// ```
    pub fn step(&mut self, dt_s: f32) {
        if !(dt_s.is_finite() && dt_s > 0.0) {
            return;
        }
        let n = libm::ceilf(dt_s / self.params.max_substep_s).clamp(1.0, 10_000.0) as u32;
        let h = dt_s / n as f32;
        let dt_us = libm::round(f64::from(dt_s) * 1e6) as u64;
        for k in 0..n {
            // dt_us·k/n exactly (in f64: the product is below 2^53 and the
            // quotient's fraction, a multiple of 1/n, is never lost), with
            // no 64-bit integer division, whose routine the QEMU image
            // would carry for this alone.
            let offset_us = (dt_us as f64 * f64::from(k) / f64::from(n)) as u64;
            let f = self.flows_at(self.t_us + offset_us);
            add_compensated(&mut self.head_k, h * f.head_rate(&self.params));
            add_compensated(&mut self.cold_k, h * f.cold_rate(&self.params));
        }
        self.t_us += dt_us;
    }

    /// The true state and flows now.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, Scenario};
    /// let t = Rig::bench_stirling(Scenario::Steady, 1).truth();
    /// // Steady: the heater's power all leaves as work, coolant heat and loss.
    /// let out = t.work_w + t.coolant_heat_w + t.room_loss_w();
    /// assert!((t.heater_w - out).abs() < 0.5);
    /// assert!(t.engine_efficiency().unwrap() < t.carnot_efficiency);
    /// ```
    pub fn truth(&self) -> Truth {
        let p = &self.params;
        let f = self.flows_at(self.t_us);
        let (t_h, t_c) = (self.head_k.0, self.cold_k.0);
        Truth {
            t_s: self.time_s(),
            t_head_k: t_h,
            t_cold_k: t_c,
            ambient_k: p.ambient_k,
            coolant_inlet_k: p.coolant_inlet_k,
            coolant_outlet_k: f.coolant_outlet_k,
            coolant_flow_kg_s: self.coolant_flow_at(self.time_s()),
            heater_w: f.heater_w,
            engine_heat_in_w: f.engine_hot_w,
            work_w: f.work_w,
            engine_heat_out_w: f.engine_cold_w,
            coolant_heat_w: f.coolant_w,
            head_room_loss_w: f.head_room_w,
            cold_room_loss_w: f.cold_room_w,
            stored_energy_j: p.head_capacity_j_per_k * (t_h - p.ambient_k)
                + p.cold_capacity_j_per_k * (t_c - p.ambient_k),
            head_rate_k_per_s: f.head_rate(p),
            cold_rate_k_per_s: f.cold_rate(p),
            carnot_efficiency: f.carnot,
            entropy_generation_w_per_k: f.entropy_generation(p, t_h, t_c),
        }
    }

    /// Whether the scenario's fault is active now: begun, not yet repaired.
    fn fault_active(&self) -> bool {
        match self.scenario.fault_start_s() {
            Some(start) => self.time_s() >= f64::from(start) && self.repaired_us.is_none(),
            None => false,
        }
    }

    /// What the sensors report now, stamped `t_ms` (the stamp seeds this
    /// reading's noise; fault timing follows rig time).
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, Scenario};
    /// let rig = Rig::bench_stirling(Scenario::Steady, 5);
    /// let m = rig.measured(0);
    /// assert_eq!(m, rig.measured(0)); // same stamp, same noise
    /// assert!((m.heater_v * m.heater_a - 500.0).abs() < 10.0);
    /// assert!(m.coolant_outlet_c > m.coolant_inlet_c);
    /// ```
    pub fn measured(&self, t_ms: u32) -> Measured {
        let p = &self.params;
        let n = &p.noise;
        let truth = self.truth();
        let mut rng = Pcg32::for_reading(self.seed, t_ms);
        // Always draw every channel, in this order, so that one channel's
        // fault never shifts another channel's noise.
        let g_hot = rng.gaussian();
        let g_cj = rng.gaussian();
        let g_cold = rng.gaussian();
        let g_hv = rng.gaussian();
        let g_hi = rng.gaussian();
        let g_gv = rng.gaussian();
        let g_gi = rng.gaussian();
        let g_flow = rng.gaussian();
        let g_in = rng.gaussian();
        let g_out = rng.gaussian();

        let fault = self.fault_active();
        let since_s = self
            .scenario
            .fault_start_s()
            .map_or(0.0, |s| self.time_s() - f64::from(s));

        // Hot thermocouple: drift is an offset of the indicated temperature.
        let mut hot_k = truth.t_head_k;
        if fault && self.scenario == Scenario::ThermocoupleDrift {
            let drift = (scenario::DRIFT_RATE_K_PER_S * since_s as f32)
                .min(scenario::DRIFT_LIMIT * (truth.t_head_k - p.ambient_k))
                .max(0.0);
            hot_k -= drift;
        }
        let open = fault && self.scenario == Scenario::OpenThermocouple;
        let hot_junction_c = (!open).then_some(hot_k - ZERO_C_K + n.thermocouple_k * g_hot);

        // Electrical channels: V and I each carry half the power variance.
        let rel = n.power_rel * core::f32::consts::FRAC_1_SQRT_2;
        let heater_v = libm::sqrtf(truth.heater_w * p.heater_resistance_ohm);
        let heater_a = heater_v / p.heater_resistance_ohm;
        let gen_v = libm::sqrtf(truth.work_w * p.load_resistance_ohm);
        let gen_a = gen_v / p.load_resistance_ohm;
        // The current channels' scale errors and the cold sensor's offset.
        let work_scale = if fault && self.scenario == Scenario::PowerMeterScaleError {
            scenario::WORK_SCALE_ERROR
        } else {
            1.0
        };
        let heater_scale = if fault && self.scenario == Scenario::HeaterScaleError {
            scenario::HEATER_SCALE_ERROR
        } else {
            1.0
        };
        let cold_offset_k = if fault && self.scenario == Scenario::ColdOffset {
            scenario::COLD_OFFSET_K
        } else {
            0.0
        };

        let volume_l_s = truth.coolant_flow_kg_s / model::water_density(p.coolant_inlet_k) * 1e3;
        Measured {
            hot_junction_c,
            cold_junction_c: p.board_k - ZERO_C_K + n.cold_junction_k * g_cj,
            cold_side_c: truth.t_cold_k + cold_offset_k - ZERO_C_K + n.rtd_k * g_cold,
            heater_v: heater_v * (1.0 + rel * g_hv),
            heater_a: heater_a * heater_scale * (1.0 + rel * g_hi),
            generator_v: gen_v * (1.0 + rel * g_gv),
            generator_a: gen_a * work_scale * (1.0 + rel * g_gi),
            coolant_flow_hz: (volume_l_s * p.flow_pulses_per_l * (1.0 + n.flow_rel * g_flow))
                .max(0.0),
            coolant_inlet_c: p.coolant_inlet_k - ZERO_C_K + n.rtd_k * g_in,
            coolant_outlet_c: truth.coolant_outlet_k - ZERO_C_K + n.rtd_k * g_out,
        }
    }

    /// The monitor [`Sample`] stamped `t_ms`: [`Rig::measured`] converted by
    /// [`Measured::to_sample`], and, when the head has a second
    /// thermocouple ([`Rig::has_hot2`]), its reading [`Rig::hot2_k`] as
    /// `t_hot2_k`.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, RigParams, Scenario};
    /// let rig = Rig::bench_stirling(Scenario::Steady, 1);
    /// let s = rig.sample(0);
    /// assert!((s.heat_in_w - 500.0).abs() < 10.0);
    /// assert!(s.heat_out_w.unwrap() > 300.0);
    /// assert!(s.t_hot_k > s.t_cold_k);
    /// assert_eq!(s.t_hot2_k, None);
    ///
    /// let dual = RigParams { hot2: true, ..RigParams::bench_stirling() };
    /// let rig = Rig::new(dual, Scenario::Steady, 1)?;
    /// let s2 = rig.sample(0);
    /// assert!((s2.t_hot2_k.unwrap() - rig.truth().t_head_k).abs() < 2.0);
    /// assert_eq!(s2.t_hot_k, s.t_hot_k); // the first element's noise is unchanged
    /// # Ok::<(), heatbound_firmware_example::rig::ParamsError>(())
    /// ```
    pub fn sample(&self, t_ms: u32) -> Sample {
        let mut s = self
            .measured(t_ms)
            .to_sample(t_ms, self.params.flow_pulses_per_l);
        if self.has_hot2() {
            s.t_hot2_k = Some(self.hot2_k(t_ms));
        }
        s
    }

    /// The second hot thermocouple's reading stamped `t_ms`, K: the head
    /// temperature with its own noise ([`Pcg32::for_second_hot`], at the
    /// first thermocouple's level) and, in `hot2-drift`, its drift. Only
    /// [`Rig::sample`] reports it (the bus-level simulation has no
    /// converter for it), and only when [`Rig::has_hot2`].
    ///
    /// ```
    /// use heatbound_firmware_example::rig::{Rig, Scenario};
    /// let mut rig = Rig::bench_stirling(Scenario::Hot2Drift, 1);
    /// rig.step(300.0); // three minutes of drift at 20 K/min
    /// let low = rig.truth().t_head_k - rig.hot2_k(300_000);
    /// assert!((low - 60.0).abs() < 1.5, "{low}");
    /// ```
    pub fn hot2_k(&self, t_ms: u32) -> f32 {
        let truth_k = self.truth().t_head_k;
        let noise =
            self.params.noise.thermocouple_k * Pcg32::for_second_hot(self.seed, t_ms).gaussian();
        let drift = if self.scenario == Scenario::Hot2Drift && self.fault_active() {
            let since_s = self.time_s() - f64::from(scenario::FAULT_START_S);
            (scenario::HOT2_DRIFT_RATE_K_PER_S * since_s as f32)
                .clamp(0.0, scenario::HOT2_DRIFT_LIMIT_K)
        } else {
            0.0
        };
        truth_k - drift + noise
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bench_defaults_are_valid() {
        assert_eq!(RigParams::bench_stirling().validate(), Ok(()));
    }

    /// The heater's power is all accounted for, in steady state and while
    /// the rig warms up: `heater = work + coolant heat + room loss + dU/dt`,
    /// and the room loss is the head's `UA_h·(T_h − T_0)` plus the cold
    /// side's `UA_r·(T_c − T_0)`, which the hot-side UA of
    /// [`Truth::room_ua_w_per_k`] reproduces.
    #[test]
    fn the_energy_balance_closes_with_the_room_loss() {
        let p = RigParams::bench_stirling();
        let t = Rig::bench_stirling(Scenario::Steady, 1).truth();
        let out = t.work_w + t.coolant_heat_w + t.room_loss_w();
        assert!((t.heater_w - out).abs() < 0.05, "{t:?}");
        let head = p.head_room_ua_w_per_k * (t.t_head_k - p.ambient_k);
        let cold = p.cold_room_ua_w_per_k * (t.t_cold_k - p.ambient_k);
        assert!((t.head_room_loss_w - head).abs() < 1e-4);
        assert!((t.cold_room_loss_w - cold).abs() < 1e-4);
        // The documented figures: 56.4 W + 1.9 W, UA 0.155 W/K.
        assert!((t.head_room_loss_w - 56.4).abs() < 0.1, "{t:?}");
        assert!((t.cold_room_loss_w - 1.9).abs() < 0.1, "{t:?}");
        let ua = t.room_ua_w_per_k().unwrap();
        assert!((ua - 0.155).abs() < 0.0005, "{ua}");
        assert!((ua * (t.t_head_k - t.ambient_k) - t.room_loss_w()).abs() < 1e-3);

        // Warming up, over five minutes: the stored energy takes up the
        // difference (summed in f64; the temperatures are f32, so a single
        // step's dU/dt is only good to about half a watt).
        let mut rig = Rig::bench_stirling(Scenario::WarmUp, 1);
        let u0 = f64::from(rig.truth().stored_energy_j);
        let (mut heat_in, mut out) = (0.0f64, 0.0f64);
        for _ in 0..3000 {
            let a = rig.truth();
            heat_in += f64::from(a.heater_w) * 0.1;
            out += f64::from(a.work_w + a.coolant_heat_w + a.room_loss_w()) * 0.1;
            rig.step(0.1);
        }
        let stored = f64::from(rig.truth().stored_energy_j) - u0;
        assert!(stored > 0.5 * heat_in, "{stored} J stored of {heat_in} J");
        let residual = heat_in - out - stored;
        assert!(
            residual.abs() < 1e-4 * heat_in + 1.0,
            "{residual} J of {heat_in} J"
        );
        assert!(rig.truth().room_ua_w_per_k().is_some());
    }

    #[test]
    fn the_second_hot_element_reads_only_through_sample() {
        let dual = RigParams {
            hot2: true,
            ..RigParams::bench_stirling()
        };
        let one = Rig::bench_stirling(Scenario::Steady, 4);
        let two = Rig::new(dual, Scenario::Steady, 4).unwrap();
        assert!(two.has_hot2() && !one.has_hot2());
        for t_ms in [0, 100, 123_400] {
            // The bus sees the same; the sample adds the second element.
            assert_eq!(one.measured(t_ms), two.measured(t_ms));
            let (a, b) = (one.sample(t_ms), two.sample(t_ms));
            assert_eq!(a.t_hot2_k, None);
            assert_eq!(
                Sample {
                    t_hot2_k: None,
                    ..b
                },
                a
            );
            assert_eq!(b.t_hot2_k, Some(two.hot2_k(t_ms)));
            assert_ne!(b.t_hot2_k, Some(b.t_hot_k));
        }
    }

    #[test]
    fn steady_start_is_steady() {
        let t = Rig::bench_stirling(Scenario::Steady, 0).truth();
        assert!(t.head_rate_k_per_s.abs() < 1e-4, "{t:?}");
        assert!(t.cold_rate_k_per_s.abs() < 1e-4, "{t:?}");
    }
}
