//! The 2-D grid filter: the cells of two axes (up to the capacity `NX x NY`) stored row
//! by row in one flat array.

use nalgebra::{Matrix2, RealField, SVector, Vector2};

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

/// A belief over two state components `(x, y)` on the cells of two axes (their counts,
/// at most `NX` and `NY`). See the [module](super) for the discretisation, the boundary
/// policy and the cost.
#[derive(Clone, Debug, PartialEq)]
pub struct Grid2<T, const NX: usize, const NY: usize> {
    plane: Plane<T, NX, NY>,
}

impl<T: RealField + Copy, const NX: usize, const NY: usize> Grid2<T, NX, NY> {
    /// A belief with the given (unnormalised, non-negative) masses, `masses[iy][ix]`;
    /// the masses past either axis's count must be zero ([`GridError::InvalidMass`]
    /// otherwise).
    pub fn from_masses(
        x: Axis<T, NX>,
        y: Axis<T, NY>,
        masses: [[T; NX]; NY],
        options: GridOptions<T>,
    ) -> Result<Self, GridError> {
        Ok(Self {
            plane: Plane::new(x, y, masses, options)?,
        })
    }

    /// The same mass in every cell of the axes.
    pub fn uniform(
        x: Axis<T, NX>,
        y: Axis<T, NY>,
        options: GridOptions<T>,
    ) -> Result<Self, GridError> {
        let (cols, rows) = (x.ones(), y.ones());
        let masses = rows.map(|row| cols.map(|col| row * col));
        Self::from_masses(x, y, masses, options)
    }

    /// Independent densities `shape[0]` along x and `shape[1]` along y centred at
    /// `mean`, integrated over each cell.
    pub fn from_density(
        x: Axis<T, NX>,
        y: Axis<T, NY>,
        mean: Vector2<T>,
        shape: [Noise<T>; 2],
        options: GridOptions<T>,
    ) -> Result<Self, GridError> {
        if mean.iter().any(|m| !m.is_finite()) {
            return Err(GridError::NonFiniteMean);
        }
        shape[0].validate()?;
        shape[1].validate()?;
        let along_x = x.cell_masses(mean[0], &shape[0]);
        let along_y = y.cell_masses(mean[1], &shape[1]);
        let masses = along_y.map(|row_mass| along_x.map(|col_mass| row_mass * col_mass));
        Self::from_masses(x, y, masses, options)
    }

    /// Moves the belief one step through `model`. Rejected (belief unchanged) when the
    /// step, the input, the noise or a transition is invalid, or when all mass leaves.
    pub fn predict<const U: usize>(
        &mut self,
        model: &impl Motion<T, 2, U>,
        u: &SVector<T, U>,
        dt: T,
    ) -> Result<GridPrediction<T>, PredictError> {
        let [noise_x, noise_y] = validate_step(model, u, dt)?;
        let translation = checked_translation(model.translation(u, dt))?;
        let kernel_x = axis_kernel(&self.plane.x, &noise_x, translation.map(|t| t[0]));
        let kernel_y = axis_kernel(&self.plane.y, &noise_y, translation.map(|t| t[1]));
        match translation {
            Some(_) => self.plane.translate(&kernel_x, Some(&kernel_y)),
            None => self.plane.push(
                |x, y| {
                    let next = model.transition(&Vector2::new(x, y), u, dt);
                    Some((next[0], next[1]))
                },
                &kernel_x,
                Some(&kernel_y),
            ),
        }
    }

    /// Multiplies the belief by the likelihood of reading `z` and normalises. Rejected
    /// (belief bit-identical) when `z` is not finite, the likelihood is NaN or `+inf`,
    /// or it is zero wherever the belief has mass.
    pub fn correct<const M: usize>(
        &mut self,
        likelihood: &impl Likelihood<T, 2, M>,
        z: &SVector<T, M>,
    ) -> Result<GridCorrection<T>, CorrectError> {
        validate_reading(z)?;
        self.plane
            .correct(|x, y| likelihood.ln_likelihood(&Vector2::new(x, y), z))
    }

    /// The x and y axes.
    pub fn axes(&self) -> (&Axis<T, NX>, &Axis<T, NY>) {
        (&self.plane.x, &self.plane.y)
    }

    /// The stored masses, row by row: cell `(ix, iy)` at index `iy * NX + ix` (`NX` the
    /// capacity); the cells past either axis's count are zero.
    pub fn masses(&self) -> &[T] {
        self.plane.mass.as_flattened()
    }

