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

use serde::{Deserialize, Serialize};

use crate::alarm::{AlarmSet, Event, RuleId};
use crate::config::{Mode, RigConfig};
use crate::monitor::{Channel, Integrals, Monitor};

/// The protocol version carried in every frame's header.
///
/// Any change to a field's order, type or meaning, and any new frame kind,
/// bumps it; decoders reject frames of other versions and count them.
pub const PROTOCOL_VERSION: u8 = 1;

/// The longest frame on the wire, delimiter included: a buffer of this size
/// holds any frame [`encode`] writes, and a [`Decoder`] of this capacity
/// accepts every frame of this version.
pub const MAX_FRAME_LEN: usize = 128;

/// The worst-case size of a [`Summary`] on the wire, delimiter included:
/// every varint at its longest (`seq ≥ 2^14`, `t_ms ≥ 2^28`).
pub const SUMMARY_MAX_WIRE_LEN: usize = cobs_max_len(SUMMARY_MAX_PAYLOAD + CRC_LEN) + 1;

/// Header (2) + `seq` (≤ 3) + `t_ms` (≤ 5) + 15 f32 + 3 bit bytes.
const SUMMARY_MAX_PAYLOAD: usize = 2 + 3 + 5 + 15 * 4 + 3;

const _: () = assert!(
    SUMMARY_MAX_WIRE_LEN <= 80,
    "Summary exceeds its 80-byte budget"
);

const CRC_LEN: usize = 4;
/// The largest postcard payload plus CRC that still fits in [`MAX_FRAME_LEN`].
const MAX_RAW_LEN: usize = MAX_FRAME_LEN - 2;

/// The CRC over the postcard bytes: CRC-32/ISO-HDLC (the Ethernet, zlib and
/// PNG CRC), check value `0xCBF43926`.
const CRC: crc::Crc<u32> = crc::Crc::<u32>::new(&crc::CRC_32_ISO_HDLC);

/// The frame kinds, the second header byte.
mod kind {
    pub const HELLO: u8 = 0;
    pub const SUMMARY: u8 = 1;
    pub const EVENT: u8 = 2;
}

/// Bits of [`Summary`]'s `status` byte.
mod status_bit {
    pub const STEADY: u8 = 1 << 0;
    pub const HEAT_OUT_MEASURED: u8 = 1 << 1;
    pub const TRIP_ACTIVE: u8 = 1 << 2;
    pub const ANY_FAULT: u8 = 1 << 3;
    pub const DEFINED: u8 = STEADY | HEAT_OUT_MEASURED | TRIP_ACTIVE | ANY_FAULT;
}

/// The channel bits of a fault byte: bits 0–4 = [`Channel::bit`].
const CHANNEL_BITS: u8 = {
    let mut m = 0;
    let mut i = 0;
    while i < Channel::ALL.len() {
        m |= Channel::ALL[i].bit();
        i += 1;
    }
    m
};
/// The stale bit of the fault byte.
const STALE_BIT: u8 = 1 << 5;
/// The alarm bits: bit i = [`RuleId::index`].
const ALARM_BITS: u8 = (1 << RuleId::COUNT) - 1;

/// The longest COBS encoding of `n` bytes: one overhead byte per started
/// block of 254.
const fn cobs_max_len(n: usize) -> usize {
    n + n / 254 + 1
}

// ---------------------------------------------------------------------------
// Validated frames
// ---------------------------------------------------------------------------

/// One frame, validated.
#[derive(Clone, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Frame {
    /// Who is talking and how it computes: sent at start-up and periodically.
    Hello(Hello),
    /// One window's integrals and figures.
    Summary(Summary),
    /// An alarm event.
    Event(EventFrame),
}

impl Frame {
    /// The frame's kind byte on the wire.
    pub const fn kind(&self) -> u8 {
        match self {
            Frame::Hello(_) => kind::HELLO,
            Frame::Summary(_) => kind::SUMMARY,
            Frame::Event(_) => kind::EVENT,
        }
    }
}

/// A rig identifier: up to 16 printable ASCII bytes.
///
/// On the wire it is 16 bytes, zero-padded.
///
/// ```
/// use heatbound::wire::RigId;
/// let id = RigId::new("stirling-2").unwrap();
/// assert_eq!(id.as_str(), "stirling-2");
/// assert!(RigId::new("much-too-long-rig-id").is_err());
/// ```
#[derive(Clone, Copy, PartialEq, Eq, Hash, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RigId([u8; RigId::LEN]);

impl RigId {
    /// The longest id, bytes.
    pub const LEN: usize = 16;

    /// `id` if it is at most 16 bytes of printable ASCII (space to `~`).
    pub fn new(id: &str) -> Result<RigId, WireError> {
        let mut bytes = [0; RigId::LEN];
        if id.len() > RigId::LEN {
            return Err(WireError::BadRigId);
        }
        for (dst, b) in bytes.iter_mut().zip(id.bytes()) {
            if !(0x20..=0x7E).contains(&b) {
                return Err(WireError::BadRigId);
            }
            *dst = b;
        }
        Ok(RigId(bytes))
    }

