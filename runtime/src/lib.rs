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
#![no_std]
#![warn(missing_docs)]

pub mod angle;
pub mod expm;
pub mod health;
pub mod kalman;
pub mod linalg;
pub mod model;
pub mod outcome;
pub mod unscented;

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
