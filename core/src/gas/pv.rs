//! Measured pressure–volume loops: indicated work, indicated power and the
//! polytropic exponent of a segment.
//!
//! Inputs are parallel slices of absolute pressure (Pa) and volume (m³), as
//! an indicator (pressure transducer plus crank-angle encoder) records them.

use super::state::positive_finite;

/// Indicated work of one closed p-V loop, `∮p dV` (J), by the trapezoid
/// rule over the samples, closing the loop from the last sample back to the
/// first.
///
/// Positive for a loop traversed clockwise in the p-V plane (an engine),
/// negative for a heat pump or compressor. The pressure may be gauge rather
/// than absolute: a constant offset integrates to zero around a loop.
///
/// ```
/// use heatbound::gas::{PvError, indicated_work_j};
/// // A rectangle: 1 bar wide 1 litre at 2 bar, back at 1 bar → 100 J.
/// let p = [2e5, 2e5, 1e5, 1e5];
/// let v = [1e-3, 2e-3, 2e-3, 1e-3];
/// assert!((indicated_work_j(&p, &v)? - 100.0).abs() < 1e-12);
/// assert_eq!(indicated_work_j(&p, &v[..3]), Err(PvError::LengthMismatch { pressures: 4, volumes: 3 }));
/// # Ok::<(), PvError>(())
/// ```
pub fn indicated_work_j(p_pa: &[f64], v_m3: &[f64]) -> Result<f64, PvError> {
    check_lengths(p_pa, v_m3, 3)?;
    if let Some(index) = p_pa
        .iter()
        .zip(v_m3)
        .position(|(p, v)| !(p.is_finite() && v.is_finite()))
    {
        return Err(PvError::NonFinite { index });
    }
    let next = p_pa.iter().zip(v_m3).cycle().skip(1);
    let work: f64 = p_pa
        .iter()
        .zip(v_m3)
        .zip(next)
        .map(|((p0, v0), (p1, v1))| 0.5 * (p0 + p1) * (v1 - v0))
        .sum();
    if work.is_finite() {
        Ok(work)
    } else {
        Err(PvError::OutOfRange)
    }
}

/// Indicated power (W) of `work_per_cycle_j` at `speed_rpm`, one cycle per
/// revolution: `W·rpm/60`.
///
/// That holds for Stirling and two-stroke engines; a four-stroke engine
/// completes one cycle per two revolutions, so pass half its speed.
///
/// ```
/// use heatbound::gas::{PvError, indicated_power_w};
/// assert_eq!(indicated_power_w(2.0, 600.0)?, 20.0);
/// assert_eq!(indicated_power_w(2.0, -1.0), Err(PvError::InvalidSpeed));
/// # Ok::<(), PvError>(())
/// ```
pub fn indicated_power_w(work_per_cycle_j: f64, speed_rpm: f64) -> Result<f64, PvError> {
    if !(speed_rpm.is_finite() && speed_rpm >= 0.0) {
        return Err(PvError::InvalidSpeed);
    }
    if !work_per_cycle_j.is_finite() {
        return Err(PvError::NonFinite { index: 0 });
    }
    let power = work_per_cycle_j * speed_rpm / 60.0;
    if power.is_finite() {
        Ok(power)
    } else {
        Err(PvError::OutOfRange)
    }
}

/// Least-squares polytropic exponent `k` of a compression or expansion
/// segment, from the slope of `ln p` against `ln V` (`p V^k = C` gives
/// `ln p = ln C − k ln V`, so `k = −slope`).
///
/// ```
/// use heatbound::gas::{PvError, polytropic_exponent};
/// let v: Vec<f64> = (1..=10).map(|i| 1e-4 * i as f64).collect();
/// let p: Vec<f64> = v.iter().map(|v| 1e5 * (1e-3 / v).powf(1.32)).collect();
/// assert!((polytropic_exponent(&p, &v)? - 1.32).abs() < 1e-9);
/// assert_eq!(polytropic_exponent(&p[..1], &v[..1]), Err(PvError::TooFewPoints { needed: 2, got: 1 }));
/// # Ok::<(), PvError>(())
/// ```
pub fn polytropic_exponent(p_pa: &[f64], v_m3: &[f64]) -> Result<f64, PvError> {
    check_lengths(p_pa, v_m3, 2)?;
    if let Some(index) = p_pa
        .iter()
        .zip(v_m3)
        .position(|(p, v)| !(positive_finite(*p) && positive_finite(*v)))
    {
        return Err(PvError::NonPositive { index });
    }
    let n = p_pa.len() as f64;
    let points = || {
        p_pa.iter()
            .zip(v_m3)
            .map(|(p, v)| (libm::log(*v), libm::log(*p)))
    };
    let (sx, sy) = points().fold((0.0, 0.0), |(sx, sy), (x, y)| (sx + x, sy + y));
    let (mx, my) = (sx / n, sy / n);
    // Centred sums keep the fit well conditioned for tiny volume spans.
    let (sxx, sxy) = points().fold((0.0, 0.0), |(sxx, sxy), (x, y)| {
        let dx = x - mx;
        (sxx + dx * dx, sxy + dx * (y - my))
    });
    let (lo, hi) = points().fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), (x, _)| {
        (lo.min(x), hi.max(x))
    });
    // A spread in ln V below ~1e-12 is rounding, not a volume change.
    if !(hi - lo > 1e-12 && sxx > 0.0) {
        return Err(PvError::NoVolumeSpread);
    }
    let k = -sxy / sxx;
    if k.is_finite() {
        Ok(k)
    } else {
        Err(PvError::OutOfRange)
    }
}

