//! Link sources for `watch` and `demo`: where the bytes come from before
//! [`crate::ingest`] turns them into frames.
//!
//! ```text
//! capture file | stdin | serial | TCP --(read, timeout)--> bytes --> ingest::Ingest
//! link drop --> outage row, reconnect with backoff 100 ms .. 5 s, same run
//! ```
//!
//! The read loops stop at the run's [`Bounds`]: end of input, a stop signal
//! ([`STOP`]), a deadline or the summary limit; [`closing_line`] says which.

use std::io::{ErrorKind, Read};
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use crate::ingest::{Ingest, Totals};
use crate::store::StoreError;

/// How long one read waits before the loop checks the bounds, the signal
/// flag and the batch age.
pub const READ_TIMEOUT: Duration = Duration::from_millis(100);
/// First reconnect delay; doubles up to [`BACKOFF_MAX`].
const BACKOFF_MIN: Duration = Duration::from_millis(100);
/// Longest reconnect delay.
const BACKOFF_MAX: Duration = Duration::from_secs(5);
/// Read buffer size.
const CHUNK: usize = 64 * 1024;

/// Set by the SIGINT/SIGTERM handler; the read loops end within one read
/// timeout once it is set.
pub static STOP: AtomicBool = AtomicBool::new(false);

/// What went wrong while reading a link into the log.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LinkError {
    /// The log refused a write.
    #[error("cannot log to {db}")]
    Log {
        /// The log file.
        db: String,
        /// What the log said.
        #[source]
        source: Box<StoreError>,
    },
    /// A capture (file or stdin) could not be read.
    #[error("{name}: cannot read")]
    Read {
        /// The capture's name.
        name: String,
        /// What the system said.
        #[source]
        source: std::io::Error,
    },
}

/// Host time, Unix milliseconds.
pub fn now_ms() -> i64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| i64::try_from(d.as_millis()).unwrap_or(i64::MAX))
}

/// Why the read loop ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum End {
    /// The input ended.
    Eof,
    /// A stop signal arrived.
    Signal,
    /// The deadline passed.
    Duration,
    /// The summary limit was reached.
    Summaries,
}

/// The bounds of the run.
pub struct Bounds {
    /// When the run ends at the latest; `None` for no deadline.
    pub deadline: Option<Instant>,
}

impl Bounds {
    fn check(&self, ingest: &Ingest) -> Option<End> {
        if ingest.limit_reached() {
            Some(End::Summaries)
        } else if STOP.load(Ordering::Relaxed) {
            Some(End::Signal)
        } else if self.deadline.is_some_and(|d| Instant::now() >= d) {
            Some(End::Duration)
        } else {
            None
        }
    }
}

fn print_line(line: &str) {
    println!("{line}");
}

/// Feeds one read's bytes and commits a batch that is due.
fn feed(ingest: &mut Ingest, bytes: &[u8], db: &str) -> Result<(), LinkError> {
    let now = now_ms();
    ingest
        .feed(bytes, now, print_line)
        .and_then(|()| ingest.tick(now))
        .map_err(|source| LinkError::Log {
            db: db.to_string(),
            source: Box::new(source),
        })
}

/// Reads a capture (file or stdin) to its end.
pub fn read_to_end(
    ingest: &mut Ingest,
    bounds: &Bounds,
    mut r: impl Read,
    name: &str,
) -> Result<End, LinkError> {
    let db = ingest.log().path().display().to_string();
    let mut buf = vec![0u8; CHUNK];
    loop {
        if let Some(end) = bounds.check(ingest) {
            return Ok(end);
        }
        let n = match r.read(&mut buf) {
            Ok(0) => return Ok(End::Eof),
            Ok(n) => n,
            Err(e) if e.kind() == ErrorKind::Interrupted => continue,
            Err(source) => {
                return Err(LinkError::Read {
                    name: name.to_string(),
                    source,
                });
            }
        };
        feed(ingest, buf.get(..n).unwrap_or(&[]), &db)?;
    }
}

