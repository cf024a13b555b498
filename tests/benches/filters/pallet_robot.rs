//! `specs/pallet_robot.reckon` by hand: a differential-drive robot (position, heading,
//! speed, turn rate, gyro bias) moved by the classical Runge-Kutta step of its
//! continuous motion, with wheel encoders in rpm, a gyro in deg/s and a floor-tag camera
//! in mm. The model functions and hand-derived Jacobians are written once here and
//! used by the hand-written filter; the finite-difference filter uses the same model
//! functions.

use std::f64::consts::PI;

use nalgebra::{Matrix1, Matrix2, SMatrix, SVector, Vector2};
use reckon_runtime::angle::wrap_angle;

use super::dense::{residual, DenseEkf};
use super::finite_difference::{self as fd, dynamic, fixed, FiniteDifferenceEkf};
use super::scenario::{Jitter, Reading, Step};
use super::{generated_filter, Filter};

/// Sensor names, in spec order.
pub const SENSORS: [&str; 3] = ["wheels", "gyro", "floor_tag"];

type State = SVector<f64, 6>;
type Square = SMatrix<f64, 6, 6>;

const WHEEL_RADIUS: f64 = 0.1;
const TRACK: f64 = 0.52;
const DEGREE: f64 = PI / 180.0;
/// One revolution per minute in rad/s.
const RPM: f64 = 2.0 * PI / 60.0;
/// Spectral densities (squared amplitudes) of the white noise on the rates of speed,
/// turn rate and gyro bias; the bias's 4 deg/h/sqrt(h) is 4 deg / 3600^1.5 s^1.5.
const SPEED_DENSITY: f64 = 0.2 * 0.2;
const YAW_RATE_DENSITY: f64 = 0.3 * 0.3;
const BIAS_AMPLITUDE: f64 = 4.0 * DEGREE / 216_000.0;
const WHEEL_SIGMA: f64 = 0.5 * RPM;
const GYRO_SIGMA: f64 = 0.1 * DEGREE;
const TAG_SIGMA: f64 = 0.005;
const INITIAL_STD_DEV: [f64; 6] = [0.5, 0.5, 10.0 * DEGREE, 0.1, DEGREE, 0.5 * DEGREE];
const ANGLES: [bool; 6] = [false, false, true, false, false, false];

/// The Runge-Kutta step of `east' = v cos(h)`, `north' = v sin(h)`, `h' = w`. The rates
/// depend only on heading and speed, and heading moves by `w dt / 2` in both half steps,
/// so the two middle stages are equal: one evaluation at `h + w dt / 2` weighs 4.
pub fn transition(x: &State, dt: f64) -> State {
    let [[east, north, heading, speed, yaw_rate, bias]] = x.data.0;
    let half = heading + yaw_rate * dt * 0.5;
    let full = heading + yaw_rate * dt;
    let weight = dt / 6.0;
    State::from([
        east + weight * speed * (heading.cos() + 4.0 * half.cos() + full.cos()),
        north + weight * speed * (heading.sin() + 4.0 * half.sin() + full.sin()),
        wrap_angle(heading + yaw_rate * dt),
        speed,
        yaw_rate,
        bias,
    ])
}

/// The Jacobian of [`transition`], derived by hand.
pub fn transition_jacobian(x: &State, dt: f64) -> Square {
    let [[_, _, heading, speed, yaw_rate, _]] = x.data.0;
    let half = heading + yaw_rate * dt * 0.5;
    let full = heading + yaw_rate * dt;
    let weight = dt / 6.0;
    let (sin0, cos0) = heading.sin_cos();
    let (sin1, cos1) = half.sin_cos();
    let (sin2, cos2) = full.sin_cos();
    let cos_sum = cos0 + 4.0 * cos1 + cos2;
    let sin_sum = sin0 + 4.0 * sin1 + sin2;
    let mut f = Square::identity();
    f[(0, 2)] = -weight * speed * sin_sum;
    f[(0, 3)] = weight * cos_sum;
    f[(0, 4)] = -weight * speed * dt * (2.0 * sin1 + sin2);
    f[(1, 2)] = weight * speed * cos_sum;
    f[(1, 3)] = weight * sin_sum;
    f[(1, 4)] = weight * speed * dt * (2.0 * cos1 + cos2);
    f[(2, 4)] = dt;
    f
}

