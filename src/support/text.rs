//! Printable text: the one check for free text that ends up in the record, on a certificate
//! or in a file name's neighbourhood (names, labels, reasons, cells of a results file).

use crate::error::{Error, Result};

/// A short text (a property key, a unit, a value as text): kept inline up to 24 bytes, so the
/// many short texts of a lot's decision need no heap allocation each (issue #13, item 11).
pub type Text = compact_str::CompactString;

/// Characters that reorder the text around them when displayed (Unicode bidirectional
/// embeddings, overrides and isolates, UAX #9 §2): a customer name holding U+202E would print
/// on a certificate as something other than what was typed.
const BIDI_CONTROLS: [char; 9] = [
    '\u{202A}', '\u{202B}', '\u{202C}', '\u{202D}', '\u{202E}', '\u{2066}', '\u{2067}', '\u{2068}',
    '\u{2069}',
];

/// True when every character of `text` is printable ASCII (space to `~`): no control
/// character, no bidirectional control, one terminal column each. Most cells and values are,
/// so checks and widths take this short way first (issue #13, item 11).
pub fn is_printable_ascii(text: &str) -> bool {
    text.bytes().all(|b| (0x20..0x7f).contains(&b))
}

/// What is wrong with `text` as one line of printable text, or `None` when it is fine:
/// control characters (line breaks, tabs, NUL...) and bidirectional controls are refused.
pub fn unprintable(text: &str) -> Option<&'static str> {
    // Printable ASCII holds neither kind, and is nearly every cell of a results file.
    if is_printable_ascii(text) {
        return None;
    }
    if text.chars().any(char::is_control) {
        Some("it contains a control character (a line break, a tab or similar)")
    } else if text.chars().any(|c| BIDI_CONTROLS.contains(&c)) {
        Some("it contains a character that reverses the direction of the text around it")
    } else {
        None
    }
}

/// Checks one line of free text: not blank, at most `max_chars` characters, printable (see
/// [`unprintable`]). `place` names the field and `what` says what the text is, for the message.
pub fn check_line(place: &str, what: &str, text: &str, max_chars: usize) -> Result<()> {
    if text.trim().is_empty() {
        return Err(Error::invalid(
            place,
            format!("the {what} is empty"),
            format!("Write the {what}."),
        ));
    }
    let n = text.chars().count();
    if n > max_chars {
        return Err(Error::invalid(
            place,
            format!("the {what} is {n} characters long, more than {max_chars}"),
            format!("Shorten the {what} to {max_chars} characters or fewer."),
        ));
    }
    if let Some(problem) = unprintable(text) {
        return Err(Error::invalid(
            place,
            format!("the {what} cannot be used: {problem}"),
            format!("Retype the {what} as plain text on one line."),
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plain_text_passes() {
        assert_eq!(unprintable("Kessel Lackwerke GmbH · Werk 2 – Süd"), None);
        assert!(check_line("name", "name", "Ørsted Coatings", 80).is_ok());
    }

    /// Issue #13 item 6: line breaks and a right-to-left override are refused.
    #[test]
    fn control_and_bidi_characters_are_refused_issue_13() {
        assert!(unprintable("C\nD").is_some());
        assert!(unprintable("tab\there").is_some());
        assert!(unprintable("abc\u{202E}gnp.exe").is_some());
        let e = check_line("x.toml: name", "customer name", "A\u{2066}B", 80).unwrap_err();
        assert!(e.to_string().contains("reverses the direction"), "{e}");
        assert!(check_line("f", "reason", "   ", 80).is_err());
        assert!(check_line("f", "reason", &"x".repeat(81), 80).is_err());
    }
}
