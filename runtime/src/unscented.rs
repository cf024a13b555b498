//! The unscented transform (scaled sigma points) and the unscented Kalman predict and
//! correct steps, which use the same model traits as the extended filter but only their
//! function values, never their Jacobians.
//!
//! Sigma points are generated on the fly and never stored, so memory stays `O(N^2)` with
//! fixed-size types. Moments are accumulated relative to the image of the central sigma
//! point, which keeps the one-pass covariance accurate and lets angle components be
//! differenced on the circle.

use nalgebra::{allocator::Allocator, DefaultAllocator, Dim, OMatrix, OVector, U1};

use crate::angle::wrap_angle;
use crate::health::bump;
use crate::kalman::{
    check_reading, check_step_and_input, wrapped_residual, Corrected, KalmanFilter, Moments,
};
use crate::linalg::{all_finite, spd_factor};
use crate::model::{MotionModel, ReadingModel};
use crate::outcome::{CorrectError, Innovation, PredictError};
use crate::Real;

/// Scaling parameters of the sigma points.
///
/// `alpha` sets the spread around the mean, `beta` folds prior knowledge of the
/// distribution's kurtosis into the central covariance weight (2 is optimal for a
/// Gaussian), `kappa` is a secondary spread parameter.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct UnscentedParams<T> {
    /// Spread of the sigma points, `0 < alpha`.
    pub alpha: T,
    /// Prior-distribution parameter of the central covariance weight.
    pub beta: T,
    /// Secondary scaling parameter; `alpha^2 (L + kappa)` must be positive.
    pub kappa: T,
}

/// Why an unscented transform could not be carried out.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum UnscentedError {
    /// The parameters give a non-positive or non-finite `L + lambda`.
    InvalidParameters,
    /// The weights were computed for another dimension than the covariance has.
    DimensionMismatch,
    /// The covariance has no Cholesky factor, so the sigma points are undefined.
    NotPositiveDefinite,
}

/// Sigma-point weights for a given dimension `L`:
/// `lambda = alpha^2 (L + kappa) - L`, `W0m = lambda / (L + lambda)`,
/// `W0c = W0m + 1 - alpha^2 + beta`, `Wi = 1 / (2 (L + lambda))`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct UnscentedWeights<T> {
    /// The dimension `L` the weights were computed for.
    pub dimension: usize,
    /// Mean weight of the central point, `W0m`.
    pub mean_center: T,
    /// Covariance weight of the central point, `W0c`.
    pub covariance_center: T,
    /// Mean and covariance weight of each of the other `2 L` points, `Wi`.
    pub outer: T,
    /// Distance of the outer points in units of the covariance's Cholesky columns,
    /// `sqrt(L + lambda)`.
    pub spread: T,
}

impl<T: Real> UnscentedWeights<T> {
    /// Computes the weights for dimension `dimension`.
    pub fn new(params: &UnscentedParams<T>, dimension: usize) -> Result<Self, UnscentedError> {
        let size: T = nalgebra::convert(dimension as f64);
        let alpha2 = params.alpha * params.alpha;
        let scale = alpha2 * (size + params.kappa);
        let valid = params.alpha > T::zero()
            && scale > T::zero()
            && scale.is_finite()
            && params.beta.is_finite();
        if !valid {
            return Err(UnscentedError::InvalidParameters);
        }
        let lambda = scale - size;
        let mean_center = lambda / scale;
        Ok(Self {
            dimension,
            mean_center,
            covariance_center: mean_center + T::one() - alpha2 + params.beta,
            outer: T::one() / (scale + scale),
            spread: scale.sqrt(),
        })
    }
}

/// The moments of a transformed Gaussian.
#[derive(Clone, Debug, PartialEq)]
pub struct Transformed<T: Real, N: Dim, K: Dim>
where
    DefaultAllocator: Allocator<K> + Allocator<K, K> + Allocator<N, K>,
{
    /// Mean of the image (angle components averaged on the circle).
    pub mean: OVector<T, K>,
    /// Covariance of the image about `mean`.
    pub covariance: OMatrix<T, K, K>,
    /// Cross-covariance between the input and the image.
    pub cross_covariance: OMatrix<T, N, K>,
}

