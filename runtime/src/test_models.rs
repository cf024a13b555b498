//! Models and fixtures shared by the crate's unit tests: a scalar random constant, a
//! constant-velocity track with a position reading, a unicycle with a range-bearing
//! landmark reading, a linear reading, and the bit-identity check of rejected steps.

use nalgebra::{
    allocator::Allocator, Const, DefaultAllocator, Dim, Matrix2, Matrix3, OMatrix, OVector,
    Vector2, Vector3, U1, U2, U3,
};

use crate::KalmanFilter;

use crate::model::{MotionModel, ReadingModel, UpdateForm};
use crate::{lit, Real};

/// A constant observed directly: `x_next = x`, `z = x`, with process noise `q` per step
/// and reading noise `r`.
pub struct RandomConstant {
    pub q: f64,
    pub r: f64,
}

impl<T: Real> MotionModel<T, U1, Const<0>> for RandomConstant {
    fn input_dim(&self) -> Const<0> {
        Const
    }
    fn transition(
        &self,
        x: &OVector<T, U1>,
        _: &OVector<T, Const<0>>,
        _: T,
        x_next: &mut OVector<T, U1>,
    ) {
        x_next.copy_from(x);
    }
    fn transition_jacobian(
        &self,
        _: &OVector<T, U1>,
        _: &OVector<T, Const<0>>,
        _: T,
        f: &mut OMatrix<T, U1, U1>,
    ) {
        f[0] = T::one();
    }
    fn process_noise(
        &self,
        _: &OVector<T, U1>,
        _: &OVector<T, Const<0>>,
        _: T,
        q: &mut OMatrix<T, U1, U1>,
    ) {
        q[0] = lit(self.q);
    }
}

impl<T: Real> ReadingModel<T, U1, U1> for RandomConstant {
    type Args = ();
    fn reading_dim(&self) -> U1 {
        U1
    }
    fn predict_reading(&self, x: &OVector<T, U1>, _: &(), z_hat: &mut OVector<T, U1>) {
        z_hat.copy_from(x);
    }
    fn reading_jacobian(&self, _: &OVector<T, U1>, _: &(), h: &mut OMatrix<T, U1, U1>) {
        h[0] = T::one();
    }
    fn reading_noise(&self, _: &OVector<T, U1>, _: &(), r: &mut OMatrix<T, U1, U1>) {
        r[0] = lit(self.r);
    }
}

/// Position and velocity under white-noise acceleration of spectral density `q`, with a
/// position reading of variance `r`.
pub struct ConstantVelocity {
    pub q: f64,
    pub r: f64,
}

impl<T: Real> MotionModel<T, U2, Const<0>> for ConstantVelocity {
    fn input_dim(&self) -> Const<0> {
        Const
    }
    fn transition(
        &self,
        x: &OVector<T, U2>,
        _: &OVector<T, Const<0>>,
        dt: T,
        x_next: &mut OVector<T, U2>,
    ) {
        *x_next = Vector2::new(x[0] + dt * x[1], x[1]);
    }
    fn transition_jacobian(
        &self,
        _: &OVector<T, U2>,
        _: &OVector<T, Const<0>>,
        dt: T,
        f: &mut OMatrix<T, U2, U2>,
    ) {
        *f = Matrix2::new(T::one(), dt, T::zero(), T::one());
    }
    fn process_noise(
        &self,
        _: &OVector<T, U2>,
        _: &OVector<T, Const<0>>,
        dt: T,
        q: &mut OMatrix<T, U2, U2>,
    ) {
        let density: T = lit(self.q);
        let (dt2, dt3) = (dt * dt, dt * dt * dt);
        let (half, third): (T, T) = (lit(0.5), lit(1.0 / 3.0));
        *q = Matrix2::new(dt3 * third, dt2 * half, dt2 * half, dt) * density;
    }
}

impl<T: Real> ReadingModel<T, U2, U1> for ConstantVelocity {
    type Args = ();
    fn reading_dim(&self) -> U1 {
        U1
    }
    fn predict_reading(&self, x: &OVector<T, U2>, _: &(), z_hat: &mut OVector<T, U1>) {
        z_hat[0] = x[0];
    }
    fn reading_jacobian(&self, _: &OVector<T, U2>, _: &(), h: &mut OMatrix<T, U1, U2>) {
        h[(0, 0)] = T::one();
    }
    fn reading_noise(&self, _: &OVector<T, U2>, _: &(), r: &mut OMatrix<T, U1, U1>) {
        r[0] = lit(self.r);
    }
}

/// Planar unicycle: state `[x, y, heading]`, input `[speed, turn rate]`, process noise
/// `q * dt` on every component.
pub struct Unicycle {
    pub q: f64,
}

