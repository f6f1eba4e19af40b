//! Alarms: the rules that warn a test engineer, and their state machines.
//!
//! ```text
//! Monitor::alarm_inputs --RuleInputs--> AlarmSet::update(t_ms) --> Events, trip_active()
//! ```
//!
//! Each rule turns the live window figures into one of three verdicts:
//! above its limit (*raise*), below its limit by more than the deadband
//! (*clear*), or in between (*hold*). A per-rule state machine then applies
//! the ISA-18.2 / IEC 62682 behaviours: on-delay, off-delay, deadband,
//! latching with acknowledge, and severity. Time is the sample time passed
//! in, never a clock, so replay, simulation and firmware behave identically.
//!
//! The second-law rules compare against k·u, the expanded uncertainty, so a
//! reading that is beyond the bound only by less than its own measurement
//! uncertainty does not raise them. The usual sample, every second-law
//! figure clear of its limit, is decided by cross-multiplying the window's
//! sums, without working out a figure; only otherwise are the figures and
//! their uncertainties worked out ([`RuleInputs`]).
//!
//! These alarms are monitoring aids, not a safety-rated interlock: hardwired
//! cut-outs and relief devices must stay in place.

use serde::{Deserialize, Serialize};

use crate::monitor::{AlarmFigures, ClearBands, Trends};
pub use crate::monitor::{AlarmInputs, RuleInputs};
use crate::num::Real;

/// Validated settings of one alarm rule.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Rule {
    /// Whether the rule is evaluated.
    pub enabled: bool,
    /// Severity of its events; an active `trip` drives the trip output.
    pub severity: Severity,
    /// Hysteresis in the rule's unit.
    pub deadband: f64,
    /// On-delay, seconds of sample time.
    pub on_delay_s: f64,
    /// Off-delay, seconds of sample time.
    pub off_delay_s: f64,
    /// Hold until acknowledged.
    pub latching: bool,
}

/// Validated alarm settings.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Alarms {
    /// Fraction of the Carnot bound above which `near_carnot` is raised.
    pub near_carnot_fraction: f64,
    /// Hot-side limit for `over_temperature`, kelvin.
    pub hot_max_k: f64,
    /// `limit_ahead` is raised when a limit is projected to be crossed
    /// sooner than this, seconds.
    pub horizon_s: f64,
    /// Per-rule settings, indexed by [`RuleId::index`].
    pub rules: [Rule; RuleId::COUNT],
}

impl Alarms {
    /// The settings of one rule.
    pub fn rule(&self, id: RuleId) -> &Rule {
        &self.rules[id.index()]
    }
}

/// Anything that holds the alarm settings, such as the validated rig
/// configuration: the rules' own settings and the coverage factor k.
pub trait AlarmConfig {
    /// The rules' settings.
    fn alarms(&self) -> &Alarms;
    /// Coverage factor k of the second-law rules.
    fn coverage_factor(&self) -> f64;
}

/// The alarm rules. Their ids ([`RuleId::as_str`]) are part of the interface.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[serde(rename_all = "snake_case")]
#[repr(u8)]
pub enum RuleId {
    /// `η − η_C > k·u(margin)`: readings are physically impossible.
    BeyondCarnot = 0,
    /// `σ̇ < −k·u(σ̇)`: the same fault, seen through the entropy account.
    NegativeEntropyProduction = 1,
    /// `η/η_C >` the configured fraction: implausibly close to the bound.
    NearCarnot = 2,
    /// `Q_loss < −k·u(Q_loss)` with heat out measured: more energy leaves than enters.
    EnergyBalance = 3,
    /// `T_hot >` the configured maximum: a rig limit.
    OverTemperature = 4,
    /// A channel is invalid, stuck or stale for longer than the rule's delay.
    SensorFault = 5,
    /// The trend of the recent windows reaches the Carnot bound or
    /// `hot_max_k` sooner than the configured horizon.
    LimitAhead = 6,
}

impl RuleId {
    /// Whether the rule says the readings break a law (the second law or the
    /// energy balance), which the diagnosis can then trace to a channel.
    ///
    /// ```
    /// use heatbound::alarm::RuleId;
    /// assert!(RuleId::BeyondCarnot.is_consistency());
    /// assert!(!RuleId::OverTemperature.is_consistency());
    /// ```
    pub const fn is_consistency(self) -> bool {
        matches!(
            self,
            RuleId::BeyondCarnot | RuleId::NegativeEntropyProduction | RuleId::EnergyBalance
        )
    }

    /// Number of rules.
    pub const COUNT: usize = 7;
    /// Every rule, in index order.
    pub const ALL: [RuleId; RuleId::COUNT] = [
        RuleId::BeyondCarnot,
        RuleId::NegativeEntropyProduction,
        RuleId::NearCarnot,
        RuleId::EnergyBalance,
        RuleId::OverTemperature,
        RuleId::SensorFault,
        RuleId::LimitAhead,
    ];

    /// Position in per-rule arrays and the bit in an alarm bit mask.
    pub const fn index(self) -> usize {
        self as usize
    }

    /// The rule from its index, if there is one.
    pub const fn from_index(index: usize) -> Option<RuleId> {
        if index < Self::COUNT {
            Some(Self::ALL[index])
        } else {
            None
        }
    }

