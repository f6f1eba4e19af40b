//! The broker a lab already runs: its address, how heatbound logs in to it
//! (user and password from a file or the environment, never the command
//! line), and TLS (rustls with a CA file, optionally a client certificate).
//!
//! ```text
//! mqtt://HOST[:PORT] | mqtts://HOST[:PORT] --BrokerUrl::parse--> host, port, TLS?
//! --broker-login FILE | $HEATBOUND_MQTT_USER + $HEATBOUND_MQTT_PASSWORD --> Login
//! --ca FILE, --client-cert FILE --client-key FILE --> rustls ClientConfig
//!     --> rumqttc::MqttOptions (persistent session, keep-alive, last will)
//! ```
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Duration;

use rumqttc::{ConnectReturnCode, ConnectionError, LastWill, MqttOptions, Transport};

/// The environment variable holding the broker user name.
pub const USER_ENV: &str = "HEATBOUND_MQTT_USER";
/// The environment variable holding the broker password.
pub const PASSWORD_ENV: &str = "HEATBOUND_MQTT_PASSWORD";

/// What is wrong with how the broker was given.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum BrokerError {
    /// The address is not `mqtt://HOST[:PORT]` or `mqtts://HOST[:PORT]`.
    #[error(
        "broker address {given:?}: {why} (give mqtt://HOST:PORT, or mqtts://HOST:PORT for TLS)"
    )]
    Url {
        /// What was given.
        given: String,
        /// What is wrong with it.
        why: &'static str,
    },
    /// A file (login, CA, certificate, key) cannot be used.
    #[error("{path}: {why}")]
    File {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        why: String,
    },
    /// Only one of the user and password variables is set.
    #[error("{set} is set but {unset} is not: set both, or neither")]
    HalfLogin {
        /// The one set.
        set: &'static str,
        /// The one missing.
        unset: &'static str,
    },
    /// TLS options without `mqtts://`, or a certificate without its key.
    #[error("{0}")]
    Tls(String),
}

/// Where the broker is.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct BrokerUrl {
    /// `mqtts://`.
    pub tls: bool,
    /// Host name or address.
    pub host: String,
    /// TCP port (1883, or 8883 with TLS, when not given).
    pub port: u16,
}

impl BrokerUrl {
    /// Parses `mqtt://HOST[:PORT]` or `mqtts://HOST[:PORT]` (an IPv6
    /// address in brackets).
    ///
    /// ```
    /// use heatbound_host::mqtt::broker::BrokerUrl;
    /// let u = BrokerUrl::parse("mqtts://lab-broker:8884").unwrap();
    /// assert!(u.tls && u.host == "lab-broker" && u.port == 8884);
    /// assert_eq!(BrokerUrl::parse("mqtt://127.0.0.1").unwrap().port, 1883);
    /// assert!(BrokerUrl::parse("http://x:1").is_err());
    /// ```
    pub fn parse(given: &str) -> Result<BrokerUrl, BrokerError> {
        let err = |why| BrokerError::Url {
            given: crate::term::excerpt(given, 80),
            why,
        };
        let (tls, rest) = if let Some(r) = given.strip_prefix("mqtts://") {
            (true, r)
        } else if let Some(r) = given.strip_prefix("mqtt://") {
            (false, r)
        } else {
            return Err(err("it does not start with mqtt:// or mqtts://"));
        };
        let rest = rest.strip_suffix('/').unwrap_or(rest);
        if rest.contains('/') || rest.contains('@') || rest.contains('?') {
            return Err(err(
                "only a host and a port belong in it (a login goes in --broker-login or the environment)",
            ));
        }
        let (host, port) = if let Some(v6) = rest.strip_prefix('[') {
            let (h, after) = v6.split_once(']').ok_or_else(|| err("an unclosed ["))?;
            (h, after.strip_prefix(':'))
        } else {
            match rest.rsplit_once(':') {
                Some((h, p)) => (h, Some(p)),
                None => (rest, None),
            }
        };
        if host.is_empty() {
            return Err(err("no host"));
        }
        let port = match port {
            None => {
                if tls {
                    8883
                } else {
                    1883
                }
            }
            Some(p) => p
                .parse::<u16>()
                .ok()
                .filter(|p| *p != 0)
                .ok_or_else(|| err("the port is not a number from 1 to 65535"))?,
        };
        Ok(BrokerUrl {
            tls,
            host: host.to_string(),
            port,
        })
    }

