//! heatbound's topic tree on a broker, and the binary record that carries a
//! frame as the rig's `watch` received and verified it
//! (`docs/mqtt.md` is the reference).
//!
//! ```text
//! ROOT/rigs/RIG/records         watch --> lab   binary record (below), QoS 1
//! ROOT/rigs/RIG/summary, event  watch --> any   the frame decoded, JSON, QoS 1
//! ROOT/rigs/RIG/status          watch --> any   retained JSON: online, offline, last frame
//! ROOT/rigs/RIG/resend          lab --> watch   JSON: publish these rows again
//! ROOT/rigs/RIG/command         lab --> watch   a command sealed with the rig's key
//! ROOT/rigs/RIG/command-result  watch --> lab   JSON: what became of it
//! ```
//!
//! A record is a 42-byte header, all integers little-endian, then a body:
//!
//! ```text
//! 0   u8   record version (1)
//! 1   u8   kind: 1 frame, 2 loss, 3 end of run
//! 2   u64  the watch log's id
//! 10  i64  the run in that log
//! 18  i64  the row's ord in the run
//! 26  i64  the ord of the run's previous record (-1: none)
//! 34  i64  host receive time, Unix ms
//! 42  ...  frame: the wire bytes (COBS, CRC, 0x00); loss: JSON {kind, count, detail};
//!          end: JSON {outages: [{started_host_ms, ended_host_ms, reason}]}
//! ```
use crate::store::{LinkErrorKind, LinkErrorRow};

/// The default first level of every topic.
pub const DEFAULT_ROOT: &str = "heatbound";

/// Length of a record's header.
pub const HEADER_LEN: usize = 42;
/// The record version this tool writes and reads.
pub const RECORD_VERSION: u8 = 1;

/// The topics of one root.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Topics {
    root: String,
}

/// Which topic of a rig.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Leaf {
    /// Binary records.
    Records,
    /// Summaries as JSON.
    Summary,
    /// Events as JSON.
    Event,
    /// The retained status.
    Status,
    /// Requests to publish rows again.
    Resend,
    /// Sealed commands.
    Command,
    /// What became of a command.
    CommandResult,
}

impl Leaf {
    /// Every leaf.
    pub const ALL: [Leaf; 7] = [
        Leaf::Records,
        Leaf::Summary,
        Leaf::Event,
        Leaf::Status,
        Leaf::Resend,
        Leaf::Command,
        Leaf::CommandResult,
    ];

    /// The last topic level.
    pub const fn as_str(self) -> &'static str {
        match self {
            Leaf::Records => "records",
            Leaf::Summary => "summary",
            Leaf::Event => "event",
            Leaf::Status => "status",
            Leaf::Resend => "resend",
            Leaf::Command => "command",
            Leaf::CommandResult => "command-result",
        }
    }
}

impl Topics {
    /// The topics under `root` (a topic prefix of one or more levels,
    /// without wildcards).
    pub fn new(root: &str) -> Result<Topics, String> {
        let root = root.trim_end_matches('/');
        if root.is_empty() || root.contains(['+', '#', '\0']) || root.starts_with('/') {
            return Err(format!(
                "--topic-root {root:?}: give one or more topic levels without +, # or a leading /"
            ));
        }
        Ok(Topics {
            root: root.to_string(),
        })
    }

    /// `ROOT/rigs/RIG/LEAF`, the rig id escaped by [`escape_rig`].
    pub fn rig(&self, rig: &str, leaf: Leaf) -> String {
        format!("{}/rigs/{}/{}", self.root, escape_rig(rig), leaf.as_str())
    }

    /// `ROOT/rigs/+/LEAF`: that leaf of every rig.
    pub fn every_rig(&self, leaf: Leaf) -> String {
        format!("{}/rigs/+/{}", self.root, leaf.as_str())
    }

    /// The rig and leaf of `topic`, if it is one of ours.
    pub fn parse(&self, topic: &str) -> Option<(String, Leaf)> {
        let rest = topic.strip_prefix(&self.root)?.strip_prefix("/rigs/")?;
        let (rig, leaf) = rest.split_once('/')?;
        let leaf = Leaf::ALL.into_iter().find(|l| l.as_str() == leaf)?;
        Some((unescape_rig(rig)?, leaf))
    }
}

