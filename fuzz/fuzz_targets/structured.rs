//! Fuzz target: grammar-generated specs through the whole pipeline, so the fuzzer
//! reaches the checker's unit and shape rules and the back end.
#![no_main]

use libfuzzer_sys::fuzz_target;
use reckon_fuzz::{run_pipeline, GeneratedSpec};

fuzz_target!(|spec: GeneratedSpec| run_pipeline(&spec.text));