    /// `mqtt://host:port` (or `mqtts://`), as the logs name the broker.
    pub fn name(&self) -> String {
        let scheme = if self.tls { "mqtts" } else { "mqtt" };
        if self.host.contains(':') {
            format!("{scheme}://[{}]:{}", self.host, self.port)
        } else {
            format!("{scheme}://{}:{}", self.host, self.port)
        }
    }
}

/// A broker login. The password is never printed: `Debug` hides it.
#[derive(Clone, PartialEq, Eq)]
pub struct Login {
    /// The user name.
    pub user: String,
    password: String,
}

impl std::fmt::Debug for Login {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Login")
            .field("user", &self.user)
            .field("password", &"(hidden)")
            .finish()
    }
}

impl Login {
    /// A login from its parts (tests, and callers with their own store).
    pub fn new(user: impl Into<String>, password: impl Into<String>) -> Login {
        Login {
            user: user.into(),
            password: password.into(),
        }
    }

    /// The login to use: the file `option` names (two lines, `user = ...`
    /// and `password = ...`, TOML, readable by its owner alone), else
    /// [`USER_ENV`] and [`PASSWORD_ENV`], else none (an anonymous broker).
    pub fn resolve(option: Option<&Path>) -> Result<Option<Login>, BrokerError> {
        if let Some(path) = option {
            return load_login(path).map(Some);
        }
        let user = std::env::var(USER_ENV).ok().filter(|v| !v.is_empty());
        let password = std::env::var(PASSWORD_ENV).ok().filter(|v| !v.is_empty());
        match (user, password) {
            (Some(user), Some(password)) => Ok(Some(Login { user, password })),
            (None, None) => Ok(None),
            (Some(_), None) => Err(BrokerError::HalfLogin {
                set: USER_ENV,
                unset: PASSWORD_ENV,
            }),
            (None, Some(_)) => Err(BrokerError::HalfLogin {
                set: PASSWORD_ENV,
                unset: USER_ENV,
            }),
        }
    }
}

/// Reads a file only its owner may read.
fn read_private(path: &Path, what: &str) -> Result<Vec<u8>, BrokerError> {
    let file_err = |why: String| BrokerError::File {
        path: path.to_path_buf(),
        why,
    };
    let meta = std::fs::metadata(path).map_err(|e| {
        file_err(format!(
            "cannot read the {what}: {}",
            crate::term::os_words(&e)
        ))
    })?;
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = meta.permissions().mode() & 0o777;
        if mode & 0o077 != 0 {
            return Err(file_err(format!(
                "the {what} can be read by others (mode {mode:03o}); it must be readable by its owner alone: run `chmod 600 {}`",
                path.display()
            )));
        }
    }
    #[cfg(not(unix))]
    let _ = meta;
    std::fs::read(path).map_err(|e| {
        file_err(format!(
            "cannot read the {what}: {}",
            crate::term::os_words(&e)
        ))
    })
}

fn load_login(path: &Path) -> Result<Login, BrokerError> {
    #[derive(serde::Deserialize)]
    #[serde(deny_unknown_fields)]
    struct File {
        user: String,
        password: String,
    }
    let bytes = read_private(path, "broker login file")?;
    let text = String::from_utf8(bytes).map_err(|_| BrokerError::File {
        path: path.to_path_buf(),
        why: "the broker login file is not UTF-8 text".into(),
    })?;
    // Never echo the file's text: it holds the password.
    let file: File = toml::from_str(&text).map_err(|e| BrokerError::File {
        path: path.to_path_buf(),
        why: format!(
            "not a broker login file (two lines: user = \"...\" and password = \"...\"): {}",
            e.message()
        ),
    })?;
    if file.user.is_empty() {
        return Err(BrokerError::File {
            path: path.to_path_buf(),
            why: "the user name is empty".into(),
        });
    }
    Ok(Login {
        user: file.user,
        password: file.password,
    })
}

