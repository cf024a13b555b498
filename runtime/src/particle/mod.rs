//! The particle filter: weighted samples of a `D`-dimensional state, moved through a
//! [`SampledMotion`] model, reweighted by the reading's likelihood in log space, and
//! resampled systematically when the effective sample size runs low.
//!
//! The likelihood contract ([`Likelihood`]) and the noise shapes are the grid filter's,
//! and every additive [`Motion`](crate::grid::Motion) is a [`SampledMotion`], so one generated model drives
//! either filter; a model whose noise enters elsewhere (through an input, inside a
//! nonlinear function) implements [`SampledMotion`] itself and draws with
//! [`Pcg32::sample`].
//!
//! # Capacity and count
//!
//! `N` is the capacity of the particle arrays; a filter uses the first
//! [`ParticleFilter::count`] of them (all `N` from [`ParticleFilter::from_particles`]
//! and [`ParticleFilter::from_noise`], fewer from [`ParticleFilter::from_particle_slice`]
//! and [`ParticleFilter::from_noise_counted`]). Every step and statistic runs over the
//! count only, so a filter of count `n` gives bit-for-bit the results of a filter of
//! capacity `n` from the same generator: the simulator, which learns the particle count
//! at run time, uses one large capacity. The arrays (and each step's copies of them on
//! the stack) keep the capacity's size.
//!
//! Every step computes into temporaries (with a copy of the generator) and commits only
//! at the end: a rejected step leaves particles, weights and generator bit-identical.

mod resample;
mod rng;
mod sampled;

pub use resample::systematic_resample;
pub use rng::Pcg32;
pub use sampled::SampledMotion;

use nalgebra::{RealField, SMatrix, SVector};

use crate::grid::{
    checked_ln_likelihood, lit, minus_infinity, validate_reading, validate_step_and_input,
    CorrectError, Likelihood, Noise, NoiseError, PredictError,
};
use sampled::perturbed;

/// Settings of a particle filter.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ParticleOptions<T> {
    /// Resample after a correction when the effective sample size falls below this
    /// fraction of the particle count (in `(0, 1]`; 1 resamples after every correction).
    pub resample_below: T,
}

impl<T: RealField + Copy> Default for ParticleOptions<T> {
    /// Resample below half of the count, the usual compromise between weight degeneracy
    /// and the sample impoverishment each resampling causes (common practice, no
    /// source).
    fn default() -> Self {
        Self {
            resample_below: lit(0.5),
        }
    }
}

/// Why a particle filter could not be created.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ParticleError {
    /// The particle count is zero.
    NoParticles,
    /// The particle count exceeds the capacity `N`.
    TooManyParticles,
    /// `resample_below` is not in `(0, 1]`.
    InvalidThreshold,
    /// A particle or the mean is NaN or infinite.
    NonFiniteState,
    /// The spread of the initial particles was refused.
    Noise {
        /// The state component whose spread was refused.
        component: usize,
        /// Why.
        reason: NoiseError,
    },
}

/// What an accepted correction found.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ParticleCorrection<T> {
    /// `ln sum_i w_i L(z | x_i)`: the log evidence of the reading under the prior
    /// particles, up to the likelihood's constant.
    pub ln_evidence: T,
    /// The effective sample size `1 / sum_i w_i^2` after weighting, before resampling.
    pub effective_size: T,
    /// Whether the particles were resampled (weights reset to `1 / count`).
    pub resampled: bool,
}

/// Up to `N` particles of dimension `D` (the first `count` in use) with log weights
/// normalised so that their exponentials sum to one. The slots past the count hold zero
/// and are never read.
#[derive(Clone, Debug, PartialEq)]
pub struct ParticleFilter<T: RealField + Copy, const D: usize, const N: usize> {
    particles: [SVector<T, D>; N],
    ln_weights: [T; N],
    count: usize,
    rng: Pcg32,
    resample_below: T,
}

impl<T: RealField + Copy, const D: usize, const N: usize> ParticleFilter<T, D, N> {
    /// `N` equally weighted particles at the given states.
    pub fn from_particles(
        particles: [SVector<T, D>; N],
        rng: Pcg32,
        options: ParticleOptions<T>,
    ) -> Result<Self, ParticleError> {
        Self::from_particle_slice(&particles, rng, options)
    }

    /// Equally weighted particles at the given states, as many as `particles` holds (at
    /// most `N`).
    pub fn from_particle_slice(
        particles: &[SVector<T, D>],
        rng: Pcg32,
        options: ParticleOptions<T>,
    ) -> Result<Self, ParticleError> {
        let count = checked_count::<N>(particles.len())?;
        let threshold = checked_threshold(options)?;
        if particles
            .iter()
            .flat_map(|p| p.iter())
            .any(|v| !v.is_finite())
        {
            return Err(ParticleError::NonFiniteState);
        }
        let mut stored = [SVector::zeros(); N];
        stored[..count].copy_from_slice(particles);
        Ok(Self {
            particles: stored,
            ln_weights: uniform_ln_weights(count),
            count,
            rng,
            resample_below: threshold,
        })
    }

