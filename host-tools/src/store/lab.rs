//! What the lab adds to a log (schema version 6): the log's own id, the
//! broker's acknowledgements of a publishing `watch`, and a collecting
//! `lab`'s sources.
//!
//! ```text
//! watch log: runs --publications (run, acked_ord)--> what is still to publish after a restart
//! lab log:   runs.rig + lab_sources (rig, log id, source run --> run, last ord, counts)
//! ```
use rusqlite::{OptionalExtension as _, params};

use super::{FRAMES_PAGE, LinkErrorKind, LinkErrorRow, Log, RunId, StoreError, Stored};

/// One published run of a watch log.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Publication {
    /// The run.
    pub run: RunId,
    /// Every row of the run up to this `ord` was acknowledged by the
    /// broker (−1: none yet).
    pub acked_ord: i64,
    /// The run's last row (−1: none).
    pub last_ord: i64,
    /// When the run ended, if its writer closed it.
    pub ended_host_ms: Option<i64>,
}

/// Where a lab run's rows come from: a rig, the log that recorded them
/// (its [`Log::log_id`]) and that log's run.
#[derive(Clone, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct SourceKey {
    /// The rig id.
    pub rig: String,
    /// The source log's id.
    pub log_id: i64,
    /// The run in the source log.
    pub source_run: i64,
}

/// A row of `lab_sources`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LabSource {
    /// Where the rows come from.
    pub key: SourceKey,
    /// The lab run they go to.
    pub run_id: RunId,
    /// The last source row taken (−1: none).
    pub last_ord: i64,
    /// Rows received again and dropped.
    pub duplicates: i64,
    /// Rows that arrived after a gap was asked for again.
    pub recovered: i64,
    /// Rows given up as lost in transit.
    pub lost: i64,
}

/// A row a publishing watch sends: a frame, or a loss the lab cannot see
/// for itself.
#[derive(Clone, Debug, PartialEq)]
pub enum Record {
    /// A frame as received.
    Frame(Stored),
    /// A `link_errors` row of a kind only the receiving host can see
    /// ([`carried`]).
    Loss(LinkErrorRow),
}

/// Whether a `link_errors` row of `kind` travels to the lab: the decoder's
/// losses and the controller's replays happened on the rig's link, where
/// only its `watch` saw them. Gaps, duplicates and restarts are not sent:
/// the lab derives them again from the frames.
pub fn carried(kind: LinkErrorKind) -> bool {
    !matches!(
        kind,
        LinkErrorKind::Gap | LinkErrorKind::Duplicate | LinkErrorKind::Restart
    )
}

impl Log {
    /// A log that is no file: holds no run and takes no rows. Stands in
    /// for the real one while another user has it (the lab's ingests).
    pub fn detached() -> Result<Log, StoreError> {
        let path = std::path::Path::new(":memory:");
        let conn = rusqlite::Connection::open_in_memory()
            .map_err(|e| super::sql_err(path, "cannot open", e))?;
        Ok(Log::from_conn(conn, path, super::Batching::default()))
    }

    /// This log's id: random, made once when the log was created (or
    /// migrated to version 6), so that a lab tells two bench PCs apart.
    pub fn log_id(&self) -> Result<i64, StoreError> {
        self.conn()?
            .query_row("SELECT id FROM log_identity LIMIT 1", [], |r| r.get(0))
            .map_err(|e| self.err("cannot read the log's id", e))
    }

    /// Starts publishing `run` to `broker`, if it is not already; commits.
    pub fn begin_publication(
        &mut self,
        run: RunId,
        broker: &str,
        host_ms: i64,
    ) -> Result<(), StoreError> {
        self.commit()?;
        self.conn()?
            .execute(
                "INSERT OR IGNORE INTO publications (run_id, broker, acked_ord, updated_host_ms)
                 VALUES (?1, ?2, -1, ?3)",
                params![run, broker, host_ms],
            )
            .map_err(|e| self.err("cannot record a publication", e))?;
        Ok(())
    }