/// How to reach the broker: shared by `watch --publish` and `lab`.
#[derive(clap::Args, Clone, Debug, Default)]
pub struct BrokerArgs {
    /// The broker login: a TOML file with `user = "..."` and `password = "..."`,
    /// readable by you alone (default: $HEATBOUND_MQTT_USER and
    /// $HEATBOUND_MQTT_PASSWORD, else no login).
    #[arg(long, value_name = "FILE")]
    pub broker_login: Option<PathBuf>,
    /// With mqtts://: the CA certificate(s) (PEM) the broker's certificate
    /// must chain to (default: the system's).
    #[arg(long, value_name = "FILE")]
    pub ca: Option<PathBuf>,
    /// With mqtts://: this client's certificate (PEM), for a broker that
    /// asks for one.
    #[arg(long, value_name = "FILE", requires = "client_key")]
    pub client_cert: Option<PathBuf>,
    /// The private key (PEM) of --client-cert, readable by you alone.
    #[arg(long, value_name = "FILE", requires = "client_cert")]
    pub client_key: Option<PathBuf>,
    /// The first level of every topic.
    #[arg(long, value_name = "PREFIX", default_value = super::topics::DEFAULT_ROOT)]
    pub topic_root: String,
}

/// A broker connection's settings, checked.
#[derive(Clone, Debug)]
pub struct Broker {
    /// Where.
    pub url: BrokerUrl,
    /// The login, if any.
    pub login: Option<Login>,
    tls: Option<Arc<rustls::ClientConfig>>,
}

impl Broker {
    /// Checks `url` and `args`: the login, and with `mqtts://` the
    /// certificates, are read now, so a mistake is reported before anything
    /// runs.
    pub fn new(url: &str, args: &BrokerArgs) -> Result<Broker, BrokerError> {
        let url = BrokerUrl::parse(url)?;
        let login = Login::resolve(args.broker_login.as_deref())?;
        if !url.tls && (args.ca.is_some() || args.client_cert.is_some()) {
            return Err(BrokerError::Tls(format!(
                "--ca and --client-cert need a TLS broker: give mqtts://{}:{}",
                url.host, url.port
            )));
        }
        let tls = if url.tls {
            let client = match (&args.client_cert, &args.client_key) {
                (Some(c), Some(k)) => Some((c.as_path(), k.as_path())),
                _ => None,
            };
            Some(Arc::new(tls_config(args.ca.as_deref(), client)?))
        } else {
            None
        };
        Ok(Broker { url, login, tls })
    }

    /// rumqttc's options for client `client_id`: a persistent session
    /// (clean session off), 10 s keep-alive, `will` as the last will.
    pub fn options(&self, client_id: &str, will: Option<LastWill>) -> MqttOptions {
        let mut o = MqttOptions::new(client_id, self.url.host.clone(), self.url.port);
        o.set_clean_session(false);
        o.set_keep_alive(Duration::from_secs(10));
        o.set_max_packet_size(256 * 1024, 256 * 1024);
        o.set_inflight(INFLIGHT);
        if let Some(login) = &self.login {
            o.set_credentials(login.user.clone(), login.password.clone());
        }
        if let Some(will) = will {
            o.set_last_will(will);
        }
        if let Some(tls) = &self.tls {
            o.set_transport(Transport::tls_with_config(
                rumqttc::TlsConfiguration::Rustls(Arc::clone(tls)),
            ));
        }
        o
    }
}

/// Publishes in flight at most (rumqttc's window; heatbound keeps its own
/// below it).
pub const INFLIGHT: u16 = 256;