    /// `N` particles drawn around `mean`, component `d` spread by `spread[d]` (a uniform
    /// spread over a box gives "anywhere in the box").
    pub fn from_noise(
        mean: SVector<T, D>,
        spread: [Noise<T>; D],
        rng: Pcg32,
        options: ParticleOptions<T>,
    ) -> Result<Self, ParticleError> {
        Self::from_noise_counted(N, mean, spread, rng, options)
    }

    /// `count` particles (at most `N`) drawn around `mean`, component `d` spread by
    /// `spread[d]`.
    pub fn from_noise_counted(
        count: usize,
        mean: SVector<T, D>,
        spread: [Noise<T>; D],
        mut rng: Pcg32,
        options: ParticleOptions<T>,
    ) -> Result<Self, ParticleError> {
        let count = checked_count::<N>(count)?;
        if mean.iter().any(|v| !v.is_finite()) {
            return Err(ParticleError::NonFiniteState);
        }
        for (component, noise) in spread.iter().enumerate() {
            noise
                .validate()
                .map_err(|reason| ParticleError::Noise { component, reason })?;
        }
        let mut particles = [SVector::zeros(); N];
        for particle in particles[..count].iter_mut() {
            *particle = perturbed(&mean, &spread, &mut rng);
        }
        Self::from_particle_slice(&particles[..count], rng, options)
    }

    /// Moves every particle to a draw of the next state from `model`. Rejected
    /// (everything unchanged) when the step or the input is not finite, the step not
    /// positive, the model refuses its noise, or a moved particle is not finite; checked
    /// in that order.
    pub fn predict<const U: usize>(
        &mut self,
        model: &impl SampledMotion<T, D, U>,
        u: &SVector<T, U>,
        dt: T,
    ) -> Result<(), PredictError> {
        validate_step_and_input(u, dt)?;
        model.check_noise(u, dt)?;
        let mut rng = self.rng;
        let mut moved = self.particles;
        for particle in moved[..self.count].iter_mut() {
            *particle = model.sample_transition(particle, u, dt, &mut rng);
            if particle.iter().any(|v| !v.is_finite()) {
                return Err(PredictError::NonFiniteTransition);
            }
        }
        self.particles = moved;
        self.rng = rng;
        Ok(())
    }

    /// Multiplies every weight by the likelihood of reading `z` (adds in log space),
    /// normalises with log-sum-exp, and resamples when the effective sample size falls
    /// below the threshold. Rejected (everything bit-identical) when `z` is not finite,
    /// the likelihood is NaN or `+inf`, or every weight would vanish.
    pub fn correct<const M: usize>(
        &mut self,
        likelihood: &impl Likelihood<T, D, M>,
        z: &SVector<T, M>,
    ) -> Result<ParticleCorrection<T>, CorrectError> {
        validate_reading(z)?;
        let mut ln_weights = self.ln_weights;
        let active = &mut ln_weights[..self.count];
        for (ln_weight, particle) in active.iter_mut().zip(self.particles()) {
            *ln_weight += checked_ln_likelihood(likelihood.ln_likelihood(particle, z))?;
        }
        let ln_total = log_sum_exp(active);
        if !ln_total.is_finite() {
            return Err(CorrectError::ZeroPosterior);
        }
        active.iter_mut().for_each(|w| *w -= ln_total);
        let effective_size = effective_size(active);
        let resampled = effective_size < self.resample_below * lit(self.count as f64);
        self.ln_weights = ln_weights;
        if resampled {
            self.resample();
        }
        Ok(ParticleCorrection {
            ln_evidence: ln_total,
            effective_size,
            resampled,
        })
    }

    /// Resamples systematically now: particles are copied in proportion to their
    /// weights and every weight becomes `1 / count`.
    pub fn resample(&mut self) {
        let count = self.count;
        let mut weights = [T::zero(); N];
        for (weight, ln_weight) in weights.iter_mut().zip(self.ln_weights()) {
            *weight = ln_weight.exp();
        }
        let mut chosen = [0; N];
        let offset = self.rng.unit_open();
        systematic_resample(&weights[..count], offset, &mut chosen[..count]);
        let source = self.particles;
        for (particle, &index) in self.particles[..count].iter_mut().zip(chosen.iter()) {
            *particle = source[index];
        }
        self.ln_weights = uniform_ln_weights(count);
    }

    /// The number of particles in use (at most the capacity `N`).
    pub fn count(&self) -> usize {
        self.count
    }

    /// The particles in use.
    pub fn particles(&self) -> &[SVector<T, D>] {
        &self.particles[..self.count]
    }

    /// The natural logs of the normalised weights of the particles in use.
    pub fn ln_weights(&self) -> &[T] {
        &self.ln_weights[..self.count]
    }

