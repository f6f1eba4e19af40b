//! The validated frames (Hello, Summary, Event) and the constants of the wire format.

use serde::{Deserialize, Serialize};

use super::error::*;
use super::format::*;
use crate::alarm::{AlarmSet, Event};
use crate::config::{Mode, RigConfig};
use crate::diagnosis::{Diagnosis, DiagnosisError};
use crate::monitor::{Channel, FigureSettings, Integrals, Metrics, Monitor, Uncertainty};

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
    /// The controller's answer to a command.
    Reply(Reply),
}

impl Frame {
    /// The frame's kind byte on the wire.
    pub const fn kind(&self) -> u8 {
        match self {
            Frame::Hello(_) => kind::HELLO,
            Frame::Summary(_) => kind::SUMMARY,
            Frame::Event(_) => kind::EVENT,
            Frame::Reply(_) => kind::REPLY,
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
pub struct RigId(pub(super) [u8; RigId::LEN]);

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
    pub(super) fn from_padded(bytes: [u8; RigId::LEN]) -> Option<RigId> {
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
    /// The second hot-side sensor, kelvin.
    pub hot2_k: f32,
}

impl Uncertainties {
    pub(super) fn all_finite(&self) -> bool {
        [
            self.hot_k,
            self.hot2_k,
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
/// recompute the figures of a `Summary` from its integrals.
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
    /// `[losses]`: the configured UA and its standard uncertainty, W/K
    /// (finite); `None`: the controller learns UA from the first steady
    /// Summary's window, as the host can from the same Summary.
    pub losses: Option<(f32, f32)>,
    /// [`Hello::config_digest`] of the configuration in use.
    pub config_digest: u32,
    /// The run counter: +1 for every new run the controller starts on
    /// command (`NewRun`, or a `Configure` applied); 0 after a reset.
    pub run: u32,
    /// This boot's session number, drawn at start-up. Commands are
    /// authenticated for one session, so a command recorded in an earlier
    /// one is refused after a restart.
    pub session: u32,
    /// The highest command counter accepted in this session, 0 if none:
    /// the next command must carry a larger one.
    pub last_counter: u32,
    /// Whether the controller holds a command key. Without one it accepts
    /// no command but a Hello request, and answers every other with
    /// [`ReplyCode::NoKey`].
    pub keyed: bool,
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
                hot2_k: u.hot2_k as f32,
            },
            losses: config
                .losses
                .map(|l| (l.ua_w_per_k as f32, l.u_ua_w_per_k as f32)),
            config_digest: Hello::config_digest(config),
            run: 0,
            session: 0,
            last_counter: 0,
            keyed: false,
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
        let mut crc = ConfigCrc(CRC.digest());
        crc.config(config);
        crc.0.finalize()
    }

    pub(super) fn is_valid(&self) -> bool {
        self.coverage_factor.is_finite()
            && self.ambient_k.is_none_or(f32::is_finite)
            && self.uncertainty.all_finite()
            && self
                .losses
                .is_none_or(|(ua, u)| ua.is_finite() && u.is_finite())
    }
}

/// Postcard's encoding of a [`RigConfig`], fed to a CRC piece by piece
/// instead of through the derived serializer (about 1 KB more of a
/// controller's flash): the fields in order, f64 as 8 bytes little-endian,
/// u32 and enum variants as varints, bool and an option's tag as 0 or 1.
/// Gives the CRC of the same bytes as `postcard::to_slice(config)`
/// (checked against it in the tests).
pub(super) struct ConfigCrc(pub(super) crc::Digest<'static, u32, CrcImpl>);

impl ConfigCrc {
    // Out of line: the controller's CRC update is a bit-by-bit loop.
    #[inline(never)]
    fn bytes(&mut self, b: &[u8]) {
        self.0.update(b);
    }

    fn varint(&mut self, mut v: u32) {
        let mut buf = [0u8; 5];
        let mut n = 0;
        for slot in buf.iter_mut() {
            n += 1;
            if v < 0x80 {
                *slot = v as u8;
                break;
            }
            *slot = (v as u8) | 0x80;
            v >>= 7;
        }
        self.bytes(buf.get(..n).unwrap_or(&buf));
    }

    fn f64s(&mut self, xs: &[f64]) {
        for x in xs {
            self.bytes(&x.to_le_bytes());
        }
    }

    fn flag(&mut self, b: bool) {
        self.bytes(&[u8::from(b)]);
    }

    pub(super) fn config(&mut self, c: &RigConfig) {
        self.varint(c.mode as u32);
        self.flag(c.ambient_k.is_some());
        if let Some(t) = c.ambient_k {
            self.f64s(&[t]);
        }
        self.varint(c.window_samples);
        let (u, st, h, a) = (&c.uncertainty, &c.steady, &c.health, &c.alarms);
        self.f64s(&[
            c.max_gap_s,
            c.coverage_factor,
            u.hot_k,
            u.hot2_k,
            u.cold_k,
            u.heat_in_rel,
            u.work_rel,
            u.heat_out_rel,
            st.duration_s,
            st.hot_band_k,
            st.cold_band_k,
            st.heat_in_band_rel,
            st.work_band_rel,
            st.heat_out_band_rel,
        ]);
        self.varint(h.stuck_samples);
        self.f64s(&[
            h.stale_s,
            h.min_temperature_k,
            h.max_temperature_k,
            a.near_carnot_fraction,
            a.hot_max_k,
            a.horizon_s,
        ]);
        for r in &a.rules {
            self.flag(r.enabled);
            self.varint(r.severity as u32);
            self.f64s(&[r.deadband, r.on_delay_s, r.off_delay_s]);
            self.flag(r.latching);
        }
        self.flag(c.losses.is_some());
        if let Some(l) = c.losses {
            self.f64s(&[l.ua_w_per_k, l.u_ua_w_per_k]);
        }
    }
}

/// The `status` bits of a `Summary`.
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
    /// A second hot-side sensor is read (else `hot_pair_integral_k_s` is 0).
    pub hot2_measured: bool,
    /// Engine, heat pump or cooler: what `performance` and `bound` mean.
    pub mode: Mode,
}

impl Status {
    pub(super) fn to_bits(self) -> u8 {
        let mut b = match self.mode {
            Mode::Engine => status_bit::MODE_ENGINE,
            Mode::HeatPump => status_bit::MODE_HEAT_PUMP,
            Mode::Cooler => status_bit::MODE_COOLER,
        };
        if self.hot2_measured {
            b |= status_bit::HOT2_MEASURED;
        }
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

    pub(super) fn from_bits(b: u8) -> Option<Status> {
        let mode = match b & status_bit::MODE_MASK {
            status_bit::MODE_ENGINE => Mode::Engine,
            status_bit::MODE_HEAT_PUMP => Mode::HeatPump,
            status_bit::MODE_COOLER => Mode::Cooler,
            _ => return None,
        };
        (b & !status_bit::DEFINED == 0).then_some(Status {
            steady: b & status_bit::STEADY != 0,
            heat_out_measured: b & status_bit::HEAT_OUT_MEASURED != 0,
            trip_active: b & status_bit::TRIP_ACTIVE != 0,
            any_fault: b & status_bit::ANY_FAULT != 0,
            hot2_measured: b & status_bit::HOT2_MEASURED != 0,
            mode,
        })
    }
}

/// The `faults` bits of a `Summary`.
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

/// What the controller's diagnosis said about a window (see
/// [`crate::diagnosis`]): in a `Summary`, of its window; in an `Event`, of
/// the window at the moment a second-law or energy-balance alarm was
/// raised.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Verdict {
    /// Whether the relations held; `None` when no diagnosis was made (no
    /// window yet).
    pub consistent: Option<bool>,
    /// The one channel whose bias explains the inconsistency, if exactly
    /// one does.
    pub suspect: Option<Channel>,
    /// The suspect's bias: K for a temperature, relative for a power.
    pub bias: Option<f32>,
}

impl Verdict {
    /// The verdict of a diagnosis.
    pub fn of(result: &Result<Diagnosis<f32>, DiagnosisError>) -> Verdict {
        match result {
            Ok(d) => Verdict {
                consistent: Some(d.consistent),
                suspect: d.suspect,
                bias: d
                    .suspect_candidate()
                    .map(|c| c.bias)
                    .filter(|b| b.is_finite()),
            },
            Err(_) => Verdict::default(),
        }
    }

    pub(super) fn to_bits(self) -> u8 {
        let state = match self.consistent {
            None => 0,
            Some(true) => verdict_bit::CONSISTENT,
            Some(false) => verdict_bit::INCONSISTENT,
        };
        state
            | self
                .suspect
                .map_or(0, |c| (c as u8 + 1) << verdict_bit::SUSPECT_SHIFT)
    }

    pub(super) fn from_bits(b: u8, bias: Option<f32>) -> Option<Verdict> {
        if b & !verdict_bit::DEFINED != 0 {
            return None;
        }
        let consistent = match b & verdict_bit::STATE_MASK {
            0 => None,
            verdict_bit::CONSISTENT => Some(true),
            verdict_bit::INCONSISTENT => Some(false),
            _ => return None,
        };
        let suspect = match b >> verdict_bit::SUSPECT_SHIFT {
            0 => None,
            n => Some(*Channel::ALL.iter().find(|c| **c as u8 + 1 == n)?),
        };
        // A suspect comes only with an inconsistent verdict.
        if suspect.is_some() && consistent != Some(false) {
            return None;
        }
        Some(Verdict {
            consistent,
            suspect,
            bias: bias.filter(|_| suspect.is_some()),
        })
    }
}

/// One window's raw integrals, the device's uncertainties and its state.
///
/// Every integral is finite; optional figures are `None` when not
/// available, present ones finite. The figures that follow from the
/// integrals alone travel no more: [`Summary::metrics`] recomputes them
/// (T_h, η or COP, its bound, σ̇), as every receiver would. The
/// uncertainties cannot be recomputed (the sensitivity integrals do not
/// travel) and are the device's.
///
/// ```
/// use heatbound::alarm::AlarmSet;
/// use heatbound::config::RigConfig;
/// use heatbound::monitor::{Monitor, Sample};
/// use heatbound::wire::{self, Frame, Summary, Verdict};
///
/// let config = RigConfig::default();
/// let mut monitor = Monitor::<64, f32>::new(&config).unwrap();
/// for i in 0..10 {
///     monitor.push(&Sample { t_ms: i * 100, t_hot_k: 600.0, t_cold_k: 300.0,
///                            heat_in_w: 1000.0, work_w: 300.0, heat_out_w: None,
///                            t_hot2_k: None });
/// }
/// let summary = Summary::from_monitor(7, 900, &monitor, &AlarmSet::new(&config),
///                                     Verdict::default());
/// assert!((summary.performance().unwrap() - 0.3).abs() < 1e-6);
///
/// let mut buf = [0; wire::SUMMARY_MAX_WIRE_LEN];
/// let n = wire::encode(&Frame::Summary(summary), &mut buf).unwrap();
/// assert!(n <= 80);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Summary {
    /// Sequence number; wraps at 2^16 (see `LinkTracker`).
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
    /// `∫T_hot dt`, K·s.
    pub hot_temperature_integral_k_s: f32,
    /// `∫(T_hot − T_hot2) dt`, K·s, with a second hot sensor (see
    /// [`Status::hot2_measured`]); else 0.
    pub hot_pair_integral_k_s: f32,
    /// T0, kelvin: the configured ambient, else the cold-side mean the
    /// device used (the time mean of `T_cold` with heat out measured, `T_c`
    /// inferred).
    pub ambient_k: Option<f32>,
    /// σ̇, W/K, as the device computed it (its alarms use it).
    pub entropy_rate_w_per_k: Option<f32>,
    /// u(performance), standard.
    pub u_performance: Option<f32>,
    /// u(bound), standard.
    pub u_bound: Option<f32>,
    /// u(bound − performance), standard.
    pub u_margin: Option<f32>,
    /// u(σ̇), W/K, standard.
    pub u_entropy_rate_w_per_k: Option<f32>,
    /// Steady, heat-out-measured, trip, fault, hot2 bits and the mode.
    pub status: Status,
    /// Faulty channels and staleness.
    pub faults: FaultBits,
    /// Active alarms, bit i = `RuleId::index` (bits 0–6 only).
    pub alarms: u8,
    /// The diagnosis of this window.
    pub verdict: Verdict,
}

impl Summary {
    /// The summary of `monitor`'s window, `alarms`' state now and the
    /// window's `verdict`.
    ///
    /// See the type's docs for an example.
    pub fn from_monitor<const N: usize>(
        seq: u16,
        t_ms: u32,
        monitor: &Monitor<N, f32>,
        alarms: &AlarmSet,
        verdict: Verdict,
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
            hot_temperature_integral_k_s: i.hot_temperature_integral_k_s,
            hot_pair_integral_k_s: i.hot_pair_integral_k_s,
            ambient_k: m.ambient_k,
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
                hot2_measured: i.hot2_measured,
                mode: monitor.settings().mode,
            },
            faults: FaultBits {
                channels: (faults.invalid | faults.stuck) & CHANNEL_BITS,
                stale: faults.stale,
            },
            alarms: alarms.active_mask() & ALARM_BITS,
            verdict,
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
            hot_temperature_integral_k_s: self.hot_temperature_integral_k_s,
            hot2_measured: self.status.hot2_measured,
            hot_pair_integral_k_s: self.hot_pair_integral_k_s,
            ..Integrals::default()
        }
    }

