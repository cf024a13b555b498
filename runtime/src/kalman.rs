//! The Kalman filter state holder and the linear/extended Kalman predict and correct
//! steps (Joseph form and sequential scalar form), with innovation gating.
//!
//! Every step computes into temporaries and commits only at the end, so a rejected step
//! leaves the state and covariance bit-identical.

use nalgebra::{allocator::Allocator, DefaultAllocator, Dim, OMatrix, OVector, U1};

use crate::angle::wrap_angle;
use crate::health::{bump, condition, CovarianceLimits, Health};
use crate::linalg::{all_finite, spd_factor};
use crate::model::{MotionModel, ReadingModel, UpdateForm};
use crate::outcome::{CorrectError, Innovation, PredictError};
use crate::Real;

/// A Gaussian's mean and covariance: a step's result before it is committed.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Moments<T: Real, N: Dim>
where
    DefaultAllocator: Allocator<N> + Allocator<N, N>,
{
    pub(crate) mean: OVector<T, N>,
    pub(crate) covariance: OMatrix<T, N, N>,
}

/// A correction's result before it is committed, with the innovation to report.
pub(crate) type Corrected<T, N, M> = (Moments<T, N>, Innovation<T, M>);

/// Why a filter could not be created or configured.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum InitError {
    /// The covariance is not square with the state's dimension, or a mask or limit
    /// vector has another length than the state.
    DimensionMismatch,
    /// A state, covariance or limit entry is NaN or infinite.
    NonFinite,
    /// A variance (covariance diagonal entry) or a limit is negative.
    NegativeVariance,
}

/// A Gaussian filter's state: mean `x`, covariance `P`, which state components are
/// angles, optional variance limits and the health counters.
///
/// Invariants kept by every method: `x` and `P` are finite, `P` is exactly symmetric,
/// angle components of `x` lie in (-pi, pi], and variances respect the limits.
#[derive(Clone, Debug, PartialEq)]
pub struct KalmanFilter<T: Real, N: Dim>
where
    DefaultAllocator: Allocator<N> + Allocator<N, N>,
{
    pub(crate) state: OVector<T, N>,
    pub(crate) covariance: OMatrix<T, N, N>,
    pub(crate) angle_states: OVector<bool, N>,
    pub(crate) limits: CovarianceLimits<T, N>,
    pub(crate) health: Health,
}

