//! Endurance: every demo estimator, generated in `f32`, runs a long scripted mission
//! driven by a simple truth (a smooth periodic motion of the vehicle starting at the
//! spec's initial mean, readings
//! computed from it plus small deterministic noise), next to its `f64` twin. After
//! every step: no NaN or infinity, a symmetric (relative 1e-6) positive-definite
//! covariance, every step accepted, and the `f32` estimate within a stated fraction
//! of the `f64` estimate's standard deviation.
//!
//! The CI run is short; `RECKON_LONG_TESTS=1` runs 10^7 steps per estimator. The
//! health counters are printed: run with `-- --nocapture` to see them.

use crate::drive::*;

/// Steps per estimator: CI, and with `RECKON_LONG_TESTS=1`.
const STEPS: usize = 100_000;
const LONG_STEPS: usize = 10_000_000;

/// Largest allowed gap between the `f32` and `f64` estimates, in standard deviations
/// of the `f64` estimate. Both filters forget old errors at the rate their gains set,
/// so `f32` round-off (relative 6e-8 per operation) should not accumulate; what
/// remains is a few roundings of the largest state magnitude (~100 m here) against
/// the smallest standard deviation (~mm): of order 1e-3 sigma. Measured worst cases
/// at 10^5 steps: 1.5e-2 sigma (pallet_robot, east), 2e-3 or less for the others.
/// Over 10^7 steps pallet_robot's gap keeps growing (1.26 sigma, east), so the long
/// run fails for it: an open finding, not a tolerance to widen.
const DRIFT_SIGMAS: f64 = 0.05;

/// Relative asymmetry allowed in a committed covariance.
const SYMMETRY: f64 = 1e-6;

/// Exact conversion factors (NIST SP 811, appendix B): 1 ft = 0.3048 m,
/// 1 kn = 1852/3600 m/s; standard gravity 9.80665 m/s^2 (SI Brochure).
pub const FOOT: f64 = 0.3048;
pub const KNOT: f64 = 1852.0 / 3600.0;
const STANDARD_GRAVITY: f64 = 9.806_65;
const RPM: f64 = 2.0 * std::f64::consts::PI / 60.0;

/// Readings of every sensor at a true state: `(reading, arguments)` in declared units.
pub type Readings = Vec<(Vec<f64>, Vec<f64>)>;

/// One demo spec's mission, estimators and sensor facts.
pub struct Scenario {
    pub name: &'static str,
    /// The step, s.
    pub dt: f64,
    /// Angle states, compared modulo a turn.
    pub angles: &'static [usize],
    /// The true state (SI) and the input (declared units) at a time.
    pub truth: fn(f64) -> (Vec<f64>, Vec<f64>),
    /// Every sensor's reading of a true state.
    pub readings: fn(&[f64]) -> Readings,
    /// Each sensor's reading noise standard deviations, declared units (the spec's).
    pub noise: &'static [&'static [f64]],
    /// Gated sensors, with metres (SI) per declared unit of their first component.
    pub gated: &'static [(usize, f64)],
    /// The `f32` estimator and its `f64` twin.
    pub single: fn() -> Box<dyn Filter>,
    pub double: fn() -> Box<dyn Filter>,
    /// The other generated methods, for the fault tests.
    pub others: &'static [fn() -> Box<dyn Filter>],
}

fn wrap_degrees(angle: f64) -> f64 {
    angle - 360.0 * (angle / 360.0).round()
}

fn wrap_radians(angle: f64) -> f64 {
    let turn = 2.0 * std::f64::consts::PI;
    angle - turn * (angle / turn).round()
}

