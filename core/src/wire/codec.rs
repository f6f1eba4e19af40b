//! The byte encoding: postcard bodies in wire order, CRC-32, COBS; `encode` and `decode`.

use serde::{Deserialize, Serialize};

use super::error::*;
use super::format::*;
use super::frames::*;
use crate::alarm::Event;
use crate::config::Mode;
use crate::num::Real;

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

// ---------------------------------------------------------------------------
// Summary body (variable length: a field the receiver can work out from the
// others travels only when it differs from that)
// ---------------------------------------------------------------------------

/// A window shorter than this many milliseconds travels as a varint of at
/// most 3 bytes instead of an f32.
const DURATION_MS_LIMIT: u32 = 1 << 21;

/// Same value, bit for bit (`-0.0` is not `0.0`; NaN is compared by bits).
fn same(a: f32, b: f32) -> bool {
    a.to_bits() == b.to_bits()
}

fn same_option(a: Option<f32>, b: Option<f32>) -> bool {
    match (a, b) {
        (None, None) => true,
        (Some(a), Some(b)) => same(a, b),
        _ => false,
    }
}

/// The integrated time in whole milliseconds, if `duration_s` is exactly
/// what the controller makes of them (`Real::from_ms`) and they take fewer
/// bytes than an f32.
fn duration_ms(duration_s: f32) -> Option<u32> {
    let ms = libm::round(f64::from(duration_s) * 1000.0);
    if !(0.0..f64::from(DURATION_MS_LIMIT)).contains(&ms) {
        return None;
    }
    let ms = ms as u32;
    same(<f32 as Real>::from_ms(u64::from(ms)), duration_s).then_some(ms)
}

/// Reads postcard values one after another from a body.
struct Reader<'a> {
    rest: &'a [u8],
}

impl<'a> Reader<'a> {
    fn take<T: Deserialize<'a>>(&mut self) -> Result<T, Malformed> {
        let (value, rest) =
            postcard::take_from_bytes(self.rest).map_err(|_| Malformed::Postcard)?;
        self.rest = rest;
        Ok(value)
    }

    fn take_if(&mut self, sent: bool) -> Result<Option<f32>, Malformed> {
        if sent {
            self.take().map(Some)
        } else {
            Ok(None)
        }
    }
}

/// Refuses a Summary this version cannot send: a non-finite integral or
/// present figure, or undefined fault or alarm bits.
fn check_summary(s: &Summary) -> Result<(), WireError> {
    if !s.integral_values().iter().all(|x| x.is_finite())
        || !s.figures().iter().all(|x| x.is_none_or(f32::is_finite))
    {
        return Err(WireError::NotFinite);
    }
    if s.faults.channels & !CHANNEL_BITS != 0 || s.alarms & !ALARM_BITS != 0 {
        return Err(WireError::ReservedBits);
    }
    Ok(())
}

/// σ̇ as the controller works it out from the integrals and its T0, which a
/// receiver works out the same way: it travels only when it differs.
fn predicted_entropy_rate(s: &Summary) -> Option<f32> {
    s.recomputed_entropy_rate()
}

