//! Cycle files for `heatbound cycle`: the step between a TOML file and the
//! core's ideal-gas engine (`heatbound::gas`).
//!
//! Data flow: cycle file (TOML) --> raw serde structs (`Raw*`, shape only)
//! --> checked core types (`Gas`, `State`, `Process`, `EndCondition`)
//! --> `heatbound::gas::Cycle` --> [`Report`] (table or JSON).
//!
//! Errors ([`CycleFileError`]) name the part of the file (`[gas]`, `[start]`,
//! the step, 1-based) and the reason on one line.

use std::fmt::Write as _;
use std::path::Path;

use heatbound::gas::{
    Cycle, CycleError, CycleSummary, EndCondition, Gas, GasError, Process, ProcessError, State,
    StateError, Step,
};
use serde::{Deserialize, Serialize};

/// The most steps a cycle file may hold.
pub const MAX_STEPS: usize = 64;

/// What is wrong, without where.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Problem {
    /// The file itself: reading, TOML, keys and tables.
    #[error(transparent)]
    File(#[from] FileError),
    /// The gas is not a physical gas.
    #[error(transparent)]
    Gas(#[from] GasError),
    /// The start state is not a physical state.
    #[error(transparent)]
    State(#[from] StateError),
    /// A process cannot reach its end condition.
    #[error(transparent)]
    Process(#[from] ProcessError),
    /// The cycle as a whole cannot be summed up.
    #[error(transparent)]
    Cycle(CycleError),
}

/// A cycle file that cannot be evaluated: what is wrong and, when it is in
/// one part of the file, where.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CycleFileError {
    /// A problem with the file as a whole.
    #[error(transparent)]
    Whole(#[from] Problem),
    /// A problem in one part: `[gas]`, `[start]` or `step N (process)`.
    #[error("{place}")]
    At {
        /// The part of the file.
        place: String,
        /// What is wrong there.
        #[source]
        source: Problem,
    },
}

impl From<FileError> for CycleFileError {
    fn from(e: FileError) -> Self {
        Self::Whole(Problem::File(e))
    }
}

fn at(place: impl Into<String>) -> impl FnOnce(Problem) -> CycleFileError {
    let place = place.into();
    move |source| CycleFileError::At { place, source }
}

/// What went wrong in a cycle file, short of a process that cannot reach
/// its end condition (that is a `heatbound::gas` error).
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
#[allow(missing_docs)] // each variant's message is its documentation
pub enum FileError {
    #[error("cannot read the file")]
    Read(#[source] std::io::Error),
    #[error("malformed TOML{at}: {message}")]
    Toml { at: String, message: String },
    #[error("unknown top-level key `{0}` (expected gas, start or step)")]
    UnknownKey(String),
    #[error("missing the [{0}] table")]
    MissingTable(&'static str),
    #[error("`step` must be an array of tables, written [[step]]")]
    StepNotArray,
    #[error("{0}")]
    Shape(String),
    #[error("give either gamma or dof, not both")]
    GammaAndDof,
    #[error("missing gamma or dof (give exactly one)")]
    NeitherGammaNorDof,
    #[error("exactly two of pressure_pa, volume_m3, temperature_k are needed, found {0}")]
    StartKeys(usize),
    #[error("no [[step]] in the file: a cycle needs at least one step")]
    NoSteps,
    #[error("too many steps: {0}, at most {MAX_STEPS}")]
    TooManySteps(usize),
    #[error(
        "unknown process `{0}` (expected isothermal, adiabatic, isochoric, isobaric or polytropic)"
    )]
    UnknownProcess(String),
    #[error("a polytropic step needs `exponent` (p V^exponent = const)")]
    MissingExponent,
    #[error("`exponent` is only allowed on a polytropic step")]
    StrayExponent,
    #[error(
        "no end condition: give one of volume_m3, pressure_pa, temperature_k, volume_ratio, pressure_ratio, to_start = true"
    )]
    NoEndCondition,
    #[error("two or more end conditions ({0}): give exactly one")]
    SeveralEndConditions(String),
}

// ---- Stage 1: the file's shape, unchecked -------------------------------

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawGas {
    moles: f64,
    gamma: Option<f64>,
    dof: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawStart {
    pressure_pa: Option<f64>,
    volume_m3: Option<f64>,
    temperature_k: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawStep {
    process: String,
    exponent: Option<f64>,
    volume_m3: Option<f64>,
    pressure_pa: Option<f64>,
    temperature_k: Option<f64>,
    volume_ratio: Option<f64>,
    pressure_ratio: Option<f64>,
    to_start: Option<bool>,
}

/// Folds a possibly multi-line message onto one line.
fn one_line(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

fn shape<T: serde::de::DeserializeOwned>(value: toml::Value) -> Result<T, FileError> {
    value
        .try_into()
        .map_err(|e: toml::de::Error| FileError::Shape(one_line(e.message())))
}

// ---- Stage 2: checked values --------------------------------------------

/// A validated cycle file.
struct CycleSpec {
    gas: Gas,
    start: State,
    steps: Vec<(Process, EndCondition)>,
}

fn check_gas(raw: RawGas) -> Result<Gas, Problem> {
    let gas = match (raw.gamma, raw.dof) {
        (Some(_), Some(_)) => return Err(FileError::GammaAndDof.into()),
        (None, None) => return Err(FileError::NeitherGammaNorDof.into()),
        (Some(gamma), None) => Gas::with_gamma(raw.moles, gamma)?,
        (None, Some(dof)) => Gas::with_dof(raw.moles, dof)?,
    };
    Ok(gas)
}

fn check_start(gas: &Gas, raw: RawStart) -> Result<State, Problem> {
    let state = match (raw.pressure_pa, raw.volume_m3, raw.temperature_k) {
        (Some(p), Some(v), None) => State::from_p_v(gas, p, v)?,
        (Some(p), None, Some(t)) => State::from_p_t(gas, p, t)?,
        (None, Some(v), Some(t)) => State::from_v_t(gas, v, t)?,
        (p, v, t) => {
            let found = [p, v, t].iter().filter(|x| x.is_some()).count();
            return Err(FileError::StartKeys(found).into());
        }
    };
    Ok(state)
}

fn check_step(raw: RawStep) -> Result<(Process, EndCondition), FileError> {
    let process = match (raw.process.as_str(), raw.exponent) {
        ("polytropic", Some(exponent)) => Process::Polytropic { exponent },
        ("polytropic", None) => return Err(FileError::MissingExponent),
        ("isothermal" | "adiabatic" | "isochoric" | "isobaric", Some(_)) => {
            return Err(FileError::StrayExponent);
        }
        ("isothermal", None) => Process::Isothermal,
        ("adiabatic", None) => Process::Adiabatic,
        ("isochoric", None) => Process::Isochoric,
        ("isobaric", None) => Process::Isobaric,
        (other, _) => return Err(FileError::UnknownProcess(other.to_owned())),
    };
    let candidates = [
        ("volume_m3", raw.volume_m3.map(EndCondition::VolumeM3)),
        ("pressure_pa", raw.pressure_pa.map(EndCondition::PressurePa)),
        (
            "temperature_k",
            raw.temperature_k.map(EndCondition::TemperatureK),
        ),
        (
            "volume_ratio",
            raw.volume_ratio.map(EndCondition::VolumeRatio),
        ),
        (
            "pressure_ratio",
            raw.pressure_ratio.map(EndCondition::PressureRatio),
        ),
        // `to_start = false` reads as "not given".
        (
            "to_start",
            raw.to_start.filter(|b| *b).map(|_| EndCondition::ToStart),
        ),
    ];
    let given: Vec<_> = candidates
        .iter()
        .filter_map(|(name, c)| c.map(|c| (*name, c)))
        .collect();
    match given.as_slice() {
        [] => Err(FileError::NoEndCondition),
        [(_, end)] => Ok((process, *end)),
        several => Err(FileError::SeveralEndConditions(
            several
                .iter()
                .map(|(n, _)| format!("`{n}`"))
                .collect::<Vec<_>>()
                .join(", "),
        )),
    }
}

fn parse(text: &str) -> Result<CycleSpec, CycleFileError> {
    let table: toml::Table = toml::from_str(text).map_err(|e| {
        let at = e
            .span()
            .map(|span| {
                let before = text.get(..span.start).unwrap_or(text);
                let line = before.matches('\n').count() + 1;
                let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
                format!(" at line {line}, column {column}")
            })
            .unwrap_or_default();
        FileError::Toml {
            at,
            message: one_line(e.message()),
        }
    })?;
    let (mut gas, mut start, mut steps) = (None, None, None);
    for (key, value) in table {
        match key.as_str() {
            "gas" => gas = Some(value),
            "start" => start = Some(value),
            "step" => steps = Some(value),
            _ => return Err(FileError::UnknownKey(key).into()),
        }
    }
    let gas = gas.ok_or(FileError::MissingTable("gas"))?;
    let gas = shape(gas)
        .map_err(Problem::from)
        .and_then(check_gas)
        .map_err(at("[gas]"))?;
    let start = start.ok_or(FileError::MissingTable("start"))?;
    let start = shape(start)
        .map_err(Problem::from)
        .and_then(|raw| check_start(&gas, raw))
        .map_err(at("[start]"))?;
    let raw_steps = match steps {
        None => Vec::new(),
        Some(toml::Value::Array(a)) => a,
        Some(_) => return Err(FileError::StepNotArray.into()),
    };
    if raw_steps.is_empty() {
        return Err(FileError::NoSteps.into());
    }
    if raw_steps.len() > MAX_STEPS {
        return Err(FileError::TooManySteps(raw_steps.len()).into());
    }
    let steps = raw_steps
        .into_iter()
        .enumerate()
        .map(|(i, value)| {
            let label = match value.get("process").and_then(toml::Value::as_str) {
                Some(name) => format!("step {} ({name})", i + 1),
                None => format!("step {}", i + 1),
            };
            shape::<RawStep>(value)
                .and_then(check_step)
                .map_err(|e| at(label)(Problem::File(e)))
        })
        .collect::<Result<Vec<_>, _>>()?;
    Ok(CycleSpec { gas, start, steps })
}

// ---- Evaluation and reports ----------------------------------------------

/// A cycle file evaluated.
pub struct Report {
    gas: Gas,
    start: State,
    steps: Vec<Step>,
    summary: CycleSummary,
}

/// Reads, checks and evaluates a cycle file.
pub fn evaluate_file(path: &Path) -> Result<Report, CycleFileError> {
    let text = std::fs::read_to_string(path).map_err(FileError::Read)?;
    evaluate_text(&text)
}

/// Checks and evaluates the text of a cycle file.
///
/// ```
/// let text = "[gas]\nname = \"air\"\n";
/// assert!(heatbound_host::cycle_file::evaluate_text(text).is_err());
/// ```
pub fn evaluate_text(text: &str) -> Result<Report, CycleFileError> {
    evaluate(&parse(text)?)
}

fn evaluate(spec: &CycleSpec) -> Result<Report, CycleFileError> {
    let mut cycle: Cycle<MAX_STEPS> = Cycle::new(spec.gas, spec.start);
    for (i, (process, end)) in spec.steps.iter().enumerate() {
        cycle
            .push(*process, *end)
            .map_err(|e| match e {
                CycleError::Process(e) => Problem::Process(e),
                other => Problem::Cycle(other),
            })
            .map_err(at(format!("step {} ({})", i + 1, process.name())))?;
    }
    Ok(Report {
        gas: spec.gas,
        start: spec.start,
        steps: cycle.steps().to_vec(),
        summary: cycle.summary().map_err(Problem::Cycle)?,
    })
}

/// `x` with a negative zero made positive, so reports never show `-0`.
fn z(x: f64) -> f64 {
    x + 0.0
}

#[derive(Serialize)]
struct StateJson {
    pressure_pa: f64,
    volume_m3: f64,
    temperature_k: f64,
}

#[derive(Serialize)]
struct StepJson {
    process: &'static str,
    heat_j: f64,
    work_j: f64,
    delta_u_j: f64,
    delta_s_j_per_k: f64,
    end: StateJson,
}

#[derive(Serialize)]
struct ReportJson {
    closed: bool,
    steps: Vec<StepJson>,
    net_work_j: f64,
    heat_in_j: f64,
    heat_out_j: f64,
    efficiency: Option<f64>,
    carnot_efficiency: Option<f64>,
    t_max_k: f64,
    t_min_k: f64,
    mean_heat_in_temperature_k: Option<f64>,
    mean_heat_out_temperature_k: Option<f64>,
    total_delta_s_j_per_k: f64,
}

/// Six significant figures, fixed-point for ordinary magnitudes.
fn num(x: f64) -> String {
    let a = x.abs();
    if a == 0.0 {
        "0".to_owned()
    } else if (1e-4..1e7).contains(&a) {
        let decimals = (5 - a.log10().floor() as i32).clamp(0, 9) as usize;
        let fixed = format!("{:.*}", decimals, z(x));
        if fixed.contains('.') {
            fixed.trim_end_matches('0').trim_end_matches('.').to_owned()
        } else {
            fixed
        }
    } else {
        format!("{x:.4e}")
    }
}

fn ratio(x: Option<f64>, why_not: &str) -> String {
    match x {
        Some(x) => format!("{:.6}  ({:.2} %)", z(x), 100.0 * x),
        None => format!("n/a ({why_not})"),
    }
}

fn kelvin(x: Option<f64>, why_not: &str) -> String {
    match x {
        Some(x) => format!("{} K", num(x)),
        None => format!("n/a ({why_not})"),
    }
}

impl Report {
    /// The report as JSON-ready data.
    pub fn json(&self) -> impl Serialize + use<> {
        let s = &self.summary;
        ReportJson {
            closed: s.closed,
            steps: self
                .steps
                .iter()
                .map(|st| StepJson {
                    process: st.process.name(),
                    heat_j: z(st.heat_j),
                    work_j: z(st.work_j),
                    delta_u_j: z(st.delta_u_j),
                    delta_s_j_per_k: z(st.delta_s_j_per_k),
                    end: StateJson {
                        pressure_pa: st.end.pressure_pa(),
                        volume_m3: st.end.volume_m3(),
                        temperature_k: st.end.temperature_k(),
                    },
                })
                .collect(),
            net_work_j: z(s.net_work_j),
            heat_in_j: z(s.heat_in_j),
            heat_out_j: z(s.heat_out_j),
            efficiency: s.efficiency.map(z),
            carnot_efficiency: s.carnot_efficiency.map(z),
            t_max_k: s.t_max_k,
            t_min_k: s.t_min_k,
            mean_heat_in_temperature_k: s.mean_heat_in_temperature_k,
            mean_heat_out_temperature_k: s.mean_heat_out_temperature_k,
            total_delta_s_j_per_k: z(s.total_delta_s_j_per_k),
        }
    }

    /// The report as a table for the terminal, headed by the file's name.
    pub fn table(&self, file: &str) -> String {
        let s = &self.summary;
        let mut out = String::new();
        let g = &self.gas;
        let _ = writeln!(out, "ideal-gas cycle: {file}");
        let _ = writeln!(
            out,
            "gas:   n = {} mol, gamma = {}, Cv = {} J/(mol K)",
            num(g.moles_mol()),
            num(g.gamma()),
            num(g.cv_molar_j_per_mol_k())
        );
        let _ = writeln!(
            out,
            "start: p = {} Pa, V = {} m3, T = {} K\n",
            num(self.start.pressure_pa()),
            num(self.start.volume_m3()),
            num(self.start.temperature_k())
        );
        let _ = writeln!(
            out,
            "{:>3}  {:<11} {:>12} {:>12} {:>12} {:>12} {:>13} {:>13} {:>11}",
            "#",
            "process",
            "Q [J]",
            "W [J]",
            "dU [J]",
            "dS [J/K]",
            "p end [Pa]",
            "V end [m3]",
            "T end [K]"
        );
        for (i, st) in self.steps.iter().enumerate() {
            let _ = writeln!(
                out,
                "{:>3}  {:<11} {:>12} {:>12} {:>12} {:>12} {:>13} {:>13} {:>11}",
                i + 1,
                st.process.name(),
                num(st.heat_j),
                num(st.work_j),
                num(st.delta_u_j),
                num(st.delta_s_j_per_k),
                num(st.end.pressure_pa()),
                num(st.end.volume_m3()),
                num(st.end.temperature_k()),
            );
        }
        let open = "open path";
        let rows = [
            (
                "path",
                if s.closed {
                    "closed cycle".to_owned()
                } else {
                    "open path (ends away from the start)".to_owned()
                },
            ),
            ("net work", format!("{} J", num(s.net_work_j))),
            ("heat in", format!("{} J", num(s.heat_in_j))),
            ("heat out", format!("{} J", num(s.heat_out_j))),
            (
                "efficiency",
                ratio(s.efficiency, if s.closed { "no heat in" } else { open }),
            ),
            ("Carnot bound", ratio(s.carnot_efficiency, open)),
            (
                "T max / T min",
                format!("{} K / {} K", num(s.t_max_k), num(s.t_min_k)),
            ),
            (
                "mean T of heat in",
                kelvin(
                    s.mean_heat_in_temperature_k,
                    if s.closed { "no heat in" } else { open },
                ),
            ),
            (
                "mean T of heat out",
                kelvin(
                    s.mean_heat_out_temperature_k,
                    if s.closed { "no heat out" } else { open },
                ),
            ),
            ("total dS", format!("{} J/K", num(s.total_delta_s_j_per_k))),
        ];
        out.push('\n');
        for (label, value) in rows {
            let _ = writeln!(out, "{label:<20}{value}");
        }
        if s.closed {
            let _ = writeln!(
                out,
                "\nReference figures of the ideal cycle: a real rig falls well short of them."
            );
        }
        out
    }
}
