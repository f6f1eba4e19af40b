//! The SQLite log: every frame, link loss and outage of a run, with device
//! time and host receive time.
//!
//! ```text
//! bytes --> ingest (Decoder + LinkTracker) --> store::Log (write, batched) --> heatbound-log.sqlite
//! heatbound-log.sqlite --> store::Log::open_read --> frames / link_errors / outages --> audit, charts
//! ```
//!
//! The schema is versioned with `PRAGMA user_version` and documented in
//! `docs/log-schema.md`. [`Log::open`] applies the numbered [`MIGRATIONS`]
//! in order, inside one transaction; a log written by a newer tool is
//! refused with [`StoreError::NewerSchema`].
//!
//! Writes are batched: one transaction stays open and is committed every
//! [`Batching::max_rows`] rows, when [`Log::commit_if_due`] finds it older
//! than [`Batching::max_age_ms`], and on [`Log::commit`]. While a writer has
//! the log open the journal is WAL with `synchronous=NORMAL`, so a killed
//! process leaves a database that opens with every committed batch. A
//! writer whose last act was [`Log::end_run`] switches the file back to
//! `journal_mode=DELETE` when it is dropped, so that reading a closed log
//! ([`Log::open_read`], read-only) leaves no `-wal`/`-shm` files.
//!
//! ```
//! use heatbound::wire::{Frame, Summary};
//! use heatbound_host::store::Log;
//! let dir = tempfile::tempdir().unwrap();
//! let path = dir.path().join("log.sqlite");
//! let mut log = Log::open(&path).unwrap();
//! let run = log.begin_run("file:capture.bin", 1_700_000_000_000).unwrap();
//! let frame = Frame::Summary(Summary { seq: 7, ..Summary::default() });
//! log.insert_frame(run, 1_700_000_000_100, &frame).unwrap();
//! log.end_run(run, 1_700_000_000_200).unwrap();
//! drop(log);
//!
//! let log = Log::open_read(&path).unwrap();
//! let stored: Vec<_> = log.frames(run).unwrap().collect::<Result<_, _>>().unwrap();
//! assert_eq!(stored[0].frame, frame);
//! ```
use std::collections::VecDeque;
use std::path::{Path, PathBuf};

use heatbound::alarm::{Event, EventKind, RuleId, Severity};
use heatbound::config::Mode;
use heatbound::monitor::{Channel, Uncertainty};
use heatbound::wire::{
    EventFrame, FaultBits, Frame, Hello, Reply, ReplyCode, RigId, Status, Summary, Uncertainties,
    Verdict,
};
use rusqlite::{Connection, OpenFlags, Row, params};

mod batch;
mod lab;
pub use lab::{LabSource, Publication, Record, SourceKey, carried};

/// The schema version this tool writes (`PRAGMA user_version`).
pub const SCHEMA_VERSION: i64 = MIGRATIONS.len() as i64;

/// The default log file, in the current directory.
pub const DEFAULT_DB: &str = "heatbound-log.sqlite";

/// Migration `i` (0-based) takes the schema from version `i` to `i + 1`.
/// Only ever append: a released migration never changes.
pub const MIGRATIONS: &[&str] = &[
    // 1: the first schema.
    "CREATE TABLE runs (
        id             INTEGER PRIMARY KEY,
        started_host_ms INTEGER NOT NULL,
        source         TEXT NOT NULL,
        tool_version   TEXT NOT NULL,
        ended_host_ms  INTEGER
    );
    CREATE TABLE hellos (
        run_id          INTEGER NOT NULL REFERENCES runs(id),
        ord             INTEGER NOT NULL,
        host_ms         INTEGER NOT NULL,
        protocol_version INTEGER NOT NULL,
        rig_id          TEXT NOT NULL,
        firmware_version TEXT NOT NULL,
        sample_period_ms INTEGER NOT NULL,
        window_samples  INTEGER NOT NULL,
        mode            TEXT NOT NULL,
        coverage_factor REAL NOT NULL,
        ambient_k       REAL,
        u_hot_k         REAL NOT NULL,
        u_cold_k        REAL NOT NULL,
        u_heat_in_rel   REAL NOT NULL,
        u_work_rel      REAL NOT NULL,
        u_heat_out_rel  REAL NOT NULL,
        config_digest   INTEGER NOT NULL,
        PRIMARY KEY (run_id, ord)
    ) WITHOUT ROWID;
    CREATE TABLE summaries (
        run_id               INTEGER NOT NULL REFERENCES runs(id),
        ord                  INTEGER NOT NULL,
        host_ms              INTEGER NOT NULL,
        seq                  INTEGER NOT NULL,
        t_ms                 INTEGER NOT NULL,
        duration_s           REAL NOT NULL,
        heat_in_j            REAL NOT NULL,
        work_j               REAL NOT NULL,
        heat_out_j           REAL NOT NULL,
        entropy_in_j_per_k   REAL NOT NULL,
        entropy_out_j_per_k  REAL NOT NULL,
        hot_mean_k           REAL,
        ambient_k            REAL,
        performance          REAL,
        bound                REAL,
        entropy_rate_w_per_k REAL,
        u_performance        REAL,
        u_bound              REAL,
        u_margin             REAL,
        u_entropy_rate_w_per_k REAL,
        status               INTEGER NOT NULL,
        faults               INTEGER NOT NULL,
        alarms               INTEGER NOT NULL,
        PRIMARY KEY (run_id, ord)
    ) WITHOUT ROWID;
    CREATE TABLE events (
        run_id   INTEGER NOT NULL REFERENCES runs(id),
        ord      INTEGER NOT NULL,
        host_ms  INTEGER NOT NULL,
        seq      INTEGER NOT NULL,
        t_ms     INTEGER NOT NULL,
        rule     TEXT NOT NULL,
        kind     TEXT NOT NULL,
        severity TEXT NOT NULL,
        PRIMARY KEY (run_id, ord)
    ) WITHOUT ROWID;
    CREATE TABLE link_errors (
        run_id  INTEGER NOT NULL REFERENCES runs(id),
        ord     INTEGER NOT NULL,
        host_ms INTEGER NOT NULL,
        kind    TEXT NOT NULL,
        count   INTEGER NOT NULL,
        detail  TEXT NOT NULL,
        PRIMARY KEY (run_id, ord)
    ) WITHOUT ROWID;
    CREATE TABLE outages (
        id              INTEGER PRIMARY KEY,
        run_id          INTEGER NOT NULL REFERENCES runs(id),
        started_host_ms INTEGER NOT NULL,
        ended_host_ms   INTEGER,
        reason          TEXT NOT NULL
    );
    CREATE INDEX outages_run ON outages(run_id, started_host_ms);",
    // 2: `link_errors.kind` may be 'replay' (summaries sent again, not
    // stored); the view lists them.
    "CREATE VIEW replays AS
        SELECT run_id, ord, host_ms, count, detail FROM link_errors WHERE kind = 'replay';",
    // 3: protocol version 2, the downlink. Hellos carry the controller's run
    // counter, session, last accepted command counter and whether it holds a
    // key; Reply frames are logged among the frames; every command the host
    // sent is logged with who asked, when, and what the controller replied.
    "ALTER TABLE hellos ADD COLUMN run_counter INTEGER NOT NULL DEFAULT 0;
    ALTER TABLE hellos ADD COLUMN session INTEGER NOT NULL DEFAULT 0;
    ALTER TABLE hellos ADD COLUMN last_counter INTEGER NOT NULL DEFAULT 0;
    ALTER TABLE hellos ADD COLUMN keyed INTEGER NOT NULL DEFAULT 0;
    CREATE TABLE replies (
        run_id   INTEGER NOT NULL REFERENCES runs(id),
        ord      INTEGER NOT NULL,
        host_ms  INTEGER NOT NULL,
        counter  INTEGER NOT NULL,
        t_ms     INTEGER NOT NULL,
        code     TEXT NOT NULL,
        PRIMARY KEY (run_id, ord)
    ) WITHOUT ROWID;
    CREATE TABLE commands (
        id            INTEGER PRIMARY KEY,
        run_id        INTEGER NOT NULL REFERENCES runs(id),
        host_ms       INTEGER NOT NULL,
        origin        TEXT NOT NULL,
        command       TEXT NOT NULL,
        detail        TEXT NOT NULL,
        counter       INTEGER NOT NULL,
        session       INTEGER NOT NULL,
        sealed        BLOB NOT NULL,
        reply_host_ms INTEGER,
        reply_code    TEXT,
        outcome       TEXT NOT NULL
    );
    CREATE INDEX commands_run ON commands(run_id, host_ms);",
    // 4: what an operator did at the console that sent nothing to the
    // controller: pausing the trends, changing the span, leaving.
    "CREATE TABLE operator_actions (
        id       INTEGER PRIMARY KEY,
        run_id   INTEGER NOT NULL REFERENCES runs(id),
        host_ms  INTEGER NOT NULL,
        origin   TEXT NOT NULL,
        action   TEXT NOT NULL,
        detail   TEXT NOT NULL
    );",
    // 5: protocol version 3, the second hot-side sensor and the diagnosis.
    // Hellos carry u(T_hot2) and the configured UA, if any; summaries
    // carry the hot-side time integrals and the window's verdict, events
    // the verdict at the moment of the alarm.
    // `summaries.faults` takes the wire layout of version 3 (channel bits
    // 0–5, bit 5 = hot2; stale bit 7): the stale bit of earlier rows moves
    // from bit 5 to bit 7, and an earlier row with undefined bits (6 or 7)
    // gets bit 6, undefined still, so that it reads as altered as before.
    // `status` gains bit 4, hot2 measured; `mode` is the summary's own
    // (NULL in earlier rows, which take their run's Hello's).
    "ALTER TABLE hellos ADD COLUMN u_hot2_k REAL;
    ALTER TABLE hellos ADD COLUMN ua_w_per_k REAL;
    ALTER TABLE hellos ADD COLUMN u_ua_w_per_k REAL;
    ALTER TABLE summaries ADD COLUMN hot_temperature_integral_k_s REAL;
    ALTER TABLE summaries ADD COLUMN hot_pair_integral_k_s REAL;
    ALTER TABLE summaries ADD COLUMN verdict TEXT;
    ALTER TABLE summaries ADD COLUMN suspect TEXT;
    ALTER TABLE summaries ADD COLUMN suspect_bias REAL;
    ALTER TABLE summaries ADD COLUMN mode TEXT;
    ALTER TABLE events ADD COLUMN verdict TEXT;
    ALTER TABLE events ADD COLUMN suspect TEXT;
    UPDATE summaries
        SET faults = (faults & 31) | ((faults & 32) << 2)
            | (CASE WHEN faults & 192 != 0 THEN 64 ELSE 0 END)
        WHERE typeof(faults) = 'integer' AND faults BETWEEN 0 AND 255;",
    // 6: the lab (`watch --publish`, `lab`). Every log gets an id of its own,
    // so that a lab tells apart the runs of two bench PCs. A watch log
    // records, per run it publishes, the last row up to which the broker
    // acknowledged everything; a lab log records which rig each run came
    // from and, per source run, the last row it took.
    "CREATE TABLE log_identity (id INTEGER NOT NULL);
    INSERT INTO log_identity (id) SELECT abs(random() % 9007199254740991);
    ALTER TABLE runs ADD COLUMN rig TEXT;
    CREATE TABLE publications (
        run_id          INTEGER PRIMARY KEY REFERENCES runs(id),
        broker          TEXT NOT NULL,
        acked_ord       INTEGER NOT NULL,
        updated_host_ms INTEGER NOT NULL
    );
    CREATE TABLE lab_sources (
        rig         TEXT NOT NULL,
        log_id      INTEGER NOT NULL,
        source_run  INTEGER NOT NULL,
        run_id      INTEGER NOT NULL REFERENCES runs(id),
        last_ord    INTEGER NOT NULL,
        duplicates  INTEGER NOT NULL DEFAULT 0,
        recovered   INTEGER NOT NULL DEFAULT 0,
        lost        INTEGER NOT NULL DEFAULT 0,
        PRIMARY KEY (rig, log_id, source_run)
    ) WITHOUT ROWID;",
];

