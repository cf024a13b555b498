//! The filters the estimator benchmarks compare, behind one interface: for each demo
//! spec the generated estimator (`f64` and `f32`), a hand-written extended Kalman filter
//! with fixed-size matrices and hand-derived Jacobians ([`dense`]), and a generic
//! extended Kalman filter with finite-difference Jacobians on dynamically sized
//! matrices ([`finite_difference`]). Also the reading scenarios they all run
//! ([`scenario`]) and the counting allocator ([`counting`]).
//!
//! Shared by the benchmark binary and the agreement tests in `tests/it`, which check
//! that the hand-written filters are the same filters as the generated ones.

pub mod counting;
pub mod dense;
pub mod finite_difference;
pub mod pallet_robot;
pub mod rail_cart;
pub mod scenario;
pub mod survey_launch;

/// One estimator of a demo spec. Values cross as `f64` in the units the spec declares
/// (readings as the sensor reports them, SI for `dt`); `predict` and `correct` add no
/// work of their own beyond converting the scalars.
pub trait Filter: Clone {
    /// Predicts over `dt` seconds; `false` when the filter rejected the step.
    fn predict(&mut self, dt: f64, input: &[f64]) -> bool;
    /// Corrects with sensor number `sensor` (in spec order); `false` when the reading
    /// was rejected (gated, or a failed factorisation).
    fn correct(&mut self, sensor: usize, reading: &[f64], args: &[f64]) -> bool;
    /// The state mean followed by the covariance in column-major order, SI.
    fn snapshot(&self) -> Vec<f64>;
}

/// Converts between `f64` and a generated estimator's scalar.
pub trait Scalar: Copy {
    /// The nearest value of this type.
    fn from_f64(value: f64) -> Self;
    /// The exact `f64` value.
    fn to_f64(self) -> f64;
}

impl Scalar for f64 {
    fn from_f64(value: f64) -> f64 {
        value
    }
    fn to_f64(self) -> f64 {
        self
    }
}

impl Scalar for f32 {
    fn from_f64(value: f64) -> f32 {
        value as f32
    }
    fn to_f64(self) -> f64 {
        f64::from(self)
    }
}

/// The first `N` values of `values` in the scalar `T`; the scenarios always pass enough.
pub fn array<T: Scalar, const N: usize>(values: &[f64]) -> [T; N] {
    std::array::from_fn(|i| T::from_f64(values[i]))
}

/// Implements [`Filter`] for a generated module: the sensor list maps each sensor
/// number to its correction method and reading type; the arguments come from `args`
/// in order.
macro_rules! generated_filter {
    ($name:ident, $module:ident, $t:ty, { $($index:literal => $method:ident($reading:ident $(, $arg:literal)*)),* $(,)? }) => {
        /// The generated estimator behind [`crate::filters::Filter`].
        #[derive(Clone)]
        pub struct $name(reckon_tests::$module::Estimator);

        impl $name {
            /// The estimator from the spec's `initial` block.
            pub fn from_spec() -> $name {
                $name(reckon_tests::$module::Estimator::new().expect("the spec's initial block is valid"))
            }
        }

        impl $crate::filters::Filter for $name {
            fn predict(&mut self, dt: f64, input: &[f64]) -> bool {
                use reckon_tests::$module as m;
                use $crate::filters::{array, Scalar};
                self.0
                    .predict(&m::Input::from_array(array(input)), <$t as Scalar>::from_f64(dt))
                    .is_ok()
            }

            fn correct(&mut self, sensor: usize, reading: &[f64], args: &[f64]) -> bool {
                use reckon_tests::$module as m;
                use $crate::filters::array;
                let _ = args;
                match sensor {
                    $($index => self
                        .0
                        .$method(&m::$reading::from_array(array(reading)) $(, <$t as $crate::filters::Scalar>::from_f64(args[$arg]))*)
                        .is_ok(),)*
                    _ => false,
                }
            }

            fn snapshot(&self) -> Vec<f64> {
                use $crate::filters::Scalar;
                let state = self.0.state().to_array();
                state.iter().chain(self.0.covariance().iter()).map(|v| v.to_f64()).collect()
            }
        }
    };
}
pub(crate) use generated_filter;