impl<T: Real, N: Dim> KalmanFilter<T, N>
where
    DefaultAllocator: Allocator<N> + Allocator<N, N>,
{
    /// A filter starting from mean `x` and covariance `p`, with no angle components and no
    /// variance limits. `p` is symmetrised (counted in [`Health::symmetrisations`]).
    pub fn new(x: OVector<T, N>, mut p: OMatrix<T, N, N>) -> Result<Self, InitError> {
        if p.nrows() != x.nrows() || p.ncols() != x.nrows() {
            return Err(InitError::DimensionMismatch);
        }
        if !all_finite(&x) || !all_finite(&p) {
            return Err(InitError::NonFinite);
        }
        if p.diagonal().iter().any(|&variance| variance < T::zero()) {
            return Err(InitError::NegativeVariance);
        }
        let mut health = Health::default();
        if crate::health::symmetrise(&mut p) {
            bump(&mut health.symmetrisations);
        }
        let angle_states = OVector::<bool, N>::from_element_generic(x.shape_generic().0, U1, false);
        Ok(Self {
            state: x,
            covariance: p,
            angle_states,
            limits: CovarianceLimits::default(),
            health,
        })
    }

    /// Restarts from mean `x` and covariance `p`, keeping the angle mask, the limits and
    /// the health counters; on error nothing changes.
    pub fn reset(&mut self, x: OVector<T, N>, p: OMatrix<T, N, N>) -> Result<(), InitError> {
        let fresh = Self::new(x, p)?;
        if fresh.state.nrows() != self.state.nrows() {
            return Err(InitError::DimensionMismatch);
        }
        if fresh.health.symmetrisations > 0 {
            bump(&mut self.health.symmetrisations);
        }
        self.commit(Moments {
            mean: fresh.state,
            covariance: fresh.covariance,
        });
        Ok(())
    }

    /// Marks which state components are angles; those are wrapped to (-pi, pi] now and
    /// after every step, and averaged on the circle by the unscented filter.
    pub fn set_angle_states(&mut self, mask: OVector<bool, N>) -> Result<(), InitError> {
        if mask.nrows() != self.state.nrows() {
            return Err(InitError::DimensionMismatch);
        }
        self.angle_states = mask;
        wrap_components(&mut self.state, &self.angle_states);
        Ok(())
    }

    /// Sets variance floors and ceilings and applies them to the current covariance.
    pub fn set_limits(&mut self, limits: CovarianceLimits<T, N>) -> Result<(), InitError> {
        for bound in limits.floor.iter().chain(limits.ceiling.iter()) {
            if bound.nrows() != self.state.nrows() {
                return Err(InitError::DimensionMismatch);
            }
            if !all_finite(bound) {
                return Err(InitError::NonFinite);
            }
            if bound.iter().any(|&value| value < T::zero()) {
                return Err(InitError::NegativeVariance);
            }
        }
        self.limits = limits;
        condition(&mut self.covariance, &self.limits, &mut self.health);
        Ok(())
    }

    /// The state mean `x`.
    pub fn state(&self) -> &OVector<T, N> {
        &self.state
    }

    /// The state covariance `P` (exactly symmetric).
    pub fn covariance(&self) -> &OMatrix<T, N, N> {
        &self.covariance
    }

    /// Which state components are angles.
    pub fn angle_states(&self) -> &OVector<bool, N> {
        &self.angle_states
    }

    /// The variance limits in force.
    pub fn limits(&self) -> &CovarianceLimits<T, N> {
        &self.limits
    }

    /// The health counters.
    pub fn health(&self) -> &Health {
        &self.health
    }

    /// Clears the health counters.
    pub fn reset_health(&mut self) {
        self.health = Health::default();
    }

    /// Commits a new state and covariance: wraps angles, symmetrises and applies limits.
    pub(crate) fn commit(&mut self, moments: Moments<T, N>) {
        let Moments {
            mut mean,
            mut covariance,
        } = moments;
        wrap_components(&mut mean, &self.angle_states);
        condition(&mut covariance, &self.limits, &mut self.health);
        self.state = mean;
        self.covariance = covariance;
    }

    pub(crate) fn record_predict_error(&mut self, error: PredictError) -> PredictError {
        let counter = match error {
            PredictError::NonPositiveStep | PredictError::NonFiniteStep => {
                &mut self.health.rejected_steps
            }
            PredictError::NonFiniteInput => &mut self.health.non_finite_inputs,
            PredictError::DimensionMismatch => &mut self.health.dimension_mismatches,
            PredictError::NonFiniteResult => &mut self.health.non_finite_results,
            PredictError::NotPositiveDefinite => &mut self.health.not_positive_definite,
        };
        bump(counter);
        error
    }

    pub(crate) fn record_correct_error(&mut self, error: CorrectError<T>) -> CorrectError<T> {
        let counter = match error {
            CorrectError::Gated { .. } => &mut self.health.gated,
            CorrectError::NonFiniteReading => &mut self.health.non_finite_readings,
            CorrectError::DimensionMismatch => &mut self.health.dimension_mismatches,
            CorrectError::NotPositiveDefinite => &mut self.health.not_positive_definite,
            CorrectError::NonFiniteResult => &mut self.health.non_finite_results,
        };
        bump(counter);
        error
    }

    /// Linear/extended Kalman prediction over a step `dt > 0` with input `u`:
    /// `x = f(x, u, dt)`, `P = F P F^T + Q` (through the model's
    /// [`MotionModel::propagate_covariance`] kernel).
    pub fn predict<U: Dim, Model: MotionModel<T, N, U>>(
        &mut self,
        model: &Model,
        u: &OVector<T, U>,
        dt: T,
    ) -> Result<(), PredictError>
    where
        DefaultAllocator: Allocator<U>,
    {
        match self.predicted_moments(model, u, dt) {
            Ok(moments) => {
                self.commit(moments);
                bump(&mut self.health.predictions);
                Ok(())
            }
            Err(error) => Err(self.record_predict_error(error)),
        }
    }

    fn predicted_moments<U: Dim, Model: MotionModel<T, N, U>>(
        &self,
        model: &Model,
        u: &OVector<T, U>,
        dt: T,
    ) -> Result<Moments<T, N>, PredictError>
    where
        DefaultAllocator: Allocator<U>,
    {
        check_step_and_input(model, u, dt)?;
        let (rows, cols) = self.covariance.shape_generic();
        let mut x_next = OVector::<T, N>::zeros_generic(rows, U1);
        model.transition(&self.state, u, dt, &mut x_next);
        let mut p_next = OMatrix::<T, N, N>::zeros_generic(rows, cols);
        model.propagate_covariance(&self.covariance, &self.state, u, dt, &mut p_next);
        if !all_finite(&x_next) || !all_finite(&p_next) {
            return Err(PredictError::NonFiniteResult);
        }
        Ok(Moments {
            mean: x_next,
            covariance: p_next,
        })
    }

    /// Linear/extended Kalman correction with reading `z`.
    ///
    /// `gate` is an optional chi-square threshold on the normalised innovation squared
    /// (the caller computes the quantile for `M` degrees of freedom); a reading whose NIS
    /// exceeds it is rejected as [`CorrectError::Gated`]. The update form is the model's
    /// [`ReadingModel::update_form`].
    pub fn correct<M: Dim, Model: ReadingModel<T, N, M>>(
        &mut self,
        model: &Model,
        z: &OVector<T, M>,
        args: &Model::Args,
        gate: Option<T>,
    ) -> Result<Innovation<T, M>, CorrectError<T>>
    where
        DefaultAllocator: Allocator<M> + Allocator<M, M> + Allocator<M, N> + Allocator<N, M>,
    {
        match self.corrected_moments(model, z, args, gate) {
            Ok((moments, innovation)) => {
                self.commit(moments);
                bump(&mut self.health.corrections);
                Ok(innovation)
            }
            Err(error) => Err(self.record_correct_error(error)),
        }
    }

    fn corrected_moments<M: Dim, Model: ReadingModel<T, N, M>>(
        &self,
        model: &Model,
        z: &OVector<T, M>,
        args: &Model::Args,
        gate: Option<T>,
    ) -> Result<Corrected<T, N, M>, CorrectError<T>>
    where
        DefaultAllocator: Allocator<M> + Allocator<M, M> + Allocator<M, N> + Allocator<N, M>,
    {
        let m = check_reading(model, z)?;
        let x = &self.state;
        let p = &self.covariance;
        let n = x.shape_generic().0;

        let mut z_hat = OVector::<T, M>::zeros_generic(m, U1);
        model.predict_reading(x, args, &mut z_hat);
        let mut h = OMatrix::<T, M, N>::zeros_generic(m, n);
        model.reading_jacobian(x, args, &mut h);
        let mut r = OMatrix::<T, M, M>::zeros_generic(m, m);
        model.reading_noise(x, args, &mut r);
        if !all_finite(&z_hat) || !all_finite(&h) || !all_finite(&r) {
            return Err(CorrectError::NonFiniteResult);
        }
        let residual = wrapped_residual(model, z, &z_hat);

        let mut pht = OMatrix::<T, N, M>::zeros_generic(n, m);
        model.cross_covariance(p, &h, &mut pht);
        let mut s = OMatrix::<T, M, M>::zeros_generic(m, m);
        model.innovation_covariance(&h, &pht, &r, &mut s);

        let (corrected, nis) =
            if model.update_form() == UpdateForm::SequentialScalar && is_diagonal(&r) {
                sequential_update(x, p, &h, &r, &residual)?
            } else {
                joseph_update(x, p, &h, &r, &pht, &s, &residual)?
            };
        if let Some(threshold) = gate {
            // NaN thresholds gate everything: a comparison with NaN is false.
            let passes = nis <= threshold;
            if !passes {
                return Err(CorrectError::Gated { nis });
            }
        }
        if !all_finite(&corrected.mean) || !all_finite(&corrected.covariance) {
            return Err(CorrectError::NonFiniteResult);
        }
        Ok((
            corrected,
            Innovation {
                residual,
                covariance: s,
                nis,
            },
        ))
    }
}