    /// Records that the broker acknowledged every row of `run` up to
    /// `acked_ord`. Never moves backwards.
    pub fn set_published(
        &mut self,
        run: RunId,
        acked_ord: i64,
        host_ms: i64,
    ) -> Result<(), StoreError> {
        self.conn()?
            .execute(
                "UPDATE publications SET acked_ord = ?2, updated_host_ms = ?3
                 WHERE run_id = ?1 AND acked_ord < ?2",
                params![run, acked_ord, host_ms],
            )
            .map_err(|e| self.err("cannot record what the broker acknowledged", e))?;
        Ok(())
    }

    /// The runs published to `broker` whose rows, or whose end record, the
    /// broker has not yet acknowledged, oldest first (and, if given, `also`, whatever its
    /// state).
    pub fn publications(
        &self,
        broker: &str,
        also: Option<RunId>,
    ) -> Result<Vec<Publication>, StoreError> {
        let mut st = self
            .conn()?
            .prepare(
                "SELECT p.run_id, p.acked_ord, r.ended_host_ms,
                    (SELECT max(m) FROM (
                        SELECT max(ord) AS m FROM hellos WHERE run_id = p.run_id
                        UNION ALL SELECT max(ord) FROM summaries WHERE run_id = p.run_id
                        UNION ALL SELECT max(ord) FROM events WHERE run_id = p.run_id
                        UNION ALL SELECT max(ord) FROM replies WHERE run_id = p.run_id
                        UNION ALL SELECT max(ord) FROM link_errors WHERE run_id = p.run_id))
                 FROM publications p JOIN runs r ON r.id = p.run_id
                 WHERE p.broker = ?1 ORDER BY p.run_id",
            )
            .map_err(|e| self.err("cannot read the publications", e))?;
        let rows = st
            .query_map([broker], |r| {
                Ok(Publication {
                    run: r.get(0)?,
                    acked_ord: r.get(1)?,
                    ended_host_ms: r.get(2)?,
                    last_ord: r.get::<_, Option<i64>>(3)?.unwrap_or(-1),
                })
            })
            .and_then(|rows| rows.collect::<Result<Vec<_>, _>>())
            .map_err(|e| self.err("cannot read the publications", e))?;
        Ok(rows
            .into_iter()
            // Done once the run's end record (ord = last + 1) is acknowledged.
            .filter(|p| p.acked_ord <= p.last_ord || Some(p.run) == also)
            .collect())
    }

    /// When `run` ended, if its writer closed it.
    pub fn run_ended(&self, run: RunId) -> Result<Option<i64>, StoreError> {
        self.conn()?
            .query_row("SELECT ended_host_ms FROM runs WHERE id = ?1", [run], |r| {
                r.get(0)
            })
            .optional()
            .map(Option::flatten)
            .map_err(|e| self.err("cannot read a run", e))
    }