/// What went wrong with the log.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum StoreError {
    /// An SQLite call failed.
    #[error("{path}: {what}: {source}")]
    Sqlite {
        /// The database file.
        path: PathBuf,
        /// What was being done.
        what: &'static str,
        /// SQLite's error.
        #[source]
        source: rusqlite::Error,
    },
    /// A summary that [`Log::insert_frame`] took could not be written with
    /// the rest of its batch (the error surfaces at the call that wrote
    /// the batch); `also` more of the same batch were not written either.
    #[error(
        "{path}: cannot log the summary of run {run_id} at row {ord} (seq {seq}){}: {source}",
        also_text(*.also)
    )]
    SummaryNotLogged {
        /// The database file.
        path: PathBuf,
        /// The run.
        run_id: i64,
        /// The summary's `ord`.
        ord: i64,
        /// Its sequence number.
        seq: u16,
        /// Further summaries of the batch that were not written.
        also: usize,
        /// SQLite's error.
        #[source]
        source: rusqlite::Error,
    },
    /// The file was written by a newer heatbound with a schema this tool does not know.
    #[error(
        "{path}: log schema version {found} is newer than this tool's {known}; use a newer heatbound"
    )]
    NewerSchema {
        /// The database file.
        path: PathBuf,
        /// Its `user_version`.
        found: i64,
        /// [`SCHEMA_VERSION`].
        known: i64,
    },
    /// Opened for reading, but the file is not a heatbound log (or not yet migrated).
    #[error("{path}: not a heatbound log of schema version {known} (user_version is {found})")]
    NotALog {
        /// The database file.
        path: PathBuf,
        /// Its `user_version`.
        found: i64,
        /// [`SCHEMA_VERSION`].
        known: i64,
    },
    /// A stored value no frame can hold: not finite, outside the f32 range,
    /// not an f32 at all, or undefined bits (the log was altered).
    #[error("{0}")]
    ImpossibleValue(Box<Impossible>),
    /// A stored row cannot be turned back into a frame.
    #[error("{path}: run {run_id}, {table} row {ord}: {reason}")]
    BadRow {
        /// The database file.
        path: PathBuf,
        /// The run.
        run_id: i64,
        /// The table.
        table: &'static str,
        /// The row's `ord`.
        ord: i64,
        /// What is wrong.
        reason: String,
    },
}

/// The tail of [`StoreError::SummaryNotLogged`]'s text.
fn also_text(also: usize) -> String {
    match also {
        0 => String::new(),
        1 => ", nor 1 more summary of the same batch".to_string(),
        n => format!(", nor {n} more summaries of the same batch"),
    }
}

/// A stored value no frame can hold (see [`StoreError::ImpossibleValue`]).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Impossible {
    /// The database file.
    pub path: PathBuf,
    /// The run.
    pub run_id: i64,
    /// The table.
    pub table: &'static str,
    /// The row's `ord`.
    pub ord: i64,
    /// The summary's sequence number, when it could be read.
    pub seq: Option<u16>,
    /// The summary's device time, ms, when it could be read.
    pub t_ms: Option<u32>,
    /// The column.
    pub column: &'static str,
    /// The stored value, as text.
    pub value: String,
    /// Why no frame can hold it.
    pub why: &'static str,
    /// Further impossible values of the same row, `column = value: why` each.
    pub also: Vec<String>,
}

impl std::fmt::Display for Impossible {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{}: run {}, {} row {}",
            self.path.display(),
            self.run_id,
            self.table,
            self.ord
        )?;
        if let Some(seq) = self.seq {
            write!(f, " (seq {seq})")?;
        }
        write!(f, ": {} = {}: {}", self.column, self.value, self.why)?;
        for a in &self.also {
            write!(f, "; {a}")?;
        }
        Ok(())
    }
}

/// When a batch is committed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Batching {
    /// Commit after this many rows.
    pub max_rows: usize,
    /// Commit a batch older than this, host milliseconds (checked by [`Log::commit_if_due`]).
    pub max_age_ms: i64,
}

impl Default for Batching {
    fn default() -> Self {
        Batching {
            max_rows: 1000,
            max_age_ms: 250,
        }
    }
}

/// A run's id (`runs.id`).
pub type RunId = i64;

/// A row of `runs`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct RunInfo {
    /// `runs.id`.
    pub id: RunId,
    /// Host time the run began, Unix ms.
    pub started_host_ms: i64,
    /// Where the bytes came from: `serial:PATH`, `tcp:HOST:PORT`, `file:PATH`, `stdin`.
    pub source: String,
    /// The heatbound version that wrote the run.
    pub tool_version: String,
    /// Host time the run ended, Unix ms; `None` if the writer never closed it.
    pub ended_host_ms: Option<i64>,
    /// Summaries stored.
    pub summaries: u64,
}

/// One frame as received.
#[derive(Clone, Debug, PartialEq)]
pub struct Stored {
    /// Host receive time, Unix ms.
    pub host_ms: i64,
    /// The frame, exactly as decoded.
    pub frame: Frame,
}

/// Kinds of `link_errors` rows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum LinkErrorKind {
    /// CRC mismatch.
    Crc,
    /// Frame longer than the decoder's buffer.
    Overlong,
    /// Bad COBS, postcard, kind, bits or values.
    Malformed,
    /// Another protocol version.
    UnknownVersion,
    /// Summaries missing from the sequence (`count` = how many).
    Gap,
    /// A repeated sequence number.
    Duplicate,
    /// The sequence went back: the controller restarted.
    Restart,
    /// Summaries sent again (sequence and device time back to values
    /// already seen since the last Hello, no Hello between): not stored;
    /// `count` = how many summaries. Schema version 2.
    Replay,
}

impl LinkErrorKind {
    /// Every kind.
    pub const ALL: [LinkErrorKind; 8] = [
        LinkErrorKind::Crc,
        LinkErrorKind::Overlong,
        LinkErrorKind::Malformed,
        LinkErrorKind::UnknownVersion,
        LinkErrorKind::Gap,
        LinkErrorKind::Duplicate,
        LinkErrorKind::Restart,
        LinkErrorKind::Replay,
    ];

