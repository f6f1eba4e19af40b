//! The `[csv]` table of `rig.toml`: how a data logger's CSV file is laid out
//! (delimiter, decimal mark, preamble, which column is which channel, in
//! which unit) and the pure conversions of its cells to the monitor's units
//! (seconds, kelvin, watts). It sits at the start of the offline branch of
//! the data flow: [`crate::rigfile`] reads the table, [`crate::replay`]
//! applies it to the file's header and to every row.
//!
//! ```text
//! rig.toml [csv] --(toml)--> CsvFile --validate--> CsvLayout --> replay (analyze)
//!            cell --> seconds (s, ms, min, h, ISO 8601, Excel days)
//!                 --> kelvin  (°C, K, °F; thermocouple mV with cold junction; RTD Ω)
//!                 --> watts   (W, kW, mW)
//! ```
//!
//! Raw sensor signals go through the same ITS-90 thermocouple and IEC 60751
//! RTD functions as `heatbound convert` ([`heatbound::sensor`]); a signal
//! outside its sensor's range is an invalid sample, as a broken
//! thermocouple's over-range reading is on a controller.
//!
//! ```
//! use heatbound_host::csv_layout::{CsvFile, CsvLayout};
//! let file: CsvFile = toml::from_str(r#"
//!     delimiter = ";"
//!     decimal = ","
//!     time = { column = "Zeit", unit = "s" }
//!     hot = { column = "TC1", unit = "mV", sensor = "type-k", cold_junction_c = 25.0 }
//!     heat_in = { column = "P_Heizer", unit = "kW" }
//! "#).unwrap();
//! let layout = CsvLayout::validate(&file).unwrap();
//! let hot = layout.hot.as_ref().unwrap();
//! // NIST ITS-90 table (Monograph 175): type K 25 °C is 1.000 mV and
//! // 200 °C is 8.138 mV, so a meter at 25 °C reads 7.138 mV.
//! let t_k = hot.signal.kelvin(7.138, 25.0);
//! assert!((t_k - 473.15).abs() < 0.03);
//! ```
use std::fmt;

use heatbound::ZERO_CELSIUS_K;
use heatbound::sensor::SensorKind;
use heatbound::sensor::rtd::Rtd;
use heatbound::sensor::thermocouple::ThermocoupleType;
use jiff::Timestamp;
use jiff::fmt::temporal::Pieces;
use jiff::tz::TimeZone;
use serde::{Deserialize, Serialize};

// ---------------------------------------------------------------------------
// The table as written

/// `[csv]` as written in `rig.toml`: every key optional, unknown keys refused.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CsvFile {
    /// `","` (default), `";"`, `"\t"` or `" "` (runs of blanks).
    pub delimiter: Option<String>,
    /// `"."` (default) or `","`.
    pub decimal: Option<String>,
    /// Lines before the header (a logger's preamble).
    pub skip_lines: Option<u32>,
    /// IANA time zone of timestamps written without an offset.
    pub time_zone: Option<String>,
    /// The time column.
    pub time: Option<ColumnFile>,
    /// The hot-side temperature.
    pub hot: Option<ColumnFile>,
    /// The second hot-side temperature.
    pub hot2: Option<ColumnFile>,
    /// The cold-side temperature.
    pub cold: Option<ColumnFile>,
    /// Heat in.
    pub heat_in: Option<ColumnFile>,
    /// Work out.
    pub work: Option<ColumnFile>,
    /// Heat out.
    pub heat_out: Option<ColumnFile>,
}

/// One channel's column as written: `{ column = "…", unit = "…", … }`.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ColumnFile {
    /// The header name of the column, exactly (blanks around it ignored).
    pub column: String,
    /// The unit of its cells.
    pub unit: Option<String>,
    /// For a raw signal (`mV`, `ohm`): the sensor.
    pub sensor: Option<String>,
    /// For a thermocouple in `mV`: the column of its cold-junction temperature.
    pub cold_junction: Option<JunctionFile>,
    /// For a thermocouple in `mV`: a fixed cold-junction temperature, °C.
    pub cold_junction_c: Option<f64>,
}

/// `cold_junction = { column = "…", unit = "…" }`.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct JunctionFile {
    /// The header name of the column.
    pub column: String,
    /// `degC`, `K` or `degF`.
    pub unit: Option<String>,
}

// ---------------------------------------------------------------------------
// The table checked

/// The field separator.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum Delimiter {
    /// `,`
    Comma,
    /// `;`
    Semicolon,
    /// A tab.
    Tab,
    /// Runs of spaces or tabs, as in aligned columns (blanks at the start and
    /// end of a line ignored; a quoted field may hold blanks).
    Blanks,
}

impl Delimiter {
    /// The byte the CSV reader splits on (blank runs are turned into one tab).
    pub const fn byte(self) -> u8 {
        match self {
            Delimiter::Comma => b',',
            Delimiter::Semicolon => b';',
            Delimiter::Tab | Delimiter::Blanks => b'\t',
        }
    }
}

