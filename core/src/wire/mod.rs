//! The wire format: compact frames from the controller to the host.
//!
//! ```text
//! Monitor + AlarmSet --> Summary::from_monitor --> wire::encode --> UART bytes
//! UART bytes --> wire::Decoder (resync, counts losses) --> Frame --> LinkTracker (gaps, restarts)
//! ```
//!
//! Two layers, as everywhere bytes meet meaning:
//! - the validated frames [`Frame`] = [`Hello`] | [`Summary`] | [`EventFrame`]: no
//!   NaN, no undefined bit, every value in range;
//! - the byte encoding, written by [`encode`] and read by [`decode`] or the
//!   streaming [`Decoder`], which never allocate and never panic.
//!
//! A frame on the wire is
//! `COBS(postcard(version, kind, body) ++ CRC32_LE(postcard bytes)) ++ 0x00`,
//! with CRC-32/ISO-HDLC. `docs/wire-format.md` is the specification: field
//! order, postcard types, units, sizes and the stability rules.
//!
//! ## Not-available figures
//! A figure the device could not compute (`None` in
//! [`Metrics`](crate::monitor::Metrics)) travels as an f32 NaN and decodes
//! back to `None`; any other non-finite value decodes to `None` too, so no
//! NaN ever reaches a validated [`Summary`]. Integrals
//! are sums and are always finite: a non-finite integral makes the frame
//! malformed.
//!
//! ## Sizes (measured by the tests)
//! | frame | typical | worst case |
//! |---|---|---|
//! | `Summary` | 76–77 bytes | 79 bytes ([`SUMMARY_MAX_WIRE_LEN`], budget 80) |
//! | `Hello` | 64 bytes | 70 bytes |
//! | `Event` | 16 bytes | 19 bytes |
//!
//! Sizes count everything on the wire: postcard, CRC, COBS overhead and the
//! delimiter. A `Summary` is 15 f32 (60 bytes) plus a 2-byte header, the
//! varints `seq` (≤ 3) and `t_ms` (≤ 5), and 3 bytes of bits: 73 bytes of
//! payload, 4 of CRC, 1 of COBS overhead and the delimiter.

mod codec;
mod command;
mod command_body;
mod decoder;
mod error;
mod format;
mod frames;
mod link;
#[cfg(test)]
mod tests;

pub use codec::{decode, encode};
pub use command::{
    Addressee, Authenticator, CommandFrame, CommandKey, CommandReceiver, KeyError, Received,
    ReceiverStats, decode_command, encode_command, hmac_sha256, tag_prefix,
};
pub use command_body::Command;
pub use decoder::{Decoder, DecoderStats};
pub use error::{FrameError, Malformed, WireError};
pub use format::{MAC_LEN, MAX_COMMAND_LEN, MAX_FRAME_LEN, PROTOCOL_VERSION, SUMMARY_MAX_WIRE_LEN};
pub use frames::*;
pub use link::{Link, LinkStats, LinkTracker};
