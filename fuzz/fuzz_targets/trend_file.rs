//! Fuzz target: the hash-chained trend-file reader.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = resinlot::record::trend_file::parse(std::path::Path::new("fuzz.csv"), text);
    }
});
