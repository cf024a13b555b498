//! The symbolic IR over every demo spec: Jacobians against central finite
//! differences at many random points, and deterministic lowering.

use std::path::{Path, PathBuf};

use reckon::check::check_source;
use reckon::ir::eval::{Bindings, Evaluator};
use reckon::ir::verify::finite_difference_check;
use reckon::ir::{dump, lower, Integrator, LowerOptions, Lowered};
use reckon::model::{Model, MotionKind};

fn demo_models() -> Vec<(PathBuf, Model)> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../specs");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", dir.display()))
        .filter_map(|entry| entry.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|e| e == "reckon"))
        .collect();
    files.sort();
    files
        .into_iter()
        .map(|path| {
            let text = std::fs::read_to_string(&path)
                .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
            let model = check_source(&text)
                .model
                .unwrap_or_else(|| panic!("{} does not check", path.display()));
            (path, model)
        })
        .collect()
}

fn lowered(path: &Path, model: &Model, integrator: Integrator) -> Lowered {
    lower(model, &LowerOptions { integrator })
        .unwrap_or_else(|d| panic!("{}: lowering failed: {d:?}", path.display()))
}

/// A small deterministic generator (SplitMix64), so failures reproduce.
struct Random(u64);

impl Random {
    fn next_unit(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    }

    fn between(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.next_unit()
    }
}

/// A random point: states inside their grid range when they have one, otherwise
/// in a band of moderate SI values; inputs, sensor arguments and `dt` likewise.
fn random_point(
    model: &Model,
    lowered: &Lowered,
    rng: &mut Random,
) -> (Bindings<f64>, Vec<Vec<f64>>) {
    let states = model
        .states
        .iter()
        .map(|s| match s.range {
            Some(r) => rng.between(r.lo, r.hi),
            None if s.wrap => rng.between(-3.1, 3.1),
            None => rng.between(-20.0, 20.0),
        })
        .collect();
    let inputs = model
        .inputs
        .iter()
        .map(|_| rng.between(-2.0, 2.0))
        .collect();
    let dt = rng.between(0.01, 0.5);
    let mut point = Bindings::new(states, inputs, dt);
    if let Some(system) = &lowered.discretisation.linear_system {
        point.runtime = system
            .runtime_matrices(dt)
            .unwrap_or_else(|e| panic!("{}: matrix exponential failed: {e:?}", model.name));
    }
    let args = model
        .sensors
        .iter()
        .map(|s| s.args.iter().map(|_| rng.between(-60.0, 60.0)).collect())
        .collect();
    (point, args)
}

/// True when the transition and every sensor's prediction are finite at `point`.
fn finite_at(lowered: &Lowered, point: &Bindings<f64>, args: &[Vec<f64>]) -> bool {
    let transition = Evaluator::new(&lowered.arena, &lowered.transition).eval(point);
    let sensors_finite = lowered.sensors.iter().zip(args).all(|(sensor, args)| {
        let mut at = point.clone();
        at.args = args.clone();
        Evaluator::new(&lowered.arena, &sensor.h)
            .eval(&at)
            .iter()
            .all(|v| v.is_finite())
    });
    transition.iter().all(|v| v.is_finite()) && sensors_finite
}

#[test]
fn jacobians_of_every_demo_spec_match_finite_differences() {
    let models = demo_models();
    assert!(!models.is_empty());
    for (path, model) in &models {
        let integrators: &[Integrator] = match model.motion.kind {
            MotionKind::Continuous => &[Integrator::Auto, Integrator::Euler, Integrator::Rk4],
            MotionKind::Discrete => &[Integrator::Auto],
        };
        for &integrator in integrators {
            let l = lowered(path, model, integrator);
            let mut rng = Random(0x5EED ^ model.states.len() as u64);
            let mut checked = 0;
            for _ in 0..400 {
                let (point, args) = random_point(model, &l, &mut rng);
                if !finite_at(&l, &point, &args) {
                    continue;
                }
                let mismatches = finite_difference_check(&l, &point, &args, 1e-6);
                assert!(
                    mismatches.is_empty(),
                    "{} ({integrator:?}): {mismatches:?} at {point:?} args {args:?}",
                    path.display()
                );
                checked += 1;
                if checked == 150 {
                    break;
                }
            }
            assert!(
                checked >= 100,
                "{}: only {checked} usable points",
                path.display()
            );
        }
    }
}

#[test]
fn lowering_every_demo_spec_is_deterministic() {
    for (path, model) in demo_models() {
        let first = lowered(&path, &model, Integrator::Auto);
        let second = lowered(&path, &model, Integrator::Auto);
        assert_eq!(dump(&first), dump(&second), "{}", path.display());
    }
}