    /// The figures recomputed from the integrals, with the summary's own
    /// mode and T0: what the device's window gives. The uncertainties
    /// in it are meaningless (see [`Summary::integrals`]); use the `u_*`
    /// fields.
    pub fn metrics(&self) -> Metrics<f32> {
        self.integrals().metrics(&self.figure_settings())
    }

    /// σ̇ recomputed from the integrals and T0, as in [`Summary::metrics`].
    pub(super) fn recomputed_entropy_rate(&self) -> Option<f32> {
        self.integrals().entropy_rate(&self.figure_settings())
    }

    /// The summary's own mode and T0.
    fn figure_settings(&self) -> FigureSettings {
        FigureSettings {
            mode: self.status.mode,
            ambient_k: self.ambient_k.map(f64::from),
            uncertainty: Uncertainty::default(),
        }
    }

    /// Heat-weighted mean hot-side temperature, kelvin.
    pub fn hot_mean_k(&self) -> Option<f32> {
        self.metrics().hot_mean_k
    }

    /// η (engine) or COP (heat pump, cooler), from the integrals.
    pub fn performance(&self) -> Option<f32> {
        let m = self.metrics();
        if self.status.mode.is_reverse() {
            m.cop
        } else {
            m.efficiency
        }
    }

    /// η_C (engine) or the Carnot COP, from the integrals.
    pub fn bound(&self) -> Option<f32> {
        let m = self.metrics();
        if self.status.mode.is_reverse() {
            m.carnot_cop
        } else {
            m.carnot_efficiency
        }
    }

