//! The audit's two inputs read from disk: a raw capture of the controller's
//! byte stream (decoded with the core decoder) or a run of a log database
//! (through the [`crate::store`] reader). It sits between the files and the
//! audit engine ([`crate::audit`]); `heatbound audit` and `heatbound demo`
//! call it.
//!
//! ```text
//! FILE (raw bytes) --wire::Decoder--> Received frames + DecoderStats --+
//! DB (SQLite log)  --store reader---> Received frames + link errors  --+--> audit::audit
//! ```
//!
//! The input kind is decided by content, not by name: a file that starts
//! with the 16-byte SQLite header is a log database, anything else a raw
//! capture.
use std::fs::File;
use std::io::{BufReader, Read};
use std::path::{Path, PathBuf};

use heatbound::config::RigConfig;
use heatbound::wire::{self, Decoder, DecoderStats};

use crate::audit::{self, Received, Report};
use crate::store::{Log, StoreError};

/// The first 16 bytes of every SQLite 3 database file.
const SQLITE_HEADER: &[u8; 16] = b"SQLite format 3\0";

/// What went wrong reading a capture or a log run.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CaptureError {
    /// The file cannot be opened.
    #[error("{}: cannot open", path.display())]
    Open {
        /// The file.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// The file cannot be read.
    #[error("{}: cannot read", path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// The log database failed.
    #[error(transparent)]
    Store(#[from] StoreError),
    /// The log could not be audited.
    #[error(transparent)]
    LogAudit(#[from] audit::LogAuditError),
    /// The run asked for is not in the log.
    #[error("{}: no run {id} in the log", path.display())]
    NoSuchRun {
        /// The log.
        path: PathBuf,
        /// The run asked for.
        id: i64,
    },
    /// The log holds no runs at all.
    #[error("{}: the log holds no runs", path.display())]
    NoRuns {
        /// The log.
        path: PathBuf,
    },
}

/// Whether `path` starts with the SQLite header.
pub fn is_database(path: &Path) -> Result<bool, CaptureError> {
    let mut head = [0u8; 16];
    let mut file = File::open(path).map_err(|source| CaptureError::Open {
        path: path.to_owned(),
        source,
    })?;
    let mut got = 0;
    while got < head.len() {
        match file.read(&mut head[got..]) {
            Ok(0) => break,
            Ok(n) => got += n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(source) => {
                return Err(CaptureError::Read {
                    path: path.to_owned(),
                    source,
                });
            }
        }
    }
    Ok(got == head.len() && &head == SQLITE_HEADER)
}

/// Decodes a raw capture with the core decoder.
pub fn read_capture(path: &Path) -> Result<(Vec<Received>, DecoderStats), CaptureError> {
    read_capture_with_progress(path, None)
}

/// [`read_capture`], moving `progress` (if any) to the bytes decoded so
/// far; its length is set to the file's size. The caller makes, shows and
/// finishes the bar.
///
/// ```
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("noise.bin");
/// std::fs::write(&path, [0x55u8; 1000]).unwrap();
/// let bar = indicatif::ProgressBar::hidden();
/// let (frames, _) = heatbound_host::capture::read_capture_with_progress(&path, Some(&bar)).unwrap();
/// assert!(frames.is_empty());
/// assert_eq!((bar.position(), bar.length()), (1000, Some(1000)));
/// ```
pub fn read_capture_with_progress(
    path: &Path,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<(Vec<Received>, DecoderStats), CaptureError> {
    let file = File::open(path).map_err(|source| CaptureError::Open {
        path: path.to_owned(),
        source,
    })?;
    if let Some(bar) = progress
        && let Ok(meta) = file.metadata()
    {
        bar.set_length(meta.len());
    }
    let mut reader = BufReader::new(file);
    let mut decoder = Decoder::<{ wire::MAX_FRAME_LEN }>::new();
    let mut frames = Vec::new();
    let mut buf = [0u8; 64 * 1024];
    loop {
        let n = match reader.read(&mut buf) {
            Ok(0) => break,
            Ok(n) => n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(source) => {
                return Err(CaptureError::Read {
                    path: path.to_owned(),
                    source,
                });
            }
        };
        if let Some(bar) = progress {
            // One update per 64 KiB read: far below the decoder's cost.
            bar.inc(n as u64);
        }
        decoder.feed(&buf[..n], |r| {
            if let Ok(frame) = r {
                frames.push(Received {
                    host_ms: None,
                    frame,
                });
            }
        });
    }
    // An unterminated tail is a frame cut off by the end of the capture: a
    // loss, whatever its length.
    // A complete frame that lacks only its final delimiter is kept, as
    // `watch` keeps it.
    if let Some(Ok(frame)) = decoder.end_stream() {
        frames.push(Received {
            host_ms: None,
            frame,
        });
    }
    Ok((frames, *decoder.stats()))
}

/// Audits a run (the latest unless `run` is given) of the log database at
/// `path`, opened read-only ([`audit::audit_log`] reads it).
pub fn audit_database(
    path: &Path,
    run: Option<i64>,
    config: &RigConfig,
) -> Result<Report, CaptureError> {
    audit_database_with_progress(path, run, config, None)
}

/// [`audit_database`], moving `progress` (if any) through the frames read
/// and then checked ([`audit::audit_log_with_progress`]).
pub fn audit_database_with_progress(
    path: &Path,
    run: Option<i64>,
    config: &RigConfig,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<Report, CaptureError> {
    let log = Log::open_read(path)?;
    Ok(audit::audit_log_with_progress(&log, run, config, progress)?)
}
