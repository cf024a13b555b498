//! The 2-D grid filter: `NX x NY` cells stored row by row in one flat array.

use nalgebra::{Matrix2, RealField, SVector, Vector2};

use super::line::Axis;
use super::model::{
    validate_reading, validate_step, CorrectError, Likelihood, Motion, PredictError,
};
use super::noise::Noise;
use super::plane::Plane;
use super::{
    axis_kernel, checked_translation, record_mode, GridCorrection, GridError, GridOptions,
    GridPrediction, Mode,
};

/// A belief over two state components `(x, y)` on `NX x NY` cells. See the
/// [module](super) for the discretisation, the boundary policy and the cost.
#[derive(Clone, Debug, PartialEq)]
pub struct Grid2<T, const NX: usize, const NY: usize> {
    plane: Plane<T, NX, NY>,
}

impl<T: RealField + Copy, const NX: usize, const NY: usize> Grid2<T, NX, NY> {
    /// A belief with the given (unnormalised, non-negative) masses, `masses[iy][ix]`.
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

    /// The same mass in every cell.
    pub fn uniform(
        x: Axis<T, NX>,
        y: Axis<T, NY>,
        options: GridOptions<T>,
    ) -> Result<Self, GridError> {
        Self::from_masses(x, y, [[T::one(); NX]; NY], options)
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
        let masses = Plane::density_masses(&x, &y, (mean[0], shape[0]), (mean[1], shape[1]));
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

    /// The masses, row by row: cell `(ix, iy)` at index `iy * NX + ix`.
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

    /// The covariance of the belief.
    pub fn covariance(&self) -> Matrix2<T> {
        let (_, [[xx, xy], [yx, yy]]) = self.plane.moments();
        Matrix2::new(xx, xy, yx, yy)
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
