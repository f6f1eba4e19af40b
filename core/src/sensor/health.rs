//! Channel health: is this reading fit to feed the monitor?
//!
//! Where it sits: after conversion, before a reading goes into a `Sample`.
//! A [`ChannelHealth`] per channel watches the stream of converted values
//! and raises [`HealthFlags`] for the faults a bench sees in practice
//! (common practice): a non-finite value (an open thermocouple, a dead
//! converter), a value outside the configured limits, a change faster than
//! physics allows, a reading stuck at one value, and a channel gone silent.
//! The monitor skips flagged samples and the `sensor_fault` alarm reports
//! faults that last.
//!
//! Time is an argument: every call takes the sample time in milliseconds as
//! a `u32` and never reads a clock. Times wrap at 2³² ms (about 49.7 days);
//! intervals are computed with `wrapping_sub`, so they are right across the
//! wrap as long as consecutive calls are less than 2³¹ ms apart.
//!
//! O(1) per call, no heap, no panics; f32 throughout, since this runs on
//! every sample on the single-precision FPU.
//!
//! ```
//! use heatbound::sensor::health::{ChannelHealth, HealthConfig, HealthFlags};
//!
//! let config = HealthConfig::new(-50.0, 1200.0)
//!     .with_rate_limit_per_s(100.0)
//!     .with_stuck(0.01, 10)
//!     .with_stale_timeout_ms(2_000);
//! let mut ch = ChannelHealth::new(config);
//! assert!(ch.update(0, 20.0).is_ok());
//! assert!(ch.update(100, 20.5).is_ok());
//! assert_eq!(ch.update(200, 80.0), HealthFlags::RATE); // 595 per second
//! assert_eq!(ch.check_stale(5_000), HealthFlags::STALE);
//! ```

use core::fmt;
use core::ops::{BitAnd, BitOr, BitOrAssign};

/// A set of channel faults; [`HealthFlags::is_ok`] when empty.
///
/// `Display` lists the faults by name, separated by `|`, or prints `ok`.
///
/// ```
/// use heatbound::sensor::health::HealthFlags;
/// let f = HealthFlags::RATE | HealthFlags::STUCK;
/// assert!(f.contains(HealthFlags::RATE) && !f.is_ok());
/// assert_eq!(f.to_string(), "rate|stuck");
/// assert_eq!(HealthFlags::empty().to_string(), "ok");
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct HealthFlags(u8);

impl HealthFlags {
    /// The value is NaN or infinite.
    pub const NON_FINITE: Self = Self(1 << 0);
    /// The value is outside the configured limits.
    pub const OUT_OF_RANGE: Self = Self(1 << 1);
    /// The value changed faster than the configured rate limit.
    pub const RATE: Self = Self(1 << 2);
    /// The value has not changed by more than the resolution over the
    /// configured number of samples.
    pub const STUCK: Self = Self(1 << 3);
    /// No finite sample arrived within the configured timeout.
    pub const STALE: Self = Self(1 << 4);

    const NAMES: [(Self, &'static str); 5] = [
        (Self::NON_FINITE, "non_finite"),
        (Self::OUT_OF_RANGE, "out_of_range"),
        (Self::RATE, "rate"),
        (Self::STUCK, "stuck"),
        (Self::STALE, "stale"),
    ];

    /// No faults.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthFlags;
    /// assert!(HealthFlags::empty().is_ok());
    /// ```
    pub const fn empty() -> Self {
        Self(0)
    }

    /// The raw bits (NON_FINITE = bit 0 … STALE = bit 4), for the wire.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthFlags;
    /// assert_eq!(HealthFlags::STALE.bits(), 0b1_0000);
    /// ```
    pub const fn bits(self) -> u8 {
        self.0
    }

    /// Flags from raw bits; unknown bits are dropped.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthFlags;
    /// assert_eq!(HealthFlags::from_bits_truncate(0xff).bits(), 0b1_1111);
    /// ```
    pub const fn from_bits_truncate(bits: u8) -> Self {
        Self(bits & 0b1_1111)
    }

    /// True when there is no fault.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthFlags;
    /// assert!(!HealthFlags::STUCK.is_ok());
    /// ```
    pub const fn is_ok(self) -> bool {
        self.0 == 0
    }

    /// True when every fault in `other` is set here.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthFlags;
    /// assert!((HealthFlags::RATE | HealthFlags::STALE).contains(HealthFlags::STALE));
    /// ```
    pub const fn contains(self, other: Self) -> bool {
        self.0 & other.0 == other.0
    }

    /// True when any fault in `other` is set here.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthFlags;
    /// assert!(HealthFlags::RATE.intersects(HealthFlags::RATE | HealthFlags::STALE));
    /// ```
    pub const fn intersects(self, other: Self) -> bool {
        self.0 & other.0 != 0
    }

    /// The faults in either set.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthFlags;
    /// let f = HealthFlags::RATE.union(HealthFlags::STUCK);
    /// assert_eq!(f, HealthFlags::RATE | HealthFlags::STUCK);
    /// ```
    pub const fn union(self, other: Self) -> Self {
        Self(self.0 | other.0)
    }

    /// Adds the faults in `other`.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthFlags;
    /// let mut f = HealthFlags::empty();
    /// f.insert(HealthFlags::STALE);
    /// assert_eq!(f, HealthFlags::STALE);
    /// ```
    pub fn insert(&mut self, other: Self) {
        self.0 |= other.0;
    }

    /// Removes the faults in `other`.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthFlags;
    /// let mut f = HealthFlags::RATE | HealthFlags::STALE;
    /// f.remove(HealthFlags::STALE);
    /// assert_eq!(f, HealthFlags::RATE);
    /// ```
    pub fn remove(&mut self, other: Self) {
        self.0 &= !other.0;
    }
}

impl BitOr for HealthFlags {
    type Output = Self;
    fn bitor(self, rhs: Self) -> Self {
        self.union(rhs)
    }
}

impl BitOrAssign for HealthFlags {
    fn bitor_assign(&mut self, rhs: Self) {
        self.insert(rhs);
    }
}

impl BitAnd for HealthFlags {
    type Output = Self;
    fn bitand(self, rhs: Self) -> Self {
        Self(self.0 & rhs.0)
    }
}

impl fmt::Display for HealthFlags {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.is_ok() {
            return f.write_str("ok");
        }
        let mut first = true;
        for (flag, name) in Self::NAMES {
            if self.contains(flag) {
                if !first {
                    f.write_str("|")?;
                }
                f.write_str(name)?;
                first = false;
            }
        }
        Ok(())
    }
}

