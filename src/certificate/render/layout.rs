//! Pagination of a certificate, done by resinlot rather than the HTML engine (issue #17): the
//! results rows, footnotes and closing block are measured with the bundled font's metrics and
//! distributed over A4 pages; each page is then laid out on its own from the template, with the
//! table header repeated, so nothing depends on how the engine splits a page.
//!
//! The rules: page 1 opens with the head (issuer, product and lot, shipment); the "Results"
//! heading and table header never stand without at least two rows under them; rows keep their
//! order and are never split; the footnotes follow the table; the closing block (statement of
//! conformity, EN 10204 statement, statements, signature) is one unit and never split.

use serde::Serialize;

use crate::certificate::model::{CalculatedNote, Certificate, ResultRow};
use crate::support::fonts::advance_width;

/// Points per CSS pixel (CSS 2.1 §4.3.2: 1 px = 0.75 pt).
const PT_PER_PX: f32 = 0.75;
/// Line height over font size for `line-height: normal` with DejaVu Sans: (hhea ascender 1901 +
/// descender 483) / 2048 units per em (the font's hhea table; first principles from there).
pub const LINE_HEIGHT: f32 = 2384.0 / 2048.0;

/// One page as the template sees it (`page` in the template context).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Page<'a> {
    /// Page number, from 1.
    pub index: usize,
    /// True on the first page: the head (issuer, product and lot, shipment) is printed.
    pub first: bool,
    /// Results rows on this page (may be empty: no table on this page).
    pub rows: &'a [ResultRow],
    /// True when the table continues from the previous page ("Results (continued)").
    pub continued: bool,
    /// Footnotes on this page.
    pub notes: &'a [CalculatedNote],
    /// True on the page with the closing block (conformity, statements, signature).
    pub closing: bool,
}

/// Which part of the certificate goes on one page: index ranges into the rows and notes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PagePlan {
    /// Rows `rows.0 .. rows.1`.
    pub rows: (usize, usize),
    /// Notes `notes.0 .. notes.1`.
    pub notes: (usize, usize),
    /// Whether the closing block is on this page.
    pub closing: bool,
}

impl PagePlan {
    /// Number of units (rows, notes, closing block) on the page.
    pub fn units(&self) -> usize {
        (self.rows.1 - self.rows.0) + (self.notes.1 - self.notes.0) + usize::from(self.closing)
    }

    /// The page as the template sees it.
    pub fn page<'a>(&self, cert: &'a Certificate, index: usize) -> Page<'a> {
        Page {
            index,
            first: index == 1,
            rows: &cert.rows[self.rows.0..self.rows.1],
            continued: self.rows.0 > 0,
            notes: &cert.calculated[self.notes.0..self.notes.1],
            closing: self.closing,
        }
    }
}

/// The whole certificate on one page, for the HTML file written beside the PDF.
pub fn whole(cert: &Certificate) -> Page<'_> {
    Page {
        index: 1,
        first: true,
        rows: &cert.rows,
        continued: false,
        notes: &cert.calculated,
        closing: true,
    }
}

/// Heights in points of every unit, and the space a page offers.
#[derive(Debug, Clone, PartialEq)]
pub struct Heights {
    /// The head on page 1.
    pub head: f32,
    /// The short running head of a continuation page.
    pub running: f32,
    /// "Results" heading plus the table's header row.
    pub table_head: f32,
    /// Each results row.
    pub rows: Vec<f32>,
    /// Each footnote.
    pub notes: Vec<f32>,
    /// The closing block.
    pub closing: f32,
    /// Height of the page's content box.
    pub page: f32,
}

/// Number of lines `text` takes when wrapped into `width` points at `size` points in `face`:
/// greedy filling, breaking only at ordinary spaces (never at a no-break space or a hyphen,
/// so the count is never below the engine's, which may also break after a hyphen).
pub fn lines(face: &printpdf::ParsedFont, text: &str, size: f32, width: f32) -> usize {
    let space = advance_width(face, " ", size);
    let mut count = 1;
    let mut line = 0.0f32;
    for word in text.split(' ').filter(|w| !w.is_empty()) {
        let w = advance_width(face, word, size);
        if line > 0.0 && line + space + w > width {
            count += 1;
            line = w;
        } else if line > 0.0 {
            line += space + w;
        } else {
            line = w;
        }
    }
    count
}

