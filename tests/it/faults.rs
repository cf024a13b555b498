//! Fault injection on the generated estimators: non-finite inputs, readings and
//! sensor arguments, non-positive, non-finite and huge steps, and 10-sigma outliers
//! against gated sensors. Each must be refused, and a refused step must leave the
//! state and covariance bit-identical.

use crate::drive::Filter;
use crate::endurance::{scenarios, Scenario};

/// Steps of the mission before the faults, so the filters are in their regime.
const WARM_UP: usize = 300;

/// Non-finite values injected in place of one component.
const NON_FINITE: [f64; 3] = [f64::NAN, f64::INFINITY, f64::NEG_INFINITY];

/// Runs `fault` and asserts that it was refused and changed nothing.
fn assert_refused(
    label: &str,
    filter: &mut dyn Filter,
    fault: impl FnOnce(&mut dyn Filter) -> Result<(), String>,
) -> String {
    let before = filter.bits();
    let outcome = fault(filter);
    assert_eq!(filter.bits(), before, "{label}: the estimate changed");
    match outcome {
        Ok(()) => panic!("{label}: accepted"),
        Err(reason) => reason,
    }
}

fn with(values: &[f64], index: usize, value: f64) -> Vec<f64> {
    let mut out = values.to_vec();
    out[index] = value;
    out
}

fn inject_faults(scenario: &Scenario, filter: &mut dyn Filter) {
    let name = scenario.name;
    scenario.drive(filter, 0..WARM_UP);
    let step = scenario.step(WARM_UP);
    // dt = 1e300: finite, but every model's covariance overflows over such a step.
    for dt in [
        0.0,
        -0.0,
        -scenario.dt,
        f64::NAN,
        f64::INFINITY,
        f64::NEG_INFINITY,
        1e300,
    ] {
        assert_refused(&format!("{name}: dt {dt}"), filter, |f| {
            f.predict(&step.input, dt)
        });
    }
    for i in 0..step.input.len() {
        for bad in NON_FINITE {
            let input = with(&step.input, i, bad);
            assert_refused(&format!("{name}: input[{i}] = {bad}"), filter, |f| {
                f.predict(&input, scenario.dt)
            });
        }
    }
    let (truth, _) = (scenario.truth)(WARM_UP as f64 * scenario.dt);
    let readings = (scenario.readings)(&truth);
    for (sensor, (reading, args)) in readings.iter().enumerate() {
        for bad in NON_FINITE {
            for i in 0..reading.len() {
                let reading = with(reading, i, bad);
                assert_refused(
                    &format!("{name}: sensor {sensor} reading[{i}] = {bad}"),
                    filter,
                    |f| f.correct(sensor, &reading, args).map(drop),
                );
            }
            for i in 0..args.len() {
                let args = with(args, i, bad);
                assert_refused(
                    &format!("{name}: sensor {sensor} argument[{i}] = {bad}"),
                    filter,
                    |f| f.correct(sensor, reading, &args).map(drop),
                );
            }
        }
    }
    for &(sensor, si_per_unit) in scenario.gated {
        let (reading, args) = &readings[sensor];
        // A clean reading first: it is accepted and tells the innovation spread.
        let spread = filter
            .correct(sensor, reading, args)
            .unwrap_or_else(|e| panic!("{name}: clean reading of sensor {sensor}: {e}"))[0]
            .sqrt();
        let outlier = with(reading, 0, reading[0] + 10.0 * spread / si_per_unit);
        let reason = assert_refused(&format!("{name}: 10-sigma outlier"), filter, |f| {
            f.correct(sensor, &outlier, args).map(drop)
        });
        assert!(
            reason.starts_with("Gated"),
            "{name}: outlier refused for {reason}"
        );
    }
    // Still healthy: the mission goes on.
    scenario.drive(filter, WARM_UP..WARM_UP + 10);
}

#[test]
fn faults_are_refused_and_leave_the_estimate_untouched() {
    for scenario in scenarios() {
        let builders = [scenario.single, scenario.double]
            .into_iter()
            .chain(scenario.others.iter().copied());
        for build in builders {
            let mut filter = build();
            inject_faults(&scenario, filter.as_mut());
            let health = filter.health();
            assert!(
                health.rejected_steps > 0 && health.non_finite_readings > 0,
                "{}: the refusals were not counted: {health:?}",
                scenario.name
            );
        }
    }
}
