//! `watch --publish`: every row a lab should have, from the watch's own log
//! to the broker, in order, at least once, with what the broker
//! acknowledged recorded in the log.
//!
//! ```text
//! Ingest --Logged (run, ord, prev ord, frame)--> live buffer (bounded) --+
//! the log (read-only connection) --records_after(run, sent ord)-----------+--> next record in order
//!     --> records (binary) + summary/event (JSON), QoS 1 --> broker
//! broker PubAck --> in-order acknowledged prefix --> progress thread --> publications.acked_ord
//! broker: resend (lab) --> rows again from the log;  command (lab) --> Ask::Relay --> controller
//! ```
//!
//! Nothing rests on the broker or on rumqttc keeping unacknowledged
//! messages: when a connection comes back without its session, everything
//! after the acknowledged prefix is read again from the log and published
//! again (the lab drops what it already has). Memory is bounded: at most
//! [`WINDOW`] records in flight and [`LIVE_CAP`] rows held from the feed;
//! the rest is read from the log a page at a time, so an outage of hours
//! replays from disk.
//!
//! Only this thread talks to rumqttc, so the order in which it hands
//! publishes over is the order in which rumqttc numbers them: each
//! `Outgoing::Publish(pkid)` takes the oldest publish not yet numbered,
//! except a packet id already in flight, which is a retransmission.
use std::collections::{HashMap, VecDeque};
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, RecvTimeoutError, Sender, TryRecvError};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use heatbound::wire::{self, Frame};
use rumqttc::{Client, Event, LastWill, Outgoing, Packet, QoS};
use serde_json::json;

use super::broker::{self, Broker};
use super::topics::{Body, Leaf, Outage, Record, Topics};
use crate::downlink::{Answer, Ask, Request};
use crate::ingest::Logged;
use crate::link::now_ms;
use crate::store::{self, Log, RunId};

/// Records in flight (published, not yet acknowledged) at most.
pub const WINDOW: usize = 128;
/// Rows from the feed held in memory at most; older ones are read back
/// from the log when needed.
pub const LIVE_CAP: usize = 8192;
/// Rows a lab may ask for again in one request, at most.
pub const MAX_RESEND: i64 = 100_000;

/// What a publisher is set up with.
#[derive(Clone, Debug)]
pub struct PublishConfig {
    /// The broker.
    pub broker: Broker,
    /// The topic tree.
    pub topics: Topics,
    /// The watch's log.
    pub db: PathBuf,
    /// The run this watch is writing.
    pub run: RunId,
}

/// What a publisher did, for the closing line.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct PublishTotals {
    /// Records the broker acknowledged.
    pub acknowledged: u64,
    /// Records published again after a connection came back without its
    /// session.
    pub republished: u64,
    /// Records published again because a lab asked.
    pub resent: u64,
    /// Connections made to the broker.
    pub connections: u64,
    /// Commands from the lab passed on to the controller.
    pub relayed: u64,
    /// Commands from the lab refused (bad seal, or no link).
    pub refused: u64,
    /// Records still not acknowledged when the publisher stopped.
    pub unacknowledged: u64,
}

/// A running publisher.
pub struct Publisher {
    stop: Arc<AtomicBool>,
    totals: Arc<Mutex<PublishTotals>>,
    handle: Option<JoinHandle<()>>,
}

impl Publisher {
    /// Starts publishing `config.run` (and whatever earlier runs of the log
    /// the broker has not acknowledged) from `feed`. Commands from the lab
    /// go to `requests` (the link holder's); `notice` gets one line for
    /// each change the operator should know of.
    pub fn start(
        config: PublishConfig,
        feed: Receiver<Logged>,
        requests: Option<Sender<Request>>,
        notice: Sender<String>,
    ) -> Result<Publisher, PublishError> {
        let mut writer = Log::open(&config.db)?;
        writer.begin_publication(config.run, &config.broker.url.name(), now_ms())?;
        drop(writer);
        let stop = Arc::new(AtomicBool::new(false));
        let totals = Arc::new(Mutex::new(PublishTotals::default()));
        let state = State::new(config, feed, requests, notice, Arc::clone(&totals))?;
        let stop_flag = Arc::clone(&stop);
        let handle = std::thread::Builder::new()
            .name("publish".into())
            .spawn(move || state.run(&stop_flag))
            .map_err(|e| PublishError::Thread(e.to_string()))?;
        Ok(Publisher {
            stop,
            totals,
            handle: Some(handle),
        })
    }

