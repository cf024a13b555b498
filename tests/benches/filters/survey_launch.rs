//! `specs/survey_launch.reckon` by hand: a launch (position, heading, speed, turn rate)
//! driven by a commanded acceleration with input noise, moved by the classical
//! Runge-Kutta step of its continuous motion, fixing itself from range and bearing to
//! acoustic transponders (correlated noise, gated at 99 %), a compass, a speed log and
//! a rate gyro. The model functions and hand-derived Jacobians are written once here;
//! the finite-difference filter uses the same model functions.

use std::f64::consts::PI;

use nalgebra::{Matrix1, Matrix2, SMatrix, SVector, Vector1, Vector2};
use reckon_runtime::angle::wrap_angle;

use super::dense::{residual, DenseEkf};
use super::finite_difference::{self as fd, dynamic, fixed, FiniteDifferenceEkf};
use super::scenario::{Jitter, Reading, Step};
use super::{generated_filter, Filter};

/// Sensor names, in spec order.
pub const SENSORS: [&str; 4] = ["transponder", "compass", "log", "gyro"];

type State = SVector<f64, 5>;
type Square = SMatrix<f64, 5, 5>;

const DEGREE: f64 = PI / 180.0;
/// One knot in m/s: 1852 m per hour (NIST SP 811, appendix B.8).
const KNOT: f64 = 1852.0 / 3600.0;
const SPEED_DENSITY: f64 = 0.02 * 0.02;
const YAW_RATE_DENSITY: f64 = 0.05 * 0.05;
const ACCEL_SIGMA: f64 = 0.1;
const RANGE_VARIANCE: f64 = 0.25;
const BEARING_VARIANCE: f64 = 9.0 * DEGREE * DEGREE;
const COMPASS_SIGMA: f64 = 1.5 * DEGREE;
const LOG_SIGMA: f64 = 0.1 * KNOT;
const GYRO_SIGMA: f64 = 0.2 * DEGREE;
const INITIAL_STD_DEV: [f64; 5] = [20.0, 20.0, 45.0 * DEGREE, 0.5, 5.0 * DEGREE];
const ANGLES: [bool; 5] = [false, false, true, false, false];

/// Chi-square 0.99 quantile for two degrees of freedom: with two degrees of freedom the
/// distribution is exponential with mean 2, so the quantile is `-2 ln(1 - 0.99)`.
fn transponder_gate() -> f64 {
    -2.0 * 0.01_f64.ln()
}

/// The Runge-Kutta step of `east' = v cos(h)`, `north' = v sin(h)`, `h' = w`, `v' = a`.
/// Heading and speed move by the same amounts in both half steps, so the two middle
/// stages are equal: one evaluation at the half step weighs 4.
pub fn transition(x: &State, u: &Vector1<f64>, dt: f64) -> State {
    let [[east, north, heading, speed, yaw_rate]] = x.data.0;
    let accel = u[0];
    let half = heading + yaw_rate * dt * 0.5;
    let full = heading + yaw_rate * dt;
    let speed_half = speed + accel * dt * 0.5;
    let speed_full = speed + accel * dt;
    let weight = dt / 6.0;
    State::from([
        east + weight
            * (speed * heading.cos() + 4.0 * speed_half * half.cos() + speed_full * full.cos()),
        north
            + weight
                * (speed * heading.sin() + 4.0 * speed_half * half.sin() + speed_full * full.sin()),
        wrap_angle(heading + yaw_rate * dt),
        speed_full,
        yaw_rate,
    ])
}

/// The Jacobians of [`transition`] with respect to the state and to the input, derived
/// by hand.
pub fn transition_jacobians(x: &State, u: &Vector1<f64>, dt: f64) -> (Square, State) {
    let [[_, _, heading, speed, yaw_rate]] = x.data.0;
    let accel = u[0];
    let half = heading + yaw_rate * dt * 0.5;
    let full = heading + yaw_rate * dt;
    let speed_half = speed + accel * dt * 0.5;
    let speed_full = speed + accel * dt;
    let weight = dt / 6.0;
    let (sin0, cos0) = heading.sin_cos();
    let (sin1, cos1) = half.sin_cos();
    let (sin2, cos2) = full.sin_cos();
    let mut f = Square::identity();
    f[(0, 2)] = -weight * (speed * sin0 + 4.0 * speed_half * sin1 + speed_full * sin2);
    f[(0, 3)] = weight * (cos0 + 4.0 * cos1 + cos2);
    f[(0, 4)] = -weight * dt * (2.0 * speed_half * sin1 + speed_full * sin2);
    f[(1, 2)] = weight * (speed * cos0 + 4.0 * speed_half * cos1 + speed_full * cos2);
    f[(1, 3)] = weight * (sin0 + 4.0 * sin1 + sin2);
    f[(1, 4)] = weight * dt * (2.0 * speed_half * cos1 + speed_full * cos2);
    f[(2, 4)] = dt;
    let b = State::from([
        weight * dt * (2.0 * cos1 + cos2),
        weight * dt * (2.0 * sin1 + sin2),
        0.0,
        dt,
        0.0,
    ]);
    (f, b)
}

