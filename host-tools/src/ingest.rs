//! Ingest: bytes from the controller, in any chunking, to the SQLite log
//! and a compact live line per frame.
//!
//! ```text
//! bytes --> wire::Decoder<MAX_FRAME_LEN> --> Frame --> LinkTracker (gaps, duplicates, restarts)
//!       --> store::Log (hellos, summaries, events, link_errors, outages) --> live lines
//! ```
//!
//! Decoder losses are found by diffing [`DecoderStats`] after each
//! [`Ingest::feed`]: one `link_errors` row per kind and feed, with the count.
//! Sequence gaps, duplicates and restarts get one row each. A replayed
//! section (the sequence back, with no Hello right before, to a summary of
//! the current device session identical to it) is not stored: its
//! summaries are counted in one `replay` row per section and feed, and its
//! Hello and event frames are named in that row's detail. Per frame, the
//! only allocation is what SQLite's batch needs; the live line is written
//! into one reused buffer.
//!
//! Shared by `heatbound watch` and `heatbound demo`.
//!
//! ```
//! use heatbound::wire::{self, Frame, Summary};
//! use heatbound_host::ingest::{Ingest, LineStyle};
//! use heatbound_host::store::Log;
//! let dir = tempfile::tempdir().unwrap();
//! let log = Log::open(&dir.path().join("log.sqlite")).unwrap();
//! let mut ingest = Ingest::new(log, "file:doc.bin", 0, LineStyle::Plain).unwrap();
//!
//! let mut bytes = [0u8; wire::MAX_FRAME_LEN];
//! let n = wire::encode(&Frame::Summary(Summary { seq: 1, t_ms: 5000, ..Summary::default() }),
//!                      &mut bytes).unwrap();
//! let mut lines = Vec::new();
//! for chunk in bytes[..n].chunks(5) {
//!     ingest.feed(chunk, 10, |line| lines.push(line.to_string())).unwrap();
//! }
//! assert!(lines[0].starts_with("t=5.0s"));
//! let totals = ingest.finish(20).unwrap();
//! assert_eq!(totals.summaries, 1);
//! ```
use std::fmt::Write as _;

use heatbound::alarm::{RuleId, Severity};
use heatbound::config::Mode;
use heatbound::wire::{
    Decoder, DecoderStats, EventFrame, Frame, FrameError, Hello, Link, LinkTracker, MAX_FRAME_LEN,
    Reply, Summary,
};

use crate::store::{LinkErrorKind, LinkErrorRow, Log, Record, RunId, StoreError, Stored};

/// How live lines are written.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LineStyle {
    /// No lines at all (the callback is never called).
    Quiet,
    /// Plain text: alarms as `ALARM beyond_carnot (trip)`.
    Plain,
    /// Plain text with ANSI highlighting of alarms (for a terminal).
    Ansi,
    /// One JSON object per frame ([`crate::frame_json`]).
    Json,
}

impl LineStyle {
    /// Quiet if asked; else highlighted when stdout is a terminal, plain
    /// when it is a file or a pipe.
    pub fn for_stdout(quiet: bool) -> LineStyle {
        use std::io::IsTerminal as _;
        if quiet {
            LineStyle::Quiet
        } else if std::io::stdout().is_terminal() {
            LineStyle::Ansi
        } else {
            LineStyle::Plain
        }
    }
}

/// What a run contained, for the closing summary.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Totals {
    /// The run.
    pub run_id: RunId,
    /// Bytes fed.
    pub bytes: u64,
    /// Frames accepted (all kinds).
    pub frames: u64,
    /// Hellos.
    pub hellos: u64,
    /// Summaries logged.
    pub summaries: u64,
    /// Events logged.
    pub events: u64,
    /// Replies to commands logged.
    pub replies: u64,
    /// Frames lost to CRC errors.
    pub crc_errors: u64,
    /// Frames lost as overlong.
    pub overlong: u64,
    /// Frames lost as malformed.
    pub malformed: u64,
    /// Frames lost to an unknown protocol version.
    pub unknown_version: u64,
    /// Sequence gaps.
    pub gaps: u64,
    /// Summaries missing in those gaps.
    pub missing_summaries: u64,
    /// Duplicate summaries.
    pub duplicates: u64,
    /// Controller restarts.
    pub restarts: u64,
    /// Summaries replayed (sent again), not stored.
    pub replayed: u64,
    /// Hello and event frames inside replayed sections, not stored.
    pub replayed_other: u64,
    /// Link outages.
    pub outages: u64,
}