    /// The normalised weights (they sum to one), in particle order, computed on the fly.
    pub fn weights(&self) -> impl Iterator<Item = T> + '_ {
        self.ln_weights().iter().map(|w| w.exp())
    }

    /// The generator's current state (to save a run and replay it).
    pub fn rng(&self) -> Pcg32 {
        self.rng
    }

    /// The effective sample size `1 / sum_i w_i^2`, between 1 and the count.
    pub fn effective_size(&self) -> T {
        effective_size(self.ln_weights())
    }

    /// The weighted mean.
    pub fn mean(&self) -> SVector<T, D> {
        self.particles()
            .iter()
            .zip(self.weights())
            .fold(SVector::zeros(), |sum, (p, w)| sum + p * w)
    }

    /// The weighted covariance `sum_i w_i (x_i - mean)(x_i - mean)^T`.
    pub fn covariance(&self) -> SMatrix<T, D, D> {
        let mean = self.mean();
        self.particles()
            .iter()
            .zip(self.weights())
            .fold(SMatrix::zeros(), |sum, (p, w)| {
                let d = p - mean;
                sum + d * d.transpose() * w
            })
    }

    /// The weight of the particles inside the box `[lo, hi]` (componentwise).
    pub fn probability_in(&self, lo: &SVector<T, D>, hi: &SVector<T, D>) -> T {
        self.particles()
            .iter()
            .zip(self.weights())
            .filter(|(p, _)| {
                p.iter()
                    .zip(lo.iter().zip(hi.iter()))
                    .all(|(v, (l, h))| l <= v && v <= h)
            })
            .fold(T::zero(), |sum, (_, w)| sum + w)
    }
}

/// A particle count, checked against the capacity `N`.
fn checked_count<const N: usize>(count: usize) -> Result<usize, ParticleError> {
    match count {
        0 => Err(ParticleError::NoParticles),
        count if count > N => Err(ParticleError::TooManyParticles),
        count => Ok(count),
    }
}

/// The resampling threshold, checked to lie in `(0, 1]`.
fn checked_threshold<T: RealField + Copy>(options: ParticleOptions<T>) -> Result<T, ParticleError> {
    let threshold = options.resample_below;
    if threshold > T::zero() && threshold <= T::one() {
        Ok(threshold)
    } else {
        Err(ParticleError::InvalidThreshold)
    }
}

/// `ln(1 / count)` in the first `count` slots, zero in the unused ones.
fn uniform_ln_weights<T: RealField + Copy, const N: usize>(count: usize) -> [T; N] {
    let uniform = -lit::<T>(count as f64).ln();
    core::array::from_fn(|index| if index < count { uniform } else { T::zero() })
}

/// `ln sum_i exp(v_i)`, computed relative to the largest term so that nothing
/// overflows or underflows to a total of zero; `-inf` when every term is `-inf`.
fn log_sum_exp<T: RealField + Copy>(values: &[T]) -> T {
    let largest = values.iter().fold(minus_infinity::<T>(), |m, &v| m.max(v));
    if !largest.is_finite() {
        return largest;
    }
    let sum = values
        .iter()
        .fold(T::zero(), |sum, &v| sum + (v - largest).exp());
    largest + sum.ln()
}

/// `1 / sum_i w_i^2` for normalised log weights.
fn effective_size<T: RealField + Copy>(ln_weights: &[T]) -> T {
    let sum_squares = ln_weights
        .iter()
        .fold(T::zero(), |sum, &w| sum + (w + w).exp());
    T::one() / sum_squares
}

#[cfg(test)]
mod tests {
    use core::cell::Cell;

    use nalgebra::{SVector, Vector1, Vector2};
    use proptest::prelude::*;

    use super::*;
    use crate::grid::test_models::{
        CountingLikelihood, Direct, Drift, Mapped, MarkerTrack, ScalarKalman, MARKERS,
    };
    use crate::grid::ResidualLikelihood;

    fn normal(std_dev: f64) -> Noise<f64> {
        Noise::Normal { std_dev }
    }

    fn drift(noise: Noise<f64>) -> Drift<f64> {
        Drift {
            noise,
            as_translation: false,
        }
    }

    fn bits<const D: usize, const N: usize>(
        filter: &ParticleFilter<f64, D, N>,
    ) -> ([[u64; D]; N], [u64; N], Pcg32) {
        (
            filter
                .particles
                .map(|p| core::array::from_fn(|d| p[d].to_bits())),
            filter.ln_weights.map(f64::to_bits),
            filter.rng(),
        )
    }

    #[test]
    fn linear_gaussian_run_matches_the_kalman_filter() {
        // Closed form: the scalar Kalman recursion (common practice, no source).
        // Tolerance: 4 Monte Carlo standard errors, with the effective sample size n:
        // sqrt(P / n) for the mean and P sqrt(2 / n) for the variance of a normal
        // posterior (common practice, no source). Several seeds, so a pass is no fluke
        // of one stream.
        const N: usize = 4000;
        let (velocity, q_std, r_std) = (0.5, 0.3, 0.5);
        let motion = drift(normal(q_std));
        let reading = ResidualLikelihood(Direct {
            noise: normal(r_std),
        });
        for seed in 1..=4 {
            let mut filter = ParticleFilter::<f64, 1, N>::from_noise(
                Vector1::new(0.0),
                [normal(1.0)],
                Pcg32::new(seed, 11),
                ParticleOptions::default(),
            )
            .expect("valid prior");
            let mut kalman = ScalarKalman {
                mean: 0.0,
                variance: 1.0,
            };
            for z in [0.7, 0.9, 1.6, 2.1, 2.4] {
                filter
                    .predict(&motion, &Vector1::new(velocity), 1.0)
                    .expect("finite");
                kalman.predict(velocity, q_std * q_std);
                filter
                    .correct(&reading, &Vector1::new(z))
                    .expect("consistent");
                kalman.correct(z, r_std * r_std);
            }
            let n = filter.effective_size();
            let mean_error = (filter.mean()[0] - kalman.mean).abs();
            let variance_error = (filter.covariance()[(0, 0)] - kalman.variance).abs();
            assert!(
                mean_error < 4.0 * (kalman.variance / n).sqrt(),
                "seed {seed}: mean error {mean_error}"
            );
            assert!(
                variance_error < 4.0 * kalman.variance * (2.0 / n).sqrt(),
                "seed {seed}: variance error {variance_error}"
            );
        }
    }

