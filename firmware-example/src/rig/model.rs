//! The rig's physics: parameters, the heat flows at a state, and the steady
//! state. Pure functions of their arguments; [`Rig`](super::Rig) owns the
//! state and the time.
//!
//! Two lumped thermal masses, the heater head at `T_h` and the cold side
//! (cooler metal) at `T_c`:
//!
//! ```text
//! C_h·dT_h/dt = P_heater − Q_eng − Q_room,h
//! C_c·dT_c/dt = Q_cold   − Q_cool − Q_room,c
//! Q_eng   = G_eng·(T_h − T_c)                      heat the engine draws from the head
//! W       = f(load)·η_C·Q_eng,  η_C = 1 − T_c/T_h   (0 when T_h ≤ T_c or Q_eng ≤ 0)
//! Q_cold  = Q_eng − W                              heat the engine rejects to the cold side
//! Q_cool  = ε·ṁ·c_p·(T_c − T_in), ε = 1 − exp(−UA_c/(ṁ·c_p))   (ε-NTU, isothermal wall)
//! T_out   = T_in + Q_cool/(ṁ·c_p)                   (→ T_c as ṁ → 0, never unbounded)
//! Q_room,h = UA_h·(T_h − T_0),  Q_room,c = UA_r·(T_c − T_0)
//! f(load) = f_peak·max(0, 1 − (load − 1)²)          peaks at nominal load 1
//! ```

use heatbound::sensor::water;

use super::ParamsError;

/// Measurement-noise standard deviations (1σ), per channel.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NoiseParams {
    /// Hot thermocouple, kelvin.
    pub thermocouple_k: f32,
    /// Thermocouple converter's cold-junction (board) sensor, kelvin.
    pub cold_junction_k: f32,
    /// Each RTD (cold side, coolant inlet and outlet), kelvin.
    pub rtd_k: f32,
    /// Each electrical power reading, relative (split evenly between the
    /// voltage and the current so that V·I has this spread).
    pub power_rel: f32,
    /// Coolant flow-meter pulse rate, relative.
    pub flow_rel: f32,
}

impl NoiseParams {
    /// No noise at all: the readings equal the truth (faults still apply).
    pub const NONE: NoiseParams = NoiseParams {
        thermocouple_k: 0.0,
        cold_junction_k: 0.0,
        rtd_k: 0.0,
        power_rel: 0.0,
        flow_rel: 0.0,
    };
}

/// The rig's physical parameters. Temperatures in kelvin, powers in watts.
///
/// ```
/// use heatbound_firmware_example::rig::RigParams;
/// let p = RigParams::bench_stirling();
/// assert!(p.validate().is_ok());
/// assert_eq!(p.heater_power_w, 500.0);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RigParams {
    /// Heater power set point, W.
    pub heater_power_w: f32,
    /// `warm-up`: seconds for the heater to ramp from 0 to the set point.
    pub warm_up_ramp_s: f32,
    /// Heater element resistance, Ω (sets the heater's V and I).
    pub heater_resistance_ohm: f32,
    /// Generator load resistance, Ω (sets the generator's V and I).
    pub load_resistance_ohm: f32,
    /// Heater-head heat capacity C_h, J/K.
    pub head_capacity_j_per_k: f32,
    /// Cold-side (cooler metal and jacket water) heat capacity C_c, J/K.
    pub cold_capacity_j_per_k: f32,
    /// The engine's hot-to-cold thermal conductance G_eng, W/K: the heat it
    /// draws is `G_eng·(T_h − T_c)`.
    pub engine_conductance_w_per_k: f32,
    /// Peak fraction of the Carnot efficiency the engine reaches, at nominal
    /// load (f_peak < 1).
    pub peak_carnot_fraction: f32,
    /// Load as a fraction of nominal (1 = nominal, the efficiency peak;
    /// 0 = open circuit; 2 = stalled).
    pub load: f32,
    /// Head-to-room loss conductance UA_h, W/K: the hot side loses
    /// `Q_room,h = UA_h·(T_h − T_0)` through its insulation
    /// ([`Truth::head_room_loss_w`](super::Truth::head_room_loss_w)).
    pub head_room_ua_w_per_k: f32,
    /// Cold-side-to-room conductance UA_r, W/K: `Q_room,c = UA_r·(T_c − T_0)`
    /// ([`Truth::cold_room_loss_w`](super::Truth::cold_room_loss_w);
    /// negative when the room warms the cold side).
    pub cold_room_ua_w_per_k: f32,
    /// Cooler metal-to-coolant conductance UA_c, W/K.
    pub cooler_ua_w_per_k: f32,
    /// Coolant mass-flow set point, kg/s.
    pub coolant_flow_kg_s: f32,
    /// Coolant inlet temperature, K.
    pub coolant_inlet_k: f32,
    /// Room (ambient) temperature T_0, K.
    pub ambient_k: f32,
    /// Temperature of the board carrying the thermocouple converter (the
    /// thermocouple's cold junction), K.
    pub board_k: f32,
    /// Flow-meter K-factor, pulses per litre.
    pub flow_pulses_per_l: f32,
    /// Largest internal integration step, seconds; [`Rig::step`](super::Rig::step)
    /// sub-steps longer steps. Explicit Euler is stable for steps far below
    /// the smaller time constant (about 35 s for the bench defaults).
    pub max_substep_s: f32,
    /// Measurement noise.
    pub noise: NoiseParams,
    /// Whether the heater head carries a second thermocouple beside the
    /// first, reported as [`Sample::t_hot2_k`](heatbound::monitor::Sample::t_hot2_k)
    /// by [`Rig::sample`](super::Rig::sample) (its own noise, at the first
    /// one's level [`NoiseParams::thermocouple_k`]). The bus-level
    /// simulation has no converter for it. `hot2-drift` fits one whatever
    /// this says ([`Rig::has_hot2`](super::Rig::has_hot2)).
    pub hot2: bool,
}

