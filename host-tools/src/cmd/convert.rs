//! `heatbound convert`: check a sensor against a calibrator.
//!
//! Two stages, as for every command: clap parses the raw arguments into
//! [`Args`]; [`Request::from_args`] checks them (known sensor, finite numbers,
//! flags that fit the sensor) into a [`Request`] that can only describe a
//! valid conversion. The conversion itself is `heatbound::sensor`.
use std::fmt::Write as _;

use clap::ArgGroup;
use heatbound::ZERO_CELSIUS_K;
use heatbound::sensor::rtd::{Rtd, RtdError};
use heatbound::sensor::thermocouple::{ThermocoupleError, ThermocoupleType};
use heatbound::sensor::{SENSOR_NAMES, SensorKind};
use serde::Serialize;

/// Arguments of `heatbound convert`.
#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true, group(
    ArgGroup::new("input")
        .required(true)
        .multiple(false)
        .args(["temperature_c", "emf_mv", "resistance_ohm"])
))]
pub struct Args {
    /// Sensor: type-k, type-j, type-t, pt100 or pt1000.
    #[arg(long, value_name = "SENSOR")]
    pub sensor: String,
    /// Temperature of the hot junction or RTD, in °C: convert to EMF or resistance.
    #[arg(long, value_name = "T", allow_hyphen_values = true)]
    pub temperature_c: Option<f64>,
    /// Thermocouple EMF in mV: convert to temperature (thermocouples only).
    #[arg(long, value_name = "E", allow_hyphen_values = true)]
    pub emf_mv: Option<f64>,
    /// RTD resistance in Ω: convert to temperature (RTDs only).
    #[arg(long, value_name = "R", allow_hyphen_values = true)]
    pub resistance_ohm: Option<f64>,
    /// Cold-junction temperature in °C (thermocouples only; default 0). With
    /// --emf-mv: cold-junction compensation. With --temperature-c: the EMF a
    /// meter with its junction at this temperature reads.
    #[arg(long, value_name = "C", allow_hyphen_values = true)]
    pub cold_junction_c: Option<f64>,
    /// Print JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Why a `convert` request was refused.
#[derive(Debug, thiserror::Error)]
pub enum ConvertError {
    /// The sensor name is not known.
    #[error("unknown sensor '{0}'; expected one of {SENSOR_NAMES}")]
    UnknownSensor(String),
    /// A number is NaN or infinite.
    #[error("{flag} {value} is not a finite number")]
    NonFinite {
        /// The flag, e.g. `--emf-mv`.
        flag: &'static str,
        /// The value given.
        value: f64,
    },
    /// A flag that does not apply to the sensor.
    #[error("{flag} applies only to {applies_to}, not to {sensor}{hint}")]
    WrongFlag {
        /// The flag, e.g. `--emf-mv`.
        flag: &'static str,
        /// The sensors it applies to.
        applies_to: &'static str,
        /// The sensor given.
        sensor: &'static str,
        /// What to use instead, with a leading separator, or empty.
        hint: &'static str,
    },
    /// A thermocouple conversion failed (out of range).
    #[error(transparent)]
    Thermocouple(#[from] ThermocoupleError),
    /// An RTD conversion failed (out of range).
    #[error(transparent)]
    Rtd(#[from] RtdError),
}

/// A checked `convert` request: exactly one valid conversion.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Request {
    /// Thermocouple temperature → EMF read with the junction at `cold_junction_c`.
    ThermocoupleEmf {
        /// The sensor name.
        sensor: SensorKind,
        /// The thermocouple type.
        thermocouple: ThermocoupleType,
        /// Hot-junction temperature, °C.
        temperature_c: f64,
        /// Cold-junction temperature, °C.
        cold_junction_c: f64,
    },
    /// Thermocouple EMF measured with the junction at `cold_junction_c` → temperature.
    ThermocoupleTemperature {
        /// The sensor name.
        sensor: SensorKind,
        /// The thermocouple type.
        thermocouple: ThermocoupleType,
        /// Measured EMF, mV.
        emf_mv: f64,
        /// Cold-junction temperature, °C.
        cold_junction_c: f64,
    },
    /// RTD temperature → resistance.
    RtdResistance {
        /// The sensor name.
        sensor: SensorKind,
        /// The RTD.
        rtd: Rtd,
        /// Temperature, °C.
        temperature_c: f64,
    },
    /// RTD resistance → temperature.
    RtdTemperature {
        /// The sensor name.
        sensor: SensorKind,
        /// The RTD.
        rtd: Rtd,
        /// Resistance, Ω.
        resistance_ohm: f64,
    },
}

fn finite(flag: &'static str, value: Option<f64>) -> Result<Option<f64>, ConvertError> {
    match value {
        Some(v) if !v.is_finite() => Err(ConvertError::NonFinite { flag, value: v }),
        other => Ok(other),
    }
}

impl Request {
    /// Checks raw arguments: a known sensor, finite numbers, flags that fit it.
    pub fn from_args(args: &Args) -> Result<Self, ConvertError> {
        let sensor: SensorKind = args
            .sensor
            .parse()
            .map_err(|_| ConvertError::UnknownSensor(args.sensor.clone()))?;
        let temperature_c = finite("--temperature-c", args.temperature_c)?;
        let emf_mv = finite("--emf-mv", args.emf_mv)?;
        let resistance_ohm = finite("--resistance-ohm", args.resistance_ohm)?;
        let cold_junction_c = finite("--cold-junction-c", args.cold_junction_c)?;
        let name = sensor.name();
        if let Some(thermocouple) = sensor.thermocouple() {
            if resistance_ohm.is_some() {
                return Err(ConvertError::WrongFlag {
                    flag: "--resistance-ohm",
                    applies_to: "RTDs (pt100, pt1000)",
                    sensor: name,
                    hint: "; use --emf-mv or --temperature-c",
                });
            }
            let cold_junction_c = cold_junction_c.unwrap_or(0.0);
            return Ok(match (temperature_c, emf_mv) {
                (Some(temperature_c), _) => Self::ThermocoupleEmf {
                    sensor,
                    thermocouple,
                    temperature_c,
                    cold_junction_c,
                },
                (None, Some(emf_mv)) => Self::ThermocoupleTemperature {
                    sensor,
                    thermocouple,
                    emf_mv,
                    cold_junction_c,
                },
                // clap's ArgGroup makes exactly one input present.
                (None, None) => unreachable!("clap requires one input"),
            });
        }
        let rtd = sensor
            .rtd()
            .ok_or(ConvertError::UnknownSensor(args.sensor.clone()))?;
        if emf_mv.is_some() {
            return Err(ConvertError::WrongFlag {
                flag: "--emf-mv",
                applies_to: "thermocouples (type-k, type-j, type-t)",
                sensor: name,
                hint: "; use --resistance-ohm or --temperature-c",
            });
        }
        if cold_junction_c.is_some() {
            return Err(ConvertError::WrongFlag {
                flag: "--cold-junction-c",
                applies_to: "thermocouples (type-k, type-j, type-t)",
                sensor: name,
                hint: "",
            });
        }
        Ok(match (temperature_c, resistance_ohm) {
            (Some(temperature_c), _) => Self::RtdResistance {
                sensor,
                rtd,
                temperature_c,
            },
            (None, Some(resistance_ohm)) => Self::RtdTemperature {
                sensor,
                rtd,
                resistance_ohm,
            },
            (None, None) => unreachable!("clap requires one input"),
        })
    }