    #[test]
    fn cart_between_identical_markers_finds_its_place() {
        // The grid test's invented track: a uniform prior over the track collapses onto
        // the true position once the pattern of marker gaps is unambiguous.
        const N: usize = 3000;
        let track = MarkerTrack {
            markers: MARKERS,
            noise: normal(0.15),
        };
        let motion = drift(normal(0.1));
        let mut filter = ParticleFilter::<f64, 1, N>::from_noise(
            Vector1::new(25.0),
            [Noise::Uniform { half_width: 25.0 }],
            Pcg32::new(99, 3),
            ParticleOptions::default(),
        )
        .expect("valid prior");
        let (speed, mut truth) = (0.9, 2.2);
        for _ in 0..25 {
            let z = track.distance_ahead(truth).expect("marker ahead");
            filter
                .correct(&track, &Vector1::new(z))
                .expect("consistent reading");
            filter
                .predict(&motion, &Vector1::new(speed), 1.0)
                .expect("finite");
            truth += speed;
        }
        let near = filter.probability_in(&Vector1::new(truth - 0.5), &Vector1::new(truth + 0.5));
        assert!(near > 0.9, "weight near the truth {near}");
        let count_near = filter
            .particles()
            .iter()
            .filter(|p| (p[0] - truth).abs() <= 0.5)
            .count();
        assert!(
            count_near > N * 9 / 10,
            "{count_near} particles near the truth"
        );
    }

    #[test]
    fn vanishing_weights_are_rejected_and_everything_kept() {
        let mut filter = ParticleFilter::<f64, 2, 64>::from_noise(
            Vector2::new(1.0, -1.0),
            [normal(0.5), normal(0.5)],
            Pcg32::new(5, 5),
            ParticleOptions::default(),
        )
        .expect("valid prior");
        let before = bits(&filter);
        let reading = ResidualLikelihood(Direct {
            noise: Noise::Uniform { half_width: 0.5 },
        });
        assert_eq!(
            filter.correct(&reading, &Vector2::new(50.0, 0.0)),
            Err(CorrectError::ZeroPosterior)
        );
        assert_eq!(
            filter.correct(&reading, &Vector2::new(f64::INFINITY, 0.0)),
            Err(CorrectError::NonFiniteReading)
        );
        let motion = drift(normal(0.1));
        assert_eq!(
            filter.predict(&motion, &Vector2::new(1.0, 0.0), -1.0),
            Err(PredictError::NonPositiveStep)
        );
        let exploding = Mapped {
            map: |x: &SVector<f64, 2>| x.map(|v| if v > 1.5 { f64::NAN } else { v }),
            noise: normal(0.1),
            calls: Cell::new(0),
        };
        assert_eq!(
            filter.predict(&exploding, &SVector::zeros(), 1.0),
            Err(PredictError::NonFiniteTransition)
        );
        assert_eq!(bits(&filter), before);
    }

    #[test]
    fn far_readings_do_not_underflow_the_weights() {
        // Every likelihood is below 1e-300 in linear terms; in log space the
        // normalisation still picks the particles closest to the reading.
        let mut filter = ParticleFilter::<f64, 1, 200>::from_noise(
            Vector1::new(0.0),
            [normal(1.0)],
            Pcg32::new(8, 8),
            ParticleOptions {
                resample_below: 1e-9,
            },
        )
        .expect("valid prior");
        let closest =
            filter
                .particles()
                .iter()
                .enumerate()
                .fold((0, f64::NEG_INFINITY), |best, (i, p)| {
                    if p[0] > best.1 {
                        (i, p[0])
                    } else {
                        best
                    }
                });
        let reading = ResidualLikelihood(Direct { noise: normal(0.1) });
        let outcome = filter
            .correct(&reading, &Vector1::new(10.0))
            .expect("finite weights");
        assert!(outcome.ln_evidence < -600.0);
        let total: f64 = filter.weights().sum();
        assert!((total - 1.0).abs() < 1e-12);
        let heaviest =
            filter.weights().enumerate().fold(
                (0, 0.0),
                |best, (i, w)| if w > best.1 { (i, w) } else { best },
            );
        assert_eq!(heaviest.0, closest.0);
    }

