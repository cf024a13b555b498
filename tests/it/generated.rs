//! The generated estimators, run: each must compute what the interpreter computes
//! through the same runtime (the reference path), the `f32` build must stay close to
//! the `f64` one, and readings in non-SI units must correct exactly like the same
//! readings given in SI.

use nalgebra::{DMatrix, DVector};
use proptest::prelude::*;
use reckon::back::interp::{InterpretedMotion, InterpretedSensor};
use reckon::back::rust::lower_options;
use reckon::check::check_source;
use reckon::ir::{self, Lowered};
use reckon::model::Model;
use reckon::options::{EstimatorOptions, Method};
use reckon_runtime::{KalmanFilter, UnscentedParams, UnscentedWeights, UpdateForm};

/// One step of a scripted run. Values are in the units the spec declares.
#[derive(Debug, Clone)]
enum Step {
    Predict {
        dt: f64,
        input: Vec<f64>,
    },
    Correct {
        sensor: usize,
        reading: Vec<f64>,
        args: Vec<f64>,
    },
}

fn predict(dt: f64, input: &[f64]) -> Step {
    Step::Predict {
        dt,
        input: input.to_vec(),
    }
}

fn correct(sensor: usize, reading: &[f64], args: &[f64]) -> Step {
    Step::Correct {
        sensor,
        reading: reading.to_vec(),
        args: args.to_vec(),
    }
}

/// After each step: whether it was accepted, the state and the covariance (SI).
#[derive(Debug, Clone, PartialEq)]
struct Snapshot {
    accepted: bool,
    state: Vec<f64>,
    covariance: Vec<f64>,
}

/// Converts a slice of `f64` into a fixed array of the estimator's scalar.
trait FromF64: Copy {
    fn from_f64(value: f64) -> Self;
    fn to_f64(self) -> f64;
}

impl FromF64 for f64 {
    fn from_f64(value: f64) -> f64 {
        value
    }
    fn to_f64(self) -> f64 {
        self
    }
}

impl FromF64 for f32 {
    fn from_f64(value: f64) -> f32 {
        value as f32
    }
    fn to_f64(self) -> f64 {
        f64::from(self)
    }
}

fn array<T: FromF64, const N: usize>(values: &[f64]) -> [T; N] {
    assert_eq!(values.len(), N, "script value count");
    std::array::from_fn(|i| T::from_f64(values[i]))
}

fn widen<T: FromF64>(values: impl IntoIterator<Item = T>) -> Vec<f64> {
    values.into_iter().map(FromF64::to_f64).collect()
}

/// Runs `script` on a generated module. The sensor list maps each sensor index to
/// its correction method, reading type and argument names.
macro_rules! run_generated {
    ($module:path, $t:ty, $script:expr, {
        $($index:literal => $method:ident($reading:ident $(, $arg:ident)*)),* $(,)?
    }) => {{
        use $module as m;
        let mut estimator = m::Estimator::new().expect("the spec's initial block is valid");
        let mut trace = Vec::new();
        for step in $script {
            let accepted = match step {
                Step::Predict { dt, input } => estimator
                    .predict(&m::Input::from_array(array(input)), <$t>::from_f64(*dt))
                    .is_ok(),
                Step::Correct { sensor, reading, args } => match sensor {
                    $($index => {
                        let [$($arg),*]: [$t; { let names: &[&str] = &[$(stringify!($arg)),*]; names.len() }] = array(args);
                        estimator
                            .$method(&m::$reading::from_array(array(reading)) $(, $arg)*)
                            .is_ok()
                    })*
                    other => panic!("no sensor {other}"),
                },
            };
            trace.push(Snapshot {
                accepted,
                state: widen(estimator.state().to_array()),
                covariance: widen(estimator.covariance().iter().copied()),
            });
        }
        trace
    }};
}

fn load(spec: &str) -> Model {
    let path = format!("{}/../specs/{spec}.reckon", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).expect("demo spec readable");
    check_source(&text).model.expect("demo spec checks")
}

