//! The link to a controller, on the host: where `watch` and `demo` read the
//! wire bytes from, before [`crate::ingest`] decodes and logs them.
//!
//! ```text
//! Source::Serial | Source::Tcp | a capture or stdin  --(read, 100 ms timeout)--> bytes
//!     --> Ingest::feed --> the log and live lines
//! a link that worked drops or stalls --> outage row, reconnect with backoff 100 ms .. 5 s
//! ```
//!
//! The link is two-way: the holder also writes operators' commands to the
//! controller ([`crate::downlink`]), arriving on [`Commands::requests`]
//! from the control socket, and matches the controller's replies.
//!
//! A source is checked before the run starts: a malformed address, a host
//! name that does not resolve or a serial port that does not exist is an
//! error at once. A link is reconnected only once it has worked: the first
//! connection gets [`LinkOptions::first_connect`] to come up (an emulator
//! may still be starting), then the run ends with an error.
use std::io::{ErrorKind, Read, Write};
use std::net::{SocketAddr, TcpStream, ToSocketAddrs};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::Receiver;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use crate::control::LinkStatus;
use crate::downlink::{Downlink, Request};
use crate::ingest::{Ingest, Totals};
use crate::store::StoreError;

/// How long one read waits before the loop checks the bounds, the stop
/// flag and the batch age.
const READ_TIMEOUT: Duration = Duration::from_millis(100);
/// First reconnect delay; doubles up to [`BACKOFF_MAX`].
const BACKOFF_MIN: Duration = Duration::from_millis(100);
/// Longest reconnect delay.
const BACKOFF_MAX: Duration = Duration::from_secs(5);
/// Read buffer size.
const CHUNK: usize = 64 * 1024;

/// Host time, Unix milliseconds.
pub fn now_ms() -> i64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| i64::try_from(d.as_millis()).unwrap_or(i64::MAX))
}

/// What went wrong with the link.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LinkError {
    /// `--tcp` was not `HOST:PORT`, or the host does not resolve.
    #[error("--tcp {addr}: {reason}")]
    BadAddress {
        /// The address as given.
        addr: String,
        /// Why it cannot be used.
        reason: String,
    },
    /// `--serial` names a port that does not exist.
    #[error(
        "--serial {path}: no such port (is the controller plugged in? `ls /dev/tty*` lists the ports)"
    )]
    NoSuchPort {
        /// The path as given.
        path: String,
    },
    /// The first connection never came up.
    #[error(
        "{source_name}: {reason}; gave up after {waited_s:.0} s (a link is reconnected only once it has worked)"
    )]
    NeverConnected {
        /// The source, as logged.
        source_name: String,
        /// The last reason.
        reason: String,
        /// How long it was tried.
        waited_s: f64,
    },
    /// Reading a capture or stdin failed.
    #[error("{name}: cannot read: {source}")]
    Read {
        /// The input.
        name: String,
        /// The OS's error.
        #[source]
        source: std::io::Error,
    },
    /// The log could not be written.
    #[error(transparent)]
    Log(#[from] StoreError),
    /// The thread reading the link stopped without closing the run.
    #[error(
        "the link's reader stopped unexpectedly; the log holds every batch committed before, and the run is not closed"
    )]
    Stopped,
}

/// Where the bytes come from.
#[derive(Clone, Debug)]
pub enum Source {
    /// A serial port, raw 8N1.
    Serial {
        /// The port's path.
        path: String,
        /// Its baud rate.
        baud: u32,
    },
    /// A TCP server: an emulator's serial socket, `heatbound simulate --listen`.
    Tcp {
        /// The address as given.
        addr: String,
        /// What it resolved to.
        resolved: Vec<SocketAddr>,
    },
}

impl Source {
    /// A TCP source: `addr` must be `HOST:PORT` with a port from 1 to 65535
    /// and a host that resolves.
    pub fn tcp(addr: &str) -> Result<Source, LinkError> {
        let bad = |reason: String| LinkError::BadAddress {
            addr: addr.to_string(),
            reason,
        };
        let Some((host, port)) = addr.rsplit_once(':') else {
            return Err(bad("not HOST:PORT (e.g. 127.0.0.1:4000)".into()));
        };
        if host.is_empty() {
            return Err(bad("no host before the port".into()));
        }
        match port.parse::<u16>() {
            Ok(0) | Err(_) => return Err(bad(format!("port {port:?} is not 1 to 65535"))),
            Ok(_) => {}
        }
        let resolved: Vec<SocketAddr> = addr
            .to_socket_addrs()
            .map_err(|e| bad(format!("host {host:?} does not resolve ({e})")))?
            .collect();
        if resolved.is_empty() {
            return Err(bad(format!("host {host:?} has no address")));
        }
        Ok(Source::Tcp {
            addr: addr.to_string(),
            resolved,
        })
    }

