//! What the monitor is told about a rig: the machine's mode, the channels'
//! uncertainties, the steady-state bands and the health limits.

use serde::{Deserialize, Serialize};

/// Which way the machine runs, which decides the figure of merit.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[serde(rename_all = "snake_case")]
pub enum Mode {
    /// A heat engine: efficiency η = W/Q_in against η_C = 1 − T_c/T_h.
    ///
    /// Channels: `heat_in_w` is heat drawn from the hot side, `work_w` the
    /// work delivered, `heat_out_w` the heat rejected to the cold side.
    #[default]
    Engine,
    /// A heat pump: COP = Q_hot/W against T_h/(T_h − T_c).
    ///
    /// Channels: `heat_in_w` is the heat delivered to the hot side, `work_w`
    /// the work driving the machine, `heat_out_w` the heat drawn from the
    /// cold side.
    HeatPump,
    /// A cooler: COP = Q_cold/W against T_c/(T_h − T_c); channels as for
    /// [`Mode::HeatPump`].
    Cooler,
}

impl Mode {
    /// The name used in `rig.toml`.
    pub const fn as_str(self) -> &'static str {
        match self {
            Mode::Engine => "engine",
            Mode::HeatPump => "heat_pump",
            Mode::Cooler => "cooler",
        }
    }

    /// Whether the machine runs backwards (heat pump or cooler).
    pub const fn is_reverse(self) -> bool {
        !matches!(self, Mode::Engine)
    }
}

impl core::fmt::Display for Mode {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Validated standard uncertainties.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Uncertainty {
    /// Hot-side temperature, kelvin.
    pub hot_k: f64,
    /// The second hot-side sensor, kelvin (when there is one).
    pub hot2_k: f64,
    /// Cold-side temperature, kelvin.
    pub cold_k: f64,
    /// Heat input, relative.
    pub heat_in_rel: f64,
    /// Work, relative.
    pub work_rel: f64,
    /// Heat out, relative.
    pub heat_out_rel: f64,
}

impl Default for Uncertainty {
    fn default() -> Self {
        // See the config module docs for the tolerance class behind each value.
        const SQRT3: f64 = 1.732_050_807_568_877_2;
        Self {
            hot_k: 2.0 / SQRT3,
            hot2_k: 2.0 / SQRT3,
            cold_k: 0.25 / SQRT3,
            heat_in_rel: 0.01 / SQRT3,
            work_rel: 0.01 / SQRT3,
            heat_out_rel: 0.02 / SQRT3,
        }
    }
}

/// Validated steady-state settings.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Steady {
    /// Seconds every channel must stay in band.
    pub duration_s: f64,
    /// Hot-side band, kelvin.
    pub hot_band_k: f64,
    /// Cold-side band, kelvin.
    pub cold_band_k: f64,
    /// Heat-input band, relative.
    pub heat_in_band_rel: f64,
    /// Work band, relative.
    pub work_band_rel: f64,
    /// Heat-out band, relative.
    pub heat_out_band_rel: f64,
}

impl Default for Steady {
    fn default() -> Self {
        Self {
            duration_s: 60.0,
            hot_band_k: 2.0,
            cold_band_k: 2.0,
            heat_in_band_rel: 0.05,
            work_band_rel: 0.05,
            heat_out_band_rel: 0.05,
        }
    }
}

/// Validated health settings.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Health {
    /// Consecutive identical readings that make a channel stuck; 0 = off.
    pub stuck_samples: u32,
    /// Sample spacing that makes the channels stale, seconds.
    pub stale_s: f64,
    /// Lowest plausible temperature, kelvin.
    pub min_temperature_k: f64,
    /// Highest plausible temperature, kelvin.
    pub max_temperature_k: f64,
}

/// What the monitor needs to know about a rig: the settings the
/// configuration gathers ([`MonitorConfig`] gives them).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MonitorSettings {
    /// Which way the machine runs.
    pub mode: Mode,
    /// Ambient temperature T0 for exergy, kelvin; `None`: the cold-side mean.
    pub ambient_k: Option<f64>,
    /// Length of the sliding window, in valid samples.
    pub window_samples: u32,
    /// Longest gap bridged by the integration, seconds.
    pub max_gap_s: f64,
    /// Standard uncertainties of the channels.
    pub uncertainty: Uncertainty,
    /// Steady-state detection.
    pub steady: Steady,
    /// Channel health.
    pub health: Health,
}

/// Anything that holds the monitor's settings, such as the validated rig
/// configuration.
pub trait MonitorConfig {
    /// The monitor's settings.
    fn monitor_settings(&self) -> MonitorSettings;
}

impl MonitorConfig for MonitorSettings {
    fn monitor_settings(&self) -> MonitorSettings {
        *self
    }
}

/// What the figures need besides the integrals.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FigureSettings {
    /// Engine, heat pump or cooler.
    pub mode: Mode,
    /// T0, kelvin; `None` = the cold-side mean.
    pub ambient_k: Option<f64>,
    /// Standard uncertainties.
    pub uncertainty: Uncertainty,
}

impl FigureSettings {
    /// The settings of `config`.
    pub fn new(config: &impl MonitorConfig) -> Self {
        let config = &config.monitor_settings();
        Self {
            mode: config.mode,
            ambient_k: config.ambient_k,
            uncertainty: config.uncertainty,
        }
    }
}