fn load_test_spec(spec: &str) -> Model {
    let path = format!("{}/specs/{spec}.reckon", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).expect("test spec readable");
    check_source(&text).model.expect("test spec checks")
}

/// The reference path: the interpreter's model functions in the runtime's filter.
fn run_interpreted(model: &Model, method: Method, script: &[Step]) -> Vec<Snapshot> {
    let options = EstimatorOptions {
        method,
        ..EstimatorOptions::default()
    };
    let lowered: Lowered = ir::lower(model, &lower_options(&options)).expect("lowers");
    let n = model.states.len();
    let beliefs: Vec<_> = model
        .initial
        .iter()
        .map(|d| d.expect("initial belief"))
        .collect();
    let mean = DVector::from_iterator(n, beliefs.iter().map(|d| d.mean()));
    let covariance = DMatrix::from_diagonal(&DVector::from_iterator(
        n,
        beliefs.iter().map(|d| d.variance()),
    ));
    let mut filter = KalmanFilter::new(mean, covariance).expect("valid initial belief");
    let angles = DVector::from_iterator(n, model.states.iter().map(|s| s.wrap));
    filter.set_angle_states(angles).expect("mask length");
    let params = options.unscented;
    let weights = UnscentedWeights::new(
        &UnscentedParams {
            alpha: params.alpha,
            beta: params.beta,
            kappa: params.kappa,
        },
        n,
    )
    .expect("valid weights");
    let motion = InterpretedMotion::new(&lowered);
    let mut trace = Vec::new();
    for step in script {
        let accepted = match step {
            Step::Predict { dt, input } => {
                let u = DVector::from_iterator(
                    input.len(),
                    input
                        .iter()
                        .zip(&model.inputs)
                        .map(|(v, var)| v * var.unit.to_si),
                );
                match method {
                    Method::Ukf => filter.predict_unscented(&motion, &u, *dt, &weights),
                    _ => filter.predict(&motion, &u, *dt),
                }
                .is_ok()
            }
            Step::Correct {
                sensor,
                reading,
                args,
            } => {
                let spec = &model.sensors[*sensor];
                let model_fns =
                    InterpretedSensor::new(&lowered, *sensor, UpdateForm::Joseph).expect("sensor");
                let z = DVector::from_iterator(
                    reading.len(),
                    reading
                        .iter()
                        .zip(&spec.components)
                        .map(|(v, c)| v * c.unit.to_si),
                );
                let args: Vec<f64> = args
                    .iter()
                    .zip(&spec.args)
                    .map(|(v, a)| v * a.unit.to_si)
                    .collect();
                let gate = spec.gate.and_then(|g| {
                    reckon::stats::chi2_quantile(g.probability, spec.components.len() as u32)
                });
                match method {
                    Method::Ukf => filter
                        .correct_unscented(&model_fns, &z, &args, gate, &weights)
                        .map(|_| ()),
                    _ => filter.correct(&model_fns, &z, &args, gate).map(|_| ()),
                }
                .is_ok()
            }
        };
        trace.push(Snapshot {
            accepted,
            state: filter.state().iter().copied().collect(),
            covariance: filter.covariance().iter().copied().collect(),
        });
    }
    trace
}

/// Asserts two traces agree: same accepted steps, values within `tolerance` scaled
/// by `1 + |value|`.
fn assert_close(label: &str, actual: &[Snapshot], expected: &[Snapshot], tolerance: f64) {
    assert_eq!(actual.len(), expected.len());
    if std::env::var_os("RECKON_TRACE").is_some() {
        for (a, e) in actual.iter().zip(expected) {
            eprintln!("{label}\n  actual   {a:?}\n  expected {e:?}");
        }
    }
    for (step, (a, e)) in actual.iter().zip(expected).enumerate() {
        assert_eq!(a.accepted, e.accepted, "{label}: step {step} acceptance");
        for (what, xs, ys) in [
            ("state", &a.state, &e.state),
            ("covariance", &a.covariance, &e.covariance),
        ] {
            for (k, (x, y)) in xs.iter().zip(ys.iter()).enumerate() {
                assert!(
                    (x - y).abs() <= tolerance * (1.0 + y.abs()),
                    "{label}: step {step} {what}[{k}]: {x} vs {y}"
                );
            }
        }
    }
}

