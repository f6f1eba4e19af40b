//! Run totals from a log: windows that meet end to end, added up.
//!
//! A Summary carries its sliding window's integrals, not the run's, and the
//! windows of consecutive Summaries overlap. Integrals add over time, so the
//! run's are the sum over windows that tile it. Reading the log forward, a
//! window is kept when it begins where the last kept one ended; the
//! Summaries in between, whose windows overlap it, are passed over. Where no
//! window begins there (summaries lost, a window that is not a whole number
//! of summary periods), the next one that begins later is kept and the time
//! between is *not covered*, as is the time after the last kept window:
//! counted and reported, never filled in. Nothing is held but the sums, so
//! memory does not grow with the log.
//!
//! The wire does not carry the sensitivities behind the uncertainties
//! (`∫q_in/T_hot² dt` and its kin, [`Integrals`]). Each window's are taken
//! at its own mean temperatures (`∫q_in/T_hot² dt ≈ S_in²/Q_in`), exact for
//! a temperature constant within the window and off by the square of its
//! relative variation within one window otherwise; summed over the windows,
//! the run's temperature changes are followed.

use heatbound::monitor::Integrals;
use heatbound::wire::Summary;

/// One Summary as the report keeps it.
#[derive(Clone, Copy, Debug)]
pub struct Rec {
    /// The Summary.
    pub summary: Summary,
    /// Host receive time, Unix ms.
    pub host_ms: i64,
    /// The device clock's end of the window on an axis that does not wrap,
    /// ms, within its segment.
    pub end_ms: i64,
    /// The segment: a stretch of the record with one controller boot and
    /// run (a restart or a new run starts the next).
    pub segment: u32,
}

impl Rec {
    /// Where the window begins on the segment's axis, ms.
    pub fn start_ms(&self) -> i64 {
        self.end_ms - window_ms(&self.summary)
    }
}

/// The window's integrated time, ms (0 when not a number).
fn window_ms(s: &Summary) -> i64 {
    let ms = f64::from(s.duration_s) * 1000.0;
    if ms.is_finite() && ms > 0.0 {
        // At most a few years of ms: well inside i64.
        #[allow(clippy::cast_possible_truncation)]
        let ms = ms.round().min(1e15) as i64;
        ms
    } else {
        0
    }
}

/// Windows added up as they are read: the sums of those that meet end to
/// end, and what they cover.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Tiler {
    /// How far apart an end and a start may be and still meet, ms (half a
    /// sample period).
    tolerance_ms: i64,
    /// The sum of the kept windows' integrals.
    sum: Integrals<f64>,
    /// The chain: its segment, where its first window began, where its last
    /// kept window ended and where the latest window read ended, ms.
    chain: Option<(u32, i64, i64, i64)>,
    /// Windows kept.
    pub windows: u64,
    /// Integrated time of the windows kept, s.
    pub covered_s: f64,
    /// Device time the record spans, first window's start to last
    /// window's end, summed over segments, s.
    pub span_s: f64,
    /// Device time between and after the kept windows that none covers, s.
    pub uncovered_s: f64,
    /// How many times a kept window did not meet the one before.
    pub breaks: u64,
}

impl Tiler {
    /// A tiler whose windows meet within `tolerance_ms`.
    pub fn new(tolerance_ms: i64) -> Tiler {
        Tiler {
            tolerance_ms: tolerance_ms.max(0),
            ..Tiler::default()
        }
    }

    /// Takes the next Summary, in the order of the log.
    pub fn push(&mut self, r: &Rec) {
        let start = r.start_ms();
        match self.chain {
            Some((segment, first, last_kept, _)) if segment == r.segment => {
                self.chain = Some((segment, first, last_kept, r.end_ms));
                if start < last_kept - self.tolerance_ms {
                    // It overlaps the last kept window.
                    return;
                }
                if start > last_kept + self.tolerance_ms {
                    self.uncovered_s += (start - last_kept) as f64 / 1000.0;
                    self.breaks += 1;
                }
                self.chain = Some((segment, first, r.end_ms, r.end_ms));
            }
            _ => {
                self.close();
                self.chain = Some((r.segment, start, r.end_ms, r.end_ms));
            }
        }
        self.keep(&r.summary);
    }