    /// The mass of cell `(ix, iy)` (zero outside the grid).
    pub fn mass_at(&self, ix: usize, iy: usize) -> T {
        self.plane
            .mass
            .get(iy)
            .and_then(|row| row.get(ix))
            .copied()
            .unwrap_or_else(T::zero)
    }

    /// The bounding box of the cells with mass, `((first_ix, last_ix), (first_iy,
    /// last_iy))`; every cell outside is exactly zero.
    pub fn support(&self) -> ((usize, usize), (usize, usize)) {
        let support = self.plane.support;
        (
            (support.cols.first, support.cols.last),
            (support.rows.first, support.rows.last),
        )
    }

    /// The mean of the belief.
    pub fn mean(&self) -> Vector2<T> {
        let ([x, y], _) = self.plane.moments();
        Vector2::new(x, y)
    }

    /// The covariance of the belief, each cell's mass at the cell's centre.
    pub fn covariance(&self) -> Matrix2<T> {
        let (_, [[xx, xy], [yx, yy]]) = self.plane.moments();
        Matrix2::new(xx, xy, yx, yy)
    }

    /// The covariance of the belief read as a histogram, each cell's mass spread evenly
    /// over its cell: [`covariance`](Self::covariance) plus `width^2 / 12` on each axis's
    /// variance (see [`Grid1::histogram_variance`](super::Grid1::histogram_variance)).
    pub fn histogram_covariance(&self) -> Matrix2<T> {
        let (wx, wy) = (self.plane.x.width(), self.plane.y.width());
        let twelve = lit::<T>(12.0);
        self.covariance()
            + Matrix2::from_diagonal(&Vector2::new(wx * wx / twelve, wy * wy / twelve))
    }

    /// Writes the local maxima (8-neighbourhood) holding at least `min_fraction_of_peak`
    /// of the largest mass into `out` (row by row, as many as fit) and returns how many
    /// there are. Of a plateau of equal masses only the last cell in row order counts.
    pub fn modes(&self, min_fraction_of_peak: T, out: &mut [Mode<T, 2>]) -> usize {
        let (x, y) = (self.plane.x, self.plane.y);
        let mut found = 0;
        self.plane.modes(min_fraction_of_peak, |row, col, mass| {
            let mode = Mode {
                cell: [col, row],
                centre: Vector2::new(x.centre(col), y.centre(row)),
                mass,
            };
            record_mode(out, found, mode);
            found += 1;
        })
    }

    /// The probability that the state lies in the rectangle `[x_lo, x_hi] x [y_lo,
    /// y_hi]`: the mass of the cells whose centres do.
    pub fn probability_in(&self, x: (T, T), y: (T, T)) -> T {
        self.plane.probability_in(x, y)
    }
}

#[cfg(test)]
mod tests {
    use core::cell::Cell;

    use nalgebra::SVector;

    use super::*;
    use crate::grid::test_models::{Direct, Drift, Mapped, ScalarKalman};
    use crate::grid::ResidualLikelihood;

    const H: f64 = 0.1;
    type Plane2 = Grid2<f64, 120, 100>;

    fn normal(std_dev: f64) -> Noise<f64> {
        Noise::Normal { std_dev }
    }

    fn axes() -> (Axis<f64, 120>, Axis<f64, 100>) {
        (
            Axis::new(-6.0, H).expect("valid x axis"),
            Axis::new(-5.0, H).expect("valid y axis"),
        )
    }

    #[test]
    fn histogram_covariance_adds_each_axis_cell_variance() {
        // One cell holding everything: uniform over the cell on each axis, variances
        // w^2 / 12 and no correlation (common practice, no source).
        let mut masses = [[0.0; 4]; 3];
        masses[1][2] = 1.0;
        let (x, y) = (
            Axis::new(0.0, 0.3).expect("x"),
            Axis::new(0.0, 0.2).expect("y"),
        );
        let grid = Grid2::from_masses(x, y, masses, GridOptions::default()).expect("valid");
        let expected = Matrix2::new(0.09 / 12.0, 0.0, 0.0, 0.04 / 12.0);
        assert!((grid.histogram_covariance() - expected).abs().max() < 1e-15);
        assert_eq!(grid.covariance(), Matrix2::zeros());
    }

    fn blob(mean: (f64, f64), spread: (f64, f64)) -> Plane2 {
        let (x, y) = axes();
        Grid2::from_density(
            x,
            y,
            Vector2::new(mean.0, mean.1),
            [normal(spread.0), normal(spread.1)],
            GridOptions { skip_below: 0.0 },
        )
        .expect("valid prior")
    }