/// Reads a Summary body (docs/wire-format.md §3.2).
pub(super) fn read_summary(body: &[u8]) -> Result<Summary, Malformed> {
    let mut r = Reader { rest: body };
    let (seq, t_ms): (u16, u32) = r.take()?;
    let [status, faults, alarms, verdict]: [u8; 4] = r.take()?;
    let sent = |byte: u8, bit: u8| byte & bit != 0;
    let duration_s = if sent(verdict, sent_bit::DURATION_MS) {
        let ms: u32 = r.take()?;
        if ms >= DURATION_MS_LIMIT {
            return Err(Malformed::Postcard);
        }
        <f32 as Real>::from_ms(u64::from(ms))
    } else {
        r.take()?
    };
    let (heat_in_j, work_j): (f32, f32) = r.take()?;
    let heat_out_j = r
        .take_if(sent(status, sent_bit::HEAT_OUT))?
        .unwrap_or(heat_in_j - work_j);
    let (entropy_in_j_per_k, entropy_out_j_per_k, hot_temperature_integral_k_s): (f32, f32, f32) =
        r.take()?;
    let hot_pair_integral_k_s = r.take_if(sent(faults, sent_bit::HOT_PAIR))?.unwrap_or(0.0);
    let ambient_k = r.take_if(sent(verdict, sent_bit::AMBIENT))?;
    let entropy_rate = r.take_if(sent(alarms, sent_bit::ENTROPY_RATE))?;
    let us: [f32; 4] = if sent(verdict, sent_bit::UNCERTAINTIES) {
        r.take()?
    } else {
        [f32::NAN; 4]
    };
    let verdict = verdict & !sent_bit::IN_VERDICT;
    let bias = r.take_if(verdict >> verdict_bit::SUSPECT_SHIFT != 0)?;
    if !r.rest.is_empty() {
        return Err(Malformed::TrailingBytes);
    }

    let status = Status::from_bits(status & !sent_bit::HEAT_OUT).ok_or(Malformed::ReservedBits)?;
    let faults = faults & !sent_bit::HOT_PAIR;
    let alarms = alarms & !sent_bit::ENTROPY_RATE;
    if faults & !(CHANNEL_BITS | STALE_BIT) != 0 || alarms & !ALARM_BITS != 0 {
        return Err(Malformed::ReservedBits);
    }
    let verdict = Verdict::from_bits(verdict, bias.and_then(none_if_not_finite))
        .ok_or(Malformed::ReservedBits)?;
    let [u_performance, u_bound, u_margin, u_entropy_rate_w_per_k] = us.map(none_if_not_finite);
    let mut s = Summary {
        seq,
        t_ms,
        duration_s,
        heat_in_j,
        work_j,
        heat_out_j,
        entropy_in_j_per_k,
        entropy_out_j_per_k,
        hot_temperature_integral_k_s,
        hot_pair_integral_k_s,
        ambient_k: ambient_k.and_then(none_if_not_finite),
        entropy_rate_w_per_k: None,
        u_performance,
        u_bound,
        u_margin,
        u_entropy_rate_w_per_k,
        status,
        faults: FaultBits {
            channels: faults & CHANNEL_BITS,
            stale: faults & STALE_BIT != 0,
        },
        alarms,
        verdict,
    };
    // A difference of finite values can overflow.
    if !s.integral_values().iter().all(|x| x.is_finite()) {
        return Err(Malformed::NotFinite);
    }
    s.entropy_rate_w_per_k = match entropy_rate {
        Some(x) => none_if_not_finite(x),
        None => predicted_entropy_rate(&s),
    };
    Ok(s)
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
    let mut w = Writer {
        buf: &mut raw,
        len: 0,
    };
    let written = match frame {
        Frame::Hello(h) => {
            if !h.is_valid() {
                return Err(WireError::NotFinite);
            }
            w.hello(&raw_hello(h))
        }
        Frame::Summary(s) => {
            check_summary(s)?;
            w.summary(s)
        }
        Frame::Event(e) => w.event(&RawEvent {
            seq: e.seq,
            event: e.event,
            verdict: e.verdict.to_bits(),
        }),
        Frame::Reply(r) => w.reply(&RawReply {
            counter: r.counter,
            t_ms: r.t_ms,
            code: r.code,
        }),
    };
    // Every frame of this version fits `raw`; a failure here is a bug that
    // a test would catch, so report it rather than panic.
    let len = written.map(|()| w.len).ok_or(WireError::BufferTooSmall)?;
    let crc = CRC.checksum(raw.get(..len).ok_or(WireError::BufferTooSmall)?);
    raw.get_mut(len..len + CRC_LEN)
        .ok_or(WireError::BufferTooSmall)?
        .copy_from_slice(&crc.to_le_bytes());
    let unframed = raw.get(..len + CRC_LEN).ok_or(WireError::BufferTooSmall)?;
    let n = cobs_encode(unframed, buf).ok_or(WireError::BufferTooSmall)?;
    *buf.get_mut(n).ok_or(WireError::BufferTooSmall)? = 0x00;
    Ok(n + 1)
}

/// Postcard's encoding of a frame's header and body, written by hand: the
/// derived serializers with postcard's flavor checks are about 1.2 KB more
/// of a controller's flash. Gives the same bytes as
/// `postcard::to_slice(&((PROTOCOL_VERSION, kind), raw))` (checked against
/// it in the tests):
///
/// ```text
/// u8                  the byte
/// u16, u32, variant   varint (LEB128)
/// f32                 4 bytes, little-endian
/// Option<T>           0 (None), or 1 then T
/// struct, tuple       the fields in order, no length
/// ```
/// `None` when the buffer is full.
pub(super) struct Writer<'a> {
    pub(super) buf: &'a mut [u8],
    pub(super) len: usize,
}

