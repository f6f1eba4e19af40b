//! The header of a recorded run, checked once: where each channel is and
//! how its cells become seconds, kelvin and watts. Without a `[csv]` table
//! the columns are found by their default names (`time_s`, `hot_c` or
//! `hot_k`, …); with one, by the names it maps (a channel it leaves out
//! still by its default names). Then, per row, the cells read through the
//! conversions of [`crate::csv_layout`], without allocating.
use csv::ByteRecord;
use serde::Serialize;

use super::{CsvError, UnusedColumn, reading};
use crate::csv_layout::{
    CsvLayout, Junction, PowerColumn, PowerUnit, Signal, TemperatureColumn, TemperatureUnit,
    TimeUnit, excel_days_unix_s, iso8601_unix_s,
};

/// Every column name the replay reads without a `[csv]` table.
const KNOWN_COLUMNS: [&str; 10] = [
    "time_s",
    "hot_c",
    "hot_k",
    "hot2_c",
    "hot2_k",
    "cold_c",
    "cold_k",
    "heat_in_w",
    "work_w",
    "heat_out_w",
];

/// Header names quoted back in an error, at most.
const MAX_LISTED_COLUMNS: usize = 24;

/// A column of the file: its position and its name for messages.
#[derive(Clone, Debug)]
pub(super) struct Cell {
    pub index: usize,
    pub name: String,
}

/// How cells that are not numbers are taken.
#[derive(Clone, Copy, Debug)]
pub(super) struct Numbers {
    /// The decimal mark.
    pub point: u8,
    /// `-` and `n/a` are invalid samples, as empty cells and `NaN` are
    /// (with a `[csv]` table; without one they stay errors, as ever).
    pub words: bool,
}

/// The time column.
#[derive(Clone, Debug)]
pub(super) struct TimeChannel {
    pub cell: Cell,
    pub unit: TimeUnit,
}

/// A temperature column; a thermocouple's cold junction read from another
/// column has that column here, and a raw signal its [`Memo`].
#[derive(Clone, Debug)]
pub(super) struct TemperatureChannel {
    pub cell: Cell,
    pub signal: Signal,
    pub junction: Option<(Cell, TemperatureUnit)>,
    pub memo: Option<Memo>,
}

/// Slots of a [`Memo`]: 8192 of 16 bytes, 128 KiB per raw channel.
const MEMO_BITS: u32 = 13;

/// The raw signals a channel has already converted, and their kelvin.
///
/// Inverting a thermocouple's reference function (ITS-90, a safeguarded
/// Newton iteration) costs as much as the rest of a row. A logger writes a
/// signal to a fixed resolution, so the same reading with the same junction
/// comes back again and again while the rig holds a temperature: a
/// direct-mapped table of the last conversion per slot returns exactly what
/// the conversion gave, and memory stays fixed whatever the file's length.
///
/// The key is what the conversion is a function of: a thermocouple's
/// compensated EMF (reading plus junction EMF, the one number the inverse
/// sees), an RTD's resistance. The slot is the key in steps of
/// [`Memo::step`], so readings within 8192 steps of each other (0.8 mV of a
/// thermocouple, 8 Ω of an RTD) never share a slot.
/// The junction's EMF is kept the same way, for its last reading.
#[derive(Clone, Debug)]
pub(super) struct Memo {
    slots: Box<[std::cell::Cell<(u64, f64)>]>,
    junction: std::cell::Cell<(u64, f64)>,
    /// Slots per unit of the key.
    per_unit: f64,
}

impl Memo {
    fn new(signal: &Signal) -> Memo {
        // An empty slot holds a key no finite reading has (a NaN's bits).
        let empty = std::cell::Cell::new((u64::MAX, f64::NAN));
        Memo {
            slots: vec![empty; 1 << MEMO_BITS].into_boxed_slice(),
            junction: std::cell::Cell::new((u64::MAX, f64::NAN)),
            per_unit: 1.0 / Memo::step(signal),
        }
    }

    /// A slot's width: 0.1 µV of a thermocouple, 1 mΩ of an RTD, finer than
    /// loggers write either.
    fn step(signal: &Signal) -> f64 {
        match signal {
            Signal::Rtd { .. } => 1e-3,
            _ => 1e-4,
        }
    }

