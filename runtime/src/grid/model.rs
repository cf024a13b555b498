//! The model contract of the non-Gaussian filters (grid and particle): what generated
//! code implements, and the typed outcomes of a step.
//!
//! States are `SVector<T, D>` (a cell centre for the grid, a particle for the particle
//! filter); inputs `SVector<T, U>`; readings `SVector<T, M>`.

use nalgebra::{RealField, SVector};

use super::noise::{minus_infinity, Noise, NoiseError};

/// The motion model `x_next = f(x, u, dt) + w`, with the components of `w` independent
/// and each distributed as one [`Noise`].
pub trait Motion<T: RealField + Copy, const D: usize, const U: usize> {
    /// The noise-free state after one step.
    fn transition(&self, x: &SVector<T, D>, u: &SVector<T, U>, dt: T) -> SVector<T, D>;

    /// The distribution of each component of the additive motion noise over the step.
    /// The grid uses one kernel for every cell, so the noise may depend on the input and
    /// the step but not on the state.
    fn noise(&self, u: &SVector<T, U>, dt: T) -> [Noise<T>; D];

    /// Kernel: `Some(t)` when `f(x, u, dt) = x + t` for every `x` (the common
    /// "position += velocity * dt" case). The grid then moves the whole belief by
    /// integrating the noise over the shifted cells (exact sub-cell shifts, no call to
    /// [`Motion::transition`]) instead of pushing each cell through `f`.
    /// The particle filter ignores it.
    fn translation(&self, u: &SVector<T, U>, dt: T) -> Option<SVector<T, D>> {
        let _ = (u, dt);
        None
    }
}

/// The likelihood of a reading `z` given the state `x`, as a natural log (`-inf` where
/// the reading is impossible).
pub trait Likelihood<T: RealField + Copy, const D: usize, const M: usize> {
    /// `ln p(z | x)`, up to a constant that does not depend on `x`.
    fn ln_likelihood(&self, x: &SVector<T, D>, z: &SVector<T, M>) -> T;
}

/// Any function `(x, z) -> ln p(z | x)` is a likelihood (the simulator passes closures
/// over its interpreter this way).
impl<T, F, const D: usize, const M: usize> Likelihood<T, D, M> for F
where
    T: RealField + Copy,
    F: Fn(&SVector<T, D>, &SVector<T, M>) -> T,
{
    fn ln_likelihood(&self, x: &SVector<T, D>, z: &SVector<T, M>) -> T {
        self(x, z)
    }
}

/// A reading model `z = h(x) + v`, the components of `v` independent and each
/// distributed as one [`Noise`]. Wrap it in [`ResidualLikelihood`] to correct with it.
pub trait ReadingPrediction<T: RealField + Copy, const D: usize, const M: usize> {
    /// The noise-free reading `h(x)`.
    fn predict_reading(&self, x: &SVector<T, D>) -> SVector<T, M>;

    /// The distribution of each component of the reading noise `v`.
    fn reading_noise(&self) -> [Noise<T>; M];
}

/// The likelihood of a [`ReadingPrediction`]: the product of the noise densities of the
/// residual components `z - h(x)`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ResidualLikelihood<R>(pub R);

impl<T, R, const D: usize, const M: usize> Likelihood<T, D, M> for ResidualLikelihood<R>
where
    T: RealField + Copy,
    R: ReadingPrediction<T, D, M>,
{
    fn ln_likelihood(&self, x: &SVector<T, D>, z: &SVector<T, M>) -> T {
        let residual = z - self.0.predict_reading(x);
        self.0
            .reading_noise()
            .iter()
            .zip(residual.iter())
            .fold(T::zero(), |sum, (noise, &r)| sum + noise.ln_pdf(r))
    }
}

/// Why a prediction was rejected. The belief (and a particle filter's generator) is left
/// bit-identical.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PredictError {
    /// The step `dt` was NaN or infinite.
    NonFiniteStep,
    /// The step `dt` was zero or negative.
    NonPositiveStep,
    /// An input component was NaN or infinite.
    NonFiniteInput,
    /// A motion-noise component was refused.
    InvalidNoise {
        /// The state component whose noise was refused (for a model that draws its own
        /// noise, the index of the refused noise source).
        component: usize,
        /// Why.
        reason: NoiseError,
    },
    /// The transition (or the translation) gave a NaN or infinite state.
    NonFiniteTransition,
    /// Grid only: the whole belief moved past the ends of the grid.
    AllMassLeftGrid,
}

