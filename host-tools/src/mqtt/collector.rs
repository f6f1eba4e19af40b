//! `lab`: every rig's records from the broker into one log, each row once,
//! each frame verified as `watch` verifies it, holes asked for again.
//!
//! ```text
//! ROOT/rigs/+/records --Record::decode--> source (rig, log id, run)
//!     ord <= last taken (or held)    --> duplicate, counted, dropped
//!     prev ord == last taken         --> Ingest (decoder, link tracker) --> lab log, rig named
//!     prev ord > last taken          --> held; ROOT/rigs/RIG/resend {log, run, after_ord, through_ord}
//!     hole still open after give_up  --> counted lost, held rows taken (the link tracker logs the gap)
//! ```
//!
//! One SQLite connection writes for every rig: each source's [`Ingest`]
//! holds a detached stand-in and is lent the real log for each row
//! ([`Ingest::swap_log`]), so rigs never contend for the file.
use std::collections::{BTreeMap, HashMap};
use std::path::Path;
use std::sync::mpsc::{self, Receiver};
use std::time::{Duration, Instant};

use crate::ingest::{Ingest, LineStyle, Observed};
use crate::link::now_ms;
use crate::store::{LabSource, Log, SourceKey, StoreError};

use super::overview::Overview;
use super::topics::{Body, Record};

/// Records held past a hole, per source, at most; beyond, newer ones are
/// dropped (the rig's log still has them; they are asked for again).
pub const MAX_HELD: usize = 50_000;
/// Seconds between two requests for the same hole.
pub const ASK_EVERY: Duration = Duration::from_secs(2);

/// What the collector has done, for its closing line and the tests.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct LabTotals {
    /// Frames taken in order as they came (not after a hole), for the
    /// latency figures.
    pub timed: u64,
    /// Median time from the rig's watch receiving a frame to the lab
    /// taking it, ms (host clocks; the same machine, or NTP-synchronised).
    pub latency_p50_ms: Option<u64>,
    /// 99th percentile of the same, ms.
    pub latency_p99_ms: Option<u64>,
    /// Records taken into the log.
    pub taken: u64,
    /// Records received again and dropped.
    pub duplicates: u64,
    /// Records that filled a hole after it was asked for.
    pub recovered: u64,
    /// Requests to publish again.
    pub resend_requests: u64,
    /// Holes given up on.
    pub lost: u64,
    /// Messages that were not records (wrong version, truncated).
    pub refused: u64,
}

/// A request for rows again: publish `{log, run, after_ord, through_ord}`
/// on the rig's resend topic.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ResendAsk {
    /// The rig.
    pub rig: String,
    /// The JSON body.
    pub body: String,
}

struct Source {
    lab: LabSource,
    ingest: Ingest,
    observed: Receiver<Observed>,
    held: BTreeMap<i64, Record>,
    asked: Option<Instant>,
    asked_through: i64,
    hole_since: Option<Instant>,
    /// The last row its watch says it published, when beyond the last
    /// taken, and since when.
    tail: Option<(i64, Instant)>,
    closed: bool,
    /// Its Hellos named another rig than its topic (said once).
    misnamed: bool,
}

/// Seconds a source may stay behind what its watch says it published
/// before the rest is asked for (rows in flight arrive well within it).
pub const TAIL_GRACE: Duration = Duration::from_secs(3);

/// The lab's log and its sources.
pub struct Collector {
    log: Log,
    sources: HashMap<SourceKey, Source>,
    /// What every rig is doing.
    pub overview: Overview,
    totals: LabTotals,
    give_up: Duration,
    /// Frames by latency, 1 ms bins up to 60 s (the last bin: beyond).
    latency: Vec<u64>,
}

/// Bins of the latency histogram.
const LATENCY_BINS: usize = 60_001;

impl Collector {
    /// Opens (creating if needed) the lab log at `path`. A source seen in
    /// an earlier session goes on into its run, from the row after the
    /// last one taken. A hole open for `give_up` is given up on.
    pub fn open(path: &Path, give_up: Duration) -> Result<Collector, StoreError> {
        let log = Log::open(path)?;
        let mut sources = HashMap::new();
        for lab in log.lab_sources()? {
            let (tx, rx) = mpsc::channel();
            let mut ingest = Ingest::with_run(Log::detached()?, lab.run_id, LineStyle::Quiet);
            ingest.set_observer(tx);
            let closed = log.run_ended(lab.run_id)?.is_some();
            sources.insert(
                lab.key.clone(),
                Source {
                    lab,
                    ingest,
                    observed: rx,
                    held: BTreeMap::new(),
                    asked: None,
                    asked_through: -1,
                    hole_since: None,
                    tail: None,
                    closed,
                    misnamed: false,
                },
            );
        }
        Ok(Collector {
            log,
            sources,
            overview: Overview::default(),
            totals: LabTotals::default(),
            give_up,
            latency: vec![0; LATENCY_BINS],
        })
    }