/// Range (m) and bearing from the bow (rad) to the transponder at `beacon`.
pub fn transponder(x: &State, beacon: [f64; 2]) -> Vector2<f64> {
    let (east, north) = (beacon[0] - x[0], beacon[1] - x[1]);
    Vector2::new(east.hypot(north), north.atan2(east) - x[2])
}

/// Compass heading, rad.
pub fn compass(x: &State) -> Vector1<f64> {
    Vector1::new(x[2])
}

/// Log speed, m/s.
pub fn log(x: &State) -> Vector1<f64> {
    Vector1::new(x[3])
}

/// Gyro rate, rad/s.
pub fn gyro(x: &State) -> Vector1<f64> {
    Vector1::new(x[4])
}

generated_filter!(GeneratedF64, survey_launch_ekf_f64, f64, {
    0 => correct_transponder(TransponderReading, 0, 1),
    1 => correct_compass(CompassReading),
    2 => correct_log(LogReading),
    3 => correct_gyro(GyroReading),
});
generated_filter!(GeneratedF32, survey_launch_ekf_f32, f32, {
    0 => correct_transponder(TransponderReading, 0, 1),
    1 => correct_compass(CompassReading),
    2 => correct_log(LogReading),
    3 => correct_gyro(GyroReading),
});

/// The hand-written filter.
#[derive(Clone, Debug)]
pub struct Hand(DenseEkf<5>);

impl Hand {
    /// From the spec's `initial` block.
    pub fn from_spec() -> Hand {
        Hand(DenseEkf::new([0.0; 5], INITIAL_STD_DEV, ANGLES))
    }
}

fn density() -> Square {
    Square::from_diagonal(&State::from([
        0.0,
        0.0,
        0.0,
        SPEED_DENSITY,
        YAW_RATE_DENSITY,
    ]))
}

/// A one-component reading of state component `component`, whose Jacobian is a unit row.
fn unit_row(component: usize) -> SMatrix<f64, 1, 5> {
    let mut h = SMatrix::<f64, 1, 5>::zeros();
    h[component] = 1.0;
    h
}

impl Filter for Hand {
    fn predict(&mut self, dt: f64, input: &[f64]) -> bool {
        let x = self.0.x;
        let u = Vector1::new(input[0]);
        let (f, b) = transition_jacobians(&x, &u, dt);
        let d = density();
        let q = (f * d * f.transpose() + d) * (dt * 0.5)
            + b * (ACCEL_SIGMA * ACCEL_SIGMA) * b.transpose();
        self.0.predict(transition(&x, &u, dt), &f, &q)
    }