/// Column widths (mm) of the results table in the shipped stylesheet, without and with the U
/// column: property, method, unit, limits, result, (U,) verdict. They add up to the 178 mm
/// between the side margins.
pub const COLUMNS_MM: [f32; 6] = [40.0, 36.0, 22.0, 26.0, 17.0, 37.0];
/// With the U column.
pub const COLUMNS_U_MM: [f32; 7] = [32.0, 26.0, 20.0, 26.0, 16.0, 20.0, 38.0];
/// Horizontal padding of a table cell, pt (5 px each side).
const CELL_PAD_X: f32 = 2.0 * 5.0 * PT_PER_PX;
/// Width of the content box, pt (A4 less two 16 mm margins).
const CONTENT_W: f32 = 178.0 * 72.0 / 25.4;

/// Height of a results row: the tallest cell's lines at 9 pt, 4 px padding above and below,
/// the 1 px rule under it.
pub fn row_height(
    regular: &printpdf::ParsedFont,
    bold: &printpdf::ParsedFont,
    row: &ResultRow,
    with_u: bool,
) -> f32 {
    let mm = 72.0 / 25.4;
    let label = format!("{}{}", row.label, row.note.map_or(0, |_| 1));
    let mut cells: Vec<(&printpdf::ParsedFont, String)> = vec![
        (regular, label),
        (regular, row.method.clone()),
        (regular, row.unit.clone()),
        (regular, row.limits.clone()),
        (bold, row.result.clone()),
    ];
    if with_u {
        cells.push((regular, row.uncertainty.clone().unwrap_or_default()));
    }
    cells.push((
        if row.flagged { bold } else { regular },
        row.verdict.clone(),
    ));
    let widths: &[f32] = if with_u { &COLUMNS_U_MM } else { &COLUMNS_MM };
    let most = cells
        .iter()
        .zip(widths)
        .map(|((face, text), w)| lines(face, text, 9.0, w * mm - CELL_PAD_X))
        .max()
        .unwrap_or(1);
    most as f32 * 9.0 * LINE_HEIGHT + 2.0 * 4.0 * PT_PER_PX + PT_PER_PX
}

/// Height of a footnote paragraph: 8 pt lines over the full width, 3 px margins.
pub fn note_height(face: &printpdf::ParsedFont, text: &str) -> f32 {
    lines(face, text, 8.0, CONTENT_W) as f32 * 8.0 * LINE_HEIGHT + 2.0 * 3.0 * PT_PER_PX
}

/// Height of the "Results" heading and the header row: the 9.5 pt heading with its margins
/// (12 px above, 4 px below), padding and rule, and one 8.5 pt header line with 4 px padding.
pub fn table_head_height() -> f32 {
    let heading = 9.5 * LINE_HEIGHT + (12.0 + 4.0 + 2.0 + 1.0) * PT_PER_PX;
    let header = 8.5 * LINE_HEIGHT + 2.0 * 4.0 * PT_PER_PX;
    heading + header
}

/// Distributes the certificate over pages. `limit[k]`, when set, caps the number of units on
/// page `k` (set after that page overflowed when laid out). Every page makes progress: a unit
/// taller than a page still gets a page of its own (and the layout check then reports it).
pub fn plan(h: &Heights, limit: &[Option<usize>]) -> Vec<PagePlan> {
    let (n, m) = (h.rows.len(), h.notes.len());
    let (mut r, mut q, mut closed) = (0, 0, false);
    let mut pages = Vec::new();
    while r < n || q < m || !closed {
        let k = pages.len();
        let cap = limit.get(k).copied().flatten().unwrap_or(usize::MAX);
        let mut used = if k == 0 { h.head } else { h.running };
        let mut p = PagePlan {
            rows: (r, r),
            notes: (q, q),
            closing: false,
        };
        let fits = |used: f32, more: f32| used + more <= h.page;
        if r < n {
            // Keep the heading and header with two rows (or the last one).
            let two: f32 = h.rows[r..(r + 2).min(n)].iter().sum();
            if fits(used, h.table_head + two) || (k > 0 && p.units() == 0) {
                used += h.table_head;
                while r < n && p.units() < cap && (fits(used, h.rows[r]) || p.units() == 0) {
                    used += h.rows[r];
                    r += 1;
                    p.rows.1 = r;
                }
            }
        }
        if r == n {
            while q < m && p.units() < cap && fits(used, h.notes[q]) {
                used += h.notes[q];
                q += 1;
                p.notes.1 = q;
            }
            if q == m && !closed && p.units() < cap && fits(used, h.closing) {
                closed = true;
                p.closing = true;
            }
        }
        if p.units() == 0 && k > 0 {
            // Nothing fits even on an empty page: give the next unit a page of its own.
            if r < n {
                r += 1;
                p.rows.1 = r;
            } else if q < m {
                q += 1;
                p.notes.1 = q;
            } else {
                closed = true;
                p.closing = true;
            }
        }
        pages.push(p);
    }
    pages
}