/// A rig id as one topic level: letters, digits, `-`, `_` and `.` as they
/// are, every other byte as `%XX` (so `/`, `+` and `#` can never split or
/// widen a topic).
///
/// ```
/// use heatbound_host::mqtt::topics::{escape_rig, unescape_rig};
/// assert_eq!(escape_rig("bench-sim"), "bench-sim");
/// assert_eq!(escape_rig("rig/2 #a"), "rig%2F2%20%23a");
/// assert_eq!(unescape_rig("rig%2F2%20%23a").as_deref(), Some("rig/2 #a"));
/// ```
pub fn escape_rig(rig: &str) -> String {
    let mut out = String::with_capacity(rig.len());
    for b in rig.bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.') {
            out.push(char::from(b));
        } else {
            out.push_str(&format!("%{b:02X}"));
        }
    }
    out
}

/// The rig id of an [`escape_rig`] level; `None` if it is not one.
pub fn unescape_rig(level: &str) -> Option<String> {
    let bytes = level.as_bytes();
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while let Some(&b) = bytes.get(i) {
        if b == b'%' {
            let hex = std::str::from_utf8(bytes.get(i + 1..i + 3)?).ok()?;
            out.push(u8::from_str_radix(hex, 16).ok()?);
            i += 3;
        } else if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.') {
            out.push(b);
            i += 1;
        } else {
            return None;
        }
    }
    let rig = String::from_utf8(out).ok()?;
    (!rig.is_empty() && escape_rig(&rig) == level).then_some(rig)
}

/// What a record carries.
#[derive(Clone, Debug, PartialEq)]
pub enum Body {
    /// A frame's wire bytes (COBS with its CRC, ending in 0x00).
    Frame(Vec<u8>),
    /// A loss on the rig's link that only its watch saw.
    Loss {
        /// Its kind.
        kind: LinkErrorKind,
        /// How many.
        count: u64,
        /// The watch's words.
        detail: String,
    },
    /// The run ended (its watch closed it), with the outages of the
    /// rig's link during the run.
    End(Vec<Outage>),
}

/// An outage of a rig's link, as its watch logged it.
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Outage {
    /// When the link dropped, Unix ms.
    pub started_host_ms: i64,
    /// When it came back, if it did.
    pub ended_host_ms: Option<i64>,
    /// Why it dropped.
    pub reason: String,
}

/// One record.
#[derive(Clone, Debug, PartialEq)]
pub struct Record {
    /// The watch log's id.
    pub log_id: i64,
    /// The run in that log.
    pub run: i64,
    /// The row's ord.
    pub ord: i64,
    /// The ord of the run's previous record (−1: none).
    pub prev_ord: i64,
    /// Host receive time (end time for [`Body::End`]), Unix ms.
    pub host_ms: i64,
    /// What it carries.
    pub body: Body,
}

/// Why bytes are not a record.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum RecordError {
    /// Shorter than the header.
    #[error("{0} bytes: shorter than a record's 42-byte header")]
    Short(usize),
    /// Another record version.
    #[error("record version {0}, and this tool reads version 1: update heatbound")]
    Version(u8),
    /// An unknown kind.
    #[error("unknown record kind {0}")]
    Kind(u8),
    /// A loss whose body is not what it should be.
    #[error("a loss record whose body is not {{kind, count, detail}} JSON")]
    Loss,
    /// An end record whose body is not what it should be.
    #[error("an end-of-run record whose body is not {{outages: [...]}} JSON")]
    End,
    /// Ords out of order.
    #[error("the record's ord {ord} is not after its previous one {prev_ord}")]
    Order {
        /// The ord.
        ord: i64,
        /// The previous one.
        prev_ord: i64,
    },
}

impl Record {
    /// The record's bytes.
    pub fn encode(&self) -> Vec<u8> {
        let (kind, body): (u8, Vec<u8>) = match &self.body {
            Body::Frame(bytes) => (1, bytes.clone()),
            Body::Loss {
                kind,
                count,
                detail,
            } => (
                2,
                serde_json::json!({"kind": kind.as_str(), "count": count, "detail": detail})
                    .to_string()
                    .into_bytes(),
            ),
            Body::End(outages) => (
                3,
                serde_json::json!({ "outages": outages })
                    .to_string()
                    .into_bytes(),
            ),
        };
        let mut out = Vec::with_capacity(HEADER_LEN + body.len());
        out.push(RECORD_VERSION);
        out.push(kind);
        out.extend_from_slice(&self.log_id.to_le_bytes());
        out.extend_from_slice(&self.run.to_le_bytes());
        out.extend_from_slice(&self.ord.to_le_bytes());
        out.extend_from_slice(&self.prev_ord.to_le_bytes());
        out.extend_from_slice(&self.host_ms.to_le_bytes());
        out.extend_from_slice(&body);
        out
    }