    fn correct(&mut self, sensor: usize, reading: &[f64], args: &[f64]) -> bool {
        let x = self.0.x;
        let scalar = |value: f64| Vector1::new(value);
        match sensor {
            0 => {
                let beacon = [args[0], args[1]];
                let (east, north) = (beacon[0] - x[0], beacon[1] - x[1]);
                let range = east.hypot(north);
                let squared = east * east + north * north;
                let mut h = SMatrix::<f64, 2, 5>::zeros();
                h[(0, 0)] = -east / range;
                h[(0, 1)] = -north / range;
                h[(1, 0)] = north / squared;
                h[(1, 1)] = -east / squared;
                h[(1, 2)] = -1.0;
                let z = Vector2::new(reading[0], reading[1] * DEGREE);
                let r = Matrix2::new(RANGE_VARIANCE, 0.0, 0.0, BEARING_VARIANCE);
                let innovation = residual(z, transponder(&x, beacon), [false, true]);
                self.0
                    .correct(&innovation, &h, &r, Some(transponder_gate()))
            }
            1 => self.0.correct(
                &residual(scalar(reading[0] * DEGREE), compass(&x), [true]),
                &unit_row(2),
                &Matrix1::new(COMPASS_SIGMA * COMPASS_SIGMA),
                None,
            ),
            2 => self.0.correct(
                &residual(scalar(reading[0] * KNOT), log(&x), [false]),
                &unit_row(3),
                &Matrix1::new(LOG_SIGMA * LOG_SIGMA),
                None,
            ),
            3 => self.0.correct(
                &residual(scalar(reading[0] * DEGREE), gyro(&x), [false]),
                &unit_row(4),
                &Matrix1::new(GYRO_SIGMA * GYRO_SIGMA),
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
        args: &[f64],
    ) -> nalgebra::DVector<f64> {
        let x = fixed(x);
        match sensor {
            0 => dynamic(transponder(&x, [args[0], args[1]])),
            1 => dynamic(compass(&x)),
            2 => dynamic(log(&x)),
            _ => dynamic(gyro(&x)),
        }
    }
}

/// The finite-difference filter, from the spec's `initial` block.
pub fn finite_difference() -> FiniteDifferenceEkf<Functions> {
    use nalgebra::DMatrix;
    let variance = |sigma: f64| DMatrix::from_element(1, 1, sigma * sigma);
    let density = density();
    let sensor = |noise, angle, to_si| fd::Sensor {
        noise,
        angles: vec![angle],
        gate: None,
        to_si: vec![to_si],
    };
    FiniteDifferenceEkf::new(
        Functions,
        &[0.0; 5],
        &INITIAL_STD_DEV,
        ANGLES.to_vec(),
        fd::ProcessNoise {
            density: DMatrix::from_column_slice(5, 5, density.as_slice()),
            input: variance(ACCEL_SIGMA),
            per_step: DMatrix::zeros(5, 5),
        },
        vec![
            fd::Sensor {
                noise: DMatrix::from_row_slice(2, 2, &[RANGE_VARIANCE, 0.0, 0.0, BEARING_VARIANCE]),
                angles: vec![false, true],
                gate: Some(transponder_gate()),
                to_si: vec![1.0, DEGREE],
            },
            sensor(variance(COMPASS_SIGMA), true, DEGREE),
            sensor(variance(LOG_SIGMA), false, KNOT),
            sensor(variance(GYRO_SIGMA), false, DEGREE),
        ],
    )
}

/// The launch running a slow turn at 2 Hz past two transponders, one replying per step
/// in turn; compass, log and gyro report every step.
pub fn scenario(steps: usize) -> Vec<Step> {
    const BEACONS: [[f64; 2]; 2] = [[150.0, 120.0], [-80.0, 200.0]];
    let mut jitter = Jitter::new(0x5eed_0003);
    let mut truth = State::from([3.0, -2.0, 0.3, 1.5, 0.02]);
    let dt = 0.5;
    (0..steps)
        .map(|k| {
            let accel = 0.05 * (0.02 * k as f64).sin();
            truth = transition(&truth, &Vector1::new(accel), dt);
            let beacon = BEACONS[k % 2];
            let seen = transponder(&truth, beacon);
            Step {
                dt,
                input: vec![accel],
                readings: vec![
                    Reading {
                        sensor: 0,
                        values: vec![
                            seen[0] + jitter.normal(RANGE_VARIANCE.sqrt()),
                            wrap_angle(seen[1] + jitter.normal(BEARING_VARIANCE.sqrt())) / DEGREE,
                        ],
                        args: beacon.to_vec(),
                    },
                    Reading {
                        sensor: 1,
                        values: vec![
                            wrap_angle(compass(&truth)[0] + jitter.normal(COMPASS_SIGMA)) / DEGREE,
                        ],
                        args: vec![],
                    },
                    Reading {
                        sensor: 2,
                        values: vec![(log(&truth)[0] + jitter.normal(LOG_SIGMA)) / KNOT],
                        args: vec![],
                    },
                    Reading {
                        sensor: 3,
                        values: vec![(gyro(&truth)[0] + jitter.normal(GYRO_SIGMA)) / DEGREE],
                        args: vec![],
                    },
                ],
            }
        })
        .collect()
}