    #[test]
    fn resampling_follows_the_effective_size() {
        let mut filter = ParticleFilter::<f64, 1, 500>::from_noise(
            Vector1::new(0.0),
            [normal(1.0)],
            Pcg32::new(21, 2),
            ParticleOptions::default(),
        )
        .expect("valid prior");
        assert!((filter.effective_size() - 500.0).abs() < 1e-9);
        let broad = CountingLikelihood {
            ln_likelihood: |x: f64, z: f64| normal(10.0).ln_pdf(z - x),
            calls: Cell::new(0),
        };
        let kept = filter
            .correct(&broad, &Vector1::new(0.0))
            .expect("consistent");
        assert!(!kept.resampled && kept.effective_size > 450.0);
        let sharp = ResidualLikelihood(Direct {
            noise: normal(0.05),
        });
        let resampled = filter
            .correct(&sharp, &Vector1::new(0.5))
            .expect("consistent");
        assert!(resampled.resampled && resampled.effective_size < 250.0);
        assert!((filter.effective_size() - 500.0).abs() < 1e-9);
        assert!(filter.particles().iter().all(|p| (p[0] - 0.5).abs() < 0.5));
    }

    #[test]
    fn construction_refuses_bad_input() {
        let rng = Pcg32::new(0, 0);
        assert_eq!(
            ParticleFilter::<f64, 1, 4>::from_particles(
                [Vector1::new(f64::NAN); 4],
                rng,
                ParticleOptions::default()
            ),
            Err(ParticleError::NonFiniteState)
        );
        assert_eq!(
            ParticleFilter::<f64, 1, 4>::from_particles(
                [Vector1::new(0.0); 4],
                rng,
                ParticleOptions {
                    resample_below: 0.0
                }
            ),
            Err(ParticleError::InvalidThreshold)
        );
        assert_eq!(
            ParticleFilter::<f64, 1, 0>::from_particles([], rng, ParticleOptions::default()),
            Err(ParticleError::NoParticles)
        );
        assert!(matches!(
            ParticleFilter::<f64, 1, 4>::from_noise(
                Vector1::new(0.0),
                [normal(-1.0)],
                rng,
                ParticleOptions::default()
            ),
            Err(ParticleError::Noise { component: 0, .. })
        ));
    }

    #[test]
    fn single_precision_filter_runs() {
        let mut filter = ParticleFilter::<f32, 2, 256>::from_noise(
            Vector2::new(0.0, 0.0),
            [
                Noise::Normal { std_dev: 1.0 },
                Noise::Triangle { half_width: 2.0 },
            ],
            Pcg32::new(4, 4),
            ParticleOptions::default(),
        )
        .expect("valid prior");
        let motion = Drift {
            noise: Noise::Uniform {
                half_width: 0.1_f32,
            },
            as_translation: false,
        };
        filter
            .predict(&motion, &Vector2::new(1.0, 0.0), 0.5)
            .expect("finite");
        let reading = ResidualLikelihood(Direct {
            noise: Noise::Normal { std_dev: 0.5_f32 },
        });
        filter
            .correct(&reading, &Vector2::new(0.5, 0.0))
            .expect("consistent");
        let total: f32 = filter.weights().sum();
        assert!((total - 1.0).abs() < 1e-5);
        assert!((filter.mean()[0] - 0.5).abs() < 0.2);
    }

    /// `x_next = x + speed_of(u + w) dt` with `w` drawn from `speed_noise`: the noise of
    /// a measured speed enters through the input. Counts its draws.
    struct NoisySpeed {
        speed_noise: Noise<f64>,
        speed_of: fn(f64) -> f64,
        draws: Cell<usize>,
    }

    impl NoisySpeed {
        fn new(speed_noise: Noise<f64>, speed_of: fn(f64) -> f64) -> Self {
            Self {
                speed_noise,
                speed_of,
                draws: Cell::new(0),
            }
        }
    }

    impl SampledMotion<f64, 1, 1> for NoisySpeed {
        fn check_noise(&self, _: &Vector1<f64>, _: f64) -> Result<(), PredictError> {
            self.speed_noise
                .validate()
                .map_err(|reason| PredictError::InvalidNoise {
                    component: 0,
                    reason,
                })
        }
        fn sample_transition(
            &self,
            x: &Vector1<f64>,
            u: &Vector1<f64>,
            dt: f64,
            rng: &mut Pcg32,
        ) -> Vector1<f64> {
            self.draws.set(self.draws.get() + 1);
            let speed = (self.speed_of)(u[0] + rng.sample(&self.speed_noise));
            x.map(|p| p + speed * dt)
        }
    }

    /// A planar vehicle driving `u[0] dt` along the heading `u[1] + w`, `w` drawn from
    /// `heading_noise`: noise through a nonlinear function of the input.
    struct NoisyHeading {
        heading_noise: Noise<f64>,
    }

    impl SampledMotion<f64, 2, 2> for NoisyHeading {
        fn check_noise(&self, _: &Vector2<f64>, _: f64) -> Result<(), PredictError> {
            self.heading_noise
                .validate()
                .map_err(|reason| PredictError::InvalidNoise {
                    component: 0,
                    reason,
                })
        }
        fn sample_transition(
            &self,
            x: &Vector2<f64>,
            u: &Vector2<f64>,
            dt: f64,
            rng: &mut Pcg32,
        ) -> Vector2<f64> {
            let heading = u[1] + rng.sample(&self.heading_noise);
            x + Vector2::new(heading.cos(), heading.sin()) * (u[0] * dt)
        }
    }