impl Writer<'_> {
    fn byte(&mut self, b: u8) -> Option<()> {
        *self.buf.get_mut(self.len)? = b;
        self.len += 1;
        Some(())
    }

    // Out of line, as is `f32`: a frame writes up to 20 of each.
    #[inline(never)]
    fn varint(&mut self, mut v: u32) -> Option<()> {
        while v >= 0x80 {
            self.byte((v as u8) | 0x80)?;
            v >>= 7;
        }
        self.byte(v as u8)
    }

    #[inline(never)]
    fn f32(&mut self, x: f32) -> Option<()> {
        let end = self.len + 4;
        self.buf
            .get_mut(self.len..end)?
            .copy_from_slice(&x.to_le_bytes());
        self.len = end;
        Some(())
    }

    fn header(&mut self, kind: u8) -> Option<()> {
        self.byte(PROTOCOL_VERSION)?;
        self.byte(kind)
    }

    pub(super) fn hello(&mut self, r: &RawHello) -> Option<()> {
        self.header(kind::HELLO)?;
        for b in r.rig_id {
            self.byte(b)?;
        }
        let (major, minor, patch) = r.firmware_version;
        self.byte(major)?;
        self.byte(minor)?;
        self.byte(patch)?;
        self.varint(r.sample_period_ms)?;
        self.varint(u32::from(r.window_samples))?;
        self.varint(r.mode as u32)?;
        self.f32(r.coverage_factor)?;
        match r.ambient_k {
            Some(t) => {
                self.byte(1)?;
                self.f32(t)?;
            }
            None => self.byte(0)?,
        }
        let u = &r.uncertainty;
        for x in [
            u.hot_k,
            u.cold_k,
            u.heat_in_rel,
            u.work_rel,
            u.heat_out_rel,
            u.hot2_k,
        ] {
            self.f32(x)?;
        }
        match r.losses {
            Some((ua, u_ua)) => {
                self.byte(1)?;
                self.f32(ua)?;
                self.f32(u_ua)?;
            }
            None => self.byte(0)?,
        }
        for v in [r.config_digest, r.run, r.session, r.last_counter] {
            self.varint(v)?;
        }
        self.byte(r.commands)
    }

    /// A Summary (docs/wire-format.md §3.2): each field a receiver works
    /// out from the others only when it differs from that.
    pub(super) fn summary(&mut self, s: &Summary) -> Option<()> {
        let heat_out = !same(s.heat_out_j, s.heat_in_j - s.work_j);
        let hot_pair = !same(s.hot_pair_integral_k_s, 0.0);
        let entropy_rate = !same_option(s.entropy_rate_w_per_k, predicted_entropy_rate(s));
        let us = [
            s.u_performance,
            s.u_bound,
            s.u_margin,
            s.u_entropy_rate_w_per_k,
        ];
        let uncertainties = us.iter().any(Option::is_some);
        let ms = duration_ms(s.duration_s);
        let flag = |on: bool, bit: u8| if on { bit } else { 0 };

        self.header(kind::SUMMARY)?;
        self.varint(u32::from(s.seq))?;
        self.varint(s.t_ms)?;
        self.byte(s.status.to_bits() | flag(heat_out, sent_bit::HEAT_OUT))?;
        self.byte(
            s.faults.channels
                | flag(s.faults.stale, STALE_BIT)
                | flag(hot_pair, sent_bit::HOT_PAIR),
        )?;
        self.byte(s.alarms | flag(entropy_rate, sent_bit::ENTROPY_RATE))?;
        self.byte(
            s.verdict.to_bits()
                | flag(s.ambient_k.is_some(), sent_bit::AMBIENT)
                | flag(uncertainties, sent_bit::UNCERTAINTIES)
                | flag(ms.is_some(), sent_bit::DURATION_MS),
        )?;
        match ms {
            Some(ms) => self.varint(ms)?,
            None => self.f32(s.duration_s)?,
        }
        self.f32(s.heat_in_j)?;
        self.f32(s.work_j)?;
        if heat_out {
            self.f32(s.heat_out_j)?;
        }
        self.f32(s.entropy_in_j_per_k)?;
        self.f32(s.entropy_out_j_per_k)?;
        self.f32(s.hot_temperature_integral_k_s)?;
        if hot_pair {
            self.f32(s.hot_pair_integral_k_s)?;
        }
        if let Some(t0) = s.ambient_k {
            self.f32(t0)?;
        }
        if entropy_rate {
            self.f32(nan_if_none(s.entropy_rate_w_per_k))?;
        }
        if uncertainties {
            for u in us {
                self.f32(nan_if_none(u))?;
            }
        }
        if s.verdict.suspect.is_some() {
            self.f32(nan_if_none(s.verdict.bias))?;
        }
        Some(())
    }

    pub(super) fn event(&mut self, r: &RawEvent) -> Option<()> {
        self.header(kind::EVENT)?;
        self.varint(u32::from(r.seq))?;
        let e = &r.event;
        self.varint(e.t_ms)?;
        self.varint(e.rule as u32)?;
        self.varint(e.kind as u32)?;
        self.varint(e.severity as u32)?;
        self.byte(r.verdict)
    }

    pub(super) fn reply(&mut self, r: &RawReply) -> Option<()> {
        self.header(kind::REPLY)?;
        self.varint(r.counter)?;
        self.varint(r.t_ms)?;
        self.varint(r.code as u32)
    }
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
        kind::SUMMARY => Frame::Summary(read_summary(body)?),
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

