//! Covariance health: symmetrisation, variance floors and ceilings, and the counters
//! the firmware reads to see what the filter has been through.

use nalgebra::{allocator::Allocator, DefaultAllocator, Dim, OMatrix, OVector};

use crate::Real;

/// Counts of what happened to a filter since it was created (or last reset).
///
/// Every counter saturates at `u32::MAX` instead of wrapping.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Health {
    /// Predictions committed.
    pub predictions: u32,
    /// Corrections committed.
    pub corrections: u32,
    /// Predictions rejected because the step was not finite or not positive.
    pub rejected_steps: u32,
    /// Predictions rejected because an input was not finite.
    pub non_finite_inputs: u32,
    /// Corrections rejected by the innovation gate.
    pub gated: u32,
    /// Corrections rejected because the reading was not finite.
    pub non_finite_readings: u32,
    /// Operations rejected because a covariance that must be positive definite was not.
    pub not_positive_definite: u32,
    /// Operations rejected because the result was not finite.
    pub non_finite_results: u32,
    /// Operations rejected because an argument had the wrong dimension.
    pub dimension_mismatches: u32,
    /// Committed covariances that were not exactly symmetric and were symmetrised.
    pub symmetrisations: u32,
    /// Variances raised to their floor.
    pub floor_clamps: u32,
    /// Variances lowered to their ceiling.
    pub ceiling_clamps: u32,
}

pub(crate) fn bump(counter: &mut u32) {
    *counter = counter.saturating_add(1);
}

/// Optional per-component bounds on the variances (the covariance diagonal).
///
/// A floor keeps a filter from becoming so sure of itself that it ignores readings; a
/// ceiling keeps an unobserved component from growing without bound.
#[derive(Clone, Debug, PartialEq)]
pub struct CovarianceLimits<T: Real, N: Dim>
where
    DefaultAllocator: Allocator<N>,
{
    /// Smallest allowed variance per state component.
    pub floor: Option<OVector<T, N>>,
    /// Largest allowed variance per state component.
    pub ceiling: Option<OVector<T, N>>,
}

impl<T: Real, N: Dim> Default for CovarianceLimits<T, N>
where
    DefaultAllocator: Allocator<N>,
{
    fn default() -> Self {
        Self {
            floor: None,
            ceiling: None,
        }
    }
}

/// Makes `p` exactly symmetric by averaging it with its transpose; returns whether any
/// pair of off-diagonal entries differed.
pub fn symmetrise<T: Real, N: Dim>(p: &mut OMatrix<T, N, N>) -> bool
where
    DefaultAllocator: Allocator<N, N>,
{
    let n = p.nrows();
    let half: T = crate::lit(0.5);
    let mut changed = false;
    for col in 0..n {
        for row in (col + 1)..n {
            let lower = p[(row, col)];
            let upper = p[(col, row)];
            if lower != upper {
                changed = true;
                let mean = (lower + upper) * half;
                p[(row, col)] = mean;
                p[(col, row)] = mean;
            }
        }
    }
    changed
}

/// Symmetrises `p` and applies the variance limits, counting what it changed.
///
/// Both clamps keep a positive semi-definite matrix positive semi-definite: a floor adds
/// a non-negative amount to one diagonal entry; a ceiling scales row and column `i` by
/// `sqrt(ceiling / p_ii)`, a congruence that keeps the correlations.
pub(crate) fn condition<T: Real, N: Dim>(
    p: &mut OMatrix<T, N, N>,
    limits: &CovarianceLimits<T, N>,
    health: &mut Health,
) where
    DefaultAllocator: Allocator<N> + Allocator<N, N>,
{
    if symmetrise(p) {
        bump(&mut health.symmetrisations);
    }
    if let Some(floor) = &limits.floor {
        for (i, &bound) in floor.iter().enumerate() {
            if p[(i, i)] < bound {
                p[(i, i)] = bound;
                bump(&mut health.floor_clamps);
            }
        }
    }
    if let Some(ceiling) = &limits.ceiling {
        for (i, &bound) in ceiling.iter().enumerate() {
            let variance = p[(i, i)];
            if variance > bound {
                let scale = (bound / variance).sqrt();
                p.row_mut(i).scale_mut(scale);
                p.column_mut(i).scale_mut(scale);
                // The diagonal was scaled twice (by scale^2 = bound / variance); set it
                // exactly so the ceiling holds bit for bit.
                p[(i, i)] = bound;
                bump(&mut health.ceiling_clamps);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::{Matrix3, Vector3};

    #[test]
    fn symmetrise_averages_and_reports() {
        let mut p = Matrix3::new(2.0, 1.0, 0.0, 1.5, 3.0, 0.25, 0.0, 0.25, 1.0);
        assert!(symmetrise(&mut p));
        assert_eq!(p[(0, 1)], 1.25);
        assert_eq!(p[(1, 0)], 1.25);
        assert!(!symmetrise(&mut p));
    }

    #[test]
    fn floor_and_ceiling_clamp_and_keep_correlation() {
        let mut p = Matrix3::new(4.0, 1.0, 0.0, 1.0, 1e-9, 0.0, 0.0, 0.0, 1.0);
        // p is deliberately not PSD in the (0,1) block before the floor: the floor only
        // raises the diagonal, which is what this test checks.
        let limits = CovarianceLimits {
            floor: Some(Vector3::new(0.0, 1e-3, 0.0)),
            ceiling: Some(Vector3::new(1.0, 10.0, 10.0)),
        };
        let mut health = Health::default();
        condition(&mut p, &limits, &mut health);
        assert_eq!(p[(1, 1)], 1e-3);
        assert_eq!(p[(0, 0)], 1.0);
        // Row/column 0 scaled by sqrt(1/4) = 0.5.
        assert_eq!(p[(0, 1)], 0.5);
        assert_eq!(p[(1, 0)], 0.5);
        assert_eq!(health.floor_clamps, 1);
        assert_eq!(health.ceiling_clamps, 1);
        assert_eq!(health.symmetrisations, 0);
    }
}
