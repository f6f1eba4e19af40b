//! The wire layer's errors: what encoding refused, and why a received frame was lost.

use super::format::*;

// ---------------------------------------------------------------------------
// Errors
// ---------------------------------------------------------------------------

/// Why `encode` refused a frame.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum WireError {
    /// The output buffer is shorter than the encoded frame.
    BufferTooSmall,
    /// An integral, a present figure or a Hello setting is NaN or infinite.
    NotFinite,
    /// A fault or alarm mask uses bits this version does not define.
    ReservedBits,
    /// A rig id is longer than 16 bytes or not printable ASCII.
    BadRigId,
    /// A configuration to send does not validate.
    InvalidConfig,
}

impl core::fmt::Display for WireError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            WireError::BufferTooSmall => "output buffer too small for the frame",
            WireError::NotFinite => "a value that must be finite is NaN or infinite",
            WireError::ReservedBits => "a bit mask uses undefined bits",
            WireError::BadRigId => "rig id is longer than 16 bytes or not printable ASCII",
            WireError::InvalidConfig => "the configuration does not validate",
        })
    }
}

impl core::error::Error for WireError {}

/// Why a received frame was rejected: one loss, by kind.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum FrameError {
    /// More bytes than the decoder's capacity arrived before a delimiter.
    Overlong,
    /// The CRC does not match the payload.
    Crc,
    /// The CRC matches, but the header names a protocol version this decoder
    /// does not speak.
    UnknownVersion(u8),
    /// The bytes are not a valid frame of this version.
    Malformed(Malformed),
}

impl core::fmt::Display for FrameError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            FrameError::Overlong => f.write_str("frame longer than the decoder's capacity"),
            FrameError::Crc => f.write_str("CRC mismatch"),
            FrameError::UnknownVersion(v) => write!(
                f,
                "unknown protocol version {v} (this decoder speaks {PROTOCOL_VERSION})"
            ),
            FrameError::Malformed(m) => write!(f, "malformed frame: {m}"),
        }
    }
}

impl core::error::Error for FrameError {}

impl From<Malformed> for FrameError {
    fn from(m: Malformed) -> Self {
        FrameError::Malformed(m)
    }
}

/// How a frame was malformed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Malformed {
    /// Not valid COBS.
    Cobs,
    /// Shorter than a header and a CRC.
    TooShort,
    /// The body does not parse as its kind's fields.
    Postcard,
    /// The header names a frame kind this version does not define.
    UnknownKind(u8),
    /// Bytes follow the body.
    TrailingBytes,
    /// An integral or a Hello setting is NaN or infinite.
    NotFinite,
    /// A bit field uses bits this version does not define.
    ReservedBits,
    /// The rig id is not printable ASCII followed by zero padding.
    RigId,
}

impl core::fmt::Display for Malformed {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Malformed::Cobs => f.write_str("invalid COBS"),
            Malformed::TooShort => f.write_str("shorter than header and CRC"),
            Malformed::Postcard => f.write_str("body does not parse"),
            Malformed::UnknownKind(k) => write!(f, "unknown frame kind {k}"),
            Malformed::TrailingBytes => f.write_str("bytes after the body"),
            Malformed::NotFinite => f.write_str("non-finite integral or setting"),
            Malformed::ReservedBits => f.write_str("undefined bits set"),
            Malformed::RigId => f.write_str("invalid rig id"),
        }
    }
}

impl core::error::Error for Malformed {}