impl Totals {
    /// Frames lost by the decoder, of every kind.
    pub const fn losses(&self) -> u64 {
        self.crc_errors
            .saturating_add(self.overlong)
            .saturating_add(self.malformed)
            .saturating_add(self.unknown_version)
    }
}

/// What an [`Ingest`] tells an observer (the live console), as it happens.
#[derive(Clone, Debug, PartialEq)]
pub enum Observed {
    /// A frame, logged (replays are not observed: they are not new).
    Frame {
        /// The frame.
        frame: Frame,
        /// Host receive time, Unix ms.
        host_ms: i64,
    },
    /// The counters after a read.
    Totals(Totals),
    /// The link dropped (with why) or came back.
    Link {
        /// Whether it is up now.
        up: bool,
        /// Why it dropped.
        reason: Option<String>,
        /// Host time, Unix ms.
        host_ms: i64,
    },
}

/// One run being ingested: decoder, link tracker and the log.
pub struct Ingest {
    log: Log,
    run: RunId,
    decoder: Decoder<MAX_FRAME_LEN>,
    link: LinkTracker,
    /// Decoder counters at the end of the previous feed.
    seen: DecoderStats,
    /// The latest loss of each decoder kind in this feed, for the detail text.
    last_loss: [Option<FrameError>; 4],
    last_seq: Option<u16>,
    coverage_k: f32,
    mode: Mode,
    severity: [Severity; RuleId::COUNT],
    style: LineStyle,
    line: String,
    totals: Totals,
    limit: Option<u64>,
    outage: Option<i64>,
    /// The summary of each sequence number in the current device session
    /// (since the last restart).
    session: SeqTable,
    /// The first summary of the current device session.
    session_first: Option<Summary>,
    /// The latest Hello.
    hello: Option<Hello>,
    /// The previous frame taken was a Hello.
    after_hello: bool,
    /// The replayed section being counted, not yet logged.
    replay: Option<Replay>,
    /// The previous frame was part of a replay (logged or not).
    in_replay: bool,
    /// A Hello identical to the latest one, met inside a replay, with its
    /// receive time: part of the replay if a replayed summary follows, else
    /// logged then.
    held_hello: Option<(Hello, i64)>,
    /// Replies logged since [`Ingest::take_replies`] last emptied it, with
    /// their receive times (for whoever sent the commands).
    replies: Vec<(Reply, i64)>,
    /// Who else hears of each frame, the counters and the link.
    observer: Option<std::sync::mpsc::Sender<Observed>>,
    /// The run was ended on purpose (a signal, a bound, the operator):
    /// a frame cut off by that is not a loss of the link.
    stopped: bool,
    /// Who hears of each row a lab should have, as it is logged
    /// (`watch --publish`).
    feed: Option<std::sync::mpsc::Sender<Logged>>,
    /// The `ord` of the previous row fed in this run (−1: none).
    prev_fed: i64,
}

/// A row just logged that a lab should have (see [`crate::store::carried`]),
/// with its place in the run.
#[derive(Clone, Debug, PartialEq)]
pub struct Logged {
    /// The run.
    pub run: RunId,
    /// Its `ord`.
    pub ord: i64,
    /// The `ord` of the run's previous row that a lab should have (−1: none).
    pub prev_ord: i64,
    /// The row.
    pub record: Record,
}

/// The summary of each sequence number of a device session, indexed by
/// `seq`: consecutive numbers sit side by side, so that a stream's inserts
/// and look-ups stay in the cache (a hash map scatters them).
#[derive(Default)]
struct SeqTable {
    by_seq: Vec<Option<Summary>>,
    any: bool,
}

impl SeqTable {
    fn clear(&mut self) {
        self.by_seq.clear();
        self.any = false;
    }

    fn is_empty(&self) -> bool {
        !self.any
    }

