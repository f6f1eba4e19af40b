//! The constants of the wire format: protocol version, sizes, kinds and bit layouts.

use crate::alarm::RuleId;
use crate::monitor::Channel;

/// The protocol version carried in every frame's header.
///
/// Any change to a field's order, type or meaning, and any new frame kind,
/// bumps it; decoders reject frames of other versions and count them.
pub const PROTOCOL_VERSION: u8 = 4;

/// The longest frame on the wire, delimiter included: a buffer of this size
/// holds any frame `encode` writes, and a `Decoder` of this capacity
/// accepts every frame of this version.
pub const MAX_FRAME_LEN: usize = 128;

/// The longest command (host to controller) on the wire, delimiter
/// included: a `Configure` carries a whole `RigConfig`. A command receiver
/// of this capacity accepts every command of this version.
pub const MAX_COMMAND_LEN: usize = 512;

/// Bytes of the truncated HMAC-SHA-256 tag a command carries.
pub const MAC_LEN: usize = 8;

/// The worst-case size of a `Summary` on the wire, delimiter included:
/// every varint at its longest (`seq ≥ 2^14`, `t_ms ≥ 2^28`).
pub const SUMMARY_MAX_WIRE_LEN: usize = cobs_max_len(SUMMARY_MAX_PAYLOAD + CRC_LEN) + 1;

/// Header (2) + `seq` (≤ 3) + `t_ms` (≤ 5) + 4 bit bytes (status, faults,
/// alarms, verdict) + at most 8 integrals and 7 figures (f32; the duration
/// as milliseconds takes at most 3 bytes, and only when that is shorter).
pub(super) const SUMMARY_MAX_PAYLOAD: usize = 2 + 3 + 5 + (8 + 7) * 4 + 4;

const _: () = assert!(
    SUMMARY_MAX_WIRE_LEN <= 80,
    "Summary exceeds its 80-byte budget"
);

pub(super) const CRC_LEN: usize = 4;
/// The largest postcard payload plus CRC that still fits in [`MAX_FRAME_LEN`].
pub(super) const MAX_RAW_LEN: usize = MAX_FRAME_LEN - 2;
/// The same for a command in [`MAX_COMMAND_LEN`].
pub(super) const MAX_RAW_COMMAND_LEN: usize = MAX_COMMAND_LEN - 4;

const _: () = assert!(cobs_max_len(MAX_RAW_COMMAND_LEN) < MAX_COMMAND_LEN);
const _: () = assert!(cobs_max_len(MAX_RAW_LEN) < MAX_FRAME_LEN);

/// On a controller the CRC is computed bit by bit: a frame a second does
/// not need a lookup table, and the flash is short. The host decodes
/// millions of frames and keeps tables for 16 bytes a step (16 KiB).
#[cfg(target_os = "none")]
pub(super) type CrcImpl = crc::NoTable;
/// The host's CRC: table-driven, 16 bytes a step.
#[cfg(not(target_os = "none"))]
pub(super) type CrcImpl = crc::Table<16>;

/// The CRC over the postcard bytes: CRC-32/ISO-HDLC (the Ethernet, zlib and
/// PNG CRC), check value `0xCBF43926`.
pub(super) const CRC: crc::Crc<u32, CrcImpl> = crc::Crc::<u32, CrcImpl>::new(&crc::CRC_32_ISO_HDLC);

/// The frame kinds, the second header byte.
pub(super) mod kind {
    pub const HELLO: u8 = 0;
    pub const SUMMARY: u8 = 1;
    pub const EVENT: u8 = 2;
    pub const REPLY: u8 = 3;
    /// Host to controller.
    pub const COMMAND: u8 = 16;
}

/// Bits of `Hello`'s `commands` byte.
pub(super) mod hello_bit {
    pub const KEYED: u8 = 1 << 0;
    pub const DEFINED: u8 = KEYED;
}

/// Bits of `Summary`'s `status` byte.
pub(super) mod status_bit {
    pub const STEADY: u8 = 1 << 0;
    pub const HEAT_OUT_MEASURED: u8 = 1 << 1;
    pub const TRIP_ACTIVE: u8 = 1 << 2;
    pub const ANY_FAULT: u8 = 1 << 3;
    pub const HOT2_MEASURED: u8 = 1 << 4;
    /// Bits 5–6: the mode.
    pub const MODE_MASK: u8 = 0b11 << 5;
    pub const MODE_ENGINE: u8 = 0;
    pub const MODE_HEAT_PUMP: u8 = 1 << 5;
    pub const MODE_COOLER: u8 = 2 << 5;
    pub const DEFINED: u8 =
        STEADY | HEAT_OUT_MEASURED | TRIP_ACTIVE | ANY_FAULT | HOT2_MEASURED | MODE_MASK;
}

/// The bits of a `Summary`'s bit bytes that say which fields travel
/// (version 4): a field a receiver works out from the others is sent only
/// when it differs from that.
pub(super) mod sent_bit {
    /// `status` bit 7: `heat_out_j` travels (else it is `heat_in_j − work_j`).
    pub const HEAT_OUT: u8 = 1 << 7;
    /// `faults` bit 6: `hot_pair_integral_k_s` travels (else it is 0).
    pub const HOT_PAIR: u8 = 1 << 6;
    /// `alarms` bit 7: `entropy_rate_w_per_k` travels (else it is worked
    /// out from the integrals and `ambient_k`).
    pub const ENTROPY_RATE: u8 = 1 << 7;
    /// `verdict` bit 5: `ambient_k` travels (else there is none).
    pub const AMBIENT: u8 = 1 << 5;
    /// `verdict` bit 6: the four uncertainties travel (else there are none).
    pub const UNCERTAINTIES: u8 = 1 << 6;
    /// `verdict` bit 7: the duration travels as whole milliseconds.
    pub const DURATION_MS: u8 = 1 << 7;
    /// The ones in the verdict byte.
    pub const IN_VERDICT: u8 = AMBIENT | UNCERTAINTIES | DURATION_MS;
}

/// Bits of the verdict byte of `Summary` and `Event`.
pub(super) mod verdict_bit {
    /// Bits 0–1: 0 no diagnosis, 1 consistent, 2 inconsistent.
    pub const STATE_MASK: u8 = 0b11;
    pub const CONSISTENT: u8 = 1;
    pub const INCONSISTENT: u8 = 2;
    /// Bits 2–4: the suspect's `Channel` number + 1, 0 for none.
    pub const SUSPECT_SHIFT: u8 = 2;
    pub const DEFINED: u8 = STATE_MASK | (0b111 << SUSPECT_SHIFT);
}

/// The channel bits of a fault byte: bits 0–5 = [`Channel::bit`].
pub(super) const CHANNEL_BITS: u8 = {
    let mut m = 0;
    let mut i = 0;
    while i < Channel::ALL.len() {
        m |= Channel::ALL[i].bit();
        i += 1;
    }
    m
};
/// The stale bit of the fault byte.
pub(super) const STALE_BIT: u8 = 1 << 7;
/// The alarm bits: bit i = `RuleId::index`.
pub(super) const ALARM_BITS: u8 = (1 << RuleId::COUNT) - 1;

/// The longest COBS encoding of `n` bytes: one overhead byte per started
/// block of 254.
pub(super) const fn cobs_max_len(n: usize) -> usize {
    n + n / 254 + 1
}