/// The validated `[csv]` table: what [`crate::replay`] applies to a file. A
/// channel left out is found by its default names (`time_s`, `hot_c` or
/// `hot_k`, …), as without the table.
#[derive(Clone, Debug)]
pub struct CsvLayout {
    /// The field separator.
    pub delimiter: Delimiter,
    /// The decimal mark: `b'.'` or `b','`.
    pub decimal: u8,
    /// Lines before the header.
    pub skip_lines: u32,
    /// The time column.
    pub time: Option<TimeColumn>,
    /// The hot-side temperature.
    pub hot: Option<TemperatureColumn>,
    /// The second hot-side temperature.
    pub hot2: Option<TemperatureColumn>,
    /// The cold-side temperature.
    pub cold: Option<TemperatureColumn>,
    /// Heat in.
    pub heat_in: Option<PowerColumn>,
    /// Work out.
    pub work: Option<PowerColumn>,
    /// Heat out.
    pub heat_out: Option<PowerColumn>,
}

/// The time column and how to read it.
#[derive(Clone, Debug)]
pub struct TimeColumn {
    /// Header name.
    pub column: String,
    /// Unit of the cells.
    pub unit: TimeUnit,
}

/// How a time cell is read.
#[derive(Clone, Debug)]
#[non_exhaustive]
pub enum TimeUnit {
    /// A number with a scale to seconds: s 1, ms 0.001, min 60, h 3600.
    Number {
        /// The unit's name, as written.
        name: &'static str,
        /// Seconds per unit.
        seconds: f64,
        /// Divide instead of multiply (ms: x / 1000 is exact where x · 0.001 is not).
        divide: bool,
    },
    /// ISO 8601 date and time; without an offset, local time of `zone`.
    Iso8601 {
        /// `csv.time_zone`, if given.
        zone: Option<TimeZone>,
    },
    /// Spreadsheet serial date: days since 1899-12-30, local time of
    /// `zone` (UTC without one).
    ExcelDays {
        /// `csv.time_zone`, if given.
        zone: Option<TimeZone>,
    },
}

impl TimeUnit {
    /// Whether the time axis is absolute (Unix seconds), not seconds of a
    /// logger's own clock.
    pub const fn is_absolute(&self) -> bool {
        matches!(self, TimeUnit::Iso8601 { .. } | TimeUnit::ExcelDays { .. })
    }

    /// Whether local times without an offset are read in a zone, where a
    /// clock going back an hour makes time repeat.
    pub fn zoned(&self) -> bool {
        matches!(
            self,
            TimeUnit::Iso8601 { zone: Some(_) } | TimeUnit::ExcelDays { zone: Some(_) }
        )
    }

    /// The unit as the report names it.
    pub fn name(&self) -> &'static str {
        match self {
            TimeUnit::Number { name, .. } => name,
            TimeUnit::Iso8601 { .. } => "iso8601",
            TimeUnit::ExcelDays { .. } => "excel_days",
        }
    }

    /// The unit and, for a time of day, the zone it is read in:
    /// `iso8601, local time of Europe/Berlin without an offset`.
    pub fn describe(&self) -> String {
        match self {
            TimeUnit::Iso8601 { zone: Some(zone) } => format!(
                "iso8601, local time of {} without an offset",
                zone.iana_name().unwrap_or("the time zone")
            ),
            TimeUnit::ExcelDays { zone: Some(zone) } => format!(
                "excel_days, local time of {}",
                zone.iana_name().unwrap_or("the time zone")
            ),
            TimeUnit::ExcelDays { zone: None } => "excel_days, UTC".to_string(),
            other => other.name().to_string(),
        }
    }
}

/// A temperature scale.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum TemperatureUnit {
    /// Degrees Celsius.
    Celsius,
    /// Kelvin.
    Kelvin,
    /// Degrees Fahrenheit.
    Fahrenheit,
}

impl TemperatureUnit {
    /// `x` in this unit as kelvin.
    ///
    /// ```
    /// use heatbound_host::csv_layout::TemperatureUnit;
    /// // Definition of the scales (BIPM SI brochure; NIST SP 811 B.8):
    /// // 212 °F is 100 °C is 373.15 K.
    /// assert!((TemperatureUnit::Fahrenheit.kelvin(212.0) - 373.15).abs() < 1e-12);
    /// assert_eq!(TemperatureUnit::Celsius.kelvin(100.0), 100.0 + 273.15);
    /// ```
    #[inline]
    pub fn kelvin(self, x: f64) -> f64 {
        match self {
            TemperatureUnit::Celsius => x + ZERO_CELSIUS_K,
            TemperatureUnit::Kelvin => x,
            // T/K = (t/°F + 459.67) · 5/9 (NIST SP 811, B.8).
            TemperatureUnit::Fahrenheit => (x + 459.67) * (5.0 / 9.0),
        }
    }

    /// `x` in this unit as °C.
    #[inline]
    pub fn celsius(self, x: f64) -> f64 {
        match self {
            TemperatureUnit::Celsius => x,
            TemperatureUnit::Kelvin => x - ZERO_CELSIUS_K,
            TemperatureUnit::Fahrenheit => (x - 32.0) * (5.0 / 9.0),
        }
    }

    /// The unit's name as `[csv]` writes it.
    pub const fn name(self) -> &'static str {
        match self {
            TemperatureUnit::Celsius => "degC",
            TemperatureUnit::Kelvin => "K",
            TemperatureUnit::Fahrenheit => "degF",
        }
    }
}

/// A temperature column and how its cells become kelvin.
#[derive(Clone, Debug)]
pub struct TemperatureColumn {
    /// Header name.
    pub column: String,
    /// What the cells hold.
    pub signal: Signal,
}

