//! The 1-D grid filter: the cells of one axis (up to the capacity `N`).

use nalgebra::{RealField, SVector, Vector1};

use super::line::Axis;
use super::model::{
    validate_reading, validate_step, CorrectError, Likelihood, Motion, PredictError,
};
use super::noise::{lit, Noise};
use super::plane::Plane;
use super::{
    axis_kernel, checked_translation, record_mode, GridCorrection, GridError, GridOptions,
    GridPrediction, Mode,
};

/// A belief over one state component on the axis's cells (its count, at most `N`). See
/// the [module](super) for the discretisation, the boundary policy and the cost.
#[derive(Clone, Debug, PartialEq)]
pub struct Grid1<T, const N: usize> {
    plane: Plane<T, N, 1>,
}

/// The single row of a 1-D grid, centred at zero so the row index never moves.
fn unit_row<T: RealField + Copy>() -> Axis<T, 1> {
    Axis {
        lo: lit(-0.5),
        width: T::one(),
        count: 1,
    }
}

impl<T: RealField + Copy, const N: usize> Grid1<T, N> {
    /// A belief with the given (unnormalised, non-negative) cell masses; the masses past
    /// the axis's count must be zero ([`GridError::InvalidMass`] otherwise).
    pub fn from_masses(
        axis: Axis<T, N>,
        masses: [T; N],
        options: GridOptions<T>,
    ) -> Result<Self, GridError> {
        Ok(Self {
            plane: Plane::new(axis, unit_row(), [masses], options)?,
        })
    }

    /// The same mass in every cell of the axis: "anywhere on the grid".
    pub fn uniform(axis: Axis<T, N>, options: GridOptions<T>) -> Result<Self, GridError> {
        Self::from_masses(axis, axis.ones(), options)
    }

    /// The density `shape` centred at `mean`, integrated over each cell.
    pub fn from_density(
        axis: Axis<T, N>,
        mean: T,
        shape: Noise<T>,
        options: GridOptions<T>,
    ) -> Result<Self, GridError> {
        if !mean.is_finite() {
            return Err(GridError::NonFiniteMean);
        }
        shape.validate()?;
        let masses = axis.cell_masses(mean, &shape);
        Self::from_masses(axis, masses, options)
    }

    /// Moves the belief one step through `model`. Rejected (belief unchanged) when the
    /// step, the input, the noise or a transition is invalid, or when all mass leaves.
    pub fn predict<const U: usize>(
        &mut self,
        model: &impl Motion<T, 1, U>,
        u: &SVector<T, U>,
        dt: T,
    ) -> Result<GridPrediction<T>, PredictError> {
        let [noise] = validate_step(model, u, dt)?;
        let translation = checked_translation(model.translation(u, dt))?;
        let kernel = axis_kernel(&self.plane.x, &noise, translation.map(|t| t[0]));
        match translation {
            Some(_) => self.plane.translate(&kernel, None),
            None => self.plane.push(
                |x, _| Some((model.transition(&Vector1::new(x), u, dt)[0], T::zero())),
                &kernel,
                None,
            ),
        }
    }

    /// Multiplies the belief by the likelihood of reading `z` and normalises. Rejected
    /// (belief bit-identical) when `z` is not finite, the likelihood is NaN or `+inf`,
    /// or it is zero wherever the belief has mass.
    pub fn correct<const M: usize>(
        &mut self,
        likelihood: &impl Likelihood<T, 1, M>,
        z: &SVector<T, M>,
    ) -> Result<GridCorrection<T>, CorrectError> {
        validate_reading(z)?;
        self.plane
            .correct(|x, _| likelihood.ln_likelihood(&Vector1::new(x), z))
    }

    /// The axis.
    pub fn axis(&self) -> &Axis<T, N> {
        &self.plane.x
    }

    /// The masses of the axis's cells (they sum to one): `axis().count()` of them.
    pub fn masses(&self) -> &[T] {
        &self.plane.mass[0][..self.plane.x.count]
    }

    /// The first and last cells with mass; every cell outside is exactly zero.
    pub fn support(&self) -> (usize, usize) {
        (self.plane.support.cols.first, self.plane.support.cols.last)
    }

    /// The mean of the belief.
    pub fn mean(&self) -> T {
        self.plane.moments().0[0]
    }

    /// The variance of the belief, each cell's mass at the cell's centre.
    pub fn variance(&self) -> T {
        self.plane.moments().1[0][0]
    }

    /// The variance of the belief read as a histogram, each cell's mass spread evenly
    /// over its cell: [`variance`](Self::variance) plus `width^2 / 12`, the variance of
    /// a uniform distribution over one cell. This is the uncertainty to report: a
    /// belief held in one cell still leaves the state anywhere in that cell, so the
    /// centre-point variance (zero then) would claim a precision the grid cannot give.
    pub fn histogram_variance(&self) -> T {
        let width = self.plane.x.width();
        self.variance() + width * width / lit(12.0)
    }

    /// Writes the local maxima holding at least `min_fraction_of_peak` of the largest
    /// mass into `out` (left to right, as many as fit) and returns how many there are.
    /// Of a plateau of equal masses only the rightmost cell counts.
    pub fn modes(&self, min_fraction_of_peak: T, out: &mut [Mode<T, 1>]) -> usize {
        let axis = self.plane.x;
        let mut found = 0;
        self.plane.modes(min_fraction_of_peak, |_, col, mass| {
            let mode = Mode {
                cell: [col],
                centre: Vector1::new(axis.centre(col)),
                mass,
            };
            record_mode(out, found, mode);
            found += 1;
        })
    }

