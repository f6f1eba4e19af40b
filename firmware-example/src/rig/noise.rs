//! Seeded, deterministic measurement noise: a PCG32 generator and Gaussian
//! deviates from it.
//!
//! The rig draws the noise of one reading from a generator seeded with the
//! rig's seed and the reading's time stamp ([`Pcg32::for_reading`]), so a
//! reading depends only on the rig's state, its seed and `t_ms`: asking
//! twice for the same time gives the same numbers, and the order in which a
//! caller asks for readings cannot change them. Everything is integer
//! arithmetic plus `libm`, which is a pure software implementation, so the
//! sequence is bit-exact on every target.

/// SplitMix64's finaliser: a good 64-bit mixer, used to turn a seed and a
/// counter into independent generator states.
///
/// ```
/// use heatbound_firmware_example::rig::noise::splitmix64;
/// assert_ne!(splitmix64(1), splitmix64(2));
/// assert_eq!(splitmix64(42), splitmix64(42));
/// ```
pub const fn splitmix64(x: u64) -> u64 {
    let mut z = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The PCG32 generator (PCG-XSH-RR, 64-bit state, 32-bit output).
///
/// ```
/// use heatbound_firmware_example::rig::noise::Pcg32;
/// let mut a = Pcg32::new(1, 2);
/// let mut b = Pcg32::new(1, 2);
/// assert_eq!(a.next_u32(), b.next_u32());
/// let g = a.gaussian();
/// assert!(g.is_finite() && g.abs() < 6.0);
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct Pcg32 {
    state: u64,
    inc: u64,
    spare: Option<f32>,
}

const PCG_MULT: u64 = 6_364_136_223_846_793_005;

impl Pcg32 {
    /// A generator for `seed` on stream `stream` (streams with different
    /// numbers are independent sequences).
    pub const fn new(seed: u64, stream: u64) -> Self {
        let inc = (stream << 1) | 1;
        // The reference initialisation: step, add the seed, step.
        let mut state = 0u64.wrapping_mul(PCG_MULT).wrapping_add(inc);
        state = state.wrapping_add(seed);
        state = state.wrapping_mul(PCG_MULT).wrapping_add(inc);
        Self {
            state,
            inc,
            spare: None,
        }
    }

    /// The generator for the reading at `t_ms` of a rig seeded with `seed`.
    pub const fn for_reading(seed: u64, t_ms: u32) -> Self {
        Self::new(
            splitmix64(seed ^ splitmix64(t_ms as u64)),
            splitmix64(seed.rotate_left(17)),
        )
    }

    /// The generator for the second hot thermocouple's reading at `t_ms`
    /// of a rig seeded with `seed`: [`Pcg32::for_reading`] with a seed of
    /// its own, derived from the rig's through [`splitmix64`] with a fixed
    /// salt, so its noise is independent of every other channel's and
    /// adding the element shifts no other reading.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::noise::Pcg32;
    /// let mut first = Pcg32::for_reading(1, 100);
    /// let mut second = Pcg32::for_second_hot(1, 100);
    /// assert_ne!(first.next_u32(), second.next_u32());
    /// assert_eq!(Pcg32::for_second_hot(1, 100), Pcg32::for_second_hot(1, 100));
    /// ```
    pub const fn for_second_hot(seed: u64, t_ms: u32) -> Self {
        /// "hot2" in ASCII, a salt no other channel uses.
        const SALT: u64 = 0x686F_7432;
        Self::for_reading(splitmix64(seed ^ SALT), t_ms)
    }

    /// The next 32 random bits.
    pub fn next_u32(&mut self) -> u32 {
        let old = self.state;
        self.state = old.wrapping_mul(PCG_MULT).wrapping_add(self.inc);
        let xorshifted = (((old >> 18) ^ old) >> 27) as u32;
        let rot = (old >> 59) as u32;
        xorshifted.rotate_right(rot)
    }

    /// A uniform deviate in (0, 1]: 24 random bits, never zero, so it is
    /// safe under a logarithm.
    pub fn uniform_open0(&mut self) -> f32 {
        ((self.next_u32() >> 8) + 1) as f32 * (1.0 / 16_777_216.0)
    }

    /// A standard normal deviate (mean 0, standard deviation 1), by the
    /// polar method (Marsaglia and Bray, 1964): a point uniform in the unit
    /// disc, `(v1, v2)` with `s = v1² + v2²`, gives two independent normal
    /// deviates `v·√(−2 ln s / s)`. No sine or cosine: an image that has no
    /// other use for them does not carry them. Bounded: `s ≥ 2⁻⁴⁶`, so
    /// |x| < 8.
    pub fn gaussian(&mut self) -> f32 {
        if let Some(x) = self.spare.take() {
            return x;
        }
        loop {
            let v1 = 2.0 * self.uniform_open0() - 1.0;
            let v2 = 2.0 * self.uniform_open0() - 1.0;
            let s = v1 * v1 + v2 * v2;
            // About 79 % of points fall inside; the rest are drawn again.
            if s > 0.0 && s < 1.0 {
                let f = libm::sqrtf(-2.0 * libm::logf(s) / s);
                self.spare = Some(v2 * f);
                return v1 * f;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gaussian_has_unit_moments() {
        let mut g = Pcg32::new(12345, 7);
        let n = 200_000;
        let (mut s, mut s2) = (0.0f64, 0.0f64);
        for _ in 0..n {
            let x = f64::from(g.gaussian());
            s += x;
            s2 += x * x;
        }
        let mean = s / n as f64;
        let var = s2 / n as f64 - mean * mean;
        assert!(mean.abs() < 0.01, "mean {mean}");
        assert!((var - 1.0).abs() < 0.02, "variance {var}");
    }

    #[test]
    fn readings_streams_differ() {
        let a = Pcg32::for_reading(1, 100).next_u32();
        let b = Pcg32::for_reading(1, 200).next_u32();
        let c = Pcg32::for_reading(2, 100).next_u32();
        assert_ne!(a, b);
        assert_ne!(a, c);
    }
}
