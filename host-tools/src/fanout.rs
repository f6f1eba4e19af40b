//! Where a simulated controller's bytes go when `simulate --listen` serves
//! them: every client that connects, each from the frame boundary at which
//! it joined, as a bench PC and a second viewer would both read one board.
//!
//! A client that stops reading is dropped after [`WRITE_TIMEOUT`], so it
//! can never stall the simulation or the other clients. With no client
//! left, the stream goes on into nothing, as a controller's UART would.
use std::io::{ErrorKind, Write};
use std::net::{SocketAddr, TcpListener, TcpStream};
use std::time::Duration;

/// How long one write to a client may block before the client is dropped.
pub const WRITE_TIMEOUT: Duration = Duration::from_secs(5);

/// The clients of a listening socket; [`Write`] sends to all of them.
pub struct Fanout {
    listener: TcpListener,
    clients: Vec<(TcpStream, SocketAddr)>,
    served: u64,
    dropped: u64,
    on_notice: Box<dyn FnMut(&str) + Send>,
}

impl Fanout {
    /// Waits for the first client on `listener`, then serves every client
    /// that connects later too. `on_notice` hears who joined and who was
    /// dropped.
    pub fn accept_first(
        listener: TcpListener,
        on_notice: impl FnMut(&str) + Send + 'static,
    ) -> std::io::Result<Fanout> {
        let mut fanout = Fanout {
            listener,
            clients: Vec::new(),
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