    /// The totals so far.
    pub fn totals(&self) -> PublishTotals {
        self.totals.lock().map(|t| *t).unwrap_or_default()
    }

    /// Stops after publishing what is left of the run (the feed should be
    /// closed: the run finished), waiting at most [`DRAIN`] for the
    /// broker's acknowledgements; then marks the rig offline and
    /// disconnects.
    pub fn finish(mut self) -> PublishTotals {
        self.stop.store(true, Ordering::SeqCst);
        if let Some(h) = self.handle.take() {
            let _ = h.join();
        }
        self.totals()
    }
}

impl Drop for Publisher {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::SeqCst);
        if let Some(h) = self.handle.take() {
            let _ = h.join();
        }
    }
}

/// Why a publisher cannot start.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PublishError {
    /// The watch's log cannot be read or written.
    #[error(transparent)]
    Log(#[from] store::StoreError),
    /// The system would not start a thread.
    #[error("cannot start the publishing thread: {0}")]
    Thread(String),
}

/// How long a stopping publisher waits for the broker.
pub const DRAIN: Duration = Duration::from_secs(10);

/// One run being published.
#[derive(Debug)]
struct RunCursor {
    run: RunId,
    /// The ord of the last record handed to rumqttc (−1: none).
    sent: i64,
    /// The rig its Hellos name, once known.
    rig: Option<String>,
    /// Rows read from the log, not yet published.
    page: VecDeque<(i64, store::Record)>,
    /// Nothing more will come: the log holds all of it and it ended.
    ended: Option<i64>,
    /// The end record was handed over.
    end_sent: bool,
    /// The run the watch is writing (fed live).
    live: bool,
}

/// What a publish was.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Tag {
    /// A record counted towards the acknowledged prefix (its id).
    Tracked(u64),
    /// Anything else (JSON, status, records sent again on request).
    Other,
}

/// A tracked record in flight.
#[derive(Debug)]
struct InFlight {
    id: u64,
    run: RunId,
    ord: i64,
    prev_ord: i64,
    acked: bool,
}

/// A lab's request to publish rows again.
#[derive(Debug)]
struct Resend {
    run: RunId,
    after: i64,
    through: i64,
    rig: String,
}

struct State {
    config: PublishConfig,
    feed: Option<Receiver<Logged>>,
    requests: Option<Sender<Request>>,
    notice: Sender<String>,
    totals: Arc<Mutex<PublishTotals>>,
    read: Log,
    log_id: i64,
    runs: VecDeque<RunCursor>,
    live: VecDeque<Logged>,
    /// Publishes handed to rumqttc, not yet numbered.
    unnumbered: VecDeque<Tag>,
    /// Numbered publishes in flight.
    numbered: HashMap<u16, Tag>,
    in_flight: VecDeque<InFlight>,
    next_id: u64,
    resends: VecDeque<Resend>,
    commands: Vec<(Receiver<Answer>, String, u32)>,
    progress: Sender<(RunId, i64)>,
    last_frame_ms: Option<i64>,
    status_sent: Option<(Instant, Option<i64>)>,
    subscribed: Option<String>,
    /// The controller's session as its latest Hello and replies tell it:
    /// what the lab needs to seal a command for it.
    session: Option<ControllerSession>,
    t: PublishTotals,
}

/// Who the controller on the live link is, for the retained status.
#[derive(Clone, Debug, PartialEq, Eq)]
struct ControllerSession {
    rig_id: String,
    session: u32,
    /// The highest command counter the controller is known to have seen
    /// in this session (its Hello's, or a later reply's).
    last_counter: u32,
}

impl State {
    fn new(
        config: PublishConfig,
        feed: Receiver<Logged>,
        requests: Option<Sender<Request>>,
        notice: Sender<String>,
        totals: Arc<Mutex<PublishTotals>>,
    ) -> Result<State, store::StoreError> {
        let read = Log::open_read(&config.db)?;
        let log_id = read.log_id()?;
        let mut runs = VecDeque::new();
        for p in read.publications(&config.broker.url.name(), Some(config.run))? {
            runs.push_back(RunCursor {
                run: p.run,
                sent: p.acked_ord,
                rig: None,
                page: VecDeque::new(),
                ended: if p.run == config.run {
                    None
                } else {
                    p.ended_host_ms
                },
                end_sent: false,
                live: p.run == config.run,
            });
        }
        let progress = progress_writer(config.db.clone(), config.broker.url.name());
        Ok(State {
            config,
            feed: Some(feed),
            requests,
            notice,
            totals,
            read,
            log_id,
            runs,
            live: VecDeque::new(),
            unnumbered: VecDeque::new(),
            numbered: HashMap::new(),
            in_flight: VecDeque::new(),
            next_id: 0,
            resends: VecDeque::new(),
            commands: Vec::new(),
            progress,
            last_frame_ms: None,
            status_sent: None,
            subscribed: None,
            session: None,
            t: PublishTotals::default(),
        })
    }

