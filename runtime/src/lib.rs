//! reckon-runtime: the predict/correct machinery shared by generated estimators and
//! the simulator.
//!
//! This crate holds the only implementation of the filter mathematics. Generated firmware
//! modules and the simulator's interpreter-backed models both supply their model functions
//! through the traits in [`model`]; the algorithms here do the rest.
//!
//! * `#![no_std]`, no heap: with fixed-size nalgebra dimensions (`Const<N>`) every
//!   temporary lives on the stack. With the `std` feature the same code runs on
//!   dynamically sized matrices (`Dyn`), which is what the simulator uses.
//! * Generic over the scalar: `f32` and `f64` (any [`Real`]).
//! * Every operation either commits a finite, symmetric result or returns a typed
//!   rejection and leaves the filter's state and covariance bit-identical.
//!
//! A model implements [`MotionModel`] and [`ReadingModel`]; a [`KalmanFilter`] holds the
//! state and runs the extended ([`KalmanFilter::predict`], [`KalmanFilter::correct`]) or
//! unscented ([`KalmanFilter::predict_unscented`], [`KalmanFilter::correct_unscented`])
//! steps with them:
//!
//! ```
//! use nalgebra::{Const, Matrix1, OMatrix, OVector, Vector1, U1};
//! use reckon_runtime::{KalmanFilter, MotionModel, ReadingModel};
//!
//! /// Position driven by a measured speed `u`; the reading is the position.
//! struct Odometer;
//!
//! impl MotionModel<f32, U1, U1> for Odometer {
//!     fn input_dim(&self) -> U1 { Const }
//!     fn transition(&self, x: &OVector<f32, U1>, u: &OVector<f32, U1>, dt: f32, next: &mut OVector<f32, U1>) {
//!         next[0] = x[0] + dt * u[0];
//!     }
//!     fn transition_jacobian(&self, _: &OVector<f32, U1>, _: &OVector<f32, U1>, _: f32, f: &mut OMatrix<f32, U1, U1>) {
//!         f[0] = 1.0;
//!     }
//!     fn process_noise(&self, _: &OVector<f32, U1>, _: &OVector<f32, U1>, dt: f32, q: &mut OMatrix<f32, U1, U1>) {
//!         q[0] = 0.01 * dt;
//!     }
//! }
//!
//! impl ReadingModel<f32, U1, U1> for Odometer {
//!     type Args = ();
//!     fn reading_dim(&self) -> U1 { Const }
//!     fn predict_reading(&self, x: &OVector<f32, U1>, _: &(), z_hat: &mut OVector<f32, U1>) {
//!         z_hat[0] = x[0];
//!     }
//!     fn reading_jacobian(&self, _: &OVector<f32, U1>, _: &(), h: &mut OMatrix<f32, U1, U1>) {
//!         h[0] = 1.0;
//!     }
//!     fn reading_noise(&self, _: &OVector<f32, U1>, _: &(), r: &mut OMatrix<f32, U1, U1>) {
//!         r[0] = 0.25;
//!     }
//! }
//!
//! let mut filter = KalmanFilter::new(Vector1::new(0.0_f32), Matrix1::new(1.0)).unwrap();
//! filter.predict(&Odometer, &Vector1::new(2.0), 0.5).unwrap();
//! // 6.635: chi-square 0.99 quantile for one degree of freedom.
//! let innovation = filter.correct(&Odometer, &Vector1::new(1.1), &(), Some(6.635)).unwrap();
//! assert!(innovation.nis < 6.635);
//! assert!(filter.predict(&Odometer, &Vector1::new(2.0), -1.0).is_err());
//! ```
#![no_std]
#![warn(missing_docs)]

pub mod angle;
pub mod expm;
pub mod grid;
pub mod health;
pub mod kalman;
pub mod linalg;
pub mod model;
pub mod outcome;
pub mod particle;
pub mod unscented;

/// The linear-algebra crate the filters are written in, re-exported so generated modules
/// name its types and math traits (`ComplexField`, `RealField`) through this crate.
pub use nalgebra;

#[cfg(test)]
mod test_models;

pub use health::{CovarianceLimits, Health};
pub use kalman::{InitError, KalmanFilter};
pub use model::{MotionModel, ReadingModel, UpdateForm};
pub use outcome::{CorrectError, Innovation, PredictError};
pub use unscented::{UnscentedError, UnscentedParams, UnscentedWeights};

/// The scalar types the filters run on: `f32` and `f64`.
///
/// Blanket-implemented for every `nalgebra::RealField + Copy` type, so generated code
/// never implements it by hand.
pub trait Real: nalgebra::RealField + Copy {}

impl<T: nalgebra::RealField + Copy> Real for T {}

/// Converts an `f64` literal to the filter scalar (exact for `f64`, rounded for `f32`).
pub(crate) fn lit<T: Real>(value: f64) -> T {
    nalgebra::convert(value)
}