/// Agreement of a generated `f64` module with the interpreter: both run the same
/// runtime algorithm, so only round-off in differently ordered sums may differ.
const MATCH_F64: f64 = 1e-12;
/// Agreement of an `f32` build with the `f64` build over a short script: a few
/// hundred roundings of relative size 6e-8 each.
const MATCH_F32: f64 = 1e-4;

fn rail_cart_script() -> Vec<Step> {
    vec![
        predict(0.1, &[0.5]),
        correct(0, &[0.02], &[]),
        predict(0.1, &[0.5]),
        correct(1, &[0.06], &[]),
        predict(0.2, &[0.0]),
        correct(0, &[0.1], &[]),
        predict(0.1, &[-0.3]),
        // A laser reading 30 ft off: far outside the 99.9 % gate.
        correct(0, &[30.0], &[]),
        predict(0.0, &[0.0]),
        correct(1, &[0.05], &[]),
    ]
}

fn canal_ferry_script() -> Vec<Step> {
    vec![
        predict(0.5, &[0.2]),
        correct(0, &[0.2], &[]),
        predict(0.5, &[0.2]),
        correct(1, &[59.8], &[]),
        predict(1.0, &[0.1]),
        correct(0, &[0.4], &[]),
        correct(1, &[59.3], &[]),
    ]
}

fn goods_lift_script() -> Vec<Step> {
    vec![
        predict(0.05, &[0.4]),
        correct(0, &[1013.24], &[]),
        predict(0.05, &[0.4]),
        correct(1, &[-1.45], &[]),
        predict(0.1, &[0.0]),
        correct(0, &[1013.2], &[]),
        correct(1, &[-1.3], &[]),
    ]
}

fn pallet_robot_script() -> Vec<Step> {
    vec![
        predict(0.1, &[]),
        correct(0, &[10.0, 11.0], &[]),
        correct(1, &[2.0], &[]),
        predict(0.1, &[]),
        correct(2, &[1490.0, 180.0], &[1.5, 0.2]),
        predict(0.2, &[]),
        correct(0, &[12.0, 12.5], &[]),
        correct(2, &[1300.0, -40.0], &[1.5, 0.2]),
    ]
}

fn survey_launch_script() -> Vec<Step> {
    vec![
        predict(0.5, &[0.2]),
        correct(0, &[50.0, 40.0], &[40.0, 30.0]),
        predict(0.5, &[0.2]),
        // Heading near the cut at +-180 deg: wrapping must agree.
        correct(1, &[179.0], &[]),
        correct(3, &[0.3], &[]),
        predict(0.5, &[0.0]),
        correct(2, &[1.0], &[]),
        correct(0, &[49.0, 41.0], &[40.0, 30.0]),
    ]
}

#[test]
fn rail_cart_matches_the_interpreter() {
    let model = load("rail_cart");
    let script = rail_cart_script();
    let ekf = run_generated!(reckon_tests::rail_cart_ekf_f64, f64, &script, {
        0 => correct_laser(LaserReading),
        1 => correct_encoder(EncoderReading),
    });
    assert_close(
        "rail_cart ekf",
        &ekf,
        &run_interpreted(&model, Method::Ekf, &script),
        MATCH_F64,
    );
    let kf = run_generated!(reckon_tests::rail_cart_kf_f64, f64, &script, {
        0 => correct_laser(LaserReading),
        1 => correct_encoder(EncoderReading),
    });
    assert_close(
        "rail_cart kf",
        &kf,
        &run_interpreted(&model, Method::Kf, &script),
        MATCH_F64,
    );
    let ukf = run_generated!(reckon_tests::rail_cart_ukf_f64, f64, &script, {
        0 => correct_laser(LaserReading),
        1 => correct_encoder(EncoderReading),
    });
    assert_close(
        "rail_cart ukf",
        &ukf,
        &run_interpreted(&model, Method::Ukf, &script),
        MATCH_F64,
    );
    // The gate rejected the 30 ft reading, in both paths.
    assert!(!ekf[7].accepted);
    // The zero step was rejected too.
    assert!(!ekf[8].accepted);
    let f32_trace = run_generated!(reckon_tests::rail_cart_ekf_f32, f32, &script, {
        0 => correct_laser(LaserReading),
        1 => correct_encoder(EncoderReading),
    });
    assert_close("rail_cart f32", &f32_trace, &ekf, MATCH_F32);
}

