//! A CSV file's summaries: its rows, as the replay reads them, through the
//! controller the firmware runs ([`heatbound::control::Controller`]), whose
//! Hello, Summary and Event frames go into a log of their own in a
//! temporary directory. The report then reads that log with the code that
//! reads any log (steady periods, chart), so a CSV report and a log report
//! draw the same things the same way.
//!
//! ```text
//! FILE.csv --replay (f64 monitor: totals, budget, alarms)
//!            \--each Row--> Controller<WINDOW_CAPACITY> (f32, as on a board)
//!                 --Hello, Summary every summary period, Events--> temporary LOG.sqlite
//!                 --> from_log's steady scan, chart::svg_chart --> the report
//! ```
//!
//! Only the frames are kept, in SQLite on disk, never the rows: memory does
//! not grow with the file. The controller needs a nominal sample period
//! for its Hello (the log's reader takes half of it as the slack within
//! which two windows meet); it is the median spacing of the first
//! [`PERIOD_ROWS`] rows, which are the only rows ever held.

use std::path::PathBuf;

use heatbound::config::RigConfig;
use heatbound::control::{Controller, ControllerSettings};
use heatbound::monitor::Sample;
use heatbound::wire::{Frame, RigId};

use super::ReportError;
use crate::replay::{Row, WINDOW_CAPACITY};
use crate::store::{Log, RunId};

/// The rig the temporary log names: the controller that made the
/// summaries is heatbound's own, replaying a file, not a rig's.
pub const RIG_ID: &str = "CSV replay";

/// Rows held to find the sample period before the controller starts.
pub const PERIOD_ROWS: usize = 16;

/// The controller's frames of a CSV replay, written to a temporary log as
/// the rows come. Removed with the value.
pub(super) struct Summaries {
    dir: tempfile::TempDir,
    log: Option<Log>,
    run: RunId,
    config: RigConfig,
    summary_period_ms: u32,
    /// The first rows, until the sample period is known.
    first: Vec<Row>,
    /// One row's frames (kept to reuse its allocation).
    frames: Vec<Frame>,
    controller: Option<Box<Controller<WINDOW_CAPACITY>>>,
    /// The first row's time, s, and whether it is a Unix time.
    start: Option<(f64, bool)>,
    /// The controller's clock at the first row, ms: the file's own time
    /// when it fits the clock, so the chart's axis reads as the file does.
    base_ms: u32,
    /// Whether the controller's clock is the file's own.
    file_clock: bool,
    sample_period_ms: u32,
    summaries: u64,
    last_host_ms: i64,
    /// The first thing that went wrong; nothing is written after it.
    error: Option<ReportError>,
}

impl Summaries {
    /// A temporary log for the summaries of a controller running `config`
    /// that sends a Summary every `summary_period_ms` of the file's time.
    pub fn new(config: &RigConfig, summary_period_ms: u32) -> Result<Summaries, ReportError> {
        let dir = tempfile::Builder::new()
            .prefix("heatbound-report-")
            .tempdir()
            .map_err(|source| ReportError::Temporary { source })?;
        let mut log = Log::open(&dir.path().join("replay.sqlite"))?;
        let run = log.begin_run("csv replay", 0)?;
        Ok(Summaries {
            dir,
            log: Some(log),
            run,
            config: *config,
            summary_period_ms: summary_period_ms.max(1),
            first: Vec::with_capacity(PERIOD_ROWS),
            frames: Vec::new(),
            controller: None,
            start: None,
            base_ms: 0,
            file_clock: false,
            sample_period_ms: 0,
            summaries: 0,
            last_host_ms: 0,
            error: None,
        })
    }

    /// Takes the replay's next row.
    pub fn push(&mut self, row: &Row) {
        if self.error.is_some() {
            return;
        }
        if self.controller.is_some() {
            self.step(row);
        } else {
            if self.start.is_none() {
                self.start = Some((row.t_s, row.unix_time));
                let base = base_ms(row);
                self.file_clock = base.is_some();
                self.base_ms = base.unwrap_or(0);
            }
            self.first.push(*row);
            if self.first.len() >= PERIOD_ROWS {
                self.begin();
            }
        }
    }

    /// Starts the controller once the sample period is known, and gives it
    /// the rows held so far.
    fn begin(&mut self) {
        let mut spacings: Vec<u32> = self
            .first
            .windows(2)
            .map(|w| w[1].sample.t_ms.wrapping_sub(w[0].sample.t_ms))
            .collect();
        spacings.sort_unstable();
        self.sample_period_ms = spacings
            .get(spacings.len() / 2)
            .copied()
            .unwrap_or(self.summary_period_ms)
            .max(1);
        let settings = ControllerSettings {
            // A fixed, valid identifier: cannot fail.
            rig_id: RigId::new(RIG_ID).unwrap_or_default(),
            firmware_version: version(),
            sample_period_ms: self.sample_period_ms,
            summary_period_ms: self.summary_period_ms,
            hello_period_ms: 0,
        };
        // No key: a replay takes no commands.
        match Controller::new(&settings, &self.config, None, 0) {
            Ok(c) => self.controller = Some(Box::new(c)),
            Err(e) => {
                self.error = Some(ReportError::Controller(e));
                return;
            }
        }
        for row in std::mem::take(&mut self.first) {
            self.step(&row);
        }
    }

