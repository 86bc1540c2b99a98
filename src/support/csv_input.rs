//! Reading CSV input files: the one translation of a `csv` crate error into a message that
//! names the file, the line and what to do.

use crate::error::Error;

/// Turns a CSV reading error into an [`Error::Invalid`] at `file:line`: a row with the wrong
/// number of fields says how many it has and expects; anything else (bad UTF-8, bad quoting)
/// says how to save the file.
pub fn error(file: &str, e: &csv::Error) -> Error {
    let line = e.position().map_or(0, csv::Position::line);
    match e.kind() {
        csv::ErrorKind::UnequalLengths {
            expected_len, len, ..
        } => Error::invalid(
            format!("{file}:{line}"),
            format!("the row has {len} fields where the header has {expected_len}"),
            "Check the row for a missing or extra separator.",
        ),
        _ => Error::invalid(
            format!("{file}:{line}"),
            format!("the CSV cannot be read ({e})"),
            "Save the file as comma-separated UTF-8 text with the same number of fields on every \
             line.",
        ),
    }
}

#[cfg(test)]
mod tests {
    fn first_error(bytes: &[u8]) -> csv::Error {
        let mut r = csv::ReaderBuilder::new().from_reader(bytes);
        r.records().find_map(Result::err).expect("an error")
    }

    #[test]
    fn unequal_row_names_line_and_counts() {
        let e = super::error("r.csv", &first_error(b"a,b\n1,2\n3\n")).to_string();
        assert!(
            e.starts_with("r.csv:3: the row has 1 fields where the header has 2"),
            "{e}"
        );
    }

    #[test]
    fn other_errors_say_how_to_save() {
        // Not UTF-8: a Latin-1 "ü" (0xFC). The csv crate places this error at the record it
        // was decoding, which is not always the line a person would point at.
        let e = super::error("r.csv", &first_error(b"a,b\n1,\xfc\n")).to_string();
        assert!(e.starts_with("r.csv:"), "{e}");
        assert!(e.contains("the CSV cannot be read"), "{e}");
        assert!(e.contains("UTF-8 text"), "{e}");
    }
}