    /// The padded bytes as they travel, if they form a valid id: printable
    /// ASCII followed only by zero padding.
    fn from_padded(bytes: [u8; RigId::LEN]) -> Option<RigId> {
        let len = bytes.iter().position(|&b| b == 0).unwrap_or(RigId::LEN);
        let (text, pad) = bytes.split_at(len);
        let ok = text.iter().all(|b| (0x20..=0x7E).contains(b)) && pad.iter().all(|&b| b == 0);
        ok.then_some(RigId(bytes))
    }

    /// The id.
    pub fn as_str(&self) -> &str {
        let len = self.0.iter().position(|&b| b == 0).unwrap_or(RigId::LEN);
        // Construction admits only ASCII, so this never fails.
        core::str::from_utf8(self.0.get(..len).unwrap_or(&[])).unwrap_or("")
    }
}

impl core::fmt::Debug for RigId {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.debug_tuple("RigId").field(&self.as_str()).finish()
    }
}

impl core::fmt::Display for RigId {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The five channel standard uncertainties (coverage k = 1), as configured.
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Uncertainties {
    /// Hot-side temperature, kelvin.
    pub hot_k: f32,
    /// Cold-side temperature, kelvin.
    pub cold_k: f32,
    /// Heat input, relative.
    pub heat_in_rel: f32,
    /// Work, relative.
    pub work_rel: f32,
    /// Heat out, relative.
    pub heat_out_rel: f32,
}

impl Uncertainties {
    fn all_finite(&self) -> bool {
        [
            self.hot_k,
            self.cold_k,
            self.heat_in_rel,
            self.work_rel,
            self.heat_out_rel,
        ]
        .iter()
        .all(|x| x.is_finite())
    }
}

/// Who is talking and how it computes: everything the host needs to
/// recompute the figures of a [`Summary`] from its integrals.
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound::wire::{Hello, RigId};
/// let config = RigConfig::default();
/// let hello = Hello::from_config(RigId::new("rig-a").unwrap(), (1, 2, 0), 100, &config);
/// assert_eq!(hello.config_digest, Hello::config_digest(&config));
/// assert_eq!(hello.coverage_factor, 2.0);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Hello {
    /// The rig's identifier.
    pub rig_id: RigId,
    /// Firmware version (major, minor, patch).
    pub firmware_version: (u8, u8, u8),
    /// Nominal sample period, milliseconds.
    pub sample_period_ms: u32,
    /// Sliding-window length, samples.
    pub window_samples: u16,
    /// Engine, heat pump or cooler: decides what `performance` and `bound` mean.
    pub mode: Mode,
    /// Coverage factor k for expanded uncertainties (finite).
    pub coverage_factor: f32,
    /// Configured ambient T0, kelvin (finite); `None` = the cold-side mean.
    pub ambient_k: Option<f32>,
    /// Channel standard uncertainties (finite).
    pub uncertainty: Uncertainties,
    /// [`Hello::config_digest`] of the configuration in use.
    pub config_digest: u32,
}

impl Hello {
    /// The Hello of a controller running `config`.
    pub fn from_config(
        rig_id: RigId,
        firmware_version: (u8, u8, u8),
        sample_period_ms: u32,
        config: &RigConfig,
    ) -> Hello {
        let u = &config.uncertainty;
        Hello {
            rig_id,
            firmware_version,
            sample_period_ms,
            window_samples: u16::try_from(config.window_samples).unwrap_or(u16::MAX),
            mode: config.mode,
            coverage_factor: config.coverage_factor as f32,
            ambient_k: config.ambient_k.map(|t| t as f32),
            uncertainty: Uncertainties {
                hot_k: u.hot_k as f32,
                cold_k: u.cold_k as f32,
                heat_in_rel: u.heat_in_rel as f32,
                work_rel: u.work_rel as f32,
                heat_out_rel: u.heat_out_rel as f32,
            },
            config_digest: Hello::config_digest(config),
        }
    }

    /// CRC-32/ISO-HDLC of the postcard encoding of the whole `config`:
    /// every field of a [`RigConfig`] affects the figures or the alarms, so
    /// host and device agree on the digest exactly when they agree on the
    /// configuration.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// use heatbound::wire::Hello;
    /// let a = RigConfig::default();
    /// let mut b = a;
    /// b.coverage_factor = 3.0;
    /// assert_ne!(Hello::config_digest(&a), Hello::config_digest(&b));
    /// ```
    pub fn config_digest(config: &RigConfig) -> u32 {
        let digest = CrcFlavor(CRC.digest());
        // The flavor never fails and RigConfig's Serialize never fails.
        postcard::serialize_with_flavor(config, digest).unwrap_or(0)
    }

    fn is_valid(&self) -> bool {
        self.coverage_factor.is_finite()
            && self.ambient_k.is_none_or(f32::is_finite)
            && self.uncertainty.all_finite()
    }
}

/// A postcard flavor that feeds the bytes to a CRC instead of storing them.
struct CrcFlavor(crc::Digest<'static, u32>);

impl postcard::ser_flavors::Flavor for CrcFlavor {
    type Output = u32;
    fn try_extend(&mut self, data: &[u8]) -> postcard::Result<()> {
        self.0.update(data);
        Ok(())
    }
    fn try_push(&mut self, data: u8) -> postcard::Result<()> {
        self.0.update(&[data]);
        Ok(())
    }
    fn finalize(self) -> postcard::Result<u32> {
        Ok(self.0.finalize())
    }
}

/// The `status` bits of a [`Summary`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Status {
    /// Every channel has stayed in band for the configured duration.
    pub steady: bool,
    /// Heat out is measured (else `heat_out_j` is inferred as `Q_in − W`).
    pub heat_out_measured: bool,
    /// An active alarm of severity trip drives the trip output.
    pub trip_active: bool,
    /// Some channel is faulty.
    pub any_fault: bool,
}