    fn insert(&mut self, s: Summary) {
        let i = usize::from(s.seq);
        if self.by_seq.len() <= i {
            self.by_seq.resize(i + 1, None);
        }
        if let Some(slot) = self.by_seq.get_mut(i) {
            *slot = Some(s);
        }
        self.any = true;
    }

    fn get(&self, seq: u16) -> Option<&Summary> {
        self.by_seq.get(usize::from(seq)).and_then(Option::as_ref)
    }
}

/// A replayed section not yet logged.
#[derive(Clone, Copy, Debug)]
struct Replay {
    host_ms: i64,
    first_seq: u16,
    last_seq: u16,
    summaries: u64,
    other: u64,
}

impl Ingest {
    /// Starts a run from `source` at `host_ms` in `log`.
    pub fn new(
        mut log: Log,
        source: &str,
        host_ms: i64,
        style: LineStyle,
    ) -> Result<Ingest, StoreError> {
        let run = log.begin_run(source, host_ms)?;
        Ok(Ingest::with_run(log, run, style))
    }

    /// Goes on writing `run`, already begun in `log` (a lab's run, whose
    /// rows keep coming from the same source).
    pub fn with_run(log: Log, run: RunId, style: LineStyle) -> Ingest {
        Ingest {
            log,
            run,
            decoder: Decoder::new(),
            link: LinkTracker::new(),
            seen: DecoderStats::default(),
            last_loss: [None; 4],
            last_seq: None,
            coverage_k: 2.0,
            mode: Mode::Engine,
            severity: RuleId::ALL.map(RuleId::default_severity),
            style,
            line: String::with_capacity(256),
            totals: Totals {
                run_id: run,
                ..Totals::default()
            },
            limit: None,
            outage: None,
            session: SeqTable::default(),
            session_first: None,
            hello: None,
            after_hello: false,
            replay: None,
            in_replay: false,
            held_hello: None,
            replies: Vec::new(),
            observer: None,
            stopped: false,
            feed: None,
            prev_fed: -1,
        }
    }

    /// The run is being ended on purpose (a signal, a time bound, the
    /// operator leaving): a frame the link was in the middle of is dropped
    /// by [`Ingest::finish`] without counting it as lost.
    pub fn stopped(&mut self) {
        self.stopped = true;
    }

    /// Tells `observer` of every frame logged, the counters after every
    /// read, and the link going down and up. A gone observer is forgotten.
    pub fn set_observer(&mut self, observer: std::sync::mpsc::Sender<Observed>) {
        self.observer = Some(observer);
    }

    fn tell(&mut self, what: Observed) {
        if let Some(o) = &self.observer
            && o.send(what).is_err()
        {
            self.observer = None;
        }
    }

    /// Appends an operator's action that sends nothing to the controller
    /// (pausing the trends, changing the span, leaving) to the log.
    pub fn note_action(
        &mut self,
        host_ms: i64,
        origin: &str,
        action: &str,
        detail: &str,
    ) -> Result<(), StoreError> {
        let run = self.run;
        self.log
            .insert_operator_action(run, host_ms, origin, action, detail)
    }

    /// Sends every row a lab should have to `feed` as it is logged (frames,
    /// and the losses [`crate::store::carried`]). A gone receiver is forgotten.
    pub fn set_feed(&mut self, feed: std::sync::mpsc::Sender<Logged>) {
        self.feed = Some(feed);
    }

    /// Tells the feed of a row just logged.
    fn fed(&mut self, ord: i64, record: impl FnOnce() -> Record) {
        if let Some(feed) = &self.feed {
            let logged = Logged {
                run: self.run,
                ord,
                prev_ord: self.prev_fed,
                record: record(),
            };
            if feed.send(logged).is_err() {
                self.feed = None;
            }
            self.prev_fed = ord;
        }
    }

    /// The latest Hello, if one has arrived: who the controller is, its
    /// session and its last accepted command counter.
    pub fn latest_hello(&self) -> Option<&Hello> {
        self.hello.as_ref()
    }

    /// The replies logged since the previous call, with their receive
    /// times, oldest first.
    pub fn take_replies(&mut self) -> Vec<(Reply, i64)> {
        std::mem::take(&mut self.replies)
    }