#[test]
fn canal_ferry_matches_the_interpreter() {
    // Linear time-invariant with a non-nilpotent matrix: the run-time exponential path.
    let model = load("canal_ferry");
    let script = canal_ferry_script();
    let ekf = run_generated!(reckon_tests::canal_ferry_ekf_f64, f64, &script, {
        0 => correct_sog(SogReading),
        1 => correct_lidar(LidarReading),
    });
    assert_close(
        "canal_ferry ekf",
        &ekf,
        &run_interpreted(&model, Method::Ekf, &script),
        MATCH_F64,
    );
    let kf = run_generated!(reckon_tests::canal_ferry_kf_f64, f64, &script, {
        0 => correct_sog(SogReading),
        1 => correct_lidar(LidarReading),
    });
    assert_close(
        "canal_ferry kf",
        &kf,
        &run_interpreted(&model, Method::Kf, &script),
        MATCH_F64,
    );
    let ukf = run_generated!(reckon_tests::canal_ferry_ukf_f64, f64, &script, {
        0 => correct_sog(SogReading),
        1 => correct_lidar(LidarReading),
    });
    assert_close(
        "canal_ferry ukf",
        &ukf,
        &run_interpreted(&model, Method::Ukf, &script),
        MATCH_F64,
    );
    let f32_trace = run_generated!(reckon_tests::canal_ferry_ekf_f32, f32, &script, {
        0 => correct_sog(SogReading),
        1 => correct_lidar(LidarReading),
    });
    assert_close("canal_ferry f32", &f32_trace, &ekf, MATCH_F32);
}

#[test]
fn goods_lift_matches_the_interpreter() {
    let model = load("goods_lift");
    let script = goods_lift_script();
    let ekf = run_generated!(reckon_tests::goods_lift_ekf_f64, f64, &script, {
        0 => correct_barometer(BarometerReading),
        1 => correct_pit_laser(PitLaserReading),
    });
    assert_close(
        "goods_lift ekf",
        &ekf,
        &run_interpreted(&model, Method::Ekf, &script),
        MATCH_F64,
    );
    let kf = run_generated!(reckon_tests::goods_lift_kf_f64, f64, &script, {
        0 => correct_barometer(BarometerReading),
        1 => correct_pit_laser(PitLaserReading),
    });
    assert_close(
        "goods_lift kf",
        &kf,
        &run_interpreted(&model, Method::Kf, &script),
        MATCH_F64,
    );
    let ukf = run_generated!(reckon_tests::goods_lift_ukf_f64, f64, &script, {
        0 => correct_barometer(BarometerReading),
        1 => correct_pit_laser(PitLaserReading),
    });
    assert_close(
        "goods_lift ukf",
        &ukf,
        &run_interpreted(&model, Method::Ukf, &script),
        MATCH_F64,
    );
    let f32_trace = run_generated!(reckon_tests::goods_lift_ekf_f32, f32, &script, {
        0 => correct_barometer(BarometerReading),
        1 => correct_pit_laser(PitLaserReading),
    });
    assert_close("goods_lift f32", &f32_trace, &ekf, MATCH_F32);
}