    /// A serial source: the port must exist.
    pub fn serial(path: &str, baud: u32) -> Result<Source, LinkError> {
        if !Path::new(path).exists() {
            return Err(LinkError::NoSuchPort {
                path: path.to_string(),
            });
        }
        Ok(Source::Serial {
            path: path.to_string(),
            baud,
        })
    }

    /// The source as the log names it (`serial:/dev/ttyUSB0`, `tcp:host:port`).
    pub fn name(&self) -> String {
        match self {
            Source::Serial { path, .. } => format!("serial:{path}"),
            Source::Tcp { addr, .. } => format!("tcp:{addr}"),
        }
    }

    fn connect(&self) -> Result<Conn, String> {
        match self {
            Source::Serial { path, baud } => {
                let port = serialport::new(path, *baud)
                    .data_bits(serialport::DataBits::Eight)
                    .parity(serialport::Parity::None)
                    .stop_bits(serialport::StopBits::One)
                    .flow_control(serialport::FlowControl::None)
                    .timeout(READ_TIMEOUT)
                    .open()
                    .map_err(|e| format!("cannot open {path}: {}", e.description))?;
                let writer = port
                    .try_clone()
                    .map_err(|e| format!("cannot open {path} for writing: {}", e.description))?;
                Ok(Conn {
                    reader: Box::new(port),
                    writer: Some(Box::new(writer)),
                })
            }
            Source::Tcp { addr, resolved } => {
                let stream = TcpStream::connect(resolved.as_slice())
                    .map_err(|e| format!("cannot connect to {addr}: {}", os_words(&e)))?;
                stream
                    .set_read_timeout(Some(READ_TIMEOUT))
                    .map_err(|e| format!("{addr}: cannot set a read timeout: {}", os_words(&e)))?;
                let _ = stream.set_write_timeout(Some(WRITE_TIMEOUT));
                let _ = stream.set_nodelay(true);
                let writer = stream
                    .try_clone()
                    .map_err(|e| format!("{addr}: cannot write to it: {}", os_words(&e)))?;
                Ok(Conn {
                    reader: Box::new(stream),
                    writer: Some(Box::new(writer)),
                })
            }
        }
    }
}

/// How long writing one command to the link may block.
const WRITE_TIMEOUT: Duration = Duration::from_secs(2);

/// One connection: bytes in, and commands out where the link has a way back.
struct Conn {
    reader: Box<dyn Read>,
    writer: Option<Box<dyn Write>>,
}

/// The command side of a link holder.
pub struct Commands<'a> {
    /// Seals, sends and matches the commands.
    pub downlink: &'a mut Downlink,
    /// Where requests arrive (from the control socket, or the demo's operator).
    pub requests: &'a Receiver<Request>,
    /// What the holder tells about itself on the control socket.
    pub status: Option<Arc<Mutex<LinkStatus>>>,
}

impl Commands<'_> {
    /// Takes what arrived and settles what was answered; `writer` is the
    /// link's way back, `None` when there is none now.
    fn service(
        &mut self,
        ingest: &mut Ingest,
        mut writer: Option<&mut dyn Write>,
        link_up: bool,
    ) -> Result<(), LinkError> {
        let now = Instant::now();
        while let Ok(request) = self.requests.try_recv() {
            let w = writer.as_mut().map(|w| &mut **w as &mut dyn Write);
            self.downlink.submit(request, ingest, w, now)?;
        }
        self.downlink.poll(ingest, writer, now)?;
        if let Some(status) = &self.status
            && let Ok(mut s) = status.lock()
        {
            s.link_up = link_up;
            if let Some(h) = ingest.latest_hello() {
                s.rig_id = Some(h.rig_id.to_string());
                s.run = Some(h.run);
                s.controller_keyed = Some(h.keyed);
            }
        }
        Ok(())
    }
}

/// Services `commands`, if any.
fn service(
    commands: &mut Option<Commands<'_>>,
    ingest: &mut Ingest,
    writer: Option<&mut dyn Write>,
    link_up: bool,
) -> Result<(), LinkError> {
    match commands {
        Some(c) => c.service(ingest, writer, link_up),
        None => Ok(()),
    }
}

use crate::term::os_words;

/// How a link is kept.
#[derive(Clone, Copy, Debug)]
pub struct LinkOptions {
    /// How long the first connection may take to come up.
    pub first_connect: Duration,
    /// A link that delivers no byte for this long has stalled: it is logged
    /// as an outage and reconnected.
    pub stall: Duration,
}