    /// The rule's id as used in reports, JSON and `rig.toml`.
    pub const fn as_str(self) -> &'static str {
        match self {
            RuleId::BeyondCarnot => "beyond_carnot",
            RuleId::NegativeEntropyProduction => "negative_entropy_production",
            RuleId::NearCarnot => "near_carnot",
            RuleId::EnergyBalance => "energy_balance",
            RuleId::OverTemperature => "over_temperature",
            RuleId::SensorFault => "sensor_fault",
            RuleId::LimitAhead => "limit_ahead",
        }
    }

    /// The rule with this id.
    ///
    /// ```
    /// use heatbound::alarm::RuleId;
    /// assert_eq!(RuleId::parse("beyond_carnot"), Some(RuleId::BeyondCarnot));
    /// assert_eq!(RuleId::parse("nope"), None);
    /// ```
    pub fn parse(id: &str) -> Option<RuleId> {
        Self::ALL.into_iter().find(|r| r.as_str() == id)
    }

    /// Severity unless configured otherwise.
    pub const fn default_severity(self) -> Severity {
        match self {
            RuleId::BeyondCarnot | RuleId::NegativeEntropyProduction | RuleId::OverTemperature => {
                Severity::Trip
            }
            RuleId::EnergyBalance | RuleId::SensorFault => Severity::Warning,
            RuleId::NearCarnot | RuleId::LimitAhead => Severity::Advisory,
        }
    }

    /// Deadband unless configured otherwise: 1 % of the scale of the rule's
    /// quantity (a typical starting deadband, from memory); for
    /// `limit_ahead`, 10 % of the default horizon, 60 s.
    pub fn default_deadband(self, hot_max_k: f64) -> f64 {
        match self {
            RuleId::OverTemperature => 0.01 * hot_max_k,
            RuleId::SensorFault => 0.0,
            RuleId::LimitAhead => 60.0,
            _ => 0.01,
        }
    }

    /// The unit the deadband is given in.
    pub const fn deadband_unit(self) -> &'static str {
        match self {
            RuleId::BeyondCarnot => "efficiency (or COP) points",
            RuleId::NegativeEntropyProduction => "fraction of the entropy inflow ∫q_in/T_hot",
            RuleId::NearCarnot => "fraction of the Carnot bound",
            RuleId::EnergyBalance => "fraction of Q_in",
            RuleId::OverTemperature => "kelvin",
            RuleId::SensorFault => "unused",
            RuleId::LimitAhead => "seconds",
        }
    }

    /// The `rig.toml` keys of the rule's deadband and delays, for error messages.
    pub const fn config_keys(self) -> [&'static str; 3] {
        match self {
            RuleId::BeyondCarnot => [
                "alarms.beyond_carnot.deadband",
                "alarms.beyond_carnot.on_delay_s",
                "alarms.beyond_carnot.off_delay_s",
            ],
            RuleId::NegativeEntropyProduction => [
                "alarms.negative_entropy_production.deadband",
                "alarms.negative_entropy_production.on_delay_s",
                "alarms.negative_entropy_production.off_delay_s",
            ],
            RuleId::NearCarnot => [
                "alarms.near_carnot.deadband",
                "alarms.near_carnot.on_delay_s",
                "alarms.near_carnot.off_delay_s",
            ],
            RuleId::EnergyBalance => [
                "alarms.energy_balance.deadband",
                "alarms.energy_balance.on_delay_s",
                "alarms.energy_balance.off_delay_s",
            ],
            RuleId::OverTemperature => [
                "alarms.over_temperature.deadband",
                "alarms.over_temperature.on_delay_s",
                "alarms.over_temperature.off_delay_s",
            ],
            RuleId::SensorFault => [
                "alarms.sensor_fault.deadband",
                "alarms.sensor_fault.on_delay_s",
                "alarms.sensor_fault.off_delay_s",
            ],
            RuleId::LimitAhead => [
                "alarms.limit_ahead.deadband",
                "alarms.limit_ahead.on_delay_s",
                "alarms.limit_ahead.off_delay_s",
            ],
        }
    }
}

impl core::fmt::Display for RuleId {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// How serious an alarm is. An active `Trip` drives the trip output.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[serde(rename_all = "snake_case")]
pub enum Severity {
    /// Worth a look.
    Advisory,
    /// Needs attention.
    Warning,
    /// Drives the trip output.
    Trip,
}

impl Severity {
    /// The name used in reports and `rig.toml`.
    pub const fn as_str(self) -> &'static str {
        match self {
            Severity::Advisory => "advisory",
            Severity::Warning => "warning",
            Severity::Trip => "trip",
        }
    }
}

impl core::fmt::Display for Severity {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// What happened to an alarm.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[serde(rename_all = "snake_case")]
pub enum EventKind {
    /// The condition held for the on-delay.
    Raised,
    /// The clear condition held for the off-delay (and, if latching, the
    /// alarm was acknowledged).
    Cleared,
    /// An operator acknowledged the alarm.
    Acknowledged,
}

impl EventKind {
    /// The name used in reports and JSON.
    pub const fn as_str(self) -> &'static str {
        match self {
            EventKind::Raised => "raised",
            EventKind::Cleared => "cleared",
            EventKind::Acknowledged => "acknowledged",
        }
    }
}

impl core::fmt::Display for EventKind {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// One alarm event, stamped with sample time.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Event {
    /// Sample time of the event, milliseconds.
    pub t_ms: u32,
    /// Which rule.
    pub rule: RuleId,
    /// What happened.
    pub kind: EventKind,
    /// The rule's severity.
    pub severity: Severity,
}