#[cfg(test)]
mod writer_tests {
    //! The hand-written frame writer against postcard's serializers.

    use proptest::prelude::*;

    use super::*;
    use crate::alarm::{EventKind, RuleId, Severity};

    fn ours(write: impl FnOnce(&mut Writer<'_>) -> Option<()>) -> Vec<u8> {
        let mut raw = [0u8; MAX_RAW_LEN];
        let mut w = Writer {
            buf: &mut raw,
            len: 0,
        };
        write(&mut w).unwrap();
        let n = w.len;
        raw[..n].to_vec()
    }

    fn reference<T: Serialize>(kind: u8, body: &T) -> Vec<u8> {
        let mut raw = [0u8; MAX_RAW_LEN];
        postcard::to_slice(&((PROTOCOL_VERSION, kind), body), &mut raw)
            .unwrap()
            .to_vec()
    }

    fn f(bits: u32) -> f32 {
        f32::from_bits(bits)
    }

    proptest! {
        #[test]
        fn hello_is_written_as_postcard_does(
            id in any::<[u8; RigId::LEN]>(),
            small in any::<[u8; 5]>(),
            words in any::<[u32; 6]>(),
            floats in any::<[u32; 10]>(),
            options in any::<[bool; 2]>(),
        ) {
            let r = RawHello {
                rig_id: id,
                firmware_version: (small[0], small[1], small[2]),
                sample_period_ms: words[0],
                window_samples: words[1] as u16,
                mode: [Mode::Engine, Mode::HeatPump, Mode::Cooler][usize::from(small[3] % 3)],
                coverage_factor: f(floats[0]),
                ambient_k: options[0].then(|| f(floats[1])),
                uncertainty: Uncertainties {
                    hot_k: f(floats[2]),
                    cold_k: f(floats[3]),
                    heat_in_rel: f(floats[4]),
                    work_rel: f(floats[5]),
                    heat_out_rel: f(floats[6]),
                    hot2_k: f(floats[7]),
                },
                losses: options[1].then(|| (f(floats[8]), f(floats[9]))),
                config_digest: words[2],
                run: words[3],
                session: words[4],
                last_counter: words[5],
                commands: small[4],
            };
            prop_assert_eq!(ours(|w| w.hello(&r)), reference(kind::HELLO, &r));
        }

        #[test]
        fn event_and_reply_are_written_as_postcard_does(
            seq in any::<u16>(),
            t_ms in any::<u32>(),
            counter in any::<u32>(),
            picks in any::<[u8; 4]>(),
            verdict in any::<u8>(),
        ) {
            let r = RawEvent {
                seq,
                event: Event {
                    t_ms,
                    rule: RuleId::ALL[usize::from(picks[0]) % RuleId::COUNT],
                    kind: [EventKind::Raised, EventKind::Cleared, EventKind::Acknowledged]
                        [usize::from(picks[1] % 3)],
                    severity: [Severity::Advisory, Severity::Warning, Severity::Trip]
                        [usize::from(picks[2] % 3)],
                },
                verdict,
            };
            prop_assert_eq!(ours(|w| w.event(&r)), reference(kind::EVENT, &r));
            let r = RawReply {
                counter,
                t_ms,
                code: ReplyCode::ALL[usize::from(picks[3]) % ReplyCode::ALL.len()],
            };
            prop_assert_eq!(ours(|w| w.reply(&r)), reference(kind::REPLY, &r));
        }
    }

    #[test]
    fn a_full_buffer_is_refused() {
        let mut raw = [0u8; 5];
        let mut w = Writer {
            buf: &mut raw,
            len: 0,
        };
        let r = RawReply {
            counter: u32::MAX,
            t_ms: 0,
            code: ReplyCode::Applied,
        };
        assert_eq!(w.reply(&r), None);
    }
}