    /// `signal`'s kelvin for the reading `x` with the junction at
    /// `junction_c`, from the table when it holds them.
    #[inline]
    fn kelvin(&self, signal: &Signal, x: f64, junction_c: f64) -> f64 {
        let (bits, emf) = self.junction.get();
        let junction_emf_mv = if bits == junction_c.to_bits() {
            emf
        } else {
            let emf = signal.junction_emf_mv(junction_c);
            self.junction.set((junction_c.to_bits(), emf));
            emf
        };
        let key = match signal {
            Signal::Thermocouple { .. } => x + junction_emf_mv,
            _ => x,
        };
        if !key.is_finite() {
            return signal.kelvin_with_junction_emf(x, junction_emf_mv);
        }
        // Saturating and wrapping: any finite key has a slot.
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
        let index = ((key * self.per_unit).round() as i64 as u64) & ((1 << MEMO_BITS) - 1);
        let Some(slot) = self.slots.get(index as usize) else {
            return signal.kelvin_with_junction_emf(x, junction_emf_mv);
        };
        let (k, kelvin) = slot.get();
        if k == key.to_bits() {
            return kelvin;
        }
        let kelvin = signal.kelvin_with_junction_emf(x, junction_emf_mv);
        slot.set((key.to_bits(), kelvin));
        kelvin
    }
}

/// A power column.
#[derive(Clone, Debug)]
pub(super) struct PowerChannel {
    pub cell: Cell,
    pub unit: PowerUnit,
}

/// What a channel was read from, for the report (only with `[csv]`).
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct ReadColumn {
    /// `time`, `hot`, `hot2`, `cold`, `heat_in`, `work`, `heat_out`.
    pub channel: &'static str,
    /// The header name, as quoted back.
    pub column: String,
    /// Its unit, and for a raw signal its sensor and cold junction.
    pub unit: String,
}

/// The header, checked: where each channel is.
#[derive(Clone, Debug)]
pub(super) struct Columns {
    pub time: TimeChannel,
    pub hot: TemperatureChannel,
    pub cold: TemperatureChannel,
    pub hot2: Option<TemperatureChannel>,
    pub heat_in: PowerChannel,
    pub work: PowerChannel,
    pub heat_out: Option<PowerChannel>,
    pub unused: Vec<UnusedColumn>,
    pub read: Vec<ReadColumn>,
    pub numbers: Numbers,
}

/// A header name as text: UTF-8, or else Latin-1 (Windows loggers write
/// `Kühler` as one byte 0xFC), trimmed.
fn header_name(field: &[u8]) -> String {
    match std::str::from_utf8(field) {
        Ok(text) => text.trim().to_string(),
        Err(_) => field
            .iter()
            .map(|&b| char::from(b))
            .collect::<String>()
            .trim()
            .to_string(),
    }
}

/// The header as read, for finding columns and quoting them back.
struct Header {
    names: Vec<String>,
    line: u64,
    mapped: bool,
}

impl Header {
    /// The position of the column named `name`; a name that appears twice
    /// cannot tell which is meant.
    fn find(&self, name: &str) -> Result<Option<usize>, CsvError> {
        let mut hits = self
            .names
            .iter()
            .enumerate()
            .filter(|(_, n)| n.as_str() == name)
            .map(|(i, _)| i);
        let first = hits.next();
        if hits.next().is_some() {
            return Err(CsvError::Contradictory {
                line: self.line,
                column: crate::term::excerpt(name, 40),
                why: "the column appears twice".to_string(),
            });
        }
        Ok(first)
    }

    /// The header as quoted back: each name and the whole list bounded,
    /// control bytes escaped (a damaged file may have a huge first line).
    fn found(&self) -> String {
        let list: Vec<String> = self
            .names
            .iter()
            .take(MAX_LISTED_COLUMNS)
            .map(|n| crate::term::excerpt(n, 40))
            .collect();
        let more = self.names.len().saturating_sub(MAX_LISTED_COLUMNS);
        let mut text = list.join(", ");
        if more > 0 {
            text.push_str(&format!(" and {more} more"));
        }
        text
    }

