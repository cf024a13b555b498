//! Fuzz target: the checker on arbitrary bytes (not necessarily UTF-8).
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|bytes: &[u8]| {
    let checked = reckon::check::check_bytes(bytes);
    if let Ok(text) = std::str::from_utf8(bytes) {
        reckon_fuzz::assert_spans_inside(text, &checked.diagnostics);
    }
});