    /// The probability that the state lies in `[lo, hi]`: the mass of the cells whose
    /// centres do.
    pub fn probability_between(&self, lo: T, hi: T) -> T {
        self.plane.probability_in((lo, hi), (-T::one(), T::one()))
    }
}

#[cfg(test)]
mod tests {
    use core::cell::Cell;

    use nalgebra::{SVector, Vector1};
    use proptest::prelude::*;

    use super::*;
    use crate::grid::test_models::{
        CountingLikelihood, Direct, Drift, Mapped, MarkerTrack, ScalarKalman, MARKERS,
    };
    use crate::grid::ResidualLikelihood;

    fn axis<const N: usize>(lo: f64, width: f64) -> Axis<f64, N> {
        Axis::new(lo, width).expect("valid test axis")
    }

    #[test]
    fn histogram_variance_is_that_of_the_cells_as_uniform_densities() {
        // Mass evenly over k cells of width w is the uniform distribution on k w, of
        // variance (k w)^2 / 12 (common practice, no source): exactly what the
        // histogram reading gives, where the centre-point variance is short by w^2 / 12.
        let w = 0.25;
        for k in [1usize, 2, 7] {
            let masses: [f64; 16] = core::array::from_fn(|i| if i < k { 1.0 } else { 0.0 });
            let grid = Grid1::from_masses(axis(0.0, w), masses, GridOptions::default())
                .expect("valid masses");
            let uniform = (k as f64 * w).powi(2) / 12.0;
            assert!(
                (grid.histogram_variance() - uniform).abs() < 1e-12,
                "{k} cells"
            );
            assert!((grid.variance() - (uniform - w * w / 12.0)).abs() < 1e-12);
        }
    }

    fn normal(std_dev: f64) -> Noise<f64> {
        Noise::Normal { std_dev }
    }

    fn keep_tails() -> GridOptions<f64> {
        GridOptions { skip_below: 0.0 }
    }

    fn peak<const N: usize>(grid: &Grid1<f64, N>) -> f64 {
        grid.masses().iter().fold(0.0, |a, &b| a.max(b))
    }

    fn bits<const N: usize>(grid: &Grid1<f64, N>) -> [u64; N] {
        grid.plane.mass[0].map(f64::to_bits)
    }

    fn drift(noise: Noise<f64>) -> Drift<f64> {
        Drift {
            noise,
            as_translation: true,
        }
    }

    #[test]
    fn linear_gaussian_run_matches_the_kalman_filter() {
        // Closed form: the scalar Kalman recursion (common practice, no source).
        // Tolerance: every discretisation (the initial density and each prediction's
        // kernel) adds about h^2/12 of variance (Sheppard's correction, from memory);
        // a correction multiplies a prior variance error by (R/(P+R))^2 <= 1 and moves
        // the mean by at most |innovation| R/(P+R)^2 per unit of prior variance error.
        const H: f64 = 0.05;
        let mut grid =
            Grid1::<f64, 600>::from_density(axis(-10.0, H), 0.0, normal(1.0), keep_tails())
                .expect("valid prior");
        let mut kalman = ScalarKalman {
            mean: 0.0,
            variance: 1.0,
        };
        let (velocity, q_std, r_std) = (0.5, 0.3, 0.5);
        let motion = drift(normal(q_std));
        let reading = ResidualLikelihood(Direct {
            noise: normal(r_std),
        });
        let sheppard = H * H / 12.0;
        let mut variance_tolerance = sheppard;
        let mut mean_tolerance = 0.0;
        for z in [0.7, 0.9, 1.6, 2.1, 2.4, 3.9, 3.1] {
            grid.predict(&motion, &Vector1::new(velocity), 1.0)
                .expect("prediction stays on the grid");
            kalman.predict(velocity, q_std * q_std);
            variance_tolerance += sheppard;
            grid.correct(&reading, &Vector1::new(z))
                .expect("consistent reading");
            let (mean_factor, innovation) = kalman.correct(z, r_std * r_std);
            mean_tolerance += innovation.abs() * mean_factor * variance_tolerance;
            assert!(
                (grid.mean() - kalman.mean).abs() <= mean_tolerance + 1e-12,
                "mean {} vs {}",
                grid.mean(),
                kalman.mean
            );
            assert!(
                (grid.variance() - kalman.variance).abs() <= variance_tolerance,
                "variance {} vs {}",
                grid.variance(),
                kalman.variance
            );
        }
    }

    #[test]
    fn disagreeing_reading_gives_the_gaussian_product() {
        // Gaussian product (Bromiley, TINA Memo 2003-003, sec. 1): N(3, 0.7^2) x
        // N(4.5, 1^2) -> mean 3.49329, variance 0.328859. Tolerance: the published
        // rounding plus the effect of the prior's extra h^2/12 of variance, through
        // d mean / d s_f^2 = (mu_g - mu_f) s_g^2 / (s_f^2 + s_g^2)^2 and
        // d s^2 / d s_f^2 = s_g^4 / (s_f^2 + s_g^2)^2.
        const H: f64 = 0.01;
        let mut grid =
            Grid1::<f64, 1200>::from_density(axis(-2.0, H), 3.0, normal(0.7), keep_tails())
                .expect("valid prior");
        let reading = ResidualLikelihood(Direct { noise: normal(1.0) });
        grid.correct(&reading, &Vector1::new(4.5))
            .expect("consistent reading");
        let sheppard = H * H / 12.0;
        let total = 0.49 + 1.0;
        assert!((grid.mean() - 3.49329).abs() <= 5e-6 + 1.5 / (total * total) * sheppard);
        assert!((grid.variance() - 0.328859).abs() <= 5e-7 + sheppard / (total * total));
    }