    /// A header read as one column that holds another separator is a file
    /// with another delimiter.
    fn hint(&self) -> String {
        if let [only] = self.names.as_slice() {
            for (byte, shown) in [(';', "\";\""), ('\t', "\"\\t\""), (',', "\",\"")] {
                if only.contains(byte) {
                    return format!(
                        "; the header reads as one column: is the delimiter {shown}? (csv.delimiter in rig.toml)"
                    );
                }
            }
        }
        String::new()
    }

    fn missing(&self, column: String) -> CsvError {
        CsvError::MissingColumn {
            line: self.line,
            column,
            found: self.found(),
            hint: self.hint(),
        }
    }

    /// A default column, required.
    fn required(&self, name: &'static str, channel: &str) -> Result<Cell, CsvError> {
        match self.find(name)? {
            Some(index) => Ok(Cell {
                index,
                name: name.to_string(),
            }),
            None => Err(self.missing(self.unmapped(name, channel))),
        }
    }

    /// `name`, with where else it could come from when a `[csv]` table maps
    /// other channels.
    fn unmapped(&self, name: &str, channel: &str) -> String {
        if self.mapped {
            format!("{name} (or map it: csv.{channel})")
        } else {
            name.to_string()
        }
    }

    /// A mapped column, required.
    fn mapped(&self, name: &str, key: &str) -> Result<Cell, CsvError> {
        match self.find(name)? {
            Some(index) => Ok(Cell {
                index,
                name: crate::term::excerpt(name, 40),
            }),
            None => Err(self.missing(format!(
                "\"{}\" ({key}.column)",
                crate::term::excerpt(name, 40)
            ))),
        }
    }

    /// A default temperature column in °C or K: `hot_c` or `hot_k`.
    fn temperature(
        &self,
        c: &'static str,
        k: &'static str,
        either: &'static str,
        channel: &str,
    ) -> Result<(Cell, TemperatureUnit), CsvError> {
        match (self.find(c)?, self.find(k)?) {
            (Some(_), Some(_)) => Err(CsvError::Contradictory {
                line: self.line,
                column: k.to_string(),
                why: format!("both {c} and {k} are given: give one"),
            }),
            (Some(index), None) => Ok((
                Cell {
                    index,
                    name: c.to_string(),
                },
                TemperatureUnit::Celsius,
            )),
            (None, Some(index)) => Ok((
                Cell {
                    index,
                    name: k.to_string(),
                },
                TemperatureUnit::Kelvin,
            )),
            (None, None) => Err(self.missing(self.unmapped(either, channel))),
        }
    }

    fn mapped_temperature(
        &self,
        column: &TemperatureColumn,
        key: &str,
    ) -> Result<TemperatureChannel, CsvError> {
        let junction = match &column.signal {
            Signal::Thermocouple {
                junction: Junction::Column { column, unit },
                ..
            } => Some((self.mapped(column, &format!("{key}.cold_junction"))?, *unit)),
            _ => None,
        };
        Ok(TemperatureChannel {
            cell: self.mapped(&column.column, key)?,
            signal: column.signal.clone(),
            junction,
            memo: match column.signal {
                Signal::Temperature(_) => None,
                _ => Some(Memo::new(&column.signal)),
            },
        })
    }

    fn mapped_power(&self, column: &PowerColumn, key: &str) -> Result<PowerChannel, CsvError> {
        Ok(PowerChannel {
            cell: self.mapped(&column.column, key)?,
            unit: column.unit,
        })
    }
}