    /// The text stored in `link_errors.kind`.
    pub const fn as_str(self) -> &'static str {
        match self {
            LinkErrorKind::Crc => "crc",
            LinkErrorKind::Overlong => "overlong",
            LinkErrorKind::Malformed => "malformed",
            LinkErrorKind::UnknownVersion => "unknown_version",
            LinkErrorKind::Gap => "gap",
            LinkErrorKind::Duplicate => "duplicate",
            LinkErrorKind::Restart => "restart",
            LinkErrorKind::Replay => "replay",
        }
    }

    /// The kind stored as `text`.
    pub fn parse(text: &str) -> Option<LinkErrorKind> {
        Self::ALL.into_iter().find(|k| k.as_str() == text)
    }
}

impl std::fmt::Display for LinkErrorKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// A row of `link_errors`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LinkErrorRow {
    /// Position among the run's rows (shared with the frames).
    pub ord: i64,
    /// Host time, Unix ms.
    pub host_ms: i64,
    /// What was lost.
    pub kind: LinkErrorKind,
    /// How many frames (or, for a gap, missing summaries).
    pub count: u64,
    /// A readable detail.
    pub detail: String,
}

/// A row of `outages`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct OutageRow {
    /// `outages.id`.
    pub id: i64,
    /// Host time the link dropped, Unix ms.
    pub started_host_ms: i64,
    /// Host time it came back, Unix ms; `None` if it never did.
    pub ended_host_ms: Option<i64>,
    /// Why it dropped.
    pub reason: String,
}

/// A command the host sent down the link, as logged.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct CommandRow {
    /// Its id in the log.
    pub id: i64,
    /// Host time the command was sent, Unix ms.
    pub host_ms: i64,
    /// Who asked for it (`heatbound ack`, `demo`, the console, ...).
    pub origin: String,
    /// `hello`, `ack`, `new_run` or `configure`.
    pub command: String,
    /// What it carried: the rule or `all`, the configuration's digest.
    pub detail: String,
    /// Its counter.
    pub counter: u32,
    /// The controller session it was sealed for.
    pub session: u32,
    /// The bytes sent, exactly (the tag can be checked again with the key).
    pub sealed: Vec<u8>,
    /// When the controller's Reply arrived, Unix ms.
    pub reply_host_ms: Option<i64>,
    /// What the Reply said.
    pub reply_code: Option<ReplyCode>,
    /// `pending`, `applied`, `rejected`, or `no_reply` (none came in time).
    pub outcome: String,
}

/// The log: one SQLite connection, writing in batches or reading.
pub struct Log {
    /// The connection and the batch's summaries not yet written: reached
    /// only through [`Log::conn`].
    db: batch::Db,
    path: PathBuf,
    batching: Batching,
    /// Rows in the open transaction; `None` when none is open.
    pending: Option<usize>,
    batch_started_ms: i64,
    /// The next `ord` of the run being written.
    next_ord: i64,
    ord_run: RunId,
    /// The latest write was [`Log::end_run`]: on close, the journal goes
    /// back to `DELETE` so that readers leave no `-wal`/`-shm` files.
    run_closed: bool,
    /// The file's schema version (a reader does not migrate it).
    schema: i64,
}

const INSERT_HELLO: &str = "INSERT INTO hellos (run_id, ord, host_ms, protocol_version, rig_id,
    firmware_version, sample_period_ms, window_samples, mode, coverage_factor, ambient_k,
    u_hot_k, u_cold_k, u_heat_in_rel, u_work_rel, u_heat_out_rel, config_digest, run_counter,
    session, last_counter, keyed, u_hot2_k, ua_w_per_k, u_ua_w_per_k)
    VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18,
    ?19, ?20, ?21, ?22, ?23, ?24)";

const INSERT_REPLY: &str = "INSERT INTO replies (run_id, ord, host_ms, counter, t_ms, code)
    VALUES (?1, ?2, ?3, ?4, ?5, ?6)";

const INSERT_EVENT: &str = "INSERT INTO events (run_id, ord, host_ms, seq, t_ms, rule, kind,
    severity, verdict, suspect) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)";

const INSERT_LINK_ERROR: &str = "INSERT INTO link_errors (run_id, ord, host_ms, kind, count,
    detail) VALUES (?1, ?2, ?3, ?4, ?5, ?6)";

/// Columns of a [`select_frames`] row.
const FRAME_COLUMNS: usize = 29;

/// `n` NULL columns, comma-separated with a leading comma.
fn nulls(n: usize) -> String {
    ", NULL".repeat(n)
}

/// Every frame table of a log of schema version `schema` in one shape,
/// ordered by `ord`, paged by `?1` run, `?2` after this ord, `?3` rows.
/// Columns 0–2 are `ord`, `host_ms` and the kind (0 = Hello, 1 = Summary,
/// 2 = Event, 3 = Reply); columns 3.. by kind:
///
/// - Hello: 3–20 as in `hellos` from `protocol_version` to `keyed`, then
///   21 `u_hot2_k`, 22 `ua_w_per_k`, 23 `u_ua_w_per_k`;
/// - Summary: 3 `seq`, 4 `t_ms`, 5–19 [`SUMMARY_REALS`], 20 `status`,
///   21 `faults`, 22 `alarms`, 23 `hot_temperature_integral_k_s`,
///   24 `hot_pair_integral_k_s`, 25 `suspect_bias`, 26 `verdict`,
///   27 `suspect`, 28 the run's mode for it (see [`Log::frames`]);
/// - Event: 3 `seq`, 4 `t_ms`, 5 `rule`, 6 `kind`, 7 `severity`,
///   8 `verdict`, 9 `suspect`;
/// - Reply: 3 `counter`, 4 `t_ms`, 5 `code`.
///
/// Columns a version does not have read as NULL (and, for the four Hello
/// columns of version 3, as 0); a log before version 3 has no replies.
fn select_frames(schema: i64) -> String {
    let hello_v3 = if schema >= 3 {
        "run_counter, session, last_counter, keyed"
    } else {
        "0, 0, 0, 0"
    };
    let v5 = schema >= 5;
    let hello_v5 = if v5 {
        "u_hot2_k, ua_w_per_k, u_ua_w_per_k"
    } else {
        "NULL, NULL, NULL"
    };
    let summary_v5 = if v5 {
        "s.hot_temperature_integral_k_s, s.hot_pair_integral_k_s, s.suspect_bias, s.verdict,
        s.suspect"
    } else {
        "NULL, NULL, NULL, NULL, NULL"
    };
    let event_v5 = if v5 { "verdict, suspect" } else { "NULL, NULL" };
    let summary_mode = if v5 { "s.mode," } else { "" };
    let replies = if schema >= 3 {
        format!(
            "UNION ALL
            SELECT ord, host_ms, 3, counter, t_ms, code{}
            FROM replies WHERE run_id = ?1 AND ord > ?2",
            nulls(FRAME_COLUMNS - 6)
        )
    } else {
        String::new()
    };
    format!(
        "SELECT ord, host_ms, 0, protocol_version, rig_id, firmware_version, sample_period_ms,
            window_samples, mode, coverage_factor, ambient_k, u_hot_k, u_cold_k, u_heat_in_rel,
            u_work_rel, u_heat_out_rel, config_digest, {hello_v3}, {hello_v5}{hello_nulls}
            FROM hellos WHERE run_id = ?1 AND ord > ?2
        UNION ALL
        SELECT s.ord, s.host_ms, 1, s.seq, s.t_ms, s.duration_s, s.heat_in_j, s.work_j,
            s.heat_out_j, s.entropy_in_j_per_k, s.entropy_out_j_per_k, s.hot_mean_k,
            s.ambient_k, s.performance, s.bound, s.entropy_rate_w_per_k, s.u_performance,
            s.u_bound, s.u_margin, s.u_entropy_rate_w_per_k, s.status, s.faults, s.alarms,
            {summary_v5},
            coalesce({summary_mode}
                (SELECT h.mode FROM hellos h WHERE h.run_id = s.run_id AND h.ord < s.ord
                    ORDER BY h.ord DESC LIMIT 1),
                (SELECT h.mode FROM hellos h WHERE h.run_id = s.run_id
                    ORDER BY h.ord LIMIT 1))
            FROM summaries s WHERE s.run_id = ?1 AND s.ord > ?2
        UNION ALL
        SELECT ord, host_ms, 2, seq, t_ms, rule, kind, severity, {event_v5}{event_nulls}
            FROM events WHERE run_id = ?1 AND ord > ?2
        {replies}
        ORDER BY ord LIMIT ?3",
        hello_nulls = nulls(FRAME_COLUMNS - 24),
        event_nulls = nulls(FRAME_COLUMNS - 10),
    )
}

/// One row of a [`Log::frames`] page: its `ord` and the rebuilt frame.
type PageRow = (i64, Result<Stored, StoreError>);

/// Rows fetched per page by [`Log::frames`].
const FRAMES_PAGE: i64 = 4096;

