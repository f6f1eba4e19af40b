//! The floating-point type the monitor computes in.
//!
//! The monitor is generic over [`Real`] so one implementation serves both
//! ends of the data flow:
//! - `f32` on the controller: a Cortex-M4F has a single-precision FPU, while
//!   `f64` there is software-emulated at tens of instructions per operation.
//!   Sensor readings carry far fewer than 7 significant digits, the window
//!   sums are refreshed every window so their rounding cannot build up, and
//!   the run totals are folded into `f64` once per window ([`WindowSums`]),
//!   so `f32` loses nothing a bench engineer could see.
//! - `f64` on the host, where the offline replay (`heatbound analyze`) should
//!   agree with an independent double-precision recomputation of the same
//!   definitions to many more digits.

use core::ops::{Add, Div, Mul, Neg, Sub};

/// A floating-point type the monitor can compute in: `f32` or `f64`.
pub trait Real:
    Copy
    + PartialOrd
    + Default
    + core::fmt::Debug
    + core::fmt::Display
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
    + serde::Serialize
    + 'static
{
    /// Zero.
    const ZERO: Self;
    /// One.
    const ONE: Self;
    /// The largest finite value.
    const MAX: Self;
    /// The machine epsilon.
    const EPSILON: Self;
    /// Converts from `f64` (rounding for `f32`).
    fn from_f64(x: f64) -> Self;
    /// Converts from `f32` (exact).
    fn from_f32(x: f32) -> Self;
    /// The one of two precomputed copies of a setting that suits this type:
    /// `single` for `f32`, `double` for `f64`. Settings are kept in both so
    /// the per-sample path never converts an `f64` (a software routine on a
    /// Cortex-M4F).
    fn pick(single: f32, double: f64) -> Self;
    /// Milliseconds to seconds.
    fn from_ms(ms: u64) -> Self;
    /// Half of `ms` milliseconds, in seconds: `from_ms(ms) / 2` to the
    /// bit (the constant is halved exactly), in one multiplication.
    fn half_ms(ms: u32) -> Self;
    /// Converts to `f64` (exact).
    fn to_f64(self) -> f64;
    /// Converts to `f32` (rounding for `f64`).
    fn to_f32(self) -> f32;
    /// Square root (libm).
    fn sqrt(self) -> Self;
    /// Absolute value.
    fn abs(self) -> Self;
    /// Whether the value is neither NaN nor infinite.
    fn is_finite(self) -> bool;
    /// `self > 0`, false for NaN.
    fn is_positive(self) -> bool;
    /// `self < other` for values that are not NaN, where −0 may come
    /// before +0.
    fn less_not_nan(self, other: Self) -> bool;
    /// `lo ≤ self ≤ hi`, false for NaN; `lo` and `hi` are not NaN.
    fn within(self, lo: Self, hi: Self) -> bool;
}

/// Whether floating point is done in software (an Armv6-M core, or any
/// Arm core built for the soft-float ABI): a comparison is then a library
/// call, and integer comparisons of the bits tell the same for less
/// (`Real::is_positive`, `Real::less_not_nan`, `Real::within`). The FPU
/// cores and the host keep the float comparison.
const NO_FPU: bool = cfg!(all(target_arch = "arm", not(target_abi = "eabihf")));

impl Real for f32 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const MAX: Self = f32::MAX;
    const EPSILON: Self = f32::EPSILON;
    #[inline]
    fn from_f64(x: f64) -> Self {
        x as f32
    }
    #[inline]
    fn from_f32(x: f32) -> Self {
        x
    }
    #[inline]
    fn pick(single: f32, _double: f64) -> Self {
        single
    }
    #[inline]
    fn from_ms(ms: u64) -> Self {
        // u32 to f32 is one instruction on an FPU; u64 is a library call.
        match u32::try_from(ms) {
            Ok(ms) => ms as f32 * 1e-3,
            Err(_) => (ms as f64 * 1e-3) as f32,
        }
    }
    #[inline]
    fn half_ms(ms: u32) -> Self {
        ms as f32 * 5e-4
    }
    #[inline]
    fn to_f64(self) -> f64 {
        self as f64
    }
    #[inline]
    fn to_f32(self) -> f32 {
        self
    }
    #[inline]
    fn sqrt(self) -> Self {
        libm::sqrtf(self)
    }
    #[inline]
    fn abs(self) -> Self {
        libm::fabsf(self)
    }
    #[inline]
    fn is_finite(self) -> bool {
        f32::is_finite(self)
    }
    #[inline]
    fn is_positive(self) -> bool {
        if NO_FPU {
            positive_by_bits(self)
        } else {
            self > 0.0
        }
    }
    #[inline]
    fn less_not_nan(self, other: Self) -> bool {
        if NO_FPU {
            order_key(self) < order_key(other)
        } else {
            self < other
        }
    }
    #[inline]
    fn within(self, lo: Self, hi: Self) -> bool {
        if NO_FPU {
            within_by_keys(self, lo, hi)
        } else {
            (self >= lo) & (self <= hi)
        }
    }
}