impl Status {
    fn to_bits(self) -> u8 {
        let mut b = 0;
        if self.steady {
            b |= status_bit::STEADY;
        }
        if self.heat_out_measured {
            b |= status_bit::HEAT_OUT_MEASURED;
        }
        if self.trip_active {
            b |= status_bit::TRIP_ACTIVE;
        }
        if self.any_fault {
            b |= status_bit::ANY_FAULT;
        }
        b
    }

    fn from_bits(b: u8) -> Option<Status> {
        (b & !status_bit::DEFINED == 0).then_some(Status {
            steady: b & status_bit::STEADY != 0,
            heat_out_measured: b & status_bit::HEAT_OUT_MEASURED != 0,
            trip_active: b & status_bit::TRIP_ACTIVE != 0,
            any_fault: b & status_bit::ANY_FAULT != 0,
        })
    }
}

/// The `faults` bits of a [`Summary`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FaultBits {
    /// Channels invalid in the latest sample or stuck, as [`Channel::bit`]s
    /// (bits 0–4 only).
    pub channels: u8,
    /// The latest sample came later than `stale_s` after the one before.
    pub stale: bool,
}

impl FaultBits {
    /// Whether `channel` is faulty.
    pub const fn has(&self, channel: Channel) -> bool {
        self.channels & channel.bit() != 0
    }
}

/// One window's raw integrals, the device's figures and its state.
///
/// Optional figures are `None` when not available; present ones and every
/// integral are finite. `performance` and `bound` are η and η_C for an
/// engine, COP and Carnot COP in reverse modes (the mode is in [`Hello`]).
///
/// ```
/// use heatbound::alarm::AlarmSet;
/// use heatbound::config::RigConfig;
/// use heatbound::monitor::{Monitor, Sample};
/// use heatbound::wire::{self, Frame, Summary};
///
/// let config = RigConfig::default();
/// let mut monitor = Monitor::<64, f32>::new(&config).unwrap();
/// for i in 0..10 {
///     monitor.push(&Sample { t_ms: i * 100, t_hot_k: 600.0, t_cold_k: 300.0,
///                            heat_in_w: 1000.0, work_w: 300.0, heat_out_w: None });
/// }
/// let summary = Summary::from_monitor(7, 900, &monitor, &AlarmSet::new(&config));
/// assert!((summary.performance.unwrap() - 0.3).abs() < 1e-6);
///
/// let mut buf = [0; wire::SUMMARY_MAX_WIRE_LEN];
/// let n = wire::encode(&Frame::Summary(summary), &mut buf).unwrap();
/// assert!(n <= 80);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Summary {
    /// Sequence number; wraps at 2^16 (see [`LinkTracker`]).
    pub seq: u16,
    /// Sample time of the window's end, milliseconds (wraps like `Sample::t_ms`).
    pub t_ms: u32,
    /// Integrated time, seconds.
    pub duration_s: f32,
    /// `Q_in`, joules.
    pub heat_in_j: f32,
    /// `W`, joules.
    pub work_j: f32,
    /// `Q_out`, joules (measured or inferred, see [`Status::heat_out_measured`]).
    pub heat_out_j: f32,
    /// `∫q_in/T_hot dt`, J/K.
    pub entropy_in_j_per_k: f32,
    /// `∫q_out/T_cold dt`, J/K.
    pub entropy_out_j_per_k: f32,
    /// Heat-weighted mean hot-side temperature, kelvin.
    pub hot_mean_k: Option<f32>,
    /// T0, kelvin: the configured ambient, else the cold-side mean the
    /// device used (the time mean of `T_cold` with heat out measured, `T_c`
    /// inferred). The heat-weighted `T_c` itself follows from the integrals
    /// as `Q_out / ∫q_out/T_cold`.
    pub ambient_k: Option<f32>,
    /// η (engine) or COP (heat pump, cooler).
    pub performance: Option<f32>,
    /// η_C (engine) or Carnot COP.
    pub bound: Option<f32>,
    /// σ̇, W/K.
    pub entropy_rate_w_per_k: Option<f32>,
    /// u(performance), standard.
    pub u_performance: Option<f32>,
    /// u(bound), standard.
    pub u_bound: Option<f32>,
    /// u(bound − performance), standard.
    pub u_margin: Option<f32>,
    /// u(σ̇), W/K, standard.
    pub u_entropy_rate_w_per_k: Option<f32>,
    /// Steady, heat-out-measured, trip and fault bits.
    pub status: Status,
    /// Faulty channels and staleness.
    pub faults: FaultBits,
    /// Active alarms, bit i = [`RuleId::index`] (bits 0–5 only).
    pub alarms: u8,
}