/// Checks `dt` and the input before a prediction touches anything.
pub(crate) fn check_step_and_input<T: Real, N: Dim, U: Dim, Model: MotionModel<T, N, U>>(
    model: &Model,
    u: &OVector<T, U>,
    dt: T,
) -> Result<(), PredictError>
where
    DefaultAllocator: Allocator<N> + Allocator<N, N> + Allocator<U>,
{
    if !dt.is_finite() {
        return Err(PredictError::NonFiniteStep);
    }
    if dt <= T::zero() {
        return Err(PredictError::NonPositiveStep);
    }
    if u.nrows() != model.input_dim().value() {
        return Err(PredictError::DimensionMismatch);
    }
    if !all_finite(u) {
        return Err(PredictError::NonFiniteInput);
    }
    Ok(())
}

/// Checks the reading's length and finiteness; returns the reading dimension.
pub(crate) fn check_reading<T: Real, N: Dim, M: Dim, Model: ReadingModel<T, N, M>>(
    model: &Model,
    z: &OVector<T, M>,
) -> Result<M, CorrectError<T>>
where
    DefaultAllocator: Allocator<N>
        + Allocator<N, N>
        + Allocator<M>
        + Allocator<M, M>
        + Allocator<M, N>
        + Allocator<N, M>,
{
    let m = model.reading_dim();
    if z.nrows() != m.value() {
        return Err(CorrectError::DimensionMismatch);
    }
    if !all_finite(z) {
        return Err(CorrectError::NonFiniteReading);
    }
    Ok(m)
}

/// `z - z_hat` with the model's angle components wrapped to (-pi, pi].
pub(crate) fn wrapped_residual<T: Real, N: Dim, M: Dim, Model: ReadingModel<T, N, M>>(
    model: &Model,
    z: &OVector<T, M>,
    z_hat: &OVector<T, M>,
) -> OVector<T, M>
where
    DefaultAllocator: Allocator<N>
        + Allocator<N, N>
        + Allocator<M>
        + Allocator<M, M>
        + Allocator<M, N>
        + Allocator<N, M>,
{
    let mut residual = z - z_hat;
    for (i, value) in residual.iter_mut().enumerate() {
        if model.is_angle(i) {
            *value = wrap_angle(*value);
        }
    }
    residual
}

/// Wraps the components of `x` flagged in `mask`.
pub(crate) fn wrap_components<T: Real, N: Dim>(x: &mut OVector<T, N>, mask: &OVector<bool, N>)
where
    DefaultAllocator: Allocator<N>,
{
    for (value, &is_angle) in x.iter_mut().zip(mask.iter()) {
        if is_angle {
            *value = wrap_angle(*value);
        }
    }
}

fn is_diagonal<T: Real, M: Dim>(r: &OMatrix<T, M, M>) -> bool
where
    DefaultAllocator: Allocator<M, M>,
{
    let m = r.nrows();
    (0..m).all(|col| (0..m).all(|row| row == col || r[(row, col)] == T::zero()))
}