impl Columns {
    /// Checks the header (on line `line`) against `layout`, or against the
    /// default names without one.
    pub(super) fn parse(
        header: &ByteRecord,
        layout: Option<&CsvLayout>,
        line: u64,
    ) -> Result<Self, CsvError> {
        let h = Header {
            names: header.iter().map(header_name).collect(),
            line,
            mapped: layout.is_some(),
        };
        let default_temperature = |c, k, either, channel| {
            h.temperature(c, k, either, channel)
                .map(|(cell, unit)| TemperatureChannel {
                    cell,
                    signal: Signal::Temperature(unit),
                    junction: None,
                    memo: None,
                })
        };
        let default_power = |name, channel| {
            h.required(name, channel).map(|cell| PowerChannel {
                cell,
                unit: PowerUnit::W,
            })
        };
        let seconds = TimeUnit::Number {
            name: "s",
            seconds: 1.0,
            divide: false,
        };
        let l = layout;
        let time = match l.and_then(|l| l.time.as_ref()) {
            Some(t) => TimeChannel {
                cell: h.mapped(&t.column, "csv.time")?,
                unit: t.unit.clone(),
            },
            None => TimeChannel {
                cell: h.required("time_s", "time")?,
                unit: seconds,
            },
        };
        let hot = match l.and_then(|l| l.hot.as_ref()) {
            Some(c) => h.mapped_temperature(c, "csv.hot")?,
            None => default_temperature("hot_c", "hot_k", "hot_c or hot_k", "hot")?,
        };
        let cold = match l.and_then(|l| l.cold.as_ref()) {
            Some(c) => h.mapped_temperature(c, "csv.cold")?,
            None => default_temperature("cold_c", "cold_k", "cold_c or cold_k", "cold")?,
        };
        let heat_in = match l.and_then(|l| l.heat_in.as_ref()) {
            Some(c) => h.mapped_power(c, "csv.heat_in")?,
            None => default_power("heat_in_w", "heat_in")?,
        };
        let work = match l.and_then(|l| l.work.as_ref()) {
            Some(c) => h.mapped_power(c, "csv.work")?,
            None => default_power("work_w", "work")?,
        };
        let heat_out = match l.and_then(|l| l.heat_out.as_ref()) {
            Some(c) => Some(h.mapped_power(c, "csv.heat_out")?),
            None => h.find("heat_out_w")?.map(|index| PowerChannel {
                cell: Cell {
                    index,
                    name: "heat_out_w".to_string(),
                },
                unit: PowerUnit::W,
            }),
        };
        let hot2 = match l.and_then(|l| l.hot2.as_ref()) {
            Some(c) => Some(h.mapped_temperature(c, "csv.hot2")?),
            None => match (h.find("hot2_c")?, h.find("hot2_k")?) {
                (None, None) => None,
                _ => Some(default_temperature(
                    "hot2_c",
                    "hot2_k",
                    "hot2_c or hot2_k",
                    "hot2",
                )?),
            },
        };
        let mut columns = Self {
            time,
            hot,
            cold,
            hot2,
            heat_in,
            work,
            heat_out,
            unused: Vec::new(),
            read: Vec::new(),
            numbers: Numbers {
                point: layout.map_or(b'.', |l| l.decimal),
                words: layout.is_some(),
            },
        };
        match layout {
            None => columns.unused = unused_columns(&h.names),
            Some(layout) => {
                columns.unused = columns.unused_by_index(&h.names, layout);
                columns.read = columns.read_columns();
            }
        }
        Ok(columns)
    }

    /// Every column a channel reads.
    fn used(&self) -> Vec<usize> {
        let mut used = vec![
            self.time.cell.index,
            self.heat_in.cell.index,
            self.work.cell.index,
        ];
        for t in [Some(&self.hot), Some(&self.cold), self.hot2.as_ref()]
            .into_iter()
            .flatten()
        {
            used.push(t.cell.index);
            used.extend(t.junction.as_ref().map(|(cell, _)| cell.index));
        }
        used.extend(self.heat_out.as_ref().map(|p| p.cell.index));
        used
    }

    /// With `[csv]`: the header's columns that no channel reads, each once.
    fn unused_by_index(&self, names: &[String], layout: &CsvLayout) -> Vec<UnusedColumn> {
        let used = self.used();
        let mut mapped: Vec<&str> = KNOWN_COLUMNS.to_vec();
        mapped.extend(layout.time.iter().map(|c| c.column.as_str()));
        for c in [&layout.hot, &layout.hot2, &layout.cold]
            .into_iter()
            .flatten()
        {
            mapped.push(&c.column);
        }
        for c in [&layout.heat_in, &layout.work, &layout.heat_out]
            .into_iter()
            .flatten()
        {
            mapped.push(&c.column);
        }
        names
            .iter()
            .enumerate()
            .filter(|(i, _)| !used.contains(i))
            .take(MAX_LISTED_COLUMNS)
            .map(|(_, n)| {
                let why = match mapped
                    .iter()
                    .find(|m| fold(m) == fold(n) && **m != n.as_str())
                {
                    Some(m) => format!(
                        "not read: did you mean {m}? (column names are exact, case and blanks too)"
                    ),
                    None => "not used: no channel of [csv] maps it".to_string(),
                };
                UnusedColumn {
                    name: crate::term::excerpt(n, 40),
                    why,
                }
            })
            .collect()
    }