impl Summary {
    /// The summary of `monitor`'s window and `alarms`' state now.
    ///
    /// See the type's docs for an example.
    pub fn from_monitor<const N: usize>(
        seq: u16,
        t_ms: u32,
        monitor: &Monitor<N, f32>,
        alarms: &AlarmSet,
    ) -> Summary {
        let i = monitor.window_integrals();
        let m = i.metrics(monitor.settings());
        let reverse = monitor.settings().mode.is_reverse();
        let faults = monitor.faults();
        let pick = |fwd: Option<f32>, rev: Option<f32>| if reverse { rev } else { fwd };
        Summary {
            seq,
            t_ms,
            duration_s: i.duration_s,
            heat_in_j: i.heat_in_j,
            work_j: i.work_j,
            heat_out_j: i.heat_out_j,
            entropy_in_j_per_k: i.entropy_in_j_per_k,
            entropy_out_j_per_k: i.entropy_out_j_per_k,
            hot_mean_k: m.hot_mean_k,
            ambient_k: m.ambient_k,
            performance: pick(m.efficiency, m.cop),
            bound: pick(m.carnot_efficiency, m.carnot_cop),
            entropy_rate_w_per_k: m.entropy_rate_w_per_k,
            u_performance: pick(m.u_efficiency, m.u_cop),
            u_bound: pick(m.u_carnot_efficiency, m.u_carnot_cop),
            u_margin: m.u_carnot_margin,
            u_entropy_rate_w_per_k: m.u_entropy_rate_w_per_k,
            status: Status {
                steady: monitor.is_steady(),
                heat_out_measured: i.heat_out_measured,
                trip_active: alarms.trip_active(),
                any_fault: faults.any(),
            },
            faults: FaultBits {
                channels: (faults.invalid | faults.stuck) & CHANNEL_BITS,
                stale: faults.stale,
            },
            alarms: alarms.active_mask() & ALARM_BITS,
        }
    }

    /// The integrals, for recomputing the figures on the host with
    /// [`Integrals::metrics`].
    ///
    /// The sensitivity fields (`hot_sensitivity`, `cold_sensitivity`,
    /// `cold_heat_in_j_per_k`, `cold_work_j_per_k`) do not travel and are
    /// zero, so the uncertainties recomputed from them are meaningless: the
    /// uncertainties are the device's, carried in the `u_*` fields.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// use heatbound::monitor::FigureSettings;
    /// use heatbound::wire::Summary;
    /// let s = Summary { duration_s: 10.0, heat_in_j: 1000.0, work_j: 300.0, heat_out_j: 700.0,
    ///                   entropy_in_j_per_k: 2.0, entropy_out_j_per_k: 2.8, ..Summary::default() };
    /// let m = s.integrals().metrics(&FigureSettings::new(&RigConfig::default()));
    /// assert_eq!(m.efficiency, Some(0.3));
    /// assert_eq!(m.hot_mean_k, Some(500.0));
    /// ```
    pub fn integrals(&self) -> Integrals<f32> {
        let measured = self.status.heat_out_measured;
        Integrals {
            duration_s: self.duration_s,
            heat_in_j: self.heat_in_j,
            work_j: self.work_j,
            heat_out_j: self.heat_out_j,
            heat_out_measured: measured,
            entropy_in_j_per_k: self.entropy_in_j_per_k,
            entropy_out_j_per_k: self.entropy_out_j_per_k,
            // The device's T0 stands in for the cold-side time integral, so
            // a default T0 is reproduced (configured ones come from `Hello`).
            cold_temperature_integral_k_s: match (measured, self.ambient_k) {
                (true, Some(t0)) => t0 * self.duration_s,
                _ => 0.0,
            },
            ..Integrals::default()
        }
    }

    fn integral_values(&self) -> [f32; 6] {
        [
            self.duration_s,
            self.heat_in_j,
            self.work_j,
            self.heat_out_j,
            self.entropy_in_j_per_k,
            self.entropy_out_j_per_k,
        ]
    }

    fn figures(&self) -> [Option<f32>; 9] {
        [
            self.hot_mean_k,
            self.ambient_k,
            self.performance,
            self.bound,
            self.entropy_rate_w_per_k,
            self.u_performance,
            self.u_bound,
            self.u_margin,
            self.u_entropy_rate_w_per_k,
        ]
    }
}

/// An alarm event, with the sequence number of the latest [`Summary`] sent
/// before it so the host can place it among the summaries.
///
/// ```
/// use heatbound::alarm::{Event, EventKind, RuleId, Severity};
/// use heatbound::wire::{self, EventFrame, Frame};
/// let e = EventFrame { seq: 41, event: Event { t_ms: 341_000, rule: RuleId::BeyondCarnot,
///                      kind: EventKind::Raised, severity: Severity::Trip } };
/// let mut buf = [0; wire::MAX_FRAME_LEN];
/// let n = wire::encode(&Frame::Event(e), &mut buf).unwrap();
/// assert_eq!(wire::decode(&buf[..n]), Ok(Frame::Event(e)));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct EventFrame {
    /// `seq` of the latest summary sent before the event.
    pub seq: u16,
    /// The event.
    pub event: Event,
}

// ---------------------------------------------------------------------------
// Raw layer: the postcard bodies, fields in wire order
// ---------------------------------------------------------------------------

#[derive(Serialize, Deserialize)]
struct RawHello {
    rig_id: [u8; RigId::LEN],
    firmware_version: (u8, u8, u8),
    sample_period_ms: u32,
    window_samples: u16,
    mode: Mode,
    coverage_factor: f32,
    ambient_k: Option<f32>,
    uncertainty: Uncertainties,
    config_digest: u32,
}