    fn say(&self, line: String) {
        let _ = self.notice.send(line);
    }

    fn publish_totals(&self) {
        if let Ok(mut t) = self.totals.lock() {
            *t = self.t;
            t.unacknowledged = self.in_flight.len() as u64;
        }
    }

    /// The rig the live run's Hellos name, else the first known.
    fn rig(&mut self) -> Option<String> {
        for i in 0..self.runs.len() {
            self.learn_rig(i);
        }
        let live = self
            .runs
            .iter()
            .find(|r| r.live)
            .and_then(|r| r.rig.clone());
        live.or_else(|| self.runs.iter().find_map(|r| r.rig.clone()))
    }

    fn learn_rig(&mut self, i: usize) {
        let Some(cursor) = self.runs.get(i) else {
            return;
        };
        if cursor.rig.is_some() {
            return;
        }
        let run = cursor.run;
        let mut rig: Option<String> = self.read.connection().ok().and_then(|c| {
            c.query_row(
                "SELECT rig_id FROM hellos WHERE run_id = ?1 ORDER BY ord LIMIT 1",
                [run],
                |r| r.get(0),
            )
            .ok()
        });
        if rig.is_none() {
            rig = self.live.iter().find_map(|l| match &l.record {
                store::Record::Frame(s) if l.run == run => match &s.frame {
                    Frame::Hello(h) => Some(h.rig_id.as_str().to_string()),
                    _ => None,
                },
                _ => None,
            });
        }
        if let Some(c) = self.runs.get_mut(i) {
            c.rig = rig;
        }
    }

