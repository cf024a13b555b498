//! What a prediction or correction reports: the innovation on success, a typed
//! rejection otherwise.
//!
//! A rejection always means the filter's state and covariance were left bit-identical.

use nalgebra::{allocator::Allocator, DefaultAllocator, Dim, OMatrix, OVector};

use crate::Real;

/// Why a prediction was rejected.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PredictError {
    /// The step `dt` was zero or negative.
    NonPositiveStep,
    /// The step `dt` was NaN or infinite.
    NonFiniteStep,
    /// An input component was NaN or infinite.
    NonFiniteInput,
    /// The input vector's length differs from the model's input dimension.
    DimensionMismatch,
    /// The predicted state or covariance was not finite.
    NonFiniteResult,
    /// The covariance could not be factored where a square root was needed (unscented
    /// prediction only).
    NotPositiveDefinite,
}

/// Why a correction was rejected.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum CorrectError<T> {
    /// The normalised innovation squared exceeded the caller's chi-square threshold.
    Gated {
        /// The normalised innovation squared that failed the gate.
        nis: T,
    },
    /// A reading component was NaN or infinite.
    NonFiniteReading,
    /// The reading vector's length differs from the model's reading dimension.
    DimensionMismatch,
    /// The innovation covariance (or a scalar innovation variance in the sequential
    /// form) was not positive definite.
    NotPositiveDefinite,
    /// The predicted reading, the corrected state or the corrected covariance was not
    /// finite.
    NonFiniteResult,
}

/// The innovation of an accepted correction.
#[derive(Clone, Debug, PartialEq)]
pub struct Innovation<T: Real, M: Dim>
where
    DefaultAllocator: Allocator<M> + Allocator<M, M>,
{
    /// Reading minus predicted reading (angle components wrapped to (-pi, pi]).
    pub residual: OVector<T, M>,
    /// Innovation covariance `S = H P H^T + R` at the prior.
    pub covariance: OMatrix<T, M, M>,
    /// Normalised innovation squared, `residual^T S^-1 residual` (chi-square with `M`
    /// degrees of freedom for a consistent filter).
    pub nis: T,
}