/// The Joseph-form vector update. Returns the corrected state, covariance and the NIS.
fn joseph_update<T: Real, N: Dim, M: Dim>(
    x: &OVector<T, N>,
    p: &OMatrix<T, N, N>,
    h: &OMatrix<T, M, N>,
    r: &OMatrix<T, M, M>,
    pht: &OMatrix<T, N, M>,
    s: &OMatrix<T, M, M>,
    residual: &OVector<T, M>,
) -> Result<(Moments<T, N>, T), CorrectError<T>>
where
    DefaultAllocator: Allocator<N>
        + Allocator<N, N>
        + Allocator<M>
        + Allocator<M, M>
        + Allocator<M, N>
        + Allocator<N, M>,
{
    let factor = spd_factor(s).ok_or(CorrectError::NotPositiveDefinite)?;
    let whitened = factor.solve(residual);
    let nis = residual.dot(&whitened);
    // K = P H^T S^-1, formed as the transpose of S^-1 (P H^T)^T (S is symmetric).
    let gain = factor.solve(&pht.transpose()).transpose();
    let x_next = x + pht * whitened;
    let p_next = joseph_covariance(p, h, r, &gain);
    Ok((
        Moments {
            mean: x_next,
            covariance: p_next,
        },
        nis,
    ))
}

/// `(I - K H) P (I - K H)^T + K R K^T`, valid for any gain `K`.
///
/// The products are associated so that no `N x N` matrix is multiplied by another:
/// `B = (I - K H) P = P - K (H P)`, then `B (I - K H)^T = B - (B H^T) K^T`, then
/// `+ (K R) K^T`. That is the same congruence as forming `I - K H` first (nothing relies
/// on `K` being the optimal gain), at `O(N^2 M)` instead of `O(N^3)` operations.
pub fn joseph_covariance<T: Real, N: Dim, M: Dim>(
    p: &OMatrix<T, N, N>,
    h: &OMatrix<T, M, N>,
    r: &OMatrix<T, M, M>,
    gain: &OMatrix<T, N, M>,
) -> OMatrix<T, N, N>
where
    DefaultAllocator: Allocator<N, N> + Allocator<M, M> + Allocator<M, N> + Allocator<N, M>,
{
    let hp = h * p;
    let mut result = p.clone();
    result.gemm(-T::one(), gain, &hp, T::one());
    let bht = &result * h.transpose();
    let gain_t = gain.transpose();
    result.gemm(-T::one(), &bht, &gain_t, T::one());
    let kr = gain * r;
    result.gemm(T::one(), &kr, &gain_t, T::one());
    result
}

/// One scalar Joseph update per reading component, linearised at the prior. Returns the
/// corrected state, covariance and the NIS, which equals the batch NIS because the
/// scalar innovations are the successive whitened components of the vector innovation.
fn sequential_update<T: Real, N: Dim, M: Dim>(
    x: &OVector<T, N>,
    p: &OMatrix<T, N, N>,
    h: &OMatrix<T, M, N>,
    r: &OMatrix<T, M, M>,
    residual: &OVector<T, M>,
) -> Result<(Moments<T, N>, T), CorrectError<T>>
where
    DefaultAllocator: Allocator<N>
        + Allocator<N, N>
        + Allocator<M>
        + Allocator<M, M>
        + Allocator<M, N>
        + Allocator<N, M>,
{
    let (n, _) = p.shape_generic();
    let mut shift = OVector::<T, N>::zeros_generic(n, U1);
    let mut p_current = p.clone();
    let mut nis = T::zero();
    for i in 0..h.nrows() {
        let row = h.row(i).transpose();
        let noise = r[(i, i)];
        let ph = &p_current * &row;
        let variance = row.dot(&ph) + noise;
        if !variance.is_finite() || variance <= T::zero() {
            return Err(CorrectError::NotPositiveDefinite);
        }
        let innovation = residual[i] - row.dot(&shift);
        let gain = ph / variance;
        nis += innovation * innovation / variance;
        shift.axpy(innovation, &gain, T::one());
        let mut complement = OMatrix::<T, N, N>::identity_generic(n, n);
        complement.ger(-T::one(), &gain, &row, T::one());
        let mut next = &complement * &p_current * complement.transpose();
        next.ger(noise, &gain, &gain, T::one());
        p_current = next;
    }
    Ok((
        Moments {
            mean: x + shift,
            covariance: p_current,
        },
        nis,
    ))
}

#[cfg(test)]
mod tests {

    use super::*;
    use crate::test_models::{
        assert_untouched, unicycle_filter, ConstantVelocity, LinearReading, RandomConstant,
        RangeBearing, Unicycle,
    };
    use nalgebra::{Matrix1, Matrix2, Matrix3, Vector1, Vector2, Vector3};

    fn no_input() -> OVector<f64, nalgebra::Const<0>> {
        OVector::<f64, nalgebra::Const<0>>::zeros()
    }