/// The events of one update or acknowledge, in rule order: at most two per
/// rule, all at the same sample time.
///
/// Packed into 20 bytes, because it is returned by value on every sample: a
/// vector of [`Event`]s would be copied whole, 100 bytes, each time.
///
/// ```
/// use heatbound::alarm::{AlarmSet, EventKind, RuleId};
/// use heatbound::config::RigConfig;
/// let mut alarms = AlarmSet::new(&RigConfig::default());
/// let events = alarms.acknowledge(RuleId::BeyondCarnot, 1000);
/// assert!(events.is_empty()); // nothing was active
/// for e in &events {
///     assert_eq!(e.kind, EventKind::Acknowledged);
/// }
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Events {
    t_ms: u32,
    len: u8,
    /// `(rule · 3 + kind) · 3 + severity`, by their declaration order.
    packed: [u8; Events::CAPACITY],
}

const KINDS: [EventKind; 3] = [
    EventKind::Raised,
    EventKind::Cleared,
    EventKind::Acknowledged,
];
const SEVERITIES: [Severity; 3] = [Severity::Advisory, Severity::Warning, Severity::Trip];

impl Events {
    /// Two per rule: an acknowledge that also clears.
    pub const CAPACITY: usize = RuleId::COUNT * 2;

    /// No events, at `t_ms`.
    const fn at(t_ms: u32) -> Self {
        Self {
            t_ms,
            len: 0,
            packed: [0; Events::CAPACITY],
        }
    }

    /// Appends an event at this set's time; beyond the capacity, which the
    /// callers cannot reach, it is dropped.
    fn push(&mut self, rule: RuleId, kind: EventKind, severity: Severity) {
        let code = (rule.index() * 3 + kind as usize) * 3 + severity as usize;
        if let Some(slot) = self.packed.get_mut(usize::from(self.len)) {
            *slot = code as u8;
            self.len += 1;
        }
    }

    /// How many events.
    pub const fn len(&self) -> usize {
        self.len as usize
    }

    /// Whether there are none.
    pub const fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// The `i`-th event.
    pub fn get(&self, i: usize) -> Option<Event> {
        let code = usize::from(*self.packed.get(..self.len())?.get(i)?);
        Some(Event {
            t_ms: self.t_ms,
            rule: *RuleId::ALL.get(code / 9)?,
            kind: *KINDS.get(code / 3 % 3)?,
            severity: *SEVERITIES.get(code % 3)?,
        })
    }

    /// The first event.
    pub fn first(&self) -> Option<Event> {
        self.get(0)
    }

    /// The events in order.
    pub fn iter(&self) -> EventsIter {
        EventsIter {
            events: *self,
            next: 0,
        }
    }
}

/// The events of an [`Events`], in order.
#[derive(Clone, Debug)]
pub struct EventsIter {
    events: Events,
    next: usize,
}

impl Iterator for EventsIter {
    type Item = Event;

    fn next(&mut self) -> Option<Event> {
        let e = self.events.get(self.next)?;
        self.next += 1;
        Some(e)
    }

    fn size_hint(&self) -> (usize, Option<usize>) {
        let left = self.events.len().saturating_sub(self.next);
        (left, Some(left))
    }
}

impl ExactSizeIterator for EventsIter {}

impl IntoIterator for Events {
    type Item = Event;
    type IntoIter = EventsIter;
    fn into_iter(self) -> EventsIter {
        self.iter()
    }
}

impl IntoIterator for &Events {
    type Item = Event;
    type IntoIter = EventsIter;
    fn into_iter(self) -> EventsIter {
        self.iter()
    }
}

/// The state of one rule.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum AlarmState {
    /// Not active.
    #[default]
    Normal,
    /// The condition holds; waiting out the on-delay since `since_ms`.
    Pending {
        /// When the condition began.
        since_ms: u32,
    },
    /// Raised.
    Active {
        /// Whether an operator has acknowledged it.
        acked: bool,
    },
    /// Raised; the clear condition holds and the off-delay runs since `since_ms`.
    Clearing {
        /// When the clear condition began.
        since_ms: u32,
        /// Whether an operator has acknowledged it.
        acked: bool,
    },
    /// Latching rule whose condition has cleared: held until acknowledged.
    Unacknowledged,
}

impl AlarmState {
    /// Whether the alarm is annunciated (raised and not yet reset).
    pub const fn is_active(self) -> bool {
        matches!(
            self,
            AlarmState::Active { .. } | AlarmState::Clearing { .. } | AlarmState::Unacknowledged
        )
    }
}

impl core::fmt::Display for AlarmState {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            AlarmState::Normal => "normal",
            AlarmState::Pending { .. } => "pending",
            AlarmState::Active { acked: false } => "active",
            AlarmState::Active { acked: true } => "active, acknowledged",
            AlarmState::Clearing { .. } => "clearing",
            AlarmState::Unacknowledged => "cleared, awaiting acknowledge",
        })
    }
}

/// A rule's verdict on the current figures.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Verdict {
    /// Beyond the limit. `since_ms` backdates the start of the condition when
    /// the evidence is older than this update (a channel that has been
    /// invalid since then).
    Raise {
        /// When the condition began, if earlier than now.
        since_ms: Option<u32>,
    },
    /// Inside the deadband: neither raise nor clear.
    Hold,
    /// Clear of the limit by more than the deadband, or not evaluable.
    Clear,
}