fn opt(x: Option<f32>) -> Option<f64> {
    x.map(f64::from)
}

impl Log {
    /// Opens (creating if needed) the log at `path` for writing, with the
    /// default [`Batching`], and migrates it to [`SCHEMA_VERSION`].
    pub fn open(path: &Path) -> Result<Log, StoreError> {
        Self::open_with(path, Batching::default())
    }

    /// [`Log::open`] with explicit batching.
    pub fn open_with(path: &Path, batching: Batching) -> Result<Log, StoreError> {
        let conn = Connection::open(path).map_err(|e| sql_err(path, "cannot open", e))?;
        let mut log = Log::from_conn(conn, path, batching);
        log.configure()?;
        log.migrate()?;
        Ok(log)
    }

    /// Opens an existing log read-only: nothing is written, and no journal
    /// file is created beside a log its writer closed. Refuses a file that
    /// is not a log (empty, unmigrated) or is of a newer schema; an older
    /// schema reads as it is (every change is additive).
    pub fn open_read(path: &Path) -> Result<Log, StoreError> {
        let flags = OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        let conn = Connection::open_with_flags(path, flags)
            .map_err(|e| sql_err(path, "cannot open", e))?;
        let log = Log::from_conn(conn, path, Batching::default());
        log.conn()?
            .busy_timeout(std::time::Duration::from_secs(5))
            .map_err(|e| log.err("cannot set the busy timeout", e))?;
        let found = log.user_version()?;
        if found > SCHEMA_VERSION {
            return Err(StoreError::NewerSchema {
                path: log.path.clone(),
                found,
                known: SCHEMA_VERSION,
            });
        }
        if found < 1 {
            return Err(StoreError::NotALog {
                path: log.path.clone(),
                found,
                known: SCHEMA_VERSION,
            });
        }
        let mut log = log;
        log.schema = found;
        Ok(log)
    }

    fn from_conn(conn: Connection, path: &Path, batching: Batching) -> Log {
        // Room for every INSERT and SELECT this module prepares, the seven
        // summary INSERTs (batch::SIZES) among them.
        conn.set_prepared_statement_cache_capacity(32);
        Log {
            db: batch::Db::new(conn),
            path: path.to_path_buf(),
            batching,
            pending: None,
            batch_started_ms: 0,
            next_ord: 0,
            ord_run: -1,
            run_closed: false,
            schema: SCHEMA_VERSION,
        }
    }

    /// A run whose `ord` cannot grow (only an altered log gets there).
    fn full_run(&self, run: RunId, ord: i64) -> StoreError {
        self.bad(
            run,
            "runs",
            ord,
            "ord is at its largest value: no row can follow",
        )
    }

    fn err(&self, what: &'static str, source: rusqlite::Error) -> StoreError {
        sql_err(&self.path, what, source)
    }

    fn configure(&self) -> Result<(), StoreError> {
        let c = self.conn()?;
        c.busy_timeout(std::time::Duration::from_secs(5))
            .map_err(|e| self.err("cannot set the busy timeout", e))?;
        let mode: String = c
            .pragma_update_and_check(None, "journal_mode", "WAL", |r| r.get(0))
            .map_err(|e| self.err("cannot switch to WAL", e))?;
        if !mode.eq_ignore_ascii_case("wal") {
            return Err(self.err(
                "cannot switch to WAL",
                rusqlite::Error::InvalidParameterName(format!("journal_mode stayed {mode}")),
            ));
        }
        c.pragma_update(None, "synchronous", "NORMAL")
            .map_err(|e| self.err("cannot set synchronous=NORMAL", e))?;
        c.pragma_update(None, "foreign_keys", "ON")
            .map_err(|e| self.err("cannot enable foreign keys", e))?;
        Ok(())
    }

    fn user_version(&self) -> Result<i64, StoreError> {
        self.conn()?
            .pragma_query_value(None, "user_version", |r| r.get(0))
            .map_err(|e| self.err("cannot read user_version", e))
    }

    /// Brings the schema to [`SCHEMA_VERSION`], applying the missing
    /// [`MIGRATIONS`] in order in one transaction. Returns the version found.
    pub fn migrate(&mut self) -> Result<i64, StoreError> {
        self.commit()?;
        let found = self.user_version()?;
        if found > SCHEMA_VERSION {
            return Err(StoreError::NewerSchema {
                path: self.path.clone(),
                found,
                known: SCHEMA_VERSION,
            });
        }
        if found == SCHEMA_VERSION {
            return Ok(found);
        }
        let path = self.path.clone();
        let tx = self
            .db
            .get_mut(&path)?
            .transaction()
            .map_err(|e| sql_err(&path, "cannot begin the migration", e))?;
        for sql in MIGRATIONS.iter().skip(usize::try_from(found).unwrap_or(0)) {
            tx.execute_batch(sql)
                .map_err(|e| sql_err(&path, "migration failed", e))?;
        }
        tx.pragma_update(None, "user_version", SCHEMA_VERSION)
            .map_err(|e| sql_err(&path, "cannot set user_version", e))?;
        tx.commit()
            .map_err(|e| sql_err(&path, "cannot commit the migration", e))?;
        Ok(found)
    }

    /// The file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The connection, for queries this API does not cover, with every
    /// row logged so far written to it (the batch's summaries wait to be
    /// written together, see [`Log::insert_frame`]).
    pub fn connection(&self) -> Result<&Connection, StoreError> {
        self.conn()
    }

    /// The connection, the batch's waiting summaries written first: the
    /// only way to it, so that no statement can see the log without them.
    fn conn(&self) -> Result<&Connection, StoreError> {
        self.db.get(&self.path)
    }

    // -- writing ----------------------------------------------------------

    /// Opens the batch transaction if none is open and counts one row.
    fn row(&mut self, host_ms: i64) -> Result<(), StoreError> {
        self.run_closed = false;
        match &mut self.pending {
            Some(n) => *n += 1,
            None => {
                self.conn()?
                    .execute_batch("BEGIN")
                    .map_err(|e| sql_err(&self.path, "cannot begin a batch", e))?;
                self.pending = Some(1);
                self.batch_started_ms = host_ms;
            }
        }
        Ok(())
    }

    fn after_row(&mut self) -> Result<(), StoreError> {
        if self.pending.is_some_and(|n| n >= self.batching.max_rows) {
            self.commit()?;
        }
        Ok(())
    }