#[derive(Serialize, Deserialize)]
struct RawSummary {
    seq: u16,
    t_ms: u32,
    integrals: [f32; 6],
    figures: [f32; 9],
    status: u8,
    faults: u8,
    alarms: u8,
}

#[derive(Serialize, Deserialize)]
struct RawEvent {
    seq: u16,
    event: Event,
}

/// Not available travels as NaN.
fn nan_if_none(x: Option<f32>) -> f32 {
    x.unwrap_or(f32::NAN)
}

/// Every non-finite value reads as not available.
fn none_if_not_finite(x: f32) -> Option<f32> {
    x.is_finite().then_some(x)
}

fn raw_summary(s: &Summary) -> Result<RawSummary, WireError> {
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
    })
}

fn summary_from_raw(r: RawSummary) -> Result<Summary, Malformed> {
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
    ] = r.integrals;
    let [
        hot_mean_k,
        ambient_k,
        performance,
        bound,
        entropy_rate_w_per_k,
        u_performance,
        u_bound,
        u_margin,
        u_entropy_rate_w_per_k,
    ] = r.figures.map(none_if_not_finite);
    Ok(Summary {
        seq: r.seq,
        t_ms: r.t_ms,
        duration_s,
        heat_in_j,
        work_j,
        heat_out_j,
        entropy_in_j_per_k,
        entropy_out_j_per_k,
        hot_mean_k,
        ambient_k,
        performance,
        bound,
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
    })
}

fn raw_hello(h: &Hello) -> RawHello {
    RawHello {
        rig_id: h.rig_id.0,
        firmware_version: h.firmware_version,
        sample_period_ms: h.sample_period_ms,
        window_samples: h.window_samples,
        mode: h.mode,
        coverage_factor: h.coverage_factor,
        ambient_k: h.ambient_k,
        uncertainty: h.uncertainty,
        config_digest: h.config_digest,
    }
}

fn hello_from_raw(r: RawHello) -> Result<Hello, Malformed> {
    let hello = Hello {
        rig_id: RigId::from_padded(r.rig_id).ok_or(Malformed::RigId)?,
        firmware_version: r.firmware_version,
        sample_period_ms: r.sample_period_ms,
        window_samples: r.window_samples,
        mode: r.mode,
        coverage_factor: r.coverage_factor,
        ambient_k: r.ambient_k,
        uncertainty: r.uncertainty,
        config_digest: r.config_digest,
    };
    if hello.is_valid() {
        Ok(hello)
    } else {
        Err(Malformed::NotFinite)
    }
}

// ---------------------------------------------------------------------------
// Errors
// ---------------------------------------------------------------------------

/// Why [`encode`] refused a frame.
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
}

impl core::fmt::Display for WireError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            WireError::BufferTooSmall => "output buffer too small for the frame",
            WireError::NotFinite => "a value that must be finite is NaN or infinite",
            WireError::ReservedBits => "a bit mask uses undefined bits",
            WireError::BadRigId => "rig id is longer than 16 bytes or not printable ASCII",
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
fn cobs_encode(src: &[u8], dst: &mut [u8]) -> Option<usize> {
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
fn cobs_decode_in_place(buf: &mut [u8]) -> Option<usize> {
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
        buf.copy_within(start..end, write);
        write += end - start;
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
fn decode_in_place(buf: &mut [u8]) -> Result<Frame, FrameError> {
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
            })
        }
        other => return Err(Malformed::UnknownKind(other).into()),
    };
    Ok(frame)
}

/// Parses `body` as exactly one `T`.
fn take_all<'a, T: Deserialize<'a>>(body: &'a [u8]) -> Result<T, Malformed> {
    match postcard::take_from_bytes(body) {
        Ok((t, [])) => Ok(t),
        Ok(_) => Err(Malformed::TrailingBytes),
        Err(_) => Err(Malformed::Postcard),
    }
}

/// Losses and deliveries of a [`Decoder`], by kind.
///
/// Every `0x00` delimiter the decoder sees ends exactly one of: an accepted
/// frame, a loss (`crc_errors`, `overlong`, `malformed`, `unknown_version`)
/// or an empty frame, so `frames + losses() + empty_frames` equals the
/// number of delimiters fed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DecoderStats {
    /// Frames accepted.
    pub frames: u64,
    /// Frames with a CRC mismatch.
    pub crc_errors: u64,
    /// Frames longer than the decoder's capacity.
    pub overlong: u64,
    /// Frames that failed COBS or postcard decoding, named an unknown kind,
    /// carried a non-finite integral or undefined bits.
    pub malformed: u64,
    /// Frames of another protocol version.
    pub unknown_version: u64,
    /// Non-delimiter bytes that did not end up in an accepted frame.
    pub bytes_discarded: u64,
    /// Delimiters with no bytes before them (consecutive `0x00`): not a loss,
    /// a sender may use them as idle fill or to resynchronise.
    pub empty_frames: u64,
}

impl DecoderStats {
    /// Frames lost, of every kind.
    pub const fn losses(&self) -> u64 {
        self.crc_errors + self.overlong + self.malformed + self.unknown_version
    }
}