    /// Exchanges the log this ingest writes with `other`: a lab keeps one
    /// log and lends it to the ingest of each rig's run in turn.
    pub fn swap_log(&mut self, other: &mut Log) {
        std::mem::swap(&mut self.log, other);
    }

    /// Logs a loss that another host saw on the rig's own link (a lab
    /// taking a publishing watch's row), as it was recorded there.
    pub fn log_loss(&mut self, row: &LinkErrorRow) -> Result<(), StoreError> {
        self.log
            .insert_link_error(self.run, row.host_ms, row.kind, row.count, &row.detail)
            .map(|_| ())
    }

    /// Logs an outage of the rig's own link that another host saw (a lab
    /// taking a publishing watch's run).
    pub fn log_outage(
        &mut self,
        started_host_ms: i64,
        ended_host_ms: Option<i64>,
        reason: &str,
    ) -> Result<(), StoreError> {
        let id = self.log.begin_outage(self.run, started_host_ms, reason)?;
        self.totals.outages += 1;
        match ended_host_ms {
            Some(end) => self.log.end_outage(id, end),
            None => Ok(()),
        }
    }

    /// The log, for writing rows that are not frames (the commands sent).
    pub fn log_mut(&mut self) -> &mut Log {
        &mut self.log
    }

    /// Stops taking frames after `max` summaries: the rest of the bytes
    /// are ignored (see [`Ingest::limit_reached`]).
    pub fn set_summary_limit(&mut self, max: Option<u64>) {
        self.limit = max;
    }

    /// Whether the summary limit has been reached.
    pub fn limit_reached(&self) -> bool {
        self.limit.is_some_and(|m| self.totals.summaries >= m)
    }

    /// The run's id.
    pub fn run_id(&self) -> RunId {
        self.run
    }

    /// The totals so far.
    pub fn totals(&self) -> Totals {
        self.totals
    }

    /// The log being written.
    pub fn log(&self) -> &Log {
        &self.log
    }

    /// Feeds bytes received at `host_ms`; `on_line` gets one live line per
    /// frame (unless [`LineStyle::Quiet`]). Commits a batch when it is full.
    pub fn feed(
        &mut self,
        bytes: &[u8],
        host_ms: i64,
        mut on_line: impl FnMut(&str),
    ) -> Result<(), StoreError> {
        for &b in bytes {
            if self.limit_reached() {
                break;
            }
            self.totals.bytes += 1;
            match self.decoder.push_byte(b) {
                None => {}
                Some(Ok(frame)) => self.on_frame(&frame, host_ms, &mut on_line)?,
                Some(Err(e)) => {
                    let i = match e {
                        FrameError::Crc => 0,
                        FrameError::Overlong => 1,
                        FrameError::Malformed(_) => 2,
                        _ => 3,
                    };
                    self.last_loss[i] = Some(e);
                }
            }
        }
        self.record_losses(host_ms)?;
        self.record_replay()?;
        if self.observer.is_some() {
            let totals = self.totals;
            self.tell(Observed::Totals(totals));
        }
        Ok(())
    }

    /// Commits the open batch if it is older than the batching age.
    pub fn tick(&mut self, host_ms: i64) -> Result<(), StoreError> {
        self.log.commit_if_due(host_ms)
    }

    /// The link dropped at `host_ms` for `reason`: opens an outage (committed
    /// at once). A second call before [`Ingest::link_up`] does nothing.
    pub fn link_down(&mut self, host_ms: i64, reason: &str) -> Result<(), StoreError> {
        if self.outage.is_none() {
            self.outage = Some(self.log.begin_outage(self.run, host_ms, reason)?);
            self.totals.outages += 1;
            let totals = self.totals;
            self.tell(Observed::Totals(totals));
            self.tell(Observed::Link {
                up: false,
                reason: Some(reason.to_string()),
                host_ms,
            });
        }
        Ok(())
    }

