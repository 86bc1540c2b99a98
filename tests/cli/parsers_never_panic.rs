//! Property tests (issue #8): arbitrary bytes fed to every parser never panic.

use proptest::prelude::*;
use std::path::Path;

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).to_string()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn results_parser(bytes in proptest::collection::vec(any::<u8>(), 0..600)) {
        let _ = resinlot::lot::intake::parse("x.csv", &bytes, resinlot::lot::intake::Options::default());
    }

    #[test]
    fn results_parser_csv_like(s in "[a-z0-9_,;\"\\.\\-\n ]{0,300}") {
        let input = format!("lot,product,manufactured,acid_value\n{s}");
        let _ = resinlot::lot::intake::parse("x.csv", input.as_bytes(), resinlot::lot::intake::Options::default());
    }

    #[test]
    fn spec_parser(bytes in proptest::collection::vec(any::<u8>(), 0..600)) {
        let _ = resinlot::spec::ProductSpec::parse(Path::new("x.toml"), &text(&bytes));
    }

    #[test]
    fn spec_parser_toml_like(s in "[a-z_=\\[\\]\\.\"0-9 \n]{0,300}") {
        let _ = resinlot::spec::ProductSpec::parse(Path::new("x.toml"), &s);
    }

    #[test]
    fn recipe_parser(bytes in proptest::collection::vec(any::<u8>(), 0..600)) {
        let _ = resinlot::chem::recipe::Recipe::parse("x.toml", &text(&bytes));
    }

    #[test]
    fn samples_parser(bytes in proptest::collection::vec(any::<u8>(), 0..600)) {
        let _ = resinlot::cook::samples::parse("x.csv", &text(&bytes));
    }

    #[test]
    fn samples_parser_csv_like(s in "[0-9,\\.\\-\n e]{0,300}") {
        let _ = resinlot::cook::samples::parse("x.csv", &format!("elapsed_min,acid_value\n{s}"));
    }

    #[test]
    fn trend_file_parser(bytes in proptest::collection::vec(any::<u8>(), 0..600)) {
        let _ = resinlot::record::trend_file::parse(Path::new("x.csv"), &text(&bytes));
    }

    #[test]
    fn window_parser(s in "\\PC{0,40}") {
        let _ = resinlot::record::query::parse_window(&s);
    }
}