/// `x > 0`, false for NaN, from the bits: above +0 and at most +∞.
#[inline]
fn positive_by_bits(x: f32) -> bool {
    let bits = x.to_bits() as i32;
    bits > 0 && bits <= 0x7f80_0000
}

/// An integer in the order of `x` for every `x` but NaN (−0 just before
/// +0): the bits, with the magnitude's bits flipped for a negative `x`.
#[inline]
fn order_key(x: f32) -> i32 {
    let bits = x.to_bits() as i32;
    bits ^ (((bits >> 31) as u32) >> 1) as i32
}

/// [`Real::within`] by [`order_key`]: a NaN's key lies beyond both
/// infinities'. (−0 falls below a range from +0, which only sends such a
/// reading the long way round; see `Monitor::check`.)
#[inline]
fn within_by_keys(x: f32, lo: f32, hi: f32) -> bool {
    let k = order_key(x);
    order_key(lo) <= k && k <= order_key(hi)
}

impl Real for f64 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const MAX: Self = f64::MAX;
    const EPSILON: Self = f64::EPSILON;
    #[inline]
    fn from_f64(x: f64) -> Self {
        x
    }
    #[inline]
    fn from_f32(x: f32) -> Self {
        x as f64
    }
    #[inline]
    fn pick(_single: f32, double: f64) -> Self {
        double
    }
    #[inline]
    fn from_ms(ms: u64) -> Self {
        ms as f64 * 1e-3
    }
    #[inline]
    fn half_ms(ms: u32) -> Self {
        f64::from(ms) * 5e-4
    }
    #[inline]
    fn to_f64(self) -> f64 {
        self
    }
    #[inline]
    fn to_f32(self) -> f32 {
        self as f32
    }
    #[inline]
    fn sqrt(self) -> Self {
        libm::sqrt(self)
    }
    #[inline]
    fn abs(self) -> Self {
        libm::fabs(self)
    }
    #[inline]
    fn is_finite(self) -> bool {
        f64::is_finite(self)
    }
    #[inline]
    fn is_positive(self) -> bool {
        self > 0.0
    }
    #[inline]
    fn less_not_nan(self, other: Self) -> bool {
        self < other
    }
    #[inline]
    fn within(self, lo: Self, hi: Self) -> bool {
        (self >= lo) & (self <= hi)
    }
}

/// Calls `f(0), f(1), …, f(K − 1)` in straight-line blocks of eight and
/// four. Loops over a few lanes then need no counter or branch even in
/// firmware built for size (`opt-level = "s"`), where the compiler keeps
/// such loops rolled; the per-sample cost should not depend on how the
/// firmware around it is optimised.
#[inline(always)]
pub(crate) fn lanes<const K: usize>(mut f: impl FnMut(usize)) {
    let mut i = 0;
    while i + 8 <= K {
        f(i);
        f(i + 1);
        f(i + 2);
        f(i + 3);
        f(i + 4);
        f(i + 5);
        f(i + 6);
        f(i + 7);
        i += 8;
    }
    if i + 4 <= K {
        f(i);
        f(i + 1);
        f(i + 2);
        f(i + 3);
        i += 4;
    }
    while i < K {
        f(i);
        i += 1;
    }
}

