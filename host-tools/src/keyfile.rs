//! The rig's command key on the host: a file readable by its owner alone.
//!
//! ```text
//! --key-file FILE | $HEATBOUND_KEY_FILE --> load (owner-only? 64 hex digits?) --> CommandKey
//! neither given --> the public demo key, said so (simulation, emulator, demo only)
//! ```
//!
//! The key file holds 64 hexadecimal digits (32 bytes), and nothing else but
//! whitespace. The same file provisions the controller at build time
//! (`HEATBOUND_KEY_FILE` for the board crates), so the key is written in one
//! place and never travels on the link, a command line or a log: only the
//! file's path does. A file that its group or others may read is refused.
//!
//! Make one with
//! `umask 077 && head -c 32 /dev/urandom | od -An -tx1 | tr -d ' \n' > rig.key`.
use std::path::{Path, PathBuf};

use heatbound::wire::{CommandKey, KeyError};

/// The environment variable that names the key file.
pub const KEY_FILE_ENV: &str = "HEATBOUND_KEY_FILE";

/// Why a key file was refused.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum KeyFileError {
    /// The file could not be read.
    #[error("{path}: cannot read the key file: {reason}")]
    Read {
        /// The file.
        path: PathBuf,
        /// The OS's words.
        reason: String,
    },
    /// Its group or others may read it.
    #[error(
        "{path}: the key file can be read by others (mode {mode:03o}); a key must be readable by its owner alone: run `chmod 600 {path}`"
    )]
    TooOpen {
        /// The file.
        path: PathBuf,
        /// Its permission bits.
        mode: u32,
    },
    /// It does not hold a key.
    #[error("{path}: {problem}")]
    NotAKey {
        /// The file.
        path: PathBuf,
        /// What is wrong with its text.
        problem: KeyError,
    },
}

/// Where a key came from, to say so.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum KeyOrigin {
    /// A key file, named by an option or by [`KEY_FILE_ENV`].
    File(PathBuf),
    /// No key was configured: the public demo key.
    Demo,
}

impl KeyOrigin {
    /// How the operator is told which key is in use.
    pub fn describe(&self) -> String {
        match self {
            KeyOrigin::File(path) => format!("command key from {}", path.display()),
            KeyOrigin::Demo => format!(
                "no command key configured (--key-file or {KEY_FILE_ENV}): using the public demo key, \
                 which only the simulation, the emulator and the demo accept"
            ),
        }
    }
}

/// Reads the key in `path`: refused unless only its owner may read it.
///
/// ```
/// use std::os::unix::fs::PermissionsExt;
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("rig.key");
/// std::fs::write(&path, "ab".repeat(32)).unwrap();
/// std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o644)).unwrap();
/// assert!(heatbound_host::keyfile::load(&path).is_err());
/// std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o600)).unwrap();
/// assert!(heatbound_host::keyfile::load(&path).is_ok());
/// ```
pub fn load(path: &Path) -> Result<CommandKey, KeyFileError> {
    let read_err = |e: std::io::Error| KeyFileError::Read {
        path: path.to_path_buf(),
        reason: crate::term::os_words(&e),
    };
    let meta = std::fs::metadata(path).map_err(read_err)?;
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = meta.permissions().mode() & 0o777;
        if mode & 0o077 != 0 {
            return Err(KeyFileError::TooOpen {
                path: path.to_path_buf(),
                mode,
            });
        }
    }
    #[cfg(not(unix))]
    let _ = meta;
    let text = std::fs::read_to_string(path).map_err(read_err)?;
    CommandKey::from_hex(&text).map_err(|problem| KeyFileError::NotAKey {
        path: path.to_path_buf(),
        problem,
    })
}

/// The key to use: `option` (a `--key-file`), else the file named by
/// [`KEY_FILE_ENV`], else the public demo key. A named file that cannot be
/// used is an error, never a silent fall-back.
pub fn resolve(option: Option<&Path>) -> Result<(CommandKey, KeyOrigin), KeyFileError> {
    let from_env = std::env::var_os(KEY_FILE_ENV)
        .filter(|v| !v.is_empty())
        .map(PathBuf::from);
    match option.map(Path::to_path_buf).or(from_env) {
        Some(path) => Ok((load(&path)?, KeyOrigin::File(path))),
        None => Ok((CommandKey::DEMO, KeyOrigin::Demo)),
    }
}