    /// The link is back at `host_ms`: closes the open outage. A frame cut
    /// off by the drop is ended here and counted as a loss.
    pub fn link_up(&mut self, host_ms: i64) -> Result<(), StoreError> {
        if self.decoder.has_unfinished() {
            self.feed(&[0], host_ms, |_| {})?;
            self.totals.bytes = self.totals.bytes.saturating_sub(1);
        }
        if let Some(id) = self.outage.take() {
            self.log.end_outage(id, host_ms)?;
        }
        self.tell(Observed::Link {
            up: true,
            reason: None,
            host_ms,
        });
        Ok(())
    }

    /// Ends the run at `host_ms`: counts a frame left unfinished as a loss,
    /// closes an open outage, commits, and returns the totals.
    pub fn finish(mut self, host_ms: i64) -> Result<Totals, StoreError> {
        self.close(host_ms)
    }

    /// [`Ingest::finish`] that leaves the ingest (and its log) with the
    /// caller: a lab closes one rig's run and keeps its log for the others.
    pub fn close(&mut self, host_ms: i64) -> Result<Totals, StoreError> {
        // A frame cut off by the end of the input is a loss too; not one
        // cut off because the run was ended on purpose mid-frame.
        if self.decoder.has_unfinished() && !self.limit_reached() && !self.stopped {
            self.feed(&[0], host_ms, |_| {})?;
            self.totals.bytes = self.totals.bytes.saturating_sub(1);
        }
        self.record_losses(host_ms)?;
        self.record_replay()?;
        self.take_held_hello(&mut |_| {})?;
        if let Some(id) = self.outage.take() {
            self.log.end_outage(id, host_ms)?;
        }
        self.log.end_run(self.run, host_ms)?;
        Ok(self.totals)
    }

    fn record_losses(&mut self, host_ms: i64) -> Result<(), StoreError> {
        let now = *self.decoder.stats();
        let before = self.seen;
        if now == before {
            self.seen = now;
            return Ok(());
        }
        let deltas = [
            (
                LinkErrorKind::Crc,
                now.crc_errors.saturating_sub(before.crc_errors),
            ),
            (
                LinkErrorKind::Overlong,
                now.overlong.saturating_sub(before.overlong),
            ),
            (
                LinkErrorKind::Malformed,
                now.malformed.saturating_sub(before.malformed),
            ),
            (
                LinkErrorKind::UnknownVersion,
                now.unknown_version.saturating_sub(before.unknown_version),
            ),
        ];
        self.seen = now;
        self.totals.crc_errors = now.crc_errors;
        self.totals.overlong = now.overlong;
        self.totals.malformed = now.malformed;
        self.totals.unknown_version = now.unknown_version;
        for (i, (kind, n)) in deltas.into_iter().enumerate() {
            if n == 0 {
                continue;
            }
            let last = self.last_loss[i].take();
            self.line.clear();
            match last {
                Some(e) => {
                    let _ = write!(self.line, "{e}");
                }
                None => self.line.push_str(kind.as_str()),
            }
            let detail = std::mem::take(&mut self.line);
            let r = self
                .log
                .insert_link_error(self.run, host_ms, kind, n, &detail);
            if let Ok(ord) = r {
                self.fed(ord, || loss_record(ord, host_ms, kind, n, &detail));
            }
            self.line = detail;
            r?;
        }
        Ok(())
    }

    /// Logs the replayed section counted so far, if any.
    fn record_replay(&mut self) -> Result<(), StoreError> {
        let Some(r) = self.replay.take() else {
            return Ok(());
        };
        self.line.clear();
        let _ = write!(
            self.line,
            "{} summaries sent again (seq {} to {}), not stored",
            r.summaries, r.first_seq, r.last_seq
        );
        if r.other > 0 {
            let _ = write!(
                self.line,
                "; {} Hello and event frames in them, not stored",
                r.other
            );
        }
        let detail = std::mem::take(&mut self.line);
        let result = self.log.insert_link_error(
            self.run,
            r.host_ms,
            LinkErrorKind::Replay,
            r.summaries,
            &detail,
        );
        if let Ok(ord) = result {
            self.fed(ord, || {
                loss_record(ord, r.host_ms, LinkErrorKind::Replay, r.summaries, &detail)
            });
        }
        self.line = detail;
        result.map(|_| ())
    }

