use nalgebra::{SVector, Vector1};
use reckon_runtime::grid::{Axis, Grid1, GridOptions, Likelihood, Motion, Noise};
use reckon_runtime::particle::{ParticleFilter, ParticleOptions, Pcg32, SampledMotion};

use super::*;
use crate::back::bayes::plan;
use crate::back::bayes::test_specs::{checked_model, options, MARKER_TRACK, MIXED_NOISE};
use crate::options::Method;

fn bayes_plan(text: &str, method: Method) -> BayesPlan {
    plan(&checked_model(text), &options(method)).unwrap_or_else(|e| panic!("no plan: {e:?}"))
}

fn nothing() -> SVector<f64, 0> {
    SVector::zeros()
}

/// A linear Gaussian random walk read directly: the Kalman filter is its exact
/// posterior.
const WALK: &str = "model walk
state { x : m in -5 m .. 5 m by 2 cm }
input { v : m/s }
motion discrete { x = x + v * dt }
process { x ~ normal(5 cm) }
sensor pos { p : m = x
  noise ~ normal(20 cm) }
initial { x ~ normal(1 m, 50 cm) }
";

/// The marker track's position receives the slip (1 cm) and the odometry noise
/// (0.02 m/s) times `dt`; two normals combine by adding variances:
/// sqrt(0.01^2 + (0.02 * 0.1)^2) = 0.010198039 m (hand computed).
#[test]
fn a_grid_axis_combines_its_normal_noises() {
    let plan = bayes_plan(MARKER_TRACK, Method::Grid);
    let motion = GridMotion::new(&plan, 1.0).expect("grid plan");
    let step = motion.at(&[0.5]);
    let [kernel] = Motion::<f64, 1, 0>::noise(&step, &nothing(), 0.1);
    match kernel {
        Noise::Normal { std_dev } => assert!((std_dev - 0.010_198_039).abs() < 1e-9),
        other => panic!("{other:?}"),
    }
    // The motion is a translation by speed * dt.
    let shift = Motion::<f64, 1, 0>::translation(&step, &nothing(), 0.1).expect("translation");
    assert!((shift[0] - 0.05).abs() < 1e-15);
    let moved = Motion::<f64, 1, 0>::transition(&step, &Vector1::new(3.0), &nothing(), 0.1);
    assert!((moved[0] - 3.05).abs() < 1e-15);
    // A width scale of 2 doubles every source's width, so the combined one.
    let doubled = GridMotion::new(&plan, 2.0).expect("grid plan");
    let [kernel] = Motion::<f64, 1, 0>::noise(&doubled.at(&[0.5]), &nothing(), 0.1);
    assert_eq!(
        kernel,
        Noise::Normal {
            std_dev: 0.020_396_078_054_371_14
        }
    );
}

/// The sampled transition draws the sources in order (the slip, then the odometry
/// noise) from the filter's generator: x + (v + w_v) dt + w_x.
#[test]
fn the_sampled_transition_draws_each_source_in_order() {
    let plan = bayes_plan(MIXED_NOISE, Method::Particle);
    let motion = ParticleMotion::new(&plan, 1.0);
    let step = motion.at(&[0.4]);
    let mut rng = Pcg32::new(9, 0);
    let mut replay = rng;
    let x = Vector1::new(2.0);
    let next = SampledMotion::<f64, 1, 0>::sample_transition(&step, &x, &nothing(), 0.5, &mut rng);
    let slip = replay.sample(&Noise::Triangle { half_width: 0.02 });
    let odometry = replay.sample(&Noise::Normal { std_dev: 0.1 });
    let expected = 2.0 + (0.4 + odometry) * 0.5 + slip;
    assert!(
        (next[0] - expected).abs() < 1e-15,
        "{} vs {expected}",
        next[0]
    );
    assert_eq!(rng, replay);
    assert!(SampledMotion::<f64, 1, 0>::check_noise(&step, &nothing(), 0.5).is_ok());
    // A process-noise factor of zero leaves widths of zero, which the filter refuses.
    let silent = ParticleMotion::new(&plan, 0.0);
    assert!(SampledMotion::<f64, 1, 0>::check_noise(&silent.at(&[0.4]), &nothing(), 0.5).is_err());
}

/// The wall sensor's uniform noise of half-width 5 cm has density 1 / 0.1 m inside
/// and none outside (hand computed); the particle plan also makes every state outside
/// the range 0 .. 10 m impossible.
#[test]
fn likelihoods_follow_the_reading_noise_shape_and_the_support() {
    let plan = bayes_plan(MIXED_NOISE, Method::Particle);
    let wall = SensorLikelihood::new(&plan, 0).expect("sensor");
    let at = |x: f64, z: f64| {
        Likelihood::<f64, 1, 0>::ln_likelihood(
            &wall.reading(&[z], &[]),
            &Vector1::new(x),
            &nothing(),
        )
    };
    assert!((at(3.0, 7.03) - 10f64.ln()).abs() < 1e-12);
    assert_eq!(at(3.0, 7.06), f64::NEG_INFINITY);
    assert_eq!(at(10.5, -0.5), f64::NEG_INFINITY);
    assert!(SensorLikelihood::new(&plan, 1).is_none());
}

