//! Record layout v3: the extension columns that trend files and the certificate log gained
//! for lifecycle, audit and shipments (issues #14–#17), and the chain rule that keeps rows
//! written before them valid.
//!
//! Extension columns sit just before `chain`. A row's chain body is its text up to the comma
//! before `chain` **with trailing empty extension cells left out**, and the chain seed is the
//! SHA-256 of the header **without** the extension columns. So a file in the earlier layout
//! that `resinlot upgrade` widens (header rewritten, every row padded with empty extension
//! cells) keeps every chain value, row count and certificate anchor it had: nothing old is
//! re-signed, and `verify` checks the widened file exactly as it checked the narrow one.
//! A cell that needs quoting ends with `"`, so the trailing commas removed are always those
//! of empty extension cells.

/// Columns a trend file gained in layout v3, in order, placed before `chain`.
pub const TREND_EXTENSION: [&str; 9] = [
    "disposition",
    "concession_ref",
    "concession_customer",
    "analysts",
    "tested_from",
    "tested_to",
    "decided_at",
    "recorded_by",
    "spec_sha256",
];

/// Columns the certificate log gained in layout v3, in order, placed before `chain`.
pub const LOG_EXTENSION: [&str; 5] = ["event", "po", "quantity", "json_sha256", "cause"];

/// Number of extension columns in a header (0 for a header in an earlier layout).
pub fn extension_len(columns: &[String]) -> usize {
    for ext in [&TREND_EXTENSION[..], &LOG_EXTENSION[..]] {
        let n = ext.len();
        if columns.len() > n
            && columns.last().is_some_and(|c| c == "chain")
            && columns[columns.len() - 1 - n..columns.len() - 1]
                .iter()
                .zip(ext)
                .all(|(a, b)| a == b)
        {
            return n;
        }
    }
    0
}

/// The header line whose SHA-256 seeds the chain: `columns` without extension columns.
pub fn seed_header(columns: &[String]) -> String {
    let n = extension_len(columns);
    let mut base: Vec<&str> = columns.iter().map(String::as_str).collect();
    if n > 0 {
        let chain = base.len() - 1;
        base.drain(chain - n..chain);
    }
    base.join(",")
}

/// The part of a row's body (text up to the comma before `chain`) that the chain signs: the
/// body without trailing empty extension cells (at most `extension` trailing commas).
pub fn signed_body(body: &str, extension: usize) -> &str {
    let mut end = body.len();
    let bytes = body.as_bytes();
    let mut dropped = 0;
    while dropped < extension && end > 0 && bytes[end - 1] == b',' {
        end -= 1;
        dropped += 1;
    }
    &body[..end]
}

/// The columns of a header widened to layout v3 (`extension` inserted before `chain`); the
/// header as it is when it already has them or is not a chained header.
pub fn widened(columns: &[String], extension: &[&str]) -> Vec<String> {
    if extension_len(columns) > 0 || columns.last().is_none_or(|c| c != "chain") {
        return columns.to_vec();
    }
    let mut out = columns[..columns.len() - 1].to_vec();
    out.extend(extension.iter().map(|s| s.to_string()));
    out.push("chain".to_string());
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cols(s: &str) -> Vec<String> {
        s.split(',').map(str::to_string).collect()
    }

    #[test]
    fn extension_is_found_only_complete_and_before_chain() {
        let old = cols("seq,lot,notes,chain");
        assert_eq!(extension_len(&old), 0);
        let new = widened(&old, &TREND_EXTENSION);
        assert_eq!(extension_len(&new), TREND_EXTENSION.len());
        assert_eq!(seed_header(&new), "seq,lot,notes,chain");
        let log = widened(&cols("seq,number,chain"), &LOG_EXTENSION);
        assert_eq!(extension_len(&log), 5);
        assert_eq!(seed_header(&log), "seq,number,chain");
        // A partial extension is not an extension.
        assert_eq!(
            extension_len(&cols("seq,po,quantity,json_sha256,cause,chain")),
            0
        );
        // Widening is idempotent.
        assert_eq!(widened(&new, &TREND_EXTENSION), new);
    }

    #[test]
    fn signed_body_drops_only_trailing_empty_extension_cells() {
        // A padded old row signs what it signed before padding.
        assert_eq!(signed_body("1,A,note,,,", 3), "1,A,note");
        // An empty last base cell keeps its comma.
        assert_eq!(signed_body("1,A,,,,", 3), "1,A,");
        assert_eq!(signed_body("1,A,note,x,,", 3), "1,A,note,x");
        assert_eq!(signed_body("1,A,note,,,y", 3), "1,A,note,,,y");
        assert_eq!(signed_body("1,A,,", 0), "1,A,,");
        // A quoted cell ending in a comma is closed by a quote, so it is never trimmed.
        assert_eq!(signed_body("1,\"a,\",,", 2), "1,\"a,\"");
    }
}