/// Turns `x` (positive = beyond the limit) into a verdict with `deadband`.
fn level<R: Real>(x: Option<R>, deadband: R) -> Verdict {
    match x {
        Some(x) if x > R::ZERO => Verdict::Raise { since_ms: None },
        Some(x) if x >= -deadband => Verdict::Hold,
        _ => Verdict::Clear,
    }
}

/// The limits the rules compare against, taken from the configuration.
///
/// Kept in `f64` and, rounded once, in `f32`, so that neither precision
/// converts a setting on every sample.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Limits {
    /// Coverage factor k of the second-law rules.
    pub coverage_factor: f64,
    /// `near_carnot` fraction.
    pub near_carnot_fraction: f64,
    /// `over_temperature` limit, kelvin.
    pub hot_max_k: f64,
    /// `limit_ahead` horizon, seconds.
    pub horizon_s: f64,
    /// Deadband of each rule, in its unit.
    pub deadband: [f64; RuleId::COUNT],
    /// The same five, in `f32`.
    single: SingleLimits,
}

#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct SingleLimits {
    coverage_factor: f32,
    near_carnot_fraction: f32,
    hot_max_k: f32,
    horizon_s: f32,
    deadband: [f32; RuleId::COUNT],
}

impl Limits {
    /// The limits of `config`.
    pub fn new(config: &impl AlarmConfig) -> Self {
        let a: &Alarms = config.alarms();
        let deadband = RuleId::ALL.map(|id| a.rule(id).deadband);
        Self {
            coverage_factor: config.coverage_factor(),
            near_carnot_fraction: a.near_carnot_fraction,
            hot_max_k: a.hot_max_k,
            horizon_s: a.horizon_s,
            deadband,
            single: SingleLimits {
                coverage_factor: config.coverage_factor() as f32,
                near_carnot_fraction: a.near_carnot_fraction as f32,
                hot_max_k: a.hot_max_k as f32,
                horizon_s: a.horizon_s as f32,
                deadband: deadband.map(|d| d as f32),
            },
        }
    }

    /// Each rule's verdict on `inputs`.
    ///
    /// For each rule, `x` is the distance beyond its limit, in the rule's
    /// deadband unit ([`RuleId::deadband_unit`]): raise when `x > 0`, hold
    /// while `x ≥ −deadband`, clear below.
    pub fn verdicts<I: RuleInputs>(&self, inputs: &I) -> [Verdict; RuleId::COUNT] {
        verdicts(self, inputs, |_| true)
    }
}

/// The verdict on `a − k·u > 0` with deadband `d` (in the unit of `a`),
/// given `k²·u²`: `a − k·u > 0 ⇔ a > 0 ∧ a² > k²u²`, and the hold test
/// `a − k·u ≥ −d` likewise, so no square root is taken.
fn beyond_uncertainty<R: Real>(a: R, k2_var: R, d: R) -> Verdict {
    if a > R::ZERO && a * a > k2_var {
        return Verdict::Raise { since_ms: None };
    }
    let held = a + d;
    if held >= R::ZERO && held * held >= k2_var {
        Verdict::Hold
    } else {
        Verdict::Clear
    }
}

/// Each rule's verdict on `inputs`. Where `banded(rule)` is false, the
/// rule's caller does not tell `Hold` from `Clear` (a rule that is not
/// raised), and the division-free test of the second-law rules may clear
/// it without its deadband.
fn verdicts<I: RuleInputs>(
    limits: &Limits,
    inputs: &I,
    banded: impl Fn(RuleId) -> bool,
) -> [Verdict; RuleId::COUNT] {
    type R<I> = <I as RuleInputs>::Real;
    let single = &limits.single;
    let k = R::<I>::pick(single.coverage_factor, limits.coverage_factor);
    let db = |id: RuleId| {
        let i = id.index();
        R::<I>::pick(single.deadband[i], limits.deadband[i])
    };
    let zero = R::<I>::ZERO;
    let near_fraction = R::<I>::pick(single.near_carnot_fraction, limits.near_carnot_fraction);

    // The usual sample, every second-law figure clear of its limit, is told
    // by cross-multiplying the window's sums; only otherwise are the
    // figures, and perhaps their uncertainties, worked out.
    let band = |id: RuleId| match db(id) {
        d if banded(id) && d > zero => d,
        _ => zero,
    };
    let clear = inputs.second_law_clear(&ClearBands {
        beyond: band(RuleId::BeyondCarnot),
        entropy: band(RuleId::NegativeEntropyProduction),
        balance: band(RuleId::EnergyBalance),
        near: near_fraction - band(RuleId::NearCarnot),
    });
    // Near a limit the uncertainties are usually wanted too: worked out
    // with the figures, in one pass.
    let figures = (!clear).then(|| inputs.figures_with_variances());
    let (beyond, negative_entropy, near, balance) = match &figures {
        Some(m) => second_law_verdicts(limits, m),
        None => (
            Verdict::Clear,
            Verdict::Clear,
            Verdict::Clear,
            Verdict::Clear,
        ),
    };
    let over = level(
        inputs
            .t_hot_k()
            .map(|t| t - R::<I>::pick(single.hot_max_k, limits.hot_max_k)),
        db(RuleId::OverTemperature),
    );

    let sensor = match inputs.faults().since_ms {
        Some(since) => Verdict::Raise {
            since_ms: Some(since),
        },
        None => Verdict::Clear,
    };

    // limit_ahead: a limit still ahead (one within its own rule's deadband
    // is here, and that rule speaks for it) that the trend reaches within
    // the horizon. Decided without dividing: the crossing time gap/speed is
    // within H exactly when gap < speed·H.
    let hot_max = R::<I>::pick(single.hot_max_k, limits.hot_max_k);
    let horizon = R::<I>::pick(single.horizon_s, limits.horizon_s);
    let trends = inputs.trends();
    let hot = trends
        .t_hot_k
        .filter(|_| {
            inputs
                .t_hot_k()
                .is_some_and(|t| t < hot_max - db(RuleId::OverTemperature))
        })
        .map(|l| (hot_max - l.value, l.slope_per_s, l.u_slope_per_s));
    let ahead_of = |line| ahead_of(line, k, horizon, db(RuleId::LimitAhead));
    // The margin's line counts only while the margin is beyond its own
    // rule's deadband, which needs the figures: asked only if it counts.
    let margin = match ahead_of(
        trends
            .carnot_margin
            .map(|l| (l.value, -l.slope_per_s, l.u_slope_per_s)),
    ) {
        0 => 0,
        n => {
            let now = match &figures {
                Some(m) => m.carnot_margin,
                None => inputs.figures().carnot_margin,
            };
            if now.is_some_and(|x| x > db(RuleId::BeyondCarnot)) {
                n
            } else {
                0
            }
        }
    };
    let ahead = match ahead_of(hot).max(margin) {
        2 => Verdict::Raise { since_ms: None },
        1 => Verdict::Hold,
        _ => Verdict::Clear,
    };

    [beyond, negative_entropy, near, balance, over, sensor, ahead]
}

