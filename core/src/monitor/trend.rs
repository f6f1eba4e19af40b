//! Where the rig is heading: straight lines fitted to the Carnot margin
//! and the hot-side temperature over the recent windows, from which the
//! `limit_ahead` rule projects when a limit would be crossed.
//!
//! One point per window (when the window's sums are rebuilt, so once per
//! `window_samples` samples), at least `MIN_SPACING_MS` apart: the
//! window's margin and the latest hot-side temperature. The fit is ordinary least squares over the last
//! [`TREND_POINTS`] points, with the standard error of its slope from the
//! scatter about the line (n − 2 degrees of freedom). Nothing here runs per
//! sample but the test whether a point is due.

use crate::num::{Real, above};

/// Points the fit spans: with a 60-sample window at 10 Hz, the last
/// 96 seconds.
pub const TREND_POINTS: usize = 16;

/// The fewest points a line is fitted to.
const MIN_POINTS: usize = 4;

/// The least spacing of two points, ms: a short window does not crowd the
/// fit into a few seconds of history (nor fit it every few samples).
pub const MIN_SPACING_MS: u32 = 5_000;

/// A straight line fitted to recent windows.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Line<R> {
    /// The line's value at the latest point.
    pub value: R,
    /// Its slope, per second.
    pub slope_per_s: R,
    /// The standard error of the slope, per second.
    pub u_slope_per_s: R,
}

impl<R: Real> Line<R> {
    /// Seconds from the latest point until the line reaches `limit`, when
    /// it heads there (`rising`: upward; else downward) with a slope beyond
    /// `k` standard errors; 0 when it is past the limit already and still
    /// heading on. `None` when no crossing is projected: no significant
    /// trend toward the limit (a reading that only sits near it is no
    /// trend).
    ///
    /// ```
    /// use heatbound::monitor::Line;
    /// let warming = Line { value: 650.0_f64, slope_per_s: 0.5, u_slope_per_s: 0.01 };
    /// assert_eq!(warming.time_to(700.0, true, 2.0), Some(100.0));
    /// assert_eq!(warming.time_to(700.0, false, 2.0), None);
    /// let noisy = Line { u_slope_per_s: 0.3, ..warming };
    /// assert_eq!(noisy.time_to(700.0, true, 2.0), None); // not a trend
    /// ```
    pub fn time_to(&self, limit: R, rising: bool, k: R) -> Option<R> {
        let (gap, speed) = if rising {
            (limit - self.value, self.slope_per_s)
        } else {
            (self.value - limit, -self.slope_per_s)
        };
        if !above(speed, R::ZERO) || !above(speed, k * self.u_slope_per_s) {
            return None;
        }
        if !above(gap, R::ZERO) {
            return Some(R::ZERO);
        }
        let t = gap / speed;
        t.is_finite().then_some(t)
    }
}

/// The lines of the Carnot margin and of the hot-side temperature, when
/// enough windows have been seen.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Trends<R> {
    /// `η_C − η` (or `COP_C − COP`), per second.
    pub carnot_margin: Option<Line<R>>,
    /// `T_hot`, kelvin per second.
    pub t_hot_k: Option<Line<R>>,
}

/// The recent points and their fitted lines. The monitor keeps one, a
/// point per window; a host can keep one over received summaries.
#[derive(Clone, Debug)]
pub struct TrendTracker<R> {
    /// Point times, ms (sample clock), margins and hot temperatures; a
    /// missing figure is NaN.
    t_ms: [u32; TREND_POINTS],
    margin: [R; TREND_POINTS],
    hot: [R; TREND_POINTS],
    len: usize,
    head: usize,
    lines: Trends<R>,
}

impl<R: Real> Default for TrendTracker<R> {
    fn default() -> Self {
        Self::new()
    }
}

impl<R: Real> TrendTracker<R> {
    /// No points yet.
    pub fn new() -> Self {
        Self {
            t_ms: [0; TREND_POINTS],
            margin: [R::ZERO; TREND_POINTS],
            hot: [R::ZERO; TREND_POINTS],
            len: 0,
            head: 0,
            lines: Trends::default(),
        }
    }

    /// Forgets every point: the run restarted after a gap.
    pub fn clear(&mut self) {
        self.len = 0;
        self.head = 0;
        self.lines = Trends::default();
    }

    /// Whether a point at `t_ms` is due: the first, or `MIN_SPACING_MS`
    /// after the latest.
    pub fn due(&self, t_ms: u32) -> bool {
        self.len == 0
            || t_ms.wrapping_sub(self.t_ms[(self.head + self.len - 1) % TREND_POINTS])
                >= MIN_SPACING_MS
    }

