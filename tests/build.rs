//! Generates the estimators the end-to-end tests run: every demo spec in `specs/`
//! (and the test specs in `tests/specs/`) through the public build-script API, with
//! each method and scalar type the spec supports (grid and particle included), into `OUT_DIR`.

use std::path::Path;

use reckon::build::{Builder, Method, Scalar};

/// One generated variant: file-name suffix, method, scalar, particle count (`None`:
/// the default).
type Variant = (&'static str, Method, Scalar, Option<u32>);

const EKF_F64: Variant = ("_ekf_f64", Method::Ekf, Scalar::F64, None);
const EKF_F32: Variant = ("_ekf_f32", Method::Ekf, Scalar::F32, None);
const UKF_F64: Variant = ("_ukf_f64", Method::Ukf, Scalar::F64, None);
const KF_F64: Variant = ("_kf_f64", Method::Kf, Scalar::F64, None);
const GRID_F64: Variant = ("_grid_f64", Method::Grid, Scalar::F64, None);
const GRID_F32: Variant = ("_grid_f32", Method::Grid, Scalar::F32, None);
const PARTICLE_F64: Variant = ("_particle_f64", Method::Particle, Scalar::F64, None);

/// The marker track starts with twenty look-alike peaks of belief; with the default
/// 1000 particles (50 a peak) resampling's random drift can empty the true peak before
/// the east wall removes the others, so its particle variants carry more.
const MARKER_TRACK_PARTICLES: Option<u32> = Some(4000);
const MANY_PARTICLES_F64: Variant = (
    "_particle_f64",
    Method::Particle,
    Scalar::F64,
    MARKER_TRACK_PARTICLES,
);
const MANY_PARTICLES_F32: Variant = (
    "_particle_f32",
    Method::Particle,
    Scalar::F32,
    MARKER_TRACK_PARTICLES,
);

/// Every spec with the variants built from it. `tests/lib.rs` includes each output.
const SPECS: &[(&str, &[Variant])] = &[
    (
        "../specs/canal_ferry.reckon",
        &[EKF_F64, EKF_F32, UKF_F64, KF_F64, PARTICLE_F64],
    ),
    (
        "../specs/goods_lift.reckon",
        &[EKF_F64, EKF_F32, UKF_F64, KF_F64],
    ),
    (
        "../specs/marker_track.reckon",
        &[
            EKF_F64,
            GRID_F64,
            GRID_F32,
            MANY_PARTICLES_F64,
            MANY_PARTICLES_F32,
        ],
    ),
    ("../specs/pallet_robot.reckon", &[EKF_F64, EKF_F32, UKF_F64]),
    (
        "../specs/rail_cart.reckon",
        &[EKF_F64, EKF_F32, UKF_F64, KF_F64],
    ),
    (
        "../specs/survey_launch.reckon",
        &[EKF_F64, EKF_F32, UKF_F64],
    ),
    ("specs/every_function.reckon", &[EKF_F64, EKF_F32, UKF_F64]),
    ("specs/units_declared.reckon", &[EKF_F64, UKF_F64]),
    ("specs/units_si.reckon", &[EKF_F64, UKF_F64]),
    (
        "specs/dock_grid.reckon",
        &[GRID_F64, GRID_F32, PARTICLE_F64],
    ),
];

fn main() {
    // A new demo spec must be listed above, so none goes untested.
    println!("cargo:rerun-if-changed=../specs");
    if let Ok(entries) = std::fs::read_dir("../specs") {
        for entry in entries.flatten() {
            let path = format!("../specs/{}", entry.file_name().to_string_lossy());
            let listed = SPECS.iter().any(|(spec, _)| *spec == path);
            assert!(
                !path.ends_with(".reckon") || listed,
                "demo spec {path} is not listed in tests/build.rs"
            );
        }
    }
    for (spec, variants) in SPECS {
        assert!(Path::new(spec).exists(), "{spec} is missing");
        for &(suffix, method, scalar, particles) in *variants {
            let mut builder = Builder::new().method(method).scalar(scalar).suffix(suffix);
            if let Some(count) = particles {
                builder = builder.particles(count);
            }
            builder.compile(&[spec]).unwrap();
        }
    }
}