    #[test]
    fn independent_axes_match_two_kalman_filters() {
        // Closed form: one scalar Kalman recursion per axis (common practice, no
        // source); tolerance as in the 1-D comparison: each discretisation adds about
        // h^2/12 of variance per axis (Sheppard's correction, from memory), carried into
        // the mean through |innovation| R/(P+R)^2.
        let mut grid = blob((0.0, 0.0), (1.0, 0.6));
        let mut kalman = [
            ScalarKalman {
                mean: 0.0,
                variance: 1.0,
            },
            ScalarKalman {
                mean: 0.0,
                variance: 0.36,
            },
        ];
        let motion = Drift {
            noise: normal(0.3),
            as_translation: true,
        };
        let reading = ResidualLikelihood(Direct { noise: normal(0.5) });
        let velocity = Vector2::new(0.5, -0.3);
        let sheppard = H * H / 12.0;
        let mut variance_tolerance = sheppard;
        let mut mean_tolerance = [0.0; 2];
        for z in [
            Vector2::new(0.4, -0.2),
            Vector2::new(1.3, -0.9),
            Vector2::new(1.2, -0.8),
        ] {
            grid.predict(&motion, &velocity, 1.0).expect("on grid");
            variance_tolerance += sheppard;
            grid.correct(&reading, &z).expect("consistent reading");
            for (axis, filter) in kalman.iter_mut().enumerate() {
                filter.predict(velocity[axis], 0.09);
                let (factor, innovation) = filter.correct(z[axis], 0.25);
                mean_tolerance[axis] += innovation.abs() * factor * variance_tolerance;
            }
        }
        let (mean, covariance) = (grid.mean(), grid.covariance());
        for (axis, filter) in kalman.iter().enumerate() {
            assert!((mean[axis] - filter.mean).abs() <= mean_tolerance[axis] + 1e-12);
            assert!((covariance[(axis, axis)] - filter.variance).abs() <= variance_tolerance);
        }
        assert!(covariance[(0, 1)].abs() < 1e-12);
        assert_eq!(covariance[(0, 1)], covariance[(1, 0)]);
    }

    #[test]
    fn pushed_mass_keeps_the_mean_of_the_moved_centres() {
        // Bilinear splitting preserves the first moment: after a rotation by 0.4 rad the
        // mean is the mass-weighted mean of the rotated centres.
        let mut grid = blob((1.5, 0.5), (0.5, 0.3));
        let (cos, sin) = (0.4_f64.cos(), 0.4_f64.sin());
        let rotate =
            |p: &SVector<f64, 2>| Vector2::new(cos * p[0] - sin * p[1], sin * p[0] + cos * p[1]);
        let (x, y) = axes();
        let mut expected = Vector2::zeros();
        for iy in 0..100 {
            for ix in 0..120 {
                expected +=
                    rotate(&Vector2::new(x.centre(ix), y.centre(iy))) * grid.mass_at(ix, iy);
            }
        }
        let motion = Mapped {
            map: rotate,
            noise: normal(0.1),
            calls: Cell::new(0),
        };
        grid.predict(&motion, &SVector::zeros(), 1.0)
            .expect("on grid");
        assert!((grid.mean() - expected).norm() < 1e-9);
        // The rotated belief is correlated: the x spread now leans toward y.
        assert!(grid.covariance()[(0, 1)] > 0.01);
    }

    #[test]
    fn two_blobs_give_two_modes_and_their_masses() {
        let (x, y) = axes();
        let left = blob((-3.0, -2.0), (0.4, 0.4));
        let right = blob((3.0, 2.0), (0.4, 0.4));
        let mut masses = [[0.0; 120]; 100];
        for (iy, row) in masses.iter_mut().enumerate() {
            for (ix, cell) in row.iter_mut().enumerate() {
                *cell = 0.7 * left.mass_at(ix, iy) + 0.3 * right.mass_at(ix, iy);
            }
        }
        let grid = Grid2::from_masses(x, y, masses, GridOptions::default()).expect("valid");
        let empty = Mode {
            cell: [0, 0],
            centre: Vector2::zeros(),
            mass: 0.0,
        };
        let mut modes = [empty; 4];
        assert_eq!(grid.modes(0.2, &mut modes), 2);
        assert!((modes[0].centre - Vector2::new(-3.0, -2.0)).norm() < H);
        assert!((modes[1].centre - Vector2::new(3.0, 2.0)).norm() < H);
        assert_eq!(grid.modes(0.5, &mut modes), 1);
        // The left blob's tails past the rectangle sit 5 standard deviations out
        // (upper tail 2.9e-7, standard normal table).
        let left_mass = grid.probability_in((-6.0, 0.0), (-5.0, 0.0));
        assert!((left_mass - 0.7).abs() < 1e-6);
        assert_eq!(grid.masses()[35 * 120 + 20], grid.mass_at(20, 35));
    }