    #[test]
    fn scalar_random_constant_variance_recursion() {
        // Welch & Bishop, "An Introduction to the Kalman Filter", UNC TR 95-041, sec. 3:
        // the random constant with A = H = 1, Q = 1e-5, R = 0.01, P0 = 1. The variances
        // do not depend on the readings, so any readings do. Expected values recomputed
        // from the scalar recursion (reference-values.md).
        let model = RandomConstant { q: 1e-5, r: 0.01 };
        let mut filter = KalmanFilter::new(Vector1::new(0.0), Matrix1::new(1.0)).unwrap();
        for k in 1..=50 {
            filter.predict(&model, &no_input(), 1.0).unwrap();
            let prior = filter.covariance()[0];
            let innovation = filter
                .correct(
                    &model,
                    &Vector1::new(-0.37727 + 0.01 * f64::from(k % 7)),
                    &(),
                    None,
                )
                .unwrap();
            let gain = prior / innovation.covariance[0];
            let posterior = filter.covariance()[0];
            if k == 1 {
                assert!((prior - 1.00001).abs() < 1e-12);
                assert!((gain - 0.990099).abs() < 1e-6);
                assert!((posterior - 9.900991e-3).abs() < 1e-9);
            }
            if k == 50 {
                assert!((prior - 3.511212e-4).abs() < 1e-10);
                assert!((gain - 3.392108e-2).abs() < 1e-8);
                assert!((posterior - 3.392108e-4).abs() < 1e-10);
            }
        }
    }

    #[test]
    fn scalar_random_constant_converges_to_riccati_fixed_point() {
        // Closed-form fixed point of the scalar Riccati recursion P- = P + Q,
        // P = P- R / (P- + R): P- = (Q + sqrt(Q^2 + 4 Q R)) / 2 (solve the quadratic
        // P-^2 - Q P- - Q R = 0), K = P- / (P- + R). Welch & Bishop TR 95-041 example.
        let (q, r) = (1e-5, 0.01);
        let model = RandomConstant { q, r };
        let mut filter = KalmanFilter::new(Vector1::new(0.0), Matrix1::new(1.0)).unwrap();
        let mut gain = 0.0;
        for _ in 0..5000 {
            filter.predict(&model, &no_input(), 1.0).unwrap();
            let prior = filter.covariance()[0];
            let innovation = filter
                .correct(&model, &Vector1::new(-0.37727), &(), None)
                .unwrap();
            gain = prior / innovation.covariance[0];
        }
        let prior_fixed = (q + (q * q + 4.0 * q * r).sqrt()) / 2.0;
        let gain_fixed = prior_fixed / (prior_fixed + r);
        assert!((gain - gain_fixed).abs() < 1e-12, "{gain} vs {gain_fixed}");
        assert!((gain_fixed - 0.03112673).abs() < 1e-8);
    }

    /// One correction of a 1-D state with `H = 1`: the posterior is the product of the
    /// prior and reading Gaussians.
    fn fuse(
        prior_mean: f64,
        prior_variance: f64,
        reading: f64,
        reading_variance: f64,
    ) -> (f64, f64) {
        let model = RandomConstant {
            q: 0.0,
            r: reading_variance,
        };
        let mut filter =
            KalmanFilter::new(Vector1::new(prior_mean), Matrix1::new(prior_variance)).unwrap();
        filter
            .correct(&model, &Vector1::new(reading), &(), None)
            .unwrap();
        (filter.state()[0], filter.covariance()[0])
    }

    #[test]
    fn correction_is_gaussian_product() {
        // Bromiley, "Products and Convolutions of Gaussian Probability Density
        // Functions", TINA Memo 2003-003, sec. 1: N(3, 0.7^2) x N(4.5, 1^2) has mean
        // 3.49329 and variance 0.328859 (values printed to 6 significant digits).
        let (mean, variance) = fuse(3.0, 0.49, 4.5, 1.0);
        assert!((mean - 3.49329).abs() < 5e-6);
        assert!((variance - 0.328859).abs() < 5e-7);
        // Same memo: equal variances give the midpoint and half the variance.
        let (mean, variance) = fuse(-1.0, 2.0, 5.0, 2.0);
        assert!((mean - 2.0).abs() < 1e-12);
        assert!((variance - 1.0).abs() < 1e-12);
    }

    #[test]
    fn rejected_predictions_leave_filter_bit_identical() {
        // Fault injection (common practice, no source): each bad argument must be
        // rejected with its own error and change nothing but the health counters.
        let model = Unicycle { q: 0.01 };
        let good_input = Vector2::new(1.0, 0.1);
        let cases: [(f64, Vector2<f64>, PredictError); 8] = [
            (f64::NAN, good_input, PredictError::NonFiniteStep),
            (f64::INFINITY, good_input, PredictError::NonFiniteStep),
            (0.0, good_input, PredictError::NonPositiveStep),
            (-0.1, good_input, PredictError::NonPositiveStep),
            (
                0.1,
                Vector2::new(f64::NAN, 0.0),
                PredictError::NonFiniteInput,
            ),
            (
                0.1,
                Vector2::new(0.0, f64::NEG_INFINITY),
                PredictError::NonFiniteInput,
            ),
            // Huge values overflow the propagated covariance.
            (0.1, Vector2::new(1e300, 0.0), PredictError::NonFiniteResult),
            (1e300, good_input, PredictError::NonFiniteResult),
        ];
        for (dt, input, expected) in cases {
            let mut filter = unicycle_filter();
            let before = filter.clone();
            assert_eq!(
                filter.predict(&model, &input, dt),
                Err(expected),
                "dt {dt}, u {input:?}"
            );
            assert_untouched(&filter, &before);
        }
        let mut filter = unicycle_filter();
        filter.predict(&model, &good_input, f64::NAN).unwrap_err();
        filter
            .predict(&model, &Vector2::new(f64::NAN, 0.0), 0.1)
            .unwrap_err();
        filter
            .predict(&model, &Vector2::new(1e300, 0.0), 0.1)
            .unwrap_err();
        let health = filter.health();
        assert_eq!(
            (
                health.rejected_steps,
                health.non_finite_inputs,
                health.non_finite_results
            ),
            (1, 1, 1)
        );
        assert_eq!(health.predictions, 0);
    }