#[cfg(test)]
mod tests {
    use super::*;

    fn heights(rows: usize, notes: usize) -> Heights {
        Heights {
            head: 200.0,
            running: 30.0,
            table_head: 40.0,
            rows: vec![20.0; rows],
            notes: vec![15.0; notes],
            closing: 150.0,
            page: 700.0,
        }
    }

    #[test]
    fn a_short_certificate_is_one_page() {
        let p = plan(&heights(5, 1), &[]);
        assert_eq!(
            p,
            vec![PagePlan {
                rows: (0, 5),
                notes: (0, 1),
                closing: true
            }]
        );
    }

    #[test]
    fn rows_fill_pages_and_the_closing_block_moves_whole() {
        // Page 1: 700 - 200 head - 40 header = 460 pt = 23 rows. Page 2: 700 - 30 - 40 = 630
        // = 31 rows; 40 rows leave 17 for page 2 (340 pt), then notes (2 x 15), then the
        // 150 pt closing block fits (30 + 40 + 340 + 30 + 150 = 590).
        let p = plan(&heights(40, 2), &[]);
        assert_eq!(p.len(), 2);
        assert_eq!(p[0].rows, (0, 23));
        assert_eq!(p[1].rows, (23, 40));
        assert!(p[1].closing);
        // With 50 rows the closing block no longer fits on page 2 and moves to page 3.
        let p = plan(&heights(56, 0), &[]);
        assert_eq!(p.len(), 3);
        assert_eq!(p[1].rows, (23, 54));
        assert_eq!(p[2].rows, (54, 56));
        assert!(p[2].closing && !p[1].closing);
    }

    #[test]
    fn the_heading_keeps_two_rows() {
        // Room for the header and exactly one row on page 1: the table starts on page 2.
        let mut h = heights(3, 0);
        h.head = 700.0 - 40.0 - 30.0;
        let p = plan(&h, &[]);
        assert_eq!(p[0].rows, (0, 0));
        assert_eq!(p[1].rows, (0, 3));
    }

    #[test]
    fn a_limit_moves_units_on() {
        let p = plan(&heights(5, 1), &[Some(4)]);
        assert_eq!(p[0].rows, (0, 4));
        assert_eq!(p[1].rows, (4, 5));
        assert!(p[1].closing);
    }

    #[test]
    fn an_oversized_unit_still_gets_a_page() {
        let mut h = heights(1, 0);
        h.closing = 2000.0;
        let p = plan(&h, &[]);
        assert_eq!(p.len(), 2);
        assert!(p[1].closing);
    }

    #[test]
    fn wrapping_counts_lines_at_spaces_only() {
        let face = printpdf::ParsedFont::from_bytes(
            crate::support::fonts::DEJAVU_SANS,
            0,
            &mut Vec::new(),
        )
        .unwrap();
        let one = advance_width(&face, "Number-average", 9.0);
        assert_eq!(lines(&face, "Number-average", 9.0, one + 0.1), 1);
        // A no-break space binds: "200 °C" is one word.
        let both = advance_width(&face, "200\u{a0}°C", 9.0);
        assert_eq!(lines(&face, "200\u{a0}°C", 9.0, both - 1.0), 1);
        assert_eq!(lines(&face, "200 °C", 9.0, both - 1.0), 2);
    }
}