fn tls_config(
    ca: Option<&Path>,
    client: Option<(&Path, &Path)>,
) -> Result<rustls::ClientConfig, BrokerError> {
    use rustls_pki_types::pem::PemObject as _;
    use rustls_pki_types::{CertificateDer, PrivateKeyDer};
    let mut roots = rustls::RootCertStore::empty();
    match ca {
        Some(path) => {
            let file_err = |why: String| BrokerError::File {
                path: path.to_path_buf(),
                why,
            };
            let certs: Vec<CertificateDer<'static>> = CertificateDer::pem_file_iter(path)
                .map_err(|e| file_err(format!("cannot read the CA file: {e}")))?
                .collect::<Result<_, _>>()
                .map_err(|e| file_err(format!("not a PEM certificate file: {e}")))?;
            if certs.is_empty() {
                return Err(file_err("no certificate in the CA file".into()));
            }
            for cert in certs {
                roots
                    .add(cert)
                    .map_err(|e| file_err(format!("a CA certificate cannot be used: {e}")))?;
            }
        }
        None => {
            let found = rustls_native_certs::load_native_certs();
            for cert in found.certs {
                let _ = roots.add(cert);
            }
            if roots.is_empty() {
                return Err(BrokerError::Tls(
                    "no CA certificates on this system: give the broker's CA with --ca FILE".into(),
                ));
            }
        }
    }
    // ring, not aws-lc-rs: no C toolchain beyond gcc, a smaller build. Its
    // provider lacks the post-quantum key exchanges (hence the
    // deprecation); lab brokers offer the classical groups it has.
    #[allow(deprecated)]
    let provider = Arc::new(rustls::crypto::ring::default_provider());
    let builder = rustls::ClientConfig::builder_with_provider(provider)
        .with_safe_default_protocol_versions()
        .map_err(|e| BrokerError::Tls(format!("TLS cannot be set up: {e}")))?
        .with_root_certificates(roots);
    match client {
        None => Ok(builder.with_no_client_auth()),
        Some((cert, key)) => {
            let cert_err = |why: String| BrokerError::File {
                path: cert.to_path_buf(),
                why,
            };
            let chain: Vec<CertificateDer<'static>> = CertificateDer::pem_file_iter(cert)
                .map_err(|e| cert_err(format!("cannot read the client certificate: {e}")))?
                .collect::<Result<_, _>>()
                .map_err(|e| cert_err(format!("not a PEM certificate file: {e}")))?;
            if chain.is_empty() {
                return Err(cert_err("no certificate in the file".into()));
            }
            let key_bytes = read_private(key, "client key")?;
            let key_der =
                PrivateKeyDer::from_pem_slice(&key_bytes).map_err(|_| BrokerError::File {
                    path: key.to_path_buf(),
                    why: "no PEM private key in the file".into(),
                })?;
            builder
                .with_client_auth_cert(chain, key_der)
                .map_err(|e| cert_err(format!("the certificate and key do not go together: {e}")))
        }
    }
}

/// A connection error in words a bench engineer acts on; `None` for the
/// ones that only mean "try again" and need no words of their own.
pub fn describe(e: &ConnectionError) -> String {
    match e {
        ConnectionError::ConnectionRefused(code) => match code {
            ConnectReturnCode::BadUserNamePassword | ConnectReturnCode::NotAuthorized => {
                "the broker refused the login (wrong user or password, or this user may not connect)"
                    .into()
            }
            ConnectReturnCode::BadClientId => {
                "the broker refused this client's id".into()
            }
            ConnectReturnCode::ServiceUnavailable => "the broker is unavailable".into(),
            other => format!("the broker refused the connection ({other:?})"),
        },
        ConnectionError::Io(io) => match io.kind() {
            std::io::ErrorKind::ConnectionRefused => {
                "nothing listens at the broker's address (broker down or wrong port)".into()
            }
            std::io::ErrorKind::ConnectionReset | std::io::ErrorKind::UnexpectedEof => {
                "the broker closed the connection".into()
            }
            _ => format!("network: {}", crate::term::os_words(io)),
        },
        ConnectionError::Tls(t) => format!("TLS: {t}"),
        ConnectionError::NetworkTimeout => "no answer from the broker in time".into(),
        ConnectionError::FlushTimeout => "the broker stopped taking data".into(),
        ConnectionError::MqttState(s) => format!("the broker broke the protocol: {s}"),
        other => format!("{other}"),
    }
}

/// Whether `e` is the broker refusing the login: retrying will not help.
pub fn login_refused(e: &ConnectionError) -> bool {
    matches!(
        e,
        ConnectionError::ConnectionRefused(
            ConnectReturnCode::BadUserNamePassword | ConnectReturnCode::NotAuthorized
        )
    )
}