    #[test]
    fn rejected_corrections_leave_filter_bit_identical() {
        // Fault injection (common practice, no source). Gate: chi-square 0.997 quantile
        // for 2 degrees of freedom, 11.6183 (scipy.stats.chi2.ppf, reference-values.md).
        let gate = Some(11.6183);
        let landmark = [10.0, 5.0];
        for form in [UpdateForm::Joseph, UpdateForm::SequentialScalar] {
            let model = RangeBearing {
                range_variance: 0.01,
                bearing_variance: 1e-4,
                form,
            };
            let filter = unicycle_filter();
            let mut z_hat = Vector2::zeros();
            model.predict_reading(filter.state(), &landmark, &mut z_hat);
            let range_sigma = filter
                .clone()
                .correct(&model, &z_hat, &landmark, None)
                .unwrap()
                .covariance[(0, 0)]
                .sqrt();
            let cases: [(Vector2<f64>, &[f64; 2], CorrectError<f64>); 5] = [
                (
                    Vector2::new(f64::NAN, 0.0),
                    &landmark,
                    CorrectError::NonFiniteReading,
                ),
                (
                    Vector2::new(1.0, f64::INFINITY),
                    &landmark,
                    CorrectError::NonFiniteReading,
                ),
                (
                    Vector2::new(1e300, 0.0),
                    &landmark,
                    CorrectError::Gated { nis: f64::NAN },
                ),
                // A 10-sigma outlier in range: the reading is otherwise the prediction.
                (
                    z_hat + Vector2::new(10.0 * range_sigma, 0.0),
                    &landmark,
                    CorrectError::Gated { nis: f64::NAN },
                ),
                // A landmark on the vehicle makes the reading function non-finite.
                (z_hat, &[1.0, -2.0], CorrectError::NonFiniteResult),
            ];
            for (z, args, expected) in cases {
                let mut filter = unicycle_filter();
                let before = filter.clone();
                let error = filter.correct(&model, &z, args, gate).unwrap_err();
                match (error, expected) {
                    (CorrectError::Gated { nis }, CorrectError::Gated { .. }) => {
                        assert!(nis > 11.6183)
                    }
                    _ => assert_eq!(error, expected, "{form:?} z {z:?}"),
                }
                assert_untouched(&filter, &before);
            }
            // Negative reading noise makes S indefinite.
            let bad_noise = RangeBearing {
                range_variance: -10.0,
                bearing_variance: 1e-4,
                form,
            };
            let mut filter = unicycle_filter();
            let before = filter.clone();
            assert_eq!(
                filter.correct(&bad_noise, &z_hat, &landmark, None),
                Err(CorrectError::NotPositiveDefinite)
            );
            assert_untouched(&filter, &before);
            assert_eq!(filter.health().not_positive_definite, 1);
        }
    }

    #[test]
    fn bearing_residual_and_heading_are_wrapped() {
        let model = RangeBearing {
            range_variance: 0.01,
            bearing_variance: 1e-4,
            form: UpdateForm::Joseph,
        };
        let landmark = [-10.0, 1e-3];
        let mut filter =
            KalmanFilter::new(Vector3::new(0.0, 0.0, 0.0), Matrix3::identity() * 0.01).unwrap();
        filter
            .set_angle_states(Vector3::new(false, false, true))
            .unwrap();
        let mut z_hat = Vector2::zeros();
        model.predict_reading(filter.state(), &landmark, &mut z_hat);
        // The predicted bearing is just below pi; a reading just past -pi is 0.002 rad away.
        let reading = Vector2::new(z_hat[0], -core::f64::consts::PI + 1e-3);
        let innovation = filter.correct(&model, &reading, &landmark, None).unwrap();
        assert!(
            innovation.residual[1].abs() < 3e-3,
            "{}",
            innovation.residual[1]
        );
        assert!(
            filter.state()[2] > -core::f64::consts::PI
                && filter.state()[2] <= core::f64::consts::PI
        );
    }

    #[test]
    fn sequential_and_joseph_forms_agree_on_range_bearing() {
        let landmark = [10.0, 5.0];
        let reading = Vector2::new(10.5, 0.2);
        let mut results = [unicycle_filter(), unicycle_filter()];
        let mut nis = [0.0; 2];
        for (i, form) in [UpdateForm::Joseph, UpdateForm::SequentialScalar]
            .into_iter()
            .enumerate()
        {
            let model = RangeBearing {
                range_variance: 0.01,
                bearing_variance: 1e-4,
                form,
            };
            nis[i] = results[i]
                .correct(&model, &reading, &landmark, None)
                .unwrap()
                .nis;
        }
        assert!((results[0].state() - results[1].state()).norm() < 1e-9);
        assert!((results[0].covariance() - results[1].covariance()).norm() < 1e-9);
        assert!((nis[0] - nis[1]).abs() < 1e-9 * nis[0].max(1.0));
    }