    pub(super) fn integral_values(&self) -> [f32; 8] {
        [
            self.duration_s,
            self.heat_in_j,
            self.work_j,
            self.heat_out_j,
            self.entropy_in_j_per_k,
            self.entropy_out_j_per_k,
            self.hot_temperature_integral_k_s,
            self.hot_pair_integral_k_s,
        ]
    }

    pub(super) fn figures(&self) -> [Option<f32>; 7] {
        [
            self.ambient_k,
            self.entropy_rate_w_per_k,
            self.u_performance,
            self.u_bound,
            self.u_margin,
            self.u_entropy_rate_w_per_k,
            self.verdict.bias,
        ]
    }
}

/// An alarm event, with the sequence number of the latest `Summary` sent
/// before it so the host can place it among the summaries.
///
/// ```
/// use heatbound::alarm::{Event, EventKind, RuleId, Severity};
/// use heatbound::monitor::Channel;
/// use heatbound::wire::{self, EventFrame, Frame, Verdict};
/// let e = EventFrame { seq: 41, event: Event { t_ms: 341_000, rule: RuleId::BeyondCarnot,
///                      kind: EventKind::Raised, severity: Severity::Trip },
///                      verdict: Verdict { consistent: Some(false), suspect: Some(Channel::Hot),
///                                         bias: None } };
/// let mut buf = [0; wire::MAX_FRAME_LEN];
/// let n = wire::encode(&Frame::Event(e), &mut buf).unwrap();
/// assert_eq!(wire::decode(&buf[..n]), Ok(Frame::Event(e)));
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct EventFrame {
    /// `seq` of the latest summary sent before the event.
    pub seq: u16,
    /// The event.
    pub event: Event,
    /// For a second-law or energy-balance alarm raised, the diagnosis of
    /// the window at that moment (no bias: the next `Summary` has it);
    /// else the default, no diagnosis.
    pub verdict: Verdict,
}