#[test]
fn pallet_robot_matches_the_interpreter() {
    let model = load("pallet_robot");
    let script = pallet_robot_script();
    let ekf = run_generated!(reckon_tests::pallet_robot_ekf_f64, f64, &script, {
        0 => correct_wheels(WheelsReading),
        1 => correct_gyro(GyroReading),
        2 => correct_floor_tag(FloorTagReading, tag_east, tag_north),
    });
    assert_close(
        "pallet_robot ekf",
        &ekf,
        &run_interpreted(&model, Method::Ekf, &script),
        MATCH_F64,
    );
    let ukf = run_generated!(reckon_tests::pallet_robot_ukf_f64, f64, &script, {
        0 => correct_wheels(WheelsReading),
        1 => correct_gyro(GyroReading),
        2 => correct_floor_tag(FloorTagReading, tag_east, tag_north),
    });
    assert_close(
        "pallet_robot ukf",
        &ukf,
        &run_interpreted(&model, Method::Ukf, &script),
        MATCH_F64,
    );
    let f32_trace = run_generated!(reckon_tests::pallet_robot_ekf_f32, f32, &script, {
        0 => correct_wheels(WheelsReading),
        1 => correct_gyro(GyroReading),
        2 => correct_floor_tag(FloorTagReading, tag_east, tag_north),
    });
    assert_close("pallet_robot f32", &f32_trace, &ekf, MATCH_F32);
}

#[test]
fn survey_launch_matches_the_interpreter() {
    let model = load("survey_launch");
    let script = survey_launch_script();
    let ekf = run_generated!(reckon_tests::survey_launch_ekf_f64, f64, &script, {
        0 => correct_transponder(TransponderReading, beacon_east, beacon_north),
        1 => correct_compass(CompassReading),
        2 => correct_log(LogReading),
        3 => correct_gyro(GyroReading),
    });
    assert_close(
        "survey_launch ekf",
        &ekf,
        &run_interpreted(&model, Method::Ekf, &script),
        MATCH_F64,
    );
    let ukf = run_generated!(reckon_tests::survey_launch_ukf_f64, f64, &script, {
        0 => correct_transponder(TransponderReading, beacon_east, beacon_north),
        1 => correct_compass(CompassReading),
        2 => correct_log(LogReading),
        3 => correct_gyro(GyroReading),
    });
    assert_close(
        "survey_launch ukf",
        &ukf,
        &run_interpreted(&model, Method::Ukf, &script),
        MATCH_F64,
    );
    let f32_trace = run_generated!(reckon_tests::survey_launch_ekf_f32, f32, &script, {
        0 => correct_transponder(TransponderReading, beacon_east, beacon_north),
        1 => correct_compass(CompassReading),
        2 => correct_log(LogReading),
        3 => correct_gyro(GyroReading),
    });
    assert_close("survey_launch f32", &f32_trace, &ekf, MATCH_F32);
}

fn every_function_script() -> Vec<Step> {
    vec![
        predict(0.1, &[0.5]),
        correct(0, &[22.5, 10.0], &[]),
        correct(1, &[1.2], &[]),
        predict(0.1, &[-0.5]),
        correct(0, &[22.4, 9.0], &[]),
        predict(0.2, &[0.0]),
        correct(1, &[1.1], &[]),
    ]
}

#[test]
fn every_function_matches_the_interpreter() {
    let model = load_test_spec("every_function");
    let script = every_function_script();
    let ekf = run_generated!(reckon_tests::every_function_ekf_f64, f64, &script, {
        0 => correct_probe(ProbeReading),
        1 => correct_level(LevelReading),
    });
    assert_close(
        "every_function ekf",
        &ekf,
        &run_interpreted(&model, Method::Ekf, &script),
        MATCH_F64,
    );
    let ukf = run_generated!(reckon_tests::every_function_ukf_f64, f64, &script, {
        0 => correct_probe(ProbeReading),
        1 => correct_level(LevelReading),
    });
    assert_close(
        "every_function ukf",
        &ukf,
        &run_interpreted(&model, Method::Ukf, &script),
        MATCH_F64,
    );
    let f32_trace = run_generated!(reckon_tests::every_function_ekf_f32, f32, &script, {
        0 => correct_probe(ProbeReading),
        1 => correct_level(LevelReading),
    });
    assert_close("every_function f32", &f32_trace, &ekf, MATCH_F32);
    assert!(ekf.iter().all(|s| s.accepted));
}