/// How a trend line, as (gap to its limit, speed towards it, u(speed)),
/// stands against the horizon: 2 when it reaches the limit within it, 1
/// within the deadband beyond it, else 0 (or when not heading there by more
/// than `k` standard errors).
fn ahead_of<R: Real>(line: Option<(R, R, R)>, k: R, horizon: R, deadband: R) -> u8 {
    match line {
        Some((gap, speed, u)) if speed > R::ZERO && speed > k * u && gap > R::ZERO => {
            if gap < speed * horizon {
                2
            } else if gap <= speed * (horizon + deadband) {
                1
            } else {
                0
            }
        }
        _ => 0,
    }
}

/// The verdicts of `beyond_carnot`, `negative_entropy_production`,
/// `near_carnot` and `energy_balance` on the figures `m`, with their
/// variances.
fn second_law_verdicts<R: Real>(
    limits: &Limits,
    m: &AlarmFigures<R>,
) -> (Verdict, Verdict, Verdict, Verdict) {
    let single = &limits.single;
    let k = R::pick(single.coverage_factor, limits.coverage_factor);
    let k2 = k * k;
    let db = |id: RuleId| {
        let i = id.index();
        R::pick(single.deadband[i], limits.deadband[i])
    };
    let zero = R::ZERO;

    // The three second-law rules as (a, d): raise when a − k·u > 0, hold
    // while a − k·u ≥ −d.
    // η − η_C > k·u(margin), with margin = η_C − η (or COP_C − COP).
    let beyond = m.carnot_margin.map(|x| (-x, db(RuleId::BeyondCarnot)));
    // σ̇ < −k·u(σ̇); the deadband is a fraction of the entropy inflow rate,
    // so it does not depend on the size of the rig.
    let negative_entropy = match (m.entropy_rate_w_per_k, m.entropy_in_rate_w_per_k) {
        (Some(s), Some(inflow)) if inflow > zero => {
            Some((-s, db(RuleId::NegativeEntropyProduction) * inflow))
        }
        _ => None,
    };
    // Q_loss < −k·u(Q_loss); the deadband is a fraction of Q_in.
    let balance = match m.balance_residual_j {
        Some(l) if m.heat_in_j > zero => Some((-l, db(RuleId::EnergyBalance) * m.heat_in_j)),
        _ => None,
    };
    let judge = |rule: Option<(R, R)>, var: Option<R>| match (rule, var) {
        (Some((a, d)), Some(var)) => beyond_uncertainty(a, k2 * var, d),
        _ => Verdict::Clear,
    };
    let near = level(
        m.second_law_efficiency
            .map(|f| f - R::pick(single.near_carnot_fraction, limits.near_carnot_fraction)),
        db(RuleId::NearCarnot),
    );
    (
        judge(beyond, m.var_carnot_margin),
        judge(negative_entropy, m.var_entropy_rate_w_per_k),
        near,
        judge(balance, m.var_balance_residual_j),
    )
}

