//! Plain-text aligned tables for terminal output.

/// Renders rows as left-aligned columns separated by two spaces; the first row is the header
/// and gets an underline. Widths count characters, not bytes, so "mPa·s" aligns.
pub fn render(rows: &[Vec<String>]) -> String {
    let cols = rows.iter().map(Vec::len).max().unwrap_or(0);
    let mut widths = vec![0usize; cols];
    for row in rows {
        for (i, cell) in row.iter().enumerate() {
            widths[i] = widths[i].max(cell.chars().count());
        }
    }
    let mut out = String::new();
    for (n, row) in rows.iter().enumerate() {
        let mut line = String::new();
        for (i, cell) in row.iter().enumerate() {
            if i > 0 {
                line.push_str("  ");
            }
            line.push_str(cell);
            if i + 1 < row.len() {
                line.extend(std::iter::repeat_n(' ', widths[i] - cell.chars().count()));
            }
        }
        out.push_str(line.trim_end());
        out.push('\n');
        if n == 0 && rows.len() > 1 {
            let total: usize = widths.iter().sum::<usize>() + 2 * cols.saturating_sub(1);
            out.push_str(&"-".repeat(total));
            out.push('\n');
        }
    }
    out
}

/// Key/value table without a header line.
pub fn pairs(rows: &[(String, String)]) -> String {
    let w = rows
        .iter()
        .map(|(k, _)| k.chars().count())
        .max()
        .unwrap_or(0);
    rows.iter()
        .map(|(k, v)| format!("{k}{}  {v}\n", " ".repeat(w - k.chars().count())))
        .collect()
}

#[cfg(test)]
mod tests {
    #[test]
    fn aligns_unicode_by_characters() {
        let t = super::render(&[
            vec!["unit".into(), "x".into()],
            vec!["mPa·s".into(), "1".into()],
        ]);
        assert_eq!(t, "unit   x\n--------\nmPa·s  1\n");
    }
}