    fn ord(&mut self, run: RunId) -> Result<i64, StoreError> {
        if self.ord_run != run {
            let max: Option<i64> = self
                .conn()?
                .query_row(
                    "SELECT max(m) FROM (SELECT max(ord) AS m FROM hellos WHERE run_id = ?1
                     UNION ALL SELECT max(ord) FROM summaries WHERE run_id = ?1
                     UNION ALL SELECT max(ord) FROM events WHERE run_id = ?1
                     UNION ALL SELECT max(ord) FROM replies WHERE run_id = ?1
                     UNION ALL SELECT max(ord) FROM link_errors WHERE run_id = ?1)",
                    [run],
                    |r| r.get(0),
                )
                .map_err(|e| self.err("cannot find the run's last row", e))?;
            self.next_ord = match max {
                None => 0,
                Some(m) => m.checked_add(1).ok_or_else(|| self.full_run(run, m))?,
            };
            self.ord_run = run;
        }
        let ord = self.next_ord;
        self.next_ord = ord.checked_add(1).ok_or_else(|| self.full_run(run, ord))?;
        Ok(ord)
    }

    /// Commits the open batch, if any, its waiting summaries written
    /// first. If one cannot be written the batch stays open, with every
    /// row that could be, and the error names it.
    pub fn commit(&mut self) -> Result<(), StoreError> {
        let conn = self.db.get(&self.path)?;
        if self.pending.take().is_some() {
            conn.execute_batch("COMMIT")
                .map_err(|e| sql_err(&self.path, "cannot commit a batch", e))?;
        }
        Ok(())
    }

    /// Commits the open batch if it began more than [`Batching::max_age_ms`]
    /// before `now_host_ms`.
    pub fn commit_if_due(&mut self, now_host_ms: i64) -> Result<(), StoreError> {
        if self.pending.is_some()
            && now_host_ms.saturating_sub(self.batch_started_ms) >= self.batching.max_age_ms
        {
            self.commit()?;
        }
        Ok(())
    }

    /// Starts a run from `source` (`serial:PATH`, `tcp:HOST:PORT`,
    /// `file:PATH`, `stdin`) and commits it at once.
    pub fn begin_run(&mut self, source: &str, started_host_ms: i64) -> Result<RunId, StoreError> {
        self.commit()?;
        self.conn()?
            .execute(
                "INSERT INTO runs (started_host_ms, source, tool_version) VALUES (?1, ?2, ?3)",
                params![started_host_ms, source, env!("CARGO_PKG_VERSION")],
            )
            .map_err(|e| self.err("cannot start a run", e))?;
        let id = self.conn()?.last_insert_rowid();
        self.run_closed = false;
        self.ord_run = id;
        self.next_ord = 0;
        Ok(id)
    }

    /// Ends `run` at `ended_host_ms` and commits everything.
    pub fn end_run(&mut self, run: RunId, ended_host_ms: i64) -> Result<(), StoreError> {
        self.commit()?;
        self.conn()?
            .execute(
                "UPDATE runs SET ended_host_ms = ?2 WHERE id = ?1",
                params![run, ended_host_ms],
            )
            .map_err(|e| self.err("cannot end the run", e))?;
        self.run_closed = true;
        Ok(())
    }

    /// Logs one frame of `run`, received at `host_ms`. Returns its `ord`.
    ///
    /// A Summary is written together with the next ones of the batch, in
    /// one statement, before any other statement runs on the log and
    /// before the batch commits. Should SQLite refuse it then, the call
    /// that wrote it (an insert, a commit, a read) returns
    /// [`StoreError::SummaryNotLogged`] naming it; an error from this call
    /// means `frame` itself was not logged.
    pub fn insert_frame(
        &mut self,
        run: RunId,
        host_ms: i64,
        frame: &Frame,
    ) -> Result<i64, StoreError> {
        self.row(host_ms)?;
        let ord = self.ord(run)?;
        let result = match frame {
            Frame::Hello(h) => self
                .conn()?
                .prepare_cached(INSERT_HELLO)
                .and_then(|mut st| {
                    let (a, b, c) = h.firmware_version;
                    let u = &h.uncertainty;
                    st.execute(params![
                        run,
                        ord,
                        host_ms,
                        heatbound::wire::PROTOCOL_VERSION,
                        h.rig_id.as_str(),
                        format!("{a}.{b}.{c}"),
                        h.sample_period_ms,
                        h.window_samples,
                        h.mode.as_str(),
                        f64::from(h.coverage_factor),
                        opt(h.ambient_k),
                        f64::from(u.hot_k),
                        f64::from(u.cold_k),
                        f64::from(u.heat_in_rel),
                        f64::from(u.work_rel),
                        f64::from(u.heat_out_rel),
                        h.config_digest,
                        h.run,
                        h.session,
                        h.last_counter,
                        h.keyed,
                        f64::from(u.hot2_k),
                        opt(h.losses.map(|(ua, _)| ua)),
                        opt(h.losses.map(|(_, u_ua)| u_ua)),
                    ])
                }),
            Frame::Summary(s) => {
                let row = batch::Waiting {
                    run,
                    ord,
                    host_ms,
                    summary: *s,
                };
                self.db.push(&self.path, row)?;
                self.after_row()?;
                return Ok(ord);
            }
            Frame::Event(e) => self
                .conn()?
                .prepare_cached(INSERT_EVENT)
                .and_then(|mut st| {
                    st.execute(params![
                        run,
                        ord,
                        host_ms,
                        e.seq,
                        e.event.t_ms,
                        e.event.rule.as_str(),
                        e.event.kind.as_str(),
                        e.event.severity.as_str(),
                        e.verdict.consistent.map(verdict_text),
                        e.verdict.suspect.map(Channel::name),
                    ])
                }),
            Frame::Reply(r) => self
                .conn()?
                .prepare_cached(INSERT_REPLY)
                .and_then(|mut st| {
                    st.execute(params![
                        run,
                        ord,
                        host_ms,
                        r.counter,
                        r.t_ms,
                        r.code.as_str()
                    ])
                }),
        };
        result.map_err(|e| self.err("cannot log a frame", e))?;
        self.after_row()?;
        Ok(ord)
    }

    /// Logs `count` losses of `kind` on `run` at `host_ms`. Returns the
    /// row's `ord`.
    pub fn insert_link_error(
        &mut self,
        run: RunId,
        host_ms: i64,
        kind: LinkErrorKind,
        count: u64,
        detail: &str,
    ) -> Result<i64, StoreError> {
        self.row(host_ms)?;
        let ord = self.ord(run)?;
        let count = i64::try_from(count).unwrap_or(i64::MAX);
        self.conn()?
            .prepare_cached(INSERT_LINK_ERROR)
            .and_then(|mut st| st.execute(params![run, ord, host_ms, kind.as_str(), count, detail]))
            .map_err(|e| self.err("cannot log a link error", e))?;
        self.after_row()?;
        Ok(ord)
    }

    /// Records that the link of `run` dropped at `host_ms`; commits at once.
    /// Returns the outage's id for [`Log::end_outage`].
    pub fn begin_outage(
        &mut self,
        run: RunId,
        host_ms: i64,
        reason: &str,
    ) -> Result<i64, StoreError> {
        self.commit()?;
        self.conn()?
            .execute(
                "INSERT INTO outages (run_id, started_host_ms, reason) VALUES (?1, ?2, ?3)",
                params![run, host_ms, reason],
            )
            .map_err(|e| self.err("cannot log an outage", e))?;
        Ok(self.conn()?.last_insert_rowid())
    }

    /// Records that the link came back at `host_ms`; commits at once.
    pub fn end_outage(&mut self, outage: i64, host_ms: i64) -> Result<(), StoreError> {
        self.commit()?;
        self.conn()?
            .execute(
                "UPDATE outages SET ended_host_ms = ?2 WHERE id = ?1",
                params![outage, host_ms],
            )
            .map_err(|e| self.err("cannot end an outage", e))?;
        Ok(())
    }

    /// Logs a command just sent on `run` at `host_ms`; commits at once, so
    /// an operator's action is on disk before its answer. Returns its id.
    #[allow(clippy::too_many_arguments)]
    pub fn insert_command(
        &mut self,
        run: RunId,
        host_ms: i64,
        origin: &str,
        command: &str,
        detail: &str,
        counter: u32,
        session: u32,
        sealed: &[u8],
    ) -> Result<i64, StoreError> {
        self.commit()?;
        self.conn()?
            .execute(
                "INSERT INTO commands (run_id, host_ms, origin, command, detail, counter, session,
                 sealed, outcome) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, 'pending')",
                params![
                    run, host_ms, origin, command, detail, counter, session, sealed
                ],
            )
            .map_err(|e| self.err("cannot log a command", e))?;
        Ok(self.conn()?.last_insert_rowid())
    }

    /// Records the controller's answer to command `id` (or, with `reply`
    /// `None`, that none came in time); commits at once.
    pub fn settle_command(
        &mut self,
        id: i64,
        host_ms: i64,
        reply: Option<ReplyCode>,
    ) -> Result<(), StoreError> {
        self.settle_command_as(id, host_ms, reply, None)
    }

    /// [`Log::settle_command`], with the outcome named when it is not the
    /// reply's (`not_sent`: the link failed while writing it).
    pub fn settle_command_as(
        &mut self,
        id: i64,
        host_ms: i64,
        reply: Option<ReplyCode>,
        outcome: Option<&str>,
    ) -> Result<(), StoreError> {
        self.commit()?;
        let outcome = outcome.unwrap_or(match reply {
            Some(ReplyCode::Applied) => "applied",
            Some(_) => "rejected",
            None => "no_reply",
        });
        self.conn()?
            .execute(
                "UPDATE commands SET reply_host_ms = ?2, reply_code = ?3, outcome = ?4 WHERE id = ?1",
                params![
                    id,
                    reply.map(|_| host_ms),
                    reply.map(|c| c.as_str()),
                    outcome
                ],
            )
            .map_err(|e| self.err("cannot log a command's reply", e))?;
        Ok(())
    }

    /// The commands sent on `run`, oldest first (none in a log older than
    /// schema version 3).
    pub fn commands(&self, run: RunId) -> Result<Vec<CommandRow>, StoreError> {
        if self.schema < 3 {
            return Ok(Vec::new());
        }
        let mut st = self
            .conn()?
            .prepare(
                "SELECT id, host_ms, origin, command, detail, counter, session, reply_host_ms,
                 reply_code, outcome, sealed FROM commands WHERE run_id = ?1 ORDER BY id",
            )
            .map_err(|e| self.err("cannot read commands", e))?;
        let rows = st
            .query_map(params![run], |r| {
                let code: Option<String> = r.get(8)?;
                Ok(CommandRow {
                    id: r.get(0)?,
                    host_ms: r.get(1)?,
                    origin: r.get(2)?,
                    command: r.get(3)?,
                    detail: r.get(4)?,
                    counter: r.get(5)?,
                    session: r.get(6)?,
                    reply_host_ms: r.get(7)?,
                    reply_code: code.as_deref().and_then(ReplyCode::parse),
                    outcome: r.get(9)?,
                    sealed: r.get(10)?,
                })
            })
            .and_then(|rows| rows.collect::<Result<Vec<_>, _>>())
            .map_err(|e| self.err("cannot read commands", e))?;
        Ok(rows)
    }

    /// Logs an operator's action that sent nothing to the controller.
    pub fn insert_operator_action(
        &mut self,
        run: RunId,
        host_ms: i64,
        origin: &str,
        action: &str,
        detail: &str,
    ) -> Result<(), StoreError> {
        self.row(host_ms)?;
        self.conn()?
            .prepare_cached(
                "INSERT INTO operator_actions (run_id, host_ms, origin, action, detail)
                 VALUES (?1, ?2, ?3, ?4, ?5)",
            )
            .and_then(|mut st| st.execute(params![run, host_ms, origin, action, detail]))
            .map_err(|e| self.err("cannot log an operator action", e))?;
        self.after_row()
    }

    // -- reading ----------------------------------------------------------

    /// Every run, oldest first.
    pub fn runs(&self) -> Result<Vec<RunInfo>, StoreError> {
        let mut st = self
            .conn()?
            .prepare(
                "SELECT id, started_host_ms, source, tool_version, ended_host_ms,
                 (SELECT count(*) FROM summaries s WHERE s.run_id = runs.id)
                 FROM runs ORDER BY id",
            )
            .map_err(|e| self.err("cannot list runs", e))?;
        let rows = st
            .query_map([], |r| {
                Ok(RunInfo {
                    id: r.get(0)?,
                    started_host_ms: r.get(1)?,
                    source: r.get(2)?,
                    tool_version: r.get(3)?,
                    ended_host_ms: r.get(4)?,
                    summaries: r.get::<_, i64>(5)?.try_into().unwrap_or(0),
                })
            })
            .and_then(|rows| rows.collect::<Result<Vec<_>, _>>())
            .map_err(|e| self.err("cannot list runs", e))?;
        Ok(rows)
    }

    /// The frames of `run` in receive order: Hellos, Summaries, Events and
    /// Replies interleaved as they arrived, each rebuilt exactly as decoded.
    /// Reads in pages, so memory does not grow with the run.
    ///
    /// A summary's mode is its own (schema version 5 on). A row written
    /// before has none: it takes the mode of the run's latest Hello before
    /// it, or of the run's first Hello when none came before it, or
    /// `engine` when the run has no Hello. Rows written before
    /// schema version 5 read with the defaults of what they lack: the
    /// hot-side integrals 0, no verdict, `u_hot2_k` the configuration's
    /// default, no configured UA.
    pub fn frames(
        &self,
        run: RunId,
    ) -> Result<impl Iterator<Item = Result<Stored, StoreError>> + '_, StoreError> {
        Ok(FramesIter {
            log: self,
            run,
            after_ord: -1,
            page: VecDeque::new(),
            done: false,
        })
    }

    fn frames_page(&self, run: RunId, after_ord: i64) -> Result<Vec<PageRow>, StoreError> {
        let mut st = self
            .conn()?
            .prepare_cached(&select_frames(self.schema))
            .map_err(|e| self.err("cannot read frames", e))?;
        let rows = st
            .query_map(params![run, after_ord, FRAMES_PAGE], |r| {
                let ord: i64 = r.get(0)?;
                Ok((ord, self.frame_row(run, ord, r)))
            })
            .and_then(|rows| rows.collect::<Result<Vec<_>, _>>())
            .map_err(|e| self.err("cannot read frames", e))?;
        Ok(rows)
    }

    /// Rebuilds one row of [`select_frames`]; `Err` of rusqlite are column
    /// type errors, mapped to [`StoreError::BadRow`].
    fn frame_row(&self, run: RunId, ord: i64, r: &Row<'_>) -> Result<Stored, StoreError> {
        let kind: i64 = r.get(2).map_err(|e| self.bad(run, "frames", ord, e))?;
        let host_ms: i64 = r.get(1).map_err(|e| self.bad(run, "frames", ord, e))?;
        let frame = match kind {
            0 => Frame::Hello(self.hello_row(run, ord, r)?),
            1 => Frame::Summary(summary_row(r, self.schema).map_err(|e| match e {
                RowError::Sql(e) => self.bad(run, "summaries", ord, e),
                RowError::Value {
                    column,
                    value,
                    why,
                    also,
                } => StoreError::ImpossibleValue(Box::new(Impossible {
                    path: self.path.clone(),
                    run_id: run,
                    table: "summaries",
                    ord,
                    seq: r.get(3).ok(),
                    t_ms: r.get(4).ok(),
                    column,
                    value,
                    why,
                    also,
                })),
            })?),
            2 => Frame::Event(self.event_row(run, ord, r)?),
            _ => Frame::Reply(self.reply_row(run, ord, r)?),
        };
        Ok(Stored { host_ms, frame })
    }

    fn bad(&self, run_id: RunId, table: &'static str, ord: i64, e: impl ToString) -> StoreError {
        StoreError::BadRow {
            path: self.path.clone(),
            run_id,
            table,
            ord,
            reason: e.to_string(),
        }
    }

    fn hello_row(&self, run: RunId, ord: i64, r: &Row<'_>) -> Result<Hello, StoreError> {
        let bad = |e: &dyn std::fmt::Display| self.bad(run, "hellos", ord, e);
        /// The REAL columns of a Hello row, by their index in the select.
        fn real(i: usize) -> &'static str {
            match i {
                9 => "coverage_factor",
                10 => "ambient_k",
                11 => "u_hot_k",
                12 => "u_cold_k",
                13 => "u_heat_in_rel",
                14 => "u_work_rel",
                15 => "u_heat_out_rel",
                21 => "u_hot2_k",
                22 => "ua_w_per_k",
                23 => "u_ua_w_per_k",
                _ => "?",
            }
        }
        let impossible = |i: usize, e: RowError| match e {
            RowError::Sql(e) => bad(&e),
            RowError::Value {
                value, why, also, ..
            } => StoreError::ImpossibleValue(Box::new(Impossible {
                path: self.path.clone(),
                run_id: run,
                table: "hellos",
                ord,
                seq: None,
                t_ms: None,
                column: real(i),
                value,
                why,
                also,
            })),
        };
        let checked = |i: usize| -> Result<Option<f32>, StoreError> {
            r.get::<_, Option<f64>>(i)
                .map_err(|e| bad(&e))?
                .map(|x| exact_f32("", x).map_err(|e| impossible(i, e)))
                .transpose()
        };
        let need = |i: usize| -> Result<f32, StoreError> {
            checked(i)?.ok_or_else(|| bad(&format!("{} is NULL", real(i))))
        };
        let rig: String = r.get(4).map_err(|e| bad(&e))?;
        let fw: String = r.get(5).map_err(|e| bad(&e))?;
        let mode: String = r.get(8).map_err(|e| bad(&e))?;
        let Ok(rig_id) = RigId::new(&rig) else {
            return Err(bad(&format!("bad rig_id {rig:?}")));
        };
        let firmware_version =
            parse_version(&fw).ok_or_else(|| bad(&format!("bad firmware_version {fw:?}")))?;
        let mode = parse_mode(&mode).ok_or_else(|| bad(&format!("bad mode {mode:?}")))?;
        let u = Uncertainties {
            hot_k: need(11)?,
            cold_k: need(12)?,
            heat_in_rel: need(13)?,
            work_rel: need(14)?,
            heat_out_rel: need(15)?,
            // NULL in rows written before schema version 5, which had no
            // second hot sensor: the configuration's default.
            #[allow(clippy::cast_possible_truncation)]
            hot2_k: checked(21)?.unwrap_or(Uncertainty::default().hot2_k as f32),
        };
        let coverage_factor = need(9)?;
        let ambient_k = checked(10)?;
        let losses = match (checked(22)?, checked(23)?) {
            (Some(ua), Some(u_ua)) => Some((ua, u_ua)),
            (None, None) => None,
            (Some(_), None) => return Err(bad(&"u_ua_w_per_k is NULL but ua_w_per_k is not")),
            (None, Some(_)) => return Err(bad(&"ua_w_per_k is NULL but u_ua_w_per_k is not")),
        };
        (|| {
            Ok::<_, rusqlite::Error>(Hello {
                rig_id,
                firmware_version,
                sample_period_ms: r.get(6)?,
                window_samples: r.get(7)?,
                mode,
                coverage_factor,
                ambient_k,
                uncertainty: u,
                losses,
                config_digest: r.get(16)?,
                run: r.get(17)?,
                session: r.get(18)?,
                last_counter: r.get(19)?,
                keyed: r.get(20)?,
            })
        })()
        .map_err(|e| bad(&e))
    }

    fn reply_row(&self, run: RunId, ord: i64, r: &Row<'_>) -> Result<Reply, StoreError> {
        let bad = |e: &dyn std::fmt::Display| self.bad(run, "replies", ord, e);
        let counter: u32 = r.get(3).map_err(|e| bad(&e))?;
        let t_ms: u32 = r.get(4).map_err(|e| bad(&e))?;
        let code: String = r.get(5).map_err(|e| bad(&e))?;
        Ok(Reply {
            counter,
            t_ms,
            code: ReplyCode::parse(&code).ok_or_else(|| bad(&format!("bad code {code:?}")))?,
        })
    }

    fn event_row(&self, run: RunId, ord: i64, r: &Row<'_>) -> Result<EventFrame, StoreError> {
        let bad = |e: &dyn std::fmt::Display| self.bad(run, "events", ord, e);
        let seq: u16 = r.get(3).map_err(|e| bad(&e))?;
        let t_ms: u32 = r.get(4).map_err(|e| bad(&e))?;
        let rule: String = r.get(5).map_err(|e| bad(&e))?;
        let kind: String = r.get(6).map_err(|e| bad(&e))?;
        let severity: String = r.get(7).map_err(|e| bad(&e))?;
        let verdict: Option<String> = r.get(8).map_err(|e| bad(&e))?;
        let suspect: Option<String> = r.get(9).map_err(|e| bad(&e))?;
        let verdict = read_verdict(verdict.as_deref(), suspect.as_deref(), None)
            .map_err(|(column, value, why)| bad(&format!("{column} = {value}: {why}")))?;
        Ok(EventFrame {
            seq,
            event: Event {
                t_ms,
                rule: RuleId::parse(&rule).ok_or_else(|| bad(&format!("bad rule {rule:?}")))?,
                kind: parse_event_kind(&kind).ok_or_else(|| bad(&format!("bad kind {kind:?}")))?,
                severity: parse_severity(&severity)
                    .ok_or_else(|| bad(&format!("bad severity {severity:?}")))?,
            },
            verdict,
        })
    }

    /// The link errors of `run`, in order. A row with an unknown kind or a
    /// negative count is an error ([`StoreError::BadRow`]).
    pub fn link_errors(&self, run: RunId) -> Result<Vec<LinkErrorRow>, StoreError> {
        self.link_error_rows(run)?.into_iter().collect()
    }

    /// The link errors of `run`, in order, each row checked on its own: a
    /// row with an unknown kind or a negative count is an `Err` in its
    /// place, so that a reader can report it and go on.
    pub fn link_error_rows(
        &self,
        run: RunId,
    ) -> Result<Vec<Result<LinkErrorRow, StoreError>>, StoreError> {
        let mut st = self
            .conn()?
            .prepare(
                "SELECT ord, host_ms, kind, count, detail FROM link_errors
                 WHERE run_id = ?1 ORDER BY ord",
            )
            .map_err(|e| self.err("cannot read link errors", e))?;
        let rows = st
            .query_map([run], |r| {
                Ok((
                    r.get::<_, i64>(0)?,
                    r.get::<_, i64>(1)?,
                    r.get::<_, String>(2)?,
                    r.get::<_, i64>(3)?,
                    r.get::<_, String>(4)?,
                ))
            })
            .and_then(|rows| rows.collect::<Result<Vec<_>, _>>())
            .map_err(|e| self.err("cannot read link errors", e))?;
        Ok(rows
            .into_iter()
            .map(|(ord, host_ms, kind, count, detail)| {
                let kind = LinkErrorKind::parse(&kind).ok_or_else(|| {
                    self.bad(run, "link_errors", ord, format!("bad kind {kind:?}"))
                })?;
                let count = u64::try_from(count).map_err(|_| {
                    self.bad(
                        run,
                        "link_errors",
                        ord,
                        format!("count {count} is negative"),
                    )
                })?;
                Ok(LinkErrorRow {
                    ord,
                    host_ms,
                    kind,
                    count,
                    detail,
                })
            })
            .collect())
    }

    /// The outages of `run`, in order.
    pub fn outages(&self, run: RunId) -> Result<Vec<OutageRow>, StoreError> {
        let mut st = self
            .conn()?
            .prepare(
                "SELECT id, started_host_ms, ended_host_ms, reason FROM outages
                 WHERE run_id = ?1 ORDER BY started_host_ms, id",
            )
            .map_err(|e| self.err("cannot read outages", e))?;
        st.query_map([run], |r| {
            Ok(OutageRow {
                id: r.get(0)?,
                started_host_ms: r.get(1)?,
                ended_host_ms: r.get(2)?,
                reason: r.get(3)?,
            })
        })
        .and_then(|rows| rows.collect::<Result<Vec<_>, _>>())
        .map_err(|e| self.err("cannot read outages", e))
    }
}