    /// Ends the chain of a segment: its span, and the time after its last
    /// kept window.
    fn close(&mut self) {
        if let Some((_, first, last_kept, last_seen)) = self.chain.take() {
            self.span_s += (last_seen - first) as f64 / 1000.0;
            self.uncovered_s += (last_seen - last_kept).max(0) as f64 / 1000.0;
        }
    }

    fn keep(&mut self, s: &Summary) {
        let w = window_integrals(s);
        let sum = &mut self.sum;
        sum.duration_s += w.duration_s;
        sum.heat_in_j += w.heat_in_j;
        sum.work_j += w.work_j;
        sum.heat_out_j += w.heat_out_j;
        sum.entropy_in_j_per_k += w.entropy_in_j_per_k;
        sum.entropy_out_j_per_k += w.entropy_out_j_per_k;
        sum.hot_sensitivity += w.hot_sensitivity;
        sum.cold_sensitivity += w.cold_sensitivity;
        sum.cold_heat_in_j_per_k += w.cold_heat_in_j_per_k;
        sum.cold_work_j_per_k += w.cold_work_j_per_k;
        sum.cold_temperature_integral_k_s += w.cold_temperature_integral_k_s;
        sum.hot_temperature_integral_k_s += w.hot_temperature_integral_k_s;
        sum.hot_pair_integral_k_s += w.hot_pair_integral_k_s;
        sum.heat_out_measured |= w.heat_out_measured;
        sum.hot2_measured |= w.hot2_measured;
        self.windows += 1;
        self.covered_s += w.duration_s;
    }

    /// The sum of the kept windows' integrals, in f64, with each window's
    /// sensitivities taken at its own mean temperatures (see the module's
    /// docs); the cold-side time integral is rebuilt from each window's T0
    /// as [`Summary::integrals`] does, so a default T0 is the time mean of
    /// theirs. Closes the last segment's chain.
    pub fn finish(&mut self) -> Integrals<f64> {
        self.close();
        self.sum
    }
}