/// `K` sliding-window sums and run totals that do not drift, at three
/// additions per sum and entry.
///
/// The window's sums take each entering term and lose each leaving one,
/// `window += entering − leaving`, where `entering − leaving` is small and
/// nearly exact for a steady signal. Beside them, `fresh` sums the entries
/// since the last refresh; once it holds a whole window, it replaces the
/// window's sums, so their rounding never outlives two windows. At that
/// moment `fresh` also joins the `f64` run totals, which carry 53 bits: the
/// rounding of one block of entries does not accumulate against a growing
/// total. It joins them one sum per entry over the next entries (all that
/// remain at the next refresh, if the window holds fewer entries than
/// sums), so no single entry pays for all `K` software `f64` additions of a
/// Cortex-M4F; the totals are the same, bit for bit.
///
/// `refresh_after` must be the number of entries a full window holds, and
/// the caller must pass the entry leaving the window once it is full, so
/// that `fresh` and the window agree at each refresh.
///
/// ```
/// use heatbound::num::WindowSums;
/// let mut s = WindowSums::<f32, 1>::new();
/// let mut ring = [[0.0f32; 1]; 10];
/// let mut exact = 0.0f64;
/// for i in 0..10_000_000usize {
///     let entering = [0.1 + (i % 7) as f32];
///     let leaving = (i >= 10).then_some(&ring[i % 10]);
///     s.slide(&entering, leaving, 10);
///     ring[i % 10] = entering;
///     exact += f64::from(entering[0]);
/// }
/// let window: f64 = ring.iter().map(|e| f64::from(e[0])).sum();
/// assert!((f64::from(s.window()[0]) - window).abs() / window < 1e-6);
/// // A plain f32 total would be off by several per cent here.
/// assert!((s.totals_f64()[0] - exact).abs() / exact < 1e-7);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WindowSums<R, const K: usize> {
    window: [R; K],
    fresh: [R; K],
    fresh_count: u32,
    /// The last rebuilt window's block, joining `total` one sum per entry:
    /// sums `joined..K` have yet to.
    joining: [R; K],
    joined: usize,
    total: [f64; K],
}

impl<R: Real, const K: usize> Default for WindowSums<R, K> {
    fn default() -> Self {
        Self::new()
    }
}

impl<R: Real, const K: usize> WindowSums<R, K> {
    /// Empty sums.
    pub const fn new() -> Self {
        Self {
            window: [R::ZERO; K],
            fresh: [R::ZERO; K],
            fresh_count: 0,
            joining: [R::ZERO; K],
            joined: K,
            total: [0.0; K],
        }
    }

    /// Adds `entering[i]` to window sum `i` and run total `i`, and removes
    /// `leaving[i]`, if any, from window sum `i`. True when the window's
    /// sums were rebuilt by this call (once per `refresh_after` entries).
    #[inline]
    pub fn slide(
        &mut self,
        entering: &[R; K],
        leaving: Option<&[R; K]>,
        refresh_after: u32,
    ) -> bool {
        let (window, fresh) = (&mut self.window, &mut self.fresh);
        match leaving {
            Some(leaving) => lanes::<K>(|i| {
                window[i] = window[i] + (entering[i] - leaving[i]);
                fresh[i] = fresh[i] + entering[i];
            }),
            None => lanes::<K>(|i| {
                window[i] = window[i] + entering[i];
                fresh[i] = fresh[i] + entering[i];
            }),
        }
        self.fresh_count += 1;
        if self.fresh_count >= refresh_after {
            self.refresh();
            return true;
        }
        self.join_one();
        false
    }

    /// The next sum of the block still joining the run totals, if any.
    #[inline]
    fn join_one(&mut self) {
        if let (Some(t), Some(x)) = (
            self.total.get_mut(self.joined),
            self.joining.get(self.joined),
        ) {
            *t += x.to_f64();
            self.joined += 1;
        }
    }

    /// `fresh` holds the window: it replaces the window's sums and starts
    /// to join the run totals, once the block before it has.
    #[cold]
    fn refresh(&mut self) {
        while self.joined < K {
            self.join_one();
        }
        self.window = self.fresh;
        self.joining = self.fresh;
        self.joined = 0;
        self.fresh = [R::ZERO; K];
        self.fresh_count = 0;
    }

    /// The window's sums.
    #[inline]
    pub fn window(&self) -> [R; K] {
        self.window
    }

    /// The run totals, in `f64`.
    pub fn totals_f64(&self) -> [f64; K] {
        let mut out = self.total;
        for (i, o) in out.iter_mut().enumerate().skip(self.joined) {
            if let Some(x) = self.joining.get(i) {
                *o += x.to_f64();
            }
        }
        for (o, f) in out.iter_mut().zip(&self.fresh) {
            *o += f.to_f64();
        }
        out
    }
}

/// `Some(x)` if `x` is finite.
#[inline]
pub(crate) fn fin<R: Real>(x: R) -> Option<R> {
    if x.is_finite() { Some(x) } else { None }
}

/// `a > b`, which is false when either is NaN: `!above(a, b)` reads as
/// "not (a > b)", NaN included.
#[inline]
pub(crate) fn above<R: PartialOrd>(a: R, b: R) -> bool {
    a > b
}

/// `a / b` if `b > 0` and the quotient is finite.
#[inline]
pub(crate) fn ratio<R: Real>(a: R, b: R) -> Option<R> {
    if b > R::ZERO { fin(a / b) } else { None }
}