    fn run(mut self, stop: &AtomicBool) {
        // Wait for a rig id: the topics and the last will need it.
        let rig = loop {
            self.drain_feed();
            if let Some(rig) = self.rig() {
                break rig;
            }
            if stop.load(Ordering::SeqCst) && self.feed.is_none() {
                self.say(
                    "publish: no Hello in the run, so no rig id to publish under: nothing published"
                        .into(),
                );
                return;
            }
            std::thread::sleep(Duration::from_millis(50));
        };
        let status = self.config.topics.rig(&rig, Leaf::Status);
        let will = LastWill::new(
            status.clone(),
            json!({"state": "offline", "rig": rig, "why": "the publishing watch was lost"})
                .to_string(),
            QoS::AtLeastOnce,
            true,
        );
        let client_id = format!("heatbound-watch-{:x}", self.log_id);
        let options = self.config.broker.options(&client_id, Some(will));
        let (client, mut connection) = Client::new(options, 1024);
        self.say(format!(
            "publish: rig {rig} to {} (topics under {}), as {client_id}",
            self.config.broker.url.name(),
            self.config
                .topics
                .rig(&rig, Leaf::Records)
                .trim_end_matches("/records")
        ));
        let mut connected = false;
        let mut backoff = Duration::from_millis(250);
        let mut last_error: Option<String> = None;
        let mut drain_deadline: Option<Instant> = None;
        loop {
            self.drain_feed();
            if stop.load(Ordering::SeqCst) && drain_deadline.is_none() {
                drain_deadline = Some(Instant::now() + DRAIN);
            }
            if let Some(deadline) = drain_deadline
                && (Instant::now() >= deadline || (self.feed.is_none() && self.all_done()))
            {
                break;
            }
            if connected {
                self.fill(&client);
                self.settle_commands(&client, &rig);
                self.maybe_status(&client, &rig, false);
            }
            let event = if connected {
                match connection.recv_timeout(Duration::from_millis(20)) {
                    Ok(e) => Some(e),
                    Err(rumqttc::RecvTimeoutError::Timeout) => None,
                    Err(rumqttc::RecvTimeoutError::Disconnected) => break,
                }
            } else {
                match connection.recv() {
                    Ok(e) => Some(e),
                    Err(_) => break,
                }
            };
            match event {
                None => {}
                Some(Ok(Event::Incoming(Packet::ConnAck(ack)))) => {
                    connected = true;
                    backoff = Duration::from_millis(250);
                    self.t.connections += 1;
                    if last_error.take().is_some() {
                        self.say(format!(
                            "publish: broker {} is back",
                            self.config.broker.url.name()
                        ));
                    }
                    if !ack.session_present {
                        self.rewind();
                    }
                    self.subscribed = None;
                    self.subscribe(&client, &rig);
                    self.maybe_status(&client, &rig, true);
                }
                Some(Ok(Event::Outgoing(Outgoing::Publish(pkid)))) => {
                    if !self.numbered.contains_key(&pkid)
                        && let Some(tag) = self.unnumbered.pop_front()
                    {
                        self.numbered.insert(pkid, tag);
                    }
                }
                Some(Ok(Event::Incoming(Packet::PubAck(ack)))) => {
                    if let Some(Tag::Tracked(id)) = self.numbered.remove(&ack.pkid) {
                        self.acked(id);
                    }
                }
                Some(Ok(Event::Incoming(Packet::Publish(p)))) => self.incoming(&client, &p),
                Some(Ok(_)) => {}
                Some(Err(e)) => {
                    connected = false;
                    let words = broker::describe(&e);
                    if last_error.as_deref() != Some(words.as_str()) {
                        self.say(format!(
                            "publish: broker {}: {words}; rows stay in the log and are published in order when it is back",
                            self.config.broker.url.name()
                        ));
                        last_error = Some(words);
                    }
                    if drain_deadline.is_some() {
                        break;
                    }
                    let wait = if broker::login_refused(&e) {
                        Duration::from_secs(30)
                    } else {
                        backoff
                    };
                    self.sleep_draining(wait, stop);
                    backoff = (backoff * 2).min(Duration::from_secs(2));
                }
            }
            self.publish_totals();
        }
        if connected {
            let last = self.last_frame_ms;
            let _ = client.try_publish(
                status,
                QoS::AtLeastOnce,
                true,
                json!({"state": "offline", "rig": rig, "last_frame_host_ms": last, "why": "watch stopped"})
                    .to_string(),
            );
            self.unnumbered.push_back(Tag::Other);
            let _ = client.try_disconnect();
            // Let the status and the disconnect go out.
            let until = Instant::now() + Duration::from_secs(2);
            while Instant::now() < until {
                match connection.recv_timeout(Duration::from_millis(100)) {
                    Ok(Ok(Event::Outgoing(Outgoing::Disconnect))) | Ok(Err(_)) | Err(_) => break,
                    _ => {}
                }
            }
        }
        self.publish_totals();
    }

    /// Sleeps, still taking the feed.
    fn sleep_draining(&mut self, wait: Duration, stop: &AtomicBool) {
        let until = Instant::now() + wait;
        while Instant::now() < until && !stop.load(Ordering::SeqCst) {
            self.drain_feed();
            std::thread::sleep(Duration::from_millis(20));
        }
    }

    fn all_done(&self) -> bool {
        self.in_flight.is_empty() && self.resends.is_empty() && self.runs.iter().all(|r| r.end_sent)
    }

    /// Takes what the feed has. A closed feed means the live run ended:
    /// from then on it is read from the log like any other.
    fn drain_feed(&mut self) {
        let Some(feed) = &self.feed else {
            return;
        };
        loop {
            match feed.try_recv() {
                Ok(logged) => {
                    if let store::Record::Frame(s) = &logged.record {
                        self.last_frame_ms = Some(s.host_ms);
                        match &s.frame {
                            Frame::Hello(h) => {
                                self.session = Some(ControllerSession {
                                    rig_id: h.rig_id.as_str().to_string(),
                                    session: h.session,
                                    last_counter: h.last_counter,
                                });
                                // A new session: tell the lab now.
                                self.status_sent = None;
                            }
                            Frame::Reply(r) => {
                                if let Some(c) = &mut self.session {
                                    c.last_counter = c.last_counter.max(r.counter);
                                }
                            }
                            _ => {}
                        }
                    }
                    self.live.push_back(logged);
                    if self.live.len() > LIVE_CAP {
                        self.live.pop_front();
                    }
                }
                Err(TryRecvError::Empty) => break,
                Err(TryRecvError::Disconnected) => {
                    self.feed = None;
                    let run = self.config.run;
                    let ended = self.read.run_ended(run).ok().flatten();
                    for c in self.runs.iter_mut().filter(|c| c.run == run) {
                        c.live = false;
                        c.ended = ended.or(Some(now_ms()));
                    }
                    break;
                }
            }
        }
    }