    fn read_columns(&self) -> Vec<ReadColumn> {
        let temperature = |channel, t: &TemperatureChannel| ReadColumn {
            channel,
            column: t.cell.name.clone(),
            unit: t.signal.describe(),
        };
        let power = |channel, p: &PowerChannel| ReadColumn {
            channel,
            column: p.cell.name.clone(),
            unit: p.unit.name().to_string(),
        };
        let mut read = vec![
            ReadColumn {
                channel: "time",
                column: self.time.cell.name.clone(),
                unit: self.time.unit.describe(),
            },
            temperature("hot", &self.hot),
        ];
        read.extend(self.hot2.as_ref().map(|t| temperature("hot2", t)));
        read.push(temperature("cold", &self.cold));
        read.push(power("heat_in", &self.heat_in));
        read.push(power("work", &self.work));
        read.extend(self.heat_out.as_ref().map(|p| power("heat_out", p)));
        read
    }

    // -- per row -----------------------------------------------------------

    /// A cell as a number: NaN for an invalid sample.
    #[inline(always)]
    pub(super) fn number(
        &self,
        record: &ByteRecord,
        cell: &Cell,
        line: u64,
    ) -> Result<f64, CsvError> {
        reading(field(record, cell, line)?, self.numbers, &cell.name, line)
    }

    /// The row's time, seconds: of the logger's clock, or Unix seconds for
    /// ISO 8601 and spreadsheet dates.
    #[inline(always)]
    pub(super) fn time(&self, record: &ByteRecord, line: u64) -> Result<f64, CsvError> {
        let cell = &self.time.cell;
        let text = field(record, cell, line)?;
        let no_time = || CsvError::NoTime {
            line,
            column: cell.name.clone(),
            text: crate::term::excerpt(&String::from_utf8_lossy(text), 40),
        };
        let bad = |why| CsvError::Time {
            line,
            column: cell.name.clone(),
            text: crate::term::excerpt(&String::from_utf8_lossy(text), 40),
            why,
        };
        let t_s = match &self.time.unit {
            TimeUnit::Number {
                seconds, divide, ..
            } => {
                let x = reading(text, self.numbers, &cell.name, line)?;
                if *divide { x / seconds } else { x * seconds }
            }
            TimeUnit::Iso8601 { zone } => {
                if text.is_empty() {
                    return Err(no_time());
                }
                iso8601_unix_s(text, zone.as_ref()).map_err(bad)?
            }
            TimeUnit::ExcelDays { zone } => {
                let days = reading(text, self.numbers, &cell.name, line)?;
                if days.is_nan() {
                    return Err(no_time());
                }
                excel_days_unix_s(days, zone.as_ref())
                    .ok_or(bad(crate::csv_layout::TimeCellError::OutOfRange))?
            }
        };
        if !t_s.is_finite() {
            return Err(no_time());
        }
        Ok(t_s)
    }

    /// A temperature, kelvin; NaN for an invalid sample.
    #[inline(always)]
    pub(super) fn temperature(
        &self,
        channel: &TemperatureChannel,
        record: &ByteRecord,
        line: u64,
    ) -> Result<f64, CsvError> {
        let x = self.number(record, &channel.cell, line)?;
        match &channel.signal {
            Signal::Temperature(unit) => Ok(unit.kelvin(x)),
            _ => self.raw_temperature(channel, x, record, line),
        }
    }

    /// [`Columns::temperature`] of a raw signal `x`, off the common path.
    #[inline]
    fn raw_temperature(
        &self,
        channel: &TemperatureChannel,
        x: f64,
        record: &ByteRecord,
        line: u64,
    ) -> Result<f64, CsvError> {
        let junction_c = match (&channel.signal, &channel.junction) {
            (_, Some((cell, unit))) => unit.celsius(self.number(record, cell, line)?),
            (
                Signal::Thermocouple {
                    junction: Junction::Fixed { celsius },
                    ..
                },
                None,
            ) => *celsius,
            _ => 0.0,
        };
        Ok(match &channel.memo {
            Some(memo) => memo.kelvin(&channel.signal, x, junction_c),
            None => channel.signal.kelvin(x, junction_c),
        })
    }