    /// The totals so far, with the latency percentiles.
    pub fn totals(&self) -> LabTotals {
        let mut t = self.totals;
        t.latency_p50_ms = self.percentile(0.50);
        t.latency_p99_ms = self.percentile(0.99);
        t
    }

    /// The latency below which a fraction `q` of the timed frames fell.
    fn percentile(&self, q: f64) -> Option<u64> {
        let n = self.totals.timed;
        if n == 0 {
            return None;
        }
        // The rank of the q-quantile, 1-based, rounded up.
        let rank = ((q * n as f64).ceil() as u64).clamp(1, n);
        let mut seen = 0u64;
        for (ms, count) in self.latency.iter().enumerate() {
            seen += count;
            if seen >= rank {
                return Some(ms as u64);
            }
        }
        None
    }

    /// The log.
    pub fn log(&self) -> &Log {
        &self.log
    }

    /// Takes one message of `rig`'s records topic.
    pub fn take(&mut self, rig: &str, payload: &[u8]) -> Result<(), StoreError> {
        let record = match Record::decode(payload) {
            Ok(r) => r,
            Err(e) => {
                self.totals.refused += 1;
                self.overview
                    .note(rig, format!("a message that is no record: {e}"));
                return Ok(());
            }
        };
        let key = SourceKey {
            rig: rig.to_string(),
            log_id: record.log_id,
            source_run: record.run,
        };
        if !self.sources.contains_key(&key) {
            self.add_source(&key, record.host_ms)?;
        }
        let Some(src) = self.sources.get_mut(&key) else {
            return Ok(());
        };
        if record.ord <= src.lab.last_ord || src.held.contains_key(&record.ord) {
            src.lab.duplicates += 1;
            self.totals.duplicates += 1;
            return Ok(());
        }
        if record.prev_ord != src.lab.last_ord {
            if src.held.len() < MAX_HELD {
                src.held.insert(record.ord, record);
            }
            src.hole_since.get_or_insert_with(Instant::now);
            return Ok(());
        }
        if matches!(record.body, Body::Frame(_)) {
            let ms = usize::try_from((now_ms() - record.host_ms).max(0)).unwrap_or(usize::MAX);
            if let Some(bin) = self.latency.get_mut(ms.min(LATENCY_BINS - 1)) {
                *bin += 1;
            }
            self.totals.timed += 1;
        }
        self.apply(&key, record)?;
        self.take_held(&key)
    }

    /// Takes the retained status of `rig`: the overview's state, and how
    /// far its watch has published, so that a lab that lost the last rows
    /// of a run (a broker restarted without them) asks for them.
    pub fn status(&mut self, rig: &str, payload: &[u8]) -> Result<(), StoreError> {
        self.overview.status(rig, payload);
        #[derive(serde::Deserialize)]
        struct Status {
            log: i64,
            run: i64,
            last_ord: i64,
        }
        let Ok(st) = serde_json::from_slice::<Status>(payload) else {
            return Ok(());
        };
        let key = SourceKey {
            rig: rig.to_string(),
            log_id: st.log,
            source_run: st.run,
        };
        if st.last_ord < 0 {
            return Ok(());
        }
        if !self.sources.contains_key(&key) {
            self.add_source(&key, now_ms())?;
        }
        if let Some(src) = self.sources.get_mut(&key) {
            if st.last_ord > src.lab.last_ord && !src.closed {
                let since = src.tail.map_or_else(Instant::now, |(_, t)| t);
                src.tail = Some((st.last_ord, since));
            } else {
                src.tail = None;
            }
        }
        Ok(())
    }

    /// Takes the held records that now follow on.
    fn take_held(&mut self, key: &SourceKey) -> Result<(), StoreError> {
        loop {
            let Some(src) = self.sources.get_mut(key) else {
                return Ok(());
            };
            let next = src
                .held
                .first_key_value()
                .is_some_and(|(_, r)| r.prev_ord == src.lab.last_ord);
            if !next {
                if src.held.is_empty() {
                    src.hole_since = None;
                    src.asked = None;
                }
                return Ok(());
            }
            let Some((_, record)) = src.held.pop_first() else {
                return Ok(());
            };
            self.apply(key, record)?;
        }
    }