/// The unscented transform of `N(mean, covariance)` through `map`, whose image has
/// dimension `output_dim`; image components for which `is_angle` holds are averaged and
/// differenced on the circle.
///
/// `map` is called once per sigma point (`2 L + 1` times) with the point and a
/// zero-filled output buffer. Non-finite images are not detected here; callers test the
/// result.
pub fn unscented_transform<T, N, K, Map, Angle>(
    mean: &OVector<T, N>,
    covariance: &OMatrix<T, N, N>,
    weights: &UnscentedWeights<T>,
    output_dim: K,
    is_angle: Angle,
    mut map: Map,
) -> Result<Transformed<T, N, K>, UnscentedError>
where
    T: Real,
    N: Dim,
    K: Dim,
    Map: FnMut(&OVector<T, N>, &mut OVector<T, K>),
    Angle: Fn(usize) -> bool,
    DefaultAllocator:
        Allocator<N> + Allocator<N, N> + Allocator<K> + Allocator<K, K> + Allocator<N, K>,
{
    let n = mean.shape_generic().0;
    if weights.dimension != n.value()
        || covariance.nrows() != n.value()
        || covariance.ncols() != n.value()
    {
        return Err(UnscentedError::DimensionMismatch);
    }
    let factor = spd_factor(covariance).ok_or(UnscentedError::NotPositiveDefinite)?;
    let root = factor.l();

    let mut reference = OVector::<T, K>::zeros_generic(output_dim, U1);
    map(mean, &mut reference);

    // Sums over the outer points of the deviation `image - reference` (angles wrapped):
    // first moment, second moment, and sin/cos of the image for circular means. The
    // central point's deviation is zero, so it only enters through its weights.
    let mut first = OVector::<T, K>::zeros_generic(output_dim, U1);
    let mut second = OMatrix::<T, K, K>::zeros_generic(output_dim, output_dim);
    let mut cross = OMatrix::<T, N, K>::zeros_generic(n, output_dim);
    let mut sin_sum = OVector::<T, K>::zeros_generic(output_dim, U1);
    let mut cos_sum = OVector::<T, K>::zeros_generic(output_dim, U1);
    let mut point = mean.clone();
    let mut image = OVector::<T, K>::zeros_generic(output_dim, U1);
    for column in 0..n.value() {
        for sign in [T::one(), -T::one()] {
            let offset = root.column(column) * (sign * weights.spread);
            point.copy_from(mean);
            point += &offset;
            image.fill(T::zero());
            map(&point, &mut image);
            for k in 0..image.nrows() {
                if is_angle(k) {
                    let (sin, cos) = image[k].sin_cos();
                    sin_sum[k] += sin;
                    cos_sum[k] += cos;
                }
            }
            let mut deviation = &image - &reference;
            wrap_flagged(&mut deviation, &is_angle);
            first += &deviation;
            second.ger(T::one(), &deviation, &deviation, T::one());
            cross.ger(T::one(), &offset, &deviation, T::one());
        }
    }

    // Mean offset from the reference: the weighted first moment, or for angles the
    // direction of the weighted resultant of unit vectors.
    let mut shift = &first * weights.outer;
    for k in 0..shift.nrows() {
        if is_angle(k) {
            let (sin, cos) = reference[k].sin_cos();
            let sin_mean = weights.mean_center * sin + weights.outer * sin_sum[k];
            let cos_mean = weights.mean_center * cos + weights.outer * cos_sum[k];
            shift[k] = wrap_angle(sin_mean.atan2(cos_mean) - reference[k]);
        }
    }
    // sum_i Wc_i (d_i - s)(d_i - s)^T with d_0 = 0, expanded so the points are visited once.
    let covariance_weight_sum = weights.covariance_center
        + weights.outer * nalgebra::convert::<f64, T>((2 * n.value()) as f64);
    let mut image_covariance = second * weights.outer;
    image_covariance.ger(-weights.outer, &first, &shift, T::one());
    image_covariance.ger(-weights.outer, &shift, &first, T::one());
    image_covariance.ger(covariance_weight_sum, &shift, &shift, T::one());
    // The input deviations sum to zero (the points are symmetric), so the cross term
    // needs no correction for the shift.
    let cross_covariance = cross * weights.outer;

    let mut image_mean = reference + &shift;
    wrap_flagged(&mut image_mean, &is_angle);
    Ok(Transformed {
        mean: image_mean,
        covariance: image_covariance,
        cross_covariance,
    })
}

fn wrap_flagged<T: Real, K: Dim>(vector: &mut OVector<T, K>, is_angle: &impl Fn(usize) -> bool)
where
    DefaultAllocator: Allocator<K>,
{
    for (k, value) in vector.iter_mut().enumerate() {
        if is_angle(k) {
            *value = wrap_angle(*value);
        }
    }
}

