//! Tests of the Rust back end: golden modules for every demo spec (refreshed with
//! `RECKON_BLESS=1`), determinism, the method refusals with their spans and hints,
//! and the generation report.

use std::path::{Path, PathBuf};

use super::*;
use crate::diag::render;
use crate::options::{EstimatorOptions, UnscentedParams, UpdateForm};

fn spec(name: &str) -> String {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join(format!("../specs/{name}.reckon"));
    std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn options(method: Method, scalar: Scalar) -> EstimatorOptions {
    EstimatorOptions {
        method,
        scalar,
        ..EstimatorOptions::default()
    }
}

fn spec_path(name: &str) -> String {
    format!("specs/{name}.reckon")
}

fn generated(name: &str, options: &EstimatorOptions) -> Generated {
    generate(&spec_path(name), &spec(name), options)
        .unwrap_or_else(|d| panic!("{name}: {}", render::human(name, &spec(name), &d)))
}

fn refused(name: &str, text: &str, options: &EstimatorOptions) -> Vec<Diagnostic> {
    match generate(&spec_path(name), text, options) {
        Ok(_) => panic!("{name}: {} was not refused", options.method.name()),
        Err(diagnostics) => diagnostics,
    }
}

fn golden_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/golden")
}

/// Compares `actual` with the golden file `name`, or rewrites it under `RECKON_BLESS=1`.
fn check_golden(name: &str, actual: &str) -> Option<String> {
    let path = golden_dir().join(name);
    if std::env::var_os("RECKON_BLESS").is_some_and(|v| v == "1") {
        std::fs::create_dir_all(golden_dir()).ok()?;
        std::fs::write(&path, actual).ok()?;
        return None;
    }
    match std::fs::read_to_string(&path) {
        Ok(expected) if expected == actual => None,
        Ok(_) => Some(format!(
            "{name}: differs from the golden file (RECKON_BLESS=1 rewrites it)"
        )),
        Err(_) => Some(format!("{name}: no golden file (run with RECKON_BLESS=1)")),
    }
}

/// Demo specs with the variants kept as golden files.
const GOLDEN: &[(&str, Method, Scalar)] = &[
    ("rail_cart", Method::Kf, Scalar::F64),
    ("rail_cart", Method::Ekf, Scalar::F64),
    ("rail_cart", Method::Ekf, Scalar::F32),
    ("canal_ferry", Method::Kf, Scalar::F64),
    ("canal_ferry", Method::Ekf, Scalar::F64),
    ("goods_lift", Method::Kf, Scalar::F64),
    ("goods_lift", Method::Ekf, Scalar::F64),
    ("pallet_robot", Method::Ekf, Scalar::F64),
    ("pallet_robot", Method::Ukf, Scalar::F64),
    ("survey_launch", Method::Ekf, Scalar::F64),
    ("survey_launch", Method::Ekf, Scalar::F32),
    ("survey_launch", Method::Ukf, Scalar::F64),
    ("marker_track", Method::Ekf, Scalar::F64),
    ("marker_track", Method::Grid, Scalar::F64),
    ("marker_track", Method::Grid, Scalar::F32),
    ("marker_track", Method::Particle, Scalar::F64),
    ("canal_ferry", Method::Particle, Scalar::F64),
];