    #[test]
    fn equal_widths_meet_at_the_midpoint_however_far_apart() {
        // Gaussian product (Bromiley, TINA Memo 2003-003, sec. 1): equal variances give
        // the midpoint and half the variance, so the peak is sqrt 2 times higher.
        // Tolerance: the prior has s_f^2 = 1 + h^2/12, which moves the mean by
        // d h^2/12 / (2 + h^2/12) and the variance by about h^2/48.
        const H: f64 = 0.02;
        let sheppard = H * H / 12.0;
        for distance in [0.5, 3.0, 8.0, 12.0] {
            let mut grid = Grid1::<f64, 2000>::from_density(
                axis(-20.0, H),
                -distance,
                normal(1.0),
                keep_tails(),
            )
            .expect("valid prior");
            let likelihood_shape = Grid1::<f64, 2000>::from_density(
                axis(-20.0, H),
                distance,
                normal(1.0),
                keep_tails(),
            )
            .expect("valid density");
            let prior_peak = peak(&grid);
            let reading = ResidualLikelihood(Direct { noise: normal(1.0) });
            grid.correct(&reading, &Vector1::new(distance))
                .expect("consistent reading");
            assert!(
                grid.mean().abs() <= distance * sheppard / 2.0 + 1e-9,
                "{distance}"
            );
            assert!(
                (grid.variance() - 0.5).abs() <= sheppard / 4.0 + 1e-9,
                "{distance}"
            );
            let posterior_peak = peak(&grid);
            assert!(posterior_peak > prior_peak && posterior_peak > peak(&likelihood_shape));
            assert!((posterior_peak / prior_peak - 2f64.sqrt()).abs() < 1e-3);
        }
    }

    /// `P(S <= s)` for the sum `S` of two symmetric triangles of half-width `a`: each is
    /// the sum of two uniforms on `[-a/2, a/2]`, so `S / a + 2` is the sum of four unit
    /// uniforms, whose CDF on `[0, 4]` is `(1/4!) sum_{k <= t} (-1)^k C(4, k) (t - k)^4`
    /// (Irwin-Hall distribution, from memory). Its density is the piecewise cubic
    /// `(1/3!) sum_{k <= t} (-1)^k C(4, k) (t - k)^3` on `[-2a, 2a]`.
    fn triangle_pair_cdf(s: f64, a: f64) -> f64 {
        let t = (s / a + 2.0).clamp(0.0, 4.0);
        let binomial = [1.0, 4.0, 6.0, 4.0, 1.0];
        let sum: f64 = (0..=4)
            .filter(|&k| f64::from(k) <= t)
            .map(|k| {
                let sign = if k % 2 == 0 { 1.0 } else { -1.0 };
                sign * binomial[k as usize] * (t - f64::from(k)).powi(4)
            })
            .sum();
        sum / 24.0
    }

    #[test]
    fn triangle_convolved_with_triangle_is_the_piecewise_cubic() {
        // Tolerance per cell, derived: the grid moves each initial cell's mass to the
        // cell centre (offset |E| <= h/2) before adding the second triangle, whose
        // density has slope at most 1/a^2; a cell's probability under a shift E changes
        // by at most |E| h / a^2 <= h^2 / (2 a^2).
        const H: f64 = 0.02;
        let a = 1.0;
        let triangle = Noise::Triangle { half_width: a };
        let mut grid = Grid1::<f64, 300>::from_density(axis(-3.0, H), 0.0, triangle, keep_tails())
            .expect("valid prior");
        let motion = drift(triangle);
        grid.predict(&motion, &Vector1::new(0.0), 1.0)
            .expect("stays on grid");
        let tolerance = H * H / (2.0 * a * a);
        let mut worst: f64 = 0.0;
        for (index, &mass) in grid.masses().iter().enumerate() {
            let lo = -3.0 + index as f64 * H;
            let expected = triangle_pair_cdf(lo + H, a) - triangle_pair_cdf(lo, a);
            worst = worst.max((mass - expected).abs());
        }
        assert!(worst <= tolerance, "worst cell error {worst}");
        // The cubic's peak density is 2/(3a) (Irwin-Hall density at its centre, 2/3).
        assert!(
            (triangle_pair_cdf(H / 2.0, a) - triangle_pair_cdf(-H / 2.0, a) - H * 2.0 / 3.0).abs()
                < 1e-6
        );
        // Variance of the sum: 2 a^2/6 (common practice, no source), plus h^2/12 per
        // discretisation.
        assert!((grid.variance() - a * a / 3.0).abs() < 3.0 * H * H / 12.0);
    }

