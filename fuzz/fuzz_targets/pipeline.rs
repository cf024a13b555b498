//! Fuzz target: check, then generate with every Kalman method and scalar type.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|text: &str| reckon_fuzz::run_pipeline(text));