    #[test]
    fn constant_velocity_predict_matches_hand_product() {
        // F P F^T + Q for F = [[1, dt], [0, 1]] and white-noise acceleration, dt = 2:
        // Q = q [[8/3, 2], [2, 2]] (Bar-Shalom, Li & Kirubarajan 2001, sec. 6.2.2).
        let model = ConstantVelocity { q: 1.0, r: 1.0 };
        let mut filter = KalmanFilter::new(Vector2::new(0.0, 1.0), Matrix2::identity()).unwrap();
        filter.predict(&model, &no_input(), 2.0).unwrap();
        let expected = Matrix2::new(5.0 + 8.0 / 3.0, 2.0 + 2.0, 2.0 + 2.0, 1.0 + 2.0);
        assert!((filter.covariance() - expected).norm() < 1e-12);
        assert_eq!(filter.state(), &Vector2::new(2.0, 1.0));
    }

    #[test]
    fn reset_keeps_configuration_and_applies_it() {
        let mut filter = unicycle_filter();
        filter
            .predict(&Unicycle { q: 0.01 }, &Vector2::new(1.0, 0.0), 0.1)
            .unwrap();
        filter
            .reset(Vector3::new(0.0, 0.0, 4.0), Matrix3::identity())
            .unwrap();
        // The heading is an angle: 4 rad wraps to 4 - 2 pi.
        assert!((filter.state()[2] - (4.0 - 2.0 * core::f64::consts::PI)).abs() < 1e-12);
        assert_eq!(filter.health().predictions, 1);
        let before = filter.clone();
        assert_eq!(
            filter.reset(Vector3::new(f64::NAN, 0.0, 0.0), Matrix3::identity()),
            Err(InitError::NonFinite)
        );
        assert_eq!(filter, before);
    }

    #[test]
    fn init_rejects_bad_covariance() {
        assert_eq!(
            KalmanFilter::new(Vector1::new(0.0), Matrix1::new(f64::NAN)),
            Err(InitError::NonFinite)
        );
        assert_eq!(
            KalmanFilter::new(Vector1::new(0.0), Matrix1::new(-1.0)),
            Err(InitError::NegativeVariance)
        );
    }

    #[test]
    fn joseph_form_stays_positive_definite_in_f32_where_short_form_fails() {
        // Bucy & Joseph (1968), ch. 16: the Joseph form keeps the covariance symmetric
        // positive definite under round-off; the short form (I - K H) P does not. The
        // example: an f32 constant-velocity track, a reading 1e8 times more precise than
        // the prior (P0 = 100 I, R = 1e-6), small process noise.
        let model = ConstantVelocity { q: 1e-4, r: 1e-6 };
        let p0 = Matrix2::<f32>::identity() * 100.0;
        let mut filter = KalmanFilter::new(Vector2::new(0.0_f32, 0.0), p0).unwrap();
        let mut short = p0;
        let mut short_failed_at = None;
        let none = OVector::<f32, nalgebra::Const<0>>::zeros();
        let h = nalgebra::RowVector2::new(1.0_f32, 0.0);
        // One million steps take well under a second at the test profile's opt-level 1.
        for step in 0..1_000_000 {
            let reading = Vector1::new((step % 13) as f32 * 1e-3);
            filter.predict(&model, &none, 0.1).unwrap();
            filter.correct(&model, &reading, &(), None).unwrap();
            let p = filter.covariance();
            assert_eq!(p[(0, 1)].to_bits(), p[(1, 0)].to_bits(), "step {step}");
            assert!(crate::linalg::is_positive_definite(p), "step {step}: {p}");

            if short_failed_at.is_none() {
                let mut prior = Matrix2::zeros();
                MotionModel::<f32, _, _>::propagate_covariance(
                    &model,
                    &short,
                    filter.state(),
                    &none,
                    0.1,
                    &mut prior,
                );
                let gain = prior * h.transpose() / ((h * prior * h.transpose())[0] + 1e-6);
                short = (Matrix2::identity() - gain * h) * prior;
                let symmetric_part = (short + short.transpose()) * 0.5;
                if !crate::linalg::is_positive_definite(&symmetric_part) {
                    short_failed_at = Some(step);
                }
            }
        }
        assert!(
            short_failed_at.is_some(),
            "the example no longer separates the forms"
        );
    }

    fn spd3(entries: &[f64], jitter: f64) -> Matrix3<f64> {
        let root = Matrix3::from_row_slice(entries);
        root * root.transpose() + Matrix3::identity() * jitter
    }