impl RigParams {
    /// A small electrically heated Stirling-type bench engine:
    /// - 500 W heater (48 V class, 4.6 Ω), 120 s warm-up ramp;
    /// - head 250 J/K (about 0.5 kg of stainless steel), cold side 1500 J/K;
    /// - G_eng = 1.2 W/K, 35 % of Carnot at nominal load;
    /// - head losses 0.15 W/K to a 20 °C (293.15 K) room, cold side 0.3 W/K;
    /// - cooler UA 60 W/K, 0.02 kg/s (about 1.2 L/min) of 18 °C water;
    /// - noise (1σ): thermocouple 0.3 K, RTDs 0.05 K, powers 0.3 %, flow 0.3 %.
    ///
    /// In steady state: head 669 K (396 °C), cold side 299.5 K, 444 W into
    /// the engine, 86 W of work (17 % of the heater power, 31 % of Carnot's
    /// 55 %), 356 W into the coolant (a 4.25 K rise), 58 W lost to the room:
    /// 56.4 W from the head (0.15 W/K × 376 K) and 1.9 W from the cold side
    /// (0.3 W/K × 6.4 K).
    ///
    /// A heat balance that charges the whole room loss to the hot side,
    /// `UA·(T_hot − T_0)` (`[losses] ua_w_per_k` in `rig.toml`), sees
    /// UA = 58.3 W / 376 K = 0.155 W/K here: the head's 0.15 W/K plus the
    /// cold side's loss referred to the head's excess over the room
    /// ([`Truth::room_ua_w_per_k`](super::Truth::room_ua_w_per_k)).
    ///
    /// One hot thermocouple ([`RigParams::hot2`] false).
    pub const fn bench_stirling() -> Self {
        Self {
            heater_power_w: 500.0,
            warm_up_ramp_s: 120.0,
            heater_resistance_ohm: 4.6,
            load_resistance_ohm: 6.8,
            head_capacity_j_per_k: 250.0,
            cold_capacity_j_per_k: 1500.0,
            engine_conductance_w_per_k: 1.2,
            peak_carnot_fraction: 0.35,
            load: 1.0,
            head_room_ua_w_per_k: 0.15,
            cold_room_ua_w_per_k: 0.3,
            cooler_ua_w_per_k: 60.0,
            coolant_flow_kg_s: 0.02,
            coolant_inlet_k: 291.15,
            ambient_k: 293.15,
            board_k: 303.15,
            flow_pulses_per_l: 450.0,
            max_substep_s: 0.5,
            noise: NoiseParams {
                thermocouple_k: 0.3,
                cold_junction_k: 0.1,
                rtd_k: 0.05,
                power_rel: 0.003,
                flow_rel: 0.003,
            },
            hot2: false,
        }
    }