    fn add_source(&mut self, key: &SourceKey, host_ms: i64) -> Result<(), StoreError> {
        let name = format!(
            "mqtt:{}/log-{:x}/run-{}",
            key.rig, key.log_id, key.source_run
        );
        let run = self.log.begin_run(&name, host_ms)?;
        self.log.set_run_rig(run, &key.rig)?;
        let (tx, rx) = mpsc::channel();
        let mut ingest = Ingest::with_run(Log::detached()?, run, LineStyle::Quiet);
        ingest.set_observer(tx);
        self.sources.insert(
            key.clone(),
            Source {
                lab: LabSource {
                    key: key.clone(),
                    run_id: run,
                    last_ord: -1,
                    duplicates: 0,
                    recovered: 0,
                    lost: 0,
                },
                ingest,
                observed: rx,
                held: BTreeMap::new(),
                asked: None,
                asked_through: -1,
                hole_since: None,
                tail: None,
                closed: false,
                misnamed: false,
            },
        );
        Ok(())
    }

    /// Writes one record that follows on from the last one taken.
    fn apply(&mut self, key: &SourceKey, record: Record) -> Result<(), StoreError> {
        let Some(src) = self.sources.get_mut(key) else {
            return Ok(());
        };
        if record.ord <= src.asked_through {
            src.lab.recovered += 1;
            self.totals.recovered += 1;
        }
        src.ingest.swap_log(&mut self.log);
        let result = match &record.body {
            Body::Frame(bytes) => src.ingest.feed(bytes, record.host_ms, |_| {}),
            Body::Loss { .. } => match record.loss_row() {
                Some(row) => src.ingest.log_loss(&row),
                None => Ok(()),
            },
            Body::End(outages) => {
                src.closed = true;
                let mut r = Ok(());
                for o in outages {
                    r = r.and_then(|()| {
                        src.ingest
                            .log_outage(o.started_host_ms, o.ended_host_ms, &o.reason)
                    });
                }
                r.and_then(|()| src.ingest.close(record.host_ms).map(|_| ()))
            }
        };
        src.ingest.swap_log(&mut self.log);
        result?;
        src.lab.last_ord = record.ord;
        self.totals.taken += 1;
        let now = now_ms();
        self.log.save_lab_source(&src.lab, now)?;
        while let Ok(o) = src.observed.try_recv() {
            if let Observed::Frame { frame, host_ms } = o {
                if let heatbound::wire::Frame::Hello(h) = &frame
                    && h.rig_id.as_str() != key.rig
                    && !src.misnamed
                {
                    // Logged as received; the engineer is told which is which.
                    src.misnamed = true;
                    self.overview.note(
                        &key.rig,
                        format!(
                            "its controller's Hello names rig {:?}: two rigs may share the id, or the watch was given the wrong log",
                            h.rig_id.as_str()
                        ),
                    );
                }
                self.overview.frame(&key.rig, &frame, host_ms);
            }
        }
        if matches!(record.body, Body::End(_)) {
            self.overview.run_ended(&key.rig);
        }
        Ok(())
    }