/// When each limit is projected to be crossed, seconds from the latest
/// window: the Carnot margin reaching 0 (the bound) and the hot side
/// reaching `hot_max_k`, from the lines fitted to the recent windows, when
/// they head there by more than `k` standard errors of their slopes.
///
/// ```
/// use heatbound::alarm::time_to_limit;
/// use heatbound::monitor::{Line, Trends};
/// let trends = Trends {
///     carnot_margin: Some(Line { value: 0.2_f64, slope_per_s: -0.001, u_slope_per_s: 0.0001 }),
///     t_hot_k: Some(Line { value: 650.0, slope_per_s: 0.0, u_slope_per_s: 0.01 }),
/// };
/// let t = time_to_limit(&trends, 720.0, 2.0);
/// assert!((t.carnot_bound_s.unwrap() - 200.0).abs() < 1e-9);
/// assert_eq!(t.hot_max_s, None); // not heading there
/// assert_eq!(t.sooner(), t.carnot_bound_s);
/// ```
pub fn time_to_limit<R: Real>(trends: &Trends<R>, hot_max_k: R, k: R) -> TimeToLimit<R> {
    TimeToLimit {
        carnot_bound_s: trends
            .carnot_margin
            .and_then(|l| l.time_to(R::ZERO, false, k)),
        hot_max_s: trends.t_hot_k.and_then(|l| l.time_to(hot_max_k, true, k)),
    }
}

/// The projected time to each limit, seconds; `None` when no crossing is
/// projected.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct TimeToLimit<R> {
    /// The Carnot margin reaching 0.
    pub carnot_bound_s: Option<R>,
    /// The hot side reaching `hot_max_k`.
    pub hot_max_s: Option<R>,
}

impl<R: Real> TimeToLimit<R> {
    /// The sooner of the two.
    pub fn sooner(&self) -> Option<R> {
        match (self.carnot_bound_s, self.hot_max_s) {
            (Some(a), Some(b)) => Some(if a < b { a } else { b }),
            (a, b) => a.or(b),
        }
    }
}

/// Seconds to whole milliseconds, saturating.
fn ms(s: f64) -> u32 {
    let ms = s * 1000.0;
    if ms >= u32::MAX as f64 {
        u32::MAX
    } else if ms > 0.0 {
        ms as u32
    } else {
        0
    }
}

// `AlarmSet::not_normal` has a bit per rule.
const _: () = assert!(RuleId::COUNT <= u16::BITS as usize);

/// The state machines of every rule.
#[derive(Clone, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AlarmSet {
    limits: Limits,
    states: [AlarmState; RuleId::COUNT],
    /// Bit `i` set when rule `i` is not `Normal`: the usual sample asks
    /// whether all are, which is then one comparison.
    not_normal: u16,
    enabled: [bool; RuleId::COUNT],
    severity: [Severity; RuleId::COUNT],
    latching: [bool; RuleId::COUNT],
    on_delay_ms: [u32; RuleId::COUNT],
    off_delay_ms: [u32; RuleId::COUNT],
}

impl AlarmSet {
    /// Every rule in `Normal`, with the settings of `config`.
    pub fn new(config: &impl AlarmConfig) -> Self {
        let rule = |id: RuleId| config.alarms().rule(id);
        Self {
            limits: Limits::new(config),
            states: [AlarmState::Normal; RuleId::COUNT],
            not_normal: 0,
            enabled: RuleId::ALL.map(|id| rule(id).enabled),
            severity: RuleId::ALL.map(|id| rule(id).severity),
            latching: RuleId::ALL.map(|id| rule(id).latching),
            on_delay_ms: RuleId::ALL.map(|id| ms(rule(id).on_delay_s)),
            off_delay_ms: RuleId::ALL.map(|id| ms(rule(id).off_delay_s)),
        }
    }

    /// Takes the rule settings of `config` at `t_ms`, keeping every rule's
    /// state: an alarm that is raised stays raised (and a trip keeps
    /// tripping) until its condition clears under the new settings. A rule
    /// that `config` disables is cleared, with a `cleared` event if it was
    /// annunciated, so nothing is dropped silently.
    ///
    /// ```
    /// use heatbound::alarm::{AlarmSet, AlarmState, EventKind, RuleId};
    /// use heatbound::config::RigConfig;
    /// let mut config = RigConfig::default();
    /// let mut alarms = AlarmSet::new(&config);
    /// config.alarms.hot_max_k = 900.0;
    /// assert!(alarms.reconfigure(&config, 1000).is_empty());
    /// assert_eq!(alarms.limits(), AlarmSet::new(&config).limits());
    /// assert_eq!(alarms.state(RuleId::OverTemperature), AlarmState::Normal);
    /// ```
    pub fn reconfigure(&mut self, config: &impl AlarmConfig, t_ms: u32) -> Events {
        let states = self.states;
        *self = AlarmSet::new(config);
        let mut events = Events::at(t_ms);
        for id in RuleId::ALL {
            let i = id.index();
            let state = states[i];
            if !self.enabled[i] {
                if state.is_active() {
                    events.push(id, EventKind::Cleared, self.severity[i]);
                }
            } else {
                self.set_state(i, state);
            }
        }
        events
    }