    /// Checks that every parameter is finite and in its physical range, so
    /// the model can produce neither NaN nor infinity.
    pub fn validate(&self) -> Result<(), ParamsError> {
        let pos = |x: f32| x.is_finite() && x > 0.0;
        let nonneg = |x: f32| x.is_finite() && x >= 0.0;
        let temp = |x: f32| x.is_finite() && (200.0..=400.0).contains(&x);
        let checks: [(bool, &'static str, &'static str); 22] = [
            (nonneg(self.heater_power_w), "heater_power_w", "≥ 0"),
            (nonneg(self.warm_up_ramp_s), "warm_up_ramp_s", "≥ 0"),
            (
                pos(self.heater_resistance_ohm),
                "heater_resistance_ohm",
                "> 0",
            ),
            (pos(self.load_resistance_ohm), "load_resistance_ohm", "> 0"),
            (
                pos(self.head_capacity_j_per_k),
                "head_capacity_j_per_k",
                "> 0",
            ),
            (
                pos(self.cold_capacity_j_per_k),
                "cold_capacity_j_per_k",
                "> 0",
            ),
            (
                nonneg(self.engine_conductance_w_per_k),
                "engine_conductance_w_per_k",
                "≥ 0",
            ),
            (
                nonneg(self.peak_carnot_fraction) && self.peak_carnot_fraction < 1.0,
                "peak_carnot_fraction",
                "in [0, 1)",
            ),
            (nonneg(self.load), "load", "≥ 0"),
            (
                nonneg(self.head_room_ua_w_per_k),
                "head_room_ua_w_per_k",
                "≥ 0",
            ),
            (
                nonneg(self.cold_room_ua_w_per_k),
                "cold_room_ua_w_per_k",
                "≥ 0",
            ),
            (nonneg(self.cooler_ua_w_per_k), "cooler_ua_w_per_k", "≥ 0"),
            (nonneg(self.coolant_flow_kg_s), "coolant_flow_kg_s", "≥ 0"),
            (
                temp(self.coolant_inlet_k),
                "coolant_inlet_k",
                "in 200..=400 K",
            ),
            (temp(self.ambient_k), "ambient_k", "in 200..=400 K"),
            (temp(self.board_k), "board_k", "in 200..=400 K"),
            (pos(self.flow_pulses_per_l), "flow_pulses_per_l", "> 0"),
            (
                pos(self.max_substep_s) && self.max_substep_s <= 5.0,
                "max_substep_s",
                "in (0, 5] s",
            ),
            (
                nonneg(self.noise.thermocouple_k),
                "noise.thermocouple_k",
                "≥ 0",
            ),
            (
                nonneg(self.noise.cold_junction_k),
                "noise.cold_junction_k",
                "≥ 0",
            ),
            (nonneg(self.noise.rtd_k), "noise.rtd_k", "≥ 0"),
            (
                nonneg(self.noise.power_rel)
                    && self.noise.power_rel < 0.1
                    && nonneg(self.noise.flow_rel)
                    && self.noise.flow_rel < 0.1,
                "noise.power_rel/flow_rel",
                "in [0, 0.1)",
            ),
        ];
        match checks.iter().find(|c| !c.0) {
            Some(&(_, field, expected)) => Err(ParamsError::OutOfRange { field, expected }),
            None => Ok(()),
        }
    }

    /// The engine's fraction of the Carnot efficiency at the configured
    /// load, `f(load)`.
    pub fn carnot_fraction(&self) -> f32 {
        let d = self.load - 1.0;
        // max/min, not clamp: `f32::clamp`'s bound check drags float
        // formatting (its panic message) into the firmware's flash.
        (self.peak_carnot_fraction * (1.0 - d * d))
            .max(0.0)
            .min(self.peak_carnot_fraction)
    }
}

/// Water c_p in J/(kg·K) at `t_k`, clamped into the correlation's range so
/// the model never fails (beyond it the model is outside its validity
/// anyway: the coolant would boil).
pub(crate) fn water_cp(t_k: f32) -> f32 {
    let t_c = (t_k - 273.15).clamp(water::WATER_RANGE_C.0, water::WATER_RANGE_C.1);
    water::cp_j_per_kg_k(t_c).unwrap_or(4184.0)
}

/// Water density in kg/m³ at `t_k`, clamped like [`water_cp`].
pub(crate) fn water_density(t_k: f32) -> f32 {
    let t_c = (t_k - 273.15).clamp(water::WATER_RANGE_C.0, water::WATER_RANGE_C.1);
    water::density_kg_per_m3(t_c).unwrap_or(998.0)
}

/// Every heat flow at one state, watts; temperatures in kelvin.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Flows {
    pub heater_w: f32,
    pub engine_hot_w: f32,
    pub work_w: f32,
    pub engine_cold_w: f32,
    pub coolant_w: f32,
    pub coolant_outlet_k: f32,
    pub head_room_w: f32,
    pub cold_room_w: f32,
    pub carnot: f32,
}