#[test]
fn generated_modules_match_golden_files() {
    let failures: Vec<String> = GOLDEN
        .iter()
        .filter_map(|&(name, method, scalar)| {
            let code = generated(name, &options(method, scalar)).code;
            check_golden(
                &format!("{name}.{}.{}.rs", method.name(), scalar.name()),
                &code,
            )
        })
        .collect();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn generation_is_deterministic() {
    for &(name, method, scalar) in GOLDEN {
        let options = options(method, scalar);
        let first = generated(name, &options);
        let second = generated(name, &options);
        assert_eq!(first.code.as_bytes(), second.code.as_bytes(), "{name}");
        assert_eq!(first.report, second.report);
    }
}

#[test]
fn the_report_counts_structural_zeros() {
    let report = generated("rail_cart", &options(Method::Ekf, Scalar::F64)).report;
    // F = [[1, dt], [0, 1]]; H_laser = [1, 0]; H_encoder = [0, 1].
    assert_eq!(report.jacobian_entries_total, 8);
    assert_eq!(report.jacobian_entries_skipped_zero, 3);
    assert_eq!(report.states, 2);
    assert_eq!(report.sensors, 2);
    let code = generated("rail_cart", &options(Method::Ekf, Scalar::F64)).code;
    assert_eq!(report.lines, code.lines().count());
    assert!(code.contains(&report.summary()));
    let ukf = generated("rail_cart", &options(Method::Ukf, Scalar::F64)).report;
    assert_eq!(ukf.jacobian_entries_total, 0);
}

#[test]
fn kf_refuses_a_nonlinear_model_at_the_nonlinear_term() {
    let text = spec("pallet_robot");
    let diagnostics = refused("pallet_robot", &text, &options(Method::Kf, Scalar::F64));
    let first = &diagnostics[0];
    assert_eq!(first.code, codes::KF_NEEDS_LINEAR_MODEL);
    let span = first.primary_span();
    assert_eq!(&text[span.start..span.end], "cos(heading)");
    let golden = render::human("specs/pallet_robot.reckon", &text, &diagnostics);
    let failure = check_golden("pallet_robot.kf.stderr", &golden);
    assert!(failure.is_none(), "{failure:?}");
}

/// The marker-track demo with triangular wheel slip: a model for the grid and
/// particle methods only.
fn triangular_slip() -> String {
    let text = spec("marker_track");
    let slip = "position ~ normal(1 cm)";
    assert!(text.contains(slip));
    text.replace(slip, "position ~ triangle(2 cm)")
}

#[test]
fn kalman_methods_refuse_non_gaussian_noise_with_the_conversion_hint() {
    let text = triangular_slip();
    for method in [Method::Kf, Method::Ekf, Method::Ukf] {
        let diagnostics = refused("marker_track", &text, &options(method, Scalar::F64));
        let noise = diagnostics
            .iter()
            .find(|d| d.code == codes::KALMAN_NEEDS_GAUSSIAN_NOISE)
            .expect("a non-Gaussian refusal");
        let span = noise.primary_span();
        assert!(text[span.start..span.end].contains("triangle(2 cm)"));
        let hint = noise.hint.as_deref().unwrap_or_default();
        assert!(hint.contains("a triangle of half-width a has sigma a/sqrt(6)"));
        assert!(hint.contains("a uniform of half-width a has sigma a/sqrt(3)"));
    }
    let diagnostics = refused("marker_track", &text, &options(Method::Ekf, Scalar::F64));
    let golden = render::human("specs/marker_track.reckon", &text, &diagnostics);
    let failure = check_golden("marker_track.ekf.stderr", &golden);
    assert!(failure.is_none(), "{failure:?}");
}

#[test]
fn grid_and_particle_refusals_point_at_the_cause() {
    // Triangular slip plus normal odometry noise on one axis: no single grid kernel.
    let text = triangular_slip();
    let diagnostics = refused("marker_track", &text, &options(Method::Grid, Scalar::F64));
    assert_eq!(diagnostics[0].code, codes::GRID_MOTION_NOISE);
    let span = diagnostics[0].primary_span();
    assert_eq!(&text[span.start..span.end], "position ~ triangle(2 cm)");
    let golden = render::human("specs/marker_track.reckon", &text, &diagnostics);
    let failure = check_golden("marker_track.grid.stderr", &golden);
    assert!(failure.is_none(), "{failure:?}");
    // The particle filter samples both where they enter.
    let particle = generate("marker_track", &text, &options(Method::Particle, Scalar::F64))
        .unwrap_or_else(|d| panic!("{d:?}"));
    assert!(particle.code.contains("Noise::Triangle"));
    // A state that wraps fits neither.
    let diagnostics = refused("pallet_robot", &spec("pallet_robot"), &options(Method::Particle, Scalar::F64));
    assert_eq!(diagnostics[0].code, codes::MODEL_DOES_NOT_FIT_METHOD);
    let too_many = EstimatorOptions {
        particles: Some(0),
        ..options(Method::Particle, Scalar::F64)
    };
    assert_eq!(refused("rail_cart", &spec("rail_cart"), &too_many)[0].code, codes::BELIEF_SIZE_INVALID);
}

#[test]
fn grid_and_particle_reports_give_the_belief_size() {
    let grid = generated("marker_track", &options(Method::Grid, Scalar::F64));
    assert_eq!(grid.report.belief.as_deref(), Some("800 cells"));
    assert!(grid.code.contains("pub const POSITION_CELLS: usize = 800;"));
    assert_eq!(grid.report.jacobian_entries_total, 0);
    let particles = EstimatorOptions {
        particles: Some(250),
        ..options(Method::Particle, Scalar::F64)
    };
    let particle = generated("marker_track", &particles);
    assert_eq!(particle.report.belief.as_deref(), Some("250 particles"));
    assert!(particle.code.contains("pub const PARTICLES: usize = 250;"));
    assert!(particle.code.contains(&particle.report.summary()));
}

#[test]
fn invalid_sigma_point_scaling_is_refused() {
    let mut ukf = options(Method::Ukf, Scalar::F64);
    ukf.unscented = UnscentedParams {
        alpha: 0.0,
        ..UnscentedParams::default()
    };
    let diagnostics = refused("rail_cart", &spec("rail_cart"), &ukf);
    assert_eq!(diagnostics[0].code, codes::UNSCENTED_PARAMETERS_INVALID);
}

#[test]
fn sequential_updates_fall_back_to_joseph_for_correlated_noise() {
    let sequential = EstimatorOptions {
        update: UpdateForm::Sequential,
        ..EstimatorOptions::default()
    };
    let result = generated("survey_launch", &sequential);
    let warning = result
        .warnings
        .iter()
        .find(|d| d.code == codes::SEQUENTIAL_NEEDS_DIAGONAL_NOISE)
        .expect("a warning for the transponder");
    assert!(warning.message.contains("transponder"));
    // Three sensors with independent noise update sequentially; the transponder does not.
    assert_eq!(
        result.code.matches("UpdateForm::SequentialScalar").count(),
        3
    );
}

#[test]
fn a_non_gaussian_initial_belief_is_approximated_with_a_warning() {
    let text = spec("marker_track");
    let result = generate("marker_track", &text, &EstimatorOptions::default())
        .unwrap_or_else(|d| panic!("{d:?}"));
    assert!(result
        .warnings
        .iter()
        .any(|d| d.code == codes::INITIAL_NOT_GAUSSIAN));
    // uniform(0 m .. 40 m): mean 20 m, sigma 40 / sqrt(12) m.
    let sigma = 40.0 / 12.0_f64.sqrt();
    assert!(result.code.contains("position: 20.0_f64"));
    assert!(result.code.contains(&format!("position: {sigma:?}_f64")));
}

#[test]
fn every_back_end_code_is_produced_by_these_tests() {
    // Kept in step with the tests above: each back-end code has one.
    let covered = [
        codes::KF_NEEDS_LINEAR_MODEL,
        codes::KALMAN_NEEDS_GAUSSIAN_NOISE,
        codes::UNSCENTED_PARAMETERS_INVALID,
        codes::MODEL_DOES_NOT_FIT_METHOD,
        codes::GRID_MOTION_NOISE,
        codes::BELIEF_SIZE_INVALID,
        codes::SEQUENTIAL_NEEDS_DIAGONAL_NOISE,
        codes::INITIAL_NOT_GAUSSIAN,
        codes::GATE_NOT_APPLIED,
    ];
    let owned: Vec<&str> = codes::ALL
        .iter()
        .map(|c| c.id)
        .filter(|id| id.starts_with("E06") || id.starts_with("W085"))
        .collect();
    let covered: Vec<&str> = covered.iter().map(|c| c.id).collect();
    assert_eq!(owned, covered);
}

#[test]
fn models_built_in_rust_generate_too() {
    // The IR's hand-built models (the continuous ones; its discrete one has triangle noise).
    for model in [
        crate::ir::test_models::constant_velocity(1.0),
        crate::ir::test_models::rover_with_beacon(),
        crate::ir::test_models::damped_oscillator(4.0, 0.5),
    ] {
        let result = generate_from_model("built.reckon", "", &model, &EstimatorOptions::default());
        let generated = result.unwrap_or_else(|d| panic!("{}: {d:?}", model.name));
        assert!(generated.code.contains("pub struct Estimator"));
    }
}

#[test]
fn a_gate_without_a_quantile_is_refused_rather_than_rejecting_everything() {
    let text = spec("rail_cart");
    let mut model = check::check_source(&text).model.expect("demo spec checks");
    let gate = model.sensors[0].gate.as_mut().expect("the laser is gated");
    gate.probability = 1.0;
    let diagnostics = generate_from_model("rail_cart", &text, &model, &EstimatorOptions::default())
        .expect_err("refused");
    assert_eq!(diagnostics[0].code, codes::INTERNAL);
}

#[test]
fn the_generated_code_page_lists_every_back_end_code() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../docs/generated-code.md");
    let page = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let missing: Vec<String> = codes::ALL
        .iter()
        .filter(|c| c.id.starts_with("E06") || c.id.starts_with("W085"))
        .map(|c| format!("| {} | {} |", c.id, c.title))
        .filter(|row| !page.contains(row.as_str()))
        .collect();
    assert!(
        missing.is_empty(),
        "rows missing from docs/generated-code.md:\n{}",
        missing.join("\n")
    );
}