/// What a temperature column holds.
#[derive(Clone, Debug)]
#[non_exhaustive]
pub enum Signal {
    /// A temperature.
    Temperature(TemperatureUnit),
    /// A thermocouple's EMF in mV, measured with its cold junction at `junction`.
    Thermocouple {
        /// The sensor, as named.
        sensor: SensorKind,
        /// Its type.
        thermocouple: ThermocoupleType,
        /// Where its cold junction is.
        junction: Junction,
    },
    /// A platinum RTD's resistance in Ω.
    Rtd {
        /// The sensor, as named.
        sensor: SensorKind,
        /// Its R0.
        rtd: Rtd,
    },
}

impl Signal {
    /// A cell's value `x` as kelvin, the cold junction at `junction_c` °C
    /// (read only by a thermocouple). NaN for an invalid sample: NaN in, or
    /// a signal outside its sensor's range.
    ///
    /// A thermocouple is compensated as `heatbound convert --emf-mv
    /// --cold-junction-c` does it ([`ThermocoupleType::temperature_c_with_cold_junction`]):
    /// E(t_cj), the junction's EMF against 0 °C, added to the reading, and
    /// the reference function inverted.
    #[inline]
    pub fn kelvin(&self, x: f64, junction_c: f64) -> f64 {
        self.kelvin_with_junction_emf(x, self.junction_emf_mv(junction_c))
    }

    /// E(t_cj) in mV of a thermocouple's cold junction at `junction_c` °C
    /// (NaN outside the type's range); 0 for any other signal. A replay
    /// keeps it while the junction's reading stays the same.
    #[inline]
    pub fn junction_emf_mv(&self, junction_c: f64) -> f64 {
        match self {
            Signal::Thermocouple { thermocouple, .. } => {
                thermocouple.emf_mv(junction_c).unwrap_or(f64::NAN)
            }
            _ => 0.0,
        }
    }

    /// [`Signal::kelvin`] with the cold junction's EMF already known
    /// ([`Signal::junction_emf_mv`]).
    #[inline]
    pub fn kelvin_with_junction_emf(&self, x: f64, junction_emf_mv: f64) -> f64 {
        match self {
            Signal::Temperature(unit) => unit.kelvin(x),
            Signal::Thermocouple { thermocouple, .. } => thermocouple
                .temperature_c(x + junction_emf_mv)
                .map_or(f64::NAN, |c| c + ZERO_CELSIUS_K),
            Signal::Rtd { rtd, .. } => rtd
                .temperature_c(x)
                .map_or(f64::NAN, |c| c + ZERO_CELSIUS_K),
        }
    }

    /// The signal as the report names it: `degC`, `mV type-k, cold junction CJ (degC)`.
    pub fn describe(&self) -> String {
        match self {
            Signal::Temperature(unit) => unit.name().to_string(),
            Signal::Thermocouple {
                sensor, junction, ..
            } => match junction {
                Junction::Fixed { celsius } => {
                    format!("mV {}, cold junction at {celsius} °C", sensor.name())
                }
                Junction::Column { column, unit } => format!(
                    "mV {}, cold junction {} ({})",
                    sensor.name(),
                    column,
                    unit.name()
                ),
            },
            Signal::Rtd { sensor, .. } => format!("ohm {}", sensor.name()),
        }
    }
}

/// A thermocouple's cold junction.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum Junction {
    /// At a fixed temperature (`cold_junction_c`).
    Fixed {
        /// °C.
        celsius: f64,
    },
    /// Read from a column of the file (`cold_junction`).
    Column {
        /// Header name.
        column: String,
        /// Its scale.
        unit: TemperatureUnit,
    },
}

/// A power column.
#[derive(Clone, Debug)]
pub struct PowerColumn {
    /// Header name.
    pub column: String,
    /// Its unit.
    pub unit: PowerUnit,
}

/// A power unit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum PowerUnit {
    /// Watts.
    W,
    /// Kilowatts.
    KW,
    /// Milliwatts.
    MW,
}

impl PowerUnit {
    /// `x` in this unit as watts.
    ///
    /// ```
    /// use heatbound_host::csv_layout::PowerUnit;
    /// assert_eq!(PowerUnit::KW.watts(0.5), 500.0);
    /// assert_eq!(PowerUnit::MW.watts(250.0), 0.25);
    /// ```
    #[inline]
    pub fn watts(self, x: f64) -> f64 {
        match self {
            PowerUnit::W => x,
            PowerUnit::KW => x * 1000.0,
            // A division by the exact 1000 rounds once; x · 0.001 twice.
            PowerUnit::MW => x / 1000.0,
        }
    }

    /// The unit's name as `[csv]` writes it.
    pub const fn name(self) -> &'static str {
        match self {
            PowerUnit::W => "W",
            PowerUnit::KW => "kW",
            PowerUnit::MW => "mW",
        }
    }
}

// ---------------------------------------------------------------------------
// Errors