/// What became of a command: applied, or why it was refused.
///
/// The codes are part of the interface (wire byte and [`ReplyCode::as_str`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ReplyCode {
    /// Carried out.
    Applied,
    /// Not a command of this protocol version (its CRC was good).
    Malformed,
    /// The MAC does not match: a wrong key, another rig or session, or a
    /// forged or altered command.
    FailedAuthentication,
    /// The counter is not above the last one accepted: a replayed or stale
    /// command.
    Replayed,
    /// The configuration does not validate, or does not fit the controller.
    InvalidConfiguration,
    /// A new run or configuration is already waiting for the window boundary.
    Busy,
    /// The controller holds no command key, so it accepts no command but a
    /// Hello request.
    NoKey,
}

impl ReplyCode {
    /// Every code, in wire order.
    pub const ALL: [ReplyCode; 7] = [
        ReplyCode::Applied,
        ReplyCode::Malformed,
        ReplyCode::FailedAuthentication,
        ReplyCode::Replayed,
        ReplyCode::InvalidConfiguration,
        ReplyCode::Busy,
        ReplyCode::NoKey,
    ];

    /// The code's name in logs and JSON.
    pub const fn as_str(self) -> &'static str {
        match self {
            ReplyCode::Applied => "applied",
            ReplyCode::Malformed => "malformed",
            ReplyCode::FailedAuthentication => "failed_authentication",
            ReplyCode::Replayed => "replayed",
            ReplyCode::InvalidConfiguration => "invalid_configuration",
            ReplyCode::Busy => "busy",
            ReplyCode::NoKey => "no_key",
        }
    }

    /// The code named `name` ([`ReplyCode::as_str`]).
    pub fn parse(name: &str) -> Option<ReplyCode> {
        ReplyCode::ALL.into_iter().find(|c| c.as_str() == name)
    }

    /// What it means, in words for the operator.
    pub const fn meaning(self) -> &'static str {
        match self {
            ReplyCode::Applied => "applied by the controller",
            ReplyCode::Malformed => "the controller could not read the command",
            ReplyCode::FailedAuthentication => {
                "the controller refused the command's authentication (wrong key, or not this rig)"
            }
            ReplyCode::Replayed => {
                "the controller refused a repeated command counter (a replayed or stale command)"
            }
            ReplyCode::InvalidConfiguration => {
                "the controller refused the configuration as invalid or too large for it"
            }
            ReplyCode::Busy => {
                "the controller is still applying an earlier new run or configuration; try again"
            }
            ReplyCode::NoKey => {
                "the controller has no command key provisioned, so it accepts no commands"
            }
        }
    }
}

impl core::fmt::Display for ReplyCode {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The controller's answer to one command.
///
/// ```
/// use heatbound::wire::{self, Frame, Reply, ReplyCode};
/// let r = Reply { counter: 7, t_ms: 12_000, code: ReplyCode::Applied };
/// let mut buf = [0; wire::MAX_FRAME_LEN];
/// let n = wire::encode(&Frame::Reply(r), &mut buf).unwrap();
/// assert_eq!(wire::decode(&buf[..n]), Ok(Frame::Reply(r)));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Reply {
    /// The command's counter (its sequence number); 0 for a command too
    /// malformed to read one from.
    pub counter: u32,
    /// Sample time when the controller answered, ms.
    pub t_ms: u32,
    /// Applied, or why not.
    pub code: ReplyCode,
}