impl Drop for Log {
    fn drop(&mut self) {
        // Best effort: an error here has nowhere to go, and WAL keeps every
        // earlier batch either way. The commit writes the waiting summaries.
        let _ = self.commit();
        if self.run_closed {
            // A cleanly closed log goes back to a rollback journal, so that a
            // read-only reader (audit, chart) needs no `-wal`/`-shm` files and
            // leaves none. Fails harmlessly (stays WAL) while another
            // connection has the file open; the next writer switches to WAL.
            if let Ok(conn) = self.conn() {
                let _ = conn.pragma_update_and_check(None, "journal_mode", "DELETE", |r| {
                    r.get::<_, String>(0)
                });
            }
        }
    }
}

/// Pages through [`select_frames`].
struct FramesIter<'a> {
    log: &'a Log,
    run: RunId,
    after_ord: i64,
    page: VecDeque<Result<Stored, StoreError>>,
    done: bool,
}

impl Iterator for FramesIter<'_> {
    type Item = Result<Stored, StoreError>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.page.is_empty() && !self.done {
            match self.log.frames_page(self.run, self.after_ord) {
                Ok(rows) => {
                    self.done = (rows.len() as i64) < FRAMES_PAGE;
                    if let Some((last, _)) = rows.last() {
                        self.after_ord = *last;
                    }
                    self.page.extend(rows.into_iter().map(|(_, r)| r));
                }
                Err(e) => {
                    self.done = true;
                    return Some(Err(e));
                }
            }
        }
        self.page.pop_front()
    }
}