impl<T: Real, N: Dim> KalmanFilter<T, N>
where
    DefaultAllocator: Allocator<N> + Allocator<N, N>,
{
    /// Unscented Kalman prediction: the state's sigma points go through the model's
    /// `transition`; the process noise `Q` is added to the transformed covariance.
    ///
    /// Rejects a covariance without a Cholesky factor as
    /// [`PredictError::NotPositiveDefinite`], and weights computed for another dimension
    /// as [`PredictError::DimensionMismatch`].
    pub fn predict_unscented<U: Dim, Model: MotionModel<T, N, U>>(
        &mut self,
        model: &Model,
        u: &OVector<T, U>,
        dt: T,
        weights: &UnscentedWeights<T>,
    ) -> Result<(), PredictError>
    where
        DefaultAllocator: Allocator<U>,
    {
        match self.unscented_predicted_moments(model, u, dt, weights) {
            Ok(moments) => {
                self.commit(moments);
                bump(&mut self.health.predictions);
                Ok(())
            }
            Err(error) => Err(self.record_predict_error(error)),
        }
    }

    fn unscented_predicted_moments<U: Dim, Model: MotionModel<T, N, U>>(
        &self,
        model: &Model,
        u: &OVector<T, U>,
        dt: T,
        weights: &UnscentedWeights<T>,
    ) -> Result<Moments<T, N>, PredictError>
    where
        DefaultAllocator: Allocator<U>,
    {
        check_step_and_input(model, u, dt)?;
        let n = self.state.shape_generic().0;
        let angles = &self.angle_states;
        let transformed = unscented_transform(
            &self.state,
            &self.covariance,
            weights,
            n,
            |k| angles[k],
            |point, next| model.transition(point, u, dt, next),
        )
        .map_err(|error| match error {
            UnscentedError::NotPositiveDefinite => PredictError::NotPositiveDefinite,
            UnscentedError::InvalidParameters | UnscentedError::DimensionMismatch => {
                PredictError::DimensionMismatch
            }
        })?;
        let mut covariance = transformed.covariance;
        let mut noise = OMatrix::<T, N, N>::zeros_generic(n, n);
        model.process_noise(&self.state, u, dt, &mut noise);
        covariance += noise;
        if !all_finite(&transformed.mean) || !all_finite(&covariance) {
            return Err(PredictError::NonFiniteResult);
        }
        Ok(Moments {
            mean: transformed.mean,
            covariance,
        })
    }

    /// Unscented Kalman correction with reading `z`; `gate` as in
    /// [`KalmanFilter::correct`]. The covariance update is `P - K S K^T` (the model's
    /// [`ReadingModel::update_form`] and Jacobian are not used); a result with a negative
    /// variance is rejected as [`CorrectError::NotPositiveDefinite`].
    pub fn correct_unscented<M: Dim, Model: ReadingModel<T, N, M>>(
        &mut self,
        model: &Model,
        z: &OVector<T, M>,
        args: &Model::Args,
        gate: Option<T>,
        weights: &UnscentedWeights<T>,
    ) -> Result<Innovation<T, M>, CorrectError<T>>
    where
        DefaultAllocator: Allocator<M> + Allocator<M, M> + Allocator<M, N> + Allocator<N, M>,
    {
        match self.unscented_corrected_moments(model, z, args, gate, weights) {
            Ok((moments, innovation)) => {
                self.commit(moments);
                bump(&mut self.health.corrections);
                Ok(innovation)
            }
            Err(error) => Err(self.record_correct_error(error)),
        }
    }

    fn unscented_corrected_moments<M: Dim, Model: ReadingModel<T, N, M>>(
        &self,
        model: &Model,
        z: &OVector<T, M>,
        args: &Model::Args,
        gate: Option<T>,
        weights: &UnscentedWeights<T>,
    ) -> Result<Corrected<T, N, M>, CorrectError<T>>
    where
        DefaultAllocator: Allocator<M> + Allocator<M, M> + Allocator<M, N> + Allocator<N, M>,
    {
        let m = check_reading(model, z)?;
        let transformed = unscented_transform(
            &self.state,
            &self.covariance,
            weights,
            m,
            |k| model.is_angle(k),
            |point, z_hat| model.predict_reading(point, args, z_hat),
        )
        .map_err(|error| match error {
            UnscentedError::NotPositiveDefinite => CorrectError::NotPositiveDefinite,
            UnscentedError::InvalidParameters | UnscentedError::DimensionMismatch => {
                CorrectError::DimensionMismatch
            }
        })?;
        if !all_finite(&transformed.mean)
            || !all_finite(&transformed.covariance)
            || !all_finite(&transformed.cross_covariance)
        {
            return Err(CorrectError::NonFiniteResult);
        }
        let mut r = OMatrix::<T, M, M>::zeros_generic(m, m);
        model.reading_noise(&self.state, args, &mut r);
        let s = transformed.covariance + r;
        let residual = wrapped_residual(model, z, &transformed.mean);
        let factor = spd_factor(&s).ok_or(CorrectError::NotPositiveDefinite)?;
        let whitened = factor.solve(&residual);
        let nis = residual.dot(&whitened);
        if let Some(threshold) = gate {
            let passes = nis <= threshold;
            if !passes {
                return Err(CorrectError::Gated { nis });
            }
        }
        // K = Pxz S^-1; P - K S K^T = P - Pxz S^-1 Pxz^T = P - K Pxz^T.
        let gain = factor
            .solve(&transformed.cross_covariance.transpose())
            .transpose();
        let mean = &self.state + &transformed.cross_covariance * whitened;
        let mut covariance = self.covariance.clone();
        covariance.gemm(
            -T::one(),
            &gain,
            &transformed.cross_covariance.transpose(),
            T::one(),
        );
        if !all_finite(&mean) || !all_finite(&covariance) {
            return Err(CorrectError::NonFiniteResult);
        }
        // Unlike the Joseph form, the subtraction can leave a negative variance when the
        // weights are inconsistent or the nonlinearity is severe.
        if covariance
            .diagonal()
            .iter()
            .any(|&variance| variance < T::zero())
        {
            return Err(CorrectError::NotPositiveDefinite);
        }
        Ok((
            Moments { mean, covariance },
            Innovation {
                residual,
                covariance: s,
                nis,
            },
        ))
    }
}