    /// Reads a record; the frame bytes inside are not checked here (the
    /// lab feeds them to the same decoder as `watch`).
    pub fn decode(bytes: &[u8]) -> Result<Record, RecordError> {
        if bytes.len() < HEADER_LEN {
            return Err(RecordError::Short(bytes.len()));
        }
        let int = |at: usize| {
            let mut b = [0u8; 8];
            if let Some(s) = bytes.get(at..at + 8) {
                b.copy_from_slice(s);
            }
            i64::from_le_bytes(b)
        };
        let version = bytes.first().copied().unwrap_or_default();
        if version != RECORD_VERSION {
            return Err(RecordError::Version(version));
        }
        let kind = bytes.get(1).copied().unwrap_or_default();
        let rest = bytes.get(HEADER_LEN..).unwrap_or_default();
        let body = match kind {
            1 => Body::Frame(rest.to_vec()),
            2 => {
                #[derive(serde::Deserialize)]
                struct Loss {
                    kind: String,
                    count: u64,
                    detail: String,
                }
                let loss: Loss = serde_json::from_slice(rest).map_err(|_| RecordError::Loss)?;
                Body::Loss {
                    kind: LinkErrorKind::parse(&loss.kind).ok_or(RecordError::Loss)?,
                    count: loss.count,
                    detail: loss.detail,
                }
            }
            3 => {
                #[derive(serde::Deserialize)]
                struct End {
                    outages: Vec<Outage>,
                }
                let end: End = serde_json::from_slice(rest).map_err(|_| RecordError::End)?;
                Body::End(end.outages)
            }
            other => return Err(RecordError::Kind(other)),
        };
        let record = Record {
            log_id: int(2),
            run: int(10),
            ord: int(18),
            prev_ord: int(26),
            host_ms: int(34),
            body,
        };
        if record.prev_ord >= record.ord || record.prev_ord < -1 {
            return Err(RecordError::Order {
                ord: record.ord,
                prev_ord: record.prev_ord,
            });
        }
        Ok(record)
    }

    /// The loss as a `link_errors` row (its ord is the lab's to give).
    pub fn loss_row(&self) -> Option<LinkErrorRow> {
        match &self.body {
            Body::Loss {
                kind,
                count,
                detail,
            } => Some(LinkErrorRow {
                ord: self.ord,
                host_ms: self.host_ms,
                kind: *kind,
                count: *count,
                detail: detail.clone(),
            }),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn records_round_trip_and_bad_ones_are_named() {
        let r = Record {
            log_id: 77,
            run: 3,
            ord: 10,
            prev_ord: 8,
            host_ms: 1_700_000_000_000,
            body: Body::Loss {
                kind: LinkErrorKind::Crc,
                count: 2,
                detail: "CRC mismatch".into(),
            },
        };
        let bytes = r.encode();
        assert_eq!(Record::decode(&bytes), Ok(r));
        assert_eq!(Record::decode(&bytes[..10]), Err(RecordError::Short(10)));
        let mut v2 = bytes.clone();
        v2[0] = 2;
        assert_eq!(Record::decode(&v2), Err(RecordError::Version(2)));
        let mut back = bytes;
        back[26..34].copy_from_slice(&10i64.to_le_bytes());
        assert!(matches!(
            Record::decode(&back),
            Err(RecordError::Order { .. })
        ));
    }

    #[test]
    fn topics_parse_what_they_make() {
        let t = Topics::new("lab7/heatbound").unwrap();
        let topic = t.rig("rig/2", Leaf::CommandResult);
        assert_eq!(topic, "lab7/heatbound/rigs/rig%2F2/command-result");
        assert_eq!(t.parse(&topic), Some(("rig/2".into(), Leaf::CommandResult)));
        assert_eq!(t.parse("lab7/heatbound/rigs/a/other"), None);
        assert_eq!(t.parse("lab7/heatbound/rigs/a%2/status"), None);
        assert!(Topics::new("a/#").is_err());
    }
}