/// The marker detector reads cos and sin of the phase, each with normal noise of 0.1:
/// at x = 0.5 m the phase is a quarter turn, so readings (0.1, 0.9) leave residuals
/// (0.1, -0.1), and the log likelihood is 2 (-ln(0.1 sqrt(2 pi)) - 0.5) (hand
/// computed: ln sqrt(2 pi) = 0.918938533).
#[test]
fn a_two_component_likelihood_sums_its_components() {
    let plan = bayes_plan(MARKER_TRACK, Method::Grid);
    let marker = SensorLikelihood::new(&plan, 0).expect("sensor");
    let value = Likelihood::<f64, 1, 0>::ln_likelihood(
        &marker.reading(&[0.1, 0.9], &[]),
        &Vector1::new(0.5),
        &nothing(),
    );
    let expected = 2.0 * (-(0.1f64.ln()) - 0.918_938_533_204_672_8 - 0.5);
    assert!((value - expected).abs() < 1e-12, "{value} vs {expected}");
}

/// The scalar Kalman filter of the walk (common practice, no source): the exact
/// posterior mean and variance after each predict-correct cycle.
fn kalman_walk(cycles: &[(f64, f64)], dt: f64) -> Vec<(f64, f64)> {
    let (q, r) = (0.05f64.powi(2), 0.2f64.powi(2));
    let (mut mean, mut variance) = (1.0, 0.25);
    cycles
        .iter()
        .map(|&(v, z)| {
            mean += v * dt;
            variance += q;
            let gain = variance / (variance + r);
            mean += gain * (z - mean);
            variance *= 1.0 - gain;
            (mean, variance)
        })
        .collect()
}

const WALK_CYCLES: [(f64, f64); 6] = [
    (0.3, 1.05),
    (0.3, 1.2),
    (0.3, 0.9),
    (-0.2, 1.3),
    (0.0, 1.1),
    (0.5, 1.25),
];

/// On the linear Gaussian walk the grid, run through the adapters, matches the Kalman
/// filter. Its discretisation adds about width^2 / 12 of variance at the start and at
/// each prediction (Sheppard's correction, see the runtime's grid docs), which the
/// corrections then shrink, so after k cycles the variance exceeds the Kalman one by
/// at most (k + 1) width^2 / 12; the mean is exact up to well under half a cell.
#[test]
fn the_grid_agrees_with_the_kalman_filter_on_a_linear_gaussian_walk() {
    let plan = bayes_plan(WALK, Method::Grid);
    let motion = GridMotion::new(&plan, 1.0).expect("grid plan");
    let pos = SensorLikelihood::new(&plan, 0).expect("sensor");
    let axis_plan = plan.grid.as_ref().expect("grid").axes[0];
    assert_eq!(axis_plan.count, 500);
    let axis =
        Axis::<f64, 512>::with_count(axis_plan.lo, axis_plan.width, axis_plan.count).expect("axis");
    let mut grid = Grid1::from_density(
        axis,
        1.0,
        Noise::Normal { std_dev: 0.5 },
        GridOptions::default(),
    )
    .expect("grid");
    let dt = 0.1;
    let cell_variance = axis_plan.width.powi(2) / 12.0;
    for (k, (&(v, z), (mean, variance))) in WALK_CYCLES
        .iter()
        .zip(kalman_walk(&WALK_CYCLES, dt))
        .enumerate()
    {
        grid.predict(&motion.at(&[v]), &nothing(), dt)
            .expect("predict");
        grid.correct(&pos.reading(&[z], &[]), &nothing())
            .expect("correct");
        let excess = grid.variance() - variance;
        assert!(
            excess > -1e-9 && excess <= (k as f64 + 2.0) * cell_variance,
            "cycle {k}: variance {} vs {variance}",
            grid.variance()
        );
        assert!(
            (grid.mean() - mean).abs() < 0.1 * axis_plan.width,
            "cycle {k}"
        );
    }
}

/// The particle filter, run through the adapters, matches the Kalman filter within its
/// sampling error: 6 standard errors of a weighted mean (sqrt(P / ESS)) and of a
/// variance estimate (P sqrt(2 / ESS)), widened by the square root of the cycles for
/// the resampling noise that accumulates (common practice, no source).
#[test]
fn the_particle_filter_agrees_with_the_kalman_filter_on_a_linear_gaussian_walk() {
    let plan = bayes_plan(WALK, Method::Particle);
    let motion = ParticleMotion::new(&plan, 1.0);
    let pos = SensorLikelihood::new(&plan, 0).expect("sensor");
    let options = ParticleOptions {
        resample_below: plan.resample_below,
    };
    let mut filter = ParticleFilter::<f64, 1, 4096>::from_noise_counted(
        4000,
        Vector1::new(1.0),
        [Noise::Normal { std_dev: 0.5 }],
        Pcg32::new(21, 0),
        options,
    )
    .expect("particles");
    let dt = 0.1;
    for (k, (&(v, z), (mean, variance))) in WALK_CYCLES
        .iter()
        .zip(kalman_walk(&WALK_CYCLES, dt))
        .enumerate()
    {
        filter
            .predict(&motion.at(&[v]), &nothing(), dt)
            .expect("predict");
        let correction = filter
            .correct(&pos.reading(&[z], &[]), &nothing())
            .expect("correct");
        let spread = 6.0 * ((k + 1) as f64).sqrt() / correction.effective_size.sqrt();
        let got = filter.covariance()[(0, 0)];
        assert!(
            (filter.mean()[0] - mean).abs() < spread * variance.sqrt(),
            "cycle {k}: mean {} vs {mean}",
            filter.mean()[0]
        );
        assert!(
            (got - variance).abs() < spread * std::f64::consts::SQRT_2 * variance,
            "cycle {k}: variance {got} vs {variance}"
        );
    }
}