/// Exact unit factors (NIST SP 811, appendix B): 1 ft = 0.3048 m, 1 mbar = 100 Pa,
/// 1 kn = 1852/3600 m/s; 1 deg = pi/180 rad (SI Brochure, table 8).
const FOOT: f64 = 0.3048;
const MILLIBAR: f64 = 100.0;
const KNOT: f64 = 1852.0 / 3600.0;
const DEGREE: f64 = std::f64::consts::PI / 180.0;

/// A reading in ft, mbar, deg or kn corrects exactly like the same reading in SI.
/// The two specs are the same model in SI; only the declared reading units differ, so
/// the estimates agree to round-off in the conversion (one rounding per reading).
#[test]
fn declared_units_correct_like_si() {
    let declared = vec![
        predict(0.1, &[]),
        correct(0, &[33.0], &[]),
        correct(1, &[1011.95], &[]),
        correct(2, &[12.0], &[]),
        correct(3, &[1.2], &[]),
        predict(0.1, &[]),
        correct(2, &[-179.5], &[]),
    ];
    let factors = [FOOT, MILLIBAR, DEGREE, KNOT];
    let si: Vec<Step> = declared
        .iter()
        .map(|step| match step {
            Step::Correct {
                sensor,
                reading,
                args,
            } => Step::Correct {
                sensor: *sensor,
                reading: reading.iter().map(|v| v * factors[*sensor]).collect(),
                args: args.clone(),
            },
            other => other.clone(),
        })
        .collect();
    /// Conversions round once per reading; the corrections amplify that little.
    const CONVERSION: f64 = 1e-12;
    let in_declared = run_generated!(reckon_tests::units_declared_ekf_f64, f64, &declared, {
        0 => correct_altimeter(AltimeterReading),
        1 => correct_barometer(BarometerReading),
        2 => correct_compass(CompassReading),
        3 => correct_log(LogReading),
    });
    let in_si = run_generated!(reckon_tests::units_si_ekf_f64, f64, &si, {
        0 => correct_altimeter(AltimeterReading),
        1 => correct_barometer(BarometerReading),
        2 => correct_compass(CompassReading),
        3 => correct_log(LogReading),
    });
    assert_close("declared vs SI (ekf)", &in_declared, &in_si, CONVERSION);
    let in_declared = run_generated!(reckon_tests::units_declared_ukf_f64, f64, &declared, {
        0 => correct_altimeter(AltimeterReading),
        1 => correct_barometer(BarometerReading),
        2 => correct_compass(CompassReading),
        3 => correct_log(LogReading),
    });
    let in_si = run_generated!(reckon_tests::units_si_ukf_f64, f64, &si, {
        0 => correct_altimeter(AltimeterReading),
        1 => correct_barometer(BarometerReading),
        2 => correct_compass(CompassReading),
        3 => correct_log(LogReading),
    });
    assert_close("declared vs SI (ukf)", &in_declared, &in_si, CONVERSION);
    // The readings moved the estimate: a test of nothing would pass too.
    assert!((in_si[1].state[0] - 10.0).abs() > 1e-3);
    // The two specs are the same model in SI: the same noise, in SI.
    let (a, b) = (load_test_spec("units_declared"), load_test_spec("units_si"));
    let noise = |m: &Model| {
        m.sensors
            .iter()
            .map(|s| s.noise.clone())
            .collect::<Vec<_>>()
    };
    assert_eq!(noise(&a), noise(&b));
}