/// Limits for one channel, in the channel's own unit (°C, W, ...).
///
/// Every check but the range can be switched off, and is off after
/// [`HealthConfig::new`]. A NaN limit never raises its fault.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct HealthConfig {
    /// Lowest plausible value; below it is [`HealthFlags::OUT_OF_RANGE`].
    pub min_value: f32,
    /// Highest plausible value; above it is [`HealthFlags::OUT_OF_RANGE`].
    pub max_value: f32,
    /// Largest plausible |Δvalue|/Δt, in units per second; faster is
    /// [`HealthFlags::RATE`]. `f32::INFINITY` switches it off.
    pub max_rate_per_s: f32,
    /// Changes of at most this much count as "no change" for the stuck check
    /// (and for the rate check between samples with the same time stamp).
    pub resolution: f32,
    /// [`HealthFlags::STUCK`] once this many consecutive samples stay within
    /// `resolution` of the first of them; 0 switches it off.
    pub stuck_samples: u16,
    /// [`HealthFlags::STALE`] when more than this many milliseconds pass
    /// without a finite sample; `u32::MAX` switches it off.
    pub stale_timeout_ms: u32,
}

impl HealthConfig {
    /// Range limits only: rate, stuck and stale checks off.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthConfig;
    /// let c = HealthConfig::new(0.0, 100.0);
    /// assert_eq!(c.stuck_samples, 0);
    /// ```
    pub const fn new(min_value: f32, max_value: f32) -> Self {
        Self {
            min_value,
            max_value,
            max_rate_per_s: f32::INFINITY,
            resolution: 0.0,
            stuck_samples: 0,
            stale_timeout_ms: u32::MAX,
        }
    }

    /// With a rate-of-change limit in units per second.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthConfig;
    /// assert_eq!(HealthConfig::new(0.0, 1.0).with_rate_limit_per_s(5.0).max_rate_per_s, 5.0);
    /// ```
    pub const fn with_rate_limit_per_s(mut self, max_rate_per_s: f32) -> Self {
        self.max_rate_per_s = max_rate_per_s;
        self
    }

    /// With a stuck check: `samples` consecutive samples within `resolution`.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthConfig;
    /// let c = HealthConfig::new(0.0, 1.0).with_stuck(0.001, 20);
    /// assert_eq!((c.resolution, c.stuck_samples), (0.001, 20));
    /// ```
    pub const fn with_stuck(mut self, resolution: f32, samples: u16) -> Self {
        self.resolution = resolution;
        self.stuck_samples = samples;
        self
    }

    /// With a stale check: no finite sample for more than `timeout_ms`.
    ///
    /// ```
    /// use heatbound::sensor::health::HealthConfig;
    /// assert_eq!(HealthConfig::new(0.0, 1.0).with_stale_timeout_ms(500).stale_timeout_ms, 500);
    /// ```
    pub const fn with_stale_timeout_ms(mut self, timeout_ms: u32) -> Self {
        self.stale_timeout_ms = timeout_ms;
        self
    }
}

/// The health state of one channel: the last finite sample and the length
/// of the current run of unchanged samples. 24 bytes, O(1) per update.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChannelHealth {
    config: HealthConfig,
    /// Time and value of the last finite sample.
    last: Option<(u32, f32)>,
    /// The first value of the current run of unchanged samples.
    anchor: f32,
    /// Samples in the current run, anchor included.
    unchanged: u16,
}

