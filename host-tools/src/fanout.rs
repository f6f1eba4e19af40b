//! Where a simulated controller's bytes go when `simulate --listen` serves
//! them: every client that connects, each from the frame boundary at which
//! it joined, as a bench PC and a second viewer would both read one board.
//!
//! A client that stops reading is dropped after [`WRITE_TIMEOUT`], so it
//! can never stall the simulation or the other clients. With no client
//! left, the stream goes on into nothing, as a controller's UART would.
//!
//! What clients send back (commands) is collected by [`Inbox`]: each
//! client's bytes are cut at frame delimiters, so the commands of two
//! clients never interleave inside one frame on the simulated UART.
use std::io::{ErrorKind, Read, Write};
use std::net::{SocketAddr, TcpListener, TcpStream};
use std::sync::mpsc::{self, Receiver, Sender};
use std::time::Duration;

/// How long one write to a client may block before the client is dropped.
pub const WRITE_TIMEOUT: Duration = Duration::from_secs(5);

/// Bytes a client may send without a delimiter before they are passed on
/// as they are (the controller's bounded receiver then counts them as
/// overlong): a client can never make the host buffer without bound.
const MAX_PENDING: usize = 4096;

/// Commands from the clients, whole frames at a time.
pub struct Inbox {
    rx: Receiver<Vec<u8>>,
}

/// Where the readers of an [`Inbox`] deliver.
#[derive(Clone)]
pub struct InboxFeed {
    tx: Sender<Vec<u8>>,
}

impl Inbox {
    /// An empty inbox, and the feed its readers deliver to.
    pub fn new() -> (Inbox, InboxFeed) {
        let (tx, rx) = mpsc::channel();
        (Inbox { rx }, InboxFeed { tx })
    }

    /// Every frame received since the last call, in order of arrival.
    pub fn take(&self) -> Vec<Vec<u8>> {
        self.rx.try_iter().collect()
    }
}

impl InboxFeed {
    /// Reads `stream` on a thread of its own until it closes, passing on
    /// each frame it sends.
    pub fn listen_to(&self, mut stream: TcpStream) {
        let tx = self.tx.clone();
        std::thread::spawn(move || {
            let mut pending = Vec::new();
            let mut buf = [0u8; 1024];
            loop {
                let n = match stream.read(&mut buf) {
                    Ok(0) => return,
                    Ok(n) => n,
                    Err(e) if e.kind() == ErrorKind::Interrupted => continue,
                    Err(_) => return,
                };
                for &b in buf.get(..n).unwrap_or_default() {
                    pending.push(b);
                    if (b == 0 || pending.len() >= MAX_PENDING)
                        && tx.send(std::mem::take(&mut pending)).is_err()
                    {
                        return;
                    }
                }
            }
        });
    }
}

/// The clients of a listening socket; [`Write`] sends to all of them.
pub struct Fanout {
    listener: TcpListener,
    clients: Vec<(TcpStream, SocketAddr)>,
    feed: Option<InboxFeed>,
    served: u64,
    dropped: u64,
    on_notice: Box<dyn FnMut(&str) + Send>,
}

impl Fanout {
    /// Waits for the first client on `listener`, then serves every client
    /// that connects later too. `on_notice` hears who joined and who was
    /// dropped; what clients send goes to `feed`, if given.
    pub fn accept_first(
        listener: TcpListener,
        feed: Option<InboxFeed>,
        on_notice: impl FnMut(&str) + Send + 'static,
    ) -> std::io::Result<Fanout> {
        let mut fanout = Fanout {
            listener,
            clients: Vec::new(),
            feed,
            served: 0,
            dropped: 0,
            on_notice: Box::new(on_notice),
        };
        let (stream, peer) = fanout.listener.accept()?;
        fanout.add(stream, peer);
        fanout.listener.set_nonblocking(true)?;
        Ok(fanout)
    }

    /// Clients served so far, and clients dropped for not reading.
    pub const fn counts(&self) -> (u64, u64) {
        (self.served, self.dropped)
    }

    fn add(&mut self, stream: TcpStream, peer: SocketAddr) {
        let _ = stream.set_nodelay(true);
        let _ = stream.set_nonblocking(false);
        let _ = stream.set_write_timeout(Some(WRITE_TIMEOUT));
        if let (Some(feed), Ok(reader)) = (&self.feed, stream.try_clone()) {
            feed.listen_to(reader);
        }
        self.served += 1;
        (self.on_notice)(&format!("client {peer} connected"));
        self.clients.push((stream, peer));
    }

    fn accept_new(&mut self) {
        loop {
            match self.listener.accept() {
                Ok((stream, peer)) => self.add(stream, peer),
                Err(e) if e.kind() == ErrorKind::Interrupted => {}
                Err(_) => return,
            }
        }
    }
}

impl Write for Fanout {
    /// Sends all of `buf` to every client (callers write whole frames, so a
    /// client that joins between writes starts at a frame boundary).
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.accept_new();
        let mut kept = Vec::with_capacity(self.clients.len());
        for (mut stream, peer) in self.clients.drain(..) {
            match stream.write_all(buf) {
                Ok(()) => kept.push((stream, peer)),
                Err(e) => {
                    self.dropped += 1;
                    let why = if matches!(e.kind(), ErrorKind::WouldBlock | ErrorKind::TimedOut) {
                        format!("stopped reading for {} s", WRITE_TIMEOUT.as_secs())
                    } else {
                        "disconnected".to_string()
                    };
                    (self.on_notice)(&format!("client {peer} dropped: {why}"));
                }
            }
        }
        self.clients = kept;
        Ok(buf.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        for (stream, _) in &mut self.clients {
            let _ = stream.flush();
        }
        Ok(())
    }
}
