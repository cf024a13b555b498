//! The estimator benchmarks compare equal filters: the hand-written and the
//! finite-difference extended Kalman filters in `tests/benches/filters` must follow the
//! generated ones step by step over each benchmark scenario, accepting and rejecting the
//! same readings. Also the allocation claims the benchmarks print: none per step for
//! generated and hand-written filters.

use crate::filters::counting::allocations_during;
use crate::filters::scenario::{run_cycle, warmed, Step};
use crate::filters::{pallet_robot, rail_cart, survey_launch, Filter};

/// Hand-written against generated: the same arithmetic up to association order, so a
/// few hundred steps agree to rounding.
const HAND_TOLERANCE: f64 = 1e-9;
/// Central differences with a relative step of 6e-6 carry a truncation error of about
/// the step squared times the third derivative.
const FINITE_DIFFERENCE_TOLERANCE: f64 = 1e-6;
const STEPS: usize = 300;

/// Compares two snapshots (mean then covariance of `states` components). Each mean
/// component is scaled by its magnitude or standard deviation, each covariance entry
/// by the product of the two standard deviations, so correlations that round to
/// nearly zero are judged against the variances they come from.
fn assert_snapshots_agree(
    label: &str,
    states: usize,
    expected: &[f64],
    actual: &[f64],
    tolerance: f64,
) {
    assert_eq!(expected.len(), actual.len(), "{label}: snapshot length");
    let sigma = |i: usize| expected[states + i * states + i].abs().sqrt();
    for (index, (e, a)) in expected.iter().zip(actual).enumerate() {
        let scale = if index < states {
            e.abs().max(sigma(index))
        } else {
            let (row, col) = ((index - states) % states, (index - states) / states);
            sigma(row) * sigma(col)
        };
        assert!(
            (e - a).abs() <= tolerance * scale,
            "{label}: entry {index}: expected {e}, got {a} (scale {scale})"
        );
    }
}

/// Runs both filters over `steps`, comparing the outcome and the snapshot after every
/// prediction and correction. Returns how many operations were accepted.
fn assert_filters_agree<E: Filter, A: Filter>(
    label: &str,
    states: usize,
    mut expected: E,
    mut actual: A,
    steps: &[Step],
    tolerance: f64,
) -> usize {
    let mut accepted = 0;
    for (k, step) in steps.iter().enumerate() {
        let outcome = expected.predict(step.dt, &step.input);
        assert_eq!(
            outcome,
            actual.predict(step.dt, &step.input),
            "{label}: predict {k}"
        );
        accepted += usize::from(outcome);
        let context = format!("{label}: after predict {k}");
        assert_snapshots_agree(
            &context,
            states,
            &expected.snapshot(),
            &actual.snapshot(),
            tolerance,
        );
        for reading in &step.readings {
            let outcome = expected.correct(reading.sensor, &reading.values, &reading.args);
            let other = actual.correct(reading.sensor, &reading.values, &reading.args);
            assert_eq!(
                outcome, other,
                "{label}: step {k} sensor {}",
                reading.sensor
            );
            accepted += usize::from(outcome);
            let context = format!("{label}: step {k} after sensor {}", reading.sensor);
            assert_snapshots_agree(
                &context,
                states,
                &expected.snapshot(),
                &actual.snapshot(),
                tolerance,
            );
        }
    }
    accepted
}

/// Every step of a scenario reads every sensor once, in order, so every correction is
/// compared.
fn assert_every_sensor_reads(steps: &[Step], sensors: usize) {
    for step in steps {
        let order: Vec<usize> = step.readings.iter().map(|reading| reading.sensor).collect();
        assert_eq!(order, (0..sensors).collect::<Vec<_>>());
    }
}

/// Checks that nearly every operation was accepted, so the comparison covers updates:
/// a 99 % gate rejects about one honest reading in a hundred.
fn assert_mostly_accepted(label: &str, accepted: usize, steps: &[Step]) {
    let operations: usize = steps.iter().map(|step| 1 + step.readings.len()).sum();
    assert!(
        accepted * 100 >= operations * 99,
        "{label}: {accepted} of {operations} accepted"
    );
}

#[test]
fn rail_cart_hand_written_and_finite_difference_match_generated() {
    let steps = rail_cart::scenario(STEPS);
    assert_every_sensor_reads(&steps, rail_cart::SENSORS.len());
    let generated = rail_cart::GeneratedF64::from_spec();
    let accepted = assert_filters_agree(
        "rail_cart hand",
        2,
        generated.clone(),
        rail_cart::Hand::from_spec(),
        &steps,
        HAND_TOLERANCE,
    );
    assert_mostly_accepted("rail_cart", accepted, &steps);
    assert_filters_agree(
        "rail_cart fd",
        2,
        generated,
        rail_cart::finite_difference(),
        &steps,
        FINITE_DIFFERENCE_TOLERANCE,
    );
}

