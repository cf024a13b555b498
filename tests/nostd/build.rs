//! Generates the estimators the no_std check compiles: a nonlinear extended filter in
//! `f32` (the usual microcontroller choice), an unscented one, a linear model whose
//! discretisation calls the run-time matrix exponential, a 1-D and a 2-D grid filter
//! and a particle filter.

use reckon::build::{Builder, Method, Scalar};

fn main() {
    let variants = [
        ("../../specs/pallet_robot.reckon", Method::Ekf, Scalar::F32, "_ekf_f32"),
        ("../../specs/survey_launch.reckon", Method::Ukf, Scalar::F32, "_ukf_f32"),
        ("../../specs/canal_ferry.reckon", Method::Kf, Scalar::F64, "_kf_f64"),
        ("../../specs/marker_track.reckon", Method::Grid, Scalar::F32, "_grid_f32"),
        ("../../tests/specs/dock_grid.reckon", Method::Grid, Scalar::F32, "_grid_f32"),
        ("../../specs/marker_track.reckon", Method::Particle, Scalar::F32, "_particle_f32"),
    ];
    for (spec, method, scalar, suffix) in variants {
        Builder::new()
            .method(method)
            .scalar(scalar)
            .suffix(suffix)
            .compile(&[spec])
            .unwrap();
    }
}