#[cfg(test)]
mod tests {

    use super::*;
    use crate::test_models::{
        assert_untouched, unicycle_filter, ConstantVelocity, RangeBearing, Unicycle,
    };
    use crate::UpdateForm;
    use nalgebra::{Const, Matrix1, Matrix2, Vector1, Vector2, U1, U2};

    fn params(alpha: f64, beta: f64, kappa: f64) -> UnscentedParams<f64> {
        UnscentedParams { alpha, beta, kappa }
    }

    #[test]
    fn weights_match_published_formulas() {
        // Wan & van der Merwe (2000), "The unscented Kalman filter for nonlinear
        // estimation": L = 2, alpha = 1, beta = 2, kappa = 1 gives lambda = 1,
        // W0m = 1/3, W0c = 7/3, Wi = 1/6.
        let weights = UnscentedWeights::new(&params(1.0, 2.0, 1.0), 2).unwrap();
        assert!((weights.mean_center - 1.0 / 3.0).abs() < 1e-15);
        assert!((weights.covariance_center - 7.0 / 3.0).abs() < 1e-15);
        assert!((weights.outer - 1.0 / 6.0).abs() < 1e-15);
        assert!((weights.spread - 3.0_f64.sqrt()).abs() < 1e-15);
        assert_eq!(
            UnscentedWeights::new(&params(0.0, 2.0, 1.0), 2),
            Err(UnscentedError::InvalidParameters)
        );
        assert_eq!(
            UnscentedWeights::new(&params(1.0, 2.0, -2.0), 2),
            Err(UnscentedError::InvalidParameters)
        );
    }

    #[test]
    fn square_of_standard_normal() {
        // x ~ N(0, 1), y = x^2 is chi-square with one degree of freedom: mean 1,
        // variance 2. With L = 1, alpha = 1, kappa = 2, beta = 0 the transform matches
        // both exactly (Wan & van der Merwe 2000; moments of chi-square(1)).
        let weights = UnscentedWeights::new(&params(1.0, 0.0, 2.0), 1).unwrap();
        let out = unscented_transform(
            &Vector1::new(0.0),
            &Matrix1::new(1.0),
            &weights,
            U1,
            |_| false,
            |x, y| y[0] = x[0] * x[0],
        )
        .unwrap();
        assert!((out.mean[0] - 1.0).abs() < 1e-14);
        assert!((out.covariance[0] - 2.0).abs() < 1e-14);
    }

