//! The particle filter: `N` weighted samples of a `D`-dimensional state, moved through
//! the motion model with sampled noise, reweighted by the reading's likelihood in log
//! space, and resampled systematically when the effective sample size runs low.
//!
//! The model contract ([`Motion`], [`Likelihood`]) and the noise shapes are the grid
//! filter's, so one generated model drives either filter.
//!
//! Every step computes into temporaries (with a copy of the generator) and commits only
//! at the end: a rejected step leaves particles, weights and generator bit-identical.

mod resample;
mod rng;

pub use resample::systematic_resample;
pub use rng::Pcg32;

use nalgebra::{RealField, SMatrix, SVector};

use crate::grid::{
    checked_ln_likelihood, lit, minus_infinity, validate_reading, validate_step, CorrectError,
    Likelihood, Motion, Noise, NoiseError, PredictError,
};

/// Settings of a particle filter.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ParticleOptions<T> {
    /// Resample after a correction when the effective sample size falls below this
    /// fraction of `N` (in `(0, 1]`; 1 resamples after every correction).
    pub resample_below: T,
}

impl<T: RealField + Copy> Default for ParticleOptions<T> {
    /// Resample below half of `N`, the usual compromise between weight degeneracy and
    /// the sample impoverishment each resampling causes (common practice, no source).
    fn default() -> Self {
        Self {
            resample_below: lit(0.5),
        }
    }
}

/// Why a particle filter could not be created.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ParticleError {
    /// `N` is zero.
    NoParticles,
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
    /// Whether the particles were resampled (weights reset to `1 / N`).
    pub resampled: bool,
}

/// `N` particles of dimension `D` with log weights normalised so that their
/// exponentials sum to one.
#[derive(Clone, Debug, PartialEq)]
pub struct ParticleFilter<T: RealField + Copy, const D: usize, const N: usize> {
    particles: [SVector<T, D>; N],
    ln_weights: [T; N],
    rng: Pcg32,
    resample_below: T,
}

impl<T: RealField + Copy, const D: usize, const N: usize> ParticleFilter<T, D, N> {
    /// Equally weighted particles at the given states.
    pub fn from_particles(
        particles: [SVector<T, D>; N],
        rng: Pcg32,
        options: ParticleOptions<T>,
    ) -> Result<Self, ParticleError> {
        if N == 0 {
            return Err(ParticleError::NoParticles);
        }
        let threshold = options.resample_below;
        if !(threshold > T::zero() && threshold <= T::one()) {
            return Err(ParticleError::InvalidThreshold);
        }
        if particles
            .iter()
            .flat_map(|p| p.iter())
            .any(|v| !v.is_finite())
        {
            return Err(ParticleError::NonFiniteState);
        }
        Ok(Self {
            particles,
            ln_weights: [uniform_ln_weight::<T, N>(); N],
            rng,
            resample_below: threshold,
        })
    }

    /// Particles drawn around `mean`, component `d` spread by `spread[d]` (a uniform
    /// spread over a box gives "anywhere in the box").
    pub fn from_noise(
        mean: SVector<T, D>,
        spread: [Noise<T>; D],
        mut rng: Pcg32,
        options: ParticleOptions<T>,
    ) -> Result<Self, ParticleError> {
        if mean.iter().any(|v| !v.is_finite()) {
            return Err(ParticleError::NonFiniteState);
        }
        for (component, noise) in spread.iter().enumerate() {
            noise
                .validate()
                .map_err(|reason| ParticleError::Noise { component, reason })?;
        }
        let particles = core::array::from_fn(|_| perturbed(&mean, &spread, &mut rng));
        Self::from_particles(particles, rng, options)
    }