impl Default for LinkOptions {
    fn default() -> Self {
        LinkOptions {
            first_connect: Duration::from_secs(10),
            stall: Duration::from_secs(10),
        }
    }
}

/// Why a run's read loop ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum End {
    /// The capture or stdin ended.
    Eof,
    /// SIGINT or SIGTERM.
    Signal,
    /// The duration bound.
    Duration,
    /// The summary bound.
    Summaries,
}

impl End {
    /// The reason, as the closing line gives it.
    pub const fn reason(self) -> &'static str {
        match self {
            End::Eof => "end of input",
            End::Signal => "interrupted",
            End::Duration => "--max-duration-s reached",
            End::Summaries => "--max-summaries reached",
        }
    }
}

/// The bounds of a run.
#[derive(Clone, Copy, Debug, Default)]
pub struct Bounds {
    /// End the run at this instant.
    pub deadline: Option<Instant>,
    /// End the run when this flag is set (a signal handler sets it).
    pub stop: Option<&'static AtomicBool>,
}

impl Bounds {
    fn check(&self, ingest: &Ingest) -> Option<End> {
        if ingest.limit_reached() {
            Some(End::Summaries)
        } else if self.stop.is_some_and(|s| s.load(Ordering::Relaxed)) {
            Some(End::Signal)
        } else if self.deadline.is_some_and(|d| Instant::now() >= d) {
            Some(End::Duration)
        } else {
            None
        }
    }
}

/// Feeds one read's bytes and commits a batch that is due.
fn feed(ingest: &mut Ingest, bytes: &[u8], on_line: &mut dyn FnMut(&str)) -> Result<(), LinkError> {
    let now = now_ms();
    ingest.feed(bytes, now, on_line)?;
    ingest.tick(now)?;
    Ok(())
}

/// Reads a capture (file, stdin, or a link that is not reconnected) to its
/// end. `writer` is the way back to the controller, if there is one (the
/// demo's loopback link); without one, commands are answered `no_link`.
#[allow(clippy::too_many_arguments)]
pub fn read_to_end(
    ingest: &mut Ingest,
    bounds: &Bounds,
    mut r: impl Read,
    mut writer: Option<&mut dyn Write>,
    name: &str,
    mut commands: Option<Commands<'_>>,
    mut on_line: impl FnMut(&str),
) -> Result<End, LinkError> {
    let mut buf = vec![0u8; CHUNK];
    if let (Some(c), Some(w)) = (commands.as_mut(), writer.as_mut()) {
        c.downlink.link_up(ingest, &mut **w, Instant::now())?;
    }
    loop {
        if let Some(end) = bounds.check(ingest) {
            if matches!(end, End::Signal | End::Duration) {
                ingest.stopped();
            }
            return Ok(end);
        }
        let n = match r.read(&mut buf) {
            Ok(0) => {
                if let Some(c) = commands.as_mut() {
                    c.downlink.link_down(ingest)?;
                }
                return Ok(End::Eof);
            }
            Ok(n) => n,
            Err(e) if e.kind() == ErrorKind::Interrupted => continue,
            Err(e) if matches!(e.kind(), ErrorKind::WouldBlock | ErrorKind::TimedOut) => {
                ingest.tick(now_ms())?;
                let w = writer.as_mut().map(|w| &mut **w as &mut dyn Write);
                service(&mut commands, ingest, w, true)?;
                continue;
            }
            Err(e) => {
                return Err(LinkError::Read {
                    name: name.to_string(),
                    source: e,
                });
            }
        };
        feed(ingest, buf.get(..n).unwrap_or(&[]), &mut on_line)?;
        let w = writer.as_mut().map(|w| &mut **w as &mut dyn Write);
        let up = w.is_some();
        service(&mut commands, ingest, w, up)?;
    }
}