    proptest::proptest! {
        #[test]
        fn joseph_covariance_is_symmetric_psd_for_any_gain(
            p_root in proptest::collection::vec(-2.0..2.0_f64, 9),
            h_entries in proptest::collection::vec(-2.0..2.0_f64, 6),
            gain_entries in proptest::collection::vec(-3.0..3.0_f64, 6),
            r_diag in proptest::collection::vec(1e-3..4.0_f64, 2),
            r_corr in -0.9..0.9_f64,
        ) {
            // Bucy & Joseph (1968): the Joseph form is a congruence plus a PSD term, so it is
            // symmetric PSD for any gain, optimal or not.
            let p = spd3(&p_root, 1e-3);
            let h = nalgebra::Matrix2x3::from_row_slice(&h_entries);
            let gain = nalgebra::Matrix3x2::from_row_slice(&gain_entries);
            let off = r_corr * (r_diag[0] * r_diag[1]).sqrt();
            let r = Matrix2::new(r_diag[0], off, off, r_diag[1]);
            let result = joseph_covariance(&p, &h, &r, &gain);
            let scale = result.norm().max(1.0);
            proptest::prop_assert!((result - result.transpose()).norm() <= 1e-12 * scale);
            let eigen = ((result + result.transpose()) * 0.5).symmetric_eigenvalues();
            proptest::prop_assert!(eigen.min() >= -1e-12 * scale, "{eigen}");
        }

        #[test]
        fn sequential_update_equals_batch_update_for_diagonal_noise(
            p_root in proptest::collection::vec(-2.0..2.0_f64, 9),
            h_entries in proptest::collection::vec(-2.0..2.0_f64, 6),
            r_diag in proptest::collection::vec(1e-2..4.0_f64, 2),
            x in proptest::collection::vec(-5.0..5.0_f64, 3),
            z in proptest::collection::vec(-5.0..5.0_f64, 2),
        ) {
            // Sequential processing of uncorrelated reading components is exact for a
            // linear reading (common practice, no source); the NIS sums likewise.
            let p = spd3(&p_root, 1e-2);
            let h = nalgebra::Matrix2x3::from_row_slice(&h_entries);
            let r = Matrix2::new(r_diag[0], 0.0, 0.0, r_diag[1]);
            let z = Vector2::new(z[0], z[1]);
            let mut batch = KalmanFilter::new(Vector3::new(x[0], x[1], x[2]), p).unwrap();
            let mut sequential = batch.clone();
            let a = batch.correct(&LinearReading { h, r, form: UpdateForm::Joseph }, &z, &(), None).unwrap();
            let b = sequential.correct(&LinearReading { h, r, form: UpdateForm::SequentialScalar }, &z, &(), None).unwrap();
            proptest::prop_assert!((batch.state() - sequential.state()).norm() <= 1e-8 * (1.0 + batch.state().norm()));
            proptest::prop_assert!((batch.covariance() - sequential.covariance()).norm() <= 1e-8 * (1.0 + p.norm()));
            proptest::prop_assert!((a.nis - b.nis).abs() <= 1e-8 * (1.0 + a.nis));
        }
    }

    #[test]
    fn gate_compares_nis_with_the_callers_quantile() {
        // Chi-square upper critical value, 1 degree of freedom, 0.95: 3.841
        // (NIST/SEMATECH e-Handbook, sec. 1.3.6.7.4). With P = R = 1 the innovation
        // variance is 2, so NIS = residual^2 / 2.
        let model = RandomConstant { q: 0.0, r: 1.0 };
        let gate = Some(3.841);
        let mut filter = KalmanFilter::new(Vector1::new(0.0), Matrix1::new(1.0)).unwrap();
        let inside = filter
            .clone()
            .correct(&model, &Vector1::new((2.0_f64 * 3.8).sqrt()), &(), gate)
            .unwrap();
        assert!((inside.nis - 3.8).abs() < 1e-12);
        match filter.correct(&model, &Vector1::new(-(2.0_f64 * 3.9).sqrt()), &(), gate) {
            Err(CorrectError::Gated { nis }) => assert!((nis - 3.9).abs() < 1e-12),
            other => panic!("expected a gated reading, got {other:?}"),
        }
        assert_eq!(filter.health().gated, 1);
        assert_eq!(filter.health().corrections, 0);
    }

    #[test]
    fn variance_limits_hold_and_are_counted() {
        let model = ConstantVelocity { q: 1e-6, r: 1e-4 };
        let mut filter = KalmanFilter::new(Vector2::new(0.0, 0.0), Matrix2::identity()).unwrap();
        let floor = Vector2::new(1e-3, 1e-3);
        let ceiling = Vector2::new(50.0, 2.0);
        filter
            .set_limits(CovarianceLimits {
                floor: Some(floor),
                ceiling: Some(ceiling),
            })
            .unwrap();
        // Precise readings drive the position variance below its floor.
        for _ in 0..50 {
            filter.predict(&model, &no_input(), 0.1).unwrap();
            filter
                .correct(&model, &Vector1::new(0.0), &(), None)
                .unwrap();
            let p = filter.covariance();
            assert!(p[(0, 0)] >= floor[0] && p[(1, 1)] >= floor[1]);
        }
        assert!(filter.health().floor_clamps > 0);
        // Predictions alone make the variances grow until the ceilings hold them.
        let loose = ConstantVelocity { q: 1.0, r: 1.0 };
        for _ in 0..50 {
            filter.predict(&loose, &no_input(), 1.0).unwrap();
            let p = filter.covariance();
            assert!(p[(0, 0)] <= ceiling[0] && p[(1, 1)] <= ceiling[1]);
            assert!(crate::linalg::is_positive_definite(p));
        }
        assert!(filter.health().ceiling_clamps > 0);
        assert_eq!(
            filter.set_limits(CovarianceLimits {
                floor: Some(Vector2::new(-1.0, 0.0)),
                ceiling: None
            }),
            Err(InitError::NegativeVariance)
        );
    }
}