fn sql_err(path: &Path, what: &'static str, source: rusqlite::Error) -> StoreError {
    StoreError::Sqlite {
        path: path.to_path_buf(),
        what,
        source,
    }
}

/// Why a stored row cannot be the frame it claims to be.
enum RowError {
    /// A column of the wrong type or range (SQLite's own check).
    Sql(rusqlite::Error),
    /// A value no frame can hold (the first), and any further ones as
    /// `column = value: why`.
    Value {
        column: &'static str,
        value: String,
        why: &'static str,
        also: Vec<String>,
    },
}

impl From<rusqlite::Error> for RowError {
    fn from(e: rusqlite::Error) -> Self {
        RowError::Sql(e)
    }
}

/// The summary columns 5..=19 of [`select_frames`], in order. `hot_mean_k`,
/// `performance` and `bound` are checked like the others but not read: a
/// [`Summary`] recomputes them from its integrals.
const SUMMARY_REALS: [&str; 15] = [
    "duration_s",
    "heat_in_j",
    "work_j",
    "heat_out_j",
    "entropy_in_j_per_k",
    "entropy_out_j_per_k",
    "hot_mean_k",
    "ambient_k",
    "performance",
    "bound",
    "entropy_rate_w_per_k",
    "u_performance",
    "u_bound",
    "u_margin",
    "u_entropy_rate_w_per_k",
];

/// The summary columns 23..=25 of [`select_frames`] (schema version 5), in
/// order.
const SUMMARY_REALS_V5: [&str; 3] = [
    "hot_temperature_integral_k_s",
    "hot_pair_integral_k_s",
    "suspect_bias",
];

/// `x` as the f32 it must be: the log widens each f32 to f64 exactly, so a
/// value that is not finite or not exactly an f32 was not written by it.
/// Never narrows silently.
fn exact_f32(column: &'static str, x: f64) -> Result<f32, RowError> {
    // The cast rounds, or saturates to an infinity; the comparison below
    // rejects every value the cast changed.
    #[allow(clippy::cast_possible_truncation)]
    let n = x as f32;
    if !x.is_finite() {
        return Err(RowError::Value {
            column,
            value: format!("{x}"),
            why: "not a finite number",
            also: Vec::new(),
        });
    }
    if f64::from(n) != x {
        return Err(RowError::Value {
            column,
            value: format!("{x:e}"),
            why: if x.abs() > f64::from(f32::MAX) {
                "outside the f32 range a frame carries"
            } else {
                "not an f32 value, so not written by the logger"
            },
            also: Vec::new(),
        });
    }
    Ok(n)
}

/// One impossible value of a row: column, value as text, why.
type BadValue = (&'static str, String, &'static str);

