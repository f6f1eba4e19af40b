//! The downlink: commands from the host to one controller, sealed with a
//! truncated HMAC-SHA-256 under the rig's key.
//!
//! ```text
//! host:       CommandFrame --seal(key, rig id, session)--> encode_command --> bytes
//! controller: bytes --> CommandReceiver (bounded) --> Received --authentic?--> command
//! ```
//!
//! A command on the wire is
//! `COBS(payload ++ tag ++ CRC32_LE(payload ++ tag)) ++ 0x00` with
//! `payload = postcard(version, kind = 16, counter, command)` and
//! `tag = HMAC-SHA-256(key, DOMAIN ++ rig_id ++ session_le ++ payload)[..8]`.
//! The rig id and the session are not sent: they come from the
//! controller's Hello, so a command sealed for one rig, or for an earlier
//! boot of the same rig, fails authentication. The key never travels.

use hmac::{Hmac, KeyInit, Mac};
use sha2::Sha256;

use super::codec::{cobs_decode_in_place, cobs_encode};
use super::command_body::{Command, take_command};
use super::error::*;
use super::format::*;
use super::frames::RigId;

/// One command with its counter: the host numbers its commands 1, 2, 3, …
/// above the last counter the controller accepted, and the controller
/// refuses any counter at or below that one.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CommandFrame {
    /// Strictly increasing within a controller session; the Reply carries it.
    pub counter: u32,
    /// What to do.
    pub command: Command,
}

/// A per-rig command key: 32 bytes shared by one controller and the hosts
/// allowed to command it. Its `Debug` never shows the bytes.
///
/// ```
/// use heatbound::wire::CommandKey;
/// let text = "00112233445566778899aabbccddeeff00112233445566778899aabbccddeeff\n";
/// let key = CommandKey::from_hex(text).unwrap();
/// assert_eq!(format!("{key:?}"), "CommandKey(..)");
/// assert!(CommandKey::from_hex("0011").is_err());
/// ```
#[derive(Clone, PartialEq, Eq)]
pub struct CommandKey([u8; CommandKey::LEN]);

impl CommandKey {
    /// Key length, bytes.
    pub const LEN: usize = 32;

    /// The documented demo key, for the demo, the simulation and the
    /// emulator only: it is public, so it authenticates nothing. It is the
    /// 32 ASCII bytes `heatbound demo key - not secret!`.
    pub const DEMO: CommandKey = CommandKey(*b"heatbound demo key - not secret!");

    /// A key from its bytes.
    pub const fn from_bytes(bytes: [u8; CommandKey::LEN]) -> CommandKey {
        CommandKey(bytes)
    }

    /// A key from 64 hexadecimal digits; surrounding whitespace is ignored.
    pub fn from_hex(text: &str) -> Result<CommandKey, KeyError> {
        let text = text.trim();
        if text.len() != 2 * CommandKey::LEN {
            return Err(KeyError::Length(text.len()));
        }
        let mut bytes = [0u8; CommandKey::LEN];
        for (i, (dst, pair)) in bytes.iter_mut().zip(text.as_bytes().chunks(2)).enumerate() {
            let digit = |c: u8| (c as char).to_digit(16);
            match (
                pair.first().and_then(|&c| digit(c)),
                pair.get(1).and_then(|&c| digit(c)),
            ) {
                (Some(hi), Some(lo)) => *dst = (hi * 16 + lo) as u8,
                _ => return Err(KeyError::NotHex { at: 2 * i }),
            }
        }
        Ok(CommandKey(bytes))
    }

    /// Whether this is [`CommandKey::DEMO`].
    pub fn is_demo(&self) -> bool {
        *self == CommandKey::DEMO
    }
}

impl core::fmt::Debug for CommandKey {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str("CommandKey(..)")
    }
}

/// Why a key's text was refused.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum KeyError {
    /// Not 64 characters (after trimming whitespace).
    Length(usize),
    /// A character that is not a hexadecimal digit, at this offset.
    NotHex {
        /// Offset of the pair, characters.
        at: usize,
    },
}

impl core::fmt::Display for KeyError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            KeyError::Length(n) => write!(
                f,
                "a command key is 64 hexadecimal digits (32 bytes); this one has {n} characters"
            ),
            KeyError::NotHex { at } => {
                write!(f, "a command key is hexadecimal; character {at} is not")
            }
        }
    }
}

impl core::error::Error for KeyError {}