    /// The connection came back without its session: whatever was not
    /// acknowledged is published again from the log.
    fn rewind(&mut self) {
        let mut first: HashMap<RunId, i64> = HashMap::new();
        for f in self.in_flight.iter().filter(|f| !f.acked) {
            first.entry(f.run).or_insert(f.prev_ord);
        }
        let mut again = 0u64;
        for c in self.runs.iter_mut() {
            if let Some(&prev) = first.get(&c.run) {
                again += u64::try_from(c.sent - prev).unwrap_or(0);
                c.sent = prev;
                c.page.clear();
            }
            if c.end_sent && first.contains_key(&c.run) {
                c.end_sent = false;
            }
        }
        self.t.republished += again;
        self.in_flight.clear();
        self.numbered.clear();
        self.unnumbered.clear();
    }

    fn acked(&mut self, id: u64) {
        if let Some(front) = self.in_flight.front()
            && let Some(f) = usize::try_from(id.wrapping_sub(front.id))
                .ok()
                .and_then(|i| self.in_flight.get_mut(i))
            && f.id == id
        {
            f.acked = true;
        }
        let mut last: HashMap<RunId, i64> = HashMap::new();
        while self.in_flight.front().is_some_and(|f| f.acked) {
            if let Some(f) = self.in_flight.pop_front() {
                self.t.acknowledged += 1;
                last.insert(f.run, f.ord);
            }
        }
        for (run, ord) in last {
            let _ = self.progress.send((run, ord));
        }
        // A run read to its end whose records are all acknowledged is done.
        let in_flight = &self.in_flight;
        self.runs
            .retain(|c| !(c.end_sent && !c.live && !in_flight.iter().any(|f| f.run == c.run)));
    }

    /// Hands records to rumqttc while the window has room.
    fn fill(&mut self, client: &Client) {
        // Requests from the lab first: they fill a hole someone is waiting on.
        while self.in_flight.len() + self.unnumbered.len() < WINDOW {
            let Some(job) = self.resends.front_mut() else {
                break;
            };
            let rows = self
                .read
                .records_after(job.run, job.after, 256)
                .unwrap_or_default();
            let rows: Vec<_> = rows
                .into_iter()
                .filter(|(o, _)| *o <= job.through)
                .collect();
            if rows.is_empty() {
                // Past a finished run's last row: its end too, so that the
                // lab can close the run.
                let (run, after, through, rig) = (job.run, job.after, job.through, job.rig.clone());
                self.resends.pop_front();
                let live = run == self.config.run && self.feed.is_some();
                let asked_past_end = through > after;
                if !live && asked_past_end {
                    let record = self.end_record(run, after);
                    let topic = self.config.topics.rig(&rig, Leaf::Records);
                    if client
                        .try_publish(topic, QoS::AtLeastOnce, false, record.encode())
                        .is_ok()
                    {
                        self.unnumbered.push_back(Tag::Other);
                    }
                }
                continue;
            }
            let (run, rig) = (job.run, job.rig.clone());
            // The lab asks after the last row it has, a carried one.
            let mut prev = job.after;
            let topic = self.config.topics.rig(&rig, Leaf::Records);
            for (ord, row) in rows {
                let record = to_record(self.log_id, run, ord, prev, &row);
                prev = ord;
                if client
                    .try_publish(topic.clone(), QoS::AtLeastOnce, false, record.encode())
                    .is_err()
                {
                    return;
                }
                self.unnumbered.push_back(Tag::Other);
                self.t.resent += 1;
                if let Some(job) = self.resends.front_mut() {
                    job.after = ord;
                }
            }
        }
        while self.in_flight.len() < WINDOW && self.unnumbered.len() < WINDOW {
            let Some((rig, record, frame)) = self.next_record() else {
                break;
            };
            let topics = &self.config.topics;
            let bytes = record.encode();
            if client
                .try_publish(
                    topics.rig(&rig, Leaf::Records),
                    QoS::AtLeastOnce,
                    false,
                    bytes,
                )
                .is_err()
            {
                // rumqttc's queue is full: the cursor did not move, try later.
                self.unsend(record.run, record.prev_ord);
                break;
            }
            let id = self.next_id;
            self.next_id += 1;
            self.unnumbered.push_back(Tag::Tracked(id));
            self.in_flight.push_back(InFlight {
                id,
                run: record.run,
                ord: record.ord,
                prev_ord: record.prev_ord,
                acked: false,
            });
            if let Some(frame) = frame {
                let leaf = match &frame.frame {
                    Frame::Summary(_) => Some(Leaf::Summary),
                    Frame::Event(_) => Some(Leaf::Event),
                    _ => None,
                };
                if let Some(leaf) = leaf {
                    let mut value = crate::frame_json::frame_json(&frame.frame, frame.host_ms);
                    if let Some(obj) = value.as_object_mut() {
                        obj.insert("rig".into(), json!(rig));
                        obj.insert("log".into(), json!(self.log_id));
                        obj.insert("run".into(), json!(record.run));
                        obj.insert("ord".into(), json!(record.ord));
                    }
                    if client
                        .try_publish(
                            topics.rig(&rig, leaf),
                            QoS::AtLeastOnce,
                            false,
                            value.to_string(),
                        )
                        .is_ok()
                    {
                        self.unnumbered.push_back(Tag::Other);
                    }
                }
            }
        }
    }