    /// Whether summary `s` replays one already seen in this device
    /// session: the same rule as the audit's (`heatbound_host::audit`,
    /// `Integrity::replayed`).
    fn is_replay(&self, s: &Summary) -> bool {
        let Some(last) = self.last_seq else {
            return false;
        };
        let d = s.seq.wrapping_sub(last);
        let back = d >= 0x8000 || (d == 0 && self.in_replay);
        // A device that started over sends its first summary again after
        // its Hello: a restart, even when the contents repeat exactly.
        let started_over = self.after_hello && !self.in_replay && self.session_first == Some(*s);
        back && !started_over && self.session.get(s.seq) == Some(s)
    }

    /// Counts a Hello or event frame inside a replayed section.
    fn replayed_other(&mut self, host_ms: i64) -> Result<(), StoreError> {
        self.totals.replayed_other += 1;
        let seq = self.last_seq.unwrap_or_default();
        let r = self.replay.get_or_insert(Replay {
            host_ms,
            first_seq: seq,
            last_seq: seq,
            summaries: 0,
            other: 0,
        });
        r.other += 1;
        Ok(())
    }

    fn on_frame(
        &mut self,
        frame: &Frame,
        host_ms: i64,
        on_line: &mut impl FnMut(&str),
    ) -> Result<(), StoreError> {
        match frame {
            Frame::Summary(s) if self.is_replay(s) => {
                if let Some((_, at)) = self.held_hello.take() {
                    self.replayed_other(at)?;
                }
                self.totals.replayed += 1;
                self.in_replay = true;
                let r = self.replay.get_or_insert(Replay {
                    host_ms,
                    first_seq: s.seq,
                    last_seq: s.seq,
                    summaries: 0,
                    other: 0,
                });
                r.last_seq = s.seq;
                r.summaries += 1;
                return Ok(());
            }
            Frame::Event(_) if self.in_replay => return self.replayed_other(host_ms),
            Frame::Hello(h)
                if self.in_replay
                    && self.held_hello.is_none()
                    && self.hello.as_ref() == Some(h) =>
            {
                self.held_hello = Some((*h, host_ms));
                return Ok(());
            }
            _ => {
                self.in_replay = false;
                self.record_replay()?;
                self.take_held_hello(on_line)?;
            }
        }
        self.take(frame, host_ms, on_line)
    }

    /// A Hello held at the end of a replay was the stream's own: log it.
    fn take_held_hello(&mut self, on_line: &mut impl FnMut(&str)) -> Result<(), StoreError> {
        match self.held_hello.take() {
            Some((h, at)) => self.take(&Frame::Hello(h), at, on_line),
            None => Ok(()),
        }
    }

    /// Logs one frame that is not a replay.
    fn take(
        &mut self,
        frame: &Frame,
        host_ms: i64,
        on_line: &mut impl FnMut(&str),
    ) -> Result<(), StoreError> {
        let link = self.link.observe(frame);
        self.after_hello = matches!(frame, Frame::Hello(_));
        match frame {
            Frame::Hello(h) => self.hello = Some(*h),
            Frame::Summary(s) => {
                if matches!(link, Link::Restart) {
                    self.session.clear();
                }
                if self.session.is_empty() {
                    self.session_first = Some(*s);
                }
                self.session.insert(*s);
                self.link_event(link, s.seq, host_ms)?;
                self.last_seq = Some(s.seq);
            }
            Frame::Event(_) => {}
            Frame::Reply(r) => self.replies.push((*r, host_ms)),
        }
        let ord = self.log.insert_frame(self.run, host_ms, frame)?;
        self.fed(ord, || {
            Record::Frame(Stored {
                host_ms,
                frame: frame.clone(),
            })
        });
        if self.observer.is_some() {
            self.tell(Observed::Frame {
                frame: frame.clone(),
                host_ms,
            });
        }
        self.totals.frames += 1;
        match frame {
            Frame::Hello(h) => {
                self.totals.hellos += 1;
                self.coverage_k = h.coverage_factor;
                self.mode = h.mode;
            }
            Frame::Summary(_) => self.totals.summaries += 1,
            Frame::Event(e) => {
                self.totals.events += 1;
                self.severity[e.event.rule.index()] = e.event.severity;
            }
            Frame::Reply(_) => self.totals.replies += 1,
        }
        if self.style == LineStyle::Json {
            self.line.clear();
            self.line
                .push_str(&crate::frame_json::frame_json(frame, host_ms).to_string());
            on_line(&self.line);
        } else if self.style != LineStyle::Quiet {
            self.line.clear();
            match frame {
                Frame::Hello(h) => write_hello(&mut self.line, h),
                Frame::Summary(s) => self.write_summary(s),
                Frame::Event(e) => write_event(&mut self.line, e, self.style),
                Frame::Reply(r) => write_reply(&mut self.line, r),
            }
            on_line(&self.line);
        }
        Ok(())
    }

