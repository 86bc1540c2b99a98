//! Reads TOML files into typed structures, turning parse errors into file:line:column messages.

use std::path::Path;

use serde::de::DeserializeOwned;

use crate::error::{Error, Result};

/// Largest TOML file accepted (bytes); spec, recipe and customer files are a few kilobytes.
pub const MAX_TOML_BYTES: u64 = 1 << 20;

/// Reads `path` and deserialises it, refusing oversized or non-UTF-8 files.
pub fn load<T: DeserializeOwned>(path: &Path) -> Result<T> {
    let meta = std::fs::metadata(path).map_err(|e| Error::io(path, "reading", e))?;
    if meta.len() > MAX_TOML_BYTES {
        return Err(Error::invalid(
            path.display().to_string(),
            format!(
                "the file is {} bytes, over the {} byte limit",
                meta.len(),
                MAX_TOML_BYTES
            ),
            "Check that this is the right file; spec, recipe and customer files are small.",
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    let text = String::from_utf8(bytes).map_err(|e| {
        Error::invalid(
            path.display().to_string(),
            format!("byte {} is not valid UTF-8", e.utf8_error().valid_up_to()),
            "Save the file as UTF-8.",
        )
    })?;
    parse(&path.display().to_string(), &text)
}

/// Deserialises TOML `text`; `name` is used in messages (usually the file path).
pub fn parse<T: DeserializeOwned>(name: &str, text: &str) -> Result<T> {
    toml::from_str(text).map_err(|e| {
        let (line, column) = e
            .span()
            .map(|span| line_column(text, span.start))
            .unwrap_or((1, 1));
        Error::invalid(
            format!("{name}:{line}:{column}"),
            e.message().trim_end_matches('.').to_string(),
            "Fix this entry (see README, file formats) and run again.",
        )
    })
}

/// 1-based line and column of byte `offset` in `text`.
pub fn line_column(text: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(text.len());
    let before = &text[..offset];
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, column)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Debug, serde::Deserialize)]
    #[serde(deny_unknown_fields)]
    #[allow(dead_code)]
    struct Sample {
        name: String,
    }

    #[test]
    fn unknown_key_names_line_and_column() {
        let err = parse::<Sample>("x.toml", "name = \"a\"\ncolour = 3\n").unwrap_err();
        let msg = err.to_string();
        assert!(msg.starts_with("x.toml:2:1:"), "{msg}");
        assert!(msg.contains("colour"), "{msg}");
    }

    #[test]
    fn line_column_counts_from_one() {
        assert_eq!(line_column("ab\ncd", 4), (2, 2));
        assert_eq!(line_column("", 0), (1, 1));
    }
}
