//! The byte encoding: postcard bodies in wire order, CRC-32, COBS; `encode` and `decode`.

use serde::{Deserialize, Serialize};

use super::error::*;
use super::format::*;
use super::frames::*;
use crate::alarm::Event;
use crate::config::Mode;

// ---------------------------------------------------------------------------
// Raw layer: the postcard bodies, fields in wire order
// ---------------------------------------------------------------------------

#[derive(Serialize, Deserialize)]
pub(super) struct RawHello {
    rig_id: [u8; RigId::LEN],
    firmware_version: (u8, u8, u8),
    sample_period_ms: u32,
    window_samples: u16,
    mode: Mode,
    coverage_factor: f32,
    ambient_k: Option<f32>,
    uncertainty: Uncertainties,
    losses: Option<(f32, f32)>,
    config_digest: u32,
    run: u32,
    session: u32,
    last_counter: u32,
    commands: u8,
}

#[derive(Serialize, Deserialize)]
pub(super) struct RawSummary {
    seq: u16,
    t_ms: u32,
    integrals: [f32; 8],
    figures: [f32; 7],
    status: u8,
    faults: u8,
    alarms: u8,
    verdict: u8,
}

#[derive(Serialize, Deserialize)]
pub(super) struct RawEvent {
    seq: u16,
    event: Event,
    verdict: u8,
}

#[derive(Serialize, Deserialize)]
pub(super) struct RawReply {
    counter: u32,
    t_ms: u32,
    code: ReplyCode,
}

/// Not available travels as NaN.
pub(super) fn nan_if_none(x: Option<f32>) -> f32 {
    x.unwrap_or(f32::NAN)
}

/// Every non-finite value reads as not available.
pub(super) fn none_if_not_finite(x: f32) -> Option<f32> {
    x.is_finite().then_some(x)
}

pub(super) fn raw_summary(s: &Summary) -> Result<RawSummary, WireError> {
    if !s.integral_values().iter().all(|x| x.is_finite())
        || !s.figures().iter().all(|x| x.is_none_or(f32::is_finite))
    {
        return Err(WireError::NotFinite);
    }
    if s.faults.channels & !CHANNEL_BITS != 0 || s.alarms & !ALARM_BITS != 0 {
        return Err(WireError::ReservedBits);
    }
    Ok(RawSummary {
        seq: s.seq,
        t_ms: s.t_ms,
        integrals: s.integral_values(),
        figures: s.figures().map(nan_if_none),
        status: s.status.to_bits(),
        faults: s.faults.channels | if s.faults.stale { STALE_BIT } else { 0 },
        alarms: s.alarms,
        verdict: s.verdict.to_bits(),
    })
}

pub(super) fn summary_from_raw(r: RawSummary) -> Result<Summary, Malformed> {
    if !r.integrals.iter().all(|x| x.is_finite()) {
        return Err(Malformed::NotFinite);
    }
    let status = Status::from_bits(r.status).ok_or(Malformed::ReservedBits)?;
    if r.faults & !(CHANNEL_BITS | STALE_BIT) != 0 || r.alarms & !ALARM_BITS != 0 {
        return Err(Malformed::ReservedBits);
    }
    let [
        duration_s,
        heat_in_j,
        work_j,
        heat_out_j,
        entropy_in_j_per_k,
        entropy_out_j_per_k,
        hot_temperature_integral_k_s,
        hot_pair_integral_k_s,
    ] = r.integrals;
    let [
        ambient_k,
        entropy_rate_w_per_k,
        u_performance,
        u_bound,
        u_margin,
        u_entropy_rate_w_per_k,
        bias,
    ] = r.figures.map(none_if_not_finite);
    let verdict = Verdict::from_bits(r.verdict, bias).ok_or(Malformed::ReservedBits)?;
    Ok(Summary {
        seq: r.seq,
        t_ms: r.t_ms,
        duration_s,
        heat_in_j,
        work_j,
        heat_out_j,
        entropy_in_j_per_k,
        entropy_out_j_per_k,
        hot_temperature_integral_k_s,
        hot_pair_integral_k_s,
        ambient_k,
        entropy_rate_w_per_k,
        u_performance,
        u_bound,
        u_margin,
        u_entropy_rate_w_per_k,
        status,
        faults: FaultBits {
            channels: r.faults & CHANNEL_BITS,
            stale: r.faults & STALE_BIT != 0,
        },
        alarms: r.alarms,
        verdict,
    })
}

