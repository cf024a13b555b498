//! Specs and helpers shared by the tests of the grid and particle plan, its interpreter
//! adapters and the simulator.

use crate::check::check_source;
use crate::model::Model;
use crate::options::{EstimatorOptions, Method};

/// The marker-track demo spec.
pub(crate) const MARKER_TRACK: &str = include_str!("../../../../specs/marker_track.reckon");

/// A 1-D cart whose slip is triangular, whose odometry is noisy and whose wall sensor
/// has uniform noise: every noise shape, and two noises on one state.
pub(crate) const MIXED_NOISE: &str = "model cart
state { x : m in 0 m .. 10 m by 10 cm }
input { v : m/s ~ normal(0.1 m/s) }
motion discrete { x = x + v * dt }
process { x ~ triangle(2 cm) }
sensor wall { d : m = 10 m - x
  noise ~ uniform(5 cm) }
";

/// The checked model of a spec that must check clean.
pub(crate) fn checked_model(text: &str) -> Model {
    let checked = check_source(text);
    match checked.model {
        Some(model) => model,
        None => panic!("spec does not check: {:?}", checked.diagnostics),
    }
}

/// Default options with `method`.
pub(crate) fn options(method: Method) -> EstimatorOptions {
    EstimatorOptions {
        method,
        ..EstimatorOptions::default()
    }
}