    #[test]
    fn repeated_prediction_adds_the_motion_variance_each_step() {
        // Sums of independent variables add variances (common practice, no source);
        // the cell-integrated kernel has h^2/12 more (Sheppard's correction, from
        // memory). The shift of 0.37 m is 7.4 cells: a sub-cell shift is exact.
        // Sheppard's term assumes a smooth density: the triangle's kinks leave a small
        // residue, the uniform's jumps one of the order of the term itself.
        const H: f64 = 0.05;
        for (noise, tolerance) in [
            (normal(0.4), 1e-9),
            (Noise::Triangle { half_width: 0.9 }, 1e-5),
            (Noise::Uniform { half_width: 0.6 }, H * H / 12.0),
        ] {
            let mut grid =
                Grid1::<f64, 800>::from_density(axis(-20.0, H), -5.0, normal(0.5), keep_tails())
                    .expect("valid prior");
            let motion = drift(noise);
            let mut previous = (grid.mean(), grid.variance());
            for _ in 0..6 {
                grid.predict(&motion, &Vector1::new(0.37), 1.0)
                    .expect("on grid");
                let now = (grid.mean(), grid.variance());
                assert!((now.0 - previous.0 - 0.37).abs() < 1e-9, "{noise:?}");
                let growth = now.1 - previous.1;
                assert!(
                    (growth - noise.variance() - H * H / 12.0).abs() < tolerance,
                    "{noise:?}: growth {growth}"
                );
                previous = now;
            }
        }
    }

    #[test]
    fn predict_correct_cycles_settle_to_the_steady_state_width() {
        // Steady state of the scalar random walk with direct readings:
        // P- = (Q + sqrt(Q^2 + 4 Q R)) / 2, P+ = P- R / (P- + R) (Welch & Bishop,
        // TR 95-041, with A = H = 1). Tolerance as in the Kalman comparison: a few
        // h^2/12 of discretisation variance.
        const H: f64 = 0.02;
        let (q, r) = (0.04_f64, 0.25_f64);
        let mut grid = Grid1::<f64, 1000>::from_density(
            axis(-10.0, H),
            0.0,
            normal(2.0),
            GridOptions::default(),
        )
        .expect("valid prior");
        let motion = drift(normal(q.sqrt()));
        let reading = ResidualLikelihood(Direct {
            noise: normal(r.sqrt()),
        });
        let mut widths = [0.0; 60];
        for width in widths.iter_mut() {
            grid.predict(&motion, &Vector1::new(0.0), 1.0)
                .expect("on grid");
            grid.correct(&reading, &Vector1::new(0.0))
                .expect("consistent");
            *width = grid.variance();
        }
        let prior = (q + (q * q + 4.0 * q * r).sqrt()) / 2.0;
        let steady = prior * r / (prior + r);
        assert!((widths[59] - widths[58]).abs() < 1e-12);
        assert!(
            (widths[59] - steady).abs() < 3.0 * H * H / 12.0,
            "{} vs {steady}",
            widths[59]
        );
        assert!(widths[0] > widths[59]);
    }

    #[test]
    fn cart_between_identical_markers_finds_its_place() {
        // Invented scenario: identical markers at irregular spacing, reading the distance
        // to the next one; a uniform prior first splits into one mode per marker gap that
        // fits the reading, then collapses onto the true position.
        const H: f64 = 0.05;
        let track = MarkerTrack {
            markers: MARKERS,
            noise: normal(0.15),
        };
        let motion = drift(normal(0.1));
        let mut grid =
            Grid1::<f64, 1000>::uniform(axis(0.0, H), GridOptions::default()).expect("valid prior");
        let (speed, mut truth) = (0.9, 2.2);
        let mut modes = [Mode {
            cell: [0],
            centre: Vector1::new(0.0),
            mass: 0.0,
        }; 16];
        for step in 0..25 {
            let z = track.distance_ahead(truth).expect("marker ahead");
            grid.correct(&track, &Vector1::new(z))
                .expect("consistent reading");
            if step == 0 {
                assert!(grid.modes(0.5, &mut modes) >= 5, "one mode per fitting gap");
            }
            grid.predict(&motion, &Vector1::new(speed), 1.0)
                .expect("on grid");
            truth += speed;
        }
        let near_truth = grid.probability_between(truth - 0.5, truth + 0.5);
        assert!(near_truth > 0.95, "mass near the truth {near_truth}");
        assert_eq!(grid.modes(0.05, &mut modes), 1);
        assert!((modes[0].centre[0] - truth).abs() < 0.3);
    }

    #[test]
    fn impossible_reading_is_rejected_and_the_belief_kept() {
        let mut grid = Grid1::<f64, 200>::from_density(
            axis(-5.0, 0.05),
            0.0,
            normal(0.5),
            GridOptions::default(),
        )
        .expect("valid prior");
        let before = bits(&grid);
        let support = grid.support();
        let reading = ResidualLikelihood(Direct {
            noise: Noise::Uniform { half_width: 0.5 },
        });
        assert_eq!(
            grid.correct(&reading, &Vector1::new(40.0)),
            Err(CorrectError::ZeroPosterior)
        );
        assert_eq!(
            grid.correct(&reading, &Vector1::new(f64::NAN)),
            Err(CorrectError::NonFiniteReading)
        );
        let broken = CountingLikelihood {
            ln_likelihood: |x: f64, _| if x > 0.0 { f64::NAN } else { 0.0 },
            calls: Cell::new(0),
        };
        assert_eq!(
            grid.correct(&broken, &Vector1::new(0.0)),
            Err(CorrectError::InvalidLikelihood)
        );
        assert_eq!(bits(&grid), before);
        assert_eq!(grid.support(), support);
    }

