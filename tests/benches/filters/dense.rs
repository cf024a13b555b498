//! The core of the hand-written extended Kalman filters: what a careful engineer writes
//! once and reuses for every sensor, with fixed-size nalgebra matrices and dense
//! products. `F P F^T + Q` in full, the Joseph-form update, a Cholesky factor of the
//! innovation covariance, the chi-square gate on the normalised innovation squared,
//! angle wrapping, symmetrisation and finiteness checks, committing only on success;
//! the same filter the runtime runs, without its structure-aware kernels.
//!
//! The models (transition, hand-derived Jacobians, noise) live in one module per spec.

use nalgebra::{SMatrix, SVector};
use reckon_runtime::angle::wrap_angle;

/// State mean, covariance and which components are angles.
#[derive(Clone, Debug)]
pub struct DenseEkf<const N: usize> {
    /// The mean, SI.
    pub x: SVector<f64, N>,
    /// The covariance, SI.
    pub p: SMatrix<f64, N, N>,
    angles: [bool; N],
}

impl<const N: usize> DenseEkf<N> {
    /// A filter at `mean` with independent standard deviations `std_dev`.
    pub fn new(mean: [f64; N], std_dev: [f64; N], angles: [bool; N]) -> DenseEkf<N> {
        let sigma = SVector::from(std_dev);
        DenseEkf {
            x: SVector::from(mean),
            p: SMatrix::from_diagonal(&sigma.component_mul(&sigma)),
            angles,
        }
    }

    /// Commits `x_next` and `F P F^T + Q`; `false` (nothing changed) if not finite.
    pub fn predict(
        &mut self,
        x_next: SVector<f64, N>,
        f: &SMatrix<f64, N, N>,
        q: &SMatrix<f64, N, N>,
    ) -> bool {
        let p_next = f * self.p * f.transpose() + q;
        self.commit(x_next, p_next)
    }

    /// The Joseph-form correction with residual `z - h(x)` (angle components already
    /// wrapped), reading Jacobian `h` and reading noise `r`; a reading whose normalised
    /// innovation squared exceeds `gate` is rejected. `false` leaves the filter as it was.
    pub fn correct<const M: usize>(
        &mut self,
        residual: &SVector<f64, M>,
        h: &SMatrix<f64, M, N>,
        r: &SMatrix<f64, M, M>,
        gate: Option<f64>,
    ) -> bool {
        let pht = self.p * h.transpose();
        let s = h * pht + r;
        let Some(factor) = s.cholesky() else {
            return false;
        };
        let whitened = factor.solve(residual);
        let nis = residual.dot(&whitened);
        // Written so that a NaN NIS fails the gate too.
        let passes = gate.is_none_or(|threshold| nis <= threshold);
        if !passes {
            return false;
        }
        // K = P H^T S^-1 by solving with the factor rather than inverting S.
        let gain = factor.solve(&pht.transpose()).transpose();
        let x_next = self.x + pht * whitened;
        let complement = SMatrix::<f64, N, N>::identity() - gain * h;
        let p_next = complement * self.p * complement.transpose() + gain * r * gain.transpose();
        self.commit(x_next, p_next)
    }

    fn commit(&mut self, mut x: SVector<f64, N>, p: SMatrix<f64, N, N>) -> bool {
        if !x.iter().chain(p.iter()).all(|v| v.is_finite()) {
            return false;
        }
        for (value, &is_angle) in x.iter_mut().zip(&self.angles) {
            if is_angle {
                *value = wrap_angle(*value);
            }
        }
        self.x = x;
        self.p = (p + p.transpose()) * 0.5;
        true
    }

    /// Mean then covariance, column-major.
    pub fn snapshot(&self) -> Vec<f64> {
        self.x.iter().chain(self.p.iter()).copied().collect()
    }
}

/// `z - z_hat` with the components flagged in `angles` wrapped to (-pi, pi].
pub fn residual<const M: usize>(
    z: SVector<f64, M>,
    z_hat: SVector<f64, M>,
    angles: [bool; M],
) -> SVector<f64, M> {
    let mut residual = z - z_hat;
    for (value, is_angle) in residual.iter_mut().zip(angles) {
        if is_angle {
            *value = wrap_angle(*value);
        }
    }
    residual
}
