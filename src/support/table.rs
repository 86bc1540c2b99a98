//! Plain-text aligned tables for terminal output.

use unicode_width::UnicodeWidthStr;

/// The width a cell takes on a terminal: combining marks (the bar of x̄ and MR̄) take no
/// column, so they are not counted as characters are (Unicode UAX #11 via `unicode-width`).
pub fn width(cell: &str) -> usize {
    // Printable ASCII takes one column a character (UAX #11: narrow), the common case by far.
    if crate::support::text::is_printable_ascii(cell) {
        return cell.len();
    }
    UnicodeWidthStr::width(cell)
}

/// Renders rows as left-aligned columns separated by two spaces; the first row is the header
/// and gets an underline. Widths are display widths, not bytes or characters, so "mPa·s" and
/// "x̄" align.
pub fn render(rows: &[Vec<String>]) -> String {
    let mut widths = Vec::new();
    for row in rows {
        widen(&mut widths, row);
    }
    let mut out = String::new();
    for (n, row) in rows.iter().enumerate() {
        out.push_str(&line(row, &widths));
        if n == 0 && rows.len() > 1 {
            out.push_str(&rule(&widths));
        }
    }
    out
}

/// Grows `widths` (one per column) to fit `row`: a table written a row at a time measures
/// every row with this first, then writes each with [`line()`] (as [`render`] does).
pub fn widen(widths: &mut Vec<usize>, row: &[String]) {
    if widths.len() < row.len() {
        widths.resize(row.len(), 0);
    }
    for (i, cell) in row.iter().enumerate() {
        widths[i] = widths[i].max(width(cell));
    }
}

/// One row of a table whose columns are `widths` wide, with its line feed; the last cell is
/// not padded and trailing spaces are dropped.
pub fn line(row: &[String], widths: &[usize]) -> String {
    let cells: Vec<&str> = row.iter().map(String::as_str).collect();
    let mut out = String::new();
    push_line(&mut out, &cells, widths);
    out
}

/// Appends [`line()`] of the cells `row` to `out`: a buffer can serve row after row without
/// a new string for each (issue #13, item 11).
pub fn push_line(out: &mut String, row: &[&str], widths: &[usize]) {
    let start = out.len();
    for (i, cell) in row.iter().enumerate() {
        if i > 0 {
            out.push_str("  ");
        }
        out.push_str(cell);
        if i + 1 < row.len() {
            out.extend(std::iter::repeat_n(' ', widths[i] - width(cell)));
        }
    }
    let kept = start + out[start..].trim_end().len();
    out.truncate(kept);
    out.push('\n');
}

/// The underline of a table's header, as wide as its columns and their separators.
pub fn rule(widths: &[usize]) -> String {
    let total: usize = widths.iter().sum::<usize>() + 2 * widths.len().saturating_sub(1);
    let mut out = "-".repeat(total);
    out.push('\n');
    out
}

/// Writes the same text as [`render`] without holding the rows: `row(i, cells)` fills row `i`
/// (0 is the header) of `rows`. Each row is asked for twice, once for the column widths
/// ([`widen`]) and once to write it ([`line()`]), so memory stays flat however many rows there
/// are (issue #20).
pub fn write_streamed(
    out: &mut impl std::io::Write,
    rows: usize,
    mut row: impl FnMut(usize, &mut Vec<String>),
) -> std::io::Result<()> {
    let mut cells: Vec<String> = Vec::new();
    let mut widths: Vec<usize> = Vec::new();
    for n in 0..rows {
        cells.clear();
        row(n, &mut cells);
        widen(&mut widths, &cells);
    }
    for n in 0..rows {
        cells.clear();
        row(n, &mut cells);
        out.write_all(line(&cells, &widths).as_bytes())?;
        if n == 0 && rows > 1 {
            out.write_all(rule(&widths).as_bytes())?;
        }
    }
    Ok(())
}

/// Key/value table without a header line.
pub fn pairs(rows: &[(String, String)]) -> String {
    let w = rows.iter().map(|(k, _)| width(k)).max().unwrap_or(0);
    rows.iter()
        .map(|(k, v)| format!("{k}{}  {v}\n", " ".repeat(w - width(k))))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Issue #13 item 11: the printable-ASCII shortcut gives what unicode-width gives (the
    /// reference), for every ASCII character alone and in text, and non-ASCII still goes to it.
    #[test]
    fn width_shortcut_agrees_with_unicode_width_issue_13() {
        for b in 0u8..0x80 {
            let c = char::from(b).to_string();
            assert_eq!(width(&c), UnicodeWidthStr::width(c.as_str()), "{b:#x}");
            let t = format!("ab{c}9.5");
            assert_eq!(width(&t), UnicodeWidthStr::width(t.as_str()), "{b:#x}");
        }
        for t in ["mPa·s", "x̄", "MR̄ 0.52", "日本", ""] {
            assert_eq!(width(t), UnicodeWidthStr::width(t), "{t}");
        }
    }

    #[test]
    fn aligns_unicode_by_characters() {
        let t = super::render(&[
            vec!["unit".into(), "x".into()],
            vec!["mPa·s".into(), "1".into()],
        ]);
        assert_eq!(t, "unit   x\n--------\nmPa·s  1\n");
    }

    /// Issue #20: the streamed table is byte for byte the rendered one, ragged rows and
    /// trailing blanks included.
    #[test]
    fn streamed_table_is_the_rendered_one_issue_20() {
        let rows: Vec<Vec<String>> = [
            vec!["lot", "x̄", "status"],
            vec!["A1", "1.5", ""],
            vec!["B22", "mPa·s", "released (concession)"],
            vec!["C", "2"],
        ]
        .iter()
        .map(|r| r.iter().map(|c| c.to_string()).collect())
        .collect();
        for n in 0..=rows.len() {
            let mut out = Vec::new();
            super::write_streamed(&mut out, n, |i, cells| {
                cells.extend(rows[i].iter().cloned())
            })
            .unwrap();
            assert_eq!(
                String::from_utf8(out).unwrap(),
                super::render(&rows[..n]),
                "{n} rows"
            );
        }
    }

    /// Issue #12: "x̄" is x plus a combining macron, one column wide on a terminal.
    #[test]
    fn combining_bars_take_no_column_issue_12() {
        let t = super::pairs(&[("x̄".into(), "1".into()), ("MR̄".into(), "2".into())]);
        assert_eq!(t, "x̄   1\nMR̄  2\n");
        let t = super::render(&[vec!["x̄".into(), "a".into()], vec!["MR̄".into(), "b".into()]]);
        assert_eq!(t, "x̄   a\n-----\nMR̄  b\n");
    }
}