#[cfg(test)]
mod tests {
    use super::Real;

    /// The comparison by bits (used without an FPU) agrees with `x > 0`
    /// on the special values and on a sweep of every 4,099th bit pattern.
    #[test]
    fn positive_by_bits_is_the_comparison() {
        let special = [
            0.0,
            -0.0,
            f32::MIN_POSITIVE,
            -f32::MIN_POSITIVE,
            f32::from_bits(1),
            f32::from_bits(0x8000_0001),
            f32::MAX,
            f32::MIN,
            f32::INFINITY,
            f32::NEG_INFINITY,
            f32::NAN,
            -f32::NAN,
            f32::from_bits(0x7f80_0001),
            f32::from_bits(0xff80_0001),
        ];
        let sweep = (0..=u32::MAX / 4099).map(|i| f32::from_bits(i * 4099));
        for x in special.into_iter().chain(sweep) {
            assert_eq!(super::positive_by_bits(x), x > 0.0, "{:#010x}", x.to_bits());
        }
    }

    /// The integer order (used without an FPU) agrees with `<` on every
    /// pair of a set of values that are not NaN, zeros of both signs
    /// aside, which it puts −0 first.
    #[test]
    fn order_key_is_the_order() {
        let mut values = std::vec![
            0.0f32,
            f32::MIN_POSITIVE,
            f32::from_bits(1),
            1.0,
            1.000_000_1,
            300.0,
            3000.0,
            f32::MAX,
            f32::INFINITY,
        ];
        values.extend((1..2000u32).map(|i| f32::from_bits(i.wrapping_mul(2_146_789))));
        let negatives: std::vec::Vec<f32> = values.iter().map(|x| -x).collect();
        values.extend(negatives);
        values.retain(|x| !x.is_nan());
        for &a in &values {
            for &b in &values {
                if a == 0.0 && b == 0.0 {
                    let neg_first = a.is_sign_negative() && b.is_sign_positive();
                    assert_eq!(super::order_key(a) < super::order_key(b), neg_first);
                    continue;
                }
                assert_eq!(
                    super::order_key(a) < super::order_key(b),
                    a < b,
                    "{a:e} < {b:e}"
                );
            }
        }
    }

    /// The range test by bits (used without an FPU) never accepts what the
    /// comparisons refuse, NaN included, and agree with them away from
    /// the zeros, whose sign the bits tell apart.
    #[test]
    fn range_test_by_bits_is_the_comparisons() {
        let mut values = std::vec![
            0.0f32,
            -0.0,
            1.0,
            300.0,
            3000.0,
            1e12,
            f32::MAX,
            f32::INFINITY,
            f32::NAN,
            f32::from_bits(1),
        ];
        values.extend((1..400u32).map(|i| f32::from_bits(i.wrapping_mul(10_737_509))));
        let negatives: std::vec::Vec<f32> = values.iter().map(|x| -x).collect();
        values.extend(negatives);
        let bounds: std::vec::Vec<f32> = values.iter().copied().filter(|b| !b.is_nan()).collect();
        for &x in &values {
            for &lo in &bounds {
                let zero = x == 0.0 || lo == 0.0;
                for &hi in [1.0f32, 3000.0, f32::MAX, 0.0].iter() {
                    let by_bits = super::within_by_keys(x, lo, hi);
                    let exact = x >= lo && x <= hi;
                    assert!(!by_bits || exact, "{x:e} in [{lo:e}, {hi:e}]");
                    if !(zero || hi == 0.0) {
                        assert_eq!(by_bits, exact, "{x:e} in [{lo:e}, {hi:e}]");
                    }
                }
            }
        }
    }

    /// `half_ms` is `from_ms` halved to the bit, so a trapezoid's width
    /// costs one multiplication: every spacing up to a minute, and a
    /// spread of larger ones up to the longest a monitor bridges.
    #[test]
    fn half_ms_is_from_ms_halved_exactly() {
        let spread = (0..=60_000u32).chain((0..4_000u32).map(|i| i.wrapping_mul(536_870)));
        for ms in spread {
            let f = <f32 as Real>::from_ms(u64::from(ms)) * 0.5;
            assert_eq!(
                <f32 as Real>::half_ms(ms).to_bits(),
                f.to_bits(),
                "{ms} ms, f32"
            );
            let d = <f64 as Real>::from_ms(u64::from(ms)) * 0.5;
            assert_eq!(
                <f64 as Real>::half_ms(ms).to_bits(),
                d.to_bits(),
                "{ms} ms, f64"
            );
        }
    }
}
