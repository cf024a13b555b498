//! Generates the estimators the no_std check compiles: a nonlinear extended filter in
//! `f32` (the usual microcontroller choice), an unscented one, and a linear model
//! whose discretisation calls the run-time matrix exponential.

use reckon::build::{Builder, Method, Scalar};

fn main() {
    let variants = [
        ("../../specs/pallet_robot.reckon", Method::Ekf, Scalar::F32, "_ekf_f32"),
        ("../../specs/survey_launch.reckon", Method::Ukf, Scalar::F32, "_ukf_f32"),
        ("../../specs/canal_ferry.reckon", Method::Kf, Scalar::F64, "_kf_f64"),
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