/// Reads a link that may drop or stall: once it has worked, a drop or a
/// stall is an outage in the same run, and the link is reconnected with
/// exponential backoff. `on_line` takes the live lines, `on_notice` the
/// link's own news (down, back).
#[allow(clippy::too_many_arguments)]
pub fn keep_reading(
    ingest: &mut Ingest,
    bounds: &Bounds,
    source: &Source,
    options: LinkOptions,
    mut commands: Option<Commands<'_>>,
    mut on_line: impl FnMut(&str),
    mut on_notice: impl FnMut(&str),
) -> Result<End, LinkError> {
    let name = source.name();
    let mut buf = vec![0u8; CHUNK];
    let mut backoff = BACKOFF_MIN;
    let mut conn: Option<Conn> = None;
    let started = Instant::now();
    let mut ever_up = false;
    let mut last_byte = Instant::now();
    loop {
        if let Some(end) = bounds.check(ingest) {
            if matches!(end, End::Signal | End::Duration) {
                ingest.stopped();
            }
            return Ok(end);
        }
        let Some(link) = conn.as_mut() else {
            service(&mut commands, ingest, None, false)?;
            match source.connect() {
                Ok(mut c) => {
                    backoff = BACKOFF_MIN;
                    last_byte = Instant::now();
                    if ingest.totals().outages > 0 {
                        on_notice(&format!("{name}: link back"));
                    }
                    ever_up = true;
                    ingest.link_up(now_ms())?;
                    if let (Some(cmds), Some(w)) = (commands.as_mut(), c.writer.as_mut()) {
                        // A controller that cannot be written to still streams.
                        let _ = cmds.downlink.link_up(ingest, &mut **w, Instant::now());
                    }
                    conn = Some(c);
                }
                Err(reason) if !ever_up => {
                    if started.elapsed() >= options.first_connect {
                        return Err(LinkError::NeverConnected {
                            source_name: name,
                            reason,
                            waited_s: started.elapsed().as_secs_f64(),
                        });
                    }
                    wait(bounds, ingest, backoff);
                    backoff = (backoff * 2).min(BACKOFF_MAX);
                }
                Err(reason) => {
                    down(ingest, &reason, &mut commands, &mut on_notice)?;
                    wait(bounds, ingest, backoff);
                    backoff = (backoff * 2).min(BACKOFF_MAX);
                }
            }
            continue;
        };
        match link.reader.read(&mut buf) {
            Ok(0) => {
                conn = None;
                down(
                    ingest,
                    &format!("{name}: connection closed"),
                    &mut commands,
                    &mut on_notice,
                )?;
                wait(bounds, ingest, backoff);
            }
            Ok(n) => {
                last_byte = Instant::now();
                feed(ingest, buf.get(..n).unwrap_or(&[]), &mut on_line)?;
                let w = link.writer.as_mut().map(|w| &mut **w as &mut dyn Write);
                service(&mut commands, ingest, w, true)?;
            }
            Err(e) if matches!(e.kind(), ErrorKind::WouldBlock | ErrorKind::TimedOut) => {
                ingest.tick(now_ms())?;
                let w = link.writer.as_mut().map(|w| &mut **w as &mut dyn Write);
                service(&mut commands, ingest, w, true)?;
                if last_byte.elapsed() >= options.stall {
                    conn = None;
                    let reason = format!(
                        "{name}: stalled, no data for {:.0} s",
                        options.stall.as_secs_f64()
                    );
                    down(ingest, &reason, &mut commands, &mut on_notice)?;
                }
            }
            Err(e) if e.kind() == ErrorKind::Interrupted => {}
            // A peer that closes with our commands unread resets instead.
            Err(e) if e.kind() == ErrorKind::ConnectionReset => {
                conn = None;
                down(
                    ingest,
                    &format!("{name}: connection closed (reset by the peer)"),
                    &mut commands,
                    &mut on_notice,
                )?;
                wait(bounds, ingest, backoff);
            }
            Err(e) => {
                conn = None;
                let reason = format!("{name}: read failed: {}", os_words(&e));
                down(ingest, &reason, &mut commands, &mut on_notice)?;
                wait(bounds, ingest, backoff);
            }
        }
    }
}