    #[test]
    fn rejected_predictions_keep_the_belief() {
        let mut grid = Grid1::<f64, 100>::from_density(
            axis(0.0, 0.1),
            5.0,
            normal(0.3),
            GridOptions::default(),
        )
        .expect("valid prior");
        let before = bits(&grid);
        let motion = drift(normal(0.1));
        let step = |grid: &mut Grid1<f64, 100>, velocity: f64, dt: f64| {
            grid.predict(&motion, &Vector1::new(velocity), dt)
        };
        assert_eq!(
            step(&mut grid, 100.0, 1.0),
            Err(PredictError::AllMassLeftGrid)
        );
        assert_eq!(
            step(&mut grid, 1.0, 0.0),
            Err(PredictError::NonPositiveStep)
        );
        assert_eq!(
            step(&mut grid, 1.0, f64::NAN),
            Err(PredictError::NonFiniteStep)
        );
        assert_eq!(
            step(&mut grid, f64::INFINITY, 1.0),
            Err(PredictError::NonFiniteInput)
        );
        let pushed_off = Mapped {
            map: |x: &SVector<f64, 1>| x.map(|v| v + 1e3),
            noise: normal(0.1),
            calls: Cell::new(0),
        };
        assert_eq!(
            grid.predict(&pushed_off, &SVector::zeros(), 1.0),
            Err(PredictError::AllMassLeftGrid)
        );
        let exploding = Mapped {
            map: |x: &SVector<f64, 1>| x.map(|v| if v > 5.0 { f64::NAN } else { v }),
            noise: normal(0.1),
            calls: Cell::new(0),
        };
        assert_eq!(
            grid.predict(&exploding, &SVector::zeros(), 1.0),
            Err(PredictError::NonFiniteTransition)
        );
        let no_noise = drift(Noise::Normal { std_dev: 0.0 });
        assert!(matches!(
            grid.predict(&no_noise, &Vector1::new(1.0), 1.0),
            Err(PredictError::InvalidNoise { component: 0, .. })
        ));
        assert_eq!(bits(&grid), before);
    }

    #[test]
    fn mass_pushed_past_the_end_is_dropped_and_reported() {
        // Half of a symmetric belief centred on the last cell edge leaves the grid.
        let mut grid =
            Grid1::<f64, 100>::from_density(axis(0.0, 0.1), 9.0, normal(0.2), keep_tails())
                .expect("valid prior");
        let motion = drift(normal(0.05));
        let moved = grid
            .predict(&motion, &Vector1::new(1.0), 1.0)
            .expect("half stays");
        assert!((moved.mass_lost - 0.5).abs() < 0.01, "{}", moved.mass_lost);
        let total: f64 = grid.masses().iter().sum();
        assert!((total - 1.0).abs() < 1e-12);
    }

    #[test]
    fn pushed_mass_keeps_the_mean_of_the_moved_centres() {
        // Linear splitting between neighbouring centres preserves the first moment, and
        // the zero-mean noise kernel adds nothing to it: after a nonlinear move the mean
        // is the mass-weighted mean of f(centre).
        let mut grid =
            Grid1::<f64, 400>::from_density(axis(-10.0, 0.05), 1.0, normal(0.8), keep_tails())
                .expect("valid prior");
        let f = |x: f64| x + 0.6 * x.sin() + 0.3;
        let expected: f64 = grid
            .masses()
            .iter()
            .enumerate()
            .map(|(i, &m)| m * f(grid.axis().centre(i)))
            .sum();
        let motion = Mapped {
            map: |x: &SVector<f64, 1>| x.map(f),
            noise: normal(0.2),
            calls: Cell::new(0),
        };
        grid.predict(&motion, &SVector::zeros(), 1.0)
            .expect("on grid");
        assert!((grid.mean() - expected).abs() < 1e-9);
    }

    #[test]
    fn pushing_and_translating_agree_for_a_shift() {
        // The push path splits a shift of 0.37 cells... of 7.4 cells between two
        // neighbours (fraction 0.4): extra variance 0.4 * 0.6 h^2, mean unchanged.
        const H: f64 = 0.05;
        let start = Grid1::<f64, 400>::from_density(axis(-10.0, H), 0.0, normal(0.7), keep_tails())
            .expect("valid prior");
        let (mut translated, mut pushed) = (start.clone(), start);
        for as_translation in [true, false] {
            let motion = Drift {
                noise: normal(0.3),
                as_translation,
            };
            let grid = if as_translation {
                &mut translated
            } else {
                &mut pushed
            };
            grid.predict(&motion, &Vector1::new(0.37), 1.0)
                .expect("on grid");
        }
        assert!((translated.mean() - pushed.mean()).abs() < 1e-9);
        let extra = pushed.variance() - translated.variance();
        assert!((extra - 0.24 * H * H).abs() < 1e-9, "{extra}");
    }