    #[test]
    fn polar_to_cartesian_against_closed_form_moments() {
        // For independent r ~ N(mr, sr^2), t ~ N(mt, st^2): E[cos t] = cos(mt) e^(-st^2/2),
        // E[cos^2 t] = (1 + cos(2 mt) e^(-2 st^2)) / 2, E[sin t cos t] = sin(2 mt) e^(-2 st^2) / 2
        // (characteristic function of the normal distribution, common practice, no source).
        let (mr, sr, mt, st) = (10.0_f64, 0.5_f64, 0.7_f64, 0.2_f64);
        let r2 = mr * mr + sr * sr;
        let damp = (-st * st / 2.0).exp();
        let damp2 = (-2.0 * st * st).exp();
        let mean = Vector2::new(mr * mt.cos() * damp, mr * mt.sin() * damp);
        let cov_xx = r2 * (1.0 + (2.0 * mt).cos() * damp2) / 2.0 - mean[0] * mean[0];
        let cov_yy = r2 * (1.0 - (2.0 * mt).cos() * damp2) / 2.0 - mean[1] * mean[1];
        let cov_xy = r2 * (2.0 * mt).sin() * damp2 / 2.0 - mean[0] * mean[1];
        // beta = 0: the central covariance weight then adds nothing beyond the
        // transform's own truncation (beta = 2 adds 2 (y0 - mean)(y0 - mean)^T, about
        // 2% of the covariance for this mapping).
        let weights = UnscentedWeights::new(&params(1.0, 0.0, 1.0), 2).unwrap();
        let out = unscented_transform(
            &Vector2::new(mr, mt),
            &Matrix2::new(sr * sr, 0.0, 0.0, st * st),
            &weights,
            U2,
            |_| false,
            |polar, xy| *xy = Vector2::new(polar[0] * polar[1].cos(), polar[0] * polar[1].sin()),
        )
        .unwrap();
        // The transform captures the Gaussian's moments to fourth order; what is left is
        // of order st^6 relative (about 1e-4 here).
        assert!(
            (out.mean - mean).norm() / mean.norm() < 1e-4,
            "{} vs {mean}",
            out.mean
        );
        let expected = Matrix2::new(cov_xx, cov_xy, cov_xy, cov_yy);
        assert!(
            (out.covariance - expected).norm() / expected.norm() < 1e-2,
            "{} vs {expected}",
            out.covariance
        );
    }

    #[test]
    fn angle_image_is_averaged_on_the_circle() {
        // A heading near the cut: the mean must be near pi, not near 0.
        let weights = UnscentedWeights::new(&params(1.0, 2.0, 2.0), 1).unwrap();
        let out = unscented_transform(
            &Vector1::new(core::f64::consts::PI),
            &Matrix1::new(0.01),
            &weights,
            U1,
            |_| true,
            |x, y| y[0] = wrap_angle(x[0]),
        )
        .unwrap();
        assert!(wrap_angle(out.mean[0] - core::f64::consts::PI).abs() < 1e-12);
        assert!((out.covariance[0] - 0.01).abs() < 1e-6);
    }

    #[test]
    fn unscented_filter_equals_kalman_filter_on_linear_model() {
        // The transform is exact for linear maps (Wan & van der Merwe 2000), so on a linear
        // model the unscented and linear Kalman filters agree to round-off.
        let model = ConstantVelocity { q: 0.3, r: 0.5 };
        let weights = UnscentedWeights::new(&params(0.5, 2.0, 1.0), 2).unwrap();
        let p0 = Matrix2::new(2.0, 0.3, 0.3, 1.0);
        let mut linear = KalmanFilter::new(Vector2::new(1.0, -1.0), p0).unwrap();
        let mut unscented = linear.clone();
        let none = OVector::<f64, Const<0>>::zeros();
        for k in 0..40 {
            let reading = Vector1::new(f64::from(k) * 0.37 - 2.0);
            linear.predict(&model, &none, 0.5).unwrap();
            unscented
                .predict_unscented(&model, &none, 0.5, &weights)
                .unwrap();
            let a = linear.correct(&model, &reading, &(), None).unwrap();
            let b = unscented
                .correct_unscented(&model, &reading, &(), None, &weights)
                .unwrap();
            assert!((a.nis - b.nis).abs() < 1e-9);
            assert!(
                (linear.state() - unscented.state()).norm() < 1e-9,
                "step {k}"
            );
            assert!(
                (linear.covariance() - unscented.covariance()).norm() < 1e-9,
                "step {k}"
            );
        }
    }