/// Records an outage (once per drop) and tells the operator.
fn down(
    ingest: &mut Ingest,
    reason: &str,
    commands: &mut Option<Commands<'_>>,
    on_notice: &mut dyn FnMut(&str),
) -> Result<(), LinkError> {
    if let Some(c) = commands.as_mut() {
        c.downlink.link_down(ingest)?;
    }
    let first = ingest.totals().outages;
    ingest.link_down(now_ms(), reason)?;
    if ingest.totals().outages != first {
        on_notice(&format!("link down ({reason}); reconnecting"));
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

/// The line that closes a run: what arrived, what was lost, where the log is.
pub fn closing_line(t: &Totals, end: End, db: &Path) -> String {
    format!(
        "run {} closed ({}): {} frames ({} hellos, {} summaries, {} events); \
         {} lost (crc {}, overlong {}, malformed {}, unknown_version {}); \
         {} gaps ({} summaries missing), {} duplicates, {} restarts, {} outages; log {}",
        t.run_id,
        end.reason(),
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

/// Why a file cannot take a heatbound log.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum TargetError {
    /// The file exists and is not a heatbound log: it is left as it is.
    #[error(
        "{path}: exists and is not a heatbound log ({what}); it is left untouched: name a new file or an existing heatbound log"
    )]
    NotOurs {
        /// The file.
        path: PathBuf,
        /// What it seems to be.
        what: String,
    },
    /// The file could not be inspected.
    #[error("{path}: cannot check what it holds: {reason}")]
    Unreadable {
        /// The file.
        path: PathBuf,
        /// The OS's words.
        reason: String,
    },
}

/// Checks that `path` may take a heatbound log: it is missing, empty, or
/// already a heatbound log. Anything else (a CSV, another program's
/// database, a picture) is refused, so nothing that is not ours is ever
/// overwritten or altered.
pub fn check_log_target(path: &Path) -> Result<(), TargetError> {
    use std::io::Read as _;
    let mut file = match std::fs::File::open(path) {
        Ok(f) => f,
        Err(e) if e.kind() == ErrorKind::NotFound => return Ok(()),
        Err(e) => {
            return Err(TargetError::Unreadable {
                path: path.to_path_buf(),
                reason: os_words(&e),
            });
        }
    };
    let mut head = [0u8; 16];
    let mut n = 0;
    while n < head.len() {
        match file.read(head.get_mut(n..).unwrap_or(&mut [])) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) if e.kind() == ErrorKind::Interrupted => {}
            Err(e) => {
                return Err(TargetError::Unreadable {
                    path: path.to_path_buf(),
                    reason: os_words(&e),
                });
            }
        }
    }
    if n == 0 {
        return Ok(());
    }
    let not_ours = |what: &str| TargetError::NotOurs {
        path: path.to_path_buf(),
        what: what.to_string(),
    };
    if head.get(..n) != Some(b"SQLite format 3\0".as_slice()) {
        return Err(not_ours("not an SQLite database"));
    }
    let conn = rusqlite::Connection::open_with_flags(
        path,
        rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY | rusqlite::OpenFlags::SQLITE_OPEN_NO_MUTEX,
    )
    .map_err(|_| not_ours("an SQLite database that cannot be opened"))?;
    let ours: Result<i64, _> = conn.query_row(
        "SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name IN ('runs', 'summaries', 'hellos')",
        [],
        |r| r.get(0),
    );
    let version: Result<i64, _> = conn.pragma_query_value(None, "user_version", |r| r.get(0));
    match (ours, version) {
        (Ok(3), Ok(v)) if v > 0 => Ok(()),
        (Ok(0), _) => {
            let tables: i64 = conn
                .query_row(
                    "SELECT count(*) FROM sqlite_master WHERE type = 'table'",
                    [],
                    |r| r.get(0),
                )
                .unwrap_or(1);
            if tables == 0 {
                Ok(())
            } else {
                Err(not_ours("another program's SQLite database"))
            }
        }
        _ => Err(not_ours("an SQLite database with other tables")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn malformed_addresses_are_refused_at_once() {
        for addr in [
            "nohost",
            ":4000",
            "127.0.0.1:",
            "127.0.0.1:0",
            "127.0.0.1:70000",
        ] {
            assert!(
                matches!(Source::tcp(addr), Err(LinkError::BadAddress { .. })),
                "{addr}"
            );
        }
        assert!(Source::tcp("127.0.0.1:4000").is_ok());
    }

    #[test]
    fn a_missing_serial_port_is_refused_at_once() {
        let e = Source::serial("/dev/ttyNOPE-heatbound", 115_200).unwrap_err();
        assert!(e.to_string().contains("no such port"), "{e}");
    }

    #[test]
    fn only_missing_empty_or_heatbound_files_take_a_log() {
        let dir = tempfile::tempdir().unwrap();
        let csv = dir.path().join("run.csv");
        std::fs::write(&csv, "t_s,hot_c\n0,500\n").unwrap();
        assert!(matches!(
            check_log_target(&csv),
            Err(TargetError::NotOurs { .. })
        ));
        let empty = dir.path().join("empty.sqlite");
        std::fs::write(&empty, "").unwrap();
        assert!(check_log_target(&empty).is_ok());
        assert!(check_log_target(&dir.path().join("new.sqlite")).is_ok());
        let other = dir.path().join("other.sqlite");
        let c = rusqlite::Connection::open(&other).unwrap();
        c.execute_batch("CREATE TABLE notes (x TEXT)").unwrap();
        drop(c);
        assert!(matches!(
            check_log_target(&other),
            Err(TargetError::NotOurs { .. })
        ));
        let ours = dir.path().join("ours.sqlite");
        drop(crate::store::Log::open(&ours).unwrap());
        assert!(check_log_target(&ours).is_ok());
    }
}
