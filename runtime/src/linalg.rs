//! Small linear-algebra helpers shared by the filters: finiteness tests and the
//! symmetric positive-definite solve used for innovation covariances.

use nalgebra::{
    allocator::Allocator, Cholesky, DefaultAllocator, Dim, Matrix, OMatrix, RawStorage,
};

use crate::Real;

/// Whether every entry of `m` is finite.
pub fn all_finite<T: Real, R: Dim, C: Dim, S: RawStorage<T, R, C>>(m: &Matrix<T, R, C, S>) -> bool {
    m.iter().all(|value| value.is_finite())
}

/// Cholesky factor of a symmetric matrix that must be positive definite.
///
/// Only the lower triangle of `s` is read. Returns `None` when `s` has a non-finite entry
/// or a pivot that is not strictly positive, which is how the filters detect an
/// innovation covariance that cannot be inverted.
pub fn spd_factor<T: Real, M: Dim>(s: &OMatrix<T, M, M>) -> Option<Cholesky<T, M>>
where
    DefaultAllocator: Allocator<M, M>,
{
    if !all_finite(s) {
        return None;
    }
    let factor = Cholesky::new(s.clone())?;
    // nalgebra accepts any pivot whose square root is real; a pivot that underflowed to a
    // subnormal still gives a useless inverse, so require the factor to be finite and
    // its diagonal strictly positive.
    let l = factor.l_dirty();
    let healthy = (0..l.nrows()).all(|i| l[(i, i)] > T::zero()) && all_finite(l);
    healthy.then_some(factor)
}

/// Whether the symmetric matrix `s` (lower triangle read) is positive definite, decided
/// by attempting its Cholesky factorisation.
pub fn is_positive_definite<T: Real, M: Dim>(s: &OMatrix<T, M, M>) -> bool
where
    DefaultAllocator: Allocator<M, M>,
{
    spd_factor(s).is_some()
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::{Matrix2, Vector2};

    #[test]
    fn factor_solves_spd_system() {
        let s = Matrix2::new(4.0, 2.0, 2.0, 3.0);
        let factor = spd_factor(&s).expect("SPD");
        let x = factor.solve(&Vector2::new(2.0, 1.0));
        assert!((s * x - Vector2::new(2.0, 1.0)).norm() < 1e-14);
    }

    #[test]
    fn factor_rejects_indefinite_and_non_finite() {
        assert!(spd_factor(&Matrix2::new(1.0, 2.0, 2.0, 1.0)).is_none());
        assert!(spd_factor(&Matrix2::new(0.0, 0.0, 0.0, 1.0)).is_none());
        assert!(spd_factor(&Matrix2::new(f64::NAN, 0.0, 0.0, 1.0)).is_none());
        assert!(spd_factor(&Matrix2::new(1.0, 0.0, 0.0, f64::INFINITY)).is_none());
    }
}