    /// Runs the conversion.
    pub fn convert(self) -> Result<Reading, ConvertError> {
        Ok(match self {
            Self::ThermocoupleEmf {
                sensor,
                thermocouple,
                temperature_c,
                cold_junction_c,
            } => Reading {
                sensor: sensor.name(),
                emf_mv: Some(
                    thermocouple.emf_mv_with_cold_junction(temperature_c, cold_junction_c)?,
                ),
                cold_junction_c: Some(cold_junction_c),
                temperature_c,
                temperature_k: temperature_c + ZERO_CELSIUS_K,
                resistance_ohm: None,
            },
            Self::ThermocoupleTemperature {
                sensor,
                thermocouple,
                emf_mv,
                cold_junction_c,
            } => {
                let temperature_c =
                    thermocouple.temperature_c_with_cold_junction(emf_mv, cold_junction_c)?;
                Reading {
                    sensor: sensor.name(),
                    emf_mv: Some(emf_mv),
                    cold_junction_c: Some(cold_junction_c),
                    temperature_c,
                    temperature_k: temperature_c + ZERO_CELSIUS_K,
                    resistance_ohm: None,
                }
            }
            Self::RtdResistance {
                sensor,
                rtd,
                temperature_c,
            } => Reading {
                sensor: sensor.name(),
                emf_mv: None,
                cold_junction_c: None,
                temperature_c,
                temperature_k: temperature_c + ZERO_CELSIUS_K,
                resistance_ohm: Some(rtd.resistance_ohm(temperature_c)?),
            },
            Self::RtdTemperature {
                sensor,
                rtd,
                resistance_ohm,
            } => {
                let temperature_c = rtd.temperature_c(resistance_ohm)?;
                Reading {
                    sensor: sensor.name(),
                    emf_mv: None,
                    cold_junction_c: None,
                    temperature_c,
                    temperature_k: temperature_c + ZERO_CELSIUS_K,
                    resistance_ohm: Some(resistance_ohm),
                }
            }
        })
    }
}

/// The result of a conversion: both sides of the sensor, the one that does
/// not apply `None` (JSON `null`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Reading {
    /// The sensor name (`type-k`, `pt100`, ...).
    pub sensor: &'static str,
    /// Thermocouple EMF in mV as the meter reads it (junction at `cold_junction_c`).
    pub emf_mv: Option<f64>,
    /// Thermocouple cold-junction temperature in °C.
    pub cold_junction_c: Option<f64>,
    /// Temperature in °C.
    pub temperature_c: f64,
    /// Temperature in K.
    pub temperature_k: f64,
    /// RTD resistance in Ω.
    pub resistance_ohm: Option<f64>,
}

impl Reading {
    /// Readable lines for the bench.
    pub fn to_text(self) -> String {
        let mut s = String::new();
        let _ = writeln!(s, "sensor:         {}", self.sensor);
        let _ = writeln!(
            s,
            "temperature:    {:.4} °C ({:.4} K)",
            self.temperature_c, self.temperature_k
        );
        if let Some(emf_mv) = self.emf_mv {
            let cj = self.cold_junction_c.unwrap_or(0.0);
            let _ = writeln!(
                s,
                "EMF:            {emf_mv:.6} mV (cold junction at {cj} °C)"
            );
        }
        if let Some(r) = self.resistance_ohm {
            let _ = writeln!(s, "resistance:     {r:.5} Ω");
        }
        s
    }
}

/// Runs the subcommand.
pub fn run(args: &Args) -> anyhow::Result<()> {
    let reading = Request::from_args(args)?.convert()?;
    if args.json {
        println!("{}", serde_json::to_string(&reading)?);
    } else {
        print!("{}", reading.to_text());
    }
    Ok(())
}
