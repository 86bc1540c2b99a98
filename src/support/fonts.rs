//! The bundled fonts (DejaVu Sans, Bitstream Vera licence, see `fonts/LICENSE-DejaVu.txt`),
//! embedded once for certificates, trend reports and PNG charts so no system font is needed.

/// DejaVu Sans.
pub const DEJAVU_SANS: &[u8] = include_bytes!("../../fonts/DejaVuSans.ttf");
/// DejaVu Sans Bold.
pub const DEJAVU_SANS_BOLD: &[u8] = include_bytes!("../../fonts/DejaVuSans-Bold.ttf");

/// Advance width of `text` set in `face` at `size` points, in points: the sum of the glyphs'
/// horizontal advances (`hmtx`) over the em size (`head.unitsPerEm`), times `size`; no kerning.
/// A character the face lacks counts as glyph 0 (`.notdef`).
///
/// Source: OpenType specification, `hmtx` and `head` tables (advance widths in font units,
/// scaled by size / unitsPerEm).
pub fn advance_width(face: &printpdf::ParsedFont, text: &str, size: f32) -> f32 {
    let units: u32 = text
        .chars()
        .map(|c| {
            let gid = face.lookup_glyph_index(c as u32).unwrap_or(0);
            u32::from(face.get_horizontal_advance(gid))
        })
        .sum();
    units as f32 / f32::from(face.font_metrics.units_per_em) * size
}

#[cfg(test)]
mod tests {
    use super::*;

    fn regular() -> printpdf::ParsedFont {
        printpdf::ParsedFont::from_bytes(DEJAVU_SANS, 0, &mut Vec::new()).unwrap()
    }

    #[test]
    fn advance_width_sums_glyph_advances_and_scales_with_size() {
        let face = regular();
        assert_eq!(advance_width(&face, "", 12.0), 0.0);
        let i = advance_width(&face, "i", 10.0);
        let m = advance_width(&face, "M", 10.0);
        assert!(i > 0.0 && m > i, "i {i}, M {m}");
        // First principles: widths add up (no kerning) and scale linearly with the size.
        assert!((advance_width(&face, "iM", 10.0) - (i + m)).abs() < 1e-4);
        assert!((advance_width(&face, "M", 20.0) - 2.0 * m).abs() < 1e-4);
        // At size = unitsPerEm points the width is the advance in font units: DejaVu Sans
        // gives the space 651 units of a 2048-unit em (from memory; the font's hmtx table).
        assert_eq!(advance_width(&face, " ", 2048.0), 651.0);
    }
}