pub(super) fn raw_hello(h: &Hello) -> RawHello {
    RawHello {
        rig_id: h.rig_id.0,
        firmware_version: h.firmware_version,
        sample_period_ms: h.sample_period_ms,
        window_samples: h.window_samples,
        mode: h.mode,
        coverage_factor: h.coverage_factor,
        ambient_k: h.ambient_k,
        uncertainty: h.uncertainty,
        losses: h.losses,
        config_digest: h.config_digest,
        run: h.run,
        session: h.session,
        last_counter: h.last_counter,
        commands: if h.keyed { hello_bit::KEYED } else { 0 },
    }
}

pub(super) fn hello_from_raw(r: RawHello) -> Result<Hello, Malformed> {
    if r.commands & !hello_bit::DEFINED != 0 {
        return Err(Malformed::ReservedBits);
    }
    let hello = Hello {
        rig_id: RigId::from_padded(r.rig_id).ok_or(Malformed::RigId)?,
        firmware_version: r.firmware_version,
        sample_period_ms: r.sample_period_ms,
        window_samples: r.window_samples,
        mode: r.mode,
        coverage_factor: r.coverage_factor,
        ambient_k: r.ambient_k,
        uncertainty: r.uncertainty,
        losses: r.losses,
        config_digest: r.config_digest,
        run: r.run,
        session: r.session,
        last_counter: r.last_counter,
        keyed: r.commands & hello_bit::KEYED != 0,
    };
    if hello.is_valid() {
        Ok(hello)
    } else {
        Err(Malformed::NotFinite)
    }
}

// ---------------------------------------------------------------------------
// Encoding
// ---------------------------------------------------------------------------

/// Writes `frame`, COBS-framed and terminated by `0x00`, to the start of
/// `buf`; returns the number of bytes written.
///
/// A buffer of [`MAX_FRAME_LEN`] bytes always suffices.
///
/// ```
/// use heatbound::wire::{self, Frame, Summary};
/// let mut buf = [0; wire::MAX_FRAME_LEN];
/// let n = wire::encode(&Frame::Summary(Summary::default()), &mut buf).unwrap();
/// assert_eq!(buf[n - 1], 0x00);
/// assert!(!buf[..n - 1].contains(&0x00));
/// ```
pub fn encode(frame: &Frame, buf: &mut [u8]) -> Result<usize, WireError> {
    let mut raw = [0u8; MAX_RAW_LEN];
    let header = (PROTOCOL_VERSION, frame.kind());
    let written = match frame {
        Frame::Hello(h) => {
            if !h.is_valid() {
                return Err(WireError::NotFinite);
            }
            postcard::to_slice(&(header, raw_hello(h)), &mut raw).map(|s| s.len())
        }
        Frame::Summary(s) => {
            postcard::to_slice(&(header, raw_summary(s)?), &mut raw).map(|s| s.len())
        }
        Frame::Event(e) => postcard::to_slice(
            &(
                header,
                RawEvent {
                    seq: e.seq,
                    event: e.event,
                    verdict: e.verdict.to_bits(),
                },
            ),
            &mut raw,
        )
        .map(|s| s.len()),
        Frame::Reply(r) => postcard::to_slice(
            &(
                header,
                RawReply {
                    counter: r.counter,
                    t_ms: r.t_ms,
                    code: r.code,
                },
            ),
            &mut raw,
        )
        .map(|s| s.len()),
    };
    // Every frame of this version fits `raw`; a failure here is a bug that
    // a test would catch, so report it rather than panic.
    let len = written.map_err(|_| WireError::BufferTooSmall)?;
    let crc = CRC.checksum(raw.get(..len).ok_or(WireError::BufferTooSmall)?);
    raw.get_mut(len..len + CRC_LEN)
        .ok_or(WireError::BufferTooSmall)?
        .copy_from_slice(&crc.to_le_bytes());
    let unframed = raw.get(..len + CRC_LEN).ok_or(WireError::BufferTooSmall)?;
    let n = cobs_encode(unframed, buf).ok_or(WireError::BufferTooSmall)?;
    *buf.get_mut(n).ok_or(WireError::BufferTooSmall)? = 0x00;
    Ok(n + 1)
}

/// COBS-encodes `src` into `dst` without a delimiter; `None` if `dst` is too
/// short.
pub(super) fn cobs_encode(src: &[u8], dst: &mut [u8]) -> Option<usize> {
    let mut code_at = 0;
    let mut out = 1;
    let mut code: u8 = 1;
    for &b in src {
        if b == 0 {
            *dst.get_mut(code_at)? = code;
            code_at = out;
            out += 1;
            code = 1;
        } else {
            *dst.get_mut(out)? = b;
            out += 1;
            code += 1;
            if code == 0xFF {
                *dst.get_mut(code_at)? = code;
                code_at = out;
                out += 1;
                code = 1;
            }
        }
    }
    *dst.get_mut(code_at)? = code;
    Some(out)
}