    #[test]
    fn impossible_reading_keeps_the_belief_bit_identical() {
        let mut grid = blob((0.0, 0.0), (0.5, 0.5));
        let before: [u64; 12_000] = core::array::from_fn(|i| grid.masses()[i].to_bits());
        let support = grid.support();
        let reading = ResidualLikelihood(Direct {
            noise: Noise::Triangle { half_width: 1.0 },
        });
        assert_eq!(
            grid.correct(&reading, &Vector2::new(0.0, 40.0)),
            Err(CorrectError::ZeroPosterior)
        );
        let after: [u64; 12_000] = core::array::from_fn(|i| grid.masses()[i].to_bits());
        assert_eq!(before, after);
        assert_eq!(grid.support(), support);
    }

    #[test]
    fn support_box_follows_a_narrow_belief() {
        let (x, y) = axes();
        let mut grid = Grid2::<f64, 120, 100>::from_density(
            x,
            y,
            Vector2::new(2.0, 1.0),
            [normal(0.2), normal(0.2)],
            GridOptions::default(),
        )
        .expect("valid prior");
        let ((x_first, x_last), (y_first, y_last)) = grid.support();
        assert!(x_last - x_first < 30 && y_last - y_first < 30);
        let motion = Mapped {
            map: |p: &SVector<f64, 2>| p + Vector2::new(-1.0, 0.5),
            noise: normal(0.05),
            calls: Cell::new(0),
        };
        grid.predict(&motion, &SVector::zeros(), 1.0)
            .expect("on grid");
        assert!(motion.calls.get() <= 30 * 30);
        assert!((grid.mean() - Vector2::new(1.0, 1.5)).norm() < 1e-3);
        let total: f64 = grid.masses().iter().sum();
        assert!((total - 1.0).abs() < 1e-12);
    }

    /// One step of the counted-grid scenario.
    #[derive(Clone, Copy)]
    enum Step {
        /// Drift by `velocity` (1 s) seen as a translation.
        Translate(Vector2<f64>),
        /// Rotation about the origin by the angle (rad), pushed cell by cell.
        Rotate(f64),
        /// A direct position reading with normal noise of 0.3.
        Read(Vector2<f64>),
    }

    /// What a step returned, as bits so that equality is bit equality.
    #[derive(Debug, PartialEq)]
    enum Outcome {
        Predicted(Result<u64, PredictError>),
        Corrected(Result<u64, CorrectError>),
    }

    fn apply<const NX: usize, const NY: usize>(
        grid: &mut Grid2<f64, NX, NY>,
        step: Step,
    ) -> Outcome {
        let predicted = |result: Result<GridPrediction<f64>, PredictError>| {
            Outcome::Predicted(result.map(|p| p.mass_lost.to_bits()))
        };
        match step {
            Step::Translate(velocity) => {
                let motion = Drift {
                    noise: normal(0.15),
                    as_translation: true,
                };
                predicted(grid.predict(&motion, &velocity, 1.0))
            }
            Step::Rotate(angle) => {
                let (cos, sin) = (angle.cos(), angle.sin());
                let motion = Mapped {
                    map: |p: &SVector<f64, 2>| {
                        Vector2::new(cos * p[0] - sin * p[1], sin * p[0] + cos * p[1])
                    },
                    noise: Noise::Triangle { half_width: 0.2 },
                    calls: Cell::new(0),
                };
                predicted(grid.predict(&motion, &SVector::zeros(), 1.0))
            }
            Step::Read(z) => {
                let reading = ResidualLikelihood(Direct { noise: normal(0.3) });
                Outcome::Corrected(grid.correct(&reading, &z).map(|c| c.ln_evidence.to_bits()))
            }
        }
    }