#[test]
fn pallet_robot_hand_written_and_finite_difference_match_generated() {
    let steps = pallet_robot::scenario(STEPS);
    assert_every_sensor_reads(&steps, pallet_robot::SENSORS.len());
    let generated = pallet_robot::GeneratedF64::from_spec();
    let accepted = assert_filters_agree(
        "pallet_robot hand",
        6,
        generated.clone(),
        pallet_robot::Hand::from_spec(),
        &steps,
        HAND_TOLERANCE,
    );
    assert_mostly_accepted("pallet_robot", accepted, &steps);
    assert_filters_agree(
        "pallet_robot fd",
        6,
        generated,
        pallet_robot::finite_difference(),
        &steps,
        FINITE_DIFFERENCE_TOLERANCE,
    );
}

#[test]
fn survey_launch_hand_written_and_finite_difference_match_generated() {
    let steps = survey_launch::scenario(STEPS);
    assert_every_sensor_reads(&steps, survey_launch::SENSORS.len());
    let generated = survey_launch::GeneratedF64::from_spec();
    let accepted = assert_filters_agree(
        "survey_launch hand",
        5,
        generated.clone(),
        survey_launch::Hand::from_spec(),
        &steps,
        HAND_TOLERANCE,
    );
    assert_mostly_accepted("survey_launch", accepted, &steps);
    assert_filters_agree(
        "survey_launch fd",
        5,
        generated,
        survey_launch::finite_difference(),
        &steps,
        FINITE_DIFFERENCE_TOLERANCE,
    );
}

#[test]
fn gate_rejects_the_same_outlier_in_every_variant() {
    // A transponder range 100 m off after the filter has converged: far outside the
    // 99 % gate for any of the filters.
    let steps = survey_launch::scenario(60);
    let mut outlier = steps[59].readings[0].clone();
    outlier.values[0] += 100.0;
    let mut generated = warmed(survey_launch::GeneratedF64::from_spec(), &steps, 59);
    let mut hand = warmed(survey_launch::Hand::from_spec(), &steps, 59);
    let mut fd = warmed(survey_launch::finite_difference(), &steps, 59);
    assert!(!generated.correct(0, &outlier.values, &outlier.args));
    assert!(!hand.correct(0, &outlier.values, &outlier.args));
    assert!(!fd.correct(0, &outlier.values, &outlier.args));
}

/// Allocations of one cycle (prediction and every reading) from a warmed filter.
fn cycle_allocations<F: Filter>(filter: F, steps: &[Step]) -> u64 {
    let mut filter = warmed(filter, steps, steps.len() - 1);
    let last = &steps[steps.len() - 1];
    allocations_during(|| {
        run_cycle(&mut filter, last);
    })
}

#[test]
fn generated_and_hand_written_steps_do_not_allocate() {
    let rail = rail_cart::scenario(20);
    let pallet = pallet_robot::scenario(20);
    let survey = survey_launch::scenario(20);
    assert_eq!(
        cycle_allocations(rail_cart::GeneratedF64::from_spec(), &rail),
        0
    );
    assert_eq!(
        cycle_allocations(rail_cart::GeneratedF32::from_spec(), &rail),
        0
    );
    assert_eq!(cycle_allocations(rail_cart::Hand::from_spec(), &rail), 0);
    assert_eq!(
        cycle_allocations(pallet_robot::GeneratedF64::from_spec(), &pallet),
        0
    );
    assert_eq!(
        cycle_allocations(pallet_robot::GeneratedF32::from_spec(), &pallet),
        0
    );
    assert_eq!(
        cycle_allocations(pallet_robot::Hand::from_spec(), &pallet),
        0
    );
    assert_eq!(
        cycle_allocations(survey_launch::GeneratedF64::from_spec(), &survey),
        0
    );
    assert_eq!(
        cycle_allocations(survey_launch::GeneratedF32::from_spec(), &survey),
        0
    );
    assert_eq!(
        cycle_allocations(survey_launch::Hand::from_spec(), &survey),
        0
    );
    // The counter does count: the dynamically sized filter allocates every step.
    assert!(cycle_allocations(survey_launch::finite_difference(), &survey) > 0);
}
