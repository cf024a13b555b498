//! Grid (histogram) Bayes filters in one and two dimensions: the belief is a fixed array
//! of cell masses, prediction convolves it with the motion noise, correction multiplies
//! it by the reading's likelihood. Also owns the model contract ([`Motion`],
//! [`Likelihood`]) and the noise shapes ([`Noise`]) that the particle filter shares:
//! every [`Motion`] is also a [`SampledMotion`](crate::particle::SampledMotion), the
//! particle filter's contract, which additionally admits noise entering anywhere in the
//! transition (a grid needs the additive form, since it convolves with one kernel).
//!
//! # Capacity and count
//!
//! A grid's const parameters (`N`, or `NX` and `NY`) are the capacity of its arrays;
//! each [`Axis`] says how many of those cells it uses ([`Axis::new`]: all of them,
//! [`Axis::with_count`]: fewer). Generated code sizes the arrays exactly; the simulator,
//! which learns the cell count only at run time, instantiates one large capacity and
//! sets the count. Every step, boundary and statistic is measured by the count, and the
//! cells past it hold zero and are never read as belief, so a counted grid gives
//! bit-for-bit the results of a grid of exactly that size.
//!
//! # Discretisation
//!
//! Each cell's mass sits at the cell's centre. The motion noise is discretised by
//! integrating its density over each destination cell (differences of the cumulative
//! distribution), never by sampling it at a point. Because a discretised kernel spreads
//! mass between centres, a prediction adds about `width^2 / 12` of variance per axis on
//! top of the motion variance, and a belief initialised from a density has about
//! `width^2 / 12` more variance than the density (Sheppard's correction).
//!
//! # Motion
//!
//! When the model reports a [`Motion::translation`] (`x_next = x + t`), the kernel is
//! integrated over the shifted cells, so a shift by a fraction of a cell is exact. For
//! any other motion each cell's mass moves to the transition of its centre and is split
//! between the two nearest cell centres along each axis in proportion to the distance
//! (linear interpolation: the mean of the moved belief is exactly the mean of the
//! transitioned centres), then spread through the unshifted noise kernel.
//!
//! # Boundary policy
//!
//! Mass moved or spread past either end of an axis is dropped and the rest renormalised;
//! [`GridPrediction::mass_lost`] reports how much left. A grid should therefore cover the
//! whole region the state can reach. If everything leaves, the prediction is rejected
//! with [`PredictError::AllMassLeftGrid`] and the belief kept.
//!
//! # Cost
//!
//! Cells holding less than [`GridOptions::skip_below`] after a step are set to zero, and
//! each grid tracks the bounding range of cells with mass. Prediction visits only that
//! range (times the kernel's reach), correction evaluates the likelihood only at cells
//! with mass, and the statistics sum only over it, so a narrow belief on a large grid is
//! cheap (`runtime/benches/bayes.rs` measures it). What remains proportional to the grid
//! is clearing and copying arrays: a step keeps up to three grid-sized arrays and, per
//! axis, two axis-length kernel arrays on the stack, which also sizes the stack a
//! firmware task needs. These arrays have the capacity's size, so a count far below the
//! capacity still pays for clearing and copying the whole arrays (and their stack;
//! the benchmarks include a grid using a tenth of its capacity).

mod line;
mod model;
mod noise;
mod one;
mod plane;
#[cfg(test)]
pub(crate) mod test_models;
mod two;

pub use line::{Axis, AxisError};
pub(crate) use model::{
    checked_ln_likelihood, validate_reading, validate_step_and_input, validated_noise,
};
pub use model::{
    CorrectError, Likelihood, Motion, PredictError, ReadingPrediction, ResidualLikelihood,
};
pub(crate) use noise::{lit, minus_infinity};
pub use noise::{Noise, NoiseError};
pub use one::Grid1;
pub use two::Grid2;

use nalgebra::{RealField, SVector};

/// Settings of a grid filter.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GridOptions<T> {
    /// Cells whose normalised mass falls below this after a step are set to zero, so
    /// the step cost follows the belief's support. Zero keeps every tail (and costs the
    /// whole grid once the belief has spread). Must be below `1 / cell count`.
    pub skip_below: T,
}

impl<T: RealField + Copy> Default for GridOptions<T> {
    /// `skip_below = 1e-12`: far below any probability a caller reads off a belief,
    /// far above the tails a wide normal kernel leaves on every cell.
    fn default() -> Self {
        Self {
            skip_below: lit(1e-12),
        }
    }
}

/// Why a grid could not be created.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum GridError {
    /// An axis was refused.
    Axis(AxisError),
    /// The initial density's shape was refused.
    Noise(NoiseError),
    /// The initial density's mean is NaN or infinite.
    NonFiniteMean,
    /// `skip_below` is negative, NaN, or not below `1 / cell count`.
    InvalidThreshold,
    /// A mass is negative, NaN or infinite.
    InvalidMass,
    /// The masses sum to zero (for a density: none of it falls on the grid).
    NoMass,
}

impl From<AxisError> for GridError {
    fn from(error: AxisError) -> Self {
        GridError::Axis(error)
    }
}

impl From<NoiseError> for GridError {
    fn from(error: NoiseError) -> Self {
        GridError::Noise(error)
    }
}

/// What an accepted grid prediction did.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GridPrediction<T> {
    /// The fraction of the belief that left the grid (and the kernel tails cut at its
    /// reach) before renormalisation.
    pub mass_lost: T,
}

/// What an accepted grid correction found.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GridCorrection<T> {
    /// `ln sum_i mass_i L(z | centre_i)`: the log evidence of the reading under the
    /// prior belief, up to the likelihood's constant. Very negative values flag readings
    /// the belief did not expect.
    pub ln_evidence: T,
}

/// A local maximum of a grid belief.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Mode<T: RealField + Copy, const D: usize> {
    /// The cell index along each axis.
    pub cell: [usize; D],
    /// The cell's centre.
    pub centre: SVector<T, D>,
    /// The cell's mass.
    pub mass: T,
}

/// Writes mode number `found` into `out` if it fits.
fn record_mode<T: RealField + Copy, const D: usize>(
    out: &mut [Mode<T, D>],
    found: usize,
    mode: Mode<T, D>,
) {
    if let Some(slot) = out.get_mut(found) {
        *slot = mode;
    }
}

/// Builds the kernel of one axis for a prediction: shifted by `translation` (in state
/// units) when the motion is a translation, unshifted otherwise.
fn axis_kernel<T: RealField + Copy, const N: usize>(
    axis: &Axis<T, N>,
    noise: &Noise<T>,
    translation: Option<T>,
) -> line::LineKernel<T, N> {
    let shift = translation.map_or(T::zero(), |t| t / axis.width());
    line::LineKernel::new(noise, shift, axis)
}

/// Checks a translation reported by the model.
fn checked_translation<T: RealField + Copy, const D: usize>(
    translation: Option<SVector<T, D>>,
) -> Result<Option<SVector<T, D>>, PredictError> {
    match translation {
        Some(t) if t.iter().any(|v| !v.is_finite()) => Err(PredictError::NonFiniteTransition),
        other => Ok(other),
    }
}