/// Whom a command is for: the rig and its current session, both read from
/// the controller's latest Hello.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Addressee {
    /// The rig's id.
    pub rig_id: RigId,
    /// The controller's session number (its Hello's `session`).
    pub session: u32,
}

/// The domain-separation prefix of every tag, so a tag over these bytes
/// cannot be mistaken for any other use of the same key.
const DOMAIN: &[u8] = b"heatbound command v2\0";

/// A keyed HMAC-SHA-256, ready to seal and check commands. Keying is done
/// once; each tag then costs two SHA-256 compressions plus one per 64
/// bytes of command.
#[derive(Clone)]
pub struct Authenticator {
    keyed: Hmac<Sha256>,
}

impl core::fmt::Debug for Authenticator {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str("Authenticator(..)")
    }
}

impl Authenticator {
    /// An authenticator for `key`.
    pub fn new(key: &CommandKey) -> Authenticator {
        // HMAC takes keys of any length, so this cannot fail; keep a
        // well-defined fallback anyway rather than a panic path.
        let keyed = <Hmac<Sha256> as KeyInit>::new_from_slice(&key.0)
            .unwrap_or_else(|_| <Hmac<Sha256> as KeyInit>::new(&Default::default()));
        Authenticator { keyed }
    }

    fn mac(&self, to: &Addressee, payload: &[u8]) -> Hmac<Sha256> {
        let mut mac = self.keyed.clone();
        mac.update(DOMAIN);
        mac.update(&to.rig_id.0);
        mac.update(&to.session.to_le_bytes());
        mac.update(payload);
        mac
    }

    /// The tag of `payload` for `to`: the first [`MAC_LEN`] bytes of the HMAC.
    pub fn tag(&self, to: &Addressee, payload: &[u8]) -> [u8; MAC_LEN] {
        let full = self.mac(to, payload).finalize().into_bytes();
        let mut tag = [0u8; MAC_LEN];
        for (t, f) in tag.iter_mut().zip(full.iter()) {
            *t = *f;
        }
        tag
    }

    /// Whether `tag` is the tag of `payload` for `to`, compared in
    /// constant time.
    pub fn verify(&self, to: &Addressee, payload: &[u8], tag: &[u8; MAC_LEN]) -> bool {
        self.mac(to, payload).verify_truncated_left(tag).is_ok()
    }
}

/// HMAC-SHA-256 (RFC 2104 with FIPS 180-4 SHA-256) of `message` under
/// `key`: the function every command tag is the first [`MAC_LEN`] bytes of
/// (over the domain prefix, the rig id, the session and the command).
/// Public so it can be checked against published test vectors.
///
/// ```
/// // RFC 4231, test case 2.
/// let mac = heatbound::wire::hmac_sha256(b"Jefe", b"what do ya want for nothing?");
/// assert_eq!(mac[..4], [0x5b, 0xdc, 0xc1, 0x46]);
/// ```
pub fn hmac_sha256(key: &[u8], message: &[u8]) -> [u8; 32] {
    let mut mac = <Hmac<Sha256> as KeyInit>::new_from_slice(key)
        .unwrap_or_else(|_| <Hmac<Sha256> as KeyInit>::new(&Default::default()));
    mac.update(message);
    let full = mac.finalize().into_bytes();
    let mut out = [0u8; 32];
    for (o, f) in out.iter_mut().zip(full.iter()) {
        *o = *f;
    }
    out
}

/// The bytes a command's tag covers, before the command itself: the
/// domain prefix, the rig id and the session, as [`Authenticator`] feeds
/// them.
pub fn tag_prefix(to: &Addressee) -> [u8; DOMAIN.len() + RigId::LEN + 4] {
    let mut out = [0u8; DOMAIN.len() + RigId::LEN + 4];
    let (domain, rest) = out.split_at_mut(DOMAIN.len());
    domain.copy_from_slice(DOMAIN);
    let (rig, session) = rest.split_at_mut(RigId::LEN);
    rig.copy_from_slice(&to.rig_id.0);
    session.copy_from_slice(&to.session.to_le_bytes());
    out
}