    /// Evaluates every rule on `inputs` at sample time `t_ms` and advances
    /// the state machines; returns the events this caused.
    ///
    /// ```
    /// use heatbound::alarm::{AlarmSet, EventKind, RuleId};
    /// use heatbound::config::RigConfig;
    /// use heatbound::monitor::{Monitor, Sample};
    ///
    /// let config = RigConfig::default();
    /// let mut monitor: Monitor<64> = Monitor::new(&config).unwrap();
    /// let mut alarms = AlarmSet::new(&config);
    /// let mut raised = None;
    /// for i in 0..30u32 {
    ///     // 500 W in, 300 W out between 600 K and 300 K: 60 % against a 50 % bound.
    ///     let s = Sample { t_ms: i * 1000, t_hot_k: 600.0, t_cold_k: 300.0,
    ///                      heat_in_w: 500.0, work_w: 300.0, heat_out_w: None, t_hot2_k: None };
    ///     monitor.push(&s);
    ///     for e in alarms.update(s.t_ms, &monitor.alarm_inputs()) {
    ///         if e.rule == RuleId::BeyondCarnot && e.kind == EventKind::Raised {
    ///             raised = Some(e.t_ms);
    ///         }
    ///     }
    /// }
    /// // The default on-delay is 5 s of sample time after the first window figure.
    /// assert_eq!(raised, Some(6000));
    /// assert!(alarms.trip_active());
    /// ```
    pub fn update<I: RuleInputs>(&mut self, t_ms: u32, inputs: &I) -> Events {
        if self.calm(inputs) {
            return Events::at(t_ms);
        }
        self.update_rules(t_ms, inputs)
    }

    /// [`AlarmSet::update`] past the calm test: every rule's verdict.
    /// Out of line, so that the usual, calm sample does not pay for this
    /// path's registers and stack.
    #[inline(never)]
    fn update_rules<I: RuleInputs>(&mut self, t_ms: u32, inputs: &I) -> Events {
        // Only a raised rule tells `Hold` from `Clear`: elsewhere (normal,
        // pending, latched unacknowledged) both leave it where it is.
        let raised = |id: RuleId| {
            matches!(
                self.states[id.index()],
                AlarmState::Active { .. } | AlarmState::Clearing { .. }
            )
        };
        let verdicts = verdicts(&self.limits, inputs, raised);
        self.apply(t_ms, &verdicts)
    }

    /// Whether no rule can move on `inputs`: every rule normal, no channel
    /// fault, the hot side not above its limit, no trend reaching a limit
    /// within the horizon, and the second-law rules certainly clear. Each
    /// verdict is then `Hold` or `Clear`, which leave a normal rule where it
    /// is; this is the usual sample, and it costs a few comparisons.
    fn calm<I: RuleInputs>(&self, inputs: &I) -> bool {
        type R<I> = <I as RuleInputs>::Real;
        let (l, s) = (&self.limits, &self.limits.single);
        if self.not_normal != 0 || inputs.faults().any() {
            return false;
        }
        let hot_max = R::<I>::pick(s.hot_max_k, l.hot_max_k);
        if inputs.t_hot_k().is_some_and(|t| t > hot_max) {
            return false;
        }
        let trends = inputs.trends();
        let i = RuleId::LimitAhead.index();
        let raises = |line| {
            let k = R::<I>::pick(s.coverage_factor, l.coverage_factor);
            let horizon = R::<I>::pick(s.horizon_s, l.horizon_s);
            ahead_of(line, k, horizon, R::<I>::pick(s.deadband[i], l.deadband[i])) == 2
        };
        let hot = trends
            .t_hot_k
            .map(|l| (hot_max - l.value, l.slope_per_s, l.u_slope_per_s));
        let margin = trends
            .carnot_margin
            .map(|l| (l.value, -l.slope_per_s, l.u_slope_per_s));
        if raises(hot) || raises(margin) {
            return false;
        }
        let zero = R::<I>::ZERO;
        inputs.second_law_clear(&ClearBands {
            beyond: zero,
            entropy: zero,
            balance: zero,
            near: R::<I>::pick(s.near_carnot_fraction, l.near_carnot_fraction),
        })
    }

    /// The limits the rules compare against.
    pub fn limits(&self) -> &Limits {
        &self.limits
    }

    /// Advances the rules with verdicts computed elsewhere (for example by
    /// [`Limits::verdicts`] on recomputed figures); returns the events.
    pub fn apply(&mut self, t_ms: u32, verdicts: &[Verdict; RuleId::COUNT]) -> Events {
        let mut events = Events::at(t_ms);
        for id in RuleId::ALL {
            let verdict = verdicts[id.index()];
            // The common case, a quiet rule that stays quiet, costs nothing.
            if verdict == Verdict::Clear && self.states[id.index()] == AlarmState::Normal {
                continue;
            }
            if let Some(kind) = self.step(id, t_ms, verdict) {
                // Capacity is two per rule; one step emits at most one.
                events.push(id, kind, self.severity[id.index()]);
            }
        }
        events
    }

    fn step(&mut self, id: RuleId, t: u32, verdict: Verdict) -> Option<EventKind> {
        let i = id.index();
        if !self.enabled[i] {
            self.set_state(i, AlarmState::Normal);
            return None;
        }
        let on = self.on_delay_ms[i];
        let off = self.off_delay_ms[i];
        let (next, event) = match (self.states[i], verdict) {
            (AlarmState::Normal, Verdict::Raise { since_ms }) => {
                let since = since_ms.unwrap_or(t);
                if t.wrapping_sub(since) >= on {
                    (AlarmState::Active { acked: false }, Some(EventKind::Raised))
                } else {
                    (AlarmState::Pending { since_ms: since }, None)
                }
            }
            (AlarmState::Normal, _) => (AlarmState::Normal, None),
            (AlarmState::Pending { since_ms }, Verdict::Raise { .. }) => {
                if t.wrapping_sub(since_ms) >= on {
                    (AlarmState::Active { acked: false }, Some(EventKind::Raised))
                } else {
                    (AlarmState::Pending { since_ms }, None)
                }
            }
            // The on-delay needs the condition to hold without a break.
            (AlarmState::Pending { .. }, _) => (AlarmState::Normal, None),
            (AlarmState::Active { acked }, Verdict::Clear) => {
                if off == 0 {
                    self.reset(i, acked)
                } else {
                    (AlarmState::Clearing { since_ms: t, acked }, None)
                }
            }
            (AlarmState::Active { acked }, _) => (AlarmState::Active { acked }, None),
            (AlarmState::Clearing { since_ms, acked }, Verdict::Clear) => {
                if t.wrapping_sub(since_ms) >= off {
                    self.reset(i, acked)
                } else {
                    (AlarmState::Clearing { since_ms, acked }, None)
                }
            }
            (AlarmState::Clearing { acked, .. }, _) => (AlarmState::Active { acked }, None),
            // Still annunciated: a returning condition keeps it so, silently.
            (AlarmState::Unacknowledged, Verdict::Raise { .. }) => {
                (AlarmState::Active { acked: false }, None)
            }
            (AlarmState::Unacknowledged, _) => (AlarmState::Unacknowledged, None),
        };
        self.set_state(i, next);
        event
    }