    /// `count` particles at `start` in a filter of capacity `N`.
    fn all_at<const D: usize, const N: usize>(
        start: SVector<f64, D>,
        count: usize,
        seed: u64,
    ) -> ParticleFilter<f64, D, N> {
        let particles = [start; N];
        ParticleFilter::from_particle_slice(
            &particles[..count],
            Pcg32::new(seed, 17),
            ParticleOptions::default(),
        )
        .expect("valid particles")
    }

    #[test]
    fn noise_entering_through_the_input_spreads_by_its_width_times_the_step() {
        // x_next = x + (u + w) dt from a point: Var = (s dt)^2, mean u dt (variance of a
        // scaled variable, common practice, no source). Tolerance: 4 Monte Carlo standard
        // errors, sqrt(var / n) for the mean and var sqrt(2 / (n - 1)) for the sample
        // variance of a normal (common practice, no source).
        let (speed, s, dt, n) = (2.0, 0.4, 0.5, 4000);
        let variance = (s * dt) * (s * dt);
        for seed in 1..=4 {
            let mut filter = all_at::<1, 4096>(Vector1::new(0.0), n, seed);
            let motion = NoisySpeed::new(normal(s), |v| v);
            filter
                .predict(&motion, &Vector1::new(speed), dt)
                .expect("finite");
            assert_eq!(motion.draws.get(), n);
            let mean_error = (filter.mean()[0] - speed * dt).abs();
            assert!(
                mean_error < 4.0 * (variance / n as f64).sqrt(),
                "seed {seed}"
            );
            let spread_error = (filter.covariance()[(0, 0)] - variance).abs();
            let standard_error = variance * (2.0 / (n as f64 - 1.0)).sqrt();
            assert!(spread_error < 4.0 * standard_error, "seed {seed}");
        }
    }

    #[test]
    fn heading_noise_bends_the_cloud_and_shortens_its_mean_reach() {
        // Driving a distance r along a heading theta + w, w ~ N(0, s^2), from the origin:
        // every particle lies on the circle of radius r, and the mean sits at
        // r E[cos w] = r exp(-s^2 / 2) along the heading and 0 across it, with
        // Var(cos w) = (1 + exp(-2 s^2)) / 2 - exp(-s^2) and
        // Var(sin w) = (1 - exp(-2 s^2)) / 2 (characteristic function of the normal,
        // common practice, no source). Tolerance: 4 Monte Carlo standard errors of the
        // mean, sqrt(var / n).
        let (r, theta, s, n) = (10.0, 0.3, 0.5_f64, 4000);
        let along_variance = r * r * ((1.0 + (-2.0 * s * s).exp()) / 2.0 - (-s * s).exp());
        let across_variance = r * r * (1.0 - (-2.0 * s * s).exp()) / 2.0;
        let expected_reach = r * (-s * s / 2.0).exp();
        let motion = NoisyHeading {
            heading_noise: normal(s),
        };
        for seed in 1..=4 {
            let mut filter = all_at::<2, 4096>(Vector2::zeros(), n, seed);
            filter
                .predict(&motion, &Vector2::new(r / 2.0, theta), 2.0)
                .expect("finite");
            assert!(filter
                .particles()
                .iter()
                .all(|p| (p.norm() - r).abs() < 1e-12));
            let mean = filter.mean();
            let along = mean.dot(&Vector2::new(theta.cos(), theta.sin()));
            let across = mean.dot(&Vector2::new(-theta.sin(), theta.cos()));
            let tolerance = |variance: f64| 4.0 * (variance / n as f64).sqrt();
            assert!(
                (along - expected_reach).abs() < tolerance(along_variance),
                "seed {seed}: {along}"
            );
            assert!(across.abs() < tolerance(across_variance), "seed {seed}");
            assert!(mean.norm() < r - 1.0);
        }
    }

    #[test]
    fn rejected_sampled_predictions_keep_everything() {
        let mut filter = all_at::<1, 64>(Vector1::new(1.0), 40, 3);
        filter
            .correct(
                &ResidualLikelihood(Direct { noise: normal(1.0) }),
                &Vector1::new(0.5),
            )
            .expect("consistent");
        let before = bits(&filter);
        let refused = NoisySpeed::new(normal(0.0), |v| v);
        let cases = [
            (1.0, f64::NAN, PredictError::NonFiniteStep),
            (1.0, -1.0, PredictError::NonPositiveStep),
            (f64::INFINITY, 1.0, PredictError::NonFiniteInput),
        ];
        for (speed, dt, expected) in cases {
            assert_eq!(
                filter.predict(&refused, &Vector1::new(speed), dt),
                Err(expected)
            );
        }
        assert!(matches!(
            filter.predict(&refused, &Vector1::new(1.0), 1.0),
            Err(PredictError::InvalidNoise { component: 0, .. })
        ));
        assert_eq!(
            refused.draws.get(),
            0,
            "no particle moves before the checks"
        );
        // The square root of a noisy speed around zero is NaN for about half the draws:
        // the first one rejects the whole step.
        let root = NoisySpeed::new(normal(1.0), f64::sqrt);
        assert_eq!(
            filter.predict(&root, &Vector1::new(0.0), 1.0),
            Err(PredictError::NonFiniteTransition)
        );
        assert!(root.draws.get() >= 1);
        assert_eq!(bits(&filter), before);
    }