/// A streaming decoder with a fixed buffer of `CAP` bytes (use
/// [`MAX_FRAME_LEN`]): accepts the stream in any chunking, resynchronises at
/// the next delimiter after garbage, an overlong frame or a bad CRC, and
/// counts every loss in [`DecoderStats`]. Never allocates, never panics.
///
/// A decoder started in the middle of a frame reports that frame's tail as a
/// loss.
///
/// ```
/// use heatbound::wire::{self, Decoder, Frame, Summary};
/// let mut stream = [0u8; 3 * wire::MAX_FRAME_LEN];
/// let mut len = 0;
/// for seq in 0..3 {
///     let frame = Frame::Summary(Summary { seq, ..Summary::default() });
///     len += wire::encode(&frame, &mut stream[len..]).unwrap();
/// }
/// stream[10] ^= 0xFF; // corrupt the first frame
///
/// let mut decoder = Decoder::<{ wire::MAX_FRAME_LEN }>::new();
/// let mut seqs = Vec::new();
/// for chunk in stream[..len].chunks(7) {
///     decoder.feed(chunk, |r| if let Ok(Frame::Summary(s)) = r { seqs.push(s.seq) });
/// }
/// assert_eq!(seqs, [1, 2]);
/// assert_eq!(decoder.stats().frames, 2);
/// assert_eq!(decoder.stats().losses(), 1);
/// ```
#[derive(Clone, Debug)]
pub struct Decoder<const CAP: usize> {
    buf: [u8; CAP],
    len: usize,
    overflowed: bool,
    stats: DecoderStats,
}

impl<const CAP: usize> Default for Decoder<CAP> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const CAP: usize> Decoder<CAP> {
    /// An empty decoder.
    pub const fn new() -> Self {
        Self {
            buf: [0; CAP],
            len: 0,
            overflowed: false,
            stats: DecoderStats {
                frames: 0,
                crc_errors: 0,
                overlong: 0,
                malformed: 0,
                unknown_version: 0,
                bytes_discarded: 0,
                empty_frames: 0,
            },
        }
    }

    /// Feeds `bytes`, calling `on_frame` once per frame or loss completed by
    /// a delimiter in them.
    pub fn feed(&mut self, bytes: &[u8], mut on_frame: impl FnMut(Result<Frame, FrameError>)) {
        for &b in bytes {
            if let Some(r) = self.push_byte(b) {
                on_frame(r);
            }
        }
    }

    /// Feeds one byte; returns the frame or loss it completes, if any.
    pub fn push_byte(&mut self, byte: u8) -> Option<Result<Frame, FrameError>> {
        if byte != 0 {
            if self.overflowed {
                self.stats.bytes_discarded += 1;
            } else if let Some(slot) = self.buf.get_mut(self.len) {
                *slot = byte;
                self.len += 1;
            } else {
                self.overflowed = true;
                self.stats.bytes_discarded += self.len as u64 + 1;
                self.len = 0;
            }
            return None;
        }
        let len = core::mem::take(&mut self.len);
        if core::mem::take(&mut self.overflowed) {
            self.stats.overlong += 1;
            return Some(Err(FrameError::Overlong));
        }
        if len == 0 {
            self.stats.empty_frames += 1;
            return None;
        }
        let result = match self.buf.get_mut(..len) {
            Some(frame) => decode_in_place(frame),
            None => Err(FrameError::Overlong),
        };
        match &result {
            Ok(_) => self.stats.frames += 1,
            Err(e) => {
                self.stats.bytes_discarded += len as u64;
                match e {
                    FrameError::Overlong => self.stats.overlong += 1,
                    FrameError::Crc => self.stats.crc_errors += 1,
                    FrameError::UnknownVersion(_) => self.stats.unknown_version += 1,
                    FrameError::Malformed(_) => self.stats.malformed += 1,
                }
            }
        }
        Some(result)
    }

    /// The counters so far.
    pub const fn stats(&self) -> &DecoderStats {
        &self.stats
    }

    /// Bytes of an unfinished frame held now (none once the frame has
    /// overflowed the buffer: see [`Decoder::has_unfinished`]).
    pub const fn pending(&self) -> usize {
        self.len
    }

    /// Whether bytes have arrived since the last delimiter, kept or
    /// discarded as overlong.
    pub const fn has_unfinished(&self) -> bool {
        self.len > 0 || self.overflowed
    }

    /// The stream ended, or the link dropped: ends an unfinished frame as a
    /// delimiter would, so that it is counted (an overflowed tail as
    /// `overlong`), and leaves the decoder ready for a new stream. Returns
    /// what a delimiter would have, or `None` when nothing was unfinished.
    pub fn end_stream(&mut self) -> Option<Result<Frame, FrameError>> {
        if self.has_unfinished() {
            self.push_byte(0)
        } else {
            None
        }
    }
}

// ---------------------------------------------------------------------------
// Link tracking
// ---------------------------------------------------------------------------

/// What one frame told a [`LinkTracker`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Link {
    /// A Hello.
    Hello,
    /// The first summary seen.
    First,
    /// The summary after the previous one.
    InOrder,
    /// `missing` summaries were lost before this one.
    Gap {
        /// How many.
        missing: u16,
    },
    /// The same sequence number again.
    Duplicate,
    /// The sequence went back: the controller restarted.
    Restart,
    /// An event frame (sequence is not tracked on events).
    Event,
}

