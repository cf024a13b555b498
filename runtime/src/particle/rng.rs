//! The particle filter's seedable random-number generator (PCG32, the 64-bit-state,
//! 32-bit-output permuted congruential generator, XSH-RR variant) and the samplers of
//! the noise shapes built on it. No heap, no operating-system entropy: the same seed
//! gives the same run on every target.

use nalgebra::RealField;

use crate::grid::{lit, Noise};

const MULTIPLIER: u64 = 6_364_136_223_846_793_005;

/// A PCG32 generator: 64-bit state, a per-stream odd increment, 32-bit outputs.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Pcg32 {
    state: u64,
    increment: u64,
}

impl Pcg32 {
    /// A generator seeded with `seed` on stream `stream` (streams with different
    /// numbers give independent sequences from the same seed).
    pub fn new(seed: u64, stream: u64) -> Self {
        let mut rng = Self {
            state: 0,
            increment: (stream << 1) | 1,
        };
        rng.step();
        rng.state = rng.state.wrapping_add(seed);
        rng.step();
        rng
    }

    fn step(&mut self) {
        self.state = self
            .state
            .wrapping_mul(MULTIPLIER)
            .wrapping_add(self.increment);
    }

    /// The next 32 random bits.
    pub fn next_u32(&mut self) -> u32 {
        let old = self.state;
        self.step();
        // Output permutation: xorshift the high bits down, then rotate by the top five.
        let xorshifted = (((old >> 18) ^ old) >> 27) as u32;
        let rotation = (old >> 59) as u32;
        xorshifted.rotate_right(rotation)
    }

    /// A uniform number in the open interval (0, 1), with 53 random bits (so `ln` and
    /// division by it are always finite).
    pub fn unit_open<T: RealField + Copy>(&mut self) -> T {
        let high = u64::from(self.next_u32() >> 5);
        let low = u64::from(self.next_u32() >> 6);
        let bits = (high << 26) | low;
        let unit: T = lit((bits as f64 + 0.5) / 9_007_199_254_740_992.0);
        // Rounding to f32 can reach 1; the largest f32 below 1 is 1 - 2^-24.
        if unit >= T::one() {
            T::one() - lit(5.960_464_477_539_063e-8)
        } else {
            unit
        }
    }

    /// A standard normal number (Box-Muller transform, cosine branch).
    pub fn standard_normal<T: RealField + Copy>(&mut self) -> T {
        let radius = (lit::<T>(-2.0) * self.unit_open::<T>().ln()).sqrt();
        let angle = T::two_pi() * self.unit_open::<T>();
        radius * angle.cos()
    }

    /// A draw from `noise`: the triangle as the sum of two uniforms of half its width,
    /// the uniform by scaling.
    pub fn sample<T: RealField + Copy>(&mut self, noise: &Noise<T>) -> T {
        let centred = |rng: &mut Self| rng.unit_open::<T>() - lit(0.5);
        match *noise {
            Noise::Normal { std_dev } => std_dev * self.standard_normal::<T>(),
            Noise::Triangle { half_width } => half_width * (centred(self) + centred(self)),
            Noise::Uniform { half_width } => lit::<T>(2.0) * half_width * centred(self),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_the_published_pcg32_sequence() {
        // Reference output of the PCG authors' minimal C library demo (pcg32-demo,
        // pcg-c-basic), seed 42, sequence 54: also listed in pcg-c's
        // test-high/expected/check-pcg32.out.
        let mut rng = Pcg32::new(42, 54);
        let expected = [
            0xa15c_02b7,
            0x7b47_f409,
            0xba1d_3330,
            0x83d2_f293,
            0xbfa4_784b,
            0xcbed_606e,
        ];
        for value in expected {
            assert_eq!(rng.next_u32(), value);
        }
    }

    fn sample_moments(rng: &mut Pcg32, noise: &Noise<f64>, count: usize) -> (f64, f64) {
        let mut sum = 0.0;
        let mut sum_squares = 0.0;
        for _ in 0..count {
            let x = rng.sample(noise);
            sum += x;
            sum_squares += x * x;
        }
        let mean = sum / count as f64;
        (mean, sum_squares / count as f64 - mean * mean)
    }

    #[test]
    fn samples_have_the_shapes_moments() {
        // Within 4 standard errors: the mean's is sqrt(var / n); the sample variance's
        // is var sqrt((kurtosis - 1) / n), with kurtosis 3 (normal), 2.4 (triangle), 1.8
        // (uniform) (common practice, no source; kurtoses from memory).
        let count = 200_000;
        let mut rng = Pcg32::new(7, 1);
        for (noise, kurtosis) in [
            (Noise::Normal { std_dev: 1.5 }, 3.0),
            (Noise::Triangle { half_width: 2.0 }, 2.4),
            (Noise::Uniform { half_width: 0.7 }, 1.8),
        ] {
            let (mean, variance) = sample_moments(&mut rng, &noise, count);
            let n = count as f64;
            let expected = noise.variance();
            assert!(
                mean.abs() < 4.0 * (expected / n).sqrt(),
                "{noise:?}: mean {mean}"
            );
            let variance_error = expected * ((kurtosis - 1.0) / n).sqrt();
            assert!(
                (variance - expected).abs() < 4.0 * variance_error,
                "{noise:?}: variance {variance}"
            );
        }
    }

    #[test]
    fn bounded_shapes_stay_in_their_support() {
        let mut rng = Pcg32::new(3, 9);
        for _ in 0..10_000 {
            assert!(
                rng.sample(&Noise::Triangle {
                    half_width: 1.0_f32
                })
                .abs()
                    < 1.0
            );
            assert!(
                rng.sample(&Noise::Uniform {
                    half_width: 1.0_f32
                })
                .abs()
                    < 1.0
            );
            let unit: f32 = rng.unit_open();
            assert!(unit > 0.0 && unit < 1.0);
        }
    }

    #[test]
    fn streams_differ_and_seeds_repeat() {
        let first: [u32; 4] = core::array::from_fn({
            let mut rng = Pcg32::new(1, 1);
            move |_| rng.next_u32()
        });
        let again: [u32; 4] = core::array::from_fn({
            let mut rng = Pcg32::new(1, 1);
            move |_| rng.next_u32()
        });
        let other_stream: [u32; 4] = core::array::from_fn({
            let mut rng = Pcg32::new(1, 2);
            move |_| rng.next_u32()
        });
        assert_eq!(first, again);
        assert_ne!(first, other_stream);
    }
}