/// Wheel speeds, rad/s.
pub fn wheels(x: &State) -> Vector2<f64> {
    let turn = x[4] * TRACK / 2.0;
    Vector2::new((x[3] - turn) / WHEEL_RADIUS, (x[3] + turn) / WHEEL_RADIUS)
}

/// Gyro rate with bias, rad/s.
pub fn gyro(x: &State) -> SVector<f64, 1> {
    SVector::<f64, 1>::new(x[4] + x[5])
}

/// Offset of the tag at `tag` (east, north) in the robot's frame, m.
pub fn floor_tag(x: &State, tag: [f64; 2]) -> Vector2<f64> {
    let (sin, cos) = x[2].sin_cos();
    let (east, north) = (tag[0] - x[0], tag[1] - x[1]);
    Vector2::new(cos * east + sin * north, cos * north - sin * east)
}

generated_filter!(GeneratedF64, pallet_robot_ekf_f64, f64, {
    0 => correct_wheels(WheelsReading),
    1 => correct_gyro(GyroReading),
    2 => correct_floor_tag(FloorTagReading, 0, 1),
});
generated_filter!(GeneratedF32, pallet_robot_ekf_f32, f32, {
    0 => correct_wheels(WheelsReading),
    1 => correct_gyro(GyroReading),
    2 => correct_floor_tag(FloorTagReading, 0, 1),
});

/// The hand-written filter.
#[derive(Clone, Debug)]
pub struct Hand(DenseEkf<6>);

impl Hand {
    /// From the spec's `initial` block.
    pub fn from_spec() -> Hand {
        Hand(DenseEkf::new([0.0; 6], INITIAL_STD_DEV, ANGLES))
    }
}

fn density() -> Square {
    Square::from_diagonal(&State::from([
        0.0,
        0.0,
        0.0,
        SPEED_DENSITY,
        YAW_RATE_DENSITY,
        BIAS_AMPLITUDE * BIAS_AMPLITUDE,
    ]))
}

impl Filter for Hand {
    fn predict(&mut self, dt: f64, _input: &[f64]) -> bool {
        let x = self.0.x;
        let f = transition_jacobian(&x, dt);
        let d = density();
        let q = (f * d * f.transpose() + d) * (dt * 0.5);
        self.0.predict(transition(&x, dt), &f, &q)
    }

