//! Zero-mean, symmetric noise distributions for the non-Gaussian filters: their
//! cumulative distribution (used to integrate a density over a cell), log density (used
//! as a reading likelihood) and variance.
//!
//! Sampling lives with the random-number generator in [`crate::particle`].

use nalgebra::RealField;

/// Converts an `f64` constant to the filter scalar (exact for `f64`, rounded for `f32`).
pub(crate) fn lit<T: RealField + Copy>(value: f64) -> T {
    nalgebra::convert(value)
}

/// Converts a filter scalar to `f64` (exact for `f32` and `f64`).
pub(crate) fn to_f64<T: RealField + Copy>(value: T) -> f64 {
    nalgebra::convert_unchecked::<T, f64>(value)
}

/// `-inf` in the filter scalar: the log of a zero density or weight.
pub(crate) fn minus_infinity<T: RealField + Copy>() -> T {
    -T::one() / T::zero()
}

/// How many standard deviations of a normal distribution a grid kernel keeps: the mass
/// beyond 8 sigma on both sides together is below 1.3e-15, under f64 round-off of the
/// belief's normalisation.
const NORMAL_REACH_IN_STD_DEVS: f64 = 8.0;

/// A zero-mean, symmetric noise distribution on the real line.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Noise<T> {
    /// Normal with standard deviation `std_dev`.
    Normal {
        /// Standard deviation (> 0).
        std_dev: T,
    },
    /// Symmetric triangle on `[-half_width, half_width]` (the sum of two independent
    /// uniforms on `[-half_width/2, half_width/2]`).
    Triangle {
        /// Half of the support's width (> 0).
        half_width: T,
    },
    /// Uniform on `[-half_width, half_width]`.
    Uniform {
        /// Half of the support's width (> 0).
        half_width: T,
    },
}

/// Why a noise description was refused.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum NoiseError {
    /// The width is zero or negative.
    NonPositiveWidth,
    /// The width is NaN or infinite.
    NonFiniteWidth,
}

impl<T: RealField + Copy> Noise<T> {
    /// The width parameter (standard deviation or half-width).
    fn width(&self) -> T {
        match *self {
            Noise::Normal { std_dev } => std_dev,
            Noise::Triangle { half_width } | Noise::Uniform { half_width } => half_width,
        }
    }

    /// Accepts only finite, strictly positive widths: a zero width has no density, so it
    /// can be neither a likelihood nor a kernel integrated by cells. A deterministic
    /// motion is a width well below the cell width.
    pub fn validate(&self) -> Result<(), NoiseError> {
        let width = self.width();
        if !width.is_finite() {
            Err(NoiseError::NonFiniteWidth)
        } else if width <= T::zero() {
            Err(NoiseError::NonPositiveWidth)
        } else {
            Ok(())
        }
    }

    /// The variance: `std_dev^2`, `half_width^2 / 6` (triangle: two uniforms of variance
    /// `half_width^2 / 12` each) or `half_width^2 / 3` (uniform).
    pub fn variance(&self) -> T {
        match *self {
            Noise::Normal { std_dev } => std_dev * std_dev,
            Noise::Triangle { half_width } => half_width * half_width / lit(6.0),
            Noise::Uniform { half_width } => half_width * half_width / lit(3.0),
        }
    }

    /// The distance from zero beyond which the distribution has no mass a grid can
    /// resolve: the half-width for triangle and uniform, 8 standard deviations for the
    /// normal.
    pub fn reach(&self) -> T {
        match *self {
            Noise::Normal { std_dev } => std_dev * lit(NORMAL_REACH_IN_STD_DEVS),
            Noise::Triangle { half_width } | Noise::Uniform { half_width } => half_width,
        }
    }

    /// The cumulative distribution `P(w <= x)`.
    pub fn cdf(&self, x: T) -> T {
        match *self {
            Noise::Normal { std_dev } => {
                // Phi(z) = erfc(-z / sqrt 2) / 2 keeps full relative precision in the
                // lower tail, which the far-apart correction tests rely on.
                let z = to_f64(x) / to_f64(std_dev);
                lit(0.5 * libm::erfc(-z * core::f64::consts::FRAC_1_SQRT_2))
            }
            Noise::Triangle { half_width: a } => {
                let two_a_squared = lit::<T>(2.0) * a * a;
                if x <= -a {
                    T::zero()
                } else if x <= T::zero() {
                    (x + a) * (x + a) / two_a_squared
                } else if x < a {
                    T::one() - (a - x) * (a - x) / two_a_squared
                } else {
                    T::one()
                }
            }
            Noise::Uniform { half_width: a } => {
                if x <= -a {
                    T::zero()
                } else if x < a {
                    (x + a) / (lit::<T>(2.0) * a)
                } else {
                    T::one()
                }
            }
        }
    }

    /// The probability of `lo < w <= hi` (zero when `hi <= lo`).
    ///
    /// Intervals on the positive side are mirrored to the negative side, where the
    /// cumulative distribution is small and the difference does not cancel.
    pub fn mass_between(&self, lo: T, hi: T) -> T {
        if hi <= lo {
            T::zero()
        } else if lo > T::zero() {
            self.cdf(-lo) - self.cdf(-hi)
        } else {
            self.cdf(hi) - self.cdf(lo)
        }
    }

