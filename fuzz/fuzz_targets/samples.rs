//! Fuzz target: the in-process samples CSV parser.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = resinlot::cook::samples::parse("fuzz.csv", text);
    }
});