pub fn scenarios() -> Vec<Scenario> {
    vec![
        Scenario {
            name: "rail_cart",
            dt: 0.1,
            angles: &[],
            truth: |t| {
                let w = 0.05;
                let (s, c) = (w * t).sin_cos();
                (vec![10.0 * (1.0 - c), 10.0 * w * s], vec![10.0 * w * w * c])
            },
            readings: |x| vec![(vec![x[0] / FOOT], vec![]), (vec![x[1]], vec![])],
            noise: &[&[0.01], &[0.02]],
            gated: &[(0, FOOT)],
            single: RailCartEkf32::boxed,
            double: RailCartEkf64::boxed,
            others: &[RailCartKf64::boxed, RailCartUkf64::boxed],
        },
        Scenario {
            name: "canal_ferry",
            dt: 0.5,
            angles: &[],
            truth: |t| {
                let w = 0.02;
                let (s, c) = (w * t).sin_cos();
                let speed = 30.0 * w * s;
                (
                    vec![30.0 * (1.0 - c), speed],
                    vec![30.0 * w * w * c + speed / 8.0],
                )
            },
            readings: |x| vec![(vec![x[1] / KNOT], vec![]), (vec![60.0 - x[0]], vec![])],
            noise: &[&[0.05], &[0.1]],
            gated: &[(1, 1.0)],
            single: CanalFerryEkf32::boxed,
            double: CanalFerryEkf64::boxed,
            others: &[CanalFerryKf64::boxed, CanalFerryUkf64::boxed],
        },
        Scenario {
            name: "goods_lift",
            dt: 0.05,
            angles: &[],
            truth: |t| {
                let w = 0.1;
                let (s, c) = (w * t).sin_cos();
                (
                    vec![8.0 * (1.0 - c), 8.0 * w * s, 0.0],
                    vec![8.0 * w * w * c],
                )
            },
            readings: |x| {
                vec![
                    (
                        vec![(101_325.0 - 1.2 * STANDARD_GRAVITY * x[0]) / 100.0],
                        vec![],
                    ),
                    (vec![(x[0] - 0.5 * FOOT) / FOOT], vec![]),
                ]
            },
            noise: &[&[0.05], &[0.02]],
            gated: &[],
            single: GoodsLiftEkf32::boxed,
            double: GoodsLiftEkf64::boxed,
            others: &[GoodsLiftKf64::boxed, GoodsLiftUkf64::boxed],
        },
        Scenario {
            name: "pallet_robot",
            dt: 0.1,
            angles: &[2],
            truth: |t| {
                // A 10 m circle at 1 m/s, anticlockwise, gyro bias 1 mrad/s.
                let (speed, turn) = (1.0, 0.1);
                let heading = turn * t;
                let radius = speed / turn;
                (
                    vec![
                        radius * heading.sin(),
                        radius * (1.0 - heading.cos()),
                        heading,
                        speed,
                        turn,
                        0.001,
                    ],
                    vec![],
                )
            },
            readings: |x| {
                let (half_track, wheel_radius) = (0.26, 0.1);
                let wheel = |v: f64| v / wheel_radius / RPM;
                let (s, c) = x[2].sin_cos();
                let (tag_east, tag_north) = (0.0, 10.0);
                let (de, dn) = (tag_east - x[0], tag_north - x[1]);
                vec![
                    (
                        vec![
                            wheel(x[3] - x[4] * half_track),
                            wheel(x[3] + x[4] * half_track),
                        ],
                        vec![],
                    ),
                    (vec![(x[4] + x[5]).to_degrees()], vec![]),
                    (
                        vec![(c * de + s * dn) * 1000.0, (c * dn - s * de) * 1000.0],
                        vec![tag_east, tag_north],
                    ),
                ]
            },
            noise: &[&[0.5, 0.5], &[0.1], &[5.0, 5.0]],
            gated: &[],
            single: PalletRobotEkf32::boxed,
            double: PalletRobotEkf64::boxed,
            others: &[PalletRobotUkf64::boxed],
        },
        Scenario {
            name: "survey_launch",
            dt: 0.1,
            angles: &[2],
            truth: |t| {
                // A 100 m circle at 2 m/s.
                let (speed, turn) = (2.0, 0.02);
                let heading = turn * t;
                let radius = speed / turn;
                (
                    vec![
                        radius * heading.sin(),
                        radius * (1.0 - heading.cos()),
                        heading,
                        speed,
                        turn,
                    ],
                    vec![0.0],
                )
            },
            readings: |x| {
                let (beacon_east, beacon_north) = (50.0, 50.0);
                let (de, dn) = (beacon_east - x[0], beacon_north - x[1]);
                vec![
                    (
                        vec![
                            de.hypot(dn),
                            wrap_degrees((dn.atan2(de) - x[2]).to_degrees()),
                        ],
                        vec![beacon_east, beacon_north],
                    ),
                    (vec![wrap_degrees(x[2].to_degrees())], vec![]),
                    (vec![x[3] / KNOT], vec![]),
                    (vec![x[4].to_degrees()], vec![]),
                ]
            },
            noise: &[&[0.5, 3.0], &[1.5], &[0.1], &[0.2]],
            gated: &[(0, 1.0)],
            single: SurveyLaunchEkf32::boxed,
            double: SurveyLaunchEkf64::boxed,
            others: &[SurveyLaunchUkf64::boxed],
        },
    ]
}

/// Deterministic reading noise: a Weyl sequence, equidistributed on
/// `[-sqrt(3), sqrt(3)]` (unit standard deviation), one irrational stride per
/// component so the components do not move together.
fn noise(step: usize, component: usize) -> f64 {
    let stride = [
        0.618_033_988_749_895,
        0.414_213_562_373_095,
        0.732_050_807_568_877,
    ];
    let phase = (step as f64 * stride[component % stride.len()]).fract();
    (2.0 * phase - 1.0) * 3f64.sqrt()
}