impl<T: Real> MotionModel<T, U3, U2> for Unicycle {
    fn input_dim(&self) -> U2 {
        U2
    }
    fn transition(
        &self,
        x: &OVector<T, U3>,
        u: &OVector<T, U2>,
        dt: T,
        x_next: &mut OVector<T, U3>,
    ) {
        let (sin, cos) = x[2].sin_cos();
        *x_next = Vector3::new(
            x[0] + dt * u[0] * cos,
            x[1] + dt * u[0] * sin,
            x[2] + dt * u[1],
        );
    }
    fn transition_jacobian(
        &self,
        x: &OVector<T, U3>,
        u: &OVector<T, U2>,
        dt: T,
        f: &mut OMatrix<T, U3, U3>,
    ) {
        let (sin, cos) = x[2].sin_cos();
        *f = Matrix3::new(
            T::one(),
            T::zero(),
            -dt * u[0] * sin,
            T::zero(),
            T::one(),
            dt * u[0] * cos,
            T::zero(),
            T::zero(),
            T::one(),
        );
    }
    fn process_noise(
        &self,
        _: &OVector<T, U3>,
        _: &OVector<T, U2>,
        dt: T,
        q: &mut OMatrix<T, U3, U3>,
    ) {
        q.fill_with_identity();
        *q *= dt * lit::<T>(self.q);
    }
}

/// Range and bearing (relative to the heading) from the vehicle to a landmark given as
/// the reading argument; the bearing is an angle.
pub struct RangeBearing {
    pub range_variance: f64,
    pub bearing_variance: f64,
    pub form: UpdateForm,
}

impl<T: Real> ReadingModel<T, U3, U2> for RangeBearing {
    type Args = [T; 2];
    fn reading_dim(&self) -> U2 {
        U2
    }
    fn predict_reading(&self, x: &OVector<T, U3>, landmark: &[T; 2], z_hat: &mut OVector<T, U2>) {
        let (dx, dy) = (landmark[0] - x[0], landmark[1] - x[1]);
        *z_hat = Vector2::new((dx * dx + dy * dy).sqrt(), dy.atan2(dx) - x[2]);
    }
    fn reading_jacobian(&self, x: &OVector<T, U3>, landmark: &[T; 2], h: &mut OMatrix<T, U2, U3>) {
        let (dx, dy) = (landmark[0] - x[0], landmark[1] - x[1]);
        let range2 = dx * dx + dy * dy;
        let range = range2.sqrt();
        *h = nalgebra::Matrix2x3::new(
            -dx / range,
            -dy / range,
            T::zero(),
            dy / range2,
            -dx / range2,
            -T::one(),
        );
    }
    fn reading_noise(&self, _: &OVector<T, U3>, _: &[T; 2], r: &mut OMatrix<T, U2, U2>) {
        *r = Matrix2::new(
            lit(self.range_variance),
            T::zero(),
            T::zero(),
            lit(self.bearing_variance),
        );
    }
    fn is_angle(&self, component: usize) -> bool {
        component == 1
    }
    fn update_form(&self) -> UpdateForm {
        self.form
    }
}

/// A linear reading `z = H x` of a three-component state, with noise `R`.
pub struct LinearReading {
    pub h: nalgebra::Matrix2x3<f64>,
    pub r: Matrix2<f64>,
    pub form: UpdateForm,
}

impl ReadingModel<f64, U3, U2> for LinearReading {
    type Args = ();
    fn reading_dim(&self) -> U2 {
        U2
    }
    fn predict_reading(&self, x: &OVector<f64, U3>, _: &(), z_hat: &mut OVector<f64, U2>) {
        *z_hat = self.h * x;
    }
    fn reading_jacobian(&self, _: &OVector<f64, U3>, _: &(), h: &mut OMatrix<f64, U2, U3>) {
        h.copy_from(&self.h);
    }
    fn reading_noise(&self, _: &OVector<f64, U3>, _: &(), r: &mut OMatrix<f64, U2, U2>) {
        r.copy_from(&self.r);
    }
    fn update_form(&self) -> UpdateForm {
        self.form
    }
}

/// A unicycle filter away from the origin with correlated covariance and an angle heading.
pub fn unicycle_filter() -> KalmanFilter<f64, U3> {
    let p = Matrix3::new(0.5, 0.1, 0.0, 0.1, 0.4, 0.05, 0.0, 0.05, 0.2);
    let mut filter = KalmanFilter::new(Vector3::new(1.0, -2.0, 3.0), p).unwrap();
    filter
        .set_angle_states(Vector3::new(false, false, true))
        .unwrap();
    filter
}

/// Asserts that state and covariance are bit-identical to `before` (a rejected step must
/// not touch them; comparing bits also catches a NaN written and a -0.0 for 0.0).
pub fn assert_untouched<N: Dim>(filter: &KalmanFilter<f64, N>, before: &KalmanFilter<f64, N>)
where
    DefaultAllocator: Allocator<N> + Allocator<N, N>,
{
    let same = |a: &[f64], b: &[f64]| {
        a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits())
    };
    assert!(
        same(filter.state().as_slice(), before.state().as_slice()),
        "state changed"
    );
    assert!(
        same(
            filter.covariance().as_slice(),
            before.covariance().as_slice()
        ),
        "covariance changed"
    );
}