    #[test]
    fn cost_follows_the_support_not_the_grid() {
        // A narrow belief on 20 000 cells: the model runs once per cell with mass.
        let mut grid = Grid1::<f64, 20_000>::from_density(
            axis(0.0, 0.01),
            100.0,
            normal(0.05),
            GridOptions::default(),
        )
        .expect("valid prior");
        let (first, last) = grid.support();
        let width = last - first + 1;
        assert!(width < 200, "support {width} cells");
        let motion = Mapped {
            map: |x: &SVector<f64, 1>| x.map(|v| v + 0.5),
            noise: normal(0.02),
            calls: Cell::new(0),
        };
        grid.predict(&motion, &SVector::zeros(), 1.0)
            .expect("on grid");
        assert!(motion.calls.get() <= width);
        let reading = CountingLikelihood {
            ln_likelihood: |x: f64, z: f64| normal(0.1).ln_pdf(z - x),
            calls: Cell::new(0),
        };
        grid.correct(&reading, &Vector1::new(100.5))
            .expect("consistent");
        let (first, last) = grid.support();
        assert!(reading.calls.get() < 300 && last - first < 300);
        assert!(grid.masses()[..first].iter().all(|&m| m == 0.0));
        assert!(grid.masses()[last + 1..].iter().all(|&m| m == 0.0));
    }

    #[test]
    fn modes_and_region_probabilities() {
        // Two bumps, the right one smaller; a plateau counts once.
        let mut masses = [0.0; 20];
        masses[3..6].copy_from_slice(&[1.0, 3.0, 1.0]);
        masses[12..16].copy_from_slice(&[0.5, 2.0, 2.0, 0.5]);
        let grid = Grid1::from_masses(axis::<20>(0.0, 1.0), masses, GridOptions::default())
            .expect("valid masses");
        let mut modes = [Mode {
            cell: [0],
            centre: Vector1::new(0.0),
            mass: 0.0,
        }; 4];
        assert_eq!(grid.modes(0.5, &mut modes), 2);
        assert_eq!(modes[0].cell, [4]);
        assert_eq!(modes[1].cell, [14]);
        assert!((modes[0].mass - 0.3).abs() < 1e-15);
        assert_eq!(grid.modes(0.7, &mut modes), 1);
        assert!((grid.probability_between(0.0, 10.0) - 0.5).abs() < 1e-15);
        // Cells 12..=15 have centres 12.5..=15.5.
        assert!((grid.probability_between(12.5, 15.5) - 0.5).abs() < 1e-15);
        assert!((grid.probability_between(12.6, 15.5) - 0.45).abs() < 1e-15);
        assert_eq!(grid.probability_between(30.0, 40.0), 0.0);
    }

    #[test]
    fn construction_refuses_bad_input() {
        let ax = axis::<10>(0.0, 1.0);
        let options = GridOptions::default();
        assert_eq!(
            Grid1::from_masses(ax, [0.0; 10], options),
            Err(GridError::NoMass)
        );
        let mut negative = [1.0; 10];
        negative[3] = -1.0;
        assert_eq!(
            Grid1::from_masses(ax, negative, options),
            Err(GridError::InvalidMass)
        );
        assert_eq!(
            Grid1::uniform(ax, GridOptions { skip_below: 0.2 }),
            Err(GridError::InvalidThreshold)
        );
        assert_eq!(
            Grid1::from_density(ax, 100.0, normal(0.1), options),
            Err(GridError::NoMass)
        );
        assert_eq!(
            Grid1::from_density(ax, f64::NAN, normal(0.1), options),
            Err(GridError::NonFiniteMean)
        );
    }

    #[test]
    fn single_precision_grid_tracks_the_same_answer() {
        // The f32 instantiation against the same Gaussian product as above (Bromiley,
        // TINA Memo 2003-003, sec. 1), with a tolerance for f32 round-off over 600 cells.
        let ax = Axis::<f32, 600>::new(-2.0, 0.02).expect("valid axis");
        let mut grid = Grid1::from_density(
            ax,
            3.0,
            Noise::Normal { std_dev: 0.7 },
            GridOptions::default(),
        )
        .expect("valid prior");
        let reading = ResidualLikelihood(Direct {
            noise: Noise::Normal { std_dev: 1.0_f32 },
        });
        grid.correct(&reading, &Vector1::new(4.5))
            .expect("consistent");
        assert!((grid.mean() - 3.49329).abs() < 1e-4);
        assert!((grid.variance() - 0.328859).abs() < 1e-4);
    }

    /// One step of the counted-grid scenarios.
    #[derive(Clone, Copy)]
    enum Step {
        /// Drift by `velocity` (1 s) seen as a translation.
        Translate { velocity: f64, noise: Noise<f64> },
        /// Every cell pushed through `map`.
        Push {
            map: fn(f64) -> f64,
            noise: Noise<f64>,
        },
        /// A direct position reading.
        Read { z: f64, noise: Noise<f64> },
        /// A distance to the next marker of the invented track.
        Marker { z: f64 },
    }

    /// What a step returned, as bits so that equality is bit equality.
    #[derive(Debug, PartialEq)]
    enum Outcome {
        Predicted(Result<u64, PredictError>),
        Corrected(Result<u64, CorrectError>),
    }

