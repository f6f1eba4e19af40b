//! The log's connection, with the summaries of the open batch that are not
//! yet written: they go to SQLite as multi-row INSERTs, and every other use
//! of the connection writes them first.
//!
//! ```text
//! Log::insert_frame(Summary) --> waiting (up to CHUNK) --> INSERT ... VALUES (..), (..), ...
//! any other statement: Db::get --> waiting written, in order --> &Connection
//! ```
//!
//! Rows of the open batch are invisible to other connections until its
//! COMMIT, and [`Db::get`] is the only way to the connection, so no reader
//! and no other statement can tell a waiting summary from a written one.
use std::cell::Cell;
use std::path::{Path, PathBuf};

use heatbound::monitor::Channel;
use heatbound::wire::Summary;
use rusqlite::{Connection, Statement};

use super::{RunId, StoreError, fault_bits, opt, status_bits, verdict_text};

/// Summaries waiting at most; also the rows of the largest INSERT.
const CHUNK: usize = 64;

/// Rows per INSERT statement: [`CHUNK`] and every power of two below it,
/// so that seven prepared statements write a batch of any length.
const SIZES: [usize; 7] = [64, 32, 16, 8, 4, 2, 1];

/// Columns of a `summaries` row, in the order of [`bind`].
const COLUMNS: usize = 29;

const INSERT_SUMMARIES: &str = "INSERT INTO summaries (run_id, ord, host_ms, seq, t_ms,
    duration_s, heat_in_j, work_j, heat_out_j, entropy_in_j_per_k, entropy_out_j_per_k,
    hot_mean_k, ambient_k, performance, bound, entropy_rate_w_per_k, u_performance, u_bound,
    u_margin, u_entropy_rate_w_per_k, status, faults, alarms, hot_temperature_integral_k_s,
    hot_pair_integral_k_s, verdict, suspect, suspect_bias, mode) VALUES ";

/// A summary taken by [`super::Log::insert_frame`], not yet written.
#[derive(Clone, Copy)]
pub(super) struct Waiting {
    pub(super) run: RunId,
    pub(super) ord: i64,
    pub(super) host_ms: i64,
    pub(super) summary: Summary,
}

/// The first summary a write could not store.
struct Failed {
    run: RunId,
    ord: i64,
    seq: u16,
    source: rusqlite::Error,
    /// Further summaries of the same write that were not stored.
    also: usize,
}

/// The connection and the summaries waiting for it.
pub(super) struct Db {
    conn: Connection,
    waiting: Cell<Vec<Waiting>>,
    /// The INSERT of `SIZES[i]` rows.
    sql: [String; SIZES.len()],
}

impl Db {
    pub(super) fn new(conn: Connection) -> Db {
        Db {
            conn,
            waiting: Cell::new(Vec::with_capacity(CHUNK)),
            sql: SIZES.map(insert_sql),
        }
    }

    /// The connection, every waiting summary written first. The only way
    /// to it once the log is open.
    pub(super) fn get(&self, path: &Path) -> Result<&Connection, StoreError> {
        self.write(path)?;
        Ok(&self.conn)
    }

    /// [`Db::get`], mutable (a transaction of its own).
    pub(super) fn get_mut(&mut self, path: &Path) -> Result<&mut Connection, StoreError> {
        self.write(path)?;
        Ok(&mut self.conn)
    }

    /// Takes a summary to write with the next ones. When [`CHUNK`] are
    /// already waiting they are written first; if that fails, `row` is not
    /// taken and the error names the summary that could not be written.
    pub(super) fn push(&mut self, path: &Path, row: Waiting) -> Result<(), StoreError> {
        if self.waiting.get_mut().len() >= CHUNK {
            self.write(path)?;
        }
        self.waiting.get_mut().push(row);
        Ok(())
    }

    /// Writes the waiting summaries in the order they were taken. A
    /// statement that fails stores none of its rows, so they are tried
    /// again one by one: every row that can be stored is, and the error
    /// names the first that could not be. Stops early if SQLite rolled the
    /// transaction back (the rows before went with it).
    fn write(&self, path: &Path) -> Result<(), StoreError> {
        let mut rows = self.waiting.take();
        if rows.is_empty() {
            self.waiting.set(rows);
            return Ok(());
        }
        let in_transaction = !self.conn.is_autocommit();
        let rolled_back = || in_transaction && self.conn.is_autocommit();
        let mut failed: Option<Failed> = None;
        let mut at = 0;
        while at < rows.len() {
            let left = rows.len() - at;
            let size = SIZES
                .iter()
                .position(|&n| n <= left)
                .unwrap_or(SIZES.len() - 1);
            let chunk = &rows[at..at + SIZES[size]];
            at += chunk.len();
            let Err(e) = self.insert(size, chunk) else {
                continue;
            };
            // A single row's error is already its own; a longer statement
            // is tried again row by row, unless its failure ended the
            // transaction.
            let mut whole = (chunk.len() == 1 || rolled_back()).then_some(e);
            for (i, row) in chunk.iter().enumerate() {
                let result = match whole.take() {
                    Some(e) => Err(e),
                    None => self.insert(SIZES.len() - 1, std::slice::from_ref(row)),
                };
                let Err(e) = result else { continue };
                note(&mut failed, row, e);
                if rolled_back() {
                    // This write stops here; the rows before went with it.
                    if let Some(f) = &mut failed {
                        f.also += (chunk.len() - i - 1) + (rows.len() - at);
                    }
                    at = rows.len();
                    break;
                }
            }
        }
        rows.clear();
        self.waiting.set(rows);
        match failed {
            None => Ok(()),
            Some(f) => Err(StoreError::SummaryNotLogged {
                path: PathBuf::from(path),
                run_id: f.run,
                ord: f.ord,
                seq: f.seq,
                also: f.also,
                source: f.source,
            }),
        }
    }