    /// The natural log of the density at `x` (`-inf` outside a bounded support).
    pub fn ln_pdf(&self, x: T) -> T {
        match *self {
            Noise::Normal { std_dev } => {
                let z = x / std_dev;
                let ln_sqrt_two_pi: T = lit(0.918_938_533_204_672_8);
                -(z * z) / lit(2.0) - std_dev.ln() - ln_sqrt_two_pi
            }
            Noise::Triangle { half_width: a } => {
                if x.abs() < a {
                    ((a - x.abs()) / (a * a)).ln()
                } else {
                    minus_infinity()
                }
            }
            Noise::Uniform { half_width: a } => {
                if x.abs() <= a {
                    -(lit::<T>(2.0) * a).ln()
                } else {
                    minus_infinity()
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normal_cdf_matches_table_values() {
        // Standard normal table (NIST/SEMATECH e-Handbook, sec. 1.3.6.7.1): Phi(1) =
        // 0.84134, Phi(1.96) = 0.97500, Phi(-2) = 0.02275.
        let unit = Noise::Normal { std_dev: 1.0_f64 };
        assert!((unit.cdf(1.0) - 0.84134).abs() < 1e-5);
        assert!((unit.cdf(1.96) - 0.97500).abs() < 1e-5);
        assert!((unit.cdf(-2.0) - 0.02275).abs() < 1e-5);
        let scaled = Noise::Normal { std_dev: 2.0_f64 };
        assert!((scaled.cdf(2.0) - 0.84134).abs() < 1e-5);
    }

    #[test]
    fn far_tail_mass_keeps_relative_precision() {
        // Mirrored differences: the mass of (30, 31] sigma is about pdf(30) = 1.5e-196
        // (standard normal density, common practice, no source); a direct difference of
        // two values near 1 would give 0.
        let unit = Noise::Normal { std_dev: 1.0_f64 };
        let mass = unit.mass_between(30.0, 31.0);
        assert!(mass > 0.0);
        let density_at_30 = (-450.0_f64).exp() / (2.0 * core::f64::consts::PI).sqrt();
        // Mills ratio: the tail beyond x is about pdf(x) / x (common practice, no source).
        assert!((mass / (density_at_30 / 30.0) - 1.0).abs() < 0.01);
    }

    #[test]
    fn variances_of_the_three_shapes() {
        // Triangle of half-width a: a^2/6 (sum of two uniforms of half-width a/2, each
        // a^2/12); uniform of half-width a: a^2/3 (common practice, no source).
        assert_eq!(Noise::Normal { std_dev: 3.0_f64 }.variance(), 9.0);
        assert!(
            (Noise::Triangle {
                half_width: 3.0_f64
            }
            .variance()
                - 1.5)
                .abs()
                < 1e-15
        );
        assert!(
            (Noise::Uniform {
                half_width: 3.0_f64
            }
            .variance()
                - 3.0)
                .abs()
                < 1e-15
        );
    }

    #[test]
    fn triangle_variance_by_integrating_its_cdf() {
        // Var = 4 * integral_0^inf x (1 - F(x)) dx for a symmetric zero-mean variable
        // (common practice, no source); midpoint rule on a fine partition.
        let a = 1.7_f64;
        let triangle = Noise::Triangle { half_width: a };
        let steps = 20_000;
        let dx = a / f64::from(steps);
        let integral: f64 = (0..steps)
            .map(|i| {
                let x = (f64::from(i) + 0.5) * dx;
                x * (1.0 - triangle.cdf(x)) * dx
            })
            .sum();
        assert!((4.0 * integral - a * a / 6.0).abs() < 1e-8);
    }

    #[test]
    fn densities_integrate_to_their_cdf() {
        for noise in [
            Noise::Normal { std_dev: 0.8_f64 },
            Noise::Triangle { half_width: 1.3 },
            Noise::Uniform { half_width: 0.6 },
        ] {
            let (lo, hi) = (-0.5_f64, 0.45_f64);
            let steps = 10_000;
            let dx = (hi - lo) / f64::from(steps);
            let integral: f64 = (0..steps)
                .map(|i| noise.ln_pdf(lo + (f64::from(i) + 0.5) * dx).exp() * dx)
                .sum();
            assert!(
                (integral - noise.mass_between(lo, hi)).abs() < 1e-6,
                "{noise:?}"
            );
        }
    }

    #[test]
    fn widths_must_be_positive_and_finite() {
        assert_eq!(
            Noise::Normal { std_dev: 0.0_f64 }.validate(),
            Err(NoiseError::NonPositiveWidth)
        );
        assert_eq!(
            Noise::Uniform {
                half_width: f64::NAN
            }
            .validate(),
            Err(NoiseError::NonFiniteWidth)
        );
        assert_eq!(
            Noise::Triangle {
                half_width: 1.0_f32
            }
            .validate(),
            Ok(())
        );
    }

    #[test]
    fn outside_bounded_support_the_log_density_is_minus_infinity() {
        assert_eq!(
            Noise::Triangle {
                half_width: 1.0_f64
            }
            .ln_pdf(1.5),
            f64::NEG_INFINITY
        );
        assert_eq!(
            Noise::Uniform {
                half_width: 1.0_f32
            }
            .ln_pdf(-1.5),
            f32::NEG_INFINITY
        );
    }
}
