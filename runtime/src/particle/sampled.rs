//! The particle filter's motion contract: a model that draws its own noise, so noise may
//! enter anywhere in the transition (through an input, inside a nonlinear function),
//! not only added to the state. Every additive [`Motion`] is one through a blanket
//! implementation.

use nalgebra::{RealField, SVector};

use super::rng::Pcg32;
use crate::grid::{validated_noise, Motion, Noise, PredictError};

/// A motion model that draws its own noise: `x_next = f(x, u, w, dt)` with `w` sampled.
///
/// Generated code implements it by drawing each noise source with
/// [`Pcg32::sample`] (for instance `rng.sample(&Noise::Normal { std_dev })` for an input
/// measured with normal noise) and pushing the draws through the transition.
pub trait SampledMotion<T: RealField + Copy, const D: usize, const U: usize> {
    /// Checks the noise of a step (every width finite and positive) before any particle
    /// moves; the filter has already checked that `dt` is finite and positive and `u`
    /// finite.
    fn check_noise(&self, u: &SVector<T, U>, dt: T) -> Result<(), PredictError>;

    /// One draw of the next state from `x`, using `rng` for every noise sample. A
    /// non-finite result makes the filter reject the whole step.
    fn sample_transition(
        &self,
        x: &SVector<T, D>,
        u: &SVector<T, U>,
        dt: T,
        rng: &mut Pcg32,
    ) -> SVector<T, D>;
}

/// Additive noise: the noise-free transition plus one draw of each component's noise.
/// The noise is evaluated again for every particle (it depends only on `u` and `dt`, so
/// each evaluation gives the same shapes the check accepted).
impl<T, M, const D: usize, const U: usize> SampledMotion<T, D, U> for M
where
    T: RealField + Copy,
    M: Motion<T, D, U>,
{
    fn check_noise(&self, u: &SVector<T, U>, dt: T) -> Result<(), PredictError> {
        validated_noise(self, u, dt).map(|_| ())
    }

    fn sample_transition(
        &self,
        x: &SVector<T, D>,
        u: &SVector<T, U>,
        dt: T,
        rng: &mut Pcg32,
    ) -> SVector<T, D> {
        perturbed(&self.transition(x, u, dt), &self.noise(u, dt), rng)
    }
}

/// `centre` plus one draw of each component's noise.
pub(super) fn perturbed<T: RealField + Copy, const D: usize>(
    centre: &SVector<T, D>,
    noise: &[Noise<T>; D],
    rng: &mut Pcg32,
) -> SVector<T, D> {
    SVector::from_fn(|component, _| centre[component] + rng.sample(&noise[component]))
}

#[cfg(test)]
mod tests {
    use nalgebra::Vector2;

    use super::*;
    use crate::grid::test_models::Drift;

    #[test]
    fn additive_motion_draws_one_sample_per_component_after_the_transition() {
        let motion = Drift {
            noise: Noise::Triangle { half_width: 0.5 },
            as_translation: false,
        };
        let (x, u, dt) = (Vector2::new(1.0, -2.0), Vector2::new(0.5, 0.25), 2.0);
        let mut rng = Pcg32::new(12, 3);
        let mut by_hand = rng;
        let drawn = motion.sample_transition(&x, &u, dt, &mut rng);
        let first = by_hand.sample(&motion.noise);
        let second = by_hand.sample(&motion.noise);
        assert_eq!(drawn, Vector2::new(2.0 + first, -1.5 + second));
        assert_eq!(rng, by_hand);
        assert_eq!(
            SampledMotion::<f64, 2, 2>::check_noise(&motion, &u, dt),
            Ok(())
        );
        let flat = Drift {
            noise: Noise::Normal { std_dev: 0.0 },
            as_translation: false,
        };
        assert!(matches!(
            SampledMotion::<f64, 2, 2>::check_noise(&flat, &u, dt),
            Err(PredictError::InvalidNoise { component: 0, .. })
        ));
    }
}