/// What is wrong with the `[csv]` table. Each text starts with the key
/// (`csv.hot.unit`), which the loader also places at its line and column.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CsvConfigError {
    /// A key holds a value that is not one of its choices.
    #[error("`{key}`: {value:?} is not one of {expected}")]
    Choice {
        /// The dotted key.
        key: String,
        /// The value, as written (bounded).
        value: String,
        /// The choices.
        expected: &'static str,
    },
    /// A channel's `unit` is missing.
    #[error("`{key}`: missing: give the column's unit ({expected})")]
    MissingUnit {
        /// The dotted key.
        key: String,
        /// The units it may take.
        expected: &'static str,
    },
    /// A raw signal without its sensor.
    #[error("`{key}`: missing: unit {unit:?} is a raw signal; name its sensor ({expected})")]
    MissingSensor {
        /// The dotted key (`csv.hot.sensor`).
        key: String,
        /// The unit given.
        unit: &'static str,
        /// The sensors it fits.
        expected: &'static str,
    },
    /// A sensor that does not give the unit.
    #[error("`{key}`: {sensor} does not give {unit:?}; {why}")]
    SensorMismatch {
        /// The dotted key (`csv.cold.sensor`).
        key: String,
        /// The sensor named.
        sensor: &'static str,
        /// The unit given.
        unit: &'static str,
        /// What would fit.
        why: &'static str,
    },
    /// A key that has no meaning with the other keys given.
    #[error("`{key}`: {why}")]
    NotApplicable {
        /// The dotted key.
        key: String,
        /// Why it does not apply.
        why: &'static str,
    },
    /// A thermocouple in mV without its cold junction.
    #[error(
        "`{key}`: a thermocouple read in mV needs its cold-junction temperature: give \
         cold_junction = {{ column = \"…\", unit = \"degC\" }} or cold_junction_c"
    )]
    MissingColdJunction {
        /// The channel's dotted key (`csv.hot`).
        key: String,
    },
    /// Both `cold_junction` and `cold_junction_c`.
    #[error("`{key}`: give cold_junction or cold_junction_c, not both")]
    TwoColdJunctions {
        /// The channel's dotted key.
        key: String,
    },
    /// A fixed cold junction outside the thermocouple's range.
    #[error(
        "`{key}`: {value} °C is not a cold-junction temperature {thermocouple} can have ({lo} to {hi} °C)"
    )]
    ColdJunctionRange {
        /// The dotted key (`csv.hot.cold_junction_c`).
        key: String,
        /// The value given.
        value: f64,
        /// The thermocouple type.
        thermocouple: ThermocoupleType,
        /// Its lowest temperature, °C.
        lo: f64,
        /// Its highest temperature, °C.
        hi: f64,
    },
    /// An empty column name.
    #[error("`{key}`: the column name is empty")]
    EmptyColumn {
        /// The dotted key.
        key: String,
    },
    /// A time zone name the built-in database does not know.
    #[error(
        "`{key}`: unknown time zone {name:?}; give an IANA name such as \"Europe/Berlin\" or \"UTC\""
    )]
    UnknownTimeZone {
        /// The dotted key.
        key: String,
        /// The name given (bounded).
        name: String,
    },
}

impl CsvConfigError {
    /// The dotted key the error is about, to place it in the file.
    pub fn key(&self) -> &str {
        match self {
            CsvConfigError::Choice { key, .. }
            | CsvConfigError::MissingUnit { key, .. }
            | CsvConfigError::MissingSensor { key, .. }
            | CsvConfigError::SensorMismatch { key, .. }
            | CsvConfigError::NotApplicable { key, .. }
            | CsvConfigError::MissingColdJunction { key }
            | CsvConfigError::TwoColdJunctions { key }
            | CsvConfigError::ColdJunctionRange { key, .. }
            | CsvConfigError::EmptyColumn { key }
            | CsvConfigError::UnknownTimeZone { key, .. } => key,
        }
    }
}

// ---------------------------------------------------------------------------
// Validation

const TIME_UNITS: &str = "s, ms, min, h, iso8601, excel_days";
const TEMPERATURE_UNITS: &str = "degC, K, degF, mV (thermocouple) or ohm (RTD)";
const JUNCTION_UNITS: &str = "degC, K or degF";
const POWER_UNITS: &str = "W, kW or mW";
const THERMOCOUPLES: &str = "type-k, type-j or type-t";
const RTDS: &str = "pt100 or pt1000";

fn choice(key: &str, value: &str, expected: &'static str) -> CsvConfigError {
    CsvConfigError::Choice {
        key: key.to_string(),
        value: crate::term::excerpt(value, 40),
        expected,
    }
}

fn column_name(key: &str, column: &str) -> Result<String, CsvConfigError> {
    let name = column.trim();
    if name.is_empty() {
        return Err(CsvConfigError::EmptyColumn {
            key: format!("{key}.column"),
        });
    }
    Ok(name.to_string())
}

/// A key that only some units take: an error when it is given.
fn refuse<T>(value: &Option<T>, key: &str, why: &'static str) -> Result<(), CsvConfigError> {
    match value {
        Some(_) => Err(CsvConfigError::NotApplicable {
            key: key.to_string(),
            why,
        }),
        None => Ok(()),
    }
}

fn temperature_unit(unit: &str) -> Option<TemperatureUnit> {
    match unit {
        "degC" | "°C" => Some(TemperatureUnit::Celsius),
        "K" => Some(TemperatureUnit::Kelvin),
        "degF" | "°F" => Some(TemperatureUnit::Fahrenheit),
        _ => None,
    }
}