    fn link_event(&mut self, link: Link, seq: u16, host_ms: i64) -> Result<(), StoreError> {
        let (kind, count) = match link {
            Link::Gap { missing } => {
                self.totals.gaps += 1;
                self.totals.missing_summaries = self
                    .totals
                    .missing_summaries
                    .saturating_add(u64::from(missing));
                (LinkErrorKind::Gap, u64::from(missing))
            }
            Link::Duplicate => {
                self.totals.duplicates += 1;
                (LinkErrorKind::Duplicate, 1)
            }
            Link::Restart => {
                self.totals.restarts += 1;
                (LinkErrorKind::Restart, 1)
            }
            _ => return Ok(()),
        };
        self.line.clear();
        let _ = match (kind, self.last_seq) {
            (LinkErrorKind::Gap, Some(p)) => {
                write!(self.line, "{count} missing between seq {p} and {seq}")
            }
            (_, Some(p)) => write!(self.line, "seq {seq} after {p}"),
            (_, None) => write!(self.line, "seq {seq}"),
        };
        let detail = std::mem::take(&mut self.line);
        let r = self
            .log
            .insert_link_error(self.run, host_ms, kind, count, &detail);
        self.line = detail;
        r.map(|_| ())
    }

    fn write_summary(&mut self, s: &Summary) {
        let k = self.coverage_k;
        let (perf, bound) = if self.mode.is_reverse() {
            ("COP", "COP_C")
        } else {
            ("η", "η_C")
        };
        let m = s.metrics();
        let (performance, bound_value) = if self.mode.is_reverse() {
            (m.cop, m.carnot_cop)
        } else {
            (m.efficiency, m.carnot_efficiency)
        };
        let out = &mut self.line;
        let _ = write!(out, "t={:.1}s ", f64::from(s.t_ms) / 1000.0);
        write_pm(out, perf, performance, s.u_performance, k);
        write_pm(out, bound, bound_value, s.u_bound, k);
        let margin = bound_value.zip(performance).map(|(b, p)| b - p);
        write_pm(out, "margin", margin, None, k);
        write_pm(
            out,
            "σ̇",
            s.entropy_rate_w_per_k,
            s.u_entropy_rate_w_per_k,
            k,
        );
        out.push_str("W/K ");
        match m.hot_mean_k {
            Some(t) => {
                let _ = write!(out, "T_h={t:.1}K ");
            }
            None => out.push_str("T_h=n/a "),
        }
        if s.entropy_out_j_per_k > 0.0 {
            let _ = write!(out, "T_c={:.1}K", s.heat_out_j / s.entropy_out_j_per_k);
        } else {
            out.push_str("T_c=n/a");
        }
        if s.status.steady {
            out.push_str(" steady");
        }
        if let Some(why) = why_undefined(s) {
            let _ = write!(out, " (n/a: {why})");
        }
        for rule in RuleId::ALL {
            if s.alarms & (1 << rule.index()) != 0 {
                let sev = self.severity[rule.index()];
                out.push(' ');
                let (on, off) = highlight(self.style, sev);
                let _ = write!(out, "{on}ALARM {rule} ({sev}){off}");
            }
        }
        // The controller's diagnosis, when the readings are inconsistent.
        if s.verdict.consistent == Some(false) {
            match (s.verdict.suspect, s.verdict.bias) {
                (Some(c), Some(b)) => {
                    let _ = write!(
                        out,
                        " CHECK {} ({})",
                        c.name(),
                        crate::diagnosis_report::bias_text(c, f64::from(b))
                    );
                }
                (Some(c), None) => {
                    let _ = write!(out, " CHECK {}", c.name());
                }
                (None, _) => out.push_str(" inconsistent (no single sensor)"),
            }
        }
    }
}