    /// Adds the point of a window ending at `t_ms` and fits the lines.
    pub fn push(&mut self, t_ms: u32, margin: Option<R>, t_hot_k: Option<R>) {
        let nan = R::from_f64(f64::NAN);
        let i = (self.head + self.len) % TREND_POINTS;
        self.t_ms[i] = t_ms;
        self.margin[i] = margin.unwrap_or(nan);
        self.hot[i] = t_hot_k.unwrap_or(nan);
        if self.len < TREND_POINTS {
            self.len += 1;
        } else {
            self.head = (self.head + 1) % TREND_POINTS;
        }
        self.lines = Trends {
            carnot_margin: self.fit(&self.margin),
            t_hot_k: self.fit(&self.hot),
        };
    }

    /// The lines as of the latest point.
    pub fn lines(&self) -> Trends<R> {
        self.lines
    }

    /// Least squares over the finite values of `y`, time measured back
    /// from the latest point (so the intercept is the value now), in one
    /// pass: the sums are taken about the latest point's time and the
    /// first finite value, which keeps them small in `f32`.
    fn fit(&self, y: &[R; TREND_POINTS]) -> Option<Line<R>> {
        let last = self.t_ms[(self.head + self.len + TREND_POINTS - 1) % TREND_POINTS];
        let zero = R::ZERO;
        let (mut n, mut st, mut sy, mut stt, mut sty, mut syy) =
            (zero, zero, zero, zero, zero, zero);
        let mut origin = None;
        let mut count = 0;
        for k in 0..self.len {
            let i = (self.head + k) % TREND_POINTS;
            let v = y[i];
            if !v.is_finite() {
                continue;
            }
            let y0 = *origin.get_or_insert(v);
            // Seconds before the latest point, negative; the clock wraps.
            let t = zero - R::from_ms(u64::from(last.wrapping_sub(self.t_ms[i])));
            let d = v - y0;
            n = n + R::ONE;
            st = st + t;
            sy = sy + d;
            stt = stt + t * t;
            sty = sty + t * d;
            syy = syy + d * d;
            count += 1;
        }
        let y0 = origin?;
        if count < MIN_POINTS {
            return None;
        }
        let s_tt = stt - st * st / n;
        let s_ty = sty - st * sy / n;
        let s_yy = syy - sy * sy / n;
        if !above(s_tt, zero) {
            return None;
        }
        let slope = s_ty / s_tt;
        let value = y0 + (sy - slope * st) / n;
        let sse = s_yy - slope * s_ty;
        let sse = if sse > zero { sse } else { zero };
        let u_slope = (sse / (n - R::ONE - R::ONE) / s_tt).sqrt();
        let line = Line {
            value,
            slope_per_s: slope,
            u_slope_per_s: u_slope,
        };
        (value.is_finite() && slope.is_finite() && u_slope.is_finite()).then_some(line)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_straight_line_is_recovered() {
        let mut t = TrendTracker::<f64>::new();
        // 600 K rising 0.5 K/s, a point every 6 s; 20 points (the ring wraps).
        for i in 0..20u32 {
            let s = f64::from(i) * 6.0;
            t.push(i * 6000, Some(0.3 - 0.001 * s), Some(600.0 + 0.5 * s));
        }
        let l = t.lines().t_hot_k.unwrap();
        assert!((l.slope_per_s - 0.5).abs() < 1e-9, "{l:?}");
        assert!((l.value - (600.0 + 0.5 * 114.0)).abs() < 1e-6, "{l:?}");
        assert!(l.u_slope_per_s < 1e-9);
        let m = t.lines().carnot_margin.unwrap();
        assert!((m.slope_per_s + 0.001).abs() < 1e-12);
        // 0.186 left at 0.001 per second: 186 s to the bound.
        assert!((m.time_to(0.0, false, 2.0).unwrap() - 186.0).abs() < 1e-6);
    }

    #[test]
    fn too_few_or_missing_points_give_no_line() {
        let mut t = TrendTracker::<f32>::new();
        for i in 0..3u32 {
            t.push(i * 1000, None, Some(500.0));
        }
        assert_eq!(t.lines().t_hot_k, None);
        t.push(3000, None, Some(500.0));
        assert!(t.lines().t_hot_k.is_some());
        assert_eq!(t.lines().carnot_margin, None);
        t.clear();
        assert_eq!(t.lines(), Trends::default());
    }
}
