//! Fuzz target: the parser on arbitrary text; spans must stay inside the input.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|text: &str| {
    let (_, diagnostics) = reckon::syntax::parse(text);
    reckon_fuzz::assert_spans_inside(text, &diagnostics);
});