/// Why a summary's figures are undefined, when some are: the first cause
/// that the window's integrals show, in the operator's words.
pub fn why_undefined(s: &Summary) -> Option<&'static str> {
    let t_c = (s.entropy_out_j_per_k > 0.0).then(|| s.heat_out_j / s.entropy_out_j_per_k);
    let any_na = s.performance().is_none()
        || s.bound().is_none()
        || s.entropy_rate_w_per_k.is_none()
        || s.hot_mean_k().is_none()
        || t_c.is_none();
    if !any_na {
        return None;
    }
    Some(if s.duration_s <= 0.0 {
        "no valid sample in the window"
    } else if s.heat_in_j <= 0.0 || s.entropy_in_j_per_k <= 0.0 {
        "no heat in during the window, so T_h and the figures are undefined"
    } else if t_c.is_none() {
        "no heat out during the window, so T_c and the Carnot bound are undefined (check the coolant flow)"
    } else if s.hot_mean_k().zip(t_c).is_some_and(|(h, c)| h <= c) {
        "T_h is not above T_c, so there is no Carnot bound"
    } else if s.performance().is_none() {
        "the efficiency's denominator is not positive in the window"
    } else {
        "a figure's denominator is not positive in the window"
    })
}

/// ANSI start and end codes for `severity` in `style`.
fn highlight(style: LineStyle, severity: Severity) -> (&'static str, &'static str) {
    match (style, severity) {
        (LineStyle::Ansi, Severity::Trip) => ("\x1b[1;31m", "\x1b[0m"),
        (LineStyle::Ansi, Severity::Warning) => ("\x1b[33m", "\x1b[0m"),
        _ => ("", ""),
    }
}

/// `name=value±k·u ` with a precision that suits the magnitude.
fn write_pm(out: &mut String, name: &str, value: Option<f32>, u: Option<f32>, k: f32) {
    let Some(v) = value else {
        let _ = write!(out, "{name}=n/a ");
        return;
    };
    let _ = write!(out, "{name}=");
    write_num(out, v);
    if let Some(u) = u {
        out.push('±');
        write_num(out, k * u);
    }
    out.push(' ');
}

/// About four significant digits, fixed-point where that reads well.
fn write_num(out: &mut String, x: f32) {
    let a = x.abs();
    let _ = if a == 0.0 || (0.01..1e4).contains(&a) {
        write!(out, "{x:.3}")
    } else if (1e-3..0.01).contains(&a) {
        write!(out, "{x:.4}")
    } else {
        write!(out, "{x:.2e}")
    };
}

fn write_hello(out: &mut String, h: &Hello) {
    let (a, b, c) = h.firmware_version;
    let _ = write!(
        out,
        "hello from {} firmware {a}.{b}.{c}: {}, {} ms, window {}, k={}, run {}, {}",
        h.rig_id,
        h.mode,
        h.sample_period_ms,
        h.window_samples,
        h.coverage_factor,
        h.run,
        if h.keyed {
            "commands on"
        } else {
            "no command key"
        }
    );
}

fn write_reply(out: &mut String, r: &Reply) {
    let _ = write!(
        out,
        "reply to command {} at t={:.1} s: {} ({})",
        r.counter,
        f64::from(r.t_ms) / 1000.0,
        r.code,
        r.code.meaning()
    );
}

fn write_event(out: &mut String, e: &EventFrame, style: LineStyle) {
    let ev = &e.event;
    let (on, off) = highlight(style, ev.severity);
    let _ = write!(
        out,
        "{on}{} {} {} at t={:.1} s{off}",
        ev.kind,
        ev.rule,
        ev.severity,
        f64::from(ev.t_ms) / 1000.0
    );
}

/// A carried `link_errors` row as a [`Record`].
fn loss_record(ord: i64, host_ms: i64, kind: LinkErrorKind, count: u64, detail: &str) -> Record {
    Record::Loss(LinkErrorRow {
        ord,
        host_ms,
        kind,
        count,
        detail: detail.to_string(),
    })
}
