//! What the host asks of the controller ([`Command`]), and a command's body,
//! `(counter, Command)` in postcard's encoding, parsed by hand on the
//! controller.
//!
//! Where it sits: inside `wire::decode_command`, after
//! the CRC and before the MAC check. The derived serde visitors for a whole
//! [`RigConfig`] (some fifty fields, each with its own error paths) are
//! about 4 KB of a controller's flash; this reader is a few hundred bytes.
//! It accepts exactly what `postcard::take_from_bytes` accepts for these
//! types and gives the same values (checked against it in the tests):
//!
//! ```text
//! u32, enum variant   varint (LEB128, at most 5 bytes, the 5th ≤ 0x0F)
//! f64                 8 bytes, little-endian
//! bool                0 or 1
//! Option<T>           0 (None), or 1 then T
//! struct, array       the fields in order, no length
//! ```

use serde::{Deserialize, Serialize};

use super::error::Malformed;
use crate::alarm::{Alarms, Rule, RuleId, Severity};
use crate::config::RigConfig;
use crate::diagnosis::Losses;
use crate::monitor::{Health, Mode, Steady, Uncertainty};

/// What the host asks of the controller.
// No heap in core: a configuration travels by value.
#[allow(clippy::large_enum_variant)]
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Command {
    /// Send a Hello now. Changes nothing, so it is honoured without a key
    /// or a valid tag.
    HelloRequest,
    /// Acknowledge one rule's alarm, or (`None`) every active alarm.
    Acknowledge(Option<RuleId>),
    /// Start a new run at the next window boundary: the run totals start
    /// afresh and the run counter in the Hello goes up by one.
    NewRun,
    /// Replace the whole configuration at the next window boundary; a new
    /// run starts under it and the next Hello carries its digest.
    Configure(RigConfig),
}

impl Command {
    /// The command's name in logs and on the control socket.
    pub const fn name(&self) -> &'static str {
        match self {
            Command::HelloRequest => "hello",
            Command::Acknowledge(_) => "ack",
            Command::NewRun => "new_run",
            Command::Configure(_) => "configure",
        }
    }
}

/// The bytes still to read.
struct Reader<'a> {
    rest: &'a [u8],
}

impl Reader<'_> {
    fn byte(&mut self) -> Option<u8> {
        let (&b, rest) = self.rest.split_first()?;
        self.rest = rest;
        Some(b)
    }

    fn varint(&mut self) -> Option<u32> {
        let mut out = 0u32;
        for i in 0..5 {
            let b = self.byte()?;
            out |= u32::from(b & 0x7F) << (7 * i);
            if b & 0x80 == 0 {
                // The fifth byte carries the top 4 bits only.
                return (i < 4 || b <= 0x0F).then_some(out);
            }
        }
        None
    }

    /// An enum's variant index, below `count`.
    fn variant(&mut self, count: u32) -> Option<u32> {
        self.varint().filter(|&v| v < count)
    }

    fn f64(&mut self) -> Option<f64> {
        let (bytes, rest) = self.rest.split_first_chunk::<8>()?;
        self.rest = rest;
        Some(f64::from_le_bytes(*bytes))
    }

    /// `out.len()` f64 in a row.
    fn f64s(&mut self, out: &mut [f64]) -> Option<()> {
        for x in out {
            *x = self.f64()?;
        }
        Some(())
    }

    fn bool(&mut self) -> Option<bool> {
        match self.byte()? {
            0 => Some(false),
            1 => Some(true),
            _ => None,
        }
    }

    /// An option's tag: whether a value follows.
    fn some(&mut self) -> Option<bool> {
        self.bool()
    }

    fn severity(&mut self) -> Option<Severity> {
        Some(match self.variant(3)? {
            0 => Severity::Advisory,
            1 => Severity::Warning,
            _ => Severity::Trip,
        })
    }

    fn rule_id(&mut self) -> Option<RuleId> {
        let i = self.variant(RuleId::ALL.len() as u32)?;
        RuleId::ALL.get(usize::try_from(i).ok()?).copied()
    }

    fn rule(&mut self) -> Option<Rule> {
        let enabled = self.bool()?;
        let severity = self.severity()?;
        let mut f = [0.0; 3];
        self.f64s(&mut f)?;
        let [deadband, on_delay_s, off_delay_s] = f;
        Some(Rule {
            enabled,
            severity,
            deadband,
            on_delay_s,
            off_delay_s,
            latching: self.bool()?,
        })
    }

    fn config(&mut self) -> Option<RigConfig> {
        let mode = match self.variant(3)? {
            0 => Mode::Engine,
            1 => Mode::HeatPump,
            _ => Mode::Cooler,
        };
        let ambient_k = if self.some()? {
            Some(self.f64()?)
        } else {
            None
        };
        let window_samples = self.varint()?;
        // The f64 settings in blocks, in wire order.
        let mut f = [0.0; 14];
        self.f64s(&mut f)?;
        let [
            max_gap_s,
            coverage_factor,
            hot_k,
            hot2_k,
            cold_k,
            heat_in_rel,
            work_rel,
            heat_out_rel,
            duration_s,
            hot_band_k,
            cold_band_k,
            heat_in_band_rel,
            work_band_rel,
            heat_out_band_rel,
        ] = f;
        let stuck_samples = self.varint()?;
        let mut g = [0.0; 6];
        self.f64s(&mut g)?;
        let [
            stale_s,
            min_temperature_k,
            max_temperature_k,
            near_carnot_fraction,
            hot_max_k,
            horizon_s,
        ] = g;
        let mut rules = [self.rule()?; RuleId::COUNT];
        for slot in rules.iter_mut().skip(1) {
            *slot = self.rule()?;
        }
        let losses = if self.some()? {
            let mut l = [0.0; 2];
            self.f64s(&mut l)?;
            let [ua_w_per_k, u_ua_w_per_k] = l;
            Some(Losses {
                ua_w_per_k,
                u_ua_w_per_k,
            })
        } else {
            None
        };
        Some(RigConfig {
            mode,
            ambient_k,
            window_samples,
            max_gap_s,
            coverage_factor,
            uncertainty: Uncertainty {
                hot_k,
                hot2_k,
                cold_k,
                heat_in_rel,
                work_rel,
                heat_out_rel,
            },
            steady: Steady {
                duration_s,
                hot_band_k,
                cold_band_k,
                heat_in_band_rel,
                work_band_rel,
                heat_out_band_rel,
            },
            health: Health {
                stuck_samples,
                stale_s,
                min_temperature_k,
                max_temperature_k,
            },
            alarms: Alarms {
                near_carnot_fraction,
                hot_max_k,
                horizon_s,
                rules,
            },
            losses,
        })
    }

    fn command(&mut self) -> Option<Command> {
        Some(match self.variant(4)? {
            0 => Command::HelloRequest,
            1 => Command::Acknowledge(if self.some()? {
                Some(self.rule_id()?)
            } else {
                None
            }),
            2 => Command::NewRun,
            _ => Command::Configure(self.config()?),
        })
    }
}

/// Parses `body` as exactly one `(counter, Command)`.
pub(super) fn take_command(body: &[u8]) -> Result<(u32, Command), Malformed> {
    let mut r = Reader { rest: body };
    let parsed = r.varint().and_then(|counter| Some((counter, r.command()?)));
    match parsed {
        Some(c) if r.rest.is_empty() => Ok(c),
        Some(_) => Err(Malformed::TrailingBytes),
        None => Err(Malformed::Postcard),
    }
}