    /// One row through the controller, its frames into the log.
    fn step(&mut self, row: &Row) {
        if self.error.is_some() {
            return;
        }
        let host_ms = self.host_ms(row);
        let (Some(controller), Some(log)) = (self.controller.as_mut(), self.log.as_mut()) else {
            return;
        };
        let frames = &mut self.frames;
        frames.clear();
        let mut sample = narrow(&row.sample);
        sample.t_ms = sample.t_ms.wrapping_add(self.base_ms);
        controller.step(&sample, &mut |f: &Frame| {
            frames.push(f.clone());
        });
        for f in frames.iter() {
            if let Err(e) = log.insert_frame(self.run, host_ms, f) {
                self.error = Some(e.into());
                return;
            }
            self.summaries += u64::from(matches!(f, Frame::Summary(_)));
        }
        self.last_host_ms = host_ms;
    }

    /// The row's time on the log's host clock, Unix ms: the file's own when
    /// it is a date, else the controller's clock.
    fn host_ms(&self, row: &Row) -> i64 {
        match self.start {
            Some((_, true)) if row.t_s.is_finite() => {
                // Unix seconds of a date: well inside i64 ms.
                #[allow(clippy::cast_possible_truncation)]
                let ms = (row.t_s * 1000.0).round().clamp(-9.0e15, 9.0e15) as i64;
                ms
            }
            _ => i64::from(row.sample.t_ms.wrapping_add(self.base_ms)),
        }
    }

    /// Ends the run and closes the log: the summaries are ready to read.
    pub fn finish(mut self) -> Result<Finished, ReportError> {
        if self.controller.is_none() && self.error.is_none() && !self.first.is_empty() {
            // Fewer rows than it takes to find the period.
            self.begin();
        }
        if let Some(e) = self.error.take() {
            return Err(e);
        }
        if let Some(mut log) = self.log.take() {
            log.end_run(self.run, self.last_host_ms)?;
        }
        let path = self.dir.path().join("replay.sqlite");
        Ok(Finished {
            _dir: self.dir,
            path,
            run: self.run,
            summaries: self.summaries,
            summary_period_ms: self.summary_period_ms,
            sample_period_ms: self.sample_period_ms,
            first_s: self
                .start
                .map_or(0.0, |(t, _)| t - f64::from(self.base_ms) / 1000.0),
            unix_time: self.start.is_some_and(|(_, unix)| unix),
            file_clock: self.file_clock,
        })
    }
}

/// The temporary log, closed and ready to read; removed with the value.
pub(super) struct Finished {
    _dir: tempfile::TempDir,
    /// The log.
    pub path: PathBuf,
    /// Its one run.
    pub run: RunId,
    /// Summaries sent.
    pub summaries: u64,
    /// The summary period, ms of the file's time.
    pub summary_period_ms: u32,
    /// The nominal sample period the Hello carries, ms.
    pub sample_period_ms: u32,
    /// The file's time at 0 on the controller's clock, s: 0 when the
    /// controller keeps the file's own time, else the first row's.
    pub first_s: f64,
    /// Whether the file's times are dates.
    pub unix_time: bool,
    /// Whether the controller's clock is the file's own time.
    pub file_clock: bool,
}

/// The controller's clock at `first`, the file's first row, ms: the
/// file's own seconds when they are not a date and fit half the `u32` clock
/// (a logger's seconds since its start); `None` otherwise, and the clock
/// starts at 0.
fn base_ms(first: &Row) -> Option<u32> {
    let ms = (first.t_s * 1000.0).round();
    if first.unix_time || !(0.0..f64::from(u32::MAX / 2)).contains(&ms) {
        return None;
    }
    // In range, checked above.
    #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
    let ms = ms as u32;
    Some(ms)
}

/// The host's version as a firmware version: the controller code that made
/// the summaries is this build's.
fn version() -> (u8, u8, u8) {
    let part = |s: &str| s.parse().unwrap_or(0);
    (
        part(env!("CARGO_PKG_VERSION_MAJOR")),
        part(env!("CARGO_PKG_VERSION_MINOR")),
        part(env!("CARGO_PKG_VERSION_PATCH")),
    )
}

/// A replay's f64 sample in the controller's f32, as a board's ADC
/// conversion would hand it over (NaN stays NaN: an invalid sample).
#[allow(clippy::cast_possible_truncation)]
fn narrow(s: &Sample<f64>) -> Sample {
    Sample {
        t_ms: s.t_ms,
        t_hot_k: s.t_hot_k as f32,
        t_cold_k: s.t_cold_k as f32,
        heat_in_w: s.heat_in_w as f32,
        work_w: s.work_w as f32,
        heat_out_w: s.heat_out_w.map(|x| x as f32),
        t_hot2_k: s.t_hot2_k.map(|x| x as f32),
    }
}