/// A sensor name: `convert`'s names (`type-k`, `pt100`, any case), or a
/// thermocouple's bare letter (`k`, `j`, `t`).
fn sensor_kind(name: &str) -> Option<SensorKind> {
    match name.trim().to_ascii_lowercase().as_str() {
        "k" | "type_k" => Some(SensorKind::TypeK),
        "j" | "type_j" => Some(SensorKind::TypeJ),
        "t" | "type_t" => Some(SensorKind::TypeT),
        other => other.parse().ok(),
    }
}

impl CsvLayout {
    /// Checks the table as written: known delimiter, decimal mark, units
    /// and sensors, every raw signal with what it needs, no key that does
    /// not apply, a known time zone.
    ///
    /// ```
    /// use heatbound_host::csv_layout::{CsvFile, CsvLayout};
    /// let file: CsvFile = toml::from_str(r#"cold = { column = "R", unit = "ohm", sensor = "type-k" }"#).unwrap();
    /// let err = CsvLayout::validate(&file).unwrap_err();
    /// assert_eq!(err.key(), "csv.cold.sensor");
    /// ```
    pub fn validate(file: &CsvFile) -> Result<CsvLayout, CsvConfigError> {
        let delimiter = match file.delimiter.as_deref() {
            None | Some(",") => Delimiter::Comma,
            Some(";") => Delimiter::Semicolon,
            Some("\t") => Delimiter::Tab,
            Some(" ") => Delimiter::Blanks,
            Some(other) => {
                return Err(choice(
                    "csv.delimiter",
                    other,
                    "\",\", \";\", \"\\t\" (tab) or \" \" (blanks)",
                ));
            }
        };
        let decimal = match file.decimal.as_deref() {
            None | Some(".") => b'.',
            Some(",") => b',',
            Some(other) => return Err(choice("csv.decimal", other, "\".\" or \",\"")),
        };
        if decimal == b',' && delimiter == Delimiter::Comma {
            return Err(CsvConfigError::NotApplicable {
                key: "csv.decimal".into(),
                why: "a decimal comma needs another delimiter: set csv.delimiter to \";\", \"\\t\" or \" \"",
            });
        }
        let zone =
            match file.time_zone.as_deref() {
                None => None,
                Some(name) => Some(TimeZone::get(name.trim()).map_err(|_| {
                    CsvConfigError::UnknownTimeZone {
                        key: "csv.time_zone".into(),
                        name: crate::term::excerpt(name, 60),
                    }
                })?),
            };
        let time = file
            .time
            .as_ref()
            .map(|c| time_column(c, zone.clone()))
            .transpose()?;
        if zone.is_some() && !time.as_ref().is_some_and(|t| t.unit.is_absolute()) {
            return Err(CsvConfigError::NotApplicable {
                key: "csv.time_zone".into(),
                why: "applies only to a time column in iso8601 or excel_days",
            });
        }
        let temperature = |c: &Option<ColumnFile>, key: &str| {
            c.as_ref().map(|c| temperature_column(c, key)).transpose()
        };
        let power = |c: &Option<ColumnFile>, key: &str| {
            c.as_ref().map(|c| power_column(c, key)).transpose()
        };
        Ok(CsvLayout {
            delimiter,
            decimal,
            skip_lines: file.skip_lines.unwrap_or(0),
            time,
            hot: temperature(&file.hot, "csv.hot")?,
            hot2: temperature(&file.hot2, "csv.hot2")?,
            cold: temperature(&file.cold, "csv.cold")?,
            heat_in: power(&file.heat_in, "csv.heat_in")?,
            work: power(&file.work, "csv.work")?,
            heat_out: power(&file.heat_out, "csv.heat_out")?,
        })
    }
}

fn not_a_temperature(c: &ColumnFile, key: &str) -> Result<(), CsvConfigError> {
    const WHY: &str = "applies only to a temperature column";
    refuse(&c.sensor, &format!("{key}.sensor"), WHY)?;
    refuse(&c.cold_junction, &format!("{key}.cold_junction"), WHY)?;
    refuse(&c.cold_junction_c, &format!("{key}.cold_junction_c"), WHY)
}

fn time_column(c: &ColumnFile, zone: Option<TimeZone>) -> Result<TimeColumn, CsvConfigError> {
    let key = "csv.time";
    not_a_temperature(c, key)?;
    let unit_key = format!("{key}.unit");
    let Some(unit) = c.unit.as_deref() else {
        return Err(CsvConfigError::MissingUnit {
            key: unit_key,
            expected: TIME_UNITS,
        });
    };
    let number = |name, seconds, divide| TimeUnit::Number {
        name,
        seconds,
        divide,
    };
    let unit = match unit {
        "s" => number("s", 1.0, false),
        "ms" => number("ms", 1000.0, true),
        "min" => number("min", 60.0, false),
        "h" => number("h", 3600.0, false),
        "iso8601" => TimeUnit::Iso8601 { zone },
        "excel_days" => TimeUnit::ExcelDays { zone },
        other => return Err(choice(&unit_key, other, TIME_UNITS)),
    };
    Ok(TimeColumn {
        column: column_name(key, &c.column)?,
        unit,
    })
}

fn power_column(c: &ColumnFile, key: &str) -> Result<PowerColumn, CsvConfigError> {
    not_a_temperature(c, key)?;
    let unit_key = format!("{key}.unit");
    let unit = match c.unit.as_deref() {
        None => {
            return Err(CsvConfigError::MissingUnit {
                key: unit_key,
                expected: POWER_UNITS,
            });
        }
        Some("W") => PowerUnit::W,
        Some("kW") => PowerUnit::KW,
        Some("mW") => PowerUnit::MW,
        Some(other) => return Err(choice(&unit_key, other, POWER_UNITS)),
    };
    Ok(PowerColumn {
        column: column_name(key, &c.column)?,
        unit,
    })
}