fn check_lengths(p_pa: &[f64], v_m3: &[f64], needed: usize) -> Result<(), PvError> {
    if p_pa.len() != v_m3.len() {
        return Err(PvError::LengthMismatch {
            pressures: p_pa.len(),
            volumes: v_m3.len(),
        });
    }
    if p_pa.len() < needed {
        return Err(PvError::TooFewPoints {
            needed,
            got: p_pa.len(),
        });
    }
    Ok(())
}

/// Why a p-V computation failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum PvError {
    /// The pressure and volume slices differ in length.
    LengthMismatch {
        /// Number of pressures.
        pressures: usize,
        /// Number of volumes.
        volumes: usize,
    },
    /// Too few samples: a loop needs 3, a fit needs 2.
    TooFewPoints {
        /// The least number of samples accepted.
        needed: usize,
        /// The number given.
        got: usize,
    },
    /// A sample is NaN or infinite.
    NonFinite {
        /// Index of the first such sample.
        index: usize,
    },
    /// A sample's pressure or volume is not positive (a fit takes logs).
    NonPositive {
        /// Index of the first such sample.
        index: usize,
    },
    /// All volumes are the same, so there is no slope to fit.
    NoVolumeSpread,
    /// The speed is negative or not finite.
    InvalidSpeed,
    /// The result overflows `f64`.
    OutOfRange,
}

impl core::fmt::Display for PvError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Self::LengthMismatch { pressures, volumes } => {
                write!(f, "{pressures} pressures but {volumes} volumes")
            }
            Self::TooFewPoints { needed, got } => {
                write!(f, "{got} samples, at least {needed} needed")
            }
            Self::NonFinite { index } => write!(f, "sample {index} is not finite"),
            Self::NonPositive { index } => {
                write!(f, "sample {index} has a non-positive pressure or volume")
            }
            Self::NoVolumeSpread => f.write_str("all volumes are equal: no slope to fit"),
            Self::InvalidSpeed => f.write_str("speed must be finite and non-negative"),
            Self::OutOfRange => f.write_str("the result is out of range (overflow)"),
        }
    }
}

impl core::error::Error for PvError {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn loop_errors() {
        assert_eq!(
            indicated_work_j(&[1.0, 2.0], &[1.0, 2.0]),
            Err(PvError::TooFewPoints { needed: 3, got: 2 })
        );
        assert_eq!(
            indicated_work_j(&[1.0, f64::NAN, 1.0], &[1.0, 2.0, 3.0]),
            Err(PvError::NonFinite { index: 1 })
        );
        assert_eq!(
            indicated_work_j(&[1e308, 1e308, -1e308], &[-1e308, 1e308, 0.0]),
            Err(PvError::OutOfRange)
        );
    }

    #[test]
    fn loop_direction_sets_sign() {
        let p = [2e5, 2e5, 1e5, 1e5];
        let v = [1e-3, 2e-3, 2e-3, 1e-3];
        let cw = indicated_work_j(&p, &v).unwrap();
        let mut pr = p;
        let mut vr = v;
        pr.reverse();
        vr.reverse();
        assert_eq!(indicated_work_j(&pr, &vr).unwrap(), -cw);
    }

    #[test]
    fn fit_errors() {
        assert_eq!(
            polytropic_exponent(&[1.0, 2.0], &[1.0]),
            Err(PvError::LengthMismatch {
                pressures: 2,
                volumes: 1
            })
        );
        assert_eq!(
            polytropic_exponent(&[1.0, 2.0], &[1.0, 1.0]),
            Err(PvError::NoVolumeSpread)
        );
        assert_eq!(
            polytropic_exponent(&[1.0, 0.0], &[1.0, 2.0]),
            Err(PvError::NonPositive { index: 1 })
        );
        assert_eq!(
            polytropic_exponent(&[1.0, 2.0], &[1.0, f64::INFINITY]),
            Err(PvError::NonPositive { index: 1 })
        );
        assert_eq!(
            polytropic_exponent(&[], &[]),
            Err(PvError::TooFewPoints { needed: 2, got: 0 })
        );
        let k = polytropic_exponent(&[2.0, 1.0], &[1.0, 2.0]).unwrap();
        assert!((k - 1.0).abs() < 1e-15);
    }

    #[test]
    fn power_errors() {
        assert_eq!(indicated_power_w(1.0, f64::NAN), Err(PvError::InvalidSpeed));
        assert_eq!(
            indicated_power_w(f64::NAN, 1.0),
            Err(PvError::NonFinite { index: 0 })
        );
        assert_eq!(indicated_power_w(f64::MAX, 1e300), Err(PvError::OutOfRange));
        assert_eq!(indicated_power_w(-3.0, 1200.0), Ok(-60.0));
    }
}