/// One Summary's window in f64 with its sensitivities at its mean
/// temperatures: `∫q_in/T_hot² ≈ S_in/T_h`, `∫q_out/T_cold² ≈ S_out/T_c`,
/// and, with heat out inferred, `∫q_in/T_cold ≈ Q_in/T_c`,
/// `∫w/T_cold ≈ W/T_c`. Non-finite values count as zero.
pub fn window_integrals(s: &Summary) -> Integrals<f64> {
    let f = |x: f32| {
        let x = f64::from(x);
        if x.is_finite() { x } else { 0.0 }
    };
    let ratio = |a: f64, b: f64| {
        let r = a / b;
        if b > 0.0 && r.is_finite() { r } else { 0.0 }
    };
    let (qi, w, qo) = (f(s.heat_in_j), f(s.work_j), f(s.heat_out_j));
    let (si, so) = (f(s.entropy_in_j_per_k), f(s.entropy_out_j_per_k));
    let dur = f(s.duration_s);
    let measured = s.status.heat_out_measured;
    // 1/T_h = S_in/Q_in, 1/T_c = S_out/Q_out.
    let inv_th = ratio(si, qi);
    let inv_tc = ratio(so, qo);
    let t0 = s.ambient_k.map(f).filter(|t| *t > 0.0);
    Integrals {
        duration_s: dur,
        heat_in_j: qi,
        work_j: w,
        heat_out_j: qo,
        heat_out_measured: measured,
        entropy_in_j_per_k: si,
        entropy_out_j_per_k: so,
        hot_sensitivity: si * inv_th,
        cold_sensitivity: so * inv_tc,
        cold_heat_in_j_per_k: if measured { 0.0 } else { qi * inv_tc },
        cold_work_j_per_k: if measured { 0.0 } else { w * inv_tc },
        cold_temperature_integral_k_s: match (measured, t0) {
            (true, Some(t0)) => t0 * dur,
            _ => 0.0,
        },
        hot_temperature_integral_k_s: f(s.hot_temperature_integral_k_s),
        hot2_measured: s.status.hot2_measured,
        hot_pair_integral_k_s: f(s.hot_pair_integral_k_s),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rec(end_s: f64, duration_s: f32, segment: u32) -> Rec {
        Rec {
            summary: Summary {
                duration_s,
                heat_in_j: 1000.0 * duration_s,
                ..Summary::default()
            },
            host_ms: 0,
            end_ms: (end_s * 1000.0) as i64,
            segment,
        }
    }

    fn tiled(recs: &[Rec]) -> (Tiler, Integrals<f64>) {
        let mut t = Tiler::new(50);
        for r in recs {
            t.push(r);
        }
        let sum = t.finish();
        (t, sum)
    }

    #[test]
    fn windows_that_meet_tile_without_gaps() {
        // Summaries every second, windows of 3 s once full: 1, 2, 3, 3, 3...
        let recs: Vec<Rec> = (1..=9)
            .map(|t| rec(f64::from(t), t.min(3) as f32, 0))
            .collect();
        let (t, sum) = tiled(&recs);
        // 1 s (from 0), then 4 s (from 1), 7 s (from 4): the rest overlap;
        // 9 s's window begins at 6, before 7: the last 2 s are not covered.
        assert_eq!(t.windows, 3);
        assert_eq!(
            (t.covered_s, t.span_s, t.uncovered_s, t.breaks),
            (7.0, 9.0, 2.0, 0)
        );
        assert_eq!(sum.heat_in_j, 7000.0);
        // Summaries every 3 s: end to end, all of it.
        let recs: Vec<Rec> = (1..=3).map(|k| rec(f64::from(3 * k), 3.0, 0)).collect();
        let (t, _) = tiled(&recs);
        assert_eq!((t.windows, t.covered_s, t.uncovered_s), (3, 9.0, 0.0));
    }

    #[test]
    fn windows_that_do_not_meet_leave_time_uncovered() {
        // Windows of 2.5 s (once full), a summary a second: 1 (0–1), then
        // 4 (1.5–4), 7 (4.5–7), 10 (7.5–10): half a second missed each time.
        let recs: Vec<Rec> = (1..=10)
            .map(|t| rec(f64::from(t), (t as f32).min(2.5), 0))
            .collect();
        let (t, _) = tiled(&recs);
        assert_eq!((t.windows, t.breaks), (4, 3));
        assert!((t.uncovered_s - 1.5).abs() < 1e-9, "{t:?}");
        assert!(
            (t.covered_s + t.uncovered_s - t.span_s).abs() < 1e-9,
            "{t:?}"
        );
    }

    #[test]
    fn segments_tile_apart() {
        let mut recs: Vec<Rec> = (1..=4).map(|t| rec(f64::from(t), 1.0, 0)).collect();
        recs.extend((1..=3).map(|t| rec(f64::from(t), 1.0, 1)));
        let (t, sum) = tiled(&recs);
        assert_eq!(
            (t.windows, t.covered_s, t.span_s, t.uncovered_s),
            (7, 7.0, 7.0, 0.0)
        );
        assert_eq!(sum.duration_s, 7.0);
        // Nothing to tile: nothing, and no NaN.
        let (t, sum) = tiled(&[]);
        assert_eq!((t.windows, t.span_s, sum.heat_in_j), (0, 0.0, 0.0));
    }

    #[test]
    fn constant_temperatures_give_exact_sensitivities() {
        // 1000 J in at 600 K, 850 J out at 300 K, inferred: the exact
        // integrals of a window with constant temperatures (DESIGN §4).
        let s = Summary {
            duration_s: 1.0,
            heat_in_j: 1000.0,
            work_j: 150.0,
            heat_out_j: 850.0,
            entropy_in_j_per_k: 1000.0 / 600.0,
            entropy_out_j_per_k: 850.0 / 300.0,
            ..Summary::default()
        };
        let i = window_integrals(&s);
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-6 * b.abs();
        assert!(close(i.hot_sensitivity, 1000.0 / 360_000.0));
        assert!(close(i.cold_sensitivity, 850.0 / 90_000.0));
        assert!(close(i.cold_heat_in_j_per_k, 1000.0 / 300.0));
        assert!(close(i.cold_work_j_per_k, 150.0 / 300.0));
        // Nothing in: no sensitivity, and no NaN.
        let z = window_integrals(&Summary::default());
        assert_eq!((z.hot_sensitivity, z.cold_sensitivity), (0.0, 0.0));
    }
}
