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

/// Names the register keeps for its own files (`register/certificates.csv`, the heads file);
/// a product code equal to one of them, in any case, would share its file.
pub const RESERVED_CODES: [&str; 3] = ["certificates", "heads", "quarantine"];

/// True when `code` can name a product: a safe id ([`is_safe_id`]) that is not one of the
/// register's own names ([`RESERVED_CODES`], compared without regard to case as file systems
/// may).
pub fn is_product_code(code: &str) -> bool {
    is_safe_id(code)
        && !RESERVED_CODES
            .iter()
            .any(|r| r.eq_ignore_ascii_case(code.trim_end_matches(".csv")))
}

#[cfg(test)]
mod tests {
    use super::{is_product_code, is_safe_id};

    /// Issue #13 item 16: reserved register names and path-like codes are not product codes.
    #[test]
    fn reserved_names_are_not_product_codes_issue_13() {
        assert!(is_product_code("PD-2000"));
        for bad in [
            "certificates",
            "Heads",
            "heads.csv",
            "QUARANTINE",
            "../register/PD-2000",
            "/abs",
        ] {
            assert!(!is_product_code(bad), "{bad}");
        }
    }

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