/// Rebuilds a summary row of [`select_frames`] of a log of schema version
/// `schema`: rows before version 5 keep the stale bit in bit 5 of
/// `faults` (an unmigrated log read as it is), rows since in bit 7.
fn summary_row(r: &Row<'_>, schema: i64) -> Result<Summary, RowError> {
    let legacy = schema < 5;
    let (status_defined, fault_channels, fault_stale) = if legacy {
        (STATUS_V4_DEFINED, FAULT_CHANNELS_V4, FAULT_STALE_V4)
    } else {
        (STATUS_DEFINED, FAULT_CHANNELS, FAULT_STALE)
    };
    let status: u8 = r.get(20)?;
    let faults: u8 = r.get(21)?;
    let alarms: u8 = r.get(22)?;
    let verdict: Option<String> = r.get(26)?;
    let suspect: Option<String> = r.get(27)?;
    let mode: Option<String> = r.get(28)?;
    // Every impossible value of the row, so that the report names them all.
    let mut bad: Vec<BadValue> = Vec::new();
    let mut reals = [0.0f32; 15];
    let mut present = [false; 15];
    for (i, name) in SUMMARY_REALS.into_iter().enumerate() {
        match r.get::<_, Option<f64>>(i + 5)?.map(|x| exact_f32(name, x)) {
            None => {}
            Some(Ok(x)) => (reals[i], present[i]) = (x, true),
            Some(Err(RowError::Value {
                column, value, why, ..
            })) => bad.push((column, value, why)),
            Some(Err(e)) => return Err(e),
        }
    }
    let mut reals_v5 = [None; 3];
    for (i, name) in SUMMARY_REALS_V5.into_iter().enumerate() {
        match r.get::<_, Option<f64>>(i + 23)?.map(|x| exact_f32(name, x)) {
            None => {}
            Some(Ok(x)) => reals_v5[i] = Some(x),
            Some(Err(RowError::Value {
                column, value, why, ..
            })) => bad.push((column, value, why)),
            Some(Err(e)) => return Err(e),
        }
    }
    let [hot_integral, pair_integral, bias] = reals_v5;
    for (column, value, undefined) in [
        ("status", status, status & !status_defined != 0),
        (
            "faults",
            faults,
            faults & !(fault_channels | fault_stale) != 0,
        ),
        ("alarms", alarms, u32::from(alarms) >> RuleId::COUNT != 0),
    ] {
        if undefined {
            bad.push((column, format!("{value:#04x}"), "undefined bits set"));
        }
    }
    let hot2_measured = status & STATUS_HOT2_MEASURED != 0;
    if hot2_measured && pair_integral.is_none() {
        bad.push((
            "hot_pair_integral_k_s",
            "NULL".to_string(),
            "missing although status bit 4 (hot2 measured) is set",
        ));
    }
    let verdict = read_verdict(verdict.as_deref(), suspect.as_deref(), bias)
        .map_err(|b| bad.push(b))
        .unwrap_or_default();
    let mode = match mode.as_deref() {
        None => Mode::Engine,
        Some(text) => parse_mode(text).unwrap_or_else(|| {
            bad.push((
                "mode (the summary's, or for a row before version 5 its run's Hello's)",
                format!("{text:?}"),
                "not a mode, so the summary's figures cannot be read",
            ));
            Mode::Engine
        }),
    };
    let mut bad = bad.into_iter();
    if let Some((column, value, why)) = bad.next() {
        return Err(RowError::Value {
            column,
            value,
            why,
            also: bad.map(|(c, v, w)| format!("{c} = {v}: {w}")).collect(),
        });
    }
    let need = |i: usize| -> Result<f32, RowError> {
        if present[i] {
            Ok(reals[i])
        } else {
            // A NOT NULL column: SQLite itself reports the NULL.
            r.get::<_, f64>(i + 5)?;
            Ok(0.0)
        }
    };
    let o = |i: usize| present[i].then_some(reals[i]);
    Ok(Summary {
        seq: r.get(3)?,
        t_ms: r.get(4)?,
        duration_s: need(0)?,
        heat_in_j: need(1)?,
        work_j: need(2)?,
        heat_out_j: need(3)?,
        entropy_in_j_per_k: need(4)?,
        entropy_out_j_per_k: need(5)?,
        // 6 hot_mean_k, 8 performance and 9 bound are recomputed.
        hot_temperature_integral_k_s: hot_integral.unwrap_or(0.0),
        hot_pair_integral_k_s: pair_integral.unwrap_or(0.0),
        ambient_k: o(7),
        entropy_rate_w_per_k: o(10),
        u_performance: o(11),
        u_bound: o(12),
        u_margin: o(13),
        u_entropy_rate_w_per_k: o(14),
        status: Status {
            steady: status & STATUS_STEADY != 0,
            heat_out_measured: status & STATUS_HEAT_OUT_MEASURED != 0,
            trip_active: status & STATUS_TRIP_ACTIVE != 0,
            any_fault: status & STATUS_ANY_FAULT != 0,
            hot2_measured,
            mode,
        },
        faults: FaultBits {
            channels: faults & fault_channels,
            stale: faults & fault_stale != 0,
        },
        alarms,
        verdict,
    })
}

/// The text stored in `verdict` for `consistent`.
fn verdict_text(consistent: bool) -> &'static str {
    if consistent {
        "consistent"
    } else {
        "inconsistent"
    }
}

/// The verdict stored as `verdict`, `suspect` (a [`Channel::name`]) and
/// `bias`, checked as the wire checks it: a suspect only with an
/// inconsistent verdict, a bias only with a suspect.
fn read_verdict(
    verdict: Option<&str>,
    suspect: Option<&str>,
    bias: Option<f32>,
) -> Result<Verdict, BadValue> {
    let consistent = match verdict {
        None => None,
        Some("consistent") => Some(true),
        Some("inconsistent") => Some(false),
        Some(text) => {
            return Err((
                "verdict",
                format!("{text:?}"),
                "not a verdict ('consistent', 'inconsistent' or NULL)",
            ));
        }
    };
    let suspect = match suspect {
        None => None,
        Some(text) => match Channel::ALL.into_iter().find(|c| c.name() == text) {
            Some(c) if consistent == Some(false) => Some(c),
            Some(_) => {
                return Err((
                    "suspect",
                    format!("{text:?}"),
                    "a suspect without an inconsistent verdict",
                ));
            }
            None => {
                return Err(("suspect", format!("{text:?}"), "not a channel name"));
            }
        },
    };
    if let (Some(b), None) = (bias, suspect) {
        return Err(("suspect_bias", format!("{b}"), "a bias without a suspect"));
    }
    Ok(Verdict {
        consistent,
        suspect,
        bias,
    })
}

/// `summaries.status` bit 0: steady.
pub const STATUS_STEADY: u8 = 1 << 0;
/// `summaries.status` bit 1: heat out measured.
pub const STATUS_HEAT_OUT_MEASURED: u8 = 1 << 1;
/// `summaries.status` bit 2: trip output active.
pub const STATUS_TRIP_ACTIVE: u8 = 1 << 2;
/// `summaries.status` bit 3: some channel faulty.
pub const STATUS_ANY_FAULT: u8 = 1 << 3;
/// `summaries.status` bit 4 (schema version 5): a second hot-side sensor
/// is read.
pub const STATUS_HOT2_MEASURED: u8 = 1 << 4;
/// The defined bits of `summaries.status`. The mode (wire bits 5–6) is not
/// stored: it is the run's Hello's (see [`Log::frames`]).
const STATUS_DEFINED: u8 = STATUS_V4_DEFINED | STATUS_HOT2_MEASURED;
/// The defined bits of `summaries.status` before schema version 5.
const STATUS_V4_DEFINED: u8 =
    STATUS_STEADY | STATUS_HEAT_OUT_MEASURED | STATUS_TRIP_ACTIVE | STATUS_ANY_FAULT;
/// `summaries.faults` bits 0–5: the faulty channels, bit = [`Channel::bit`]
/// (bit 5: hot2).
pub const FAULT_CHANNELS: u8 = 0x3F;
/// `summaries.faults` bit 7: stale (schema version 5; bit 5 before).
pub const FAULT_STALE: u8 = 1 << 7;
/// `summaries.faults` bits 0–4 before schema version 5: the faulty channels.
pub const FAULT_CHANNELS_V4: u8 = 0x1F;
/// `summaries.faults` bit 5 before schema version 5: stale.
pub const FAULT_STALE_V4: u8 = 1 << 5;

/// The status byte as stored: the wire's bits 0–4 (docs/wire-format.md
/// §3.2), without the mode.
pub fn status_bits(s: &Status) -> u8 {
    let mut b = 0;
    for (on, bit) in [
        (s.steady, STATUS_STEADY),
        (s.heat_out_measured, STATUS_HEAT_OUT_MEASURED),
        (s.trip_active, STATUS_TRIP_ACTIVE),
        (s.any_fault, STATUS_ANY_FAULT),
        (s.hot2_measured, STATUS_HOT2_MEASURED),
    ] {
        if on {
            b |= bit;
        }
    }
    b
}

/// The faults byte as stored since schema version 5: as on the wire
/// (docs/wire-format.md §3.2), channel bits 0–5 and stale bit 7.
pub fn fault_bits(f: &FaultBits) -> u8 {
    (f.channels & FAULT_CHANNELS) | if f.stale { FAULT_STALE } else { 0 }
}

fn parse_version(text: &str) -> Option<(u8, u8, u8)> {
    let mut it = text.split('.').map(str::parse::<u8>);
    let v = (it.next()?.ok()?, it.next()?.ok()?, it.next()?.ok()?);
    it.next().is_none().then_some(v)
}

fn parse_mode(text: &str) -> Option<Mode> {
    [Mode::Engine, Mode::HeatPump, Mode::Cooler]
        .into_iter()
        .find(|m| m.as_str() == text)
}

fn parse_event_kind(text: &str) -> Option<EventKind> {
    [
        EventKind::Raised,
        EventKind::Cleared,
        EventKind::Acknowledged,
    ]
    .into_iter()
    .find(|k| k.as_str() == text)
}

fn parse_severity(text: &str) -> Option<Severity> {
    [Severity::Advisory, Severity::Warning, Severity::Trip]
        .into_iter()
        .find(|s| s.as_str() == text)
}