    /// Rule `i` goes to `state`.
    #[inline]
    fn set_state(&mut self, i: usize, state: AlarmState) {
        if let Some(slot) = self.states.get_mut(i) {
            *slot = state;
            let bit = 1u16 << i;
            if state == AlarmState::Normal {
                self.not_normal &= !bit;
            } else {
                self.not_normal |= bit;
            }
        }
    }

    /// The off-delay has run out: reset, unless latching and unacknowledged.
    fn reset(&self, i: usize, acked: bool) -> (AlarmState, Option<EventKind>) {
        if self.latching[i] && !acked {
            (AlarmState::Unacknowledged, None)
        } else {
            (AlarmState::Normal, Some(EventKind::Cleared))
        }
    }

    /// An operator acknowledges `rule` at `t_ms`. A latched alarm whose
    /// condition has already cleared resets here.
    ///
    /// Returns the events: `acknowledged`, then `cleared` if it reset.
    /// Acknowledging an alarm that is not active, or already acknowledged,
    /// does nothing.
    pub fn acknowledge(&mut self, rule: RuleId, t_ms: u32) -> Events {
        let i = rule.index();
        let mut events = Events::at(t_ms);
        let (next, reset) = match self.states[i] {
            AlarmState::Active { acked: false } => (AlarmState::Active { acked: true }, false),
            AlarmState::Clearing {
                since_ms,
                acked: false,
            } => (
                AlarmState::Clearing {
                    since_ms,
                    acked: true,
                },
                false,
            ),
            AlarmState::Unacknowledged => (AlarmState::Normal, true),
            _ => return events,
        };
        self.set_state(i, next);
        let severity = self.severity[i];
        events.push(rule, EventKind::Acknowledged, severity);
        if reset {
            events.push(rule, EventKind::Cleared, severity);
        }
        events
    }

    /// Acknowledges every active alarm.
    pub fn acknowledge_all(&mut self, t_ms: u32) -> Events {
        let mut all = Events::at(t_ms);
        for id in RuleId::ALL {
            for e in self.acknowledge(id, t_ms) {
                all.push(e.rule, e.kind, e.severity);
            }
        }
        all
    }

    /// The state of one rule.
    pub fn state(&self, rule: RuleId) -> AlarmState {
        self.states[rule.index()]
    }

    /// Whether `rule` is annunciated.
    pub fn is_active(&self, rule: RuleId) -> bool {
        self.states[rule.index()].is_active()
    }

    /// Active rules as a bit mask, bit i = [`RuleId::index`].
    pub fn active_mask(&self) -> u8 {
        RuleId::ALL
            .iter()
            .filter(|id| self.is_active(**id))
            .fold(0, |m, id| m | (1 << id.index()))
    }

    /// Whether any active rule has severity `trip`: drive the trip output from this.
    pub fn trip_active(&self) -> bool {
        RuleId::ALL
            .iter()
            .any(|id| self.is_active(*id) && self.severity[id.index()] == Severity::Trip)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn events_unpack_what_was_packed() {
        let mut all =
            [(RuleId::BeyondCarnot, EventKind::Raised, Severity::Advisory); RuleId::COUNT * 9];
        let mut n = 0;
        for rule in RuleId::ALL {
            for kind in KINDS {
                for severity in SEVERITIES {
                    all[n] = (rule, kind, severity);
                    n += 1;
                }
            }
        }
        for chunk in all.chunks(Events::CAPACITY) {
            let mut events = Events::at(4321);
            for &(rule, kind, severity) in chunk {
                events.push(rule, kind, severity);
            }
            assert_eq!(events.len(), chunk.len());
            assert_eq!(events.iter().len(), chunk.len());
            for (e, &(rule, kind, severity)) in events.iter().zip(chunk) {
                assert_eq!(
                    e,
                    Event {
                        t_ms: 4321,
                        rule,
                        kind,
                        severity
                    }
                );
            }
            assert_eq!(events.get(chunk.len()), None);
        }
        // Beyond the capacity, pushes are dropped, never a panic.
        let mut full = Events::at(0);
        for _ in 0..Events::CAPACITY + 3 {
            full.push(RuleId::SensorFault, EventKind::Cleared, Severity::Trip);
        }
        assert_eq!(full.len(), Events::CAPACITY);
    }
}