    /// Puts a run's cursor back after a publish that did not go out.
    fn unsend(&mut self, run: RunId, prev_ord: i64) {
        for c in self.runs.iter_mut().filter(|c| c.run == run) {
            c.sent = prev_ord;
            c.page.clear();
            c.end_sent = false;
        }
    }

    /// The next record in order, with its rig and (for a frame) the frame.
    fn next_record(&mut self) -> Option<(String, Record, Option<store::Stored>)> {
        let mut i = 0;
        while i < self.runs.len() {
            self.learn_rig(i);
            let log_id = self.log_id;
            let c = self.runs.get_mut(i)?;
            let Some(rig) = c.rig.clone() else {
                // No Hello yet: its rows wait for the rig's name.
                if c.live {
                    return None;
                }
                i += 1;
                continue;
            };
            if c.end_sent {
                i += 1;
                continue;
            }
            // The live run: from memory when the feed holds the next row.
            if c.live {
                while self.live.front().is_some_and(|l| l.ord <= c.sent) {
                    self.live.pop_front();
                }
                if let Some(l) = self.live.front()
                    && l.prev_ord == c.sent
                    && l.run == c.run
                    && let Some(l) = self.live.pop_front()
                {
                    c.sent = l.ord;
                    c.page.clear();
                    return Some(finish(rig, log_id, l.run, l.ord, l.prev_ord, l.record));
                }
            }
            if c.page.is_empty() {
                let rows = self
                    .read
                    .records_after(c.run, c.sent, 512)
                    .unwrap_or_default();
                c.page.extend(rows);
            }
            while c.page.front().is_some_and(|(o, _)| *o <= c.sent) {
                c.page.pop_front();
            }
            if let Some((ord, row)) = c.page.pop_front() {
                let prev = c.sent;
                c.sent = ord;
                return Some(finish(rig, log_id, c.run, ord, prev, row));
            }
            if c.live {
                // Caught up: what comes next is not committed yet.
                return None;
            }
            // A run its writer closed, or one it never closed (a watch that
            // was killed): everything it holds is out, and its end says so,
            // so that a lab missing its last rows asks for them.
            c.end_sent = true;
            let (run, prev, ended) = (c.run, c.sent, c.ended);
            c.sent += 1;
            let record = self.end_record_at(run, prev, ended);
            return Some((rig, record, None));
        }
        None
    }

    /// The end record of `run`, after its last row `prev`.
    fn end_record(&self, run: RunId, prev: i64) -> Record {
        let ended = self.read.run_ended(run).ok().flatten();
        self.end_record_at(run, prev, ended)
    }

    /// The end record of `run`, after `prev`, ended at `ended` (or now, for
    /// a run its writer never closed).
    fn end_record_at(&self, run: RunId, prev: i64, ended: Option<i64>) -> Record {
        let outages = self
            .read
            .outages(run)
            .unwrap_or_default()
            .into_iter()
            .map(|o| Outage {
                started_host_ms: o.started_host_ms,
                ended_host_ms: o.ended_host_ms,
                reason: o.reason,
            })
            .collect();
        Record {
            log_id: self.log_id,
            run,
            ord: prev + 1,
            prev_ord: prev,
            host_ms: ended.unwrap_or_else(now_ms),
            body: Body::End(outages),
        }
    }

