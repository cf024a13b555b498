//! A generic extended Kalman filter of the kind a library offers: the user supplies the
//! transition and reading functions on dynamically sized vectors, the filter
//! differentiates them by central differences and works on `DMatrix`. Same algorithm as
//! the other variants (Joseph form, Cholesky, gate, angle wrapping, first-order
//! discretisation of white process noise), so it runs the same filter up to the
//! truncation error of the differences.

use nalgebra::{DMatrix, DVector};
use reckon_runtime::angle::wrap_angle;

/// The model functions, on dynamically sized vectors, in SI.
pub trait Model: Clone {
    /// The state after a step of `dt` under input `u`.
    fn transition(&self, x: &DVector<f64>, u: &DVector<f64>, dt: f64) -> DVector<f64>;
    /// The reading sensor number `sensor` would give in state `x`, SI.
    fn predict_reading(&self, sensor: usize, x: &DVector<f64>, args: &[f64]) -> DVector<f64>;
}

/// Process noise: white noise of spectral density `density` on the state's rates,
/// discretised to first order as `(F D F^T + D) dt / 2`, plus normal input noise of
/// covariance `input` mapped through the input Jacobian, plus `per_step` covariance
/// added every step.
#[derive(Clone, Debug)]
pub struct ProcessNoise {
    /// Spectral density matrix of the white noise on the state's rates.
    pub density: DMatrix<f64>,
    /// Covariance of the input.
    pub input: DMatrix<f64>,
    /// Covariance added per step.
    pub per_step: DMatrix<f64>,
}

/// A sensor: noise covariance (SI), angle components, gate, and the factors that turn
/// its declared units into SI.
#[derive(Clone, Debug)]
pub struct Sensor {
    /// Reading-noise covariance, SI.
    pub noise: DMatrix<f64>,
    /// Which reading components are angles.
    pub angles: Vec<bool>,
    /// Chi-square threshold on the normalised innovation squared.
    pub gate: Option<f64>,
    /// Declared unit to SI, per component.
    pub to_si: Vec<f64>,
}

/// The filter: model, mean, covariance, noise and sensors.
#[derive(Clone, Debug)]
pub struct FiniteDifferenceEkf<M: Model> {
    model: M,
    x: DVector<f64>,
    p: DMatrix<f64>,
    state_angles: Vec<bool>,
    noise: ProcessNoise,
    sensors: Vec<Sensor>,
}

/// Relative step of the central differences: the cube root of the machine epsilon
/// balances truncation against rounding (common practice, no source).
const STEP: f64 = 6.0554544523933395e-6;

/// Central-difference Jacobian of `function` at `at`; difference components flagged in
/// `angles` are wrapped, so a function that wraps its output differentiates smoothly.
fn jacobian(
    function: impl Fn(&DVector<f64>) -> DVector<f64>,
    at: &DVector<f64>,
    angles: &[bool],
) -> DMatrix<f64> {
    let rows = function(at).len();
    let mut jacobian = DMatrix::zeros(rows, at.len());
    for j in 0..at.len() {
        let step = STEP * at[j].abs().max(1.0);
        let mut ahead = at.clone();
        ahead[j] += step;
        let mut behind = at.clone();
        behind[j] -= step;
        let mut difference = function(&ahead) - function(&behind);
        for (value, &is_angle) in difference.iter_mut().zip(angles) {
            if is_angle {
                *value = wrap_angle(*value);
            }
        }
        jacobian.set_column(j, &(difference / (2.0 * step)));
    }
    jacobian
}

impl<M: Model> FiniteDifferenceEkf<M> {
    /// A filter at `mean` with independent standard deviations `std_dev`.
    pub fn new(
        model: M,
        mean: &[f64],
        std_dev: &[f64],
        state_angles: Vec<bool>,
        noise: ProcessNoise,
        sensors: Vec<Sensor>,
    ) -> FiniteDifferenceEkf<M> {
        let sigma = DVector::from_column_slice(std_dev);
        FiniteDifferenceEkf {
            model,
            x: DVector::from_column_slice(mean),
            p: DMatrix::from_diagonal(&sigma.component_mul(&sigma)),
            state_angles,
            noise,
            sensors,
        }
    }