impl core::fmt::Display for Link {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Link::Hello => f.write_str("hello"),
            Link::First => f.write_str("first summary"),
            Link::InOrder => f.write_str("in order"),
            Link::Gap { missing } => write!(f, "{missing} summaries missing"),
            Link::Duplicate => f.write_str("duplicate"),
            Link::Restart => f.write_str("restart"),
            Link::Event => f.write_str("event"),
        }
    }
}

/// Counters of a [`LinkTracker`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LinkStats {
    /// Summaries seen.
    pub summaries: u64,
    /// Summaries missing from sequence gaps.
    pub missing_summaries: u64,
    /// Summaries that repeated the previous sequence number.
    pub duplicates: u64,
    /// Times the sequence went back (a controller restart).
    pub restarts: u64,
    /// Hellos seen.
    pub hellos: u64,
}

/// Follows the summary sequence numbers: gaps, duplicates and restarts.
///
/// With `d = seq − previous (mod 2^16)`: `d = 1` is in order; `2 ≤ d < 2^15`
/// is a gap of `d − 1` missing summaries; `d = 0` is a duplicate, or a
/// restart right after a Hello; `d ≥ 2^15` means the sequence went back, a
/// restart (normally announced by a Hello, counted even if the Hello was
/// lost). After a restart the new sequence is the baseline.
///
/// ```
/// use heatbound::wire::{Frame, Link, LinkTracker, Summary};
/// let s = |seq| Frame::Summary(Summary { seq, ..Summary::default() });
/// let mut link = LinkTracker::new();
/// assert_eq!(link.observe(&s(65534)), Link::First);
/// assert_eq!(link.observe(&s(1)), Link::Gap { missing: 2 }); // 65535 and 0 lost
/// assert_eq!(link.observe(&s(1)), Link::Duplicate);
/// assert_eq!(link.observe(&s(0)), Link::Restart);
/// assert_eq!(link.stats().missing_summaries, 2);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LinkTracker {
    last_seq: Option<u16>,
    after_hello: bool,
    stats: LinkStats,
}

impl LinkTracker {
    /// A tracker that has seen nothing.
    pub const fn new() -> Self {
        Self {
            last_seq: None,
            after_hello: false,
            stats: LinkStats {
                summaries: 0,
                missing_summaries: 0,
                duplicates: 0,
                restarts: 0,
                hellos: 0,
            },
        }
    }

    /// Takes note of `frame`.
    pub fn observe(&mut self, frame: &Frame) -> Link {
        let seq = match frame {
            Frame::Hello(_) => {
                self.stats.hellos += 1;
                self.after_hello = true;
                return Link::Hello;
            }
            Frame::Event(_) => return Link::Event,
            Frame::Summary(s) => s.seq,
        };
        self.stats.summaries += 1;
        let after_hello = core::mem::take(&mut self.after_hello);
        let Some(last) = self.last_seq.replace(seq) else {
            return Link::First;
        };
        match seq.wrapping_sub(last) {
            1 => Link::InOrder,
            0 if !after_hello => {
                self.stats.duplicates += 1;
                Link::Duplicate
            }
            d if d >= 0x8000 || d == 0 => {
                self.stats.restarts += 1;
                Link::Restart
            }
            d => {
                self.stats.missing_summaries += u64::from(d - 1);
                Link::Gap { missing: d - 1 }
            }
        }
    }

