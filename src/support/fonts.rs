//! The bundled fonts (DejaVu Sans, Bitstream Vera licence, see `fonts/LICENSE-DejaVu.txt`),
//! embedded once for certificates, trend reports and PNG charts so no system font is needed.

/// DejaVu Sans.
pub const DEJAVU_SANS: &[u8] = include_bytes!("../../fonts/DejaVuSans.ttf");
/// DejaVu Sans Bold.
pub const DEJAVU_SANS_BOLD: &[u8] = include_bytes!("../../fonts/DejaVuSans-Bold.ttf");