    /// One INSERT of `rows`, `SIZES[size]` of them.
    fn insert(&self, size: usize, rows: &[Waiting]) -> rusqlite::Result<()> {
        let mut st = self.conn.prepare_cached(&self.sql[size])?;
        for (i, row) in rows.iter().enumerate() {
            bind(&mut st, i * COLUMNS, row)?;
        }
        st.raw_execute().map(|_| ())
    }
}

/// Counts `row` as not stored, keeping the first error.
fn note(failed: &mut Option<Failed>, row: &Waiting, source: rusqlite::Error) {
    match failed {
        Some(f) => f.also += 1,
        None => {
            *failed = Some(Failed {
                run: row.run,
                ord: row.ord,
                seq: row.summary.seq,
                source,
                also: 0,
            });
        }
    }
}

/// `INSERT INTO summaries (...) VALUES` with `n` rows of placeholders.
fn insert_sql(n: usize) -> String {
    let row = format!("({})", vec!["?"; COLUMNS].join(", "));
    format!("{INSERT_SUMMARIES}{}", vec![row; n].join(", "))
}

/// Binds `w`'s columns to parameters `base + 1 ..= base + COLUMNS`.
fn bind(st: &mut Statement<'_>, base: usize, w: &Waiting) -> rusqlite::Result<()> {
    let s = &w.summary;
    let v = &s.verdict;
    // NULL for a summary without a second hot sensor, unless its pair
    // integral is not 0 (no decoded frame has one), so that every frame
    // reads back exactly.
    let pair = (s.status.hot2_measured || s.hot_pair_integral_k_s != 0.0)
        .then_some(s.hot_pair_integral_k_s);
    // Recomputed once: T_h, η or COP and the bound.
    let m = s.metrics();
    let (perf, bound) = if s.status.mode.is_reverse() {
        (m.cop, m.carnot_cop)
    } else {
        (m.efficiency, m.carnot_efficiency)
    };
    st.raw_bind_parameter(base + 1, w.run)?;
    st.raw_bind_parameter(base + 2, w.ord)?;
    st.raw_bind_parameter(base + 3, w.host_ms)?;
    st.raw_bind_parameter(base + 4, s.seq)?;
    st.raw_bind_parameter(base + 5, s.t_ms)?;
    st.raw_bind_parameter(base + 6, f64::from(s.duration_s))?;
    st.raw_bind_parameter(base + 7, f64::from(s.heat_in_j))?;
    st.raw_bind_parameter(base + 8, f64::from(s.work_j))?;
    st.raw_bind_parameter(base + 9, f64::from(s.heat_out_j))?;
    st.raw_bind_parameter(base + 10, f64::from(s.entropy_in_j_per_k))?;
    st.raw_bind_parameter(base + 11, f64::from(s.entropy_out_j_per_k))?;
    st.raw_bind_parameter(base + 12, opt(m.hot_mean_k))?;
    st.raw_bind_parameter(base + 13, opt(s.ambient_k))?;
    st.raw_bind_parameter(base + 14, opt(perf))?;
    st.raw_bind_parameter(base + 15, opt(bound))?;
    st.raw_bind_parameter(base + 16, opt(s.entropy_rate_w_per_k))?;
    st.raw_bind_parameter(base + 17, opt(s.u_performance))?;
    st.raw_bind_parameter(base + 18, opt(s.u_bound))?;
    st.raw_bind_parameter(base + 19, opt(s.u_margin))?;
    st.raw_bind_parameter(base + 20, opt(s.u_entropy_rate_w_per_k))?;
    st.raw_bind_parameter(base + 21, status_bits(&s.status))?;
    st.raw_bind_parameter(base + 22, fault_bits(&s.faults))?;
    st.raw_bind_parameter(base + 23, s.alarms)?;
    st.raw_bind_parameter(base + 24, f64::from(s.hot_temperature_integral_k_s))?;
    st.raw_bind_parameter(base + 25, opt(pair))?;
    st.raw_bind_parameter(base + 26, v.consistent.map(verdict_text))?;
    st.raw_bind_parameter(base + 27, v.suspect.map(Channel::name))?;
    // As on the wire: a bias only with a suspect.
    st.raw_bind_parameter(base + 28, opt(v.bias.filter(|_| v.suspect.is_some())))?;
    st.raw_bind_parameter(base + 29, s.status.mode.as_str())?;
    Ok(())
}