/// Writes `frame`, sealed by `auth` for `to` (or with an all-zero tag when
/// `auth` is `None`, which only a Hello request survives), COBS-framed and
/// terminated by `0x00`, to the start of `buf`. Returns the bytes written.
/// A buffer of [`MAX_COMMAND_LEN`] bytes always suffices.
///
/// ```
/// use heatbound::wire::{self, Addressee, Authenticator, Command, CommandFrame, CommandKey, RigId};
/// let auth = Authenticator::new(&CommandKey::DEMO);
/// let to = Addressee { rig_id: RigId::new("rig-a").unwrap(), session: 7 };
/// let frame = CommandFrame { counter: 1, command: Command::Acknowledge(None) };
/// let mut buf = [0; wire::MAX_COMMAND_LEN];
/// let n = wire::encode_command(&frame, Some(&auth), &to, &mut buf).unwrap();
///
/// let received = wire::decode_command(&mut buf[..n - 1]).unwrap();
/// assert_eq!(received.frame, frame);
/// assert!(received.authentic(&auth, &to));
/// let other_session = Addressee { session: 8, ..to };
/// assert!(!received.authentic(&auth, &other_session));
/// ```
pub fn encode_command(
    frame: &CommandFrame,
    auth: Option<&Authenticator>,
    to: &Addressee,
    buf: &mut [u8],
) -> Result<usize, WireError> {
    if let Command::Configure(config) = &frame.command
        && config.check().is_err()
    {
        return Err(WireError::InvalidConfig);
    }
    let mut raw = [0u8; MAX_RAW_COMMAND_LEN];
    let header = (PROTOCOL_VERSION, kind::COMMAND);
    let len = postcard::to_slice(&(header, frame.counter, &frame.command), &mut raw)
        .map_err(|_| WireError::BufferTooSmall)?
        .len();
    let tag = match auth {
        Some(auth) => auth.tag(to, raw.get(..len).ok_or(WireError::BufferTooSmall)?),
        None => [0; MAC_LEN],
    };
    raw.get_mut(len..len + MAC_LEN)
        .ok_or(WireError::BufferTooSmall)?
        .copy_from_slice(&tag);
    let sealed = len + MAC_LEN;
    let crc = CRC.checksum(raw.get(..sealed).ok_or(WireError::BufferTooSmall)?);
    raw.get_mut(sealed..sealed + CRC_LEN)
        .ok_or(WireError::BufferTooSmall)?
        .copy_from_slice(&crc.to_le_bytes());
    let unframed = raw
        .get(..sealed + CRC_LEN)
        .ok_or(WireError::BufferTooSmall)?;
    let n = cobs_encode(unframed, buf).ok_or(WireError::BufferTooSmall)?;
    *buf.get_mut(n).ok_or(WireError::BufferTooSmall)? = 0x00;
    Ok(n + 1)
}

/// A command as received: well formed, not yet authenticated.
#[derive(Debug)]
pub struct Received<'a> {
    /// The command and its counter.
    pub frame: CommandFrame,
    /// The bytes the tag covers.
    payload: &'a [u8],
    tag: [u8; MAC_LEN],
}

impl Received<'_> {
    /// Whether the command carries a valid tag for `to` under `auth`'s key.
    pub fn authentic(&self, auth: &Authenticator, to: &Addressee) -> bool {
        auth.verify(to, self.payload, &self.tag)
    }
}

/// Decodes the COBS bytes of one command (no delimiter) in place: COBS,
/// length, CRC, version, kind and body, in that order. The tag is checked
/// separately with [`Received::authentic`].
pub fn decode_command(buf: &mut [u8]) -> Result<Received<'_>, FrameError> {
    let n = cobs_decode_in_place(buf).ok_or(Malformed::Cobs)?;
    let data = buf.get(..n).ok_or(Malformed::Cobs)?;
    if n < 2 + MAC_LEN + CRC_LEN {
        return Err(Malformed::TooShort.into());
    }
    let (sealed, crc) = data.split_at(n - CRC_LEN);
    let mut crc_le = [0; CRC_LEN];
    crc_le.copy_from_slice(crc);
    if CRC.checksum(sealed) != u32::from_le_bytes(crc_le) {
        return Err(FrameError::Crc);
    }
    let (payload, tag_bytes) = sealed.split_at(sealed.len() - MAC_LEN);
    let mut tag = [0u8; MAC_LEN];
    tag.copy_from_slice(tag_bytes);
    let (version, kind, body) = match payload {
        [version, kind, body @ ..] => (*version, *kind, body),
        _ => return Err(Malformed::TooShort.into()),
    };
    if version != PROTOCOL_VERSION {
        return Err(FrameError::UnknownVersion(version));
    }
    if kind != kind::COMMAND {
        return Err(Malformed::UnknownKind(kind).into());
    }
    let (counter, command) = take_command(body)?;
    Ok(Received {
        frame: CommandFrame { counter, command },
        payload,
        tag,
    })
}

