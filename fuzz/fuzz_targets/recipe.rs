//! Fuzz target: the recipe TOML parser.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = resinlot::chem::recipe::Recipe::parse("fuzz.toml", text);
    }
});