    /// Asserts that a counted grid holds bit for bit the belief of an exactly sized
    /// one, and nothing past its counts; `context` is the step (`None` for the prior).
    fn assert_same_belief<const A: usize, const B: usize, const C: usize, const E: usize>(
        counted: &Grid2<f64, A, B>,
        exact: &Grid2<f64, C, E>,
        context: Option<usize>,
    ) {
        for iy in 0..B {
            for ix in 0..A {
                let (mass, expected) = (counted.mass_at(ix, iy), exact.mass_at(ix, iy));
                assert_eq!(
                    mass.to_bits(),
                    expected.to_bits(),
                    "{context:?} ({ix}, {iy})"
                );
            }
        }
        assert_eq!(counted.support(), exact.support(), "{context:?}");
        let bits = |m: Matrix2<f64>| m.map(f64::to_bits);
        assert_eq!(
            counted.mean().map(f64::to_bits),
            exact.mean().map(f64::to_bits)
        );
        assert_eq!(
            bits(counted.covariance()),
            bits(exact.covariance()),
            "{context:?}"
        );
        let empty = Mode {
            cell: [0, 0],
            centre: Vector2::zeros(),
            mass: 0.0,
        };
        let (mut counted_modes, mut exact_modes) = ([empty; 8], [empty; 8]);
        assert_eq!(
            counted.modes(0.01, &mut counted_modes),
            exact.modes(0.01, &mut exact_modes),
            "{context:?}"
        );
        assert_eq!(counted_modes, exact_modes, "{context:?}");
        let region = ((-1.0, 1.2), (-0.5, 1.5));
        assert_eq!(
            counted.probability_in(region.0, region.1).to_bits(),
            exact.probability_in(region.0, region.1).to_bits()
        );
    }

    #[test]
    fn a_counted_grid_matches_an_exactly_sized_one() {
        // 40 x 30 cells used of a capacity of 48 x 40: a translation, a rotation, a
        // reading, then steps that push part and then all of the belief past the last
        // used cells of both axes.
        let script = [
            Step::Translate(Vector2::new(0.3, -0.2)),
            Step::Rotate(0.5),
            Step::Read(Vector2::new(0.2, 0.1)),
            Step::Translate(Vector2::new(1.7, 1.3)),
            Step::Read(Vector2::new(1.9, 1.4)),
            Step::Translate(Vector2::new(3.0, 0.0)),
            Step::Read(Vector2::new(-30.0, 0.0)),
        ];
        let (lo, width) = ((-2.0, -1.5), 0.1);
        let counted_axes = (
            Axis::<f64, 48>::with_count(lo.0, width, 40).expect("valid axis"),
            Axis::<f64, 40>::with_count(lo.1, width, 30).expect("valid axis"),
        );
        let exact_axes = (
            Axis::<f64, 40>::new(lo.0, width).expect("valid axis"),
            Axis::<f64, 30>::new(lo.1, width).expect("valid axis"),
        );
        let mean = Vector2::new(-0.5, 0.2);
        let shape = [normal(0.4), Noise::Triangle { half_width: 0.6 }];
        for options in [GridOptions::default(), GridOptions { skip_below: 0.0 }] {
            let priors = [
                (
                    Grid2::from_density(counted_axes.0, counted_axes.1, mean, shape, options),
                    Grid2::from_density(exact_axes.0, exact_axes.1, mean, shape, options),
                ),
                (
                    Grid2::uniform(counted_axes.0, counted_axes.1, options),
                    Grid2::uniform(exact_axes.0, exact_axes.1, options),
                ),
            ];
            for (counted, exact) in priors {
                let mut counted = counted.expect("valid prior");
                let mut exact = exact.expect("valid prior");
                assert_same_belief(&counted, &exact, None);
                for (index, &step) in script.iter().enumerate() {
                    let outcome = apply(&mut counted, step);
                    assert_eq!(outcome, apply(&mut exact, step), "step {index}");
                    assert_same_belief(&counted, &exact, Some(index));
                    let stored = &counted.plane.mass;
                    assert!(stored[30..].iter().flatten().all(|&m| m == 0.0));
                    assert!(stored.iter().all(|row| row[40..].iter().all(|&m| m == 0.0)));
                }
            }
        }
    }

    #[test]
    fn a_counted_grid_refuses_mass_past_its_counts() {
        let x = Axis::<f64, 4>::with_count(0.0, 1.0, 3).expect("valid axis");
        let y = Axis::<f64, 3>::with_count(0.0, 1.0, 2).expect("valid axis");
        let mut masses = [[1.0, 1.0, 1.0, 0.0], [1.0, 1.0, 1.0, 0.0], [0.0; 4]];
        let uniform = Grid2::uniform(x, y, GridOptions::default()).expect("valid");
        let given = Grid2::from_masses(x, y, masses, GridOptions::default()).expect("valid");
        assert_eq!(uniform, given);
        masses[2][0] = 1.0;
        assert_eq!(
            Grid2::from_masses(x, y, masses, GridOptions::default()),
            Err(GridError::InvalidMass)
        );
    }
}