    /// The statistics of a filter as bits: effective size, mean, covariance and the
    /// probability of a box.
    fn statistics_bits<const N: usize>(filter: &ParticleFilter<f64, 2, N>) -> [u64; 7] {
        let (mean, covariance) = (filter.mean(), filter.covariance());
        let (lo, hi) = (Vector2::new(-0.5, -1.0), Vector2::new(1.5, 0.5));
        [
            filter.effective_size(),
            mean[0],
            mean[1],
            covariance[(0, 0)],
            covariance[(0, 1)],
            covariance[(1, 1)],
            filter.probability_in(&lo, &hi),
        ]
        .map(f64::to_bits)
    }

    /// Asserts that a counted filter agrees bit for bit with an exactly sized one in
    /// everything observable, and holds zeros past its count.
    fn assert_same_filter<const A: usize, const B: usize>(
        counted: &ParticleFilter<f64, 2, A>,
        exact: &ParticleFilter<f64, 2, B>,
        step: usize,
    ) {
        let particle_bits = |p: &SVector<f64, 2>| p.map(f64::to_bits);
        assert!(
            counted
                .particles()
                .iter()
                .map(particle_bits)
                .eq(exact.particles().iter().map(particle_bits)),
            "step {step}"
        );
        assert!(
            counted
                .ln_weights()
                .iter()
                .map(|w| w.to_bits())
                .eq(exact.ln_weights().iter().map(|w| w.to_bits())),
            "step {step}"
        );
        assert_eq!(counted.rng(), exact.rng(), "step {step}");
        assert_eq!(
            statistics_bits(counted),
            statistics_bits(exact),
            "step {step}"
        );
        assert!(counted.particles[counted.count..]
            .iter()
            .all(|p| *p == Vector2::zeros()));
        assert!(counted.ln_weights[counted.count..]
            .iter()
            .all(|&w| w == 0.0));
    }

    /// Step `index` of a predict/correct/resample sequence (`None` past its end); returns
    /// what the step reported, as bits.
    fn sequence_step<const N: usize>(
        filter: &mut ParticleFilter<f64, 2, N>,
        index: usize,
    ) -> Option<Result<[u64; 3], PredictOrCorrect>> {
        let predicted = |result: Result<(), PredictError>| {
            Some(result.map(|()| [0; 3]).map_err(PredictOrCorrect::Predict))
        };
        let corrected = |result: Result<ParticleCorrection<f64>, CorrectError>| {
            Some(
                result
                    .map(|c| {
                        [
                            c.ln_evidence.to_bits(),
                            c.effective_size.to_bits(),
                            u64::from(c.resampled),
                        ]
                    })
                    .map_err(PredictOrCorrect::Correct),
            )
        };
        let reading = |std_dev| {
            ResidualLikelihood(Direct {
                noise: normal(std_dev),
            })
        };
        let heading = NoisyHeading {
            heading_noise: Noise::Triangle { half_width: 0.4 },
        };
        match index {
            0 => predicted(filter.predict(&drift(normal(0.2)), &Vector2::new(0.4, -0.1), 1.0)),
            // Broad: the effective size stays between 0.7 x 700 and 0.7 x 1024, so a
            // threshold taken from the capacity instead of the count would resample.
            1 => corrected(filter.correct(&reading(1.0), &Vector2::new(0.5, -0.2))),
            2 => predicted(filter.predict(&heading, &Vector2::new(0.3, 0.7), 0.5)),
            // Sharp enough to resample automatically.
            3 => corrected(filter.correct(&reading(0.02), &Vector2::new(0.6, 0.0))),
            4 => {
                filter.resample();
                Some(Ok([0; 3]))
            }
            5 => corrected(filter.correct(&reading(0.3), &Vector2::new(f64::NAN, 0.0))),
            6 => predicted(filter.predict(&heading, &Vector2::new(0.3, 0.7), -1.0)),
            7 => corrected(filter.correct(&reading(0.5), &Vector2::new(0.7, 0.2))),
            _ => None,
        }
    }

    #[derive(Debug, PartialEq)]
    enum PredictOrCorrect {
        Predict(PredictError),
        Correct(CorrectError),
    }

    #[test]
    fn a_counted_filter_matches_an_exactly_sized_one() {
        for seed in [1, 77, 4096] {
            let (mean, spread) = (
                Vector2::new(0.2, -0.3),
                [normal(0.8), Noise::Uniform { half_width: 1.0 }],
            );
            let rng = Pcg32::new(seed, 5);
            let options = ParticleOptions {
                resample_below: 0.7,
            };
            let mut exact = ParticleFilter::<f64, 2, 700>::from_noise(mean, spread, rng, options)
                .expect("valid prior");
            let mut counted =
                ParticleFilter::<f64, 2, 1024>::from_noise_counted(700, mean, spread, rng, options)
                    .expect("valid prior");
            assert_same_filter(&counted, &exact, 0);
            let (mut kept, mut resampled) = (false, false);
            for index in 0.. {
                let outcome = sequence_step(&mut exact, index);
                assert_eq!(sequence_step(&mut counted, index), outcome, "step {index}");
                let Some(outcome) = outcome else { break };
                resampled |= matches!(outcome, Ok([_, _, 1]));
                kept |= index == 1 && matches!(outcome, Ok([_, _, 0]));
                assert_same_filter(&counted, &exact, index + 1);
            }
            assert!(resampled && kept, "the sequence covers both outcomes");
            let copied = ParticleFilter::<f64, 2, 1024>::from_particle_slice(
                exact.particles(),
                exact.rng(),
                options,
            )
            .expect("valid particles");
            let exact_copy = ParticleFilter::from_particles(exact.particles, exact.rng(), options)
                .expect("valid particles");
            assert_same_filter(&copied, &exact_copy, usize::MAX);
        }
    }