/// A state declared in degrees is held in radians, and its accessor gives degrees back.
#[test]
fn state_accessors_convert_to_declared_units() {
    use reckon_tests::units_declared_ekf_f64 as module;
    let estimator = module::Estimator::new().expect("valid initial");
    let std_dev = estimator.std_dev();
    // The spec gives a heading sigma of 20 deg.
    assert!((std_dev.heading - 20.0 * DEGREE).abs() < 1e-15);
    assert!((std_dev.heading_in_declared_unit() - 20.0).abs() < 1e-12);
}

/// Random scripts may drive the filters far from a realistic belief, where the
/// gain amplifies round-off; a looser bound than [`MATCH_F64`] keeps the property about
/// the functions, not about conditioning.
const MATCH_RANDOM: f64 = 1e-9;

fn survey_launch_step() -> impl Strategy<Value = Step> {
    prop_oneof![
        (0.01..1.0f64, -1.0..1.0f64).prop_map(|(dt, accel)| predict(dt, &[accel])),
        (
            1.0..80.0f64,
            -180.0..180.0f64,
            -50.0..50.0f64,
            -50.0..50.0f64
        )
            .prop_map(|(range, bearing, e, n)| correct(0, &[range, bearing], &[e, n])),
        (-180.0..180.0f64).prop_map(|heading| correct(1, &[heading], &[])),
        (0.0..5.0f64).prop_map(|knots| correct(2, &[knots], &[])),
        (-10.0..10.0f64).prop_map(|rate| correct(3, &[rate], &[])),
    ]
}

fn pallet_robot_step() -> impl Strategy<Value = Step> {
    prop_oneof![
        (0.01..0.5f64).prop_map(|dt| predict(dt, &[])),
        (-30.0..30.0f64, -30.0..30.0f64).prop_map(|(l, r)| correct(0, &[l, r], &[])),
        (-20.0..20.0f64).prop_map(|rate| correct(1, &[rate], &[])),
        (
            -2000.0..2000.0f64,
            -2000.0..2000.0f64,
            -3.0..3.0f64,
            -3.0..3.0f64
        )
            .prop_map(|(f, l, e, n)| correct(2, &[f, l], &[e, n])),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    /// Generated extended and unscented filters follow the interpreter on random
    /// scripts, wrapped bearings and gated readings included.
    #[test]
    fn survey_launch_follows_the_interpreter_on_random_scripts(
        script in prop::collection::vec(survey_launch_step(), 1..14)
    ) {
        let model = load("survey_launch");
        let ekf = run_generated!(reckon_tests::survey_launch_ekf_f64, f64, &script, {
            0 => correct_transponder(TransponderReading, beacon_east, beacon_north),
            1 => correct_compass(CompassReading),
            2 => correct_log(LogReading),
            3 => correct_gyro(GyroReading),
        });
        assert_close("survey_launch ekf", &ekf, &run_interpreted(&model, Method::Ekf, &script), MATCH_RANDOM);
        let ukf = run_generated!(reckon_tests::survey_launch_ukf_f64, f64, &script, {
            0 => correct_transponder(TransponderReading, beacon_east, beacon_north),
            1 => correct_compass(CompassReading),
            2 => correct_log(LogReading),
            3 => correct_gyro(GyroReading),
        });
        assert_close("survey_launch ukf", &ukf, &run_interpreted(&model, Method::Ukf, &script), MATCH_RANDOM);
    }

    /// The same for the differential-drive robot, whose kernels skip the most zeros.
    #[test]
    fn pallet_robot_follows_the_interpreter_on_random_scripts(
        script in prop::collection::vec(pallet_robot_step(), 1..14)
    ) {
        let model = load("pallet_robot");
        let ekf = run_generated!(reckon_tests::pallet_robot_ekf_f64, f64, &script, {
            0 => correct_wheels(WheelsReading),
            1 => correct_gyro(GyroReading),
            2 => correct_floor_tag(FloorTagReading, tag_east, tag_north),
        });
        assert_close("pallet_robot ekf", &ekf, &run_interpreted(&model, Method::Ekf, &script), MATCH_RANDOM);
    }
}