/// The heat flows at head temperature `t_h`, cold-side temperature `t_c`,
/// heater power `heater_w` and coolant flow `m_dot` (kg/s).
pub(crate) fn flows(p: &RigParams, t_h: f32, t_c: f32, heater_w: f32, m_dot: f32) -> Flows {
    let engine_hot_w = p.engine_conductance_w_per_k * (t_h - t_c);
    let carnot = if t_h > t_c { 1.0 - t_c / t_h } else { 0.0 };
    let work_w = if engine_hot_w > 0.0 {
        p.carnot_fraction() * carnot * engine_hot_w
    } else {
        0.0
    };
    let (coolant_w, coolant_outlet_k) = cooler(p, t_c, m_dot);
    Flows {
        heater_w,
        engine_hot_w,
        work_w,
        engine_cold_w: engine_hot_w - work_w,
        coolant_w,
        coolant_outlet_k,
        head_room_w: p.head_room_ua_w_per_k * (t_h - p.ambient_k),
        cold_room_w: p.cold_room_ua_w_per_k * (t_c - p.ambient_k),
        carnot,
    }
}

/// Heat into the coolant (W) and its outlet temperature (K), by ε-NTU for
/// a wall at `t_c`.
fn cooler(p: &RigParams, t_c: f32, m_dot: f32) -> (f32, f32) {
    let t_in = p.coolant_inlet_k;
    let cap = m_dot * water_cp(t_in);
    // Below a microwatt per kelvin the water is standing still: no heat is
    // carried away and the outlet sensor sits at the wall temperature.
    if cap <= 1e-6 {
        return (0.0, t_c);
    }
    let eff = 1.0 - libm::expf(-p.cooler_ua_w_per_k / cap);
    let q = eff * cap * (t_c - t_in);
    (q, t_in + eff * (t_c - t_in))
}

impl Flows {
    /// dT_h/dt, K/s.
    pub fn head_rate(&self, p: &RigParams) -> f32 {
        (self.heater_w - self.engine_hot_w - self.head_room_w) / p.head_capacity_j_per_k
    }

    /// dT_c/dt, K/s.
    pub fn cold_rate(&self, p: &RigParams) -> f32 {
        (self.engine_cold_w - self.coolant_w - self.cold_room_w) / p.cold_capacity_j_per_k
    }

    /// Entropy generation rate, W/K, with the coolant boundary at the
    /// cooler wall, written as a sum of terms each ≥ 0 so rounding cannot
    /// make it negative: the engine's `Q_eng·η_C·(1 − f)/T_c` (or plain
    /// conduction when it runs no cycle) and the two losses to the room.
    pub fn entropy_generation(&self, p: &RigParams, t_h: f32, t_c: f32) -> f32 {
        let t0 = p.ambient_k;
        let engine = if self.work_w > 0.0 {
            self.engine_hot_w * self.carnot * (1.0 - p.carnot_fraction()) / t_c
        } else {
            self.engine_hot_w * (t_h - t_c) / (t_h * t_c)
        };
        let room_h = self.head_room_w * (t_h - t0) / (t_h * t0);
        let room_c = self.cold_room_w * (t_c - t0) / (t_c * t0);
        engine.max(0.0) + room_h.max(0.0) + room_c.max(0.0)
    }
}

/// The steady state `(T_h, T_c)` for heater power `heater_w` and coolant
/// flow `m_dot`. The head equation is linear in `T_h` given `T_c`; the cold
/// one is solved by bisection (its residual falls monotonically in `T_c`).
/// The outer fixed point contracts by about `G_eng/(ε·ṁ·c_p)` per pass, so
/// a few passes suffice for the bench defaults; 60 is generous.
pub(crate) fn steady_state(p: &RigParams, heater_w: f32, m_dot: f32) -> (f32, f32) {
    let g = p.engine_conductance_w_per_k;
    let ua_h = p.head_room_ua_w_per_k;
    let mut t_c = p.coolant_inlet_k;
    let mut t_h = p.ambient_k;
    for _ in 0..60 {
        t_h = if g + ua_h > 0.0 {
            (heater_w + g * t_c + ua_h * p.ambient_k) / (g + ua_h)
        } else {
            p.ambient_k
        };
        let mut lo = p.coolant_inlet_k.min(p.ambient_k) - 1.0;
        let mut hi = t_h.max(p.ambient_k) + 1.0;
        for _ in 0..40 {
            let mid = 0.5 * (lo + hi);
            let f = flows(p, t_h, mid, heater_w, m_dot);
            if f.engine_cold_w - f.coolant_w - f.cold_room_w > 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        t_c = 0.5 * (lo + hi);
    }
    (t_h, t_c)
}
