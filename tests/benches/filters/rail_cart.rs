//! `specs/rail_cart.reckon` by hand: a cart on a rail with a commanded acceleration,
//! a laser rangefinder in feet (gated at 99.9 %) and a speed encoder. Linear and
//! discrete-time. The model functions are written once here and used by both the
//! hand-written and the finite-difference filter.

use nalgebra::{Matrix1, Matrix2, RowVector2, Vector1, Vector2};

use super::dense::{residual, DenseEkf};
use super::finite_difference::{self as fd, dynamic, fixed, FiniteDifferenceEkf};
use super::scenario::{Jitter, Reading, Step};
use super::{generated_filter, Filter};

/// Sensor names, in spec order.
pub const SENSORS: [&str; 2] = ["laser", "encoder"];

/// International foot, exactly (NIST SP 811, appendix B.8).
const FOOT: f64 = 0.3048;
const POSITION_STEP_SIGMA: f64 = 0.001;
const SPEED_STEP_SIGMA: f64 = 0.005;
const ACCEL_SIGMA: f64 = 0.05;
const LASER_SIGMA: f64 = 0.01 * FOOT;
const ENCODER_SIGMA: f64 = 0.02;
/// Chi-square 0.999 quantile for one degree of freedom (NIST/SEMATECH e-Handbook of
/// Statistical Methods, section 1.3.6.7.4, table of critical values: 10.828).
const LASER_GATE: f64 = 10.828;

/// Position and speed after `dt` under commanded acceleration `u`.
pub fn transition(x: &Vector2<f64>, u: &Vector1<f64>, dt: f64) -> Vector2<f64> {
    Vector2::new(x[0] + x[1] * dt + 0.5 * u[0] * dt * dt, x[1] + u[0] * dt)
}

/// The laser's distance, SI.
pub fn laser(x: &Vector2<f64>) -> Vector1<f64> {
    Vector1::new(x[0])
}

/// The encoder's speed, SI.
pub fn encoder(x: &Vector2<f64>) -> Vector1<f64> {
    Vector1::new(x[1])
}

generated_filter!(GeneratedF64, rail_cart_ekf_f64, f64, {
    0 => correct_laser(LaserReading),
    1 => correct_encoder(EncoderReading),
});
generated_filter!(GeneratedF32, rail_cart_ekf_f32, f32, {
    0 => correct_laser(LaserReading),
    1 => correct_encoder(EncoderReading),
});

/// The hand-written filter.
#[derive(Clone, Debug)]
pub struct Hand(DenseEkf<2>);

impl Hand {
    /// From the spec's `initial` block.
    pub fn from_spec() -> Hand {
        Hand(DenseEkf::new([0.0, 0.0], [0.5, 0.1], [false, false]))
    }
}

impl Filter for Hand {
    fn predict(&mut self, dt: f64, input: &[f64]) -> bool {
        let u = Vector1::new(input[0]);
        let f = Matrix2::new(1.0, dt, 0.0, 1.0);
        let b = Vector2::new(0.5 * dt * dt, dt);
        let q = Matrix2::from_diagonal(&Vector2::new(
            POSITION_STEP_SIGMA * POSITION_STEP_SIGMA,
            SPEED_STEP_SIGMA * SPEED_STEP_SIGMA,
        )) + b * (ACCEL_SIGMA * ACCEL_SIGMA) * b.transpose();
        let x_next = transition(&self.0.x, &u, dt);
        self.0.predict(x_next, &f, &q)
    }

    fn correct(&mut self, sensor: usize, reading: &[f64], _args: &[f64]) -> bool {
        let x = self.0.x;
        match sensor {
            0 => self.0.correct(
                &residual(Vector1::new(reading[0] * FOOT), laser(&x), [false]),
                &RowVector2::new(1.0, 0.0),
                &Matrix1::new(LASER_SIGMA * LASER_SIGMA),
                Some(LASER_GATE),
            ),
            1 => self.0.correct(
                &residual(Vector1::new(reading[0]), encoder(&x), [false]),
                &RowVector2::new(0.0, 1.0),
                &Matrix1::new(ENCODER_SIGMA * ENCODER_SIGMA),
                None,
            ),
            _ => false,
        }
    }

    fn snapshot(&self) -> Vec<f64> {
        self.0.snapshot()
    }
}

/// The model functions for the finite-difference filter.
#[derive(Clone, Copy, Debug)]
pub struct Functions;

impl fd::Model for Functions {
    fn transition(
        &self,
        x: &nalgebra::DVector<f64>,
        u: &nalgebra::DVector<f64>,
        dt: f64,
    ) -> nalgebra::DVector<f64> {
        dynamic(transition(&fixed(x), &fixed(u), dt))
    }

    fn predict_reading(
        &self,
        sensor: usize,
        x: &nalgebra::DVector<f64>,
        _args: &[f64],
    ) -> nalgebra::DVector<f64> {
        let x = fixed(x);
        dynamic(if sensor == 0 { laser(&x) } else { encoder(&x) })
    }
}

/// The finite-difference filter, from the spec's `initial` block.
pub fn finite_difference() -> FiniteDifferenceEkf<Functions> {
    use nalgebra::DMatrix;
    let variance = |sigma: f64| DMatrix::from_element(1, 1, sigma * sigma);
    FiniteDifferenceEkf::new(
        Functions,
        &[0.0, 0.0],
        &[0.5, 0.1],
        vec![false, false],
        fd::ProcessNoise {
            density: DMatrix::zeros(2, 2),
            input: variance(ACCEL_SIGMA),
            per_step: DMatrix::from_diagonal(&nalgebra::DVector::from_column_slice(&[
                POSITION_STEP_SIGMA * POSITION_STEP_SIGMA,
                SPEED_STEP_SIGMA * SPEED_STEP_SIGMA,
            ])),
        },
        vec![
            fd::Sensor {
                noise: variance(LASER_SIGMA),
                angles: vec![false],
                gate: Some(LASER_GATE),
                to_si: vec![FOOT],
            },
            fd::Sensor {
                noise: variance(ENCODER_SIGMA),
                angles: vec![false],
                gate: None,
                to_si: vec![1.0],
            },
        ],
    )
}

/// The cart shuttling along the rail at 10 Hz: the commanded acceleration is a slow
/// sine; the laser and the encoder read every step.
pub fn scenario(steps: usize) -> Vec<Step> {
    let mut jitter = Jitter::new(0x5eed_0001);
    let mut truth = Vector2::new(0.2, 0.0);
    let dt = 0.1;
    (0..steps)
        .map(|k| {
            let accel = 0.4 * (0.05 * k as f64).sin();
            truth = transition(&truth, &Vector1::new(accel), dt);
            Step {
                dt,
                input: vec![accel],
                readings: vec![
                    Reading {
                        sensor: 0,
                        values: vec![(laser(&truth)[0] + jitter.normal(LASER_SIGMA)) / FOOT],
                        args: vec![],
                    },
                    Reading {
                        sensor: 1,
                        values: vec![encoder(&truth)[0] + jitter.normal(ENCODER_SIGMA)],
                        args: vec![],
                    },
                ],
            }
        })
        .collect()
}