    fn subscribe(&mut self, client: &Client, rig: &str) {
        if self.subscribed.as_deref() == Some(rig) {
            return;
        }
        let topics = &self.config.topics;
        let ok = client
            .try_subscribe(topics.rig(rig, Leaf::Resend), QoS::AtLeastOnce)
            .and_then(|()| client.try_subscribe(topics.rig(rig, Leaf::Command), QoS::AtLeastOnce));
        if ok.is_ok() {
            self.subscribed = Some(rig.to_string());
        }
    }

    /// The retained status: at connection, and every 5 s while frames come.
    fn maybe_status(&mut self, client: &Client, rig: &str, now: bool) {
        let due = match self.status_sent {
            None => true,
            Some((at, last)) => {
                now || (at.elapsed() >= Duration::from_secs(2) && last != self.last_frame_ms)
            }
        };
        if !due {
            return;
        }
        let last_ord = self
            .runs
            .iter()
            .find(|c| c.run == self.config.run)
            .map_or(-1, |c| c.sent);
        // A command from the lab can be sealed only for a controller this
        // watch holds a link to, in the session it reported.
        let controller = self
            .session
            .as_ref()
            .filter(|_| self.requests.is_some() && self.feed.is_some())
            .map(|c| json!({"rig_id": c.rig_id, "session": c.session, "last_counter": c.last_counter}));
        let body = json!({
            "state": "online",
            "rig": rig,
            "last_frame_host_ms": self.last_frame_ms,
            "log": self.log_id,
            "run": self.config.run,
            "last_ord": last_ord,
            "controller": controller,
            "watch_pid": std::process::id(),
            "tool_version": env!("CARGO_PKG_VERSION"),
        });
        if client
            .try_publish(
                self.config.topics.rig(rig, Leaf::Status),
                QoS::AtLeastOnce,
                true,
                body.to_string(),
            )
            .is_ok()
        {
            self.unnumbered.push_back(Tag::Other);
            self.status_sent = Some((Instant::now(), self.last_frame_ms));
        }
    }

    /// A message on a topic this watch listens to.
    fn incoming(&mut self, client: &Client, p: &rumqttc::Publish) {
        let Some((rig, leaf)) = self.config.topics.parse(&p.topic) else {
            return;
        };
        match leaf {
            Leaf::Resend => {
                #[derive(serde::Deserialize)]
                struct Ask {
                    log: i64,
                    run: i64,
                    after_ord: i64,
                    through_ord: i64,
                }
                let Ok(ask) = serde_json::from_slice::<Ask>(&p.payload) else {
                    self.say(format!(
                        "publish: a resend request on {} that is not {{log, run, after_ord, through_ord}} JSON: ignored",
                        p.topic
                    ));
                    return;
                };
                if ask.log != self.log_id {
                    return;
                }
                let through = ask
                    .through_ord
                    .min(ask.after_ord.saturating_add(MAX_RESEND));
                if self.resends.len() >= 64 || through <= ask.after_ord {
                    return;
                }
                self.resends.push_back(Resend {
                    run: ask.run,
                    after: ask.after_ord,
                    through,
                    rig,
                });
            }
            Leaf::Command => {
                let bytes = p.payload.to_vec();
                let counter = {
                    let body = bytes.strip_suffix(&[0]).unwrap_or(&bytes);
                    let mut copy = body.to_vec();
                    wire::decode_command(&mut copy).map_or(0, |r| r.frame.counter)
                };
                let Some(requests) = &self.requests else {
                    self.t.refused += 1;
                    self.command_result(
                        client,
                        &rig,
                        counter,
                        "refused",
                        "this watch holds no link to a controller",
                    );
                    return;
                };
                let (tx, rx) = mpsc::channel();
                let request = Request {
                    origin: format!("lab via {}", self.config.broker.url.name()),
                    ask: Ask::Relay(bytes),
                    timeout: Duration::from_secs(10),
                    answer: tx,
                };
                if requests.send(request).is_ok() {
                    self.commands.push((rx, rig, counter));
                }
            }
            _ => {}
        }
    }