    fn apply<const N: usize>(grid: &mut Grid1<f64, N>, step: Step) -> Outcome {
        let predicted = |result: Result<GridPrediction<f64>, PredictError>| {
            Outcome::Predicted(result.map(|p| p.mass_lost.to_bits()))
        };
        let corrected = |result: Result<GridCorrection<f64>, CorrectError>| {
            Outcome::Corrected(result.map(|c| c.ln_evidence.to_bits()))
        };
        match step {
            Step::Translate { velocity, noise } => {
                predicted(grid.predict(&drift(noise), &Vector1::new(velocity), 1.0))
            }
            Step::Push { map, noise } => {
                let motion = Mapped {
                    map: |x: &SVector<f64, 1>| x.map(map),
                    noise,
                    calls: Cell::new(0),
                };
                predicted(grid.predict(&motion, &SVector::zeros(), 1.0))
            }
            Step::Read { z, noise } => {
                corrected(grid.correct(&ResidualLikelihood(Direct { noise }), &Vector1::new(z)))
            }
            Step::Marker { z } => {
                let track = MarkerTrack {
                    markers: MARKERS,
                    noise: normal(0.15),
                };
                corrected(grid.correct(&track, &Vector1::new(z)))
            }
        }
    }

    /// Asserts that a counted grid holds bit for bit the belief of an exactly sized
    /// one, and nothing past its count; `context` is the step (`None` for the prior).
    fn assert_same_belief<const A: usize, const B: usize>(
        counted: &Grid1<f64, A>,
        exact: &Grid1<f64, B>,
        context: Option<usize>,
    ) {
        assert!(
            counted
                .masses()
                .iter()
                .map(|m| m.to_bits())
                .eq(exact.masses().iter().map(|m| m.to_bits())),
            "{context:?}"
        );
        let count = counted.axis().count();
        assert!(counted.plane.mass[0][count..].iter().all(|&m| m == 0.0));
        assert_eq!(counted.support(), exact.support(), "{context:?}");
        assert_eq!(
            counted.mean().to_bits(),
            exact.mean().to_bits(),
            "{context:?}"
        );
        let variances = (counted.variance(), exact.variance());
        assert_eq!(variances.0.to_bits(), variances.1.to_bits(), "{context:?}");
        let empty = Mode {
            cell: [0],
            centre: Vector1::new(0.0),
            mass: 0.0,
        };
        let (mut counted_modes, mut exact_modes) = ([empty; 8], [empty; 8]);
        assert_eq!(
            counted.modes(0.01, &mut counted_modes),
            exact.modes(0.01, &mut exact_modes),
            "{context:?}"
        );
        assert_eq!(counted_modes, exact_modes, "{context:?}");
        let (lo, hi) = (exact.axis().lo() + 3.0, exact.axis().hi() - 3.0);
        assert_eq!(counted.axis().hi(), exact.axis().hi());
        assert_eq!(
            counted.probability_between(lo, hi).to_bits(),
            exact.probability_between(lo, hi).to_bits(),
            "{context:?}"
        );
    }

    /// Runs `script` on a grid of capacity 1024 using 800 cells and on one of exactly
    /// 800, both built by `prior`, comparing every outcome and the belief after it.
    fn assert_counted_grid_matches(
        prior: impl Fn(f64, f64) -> (Option<[f64; 800]>, Option<(f64, Noise<f64>)>),
        lo: f64,
        width: f64,
        options: GridOptions<f64>,
        script: &[Step],
    ) {
        let counted_axis = Axis::<f64, 1024>::with_count(lo, width, 800).expect("valid axis");
        let exact_axis = Axis::<f64, 800>::new(lo, width).expect("valid axis");
        let (masses, density) = prior(lo, width);
        let (mut counted, mut exact) = match (masses, density) {
            (Some(masses), _) => {
                let mut padded = [0.0; 1024];
                padded[..800].copy_from_slice(&masses);
                (
                    Grid1::from_masses(counted_axis, padded, options),
                    Grid1::from_masses(exact_axis, masses, options),
                )
            }
            (None, Some((mean, shape))) => (
                Grid1::from_density(counted_axis, mean, shape, options),
                Grid1::from_density(exact_axis, mean, shape, options),
            ),
            (None, None) => (
                Grid1::uniform(counted_axis, options),
                Grid1::uniform(exact_axis, options),
            ),
        };
        let (counted, exact) = (
            counted.as_mut().expect("valid prior"),
            exact.as_mut().expect("valid prior"),
        );
        assert_same_belief(counted, exact, None);
        for (index, &step) in script.iter().enumerate() {
            let outcome = apply(counted, step);
            assert_eq!(outcome, apply(exact, step), "step {index}");
            assert_same_belief(counted, exact, Some(index));
        }
    }