/// What a [`CommandReceiver`] did with a delimiter.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReceiverStats {
    /// Well-formed commands handed on.
    pub commands: u32,
    /// Frames lost to a CRC mismatch (line noise: never answered).
    pub crc_errors: u32,
    /// Frames longer than the receiver's buffer (never answered).
    pub overlong: u32,
    /// Frames with a good CRC that are not a command of this version.
    pub malformed: u32,
    /// Bytes that did not end up in a well-formed command.
    pub bytes_discarded: u32,
}

/// A bounded command receiver: collects bytes up to a delimiter in a fixed
/// buffer of `CAP` bytes (use [`MAX_COMMAND_LEN`]). A stream that never
/// sends a delimiter costs no memory and no time beyond counting its bytes,
/// and resynchronises at the next delimiter. Never allocates, never panics.
///
/// ```
/// use heatbound::wire::{self, Addressee, Command, CommandFrame, CommandReceiver, RigId};
/// let to = Addressee { rig_id: RigId::new("rig-a").unwrap(), session: 1 };
/// let frame = CommandFrame { counter: 0, command: Command::HelloRequest };
/// let mut buf = [0; wire::MAX_COMMAND_LEN];
/// let n = wire::encode_command(&frame, None, &to, &mut buf).unwrap();
///
/// let mut rx = CommandReceiver::<{ wire::MAX_COMMAND_LEN }>::new();
/// for _ in 0..10_000 { assert!(rx.push_byte(0x55).is_none()); } // no delimiter: discarded
/// assert!(rx.push_byte(0).unwrap().is_err());                   // ... and counted as overlong
/// let mut got = None;
/// for &b in &buf[..n] {
///     if let Some(r) = rx.push_byte(b) { got = Some(r.map(|c| c.frame)); }
/// }
/// assert_eq!(got, Some(Ok(frame)));
/// ```
#[derive(Clone, Debug)]
pub struct CommandReceiver<const CAP: usize> {
    buf: [u8; CAP],
    len: usize,
    overflowed: bool,
    stats: ReceiverStats,
}

impl<const CAP: usize> Default for CommandReceiver<CAP> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const CAP: usize> CommandReceiver<CAP> {
    /// An empty receiver.
    pub const fn new() -> Self {
        CommandReceiver {
            buf: [0; CAP],
            len: 0,
            overflowed: false,
            stats: ReceiverStats {
                commands: 0,
                crc_errors: 0,
                overlong: 0,
                malformed: 0,
                bytes_discarded: 0,
            },
        }
    }

    /// Feeds one byte; returns the command or the loss it completes, if any.
    pub fn push_byte(&mut self, byte: u8) -> Option<Result<Received<'_>, FrameError>> {
        if byte != 0 {
            if self.overflowed {
                self.stats.bytes_discarded = self.stats.bytes_discarded.saturating_add(1);
            } else if let Some(slot) = self.buf.get_mut(self.len) {
                *slot = byte;
                self.len += 1;
            } else {
                self.overflowed = true;
                let lost = u32::try_from(self.len + 1).unwrap_or(u32::MAX);
                self.stats.bytes_discarded = self.stats.bytes_discarded.saturating_add(lost);
                self.len = 0;
            }
            return None;
        }
        let len = core::mem::take(&mut self.len);
        if core::mem::take(&mut self.overflowed) {
            self.stats.overlong = self.stats.overlong.saturating_add(1);
            return Some(Err(FrameError::Overlong));
        }
        if len == 0 {
            return None;
        }
        let lost = u32::try_from(len).unwrap_or(u32::MAX);
        let stats = &mut self.stats;
        let result = match self.buf.get_mut(..len) {
            Some(bytes) => decode_command(bytes),
            None => Err(FrameError::Overlong),
        };
        match &result {
            Ok(_) => stats.commands = stats.commands.saturating_add(1),
            Err(e) => {
                stats.bytes_discarded = stats.bytes_discarded.saturating_add(lost);
                match e {
                    FrameError::Crc => stats.crc_errors = stats.crc_errors.saturating_add(1),
                    FrameError::Overlong => stats.overlong = stats.overlong.saturating_add(1),
                    _ => stats.malformed = stats.malformed.saturating_add(1),
                }
            }
        }
        Some(result)
    }

    /// The counters so far.
    pub const fn stats(&self) -> &ReceiverStats {
        &self.stats
    }
}