    #[test]
    fn particle_counts_outside_the_capacity_are_refused() {
        let rng = Pcg32::new(0, 0);
        let options = ParticleOptions::default();
        let origin = Vector1::new(0.0);
        let counted = |count| {
            ParticleFilter::<f64, 1, 8>::from_noise_counted(
                count,
                origin,
                [normal(1.0)],
                rng,
                options,
            )
        };
        assert_eq!(counted(0), Err(ParticleError::NoParticles));
        assert_eq!(counted(9), Err(ParticleError::TooManyParticles));
        assert_eq!(counted(8).map(|f| f.count()), Ok(8));
        assert_eq!(
            ParticleFilter::<f64, 1, 8>::from_particle_slice(&[origin; 9], rng, options),
            Err(ParticleError::TooManyParticles)
        );
        let few = ParticleFilter::<f64, 1, 8>::from_particle_slice(&[origin; 3], rng, options)
            .expect("valid particles");
        assert_eq!(few.weights().count(), 3);
        assert!((few.effective_size() - 3.0).abs() < 1e-12);
    }

    proptest! {
        #[test]
        fn the_capacity_never_shows_in_the_results(
            seed in any::<u64>(),
            count in 1..=64_usize,
            shift in -3.0..3.0_f64,
            reading_width in 0.01..3.0_f64,
            z in -4.0..4.0_f64,
            threshold in 0.05..=1.0_f64,
        ) {
            // The same count in two capacities, through predict and correct (which may
            // resample): any use of the capacity instead of the count shows as a
            // difference.
            let start = |rng| (Vector1::new(0.0), [normal(1.0)], rng, ParticleOptions { resample_below: threshold });
            let (mean, spread, rng, options) = start(Pcg32::new(seed, 9));
            let mut small = ParticleFilter::<f64, 1, 64>::from_noise_counted(count, mean, spread, rng, options).expect("valid prior");
            let mut large = ParticleFilter::<f64, 1, 96>::from_noise_counted(count, mean, spread, rng, options).expect("valid prior");
            let motion = NoisySpeed::new(Noise::Triangle { half_width: 0.5 }, |v| v);
            let reading = ResidualLikelihood(Direct { noise: normal(reading_width) });
            for _ in 0..2 {
                prop_assert_eq!(small.predict(&motion, &Vector1::new(shift), 1.0), large.predict(&motion, &Vector1::new(shift), 1.0));
                let outcomes = (small.correct(&reading, &Vector1::new(z)), large.correct(&reading, &Vector1::new(z)));
                prop_assert_eq!(outcomes.0.map(|c| (c.ln_evidence.to_bits(), c.resampled)), outcomes.1.map(|c| (c.ln_evidence.to_bits(), c.resampled)));
                let bits = |p: &SVector<f64, 1>| p[0].to_bits();
                prop_assert!(small.particles().iter().map(bits).eq(large.particles().iter().map(bits)));
                prop_assert!(small.ln_weights().iter().map(|w| w.to_bits()).eq(large.ln_weights().iter().map(|w| w.to_bits())));
                prop_assert_eq!(small.rng(), large.rng());
                prop_assert_eq!(small.covariance()[(0, 0)].to_bits(), large.covariance()[(0, 0)].to_bits());
            }
        }

        #[test]
        fn weights_stay_normalised(
            seed in any::<u64>(),
            spread in 0.01..5.0_f64,
            shift in -3.0..3.0_f64,
            reading_width in 0.01..3.0_f64,
            z in -6.0..6.0_f64,
        ) {
            let mut filter = ParticleFilter::<f64, 1, 128>::from_noise(
                Vector1::new(0.0),
                [normal(spread)],
                Pcg32::new(seed, 0),
                ParticleOptions::default(),
            ).expect("valid prior");
            filter.predict(&drift(Noise::Triangle { half_width: spread }), &Vector1::new(shift), 1.0).expect("finite");
            let reading = ResidualLikelihood(Direct { noise: normal(reading_width) });
            let outcome = filter.correct(&reading, &Vector1::new(z)).expect("normal likelihood never vanishes");
            let total: f64 = filter.weights().sum();
            prop_assert!((total - 1.0).abs() < 1e-9);
            prop_assert!(filter.weights().all(|w| (0.0..=1.0).contains(&w)));
            prop_assert!(outcome.effective_size >= 1.0 - 1e-9 && outcome.effective_size <= 128.0 + 1e-9);
            prop_assert!(filter.covariance()[(0, 0)] >= 0.0);
        }
    }
}