fn temperature_column(c: &ColumnFile, key: &str) -> Result<TemperatureColumn, CsvConfigError> {
    let unit_key = format!("{key}.unit");
    let sensor_key = format!("{key}.sensor");
    let Some(unit) = c.unit.as_deref() else {
        return Err(CsvConfigError::MissingUnit {
            key: unit_key,
            expected: TEMPERATURE_UNITS,
        });
    };
    let junction_why = "applies only to a thermocouple read in mV";
    let sensor = c
        .sensor
        .as_deref()
        .map(|s| {
            sensor_kind(s)
                .ok_or_else(|| choice(&sensor_key, s, "type-k, type-j, type-t, pt100 or pt1000"))
        })
        .transpose()?;
    let signal = match unit {
        "mV" => {
            let Some(sensor) = sensor else {
                return Err(CsvConfigError::MissingSensor {
                    key: sensor_key,
                    unit: "mV",
                    expected: THERMOCOUPLES,
                });
            };
            let Some(thermocouple) = sensor.thermocouple() else {
                return Err(CsvConfigError::SensorMismatch {
                    key: sensor_key,
                    sensor: sensor.name(),
                    unit: "mV",
                    why: "an RTD is read in ohm; mV is for type-k, type-j or type-t",
                });
            };
            let junction = match (&c.cold_junction, c.cold_junction_c) {
                (Some(_), Some(_)) => {
                    return Err(CsvConfigError::TwoColdJunctions {
                        key: key.to_string(),
                    });
                }
                (None, None) => {
                    return Err(CsvConfigError::MissingColdJunction {
                        key: key.to_string(),
                    });
                }
                (None, Some(celsius)) => {
                    let (lo, hi) = thermocouple.temperature_range_c();
                    if !(lo..=hi).contains(&celsius) {
                        return Err(CsvConfigError::ColdJunctionRange {
                            key: format!("{key}.cold_junction_c"),
                            value: celsius,
                            thermocouple,
                            lo,
                            hi,
                        });
                    }
                    Junction::Fixed { celsius }
                }
                (Some(j), None) => {
                    let jkey = format!("{key}.cold_junction");
                    let unit_key = format!("{jkey}.unit");
                    let unit = match j.unit.as_deref() {
                        None => {
                            return Err(CsvConfigError::MissingUnit {
                                key: unit_key,
                                expected: JUNCTION_UNITS,
                            });
                        }
                        Some(u) => temperature_unit(u)
                            .ok_or_else(|| choice(&unit_key, u, JUNCTION_UNITS))?,
                    };
                    Junction::Column {
                        column: column_name(&jkey, &j.column)?,
                        unit,
                    }
                }
            };
            Signal::Thermocouple {
                sensor,
                thermocouple,
                junction,
            }
        }
        "ohm" | "Ω" => {
            let Some(sensor) = sensor else {
                return Err(CsvConfigError::MissingSensor {
                    key: sensor_key,
                    unit: "ohm",
                    expected: RTDS,
                });
            };
            let Some(rtd) = sensor.rtd() else {
                return Err(CsvConfigError::SensorMismatch {
                    key: sensor_key,
                    sensor: sensor.name(),
                    unit: "ohm",
                    why: "a thermocouple is read in mV; ohm is for pt100 or pt1000",
                });
            };
            refuse(
                &c.cold_junction,
                &format!("{key}.cold_junction"),
                junction_why,
            )?;
            refuse(
                &c.cold_junction_c,
                &format!("{key}.cold_junction_c"),
                junction_why,
            )?;
            Signal::Rtd { sensor, rtd }
        }
        other => {
            let Some(unit) = temperature_unit(other) else {
                return Err(choice(&unit_key, other, TEMPERATURE_UNITS));
            };
            refuse(
                &c.sensor,
                &sensor_key,
                "applies only to a raw signal (unit mV or ohm)",
            )?;
            refuse(
                &c.cold_junction,
                &format!("{key}.cold_junction"),
                junction_why,
            )?;
            refuse(
                &c.cold_junction_c,
                &format!("{key}.cold_junction_c"),
                junction_why,
            )?;
            Signal::Temperature(unit)
        }
    };
    Ok(TemperatureColumn {
        column: column_name(key, &c.column)?,
        signal,
    })
}

// ---------------------------------------------------------------------------
// Time cells

/// Days from 1899-12-30 (the spreadsheet epoch) to 1970-01-01.
const EXCEL_UNIX_EPOCH_DAYS: f64 = 25_569.0;

/// Seconds per day.
const DAY_S: f64 = 86_400.0;

/// Why a time cell cannot be read.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum TimeCellError {
    /// Not an ISO 8601 date and time.
    NotIso8601,
    /// A local time without an offset, and no `time_zone`.
    NoZone,
    /// Outside the range of dates that can be placed.
    OutOfRange,
}

impl fmt::Display for TimeCellError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            TimeCellError::NotIso8601 => {
                "not an ISO 8601 date and time (such as 2024-06-11T08:00:00.5+02:00)"
            }
            TimeCellError::NoZone => {
                "no zone offset, and [csv] names no time_zone: give csv.time_zone or write offsets"
            }
            TimeCellError::OutOfRange => "a date outside the range that can be placed in time",
        })
    }
}