    #[test]
    fn rejected_unscented_steps_leave_filter_bit_identical() {
        // Fault injection (common practice, no source).
        let weights = UnscentedWeights::new(&params(1.0, 2.0, 0.0), 3).unwrap();
        let motion = Unicycle { q: 0.01 };
        let good = Vector2::new(1.0, 0.1);
        let predictions: [(f64, Vector2<f64>, PredictError); 6] = [
            (f64::NAN, good, PredictError::NonFiniteStep),
            (0.0, good, PredictError::NonPositiveStep),
            (-1.0, good, PredictError::NonPositiveStep),
            (
                0.1,
                Vector2::new(f64::INFINITY, 0.0),
                PredictError::NonFiniteInput,
            ),
            (0.1, Vector2::new(1e300, 0.0), PredictError::NonFiniteResult),
            (f64::INFINITY, good, PredictError::NonFiniteStep),
        ];
        for (dt, u, expected) in predictions {
            let mut filter = unicycle_filter();
            let before = filter.clone();
            assert_eq!(
                filter.predict_unscented(&motion, &u, dt, &weights),
                Err(expected)
            );
            assert_untouched(&filter, &before);
        }
        let wrong_size = UnscentedWeights::new(&params(1.0, 2.0, 0.0), 2).unwrap();
        let mut filter = unicycle_filter();
        assert_eq!(
            filter.predict_unscented(&motion, &good, 0.1, &wrong_size),
            Err(PredictError::DimensionMismatch)
        );

        let reading = RangeBearing {
            range_variance: 0.01,
            bearing_variance: 1e-4,
            form: UpdateForm::Joseph,
        };
        let landmark = [10.0, 5.0];
        let mut z_hat = Vector2::zeros();
        reading.predict_reading(unicycle_filter().state(), &landmark, &mut z_hat);
        let accepted = unicycle_filter()
            .correct_unscented(&reading, &z_hat, &landmark, None, &weights)
            .unwrap();
        let range_sigma = accepted.covariance[(0, 0)].sqrt();
        // Chi-square 0.997 quantile, 2 degrees of freedom: 11.6183 (reference-values.md).
        let gate = Some(11.6183);
        let corrections: [(Vector2<f64>, CorrectError<f64>); 4] = [
            (Vector2::new(f64::NAN, 0.0), CorrectError::NonFiniteReading),
            (
                Vector2::new(0.0, f64::NEG_INFINITY),
                CorrectError::NonFiniteReading,
            ),
            (Vector2::new(1e300, 0.0), CorrectError::Gated { nis: 0.0 }),
            (
                z_hat + Vector2::new(10.0 * range_sigma, 0.0),
                CorrectError::Gated { nis: 0.0 },
            ),
        ];
        for (z, expected) in corrections {
            let mut filter = unicycle_filter();
            let before = filter.clone();
            let error = filter
                .correct_unscented(&reading, &z, &landmark, gate, &weights)
                .unwrap_err();
            match error {
                CorrectError::Gated { nis } => {
                    assert!(matches!(expected, CorrectError::Gated { .. }));
                    assert!(nis > 11.6183);
                }
                other => assert_eq!(other, expected),
            }
            assert_untouched(&filter, &before);
        }
        let mut filter = unicycle_filter();
        let before = filter.clone();
        // A non-finite argument makes every predicted reading non-finite.
        let error = filter
            .correct_unscented(&reading, &z_hat, &[f64::NAN, 5.0], None, &weights)
            .unwrap_err();
        assert_eq!(error, CorrectError::NonFiniteResult);
        assert_untouched(&filter, &before);
    }

    #[test]
    fn negative_variance_after_unscented_correction_is_rejected() {
        // Hand-made weights whose covariance and cross-covariance scales disagree
        // (2 Wi spread^2 = 2 instead of 1): for P = 1, H = 1 the update gives
        // 1 - 4 / (2 + R) < 0.
        let weights = UnscentedWeights {
            dimension: 1,
            mean_center: 0.0,
            covariance_center: 0.0,
            outer: 1.0,
            spread: 1.0,
        };
        let model = crate::test_models::RandomConstant { q: 0.0, r: 0.01 };
        let mut filter = KalmanFilter::new(Vector1::new(0.0_f64), Matrix1::new(1.0)).unwrap();
        let before = filter.clone();
        assert_eq!(
            filter.correct_unscented(&model, &Vector1::new(0.5), &(), None, &weights),
            Err(CorrectError::NotPositiveDefinite)
        );
        assert_untouched(&filter, &before);
    }
}
