//! Fuzz target: the lab-results CSV parser.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let _ = resinlot::lot::intake::parse("fuzz.csv", data, resinlot::lot::intake::Options::default());
});