    /// Up to `limit` rows of `run` after `after_ord` that a publishing
    /// watch sends (frames, and the losses [`carried`]), in order, each
    /// with its `ord`. Only committed rows are seen by another connection.
    pub fn records_after(
        &self,
        run: RunId,
        after_ord: i64,
        limit: usize,
    ) -> Result<Vec<(i64, Record)>, StoreError> {
        let limit = limit.max(1);
        let page = usize::try_from(FRAMES_PAGE).unwrap_or(4096);
        let mut out: Vec<(i64, Record)> = Vec::new();
        let frames = self.frames_page(run, after_ord)?;
        // A full page may stop short of rows the other table has: rows
        // past the end of a full page wait for the next call.
        let mut cutoff = i64::MAX;
        if frames.len() >= page {
            cutoff = frames.last().map_or(i64::MAX, |(ord, _)| *ord);
        }
        for (ord, frame) in frames {
            out.push((ord, Record::Frame(frame?)));
        }
        let mut st = self
            .conn()?
            .prepare_cached(
                "SELECT ord, host_ms, kind, count, detail FROM link_errors
                 WHERE run_id = ?1 AND ord > ?2 ORDER BY ord LIMIT ?3",
            )
            .map_err(|e| self.err("cannot read link errors", e))?;
        let rows = st
            .query_map(params![run, after_ord, FRAMES_PAGE], |r| {
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
        if rows.len() >= page {
            cutoff = cutoff.min(rows.last().map_or(i64::MAX, |r| r.0));
        }
        for (ord, host_ms, kind, count, detail) in rows {
            let Some(kind) = LinkErrorKind::parse(&kind) else {
                return Err(self.bad(run, "link_errors", ord, format!("bad kind {kind:?}")));
            };
            if carried(kind) {
                out.push((
                    ord,
                    Record::Loss(LinkErrorRow {
                        ord,
                        host_ms,
                        kind,
                        count: u64::try_from(count).unwrap_or(0),
                        detail,
                    }),
                ));
            }
        }
        out.retain(|(ord, _)| *ord <= cutoff);
        out.sort_by_key(|(ord, _)| *ord);
        out.truncate(limit);
        Ok(out)
    }

    /// Names the rig a lab run came from (`runs.rig`); commits at once.
    pub fn set_run_rig(&mut self, run: RunId, rig: &str) -> Result<(), StoreError> {
        self.commit()?;
        self.conn()?
            .execute("UPDATE runs SET rig = ?2 WHERE id = ?1", params![run, rig])
            .map_err(|e| self.err("cannot name a run's rig", e))?;
        Ok(())
    }

    /// The runs of `rig`, oldest first: those a lab named for it, and
    /// those whose Hellos name it.
    pub fn runs_of_rig(&self, rig: &str) -> Result<Vec<RunId>, StoreError> {
        let has_rig_column = self.schema >= 6;
        let sql = if has_rig_column {
            "SELECT id FROM runs WHERE rig = ?1
             OR EXISTS (SELECT 1 FROM hellos h WHERE h.run_id = runs.id AND h.rig_id = ?1)
             ORDER BY id"
        } else {
            "SELECT id FROM runs
             WHERE EXISTS (SELECT 1 FROM hellos h WHERE h.run_id = runs.id AND h.rig_id = ?1)
             ORDER BY id"
        };
        let mut st = self
            .conn()?
            .prepare(sql)
            .map_err(|e| self.err("cannot list a rig's runs", e))?;
        st.query_map([rig], |r| r.get(0))
            .and_then(|rows| rows.collect::<Result<Vec<_>, _>>())
            .map_err(|e| self.err("cannot list a rig's runs", e))
    }

    /// Every lab source, by rig, log and run.
    pub fn lab_sources(&self) -> Result<Vec<LabSource>, StoreError> {
        let mut st = self
            .conn()?
            .prepare(
                "SELECT rig, log_id, source_run, run_id, last_ord, duplicates, recovered, lost
                 FROM lab_sources ORDER BY rig, log_id, source_run",
            )
            .map_err(|e| self.err("cannot read the lab's sources", e))?;
        st.query_map([], |r| {
            Ok(LabSource {
                key: SourceKey {
                    rig: r.get(0)?,
                    log_id: r.get(1)?,
                    source_run: r.get(2)?,
                },
                run_id: r.get(3)?,
                last_ord: r.get(4)?,
                duplicates: r.get(5)?,
                recovered: r.get(6)?,
                lost: r.get(7)?,
            })
        })
        .and_then(|rows| rows.collect::<Result<Vec<_>, _>>())
        .map_err(|e| self.err("cannot read the lab's sources", e))
    }

    /// Saves `source` in the open batch, with the rows it counts.
    pub fn save_lab_source(&mut self, source: &LabSource, host_ms: i64) -> Result<(), StoreError> {
        self.row(host_ms)?;
        let k = &source.key;
        self.conn()?
            .prepare_cached(
                "INSERT INTO lab_sources (rig, log_id, source_run, run_id, last_ord, duplicates,
                 recovered, lost) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)
                 ON CONFLICT (rig, log_id, source_run) DO UPDATE SET run_id = ?4,
                 last_ord = ?5, duplicates = ?6, recovered = ?7, lost = ?8",
            )
            .and_then(|mut st| {
                st.execute(params![
                    k.rig,
                    k.log_id,
                    k.source_run,
                    source.run_id,
                    source.last_ord,
                    source.duplicates,
                    source.recovered,
                    source.lost
                ])
            })
            .map_err(|e| self.err("cannot record a lab source", e))?;
        self.after_row()
    }
}
