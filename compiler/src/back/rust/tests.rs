//! Tests of the Rust back end.

use super::*;
use crate::options::EstimatorOptions;

#[test]
fn print_rail_cart() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/../specs/rail_cart.reckon");
    let text = std::fs::read_to_string(path).unwrap();
    match generate("specs/rail_cart.reckon", &text, &EstimatorOptions::default()) {
        Ok(g) => println!("{}", g.code),
        Err(e) => panic!("{e:?}"),
    }
}
