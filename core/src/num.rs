//! The floating-point type the monitor computes in.
//!
//! The monitor is generic over [`Real`] so one implementation serves both
//! ends of the data flow:
//! - `f32` on the controller: a Cortex-M4F has a single-precision FPU, while
//!   `f64` there is software-emulated at tens of instructions per operation.
//!   Sensor readings carry far fewer than 7 significant digits, and the run
//!   totals use compensated (Neumaier) summation, so `f32` loses nothing a
//!   bench engineer could see.
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
    /// Converts from `f64` (rounding for `f32`).
    fn from_f64(x: f64) -> Self;
    /// Converts from `f32` (exact).
    fn from_f32(x: f32) -> Self;
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
}

impl Real for f32 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    #[inline]
    fn from_f64(x: f64) -> Self {
        x as f32
    }
    #[inline]
    fn from_f32(x: f32) -> Self {
        x
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
}

impl Real for f64 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    #[inline]
    fn from_f64(x: f64) -> Self {
        x
    }
    #[inline]
    fn from_f32(x: f32) -> Self {
        x as f64
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
}

/// Something that keeps a running sum: the window and the run totals of
/// the monitor use different ones.
pub trait Accumulator<R>: Copy + Default {
    /// Adds `x`.
    fn add(&mut self, x: R);
    /// Subtracts `x`.
    fn sub(&mut self, x: R);
    /// The current sum.
    fn value(&self) -> R;
}

/// A running sum with Neumaier compensation.
///
/// The lost low-order bits of every addition are kept in a second word, so
/// a sliding-window sum that adds and later subtracts the same terms comes
/// back to the true remainder instead of accumulating rounding. Its
/// magnitude must stay bounded, as a window's does: for sums that grow
/// without bound over a long run, use [`RunningTotal`].
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct CompensatedSum<R> {
    sum: R,
    compensation: R,
}

impl<R: Real> CompensatedSum<R> {
    /// An empty sum.
    pub const fn new(zero: R) -> Self {
        Self {
            sum: zero,
            compensation: zero,
        }
    }

    /// Adds `x`.
    ///
    /// ```
    /// use heatbound::num::CompensatedSum;
    /// let mut s = CompensatedSum::new(0.0_f32);
    /// for _ in 0..100_000 {
    ///     s.add(0.1);
    /// }
    /// assert!((s.value() - 10_000.0).abs() < 0.01); // a plain f32 sum ends at 9998.56
    /// ```
    #[inline]
    pub fn add(&mut self, x: R) {
        let t = self.sum + x;
        if self.sum.abs() >= x.abs() {
            self.compensation = self.compensation + ((self.sum - t) + x);
        } else {
            self.compensation = self.compensation + ((x - t) + self.sum);
        }
        self.sum = t;
    }

    /// Subtracts `x`.
    #[inline]
    pub fn sub(&mut self, x: R) {
        self.add(-x);
    }

    /// The compensated value.
    #[inline]
    pub fn value(&self) -> R {
        self.sum + self.compensation
    }

    /// The sum and its compensation, each exact in `R`.
    #[inline]
    pub fn parts(&self) -> (R, R) {
        (self.sum, self.compensation)
    }
}

impl<R: Real> Accumulator<R> for CompensatedSum<R> {
    #[inline]
    fn add(&mut self, x: R) {
        CompensatedSum::add(self, x)
    }
    #[inline]
    fn sub(&mut self, x: R) {
        CompensatedSum::sub(self, x)
    }
    #[inline]
    fn value(&self) -> R {
        CompensatedSum::value(self)
    }
}

/// Terms summed in `R` before the block is folded into the `f64` total.
const BLOCK: u16 = 256;

/// A run total that does not drift over weeks of samples.
///
/// Terms are summed with compensation in `R` over blocks of 256, and each
/// block is folded into an `f64` total. On a Cortex-M4F that costs one
/// software `f64` addition per 256 samples, while a plain `f32` total of
/// 0.1 s steps would be off by 9 % after 10 million samples and even a
/// compensated one by 0.2 %.
///
/// ```
/// use heatbound::num::RunningTotal;
/// let mut s = RunningTotal::<f32>::default();
/// for _ in 0..10_000_000 {
///     s.add(0.1);
/// }
/// // 0.1_f32 is 0.100000001490116…, so the exact sum is 1 000 000.0149.
/// assert!((s.value_f64() - 1_000_000.0149).abs() < 1e-3);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct RunningTotal<R> {
    block: CompensatedSum<R>,
    count: u16,
    total: f64,
}

impl<R: Real> RunningTotal<R> {
    /// Adds `x`.
    #[inline]
    pub fn add(&mut self, x: R) {
        self.block.add(x);
        self.count += 1;
        if self.count >= BLOCK {
            let (sum, compensation) = self.block.parts();
            self.total += sum.to_f64() + compensation.to_f64();
            self.block = CompensatedSum::default();
            self.count = 0;
        }
    }

    /// The total in `f64`.
    #[inline]
    pub fn value_f64(&self) -> f64 {
        let (sum, compensation) = self.block.parts();
        self.total + sum.to_f64() + compensation.to_f64()
    }
}

impl<R: Real> Accumulator<R> for RunningTotal<R> {
    #[inline]
    fn add(&mut self, x: R) {
        RunningTotal::add(self, x)
    }
    #[inline]
    fn sub(&mut self, x: R) {
        RunningTotal::add(self, -x)
    }
    #[inline]
    fn value(&self) -> R {
        R::from_f64(self.value_f64())
    }
}