/// COBS-decodes `buf` (no delimiter) in place; `None` if it is not COBS.
pub(super) fn cobs_decode_in_place(buf: &mut [u8]) -> Option<usize> {
    let len = buf.len();
    let (mut read, mut write) = (0, 0);
    while read < len {
        let code = *buf.get(read)?;
        if code == 0 {
            return None;
        }
        let start = read + 1;
        let end = start + usize::from(code) - 1;
        if end > len || buf.get(start..end)?.contains(&0) {
            return None;
        }
        // `write < start` always, so the copy never overtakes the reading.
        // Byte by byte, forwards: `copy_within` would call memmove, 1.5 KB
        // in a Cortex-M image, for blocks of at most 254 bytes.
        for from in start..end {
            let b = *buf.get(from)?;
            *buf.get_mut(write)? = b;
            write += 1;
        }
        read = end;
        if code != 0xFF && read < len {
            *buf.get_mut(write)? = 0;
            write += 1;
        }
    }
    Some(write)
}

// ---------------------------------------------------------------------------
// Decoding
// ---------------------------------------------------------------------------

/// Decodes one COBS-encoded frame, with or without its trailing delimiter.
///
/// ```
/// use heatbound::wire::{self, Frame, FrameError, Summary};
/// let frame = Frame::Summary(Summary { seq: 3, ..Summary::default() });
/// let mut buf = [0; wire::MAX_FRAME_LEN];
/// let n = wire::encode(&frame, &mut buf).unwrap();
/// assert_eq!(wire::decode(&buf[..n]), Ok(frame));
/// buf[5] ^= 0x10;
/// assert!(wire::decode(&buf[..n]).is_err());
/// ```
pub fn decode(encoded: &[u8]) -> Result<Frame, FrameError> {
    let encoded = encoded.strip_suffix(&[0]).unwrap_or(encoded);
    let mut buf = [0u8; MAX_FRAME_LEN];
    let dst = buf.get_mut(..encoded.len()).ok_or(FrameError::Overlong)?;
    dst.copy_from_slice(encoded);
    decode_in_place(dst)
}

/// Decodes the COBS bytes of one frame (no delimiter), in place.
pub(super) fn decode_in_place(buf: &mut [u8]) -> Result<Frame, FrameError> {
    let n = cobs_decode_in_place(buf).ok_or(Malformed::Cobs)?;
    let data = buf.get(..n).ok_or(Malformed::Cobs)?;
    if n < 2 + CRC_LEN {
        return Err(Malformed::TooShort.into());
    }
    let (payload, crc) = data.split_at(n - CRC_LEN);
    let mut crc_le = [0; CRC_LEN];
    crc_le.copy_from_slice(crc);
    if CRC.checksum(payload) != u32::from_le_bytes(crc_le) {
        return Err(FrameError::Crc);
    }
    let (version, kind, body) = match payload {
        [version, kind, body @ ..] => (*version, *kind, body),
        _ => return Err(Malformed::TooShort.into()),
    };
    if version != PROTOCOL_VERSION {
        return Err(FrameError::UnknownVersion(version));
    }
    let frame = match kind {
        kind::HELLO => Frame::Hello(hello_from_raw(take_all(body)?)?),
        kind::SUMMARY => Frame::Summary(summary_from_raw(take_all(body)?)?),
        kind::EVENT => {
            let r: RawEvent = take_all(body)?;
            Frame::Event(EventFrame {
                seq: r.seq,
                event: r.event,
                verdict: Verdict::from_bits(r.verdict, None).ok_or(Malformed::ReservedBits)?,
            })
        }
        kind::REPLY => {
            let r: RawReply = take_all(body)?;
            Frame::Reply(Reply {
                counter: r.counter,
                t_ms: r.t_ms,
                code: r.code,
            })
        }
        other => return Err(Malformed::UnknownKind(other).into()),
    };
    Ok(frame)
}

/// Parses `body` as exactly one `T`.
pub(super) fn take_all<'a, T: Deserialize<'a>>(body: &'a [u8]) -> Result<T, Malformed> {
    match postcard::take_from_bytes(body) {
        Ok((t, [])) => Ok(t),
        Ok(_) => Err(Malformed::TrailingBytes),
        Err(_) => Err(Malformed::Postcard),
    }
}