    /// Moves every particle to `f(x, u, dt)` plus a draw of the motion noise.
    /// Rejected (everything unchanged) when the step, the input or the noise is invalid
    /// or a moved particle is not finite.
    pub fn predict<const U: usize>(
        &mut self,
        model: &impl Motion<T, D, U>,
        u: &SVector<T, U>,
        dt: T,
    ) -> Result<(), PredictError> {
        let noise = validate_step(model, u, dt)?;
        let mut rng = self.rng;
        let mut moved = self.particles;
        for particle in moved.iter_mut() {
            *particle = perturbed(&model.transition(particle, u, dt), &noise, &mut rng);
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
        for (ln_weight, particle) in ln_weights.iter_mut().zip(self.particles.iter()) {
            *ln_weight += checked_ln_likelihood(likelihood.ln_likelihood(particle, z))?;
        }
        let ln_total = log_sum_exp(&ln_weights);
        if !ln_total.is_finite() {
            return Err(CorrectError::ZeroPosterior);
        }
        ln_weights.iter_mut().for_each(|w| *w -= ln_total);
        let effective_size = effective_size(&ln_weights);
        let resampled = effective_size < self.resample_below * lit(N as f64);
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
    /// weights and every weight becomes `1 / N`.
    pub fn resample(&mut self) {
        let weights = self.weights();
        let mut chosen = [0; N];
        systematic_resample(&weights, self.rng.unit_open(), &mut chosen);
        let source = self.particles;
        for (particle, &index) in self.particles.iter_mut().zip(chosen.iter()) {
            *particle = source[index];
        }
        self.ln_weights = [uniform_ln_weight::<T, N>(); N];
    }

    /// The particles.
    pub fn particles(&self) -> &[SVector<T, D>; N] {
        &self.particles
    }

    /// The natural logs of the normalised weights.
    pub fn ln_weights(&self) -> &[T; N] {
        &self.ln_weights
    }

    /// The normalised weights (they sum to one).
    pub fn weights(&self) -> [T; N] {
        self.ln_weights.map(T::exp)
    }

    /// The generator's current state (to save a run and replay it).
    pub fn rng(&self) -> Pcg32 {
        self.rng
    }

    /// The effective sample size `1 / sum_i w_i^2`, between 1 and `N`.
    pub fn effective_size(&self) -> T {
        effective_size(&self.ln_weights)
    }

    /// The weighted mean.
    pub fn mean(&self) -> SVector<T, D> {
        self.particles
            .iter()
            .zip(self.weights().iter())
            .fold(SVector::zeros(), |sum, (p, &w)| sum + p * w)
    }

    /// The weighted covariance `sum_i w_i (x_i - mean)(x_i - mean)^T`.
    pub fn covariance(&self) -> SMatrix<T, D, D> {
        let mean = self.mean();
        self.particles
            .iter()
            .zip(self.weights().iter())
            .fold(SMatrix::zeros(), |sum, (p, &w)| {
                let d = p - mean;
                sum + d * d.transpose() * w
            })
    }

    /// The weight of the particles inside the box `[lo, hi]` (componentwise).
    pub fn probability_in(&self, lo: &SVector<T, D>, hi: &SVector<T, D>) -> T {
        self.particles
            .iter()
            .zip(self.weights().iter())
            .filter(|(p, _)| {
                p.iter()
                    .zip(lo.iter().zip(hi.iter()))
                    .all(|(v, (l, h))| l <= v && v <= h)
            })
            .fold(T::zero(), |sum, (_, &w)| sum + w)
    }
}

fn uniform_ln_weight<T: RealField + Copy, const N: usize>() -> T {
    -lit::<T>(N as f64).ln()
}

/// `centre` plus one draw of each component's noise.
fn perturbed<T: RealField + Copy, const D: usize>(
    centre: &SVector<T, D>,
    noise: &[Noise<T>; D],
    rng: &mut Pcg32,
) -> SVector<T, D> {
    SVector::from_fn(|component, _| centre[component] + rng.sample(&noise[component]))
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
                .particles()
                .map(|p| core::array::from_fn(|d| p[d].to_bits())),
            filter.ln_weights().map(f64::to_bits),
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
        let weights = filter.weights();
        let total: f64 = weights.iter().sum();
        assert!((total - 1.0).abs() < 1e-12);
        let heaviest =
            weights.iter().enumerate().fold(
                (0, 0.0),
                |best, (i, &w)| if w > best.1 { (i, w) } else { best },
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
        let total: f32 = filter.weights().iter().sum();
        assert!((total - 1.0).abs() < 1e-5);
        assert!((filter.mean()[0] - 0.5).abs() < 0.2);
    }

    proptest! {
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
            let weights = filter.weights();
            let total: f64 = weights.iter().sum();
            prop_assert!((total - 1.0).abs() < 1e-9);
            prop_assert!(weights.iter().all(|&w| (0.0..=1.0).contains(&w)));
            prop_assert!(outcome.effective_size >= 1.0 - 1e-9 && outcome.effective_size <= 128.0 + 1e-9);
            prop_assert!(filter.covariance()[(0, 0)] >= 0.0);
        }
    }
}