/// Reads a link that may drop: on EOF or an error, records an outage and
/// reconnects with exponential backoff, in the same run.
pub fn link_loop(
    ingest: &mut Ingest,
    bounds: &Bounds,
    source: &str,
    mut connect: impl FnMut() -> std::result::Result<Box<dyn Read>, String>,
) -> Result<End, LinkError> {
    let db = ingest.log().path().display().to_string();
    let mut buf = vec![0u8; CHUNK];
    let mut backoff = BACKOFF_MIN;
    let mut conn: Option<Box<dyn Read>> = None;
    loop {
        if let Some(end) = bounds.check(ingest) {
            return Ok(end);
        }
        let Some(stream) = conn.as_mut() else {
            match connect() {
                Ok(c) => {
                    conn = Some(c);
                    backoff = BACKOFF_MIN;
                    if ingest.totals().outages > 0 {
                        eprintln!("heatbound watch: {source}: link back");
                    }
                    ingest.link_up(now_ms()).map_err(|source| LinkError::Log {
                        db: db.to_string(),
                        source: Box::new(source),
                    })?;
                }
                Err(reason) => {
                    down(ingest, &reason, &db)?;
                    wait(bounds, ingest, backoff);
                    backoff = (backoff * 2).min(BACKOFF_MAX);
                }
            }
            continue;
        };
        match stream.read(&mut buf) {
            Ok(0) => {
                conn = None;
                down(ingest, &format!("{source}: connection closed"), &db)?;
                wait(bounds, ingest, backoff);
            }
            Ok(n) => feed(ingest, buf.get(..n).unwrap_or(&[]), &db)?,
            Err(e) if matches!(e.kind(), ErrorKind::WouldBlock | ErrorKind::TimedOut) => {
                ingest.tick(now_ms()).map_err(|source| LinkError::Log {
                    db: db.to_string(),
                    source: Box::new(source),
                })?;
            }
            Err(e) if e.kind() == ErrorKind::Interrupted => {}
            Err(e) => {
                conn = None;
                down(ingest, &format!("{source}: read failed: {e}"), &db)?;
                wait(bounds, ingest, backoff);
            }
        }
    }
}

/// Records an outage (once per drop) and tells the operator.
fn down(ingest: &mut Ingest, reason: &str, db: &str) -> Result<(), LinkError> {
    let first = ingest.totals().outages;
    ingest
        .link_down(now_ms(), reason)
        .map_err(|source| LinkError::Log {
            db: db.to_string(),
            source: Box::new(source),
        })?;
    if ingest.totals().outages != first {
        eprintln!("heatbound watch: link down ({reason}); reconnecting");
    }
    Ok(())
}

/// Sleeps `delay`, waking early for a signal or the deadline.
fn wait(bounds: &Bounds, ingest: &Ingest, delay: Duration) {
    let until = Instant::now() + delay;
    while Instant::now() < until && bounds.check(ingest).is_none() {
        std::thread::sleep(Duration::from_millis(20).min(delay));
    }
}

/// The line printed when a run closes: why it ended and its totals.
pub fn closing_line(t: &Totals, end: End, db: &Path) -> String {
    let why = match end {
        End::Eof => "end of input",
        End::Signal => "interrupted",
        End::Duration => "--max-duration-s reached",
        End::Summaries => "--max-summaries reached",
    };
    format!(
        "run {} closed ({why}): {} frames ({} hellos, {} summaries, {} events); \
         {} lost (crc {}, overlong {}, malformed {}, unknown_version {}); \
         {} gaps ({} summaries missing), {} duplicates, {} restarts, {} outages; log {}",
        t.run_id,
        t.frames,
        t.hellos,
        t.summaries,
        t.events,
        t.losses(),
        t.crc_errors,
        t.overlong,
        t.malformed,
        t.unknown_version,
        t.gaps,
        t.missing_summaries,
        t.duplicates,
        t.restarts,
        t.outages,
        db.display()
    )
}
