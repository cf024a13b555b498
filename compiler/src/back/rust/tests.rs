//! Tests of the Rust back end on models built in Rust (see `ir::test_models`).

use super::*;
use crate::ir::test_models;
use crate::options::EstimatorOptions;

#[test]
fn constant_velocity_generates() {
    let model = test_models::constant_velocity(1.0);
    let generated = generate_from_model("cv.reckon", "", &model, &EstimatorOptions::default());
    match generated {
        Ok(g) => println!("{}", g.code),
        Err(e) => panic!("{e:?}"),
    }
}