impl ChannelHealth {
    /// A channel that has seen no sample yet (and so is stale).
    ///
    /// ```
    /// use heatbound::sensor::health::{ChannelHealth, HealthConfig, HealthFlags};
    /// let ch = ChannelHealth::new(HealthConfig::new(0.0, 100.0));
    /// assert_eq!(ch.check_stale(0), HealthFlags::STALE);
    /// ```
    pub const fn new(config: HealthConfig) -> Self {
        Self {
            config,
            last: None,
            anchor: 0.0,
            unchanged: 0,
        }
    }

    /// The limits in force.
    ///
    /// ```
    /// use heatbound::sensor::health::{ChannelHealth, HealthConfig};
    /// let ch = ChannelHealth::new(HealthConfig::new(0.0, 100.0));
    /// assert_eq!(ch.config().max_value, 100.0);
    /// ```
    pub const fn config(&self) -> &HealthConfig {
        &self.config
    }

    /// Forgets every sample, as after a sensor change.
    ///
    /// ```
    /// use heatbound::sensor::health::{ChannelHealth, HealthConfig, HealthFlags};
    /// let mut ch = ChannelHealth::new(HealthConfig::new(0.0, 100.0));
    /// ch.update(0, 10.0);
    /// ch.reset();
    /// assert_eq!(ch.check_stale(0), HealthFlags::STALE);
    /// ```
    pub fn reset(&mut self) {
        *self = Self::new(self.config);
    }

    /// Checks the sample `value` taken at `t_ms` and returns its faults
    /// (never [`HealthFlags::STALE`]: a sample has just arrived).
    ///
    /// A non-finite value returns [`HealthFlags::NON_FINITE`] alone and
    /// leaves the state untouched: it neither refreshes the channel nor
    /// breaks a stuck run. A finite value is checked against the range, the
    /// rate since the last finite sample and the current stuck run.
    ///
    /// ```
    /// use heatbound::sensor::health::{ChannelHealth, HealthConfig, HealthFlags};
    /// let mut ch = ChannelHealth::new(HealthConfig::new(0.0, 100.0));
    /// assert_eq!(ch.update(0, f32::NAN), HealthFlags::NON_FINITE);
    /// assert_eq!(ch.update(10, 150.0), HealthFlags::OUT_OF_RANGE);
    /// assert!(ch.update(20, 50.0).is_ok());
    /// ```
    pub fn update(&mut self, t_ms: u32, value: f32) -> HealthFlags {
        if !value.is_finite() {
            return HealthFlags::NON_FINITE;
        }
        let c = &self.config;
        let mut flags = HealthFlags::empty();
        if value < c.min_value || value > c.max_value {
            flags |= HealthFlags::OUT_OF_RANGE;
        }
        match self.last {
            Some((last_t_ms, last_value)) => {
                let dv = libm::fabsf(value - last_value);
                let dt_ms = t_ms.wrapping_sub(last_t_ms);
                let too_fast = if dt_ms == 0 {
                    dv > c.resolution
                } else {
                    // dv / (dt_ms/1000) > max, rearranged to avoid dividing.
                    dv * 1000.0 > c.max_rate_per_s * dt_ms as f32
                };
                if too_fast {
                    flags |= HealthFlags::RATE;
                }
                if libm::fabsf(value - self.anchor) <= c.resolution {
                    self.unchanged = self.unchanged.saturating_add(1);
                } else {
                    self.anchor = value;
                    self.unchanged = 1;
                }
            }
            None => {
                self.anchor = value;
                self.unchanged = 1;
            }
        }
        if c.stuck_samples > 0 && self.unchanged >= c.stuck_samples {
            flags |= HealthFlags::STUCK;
        }
        self.last = Some((t_ms, value));
        flags
    }

    /// [`HealthFlags::STALE`] if no finite sample has arrived within the
    /// timeout before `t_ms` (or none at all yet), otherwise no fault.
    ///
    /// ```
    /// use heatbound::sensor::health::{ChannelHealth, HealthConfig, HealthFlags};
    /// let mut ch = ChannelHealth::new(HealthConfig::new(0.0, 100.0).with_stale_timeout_ms(1_000));
    /// ch.update(u32::MAX - 100, 20.0); // just before the u32 wrap
    /// assert!(ch.check_stale(800).is_ok()); // 901 ms later, across the wrap
    /// assert_eq!(ch.check_stale(1_000), HealthFlags::STALE);
    /// ```
    pub fn check_stale(&self, t_ms: u32) -> HealthFlags {
        match self.last {
            Some((last_t_ms, _))
                if t_ms.wrapping_sub(last_t_ms) <= self.config.stale_timeout_ms =>
            {
                HealthFlags::empty()
            }
            _ => HealthFlags::STALE,
        }
    }
}