    fn correct(&mut self, sensor: usize, reading: &[f64], args: &[f64]) -> bool {
        let x = self.0.x;
        match sensor {
            0 => {
                let mut h = SMatrix::<f64, 2, 6>::zeros();
                h[(0, 3)] = 1.0 / WHEEL_RADIUS;
                h[(1, 3)] = 1.0 / WHEEL_RADIUS;
                h[(0, 4)] = -TRACK / (2.0 * WHEEL_RADIUS);
                h[(1, 4)] = TRACK / (2.0 * WHEEL_RADIUS);
                let z = Vector2::new(reading[0], reading[1]) * RPM;
                let r = Matrix2::from_diagonal_element(WHEEL_SIGMA * WHEEL_SIGMA);
                self.0
                    .correct(&residual(z, wheels(&x), [false; 2]), &h, &r, None)
            }
            1 => {
                let h = SMatrix::<f64, 1, 6>::new(0.0, 0.0, 0.0, 0.0, 1.0, 1.0);
                let z = SVector::<f64, 1>::new(reading[0] * DEGREE);
                let r = Matrix1::new(GYRO_SIGMA * GYRO_SIGMA);
                self.0
                    .correct(&residual(z, gyro(&x), [false]), &h, &r, None)
            }
            2 => {
                let tag = [args[0], args[1]];
                let (sin, cos) = x[2].sin_cos();
                let (east, north) = (tag[0] - x[0], tag[1] - x[1]);
                let mut h = SMatrix::<f64, 2, 6>::zeros();
                h[(0, 0)] = -cos;
                h[(0, 1)] = -sin;
                h[(0, 2)] = cos * north - sin * east;
                h[(1, 0)] = sin;
                h[(1, 1)] = -cos;
                h[(1, 2)] = -sin * north - cos * east;
                let z = Vector2::new(reading[0], reading[1]) * 0.001;
                let r = Matrix2::from_diagonal_element(TAG_SIGMA * TAG_SIGMA);
                self.0
                    .correct(&residual(z, floor_tag(&x, tag), [false; 2]), &h, &r, None)
            }
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
        _u: &nalgebra::DVector<f64>,
        dt: f64,
    ) -> nalgebra::DVector<f64> {
        dynamic(transition(&fixed(x), dt))
    }

    fn predict_reading(
        &self,
        sensor: usize,
        x: &nalgebra::DVector<f64>,
        args: &[f64],
    ) -> nalgebra::DVector<f64> {
        let x = fixed(x);
        match sensor {
            0 => dynamic(wheels(&x)),
            1 => dynamic(gyro(&x)),
            _ => dynamic(floor_tag(&x, [args[0], args[1]])),
        }
    }
}

/// The finite-difference filter, from the spec's `initial` block.
pub fn finite_difference() -> FiniteDifferenceEkf<Functions> {
    use nalgebra::{DMatrix, DVector};
    let diagonal =
        |variances: &[f64]| DMatrix::from_diagonal(&DVector::from_column_slice(variances));
    let density = density();
    FiniteDifferenceEkf::new(
        Functions,
        &[0.0; 6],
        &INITIAL_STD_DEV,
        ANGLES.to_vec(),
        fd::ProcessNoise {
            density: DMatrix::from_column_slice(6, 6, density.as_slice()),
            input: DMatrix::zeros(0, 0),
            per_step: DMatrix::zeros(6, 6),
        },
        vec![
            fd::Sensor {
                noise: diagonal(&[WHEEL_SIGMA * WHEEL_SIGMA; 2]),
                angles: vec![false; 2],
                gate: None,
                to_si: vec![RPM; 2],
            },
            fd::Sensor {
                noise: diagonal(&[GYRO_SIGMA * GYRO_SIGMA]),
                angles: vec![false],
                gate: None,
                to_si: vec![DEGREE],
            },
            fd::Sensor {
                noise: diagonal(&[TAG_SIGMA * TAG_SIGMA; 2]),
                angles: vec![false; 2],
                gate: None,
                to_si: vec![0.001; 2],
            },
        ],
    )
}

/// The robot driving a wide circle at 50 Hz; every step the wheels, the gyro (with a
/// 0.3 deg/s bias) and a tag 1.2 m ahead-ish report.
pub fn scenario(steps: usize) -> Vec<Step> {
    let mut jitter = Jitter::new(0x5eed_0002);
    let mut truth = State::from([0.1, -0.1, 0.05, 0.8, 0.2, 0.3 * DEGREE]);
    let dt = 0.02;
    (0..steps)
        .map(|_| {
            truth = transition(&truth, dt);
            let tag = [(truth[0] + 1.2).round(), (truth[1] + 0.4).round()];
            let wheel = wheels(&truth);
            let seen = floor_tag(&truth, tag);
            Step {
                dt,
                input: vec![],
                readings: vec![
                    Reading {
                        sensor: 0,
                        values: vec![
                            (wheel[0] + jitter.normal(WHEEL_SIGMA)) / RPM,
                            (wheel[1] + jitter.normal(WHEEL_SIGMA)) / RPM,
                        ],
                        args: vec![],
                    },
                    Reading {
                        sensor: 1,
                        values: vec![(gyro(&truth)[0] + jitter.normal(GYRO_SIGMA)) / DEGREE],
                        args: vec![],
                    },
                    Reading {
                        sensor: 2,
                        values: vec![
                            (seen[0] + jitter.normal(TAG_SIGMA)) / 0.001,
                            (seen[1] + jitter.normal(TAG_SIGMA)) / 0.001,
                        ],
                        args: tag.to_vec(),
                    },
                ],
            }
        })
        .collect()
}