    /// Predicts over `dt` under input `u`; `false` leaves the filter as it was.
    pub fn predict(&mut self, dt: f64, input: &[f64]) -> bool {
        let u = DVector::from_column_slice(input);
        let x_next = self.model.transition(&self.x, &u, dt);
        let f = jacobian(
            |x| self.model.transition(x, &u, dt),
            &self.x,
            &self.state_angles,
        );
        let mut q = (&f * &self.noise.density * f.transpose() + &self.noise.density) * (dt / 2.0)
            + &self.noise.per_step;
        if !input.is_empty() {
            let b = jacobian(
                |u| self.model.transition(&self.x, u, dt),
                &u,
                &self.state_angles,
            );
            q += &b * &self.noise.input * b.transpose();
        }
        let p_next = &f * &self.p * f.transpose() + q;
        self.commit(x_next, p_next)
    }

    /// Corrects with a reading of sensor `sensor` in its declared units; `false` (gated,
    /// not positive definite or not finite) leaves the filter as it was.
    pub fn correct(&mut self, sensor: usize, reading: &[f64], args: &[f64]) -> bool {
        let Some(spec) = self.sensors.get(sensor) else {
            return false;
        };
        let z = DVector::from_iterator(
            reading.len(),
            reading
                .iter()
                .zip(&spec.to_si)
                .map(|(value, scale)| value * scale),
        );
        let mut residual = z - self.model.predict_reading(sensor, &self.x, args);
        for (value, &is_angle) in residual.iter_mut().zip(&spec.angles) {
            if is_angle {
                *value = wrap_angle(*value);
            }
        }
        let h = jacobian(
            |x| self.model.predict_reading(sensor, x, args),
            &self.x,
            &spec.angles,
        );
        let pht = &self.p * h.transpose();
        let s = &h * &pht + &spec.noise;
        let Some(factor) = s.cholesky() else {
            return false;
        };
        let whitened = factor.solve(&residual);
        let nis = residual.dot(&whitened);
        // Written so that a NaN NIS fails the gate too.
        let passes = spec.gate.is_none_or(|threshold| nis <= threshold);
        if !passes {
            return false;
        }
        let gain = factor.solve(&pht.transpose()).transpose();
        let x_next = &self.x + &pht * whitened;
        let complement = DMatrix::identity(self.x.len(), self.x.len()) - &gain * &h;
        let p_next =
            &complement * &self.p * complement.transpose() + &gain * &spec.noise * gain.transpose();
        self.commit(x_next, p_next)
    }

    fn commit(&mut self, mut x: DVector<f64>, p: DMatrix<f64>) -> bool {
        if !x.iter().chain(p.iter()).all(|v| v.is_finite()) {
            return false;
        }
        for (value, &is_angle) in x.iter_mut().zip(&self.state_angles) {
            if is_angle {
                *value = wrap_angle(*value);
            }
        }
        self.x = x;
        self.p = (&p + p.transpose()) * 0.5;
        true
    }

    /// Mean then covariance, column-major.
    pub fn snapshot(&self) -> Vec<f64> {
        self.x.iter().chain(self.p.iter()).copied().collect()
    }
}

impl<M: Model> super::Filter for FiniteDifferenceEkf<M> {
    fn predict(&mut self, dt: f64, input: &[f64]) -> bool {
        FiniteDifferenceEkf::predict(self, dt, input)
    }

    fn correct(&mut self, sensor: usize, reading: &[f64], args: &[f64]) -> bool {
        FiniteDifferenceEkf::correct(self, sensor, reading, args)
    }

    fn snapshot(&self) -> Vec<f64> {
        FiniteDifferenceEkf::snapshot(self)
    }
}

/// The fixed-size vector a spec's model functions take, from a dynamic one.
pub fn fixed<const N: usize>(vector: &DVector<f64>) -> nalgebra::SVector<f64, N> {
    nalgebra::SVector::from_column_slice(vector.as_slice())
}

/// The dynamic vector the filter works on, from a spec's fixed-size result.
pub fn dynamic<const N: usize>(vector: nalgebra::SVector<f64, N>) -> DVector<f64> {
    DVector::from_column_slice(vector.as_slice())
}
