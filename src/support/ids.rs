//! Safe identifiers: lot ids, product codes and customer names that may end up in file names.

/// Longest accepted identifier.
pub const MAX_ID_LEN: usize = 40;

/// True for 1 to 40 characters of ASCII letters, digits, '-', '_' or '.', starting with a
/// letter or digit (so no path separators, no "..", no control characters, no spreadsheet
/// formula prefixes).
pub fn is_safe_id(id: &str) -> bool {
    !id.is_empty()
        && id.len() <= MAX_ID_LEN
        && id.chars().next().is_some_and(|c| c.is_ascii_alphanumeric())
        && id
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'))
        && !id.contains("..")
}

#[cfg(test)]
mod tests {
    use super::is_safe_id;

    #[test]
    fn path_like_ids_are_refused() {
        assert!(is_safe_id("PD2-26-0412"));
        for bad in [
            "", "../x", "a/b", "a\\b", "a b", "=SUM(A1)", "-x", "a..b", "x\u{7}",
        ] {
            assert!(!is_safe_id(bad), "{bad:?}");
        }
        assert!(!is_safe_id(&"a".repeat(41)));
    }
}