impl core::error::Error for TimeCellError {}

/// Unix seconds (UTC) of `ts`, with its fraction.
fn unix_s(ts: Timestamp) -> f64 {
    ts.as_second() as f64 + f64::from(ts.subsec_nanosecond()) * 1e-9
}

/// An ISO 8601 timestamp (`2024-06-11T08:00:00.496+02:00`, `…Z`, a space for
/// the `T`, a comma for the decimal point) as Unix seconds. Without an
/// offset it is local time of `zone`; a local time the clocks skipped is
/// read after the change, one they repeated as its first occurrence.
///
/// ```
/// use heatbound_host::csv_layout::iso8601_unix_s;
/// use jiff::tz::TimeZone;
/// // 2024-06-11T06:00:00Z is 1 718 085 600 s after the Unix epoch
/// // (19 885 days · 86 400 s + 6 h).
/// assert_eq!(iso8601_unix_s(b"2024-06-11T08:00:00+02:00", None), Ok(1_718_085_600.0));
/// let berlin = TimeZone::get("Europe/Berlin").unwrap(); // CEST, UTC+2, in June
/// assert_eq!(iso8601_unix_s(b"2024-06-11 08:00:00", Some(&berlin)), Ok(1_718_085_600.0));
/// assert!(iso8601_unix_s(b"2024-06-11 08:00:00", None).is_err());
/// ```
pub fn iso8601_unix_s(text: &[u8], zone: Option<&TimeZone>) -> Result<f64, TimeCellError> {
    let pieces = Pieces::parse(text).map_err(|_| TimeCellError::NotIso8601)?;
    let Some(time) = pieces.time() else {
        return Err(TimeCellError::NotIso8601);
    };
    let datetime = pieces.date().to_datetime(time);
    let ts = match pieces.to_numeric_offset() {
        Some(offset) => offset
            .to_timestamp(datetime)
            .map_err(|_| TimeCellError::OutOfRange)?,
        None => {
            let named = pieces
                .to_time_zone()
                .map_err(|_| TimeCellError::NotIso8601)?;
            let zone = named.as_ref().or(zone).ok_or(TimeCellError::NoZone)?;
            zone.to_ambiguous_timestamp(datetime)
                .compatible()
                .map_err(|_| TimeCellError::OutOfRange)?
        }
    };
    Ok(unix_s(ts))
}