    /// Publishes what became of the commands relayed.
    fn settle_commands(&mut self, client: &Client, _rig: &str) {
        let mut done = Vec::new();
        for (i, (rx, rig, counter)) in self.commands.iter().enumerate() {
            match rx.try_recv() {
                Ok(answer) => done.push((i, rig.clone(), *counter, Some(answer))),
                Err(TryRecvError::Disconnected) => done.push((i, rig.clone(), *counter, None)),
                Err(TryRecvError::Empty) => {}
            }
        }
        for (i, rig, counter, answer) in done.into_iter().rev() {
            self.commands.remove(i);
            let (outcome, words) = match answer {
                Some(Answer::Replied { code, .. }) => {
                    self.t.relayed += 1;
                    (code.as_str().to_string(), String::new())
                }
                Some(Answer::Unavailable { reason, message }) => {
                    if reason == "refused" {
                        self.t.refused += 1;
                        self.say(format!("publish: a command from the broker {message}"));
                    }
                    (reason.to_string(), message)
                }
                Some(Answer::Noted) => ("noted".into(), String::new()),
                None => ("no_link".into(), "the link holder stopped".into()),
            };
            self.command_result(client, &rig, counter, &outcome, &words);
        }
    }

    fn command_result(
        &mut self,
        client: &Client,
        rig: &str,
        counter: u32,
        outcome: &str,
        words: &str,
    ) {
        let body =
            json!({"counter": counter, "outcome": outcome, "message": words, "host_ms": now_ms()});
        if client
            .try_publish(
                self.config.topics.rig(rig, Leaf::CommandResult),
                QoS::AtLeastOnce,
                false,
                body.to_string(),
            )
            .is_ok()
        {
            self.unnumbered.push_back(Tag::Other);
        }
    }
}

fn to_record(log_id: i64, run: RunId, ord: i64, prev_ord: i64, row: &store::Record) -> Record {
    let (host_ms, body) = match row {
        store::Record::Frame(s) => (s.host_ms, Body::Frame(frame_bytes(&s.frame))),
        store::Record::Loss(l) => (
            l.host_ms,
            Body::Loss {
                kind: l.kind,
                count: l.count,
                detail: l.detail.clone(),
            },
        ),
    };
    Record {
        log_id,
        run,
        ord,
        prev_ord,
        host_ms,
        body,
    }
}

fn finish(
    rig: String,
    log_id: i64,
    run: RunId,
    ord: i64,
    prev_ord: i64,
    row: store::Record,
) -> (String, Record, Option<store::Stored>) {
    let record = to_record(log_id, run, ord, prev_ord, &row);
    let frame = match row {
        store::Record::Frame(s) => Some(s),
        store::Record::Loss(_) => None,
    };
    (rig, record, frame)
}

/// A frame's wire bytes: the log keeps every field exactly, so encoding
/// the logged frame gives the bytes the controller sent.
pub fn frame_bytes(frame: &Frame) -> Vec<u8> {
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    match wire::encode(frame, &mut buf) {
        Ok(n) => buf.get(..n).unwrap_or_default().to_vec(),
        Err(_) => Vec::new(),
    }
}

/// A thread that writes the broker's acknowledgements into the log, at
/// most twice a second, so the publishing thread never waits on the
/// ingest's open batch.
fn progress_writer(db: PathBuf, broker: String) -> Sender<(RunId, i64)> {
    let (tx, rx) = mpsc::channel::<(RunId, i64)>();
    let _ = std::thread::Builder::new()
        .name("publish-progress".into())
        .spawn(move || {
            let Ok(mut log) = Log::open(&db) else {
                return;
            };
            let _ = broker;
            let mut pending: HashMap<RunId, i64> = HashMap::new();
            let mut written = Instant::now();
            loop {
                let closed = match rx.recv_timeout(Duration::from_millis(100)) {
                    Ok((run, ord)) => {
                        let e = pending.entry(run).or_insert(ord);
                        *e = (*e).max(ord);
                        false
                    }
                    Err(RecvTimeoutError::Timeout) => false,
                    Err(RecvTimeoutError::Disconnected) => true,
                };
                if closed || written.elapsed() >= Duration::from_millis(500) {
                    for (run, ord) in pending.drain() {
                        let _ = log.set_published(run, ord, now_ms());
                    }
                    written = Instant::now();
                }
                if closed {
                    return;
                }
            }
        });
    tx
}