    /// The counters so far.
    pub const fn stats(&self) -> &LinkStats {
        &self.stats
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn roundtrip_cobs(data: &[u8]) {
        let mut enc = [0u8; 600];
        let n = cobs_encode(data, &mut enc).unwrap();
        assert!(n <= cobs_max_len(data.len()));
        assert!(!enc[..n].contains(&0));
        let m = cobs_decode_in_place(&mut enc[..n]).unwrap();
        assert_eq!(&enc[..m], data);
    }

    #[test]
    fn cobs_roundtrips_edge_cases() {
        roundtrip_cobs(&[]);
        roundtrip_cobs(&[0]);
        roundtrip_cobs(&[0, 0]);
        roundtrip_cobs(&[1, 0, 2]);
        roundtrip_cobs(&[0xFF; 253]);
        roundtrip_cobs(&[0xFF; 254]);
        roundtrip_cobs(&[0xFF; 255]);
        let mut v = [7u8; 300];
        v[254] = 0;
        roundtrip_cobs(&v);
    }

    #[test]
    fn cobs_matches_reference_vectors() {
        // From the COBS paper's examples (Cheshire & Baker 1999).
        let mut out = [0u8; 8];
        let n = cobs_encode(&[0x11, 0x22, 0x00, 0x33], &mut out).unwrap();
        assert_eq!(&out[..n], &[0x03, 0x11, 0x22, 0x02, 0x33]);
        let n = cobs_encode(&[0x00], &mut out).unwrap();
        assert_eq!(&out[..n], &[0x01, 0x01]);
    }

    #[test]
    fn cobs_rejects_bad_codes() {
        assert_eq!(cobs_decode_in_place(&mut [0x05, 1, 2]), None);
        assert_eq!(cobs_decode_in_place(&mut [0x02, 0x00]), None);
    }

    #[test]
    fn crc_is_iso_hdlc() {
        assert_eq!(CRC.checksum(b"123456789"), 0xCBF4_3926);
    }

    #[test]
    fn summary_budget_holds() {
        assert_eq!(SUMMARY_MAX_WIRE_LEN, 79);
        let worst = Summary {
            seq: u16::MAX,
            t_ms: u32::MAX,
            hot_mean_k: Some(1.0),
            ..Summary::default()
        };
        let mut buf = [0u8; MAX_FRAME_LEN];
        assert_eq!(
            encode(&Frame::Summary(worst), &mut buf),
            Ok(SUMMARY_MAX_WIRE_LEN)
        );
    }

    #[test]
    fn encode_rejects_what_cannot_be_decoded() {
        let mut buf = [0u8; MAX_FRAME_LEN];
        let nan = Summary {
            work_j: f32::NAN,
            ..Summary::default()
        };
        assert_eq!(
            encode(&Frame::Summary(nan), &mut buf),
            Err(WireError::NotFinite)
        );
        let inf = Summary {
            bound: Some(f32::INFINITY),
            ..Summary::default()
        };
        assert_eq!(
            encode(&Frame::Summary(inf), &mut buf),
            Err(WireError::NotFinite)
        );
        let bits = Summary {
            alarms: 0x80,
            ..Summary::default()
        };
        assert_eq!(
            encode(&Frame::Summary(bits), &mut buf),
            Err(WireError::ReservedBits)
        );
        let short = &mut [0u8; 10];
        assert_eq!(
            encode(&Frame::Summary(Summary::default()), short),
            Err(WireError::BufferTooSmall)
        );
    }

    #[test]
    fn end_stream_counts_a_tail_longer_than_the_buffer() {
        // A tail that overflowed the buffer holds no bytes, yet it is a loss,
        // and the next stream starts clean (a reconnect must not throw away
        // its first frame as overlong).
        let mut d = Decoder::<32>::new();
        d.feed(&[1u8; 200], |_| {});
        assert_eq!(d.pending(), 0);
        assert!(d.has_unfinished());
        assert_eq!(d.end_stream(), Some(Err(FrameError::Overlong)));
        assert_eq!(d.stats().overlong, 1);
        assert_eq!(d.stats().bytes_discarded, 200);
        assert!(!d.has_unfinished());
        assert_eq!(d.end_stream(), None);

        let mut buf = [0u8; MAX_FRAME_LEN];
        let n = encode(&Frame::Summary(Summary::default()), &mut buf).unwrap();
        let mut d = Decoder::<{ MAX_FRAME_LEN }>::new();
        d.feed(&[7u8; 300], |_| {});
        d.end_stream();
        let mut got = None;
        d.feed(&buf[..n], |r| got = Some(r));
        assert_eq!(got, Some(Ok(Frame::Summary(Summary::default()))));
    }

    #[test]
    fn decoder_counts_every_loss_kind() {
        let mut d = Decoder::<32>::new();
        assert!(d.push_byte(0).is_none());
        assert_eq!(d.stats().empty_frames, 1);
        let mut r = None;
        d.feed(&[1u8; 40], |x| r = Some(x));
        d.feed(&[0], |x| r = Some(x));
        assert_eq!(r, Some(Err(FrameError::Overlong)));
        d.feed(&[5, 1, 0], |x| r = Some(x));
        assert_eq!(r, Some(Err(FrameError::Malformed(Malformed::Cobs))));
        d.feed(&[8, 1, 1, 1, 1, 1, 1, 1, 0], |x| r = Some(x));
        assert_eq!(r, Some(Err(FrameError::Crc)));
        let s = d.stats();
        assert_eq!((s.overlong, s.malformed, s.crc_errors), (1, 1, 1));
        assert_eq!(s.bytes_discarded, 40 + 2 + 8);
    }

    #[test]
    fn unknown_version_and_kind_are_told_apart() {
        let frame_with = |version: u8, kind: u8| {
            let mut raw = [version, kind, 0, 0, 0, 0];
            let crc = CRC.checksum(&raw[..2]).to_le_bytes();
            raw[2..].copy_from_slice(&crc);
            let mut enc = [0u8; 16];
            let n = cobs_encode(&raw, &mut enc).unwrap();
            decode(&enc[..n])
        };
        assert_eq!(frame_with(2, 1), Err(FrameError::UnknownVersion(2)));
        assert_eq!(
            frame_with(1, 9),
            Err(FrameError::Malformed(Malformed::UnknownKind(9)))
        );
        assert_eq!(
            frame_with(1, 1),
            Err(FrameError::Malformed(Malformed::Postcard))
        );
    }

    #[test]
    fn link_tracker_sees_hello_then_restart() {
        let s = |seq| {
            Frame::Summary(Summary {
                seq,
                ..Summary::default()
            })
        };
        let hello = Frame::Hello(Hello::from_config(
            RigId::default(),
            (0, 0, 0),
            100,
            &RigConfig::default(),
        ));
        let mut l = LinkTracker::new();
        l.observe(&hello);
        assert_eq!(l.observe(&s(0)), Link::First);
        assert_eq!(l.observe(&s(1)), Link::InOrder);
        assert_eq!(l.observe(&hello), Link::Hello);
        assert_eq!(l.observe(&s(0)), Link::Restart);
        l.observe(&hello);
        assert_eq!(l.observe(&s(0)), Link::Restart);
        assert_eq!(l.observe(&s(0)), Link::Duplicate);
        assert_eq!(
            *l.stats(),
            LinkStats {
                summaries: 5,
                missing_summaries: 0,
                duplicates: 1,
                restarts: 2,
                hellos: 3
            }
        );
    }
}