    #[test]
    fn a_counted_grid_matches_an_exactly_sized_one() {
        let wave = |x: f64| x + 0.6 * x.sin() + 0.3;
        let squeeze = |x: f64| 0.8 * x + 1.0;
        let onto_the_edge = |x: f64| x + 14.0;
        let off_the_grid = |x: f64| x + 100.0;
        let nowhere = Noise::Uniform { half_width: 0.5 };
        let density = |mean, std_dev| move |_, _| (None, Some((mean, normal(std_dev))));
        // Translation, nonlinear pushes and readings, then the boundary: a step that
        // drops half the belief past the last used cell, one that drops it all, and an
        // impossible reading.
        let travel = [
            Step::Translate {
                velocity: 0.37,
                noise: normal(0.3),
            },
            Step::Push {
                map: wave,
                noise: Noise::Triangle { half_width: 0.4 },
            },
            Step::Read {
                z: -3.5,
                noise: normal(0.4),
            },
            Step::Push {
                map: squeeze,
                noise: normal(0.2),
            },
            Step::Translate {
                velocity: 15.0,
                noise: Noise::Uniform { half_width: 1.5 },
            },
            Step::Push {
                map: onto_the_edge,
                noise: normal(1.0),
            },
            Step::Read {
                z: 19.0,
                noise: normal(2.0),
            },
            Step::Push {
                map: off_the_grid,
                noise: normal(0.1),
            },
            Step::Read {
                z: -30.0,
                noise: nowhere,
            },
        ];
        for options in [GridOptions::default(), keep_tails()] {
            assert_counted_grid_matches(density(-5.0, 0.5), -20.0, 0.05, options, &travel);
        }
        // Mass leaving past the last used cell through a wide kernel only.
        let spreading = [Step::Translate {
            velocity: 0.0,
            noise: normal(3.0),
        }; 3];
        assert_counted_grid_matches(density(17.0, 0.5), -20.0, 0.05, keep_tails(), &spreading);
        // A uniform prior split into several modes by identical markers, then moved.
        let markers = [
            Step::Marker { z: 1.8 },
            Step::Translate {
                velocity: 0.9,
                noise: normal(0.1),
            },
            Step::Marker { z: 0.9 },
        ];
        let uniform = |_, _| (None, None);
        assert_counted_grid_matches(uniform, 0.0, 0.05, GridOptions::default(), &markers);
        // Raw masses with a plateau and the last used cell holding mass.
        let bumps = |_, _| {
            let mut masses = [0.0; 800];
            masses[100..104].copy_from_slice(&[1.0, 3.0, 3.0, 1.0]);
            masses[790..].copy_from_slice(&[0.5; 10]);
            (Some(masses), None)
        };
        let nudge = [
            Step::Translate {
                velocity: 0.02,
                noise: normal(0.01),
            },
            Step::Translate {
                velocity: 0.2,
                noise: Noise::Uniform { half_width: 0.1 },
            },
        ];
        assert_counted_grid_matches(bumps, 0.0, 0.05, keep_tails(), &nudge);
    }

    #[test]
    fn a_counted_grid_refuses_mass_past_its_count() {
        let axis = Axis::<f64, 12>::with_count(0.0, 1.0, 10).expect("valid axis");
        let mut masses = [1.0; 12];
        assert_eq!(
            Grid1::from_masses(axis, masses, GridOptions::default()),
            Err(GridError::InvalidMass)
        );
        masses[10..].fill(0.0);
        let grid = Grid1::from_masses(axis, masses, GridOptions::default()).expect("valid");
        assert_eq!(grid.masses().len(), 10);
        let uniform = Grid1::uniform(axis, GridOptions::default()).expect("valid");
        assert_eq!(grid, uniform);
        // The threshold's bound is 1 / count: 0.095 is below 1/10 but not 1/12.
        assert!(Grid1::uniform(axis, GridOptions { skip_below: 0.095 }).is_ok());
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(48))]
        #[test]
        fn counted_grids_step_like_exactly_sized_ones(
            mean in -15.0..15.0_f64,
            spread in 0.05..3.0_f64,
            velocity in -8.0..8.0_f64,
            noise_width in 0.01..3.0_f64,
            shape in 0..3_usize,
            z in -20.0..20.0_f64,
            skip in prop_oneof![Just(0.0), Just(1e-12), Just(1e-4)],
        ) {
            let noise = [normal(noise_width), Noise::Triangle { half_width: noise_width }, Noise::Uniform { half_width: noise_width }][shape];
            let script = [
                Step::Translate { velocity, noise },
                Step::Push { map: |x| x + 0.6 * x.sin() - 0.1 * x, noise },
                Step::Read { z, noise: normal(spread) },
                Step::Translate { velocity: -velocity, noise },
            ];
            let prior = move |_, _| (None, Some((mean, normal(spread))));
            assert_counted_grid_matches(prior, -20.0, 0.05, GridOptions { skip_below: skip }, &script);
        }
    }

    proptest! {
        #[test]
        fn steps_keep_mass_normalised_and_non_negative(
            mean in -5.0..5.0_f64,
            width in 0.05..3.0_f64,
            velocity in -3.0..3.0_f64,
            noise_width in 0.01..2.0_f64,
            shape in 0..3_usize,
            z in -8.0..8.0_f64,
            skip in prop_oneof![Just(0.0), Just(1e-12), Just(1e-4)],
        ) {
            let noise = [normal(noise_width), Noise::Triangle { half_width: noise_width }, Noise::Uniform { half_width: noise_width }][shape];
            let mut grid = Grid1::<f64, 300>::from_density(axis(-15.0, 0.1), mean, noise, GridOptions { skip_below: skip })
                .expect("prior on grid");
            let check = |grid: &Grid1<f64, 300>| {
                let total: f64 = grid.masses().iter().sum();
                prop_assert!((total - 1.0).abs() < 1e-9, "total {}", total);
                prop_assert!(grid.masses().iter().all(|&m| m >= 0.0 && m.is_finite()));
                Ok(())
            };
            let motion = drift(noise);
            if grid.predict(&motion, &Vector1::new(velocity), 1.0).is_ok() {
                check(&grid)?;
            }
            let reading = ResidualLikelihood(Direct { noise: normal(width) });
            if grid.correct(&reading, &Vector1::new(z)).is_ok() {
                check(&grid)?;
            }
        }
    }
}