/// A spreadsheet serial date (days since 1899-12-30, the fraction the time
/// of day) as Unix seconds: local time of `zone`, or UTC without one.
///
/// ```
/// use heatbound_host::csv_layout::excel_days_unix_s;
/// // 25 569 is 1970-01-01 (the 1900 date system: 1900-01-01 is day 1, with
/// // the phantom 1900-02-29 of Lotus 1-2-3 counted).
/// assert_eq!(excel_days_unix_s(25_569.5, None), Some(43_200.0));
/// ```
pub fn excel_days_unix_s(days: f64, zone: Option<&TimeZone>) -> Option<f64> {
    if !days.is_finite() {
        return None;
    }
    let local_s = (days - EXCEL_UNIX_EPOCH_DAYS) * DAY_S;
    let Some(zone) = zone else {
        return Some(local_s);
    };
    let whole = local_s.floor();
    let fraction = local_s - whole;
    if !(-1e13..=1e13).contains(&whole) {
        return None;
    }
    #[allow(clippy::cast_possible_truncation)]
    let civil = TimeZone::UTC.to_datetime(Timestamp::from_second(whole as i64).ok()?);
    let ts = zone.to_ambiguous_timestamp(civil).compatible().ok()?;
    Some(ts.as_second() as f64 + fraction)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timestamps_in_the_shapes_loggers_write() {
        // 2024-06-11T06:00:00Z = 1 718 085 600 s (see iso8601_unix_s).
        let utc = 1_718_085_600.0;
        let berlin = TimeZone::get("Europe/Berlin").unwrap();
        for (text, zone, expected) in [
            ("2024-06-11T06:00:00Z", None, utc),
            ("2024-06-11T06:00:00.250Z", None, utc + 0.25),
            ("2024-06-11T08:00:00,5+02:00", None, utc + 0.5),
            ("2024-06-11T08:00:00+0200", None, utc),
            ("2024-06-11 08:00:00", Some(&berlin), utc),
            ("2024-06-11T08:00:00[Europe/Berlin]", None, utc),
            // Winter: CET, UTC+1 (IANA tz database, Europe/Berlin); 2024-01-11
            // is 152 days before 2024-06-11 (20 + 29 + 31 + 30 + 31 + 11).
            ("2024-01-11T07:00:00", Some(&berlin), utc - 152.0 * DAY_S),
        ] {
            assert_eq!(
                iso8601_unix_s(text.as_bytes(), zone),
                Ok(expected),
                "{text}"
            );
        }
        for text in ["", "08:00:00", "2024-13-01T00:00:00Z", "yesterday"] {
            assert_eq!(
                iso8601_unix_s(text.as_bytes(), Some(&berlin)),
                Err(TimeCellError::NotIso8601),
                "{text}"
            );
        }
    }

    #[test]
    fn compensation_is_convert_s() {
        // The same numbers as `convert --emf-mv E --cold-junction-c C`, bit
        // for bit, in and out of range.
        for thermocouple in [
            ThermocoupleType::K,
            ThermocoupleType::J,
            ThermocoupleType::T,
        ] {
            let signal = Signal::Thermocouple {
                sensor: SensorKind::TypeK,
                thermocouple,
                junction: Junction::Fixed { celsius: 0.0 },
            };
            for cj in [-300.0, -40.0, 0.0, 18.5, 23.0, 70.25, 2000.0, f64::NAN] {
                for e in [-7.0, -2.0, -0.001, 0.0, 0.5, 4.096, 21.86, 40.0, 60.0, 80.0] {
                    let expected = thermocouple
                        .temperature_c_with_cold_junction(e, cj)
                        .map_or(f64::NAN, |c| c + ZERO_CELSIUS_K);
                    let got = signal.kelvin(e, cj);
                    assert!(
                        got.to_bits() == expected.to_bits() || (got.is_nan() && expected.is_nan()),
                        "{thermocouple} {e} mV at {cj} °C: {got} vs {expected}"
                    );
                }
            }
        }
    }

    #[test]
    fn excel_days_in_a_zone() {
        let berlin = TimeZone::get("Europe/Berlin").unwrap();
        // 45 454.25 is 2024-06-11 06:00 (25 569 + 19 885 days), CEST = UTC+2.
        assert_eq!(
            excel_days_unix_s(45_454.25, Some(&berlin)),
            Some(1_718_085_600.0 - 2.0 * 3600.0)
        );
        assert_eq!(excel_days_unix_s(f64::NAN, None), None);
        assert_eq!(excel_days_unix_s(1e300, Some(&berlin)), None);
    }

    #[test]
    fn bad_tables_name_their_key() {
        let cases = [
            (r#"delimiter = "|""#, "csv.delimiter"),
            (r#"decimal = ",""#, "csv.decimal"),
            (r#"time_zone = "Mars/Olympus""#, "csv.time_zone"),
            (r#"time_zone = "UTC""#, "csv.time_zone"),
            (
                r#"time = { column = "t", unit = "fortnight" }"#,
                "csv.time.unit",
            ),
            (r#"time = { column = "t" }"#, "csv.time.unit"),
            (r#"hot = { column = "T", unit = "°K" }"#, "csv.hot.unit"),
            (r#"hot = { column = "T", unit = "mV" }"#, "csv.hot.sensor"),
            (
                r#"hot = { column = "T", unit = "mV", sensor = "type-k" }"#,
                "csv.hot",
            ),
            (
                r#"hot = { column = "T", unit = "mV", sensor = "k", cold_junction_c = 20, cold_junction = { column = "CJ", unit = "degC" } }"#,
                "csv.hot",
            ),
            (
                r#"hot = { column = "T", unit = "mV", sensor = "k", cold_junction_c = 2000 }"#,
                "csv.hot.cold_junction_c",
            ),
            (
                r#"hot = { column = "T", unit = "mV", sensor = "k", cold_junction = { column = "CJ", unit = "mV" } }"#,
                "csv.hot.cold_junction.unit",
            ),
            (
                r#"hot = { column = "T", unit = "mV", sensor = "pt100", cold_junction_c = 0 }"#,
                "csv.hot.sensor",
            ),
            (
                r#"cold = { column = "R", unit = "ohm", sensor = "type-k" }"#,
                "csv.cold.sensor",
            ),
            (
                r#"cold = { column = "R", unit = "ohm" }"#,
                "csv.cold.sensor",
            ),
            (
                r#"cold = { column = "R", unit = "ohm", sensor = "pt100", cold_junction_c = 0 }"#,
                "csv.cold.cold_junction_c",
            ),
            (
                r#"cold = { column = "R", unit = "degC", sensor = "pt100" }"#,
                "csv.cold.sensor",
            ),
            (
                r#"cold = { column = "R", unit = "ohm", sensor = "pt50" }"#,
                "csv.cold.sensor",
            ),
            (
                r#"heat_in = { column = "P", unit = "MW" }"#,
                "csv.heat_in.unit",
            ),
            (
                r#"heat_in = { column = "P", unit = "kW", sensor = "k" }"#,
                "csv.heat_in.sensor",
            ),
            (r#"work = { column = " ", unit = "W" }"#, "csv.work.column"),
        ];
        for (text, key) in cases {
            let file: CsvFile = toml::from_str(text).unwrap_or_else(|e| panic!("{text}: {e}"));
            let err = CsvLayout::validate(&file).expect_err(text);
            assert_eq!(err.key(), key, "{text}: {err}");
            assert!(err.to_string().starts_with(&format!("`{key}`")), "{err}");
        }
        let ok = [
            r#"delimiter = ";"
               decimal = ","
               time = { column = "Zeit", unit = "iso8601" }
               time_zone = "Europe/Berlin""#,
            r#"hot = { column = "T", unit = "mV", sensor = "Type-J", cold_junction = { column = "CJ", unit = "K" } }"#,
            r#"cold = { column = "R", unit = "ohm", sensor = "pt1000" }"#,
            r#"delimiter = " "
               heat_out = { column = "Q", unit = "mW" }"#,
        ];
        for text in ok {
            let file: CsvFile = toml::from_str(text).unwrap();
            CsvLayout::validate(&file).unwrap_or_else(|e| panic!("{text}: {e}"));
        }
    }
}