    /// A power, watts; NaN for an invalid sample.
    #[inline(always)]
    pub(super) fn power(
        &self,
        channel: &PowerChannel,
        record: &ByteRecord,
        line: u64,
    ) -> Result<f64, CsvError> {
        Ok(channel
            .unit
            .watts(self.number(record, &channel.cell, line)?))
    }
}

/// A field, trimmed of ASCII blanks, or the short-row error.
#[inline]
fn field<'r>(record: &'r ByteRecord, cell: &Cell, line: u64) -> Result<&'r [u8], CsvError> {
    match record.get(cell.index) {
        Some(f) => Ok(f.trim_ascii()),
        None => Err(CsvError::ShortRow {
            line,
            column: cell.name.clone(),
            fields: record.len(),
            position: cell.index + 1,
        }),
    }
}

/// Lower case without blanks: what a near miss of a name has in common with it.
fn fold(name: &str) -> String {
    name.to_lowercase()
        .chars()
        .filter(|c| !c.is_whitespace())
        .collect()
}

/// Without `[csv]`: the header's columns that nothing reads, each with the
/// reason; a name that differs from a known one only in case or blanks
/// says which it resembles (`heat_out_W` is not `heat_out_w`, and would
/// silently turn heat out from measured to inferred).
fn unused_columns(names: &[String]) -> Vec<UnusedColumn> {
    names
        .iter()
        .filter(|n| !KNOWN_COLUMNS.contains(&n.as_str()))
        .take(MAX_LISTED_COLUMNS)
        .map(|n| {
            let folded = fold(n);
            let why = match KNOWN_COLUMNS.iter().find(|k| **k == folded) {
                Some(k) => {
                    format!("not read: did you mean {k}? (column names are exact, lower case)")
                }
                None => "not a column heatbound reads".to_string(),
            };
            UnusedColumn {
                name: crate::term::excerpt(n, 40),
                why,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use heatbound::sensor::SensorKind;
    use heatbound::sensor::rtd::Rtd;
    use heatbound::sensor::thermocouple::ThermocoupleType;

    use super::*;

    /// Readings that revisit, collide and step past the slots, each with
    /// its junction: the memo gives the conversion's own bits every time.
    #[test]
    fn the_memo_gives_what_the_conversion_gives() {
        let thermocouple = Signal::Thermocouple {
            sensor: SensorKind::TypeK,
            thermocouple: ThermocoupleType::K,
            junction: Junction::Fixed { celsius: 0.0 },
        };
        let rtd = Signal::Rtd {
            sensor: SensorKind::Pt100,
            rtd: Rtd::PT100,
        };
        for signal in [thermocouple, rtd] {
            let memo = Memo::new(&signal);
            let step = Memo::step(&signal);
            let span = f64::from(1u32 << MEMO_BITS) * step;
            let base = match signal {
                Signal::Rtd { .. } => 150.0,
                _ => 21.0,
            };
            let mut readings = Vec::new();
            for i in 0..3000 {
                let i = f64::from(i);
                // A slow wave at the logger's resolution, the same wave a
                // whole span higher (every slot shared), and finer steps.
                let x = base + 0.2 * (i / 50.0).sin();
                readings.push(((x / step).round() * step, 23.0));
                readings.push(((x / step).round() * step + span, 23.0));
                readings.push((x + i * 1e-7, 23.0 + (i / 400.0).floor() * 0.1));
            }
            readings.extend([
                (f64::NAN, 23.0),
                (base, f64::NAN),
                (f64::INFINITY, 23.0),
                (-0.0, 0.0),
                (0.0, 0.0),
                (1e300, 23.0),
                (-1e300, 23.0),
                (base, 1e6),
            ]);
            for round in 0..2 {
                for &(x, junction_c) in &readings {
                    let expected = signal.kelvin(x, junction_c);
                    let got = memo.kelvin(&signal, x, junction_c);
                    assert_eq!(
                        got.to_bits(),
                        expected.to_bits(),
                        "{x} with the junction at {junction_c}, round {round}"
                    );
                }
            }
        }
    }
}