/// Why a correction was rejected. The belief (and a particle filter's generator) is
/// left bit-identical.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CorrectError {
    /// A reading component was NaN or infinite.
    NonFiniteReading,
    /// The likelihood was NaN or `+inf` somewhere the belief has mass.
    InvalidLikelihood,
    /// The likelihood is zero wherever the belief has mass (every cell's mass or every
    /// particle's weight would vanish): the reading contradicts the belief.
    ZeroPosterior,
}

/// Checks the step, the input and each motion-noise component, the checks every
/// prediction does before touching the belief.
pub(crate) fn validate_step<T: RealField + Copy, const D: usize, const U: usize>(
    model: &impl Motion<T, D, U>,
    u: &SVector<T, U>,
    dt: T,
) -> Result<[Noise<T>; D], PredictError> {
    validate_step_and_input(u, dt)?;
    validated_noise(model, u, dt)
}

/// Checks that the step is finite and positive and the input finite.
pub(crate) fn validate_step_and_input<T: RealField + Copy, const U: usize>(
    u: &SVector<T, U>,
    dt: T,
) -> Result<(), PredictError> {
    if !dt.is_finite() {
        return Err(PredictError::NonFiniteStep);
    }
    if dt <= T::zero() {
        return Err(PredictError::NonPositiveStep);
    }
    if u.iter().any(|v| !v.is_finite()) {
        return Err(PredictError::NonFiniteInput);
    }
    Ok(())
}

/// The motion noise of a step, each component checked.
pub(crate) fn validated_noise<T: RealField + Copy, const D: usize, const U: usize>(
    model: &impl Motion<T, D, U>,
    u: &SVector<T, U>,
    dt: T,
) -> Result<[Noise<T>; D], PredictError> {
    let noise = model.noise(u, dt);
    for (component, n) in noise.iter().enumerate() {
        n.validate()
            .map_err(|reason| PredictError::InvalidNoise { component, reason })?;
    }
    Ok(noise)
}

/// Checks that every reading component is finite.
pub(crate) fn validate_reading<T: RealField + Copy, const M: usize>(
    z: &SVector<T, M>,
) -> Result<(), CorrectError> {
    if z.iter().all(|v| v.is_finite()) {
        Ok(())
    } else {
        Err(CorrectError::NonFiniteReading)
    }
}

/// Checks one log-likelihood value: NaN and `+inf` are model errors; `-inf` is a
/// legitimate "impossible here".
pub(crate) fn checked_ln_likelihood<T: RealField + Copy>(value: T) -> Result<T, CorrectError> {
    if value.is_finite() || value == minus_infinity() {
        Ok(value)
    } else {
        Err(CorrectError::InvalidLikelihood)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::Vector1;

    struct Range;

    impl ReadingPrediction<f64, 2, 1> for Range {
        fn predict_reading(&self, x: &SVector<f64, 2>) -> SVector<f64, 1> {
            Vector1::new(x.norm())
        }
        fn reading_noise(&self) -> [Noise<f64>; 1] {
            [Noise::Normal { std_dev: 0.5 }]
        }
    }

    #[test]
    fn residual_likelihood_is_the_noise_density_of_the_residual() {
        let likelihood = ResidualLikelihood(Range);
        let x = SVector::<f64, 2>::new(3.0, 4.0);
        let z = Vector1::new(5.4);
        let expected = Noise::Normal { std_dev: 0.5 }.ln_pdf(0.4);
        assert!((likelihood.ln_likelihood(&x, &z) - expected).abs() < 1e-12);
    }

    #[test]
    fn closures_are_likelihoods() {
        let bearing = |x: &SVector<f64, 2>, z: &Vector1<f64>| {
            Noise::Normal { std_dev: 0.1 }.ln_pdf(z[0] - x[1].atan2(x[0]))
        };
        let x = SVector::<f64, 2>::new(1.0, 1.0);
        let expected = Noise::Normal { std_dev: 0.1 }.ln_pdf(0.0);
        let z = Vector1::new(core::f64::consts::FRAC_PI_4);
        assert!((bearing.ln_likelihood(&x, &z) - expected).abs() < 1e-12);
    }

    #[test]
    fn nan_and_plus_infinity_are_invalid_likelihoods() {
        assert_eq!(
            checked_ln_likelihood(f64::NAN),
            Err(CorrectError::InvalidLikelihood)
        );
        assert_eq!(
            checked_ln_likelihood(f64::INFINITY),
            Err(CorrectError::InvalidLikelihood)
        );
        assert_eq!(
            checked_ln_likelihood(f64::NEG_INFINITY),
            Ok(f64::NEG_INFINITY)
        );
    }
}