    /// Commits what is due, and says which holes to ask for again (each at
    /// most every [`ASK_EVERY`]); gives up on holes open too long.
    pub fn tick(&mut self) -> Result<Vec<ResendAsk>, StoreError> {
        self.log.commit_if_due(now_ms())?;
        let mut asks = Vec::new();
        let mut give_up = Vec::new();
        for (key, src) in &mut self.sources {
            if let Some((tail, since)) = src.tail {
                if tail <= src.lab.last_ord || src.closed {
                    src.tail = None;
                } else if src.held.is_empty()
                    && since.elapsed() >= TAIL_GRACE
                    && src.asked.is_none_or(|t| t.elapsed() >= ASK_EVERY)
                {
                    src.asked = Some(Instant::now());
                    src.asked_through = src.asked_through.max(tail);
                    self.totals.resend_requests += 1;
                    asks.push(ResendAsk {
                        rig: key.rig.clone(),
                        body: serde_json::json!({
                            "log": key.log_id,
                            "run": key.source_run,
                            "after_ord": src.lab.last_ord,
                            "through_ord": tail,
                        })
                        .to_string(),
                    });
                }
            }
            let Some((_, first)) = src.held.first_key_value() else {
                continue;
            };
            if src.hole_since.is_some_and(|t| t.elapsed() >= self.give_up) {
                give_up.push(key.clone());
                continue;
            }
            if src.asked.is_some_and(|t| t.elapsed() < ASK_EVERY) {
                continue;
            }
            src.asked = Some(Instant::now());
            src.asked_through = src.asked_through.max(first.prev_ord);
            self.totals.resend_requests += 1;
            asks.push(ResendAsk {
                rig: key.rig.clone(),
                body: serde_json::json!({
                    "log": key.log_id,
                    "run": key.source_run,
                    "after_ord": src.lab.last_ord,
                    "through_ord": first.prev_ord,
                })
                .to_string(),
            });
        }
        for key in give_up {
            if let Some(src) = self.sources.get_mut(&key)
                && let Some((_, first)) = src.held.first_key_value()
            {
                let (from, to) = (src.lab.last_ord, first.prev_ord);
                src.lab.lost += 1;
                src.lab.last_ord = to;
                src.hole_since = None;
                self.totals.lost += 1;
                self.overview.note(
                    &key.rig,
                    format!(
                        "rows after {from} through {to} of run {} never arrived: given up (the run's sequence shows the gap)",
                        key.source_run
                    ),
                );
            }
            self.take_held(&key)?;
        }
        Ok(asks)
    }

    /// After a connection to the broker (which may have lost what it held
    /// for the lab while it was away): asks every open source for all its
    /// rows after the last one taken, and for its end if it has one.
    pub fn resync(&mut self) -> Vec<ResendAsk> {
        let mut asks = Vec::new();
        for (key, src) in &mut self.sources {
            if src.closed {
                continue;
            }
            src.asked = Some(Instant::now());
            self.totals.resend_requests += 1;
            asks.push(ResendAsk {
                rig: key.rig.clone(),
                body: serde_json::json!({
                    "log": key.log_id,
                    "run": key.source_run,
                    "after_ord": src.lab.last_ord,
                    "through_ord": i64::MAX,
                })
                .to_string(),
            });
        }
        asks
    }

    /// Commits and closes every run still open (the lab stops).
    pub fn close(mut self) -> Result<LabTotals, StoreError> {
        let now = now_ms();
        let keys: Vec<SourceKey> = self.sources.keys().cloned().collect();
        for key in keys {
            if let Some(src) = self.sources.get_mut(&key)
                && !src.closed
            {
                src.ingest.swap_log(&mut self.log);
                let r = src.ingest.close(now);
                src.ingest.swap_log(&mut self.log);
                r?;
                src.closed = true;
                self.log.save_lab_source(&src.lab, now)?;
            }
        }
        self.log.commit()?;
        Ok(self.totals())
    }
}

#[cfg(test)]
mod tests {
    use heatbound::config::RigConfig;
    use heatbound::wire::{Frame, Hello, RigId};

    use super::*;
    use crate::mqtt::publisher::frame_bytes;

    fn hello_record(rig: &str, ord: i64) -> Vec<u8> {
        let hello = Hello::from_config(
            RigId::new(rig).unwrap_or_default(),
            (0, 1, 0),
            100,
            &RigConfig::default(),
        );
        Record {
            log_id: 5,
            run: 1,
            ord,
            prev_ord: ord - 1,
            host_ms: now_ms(),
            body: Body::Frame(frame_bytes(&Frame::Hello(hello))),
        }
        .encode()
    }

    #[test]
    fn a_hello_naming_another_rig_is_logged_and_said_once() {
        let dir = tempfile::tempdir().expect("temp dir");
        let mut c = Collector::open(&dir.path().join("lab.sqlite"), Duration::from_secs(5))
            .expect("open the lab log");
        c.take("rig-a", &hello_record("rig-a", 0)).expect("take");
        let note = |c: &Collector| {
            c.overview
                .rigs()
                .find(|(r, _)| r.as_str() == "rig-a")
                .and_then(|(_, v)| v.note.clone())
        };
        assert_eq!(note(&c), None, "its own name: nothing to say");
        c.take("rig-a", &hello_record("rig-b", 1)).expect("take");
        let said = note(&c).expect("a note on rig-a");
        assert!(said.contains("\"rig-b\""), "{said}");
        // Nothing is dropped: both Hellos are in the lab log.
        assert_eq!(c.totals().taken, 2);
    }
}
