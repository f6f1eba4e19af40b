//! The process that holds a live link (`watch` with `--serial` or
//! `--tcp`): its control socket, its downlink, and how it shows the run,
//! as lines (or JSON) or on the live console.
//!
//! ```text
//! Live::start --> control socket (requests) + Downlink (the key)
//! Live::run_lines:   this thread reads the link, prints a line per frame
//! Live::run_console: a thread reads the link --Observed--> the console in this thread
//!                    the console's keys --Request--> the link thread --> the controller
//! ```
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, Sender};
use std::sync::{Arc, Mutex};

use heatbound::wire::CommandKey;

use crate::console::{self, Console, draw::Holder};
use crate::control::{self, ControlError, LinkStatus};
use crate::downlink::{Downlink, Request};
use crate::ingest::Ingest;
use crate::keyfile::KeyOrigin;
use crate::link::{self, Bounds, Commands, End, LinkError, LinkOptions, Source};

/// A live link's holder, before its run.
pub struct Live {
    downlink: Downlink,
    requests_tx: Sender<Request>,
    requests: Receiver<Request>,
    status: Arc<Mutex<LinkStatus>>,
    server: control::Server,
    key_origin: KeyOrigin,
    source_name: String,
}

impl Live {
    /// Opens the control socket for the link from `source_name`, logging
    /// into `db`, sealing with `key` (from `key_origin`).
    pub fn start(
        key: &CommandKey,
        key_origin: KeyOrigin,
        source_name: &str,
        db: &Path,
    ) -> Result<Live, ControlError> {
        let (requests_tx, requests) = mpsc::channel();
        let status = Arc::new(Mutex::new(LinkStatus {
            pid: std::process::id(),
            source: source_name.to_string(),
            db: db.display().to_string(),
            key: match &key_origin {
                KeyOrigin::File(p) => format!("file {}", p.display()),
                KeyOrigin::Demo => "demo".into(),
            },
            ..LinkStatus::default()
        }));
        let server = control::Server::start(requests_tx.clone(), Arc::clone(&status))?;
        Ok(Live {
            downlink: Downlink::new(key, key_origin.clone()),
            requests_tx,
            requests,
            status,
            server,
            key_origin,
            source_name: source_name.to_string(),
        })
    }

    /// Where requests for the controller go (a lab's relayed commands).
    pub fn requester(&self) -> Sender<Request> {
        self.requests_tx.clone()
    }

    /// The control socket's path.
    pub fn socket(&self) -> &Path {
        self.server.path()
    }

    /// Where the key came from.
    pub fn key_origin(&self) -> &KeyOrigin {
        &self.key_origin
    }

    /// Reads the link in this thread, with lines to `on_line` and the
    /// link's news to `on_notice`.
    pub fn run_lines(
        mut self,
        ingest: &mut Ingest,
        bounds: &Bounds,
        source: &Source,
        options: LinkOptions,
        on_line: impl FnMut(&str),
        on_notice: impl FnMut(&str),
    ) -> Result<End, LinkError> {
        let commands = Commands {
            downlink: &mut self.downlink,
            requests: &self.requests,
            status: Some(Arc::clone(&self.status)),
        };
        link::keep_reading(
            ingest,
            bounds,
            source,
            options,
            Some(commands),
            on_line,
            on_notice,
        )
    }

    /// Reads the link on a thread of its own and runs the console in this
    /// one, until the operator leaves (which stops the link through
    /// `stop`) or the run ends. Returns the run's end and its ingest to
    /// finish, or [`LinkError::Stopped`] if the link's thread died.
    pub fn run_console(
        self,
        ingest: Ingest,
        deadline: Option<std::time::Instant>,
        stop: &'static AtomicBool,
        source: Source,
        options: LinkOptions,
    ) -> Result<(Result<End, LinkError>, Ingest), LinkError> {
        let Live {
            mut downlink,
            requests_tx,
            requests,
            status,
            server,
            key_origin,
            source_name,
        } = self;
        let holder = Holder {
            source: source_name,
            key: match &key_origin {
                KeyOrigin::File(_) => "key file".into(),
                KeyOrigin::Demo => "demo key".into(),
            },
            commands: true,
            ended: None,
        };
        let result = with_console(ingest, holder, requests_tx, false, stop, move |ingest| {
            let bounds = Bounds {
                deadline,
                stop: Some(stop),
            };
            let commands = Commands {
                downlink: &mut downlink,
                requests: &requests,
                status: Some(status),
            };
            link::keep_reading(
                ingest,
                &bounds,
                &source,
                options,
                Some(commands),
                |_| {},
                |_| {},
            )
        });
        drop(server);
        result
    }
}

/// Runs `read` (which reads a link into the ingest until its run ends) on
/// a thread of its own, and the console in this one, until the operator
/// leaves (which sets `stop`) or, with `leave_when_ended`, the run ends.
/// Returns the run's end and its ingest to finish, or
/// [`LinkError::Stopped`] if the reading thread died.
pub fn with_console<F>(
    mut ingest: Ingest,
    holder: Holder,
    requests: Sender<Request>,
    leave_when_ended: bool,
    stop: &'static AtomicBool,
    read: F,
) -> Result<(Result<End, LinkError>, Ingest), LinkError>
where
    F: FnOnce(&mut Ingest) -> Result<End, LinkError> + Send + 'static,
{
    let (observed_tx, observed) = mpsc::channel();
    ingest.set_observer(observed_tx);
    let ended: Arc<Mutex<Option<String>>> = Arc::new(Mutex::new(None));
    let thread_ended = Arc::clone(&ended);
    let link = std::thread::spawn(move || {
        let end = read(&mut ingest);
        if let Ok(mut e) = thread_ended.lock() {
            *e = Some(match &end {
                Ok(end) => end.reason().to_string(),
                Err(e) => crate::term::error_line(e),
            });
        }
        (end, ingest)
    });
    let shown = console::run(
        Console {
            observed,
            requests,
            holder,
            leave_when_ended,
        },
        || ended.lock().ok().and_then(|e| e.clone()),
    );
    stop.store(true, Ordering::SeqCst);
    let (end, ingest) = link.join().map_err(|_| LinkError::Stopped)?;
    Ok(match shown {
        Ok(()) => (end, ingest),
        Err(e) => (
            Err(LinkError::Read {
                name: "the terminal".into(),
                source: e,
            }),
            ingest,
        ),
    })
}
