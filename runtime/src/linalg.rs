//! Small linear-algebra helpers shared by the filters and by model code: finiteness tests,
//! the symmetric positive-definite solve used for innovation covariances, and noise
//! mapped through a gain.

use nalgebra::{
    allocator::Allocator, Cholesky, DefaultAllocator, Dim, Matrix, OMatrix, RawStorage,
};

use crate::health::symmetrise;
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

/// Adds `G Q G^T` to `out`: the covariance that noise `Q` on `W` variables adds to `N`
/// state components through the gain `G` (`N x W`), for example input noise through the
/// motion model's input Jacobian inside [`crate::MotionModel::process_noise`]. The sum is
/// made exactly symmetric.
pub fn add_noise_through_gain<T: Real, N: Dim, W: Dim>(
    out: &mut OMatrix<T, N, N>,
    gain: &OMatrix<T, N, W>,
    noise: &OMatrix<T, W, W>,
) where
    DefaultAllocator: Allocator<N, N> + Allocator<N, W> + Allocator<W, N> + Allocator<W, W>,
{
    let gq = gain * noise;
    out.gemm(T::one(), &gq, &gain.transpose(), T::one());
    symmetrise(out);
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
    fn noise_through_gain_matches_hand_product() {
        // Speed noise of variance 4 entering position and heading through
        // G = [[dt cos h], [dt sin h], [0]] with dt = 0.5, h = 0: only (0, 0) gains 1.
        let mut out = nalgebra::Matrix3::identity();
        let gain = nalgebra::Matrix3x1::new(0.5, 0.0, 0.0);
        add_noise_through_gain(&mut out, &gain, &nalgebra::Matrix1::new(4.0));
        assert_eq!(
            out,
            nalgebra::Matrix3::from_diagonal(&nalgebra::Vector3::new(2.0, 1.0, 1.0))
        );
    }

    #[test]
    fn factor_rejects_indefinite_and_non_finite() {
        assert!(spd_factor(&Matrix2::new(1.0, 2.0, 2.0, 1.0)).is_none());
        assert!(spd_factor(&Matrix2::new(0.0, 0.0, 0.0, 1.0)).is_none());
        assert!(spd_factor(&Matrix2::new(f64::NAN, 0.0, 0.0, 1.0)).is_none());
        assert!(spd_factor(&Matrix2::new(1.0, 0.0, 0.0, f64::INFINITY)).is_none());
    }
}