/// What one step of a mission feeds the estimators.
pub struct Step {
    pub input: Vec<f64>,
    pub sensor: usize,
    pub reading: Vec<f64>,
    pub args: Vec<f64>,
}

impl Scenario {
    /// Step `k`: predict from `k dt` to `(k + 1) dt` under the input at the middle of
    /// the step, then one sensor (in turn) reads the new true state, with noise.
    pub fn step(&self, k: usize) -> Step {
        let t = k as f64 * self.dt;
        let (_, input) = (self.truth)(t + 0.5 * self.dt);
        let (state, _) = (self.truth)(t + self.dt);
        let mut readings = (self.readings)(&state);
        let sensor = k % readings.len();
        let (mut reading, args) = readings.swap_remove(sensor);
        for (component, (value, sigma)) in reading.iter_mut().zip(self.noise[sensor]).enumerate() {
            *value += sigma * noise(k, component);
        }
        Step {
            input,
            sensor,
            reading,
            args,
        }
    }

    /// Runs steps `0..steps` on `filter`; panics at the first rejected step.
    pub fn drive(&self, filter: &mut dyn Filter, steps: std::ops::Range<usize>) {
        for k in steps {
            self.run_step(filter, &self.step(k), k);
        }
    }

    fn run_step(&self, filter: &mut dyn Filter, step: &Step, k: usize) {
        if let Err(e) = filter.predict(&step.input, self.dt) {
            panic!("{}: step {k}: prediction rejected: {e}", self.name);
        }
        if let Err(e) = filter.correct(step.sensor, &step.reading, &step.args) {
            panic!(
                "{}: step {k}: sensor {} reading {:?} rejected: {e}",
                self.name, step.sensor, step.reading
            );
        }
    }
}

/// Panics unless the state and covariance are finite and the covariance symmetric
/// and positive definite.
fn assert_sound(name: &str, k: usize, filter: &dyn Filter) {
    let state = filter.state();
    let n = state.len();
    let p = filter.covariance();
    assert!(
        state.iter().chain(&p).all(|v| v.is_finite()),
        "{name}: step {k}: not finite: {state:?} {p:?}"
    );
    for i in 0..n {
        for j in 0..i {
            let (a, b) = (p[i * n + j], p[j * n + i]);
            let scale = (p[i * n + i] * p[j * n + j]).sqrt();
            assert!(
                (a - b).abs() <= SYMMETRY * scale,
                "{name}: step {k}: covariance asymmetric at ({i}, {j}): {a} vs {b}"
            );
        }
    }
    let matrix = nalgebra::DMatrix::from_row_slice(n, n, &p);
    assert!(
        matrix.cholesky().is_some(),
        "{name}: step {k}: covariance not positive definite: {p:?}"
    );
}

/// The largest gap between the two estimates, in standard deviations of `double`,
/// and the state component where it is.
fn drift(scenario: &Scenario, single: &dyn Filter, double: &dyn Filter) -> (f64, usize) {
    let (a, b) = (single.state(), double.state());
    let p = double.covariance();
    let n = b.len();
    (0..n)
        .map(|i| {
            let gap = a[i] - b[i];
            let gap = if scenario.angles.contains(&i) {
                wrap_radians(gap)
            } else {
                gap
            };
            (gap.abs() / p[i * n + i].sqrt(), i)
        })
        .fold((0.0, 0), |a, b| if b.0 > a.0 { b } else { a })
}

#[test]
fn estimators_endure_long_missions() {
    let long = std::env::var_os("RECKON_LONG_TESTS").is_some_and(|v| v == "1");
    let steps = if long { LONG_STEPS } else { STEPS };
    // Every mission runs to its end, so one report shows all the drifts.
    let mut drifted = Vec::new();
    for scenario in scenarios() {
        let mut single = (scenario.single)();
        let mut double = (scenario.double)();
        let mut worst = (0.0_f64, 0, 0);
        for k in 0..steps {
            let step = scenario.step(k);
            scenario.run_step(single.as_mut(), &step, k);
            scenario.run_step(double.as_mut(), &step, k);
            assert_sound(scenario.name, k, single.as_ref());
            assert_sound(scenario.name, k, double.as_ref());
            let (gap, component) = drift(&scenario, single.as_ref(), double.as_ref());
            if gap > worst.0 {
                worst = (gap, component, k);
            }
        }
        println!(
            "{}: {steps} steps, worst f32/f64 gap {:.2e} sigma (state {}, step {}); f32 health {:?}",
            scenario.name,
            worst.0,
            worst.1,
            worst.2,
            single.health()
        );
        if worst.0 > DRIFT_SIGMAS {
            drifted.push(format!("{}: {:.3} sigma", scenario.name, worst.0));
        }
    }
    assert!(
        drifted.is_empty(),
        "f32 drifted from f64 beyond {DRIFT_SIGMAS} sigma: {drifted:?}"
    );
}
