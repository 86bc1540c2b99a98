//! PDF trend report of one product: one A4 landscape page per property (I-MR chart, statistics,
//! run-rule signals, warnings) and an optional viscosity–Mn page, drawn with printpdf operations.
//!
//! Every page is laid out on its own with fixed positions (no automatic pagination), then the
//! pages are joined into one document. Text uses only the bundled DejaVu faces; the chart is the
//! SVG of [`crate::trend::chart::imr_svg`] rasterised by [`crate::trend::chart::svg_to_png`] and placed as an
//! image. Ids, document dates and the trailer /ID are derived from the input, so the same input
//! always gives the same bytes.

use std::sync::OnceLock;

use chrono::NaiveDate;
use printpdf::{
    Color, FontId, Mm, Op, PaintMode, ParsedFont, PdfDocument, PdfFont, PdfFontHandle, PdfPage,
    PdfSaveOptions, Point, Pt, RawImage, RawImageData, RawImageFormat, Rect, Rgb, TextItem,
    XObjectId, XObjectTransform,
};
use rayon::prelude::*;
use serde::Serialize;

use crate::error::{Error, Result};
use crate::stats::Side;
use crate::support::visual;
use crate::trend::chart::{self, fmt_value, ChartInput, MarkedLot};
use crate::trend::product::{PropertyTrend, ViscosityCheck};

/// Everything the report shows; the caller has computed the trends.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct ReportInput<'a> {
    /// Product code, e.g. "PD-2000".
    pub product_code: &'a str,
    /// Product name from the spec.
    pub product_name: &'a str,
    /// Date the report is generated on (injected, e.g. from `crate::support::clock`), printed on every
    /// page and used as the document date so the file is reproducible.
    pub generated_on: NaiveDate,
    /// Site name printed in the header.
    pub site: &'a str,
    /// One trend per property, in the order the pages should have.
    pub trends: &'a [PropertyTrend],
    /// Viscosity against Mn, for one extra page.
    pub viscosity: Option<&'a ViscosityCheck>,
}

use crate::support::fonts::{advance_width, DEJAVU_SANS, DEJAVU_SANS_BOLD};

/// A4 landscape, mm (ISO 216).
const PAGE_W: f32 = 297.0;
const PAGE_H: f32 = 210.0;
/// Points per millimetre (1 pt = 1/72 in, 1 in = 25.4 mm).
const PT_PER_MM: f32 = 72.0 / 25.4;
const MARGIN: f32 = 12.0;
/// Chart box: left edge, top, width (mm); the height follows the chart's aspect ratio.
const CHART_X: f32 = MARGIN;
const CHART_TOP: f32 = 29.0;
const CHART_W: f32 = chart::PLACED_WIDTH_MM as f32;
/// Right column (statistics, warnings): left and right edges, mm.
const COL_X: f32 = 198.0;
const COL_R: f32 = PAGE_W - MARGIN;
/// Lowest baseline of body text, mm from the top; the footer rule sits below it.
const BODY_BOTTOM: f32 = 193.0;
const FOOTER_RULE: f32 = 198.0;
const FOOTER_TEXT: f32 = 203.0;

/// Raster scale of the chart (900 × 600 px SVG): 2 gives 1800 px across the 178 mm chart box,
/// about 257 dpi, sharp on screen at 100 % and in print.
const CHART_SCALE: f32 = 2.0;
/// Colours of the visual language ([`visual`]): teal accents, near-black text, muted grey for
/// secondary text, amber warnings and signals, crimson for lots outside the spec window.
const ACCENT: (f32, f32, f32) = visual::ACCENT.unit();
const INK: (f32, f32, f32) = visual::INK.unit();
const MUTED: (f32, f32, f32) = visual::MUTED.unit();
const ROW_SHADE: (f32, f32, f32) = visual::ROW_SHADE.unit();
const WARN: (f32, f32, f32) = visual::SIGNAL.unit();
const OUT: (f32, f32, f32) = visual::OUT_OF_SPEC.unit();
const WHITE: (f32, f32, f32) = (1.0, 1.0, 1.0);

/// Renders the trend report as PDF bytes.
///
/// Errors when `trends` is empty or a chart cannot be drawn (see [`chart::imr_svg`]).
pub fn render_report(input: &ReportInput) -> Result<Vec<u8>> {
    if input.trends.is_empty() {
        return Err(Error::invalid(
            format!("trend report for {}", input.product_code),
            "no property has enough lots for a chart",
            "Widen the date range or choose a product with at least two lots.",
        ));
    }
    let fonts = fonts();
    let mut doc = PdfDocument::new(&format!("Trend report {}", input.product_code));
    let regular = Face::register(&mut doc, "F1", &fonts.0);
    let bold = Face::register(&mut doc, "F2", &fonts.1);

    // The charts are the slow part: rasterise them in parallel, keeping page order.
    let images: Vec<RawImage> = input
        .trends
        .par_iter()
        .map(chart_image)
        .collect::<Result<_>>()?;

    // The signal list of each property, split into the part below its chart and the parts on
    // continuation pages; page numbers follow from the parts.
    let lists: Vec<(Vec<MarkedLot>, Vec<Vec<ListLine>>)> = input
        .trends
        .iter()
        .zip(&images)
        .map(|(t, image)| {
            let marked = chart::marked_lots(&t.values, &t.raw_signals, t.spec_min, t.spec_max);
            let lines = signal_lines(&regular, t, &marked, CHART_W);
            let chart_h = CHART_W * image.height as f32 / image.width as f32;
            let parts = paginate(lines, CHART_TOP + chart_h + 6.0 + LIST_FIRST_OFFSET);
            (marked, parts)
        })
        .collect();
    let count =
        lists.iter().map(|(_, p)| p.len()).sum::<usize>() + usize::from(input.viscosity.is_some());
    let mut pages = Vec::with_capacity(count);
    for (i, ((trend, image), (marked, parts))) in
        input.trends.iter().zip(images).zip(&lists).enumerate()
    {
        let id = XObjectId(format!("Chart{}", i + 1));
        let (px_w, px_h) = (image.width, image.height);
        doc.resources
            .xobjects
            .map
            .insert(id.clone(), printpdf::XObject::Image(image));
        let own_page = pages.len() + 1;
        // After part k: the lots still to come and the page they start on.
        let rest = |k: usize| {
            (k + 1 < parts.len()).then(|| (entries_in(&parts[k + 1..].concat()), own_page + k + 1))
        };
        let mut page = Canvas::new(&regular, &bold);
        property_page(
            &mut page,
            input,
            trend,
            &id,
            (px_w, px_h),
            marked,
            &parts[0],
            rest(0),
        );
        page.footer(input, own_page, count);
        pages.push(page.finish());
        for (k, part) in parts.iter().enumerate().skip(1) {
            let mut page = Canvas::new(&regular, &bold);
            continuation_page(&mut page, input, trend, part, own_page, rest(k));
            page.footer(input, pages.len() + 1, count);
            pages.push(page.finish());
        }
    }
    if let Some(v) = input.viscosity {
        let unit = input
            .trends
            .iter()
            .find(|t| t.property == crate::spec::keys::VISCOSITY)
            .map_or("", |t| t.unit.as_str());
        let svg = crate::trend::viscosity_chart::viscosity_svg(input.product_code, unit, v)?;
        let image = svg_image(&svg)?;
        let id = XObjectId("ViscosityChart".to_string());
        let size = (image.width, image.height);
        doc.resources
            .xobjects
            .map
            .insert(id.clone(), printpdf::XObject::Image(image));
        let mut page = Canvas::new(&regular, &bold);
        viscosity_page(&mut page, input, v, &id, size);
        page.footer(input, count, count);
        pages.push(page.finish());
    }
    doc.with_pages(pages);

    doc.metadata.info.document_title =
        format!("Trend report {} {}", input.product_code, input.product_name);
    doc.metadata.info.subject = format!("Lot-to-lot trends of {}", input.product_code);
    doc.metadata.info.identifier = format!(
        "{}{}-{}",
        crate::support::output::REPORT_ID_PREFIX,
        input.product_code,
        input.generated_on
    );
    crate::support::pdf_meta::set_creator_and_day(&mut doc, input.generated_on);
    let mut warnings = Vec::new();
    let mut bytes = doc.save(&PdfSaveOptions::default(), &mut warnings);
    set_document_id(&mut bytes, input);
    Ok(bytes)
}

/// The bundled faces, parsed once per process.
fn fonts() -> &'static (ParsedFont, ParsedFont) {
    static FONTS: OnceLock<(ParsedFont, ParsedFont)> = OnceLock::new();
    FONTS.get_or_init(|| {
        let parse = |bytes: &[u8]| {
            ParsedFont::from_bytes(bytes, 0, &mut Vec::new())
                .expect("the bundled DejaVu fonts are valid TrueType files")
        };
        (parse(DEJAVU_SANS), parse(DEJAVU_SANS_BOLD))
    })
}

/// The chart of one trend as an opaque RGB image.
fn chart_image(trend: &PropertyTrend) -> Result<RawImage> {
    let svg = chart::imr_svg(&ChartInput::of_trend(trend))?;
    svg_image(&svg)
}

/// An SVG chart rasterised at [`CHART_SCALE`] over white ([`chart::rasterize`]) as an RGB image.
fn svg_image(svg: &[u8]) -> Result<RawImage> {
    let pixmap = chart::rasterize(svg, CHART_SCALE)?;
    // tiny-skia pixels are premultiplied RGBA: over white, c' = c + (255 − a).
    let mut rgb = Vec::with_capacity(pixmap.data().len() / 4 * 3);
    for px in pixmap.data().chunks_exact(4) {
        let back = 255 - px[3];
        rgb.extend([
            px[0].saturating_add(back),
            px[1].saturating_add(back),
            px[2].saturating_add(back),
        ]);
    }
    Ok(RawImage {
        pixels: RawImageData::U8(rgb),
        width: pixmap.width() as usize,
        height: pixmap.height() as usize,
        data_format: RawImageFormat::RGB8,
        tag: Vec::new(),
    })
}

/// Sets the PDF's file identifier from the report's content
/// ([`crate::support::pdf_meta::set_document_id`]), so the same report always gives the same bytes.
fn set_document_id(bytes: &mut [u8], input: &ReportInput) {
    use sha2::{Digest, Sha256};
    let mut hasher = Sha256::new();
    hasher.update(serde_json::to_vec(input).unwrap_or_default());
    for t in input.trends {
        // Fields the serialised trend leaves out.
        hasher.update(serde_json::to_vec(&(&t.lots, &t.values, &t.capability)).unwrap_or_default());
    }
    crate::support::pdf_meta::set_document_id(bytes, &hasher.finalize().into());
}

/// A bundled face registered in the document under a fixed id.
struct Face<'a> {
    id: FontId,
    face: &'a ParsedFont,
}

impl<'a> Face<'a> {
    fn register(doc: &mut PdfDocument, id: &str, face: &'a ParsedFont) -> Face<'a> {
        let id = FontId(id.to_string());
        doc.resources
            .fonts
            .map
            .insert(id.clone(), PdfFont::new(face.clone()));
        Face { id, face }
    }

    /// Advance width of `text` at `size` points, in mm ([`advance_width`]).
    fn width_mm(&self, text: &str, size: f32) -> f32 {
        let plain: String = text.chars().filter(|&c| c != visual::OVERBAR).collect();
        advance_width(self.face, &plain, size) / PT_PER_MM
    }

    /// `text` cut to at most `width` mm, ending in "…" when cut.
    fn fit(&self, text: &str, size: f32, width: f32) -> String {
        if self.width_mm(text, size) <= width {
            return text.to_string();
        }
        let mut out: String = text.to_string();
        while !out.is_empty() && self.width_mm(&format!("{out}…"), size) > width {
            out.pop();
        }
        format!("{}…", out.trim_end())
    }

    /// Greedy word wrap of `text` into lines of at most `width` mm.
    fn wrap(&self, text: &str, size: f32, width: f32) -> Vec<String> {
        let mut lines = Vec::new();
        let mut line = String::new();
        for word in text.split_whitespace() {
            let candidate = if line.is_empty() {
                word.to_string()
            } else {
                format!("{line} {word}")
            };
            if self.width_mm(&candidate, size) <= width || line.is_empty() {
                line = candidate;
            } else {
                lines.push(std::mem::replace(&mut line, word.to_string()));
            }
        }
        if !line.is_empty() {
            lines.push(line);
        }
        lines
            .into_iter()
            .map(|l| self.fit(&l, size, width))
            .collect()
    }
}

/// Which face a piece of text uses.
#[derive(Clone, Copy)]
enum Weight {
    Regular,
    Bold,
}

/// The operations of one page, with positions in mm from the top-left corner.
struct Canvas<'a> {
    ops: Vec<Op>,
    regular: &'a Face<'a>,
    bold: &'a Face<'a>,
}

fn colour((r, g, b): (f32, f32, f32)) -> Color {
    Color::Rgb(Rgb::new(r, g, b, None))
}

fn pt_x(x_mm: f32) -> Pt {
    Pt(x_mm * PT_PER_MM)
}

fn pt_y(y_mm_from_top: f32) -> Pt {
    Pt((PAGE_H - y_mm_from_top) * PT_PER_MM)
}

impl<'a> Canvas<'a> {
    fn new(regular: &'a Face<'a>, bold: &'a Face<'a>) -> Canvas<'a> {
        Canvas {
            ops: Vec::new(),
            regular,
            bold,
        }
    }

    fn face(&self, weight: Weight) -> &'a Face<'a> {
        match weight {
            Weight::Regular => self.regular,
            Weight::Bold => self.bold,
        }
    }

    fn finish(self) -> PdfPage {
        PdfPage::new(Mm(PAGE_W), Mm(PAGE_H), self.ops)
    }

    /// Text with its baseline at `y` mm from the top, starting at `x` mm. A combining macron
    /// becomes a drawn bar over the letters before it ([`visual::overbars`]), because the PDF
    /// text path does not place combining marks: "MR̄" and "x̄" keep their bars.
    fn text(&mut self, weight: Weight, size: f32, x: f32, y: f32, rgb: (f32, f32, f32), s: &str) {
        let (plain, bars) = visual::overbars(s);
        let font = self.face(weight);
        self.ops.extend([
            Op::SetFillColor { col: colour(rgb) },
            Op::StartTextSection,
            Op::SetFont {
                font: PdfFontHandle::External(font.id.clone()),
                size: Pt(size),
            },
            Op::SetTextCursor {
                pos: Point {
                    x: pt_x(x),
                    y: pt_y(y),
                },
            },
            Op::ShowText {
                items: vec![TextItem::Text(plain.clone())],
            },
            Op::EndTextSection,
        ]);
        let chars: Vec<char> = plain.chars().collect();
        for (a, b) in bars {
            let left = x + font.width_mm(&chars[..a].iter().collect::<String>(), size);
            let right = x + font.width_mm(&chars[..b].iter().collect::<String>(), size);
            // DejaVu Sans cap height is 0.73 em: the bar sits just above it.
            let top = y - 0.80 * size / PT_PER_MM;
            self.fill(
                left + 0.06 * size / PT_PER_MM,
                top,
                right - left - 0.1 * size / PT_PER_MM,
                0.055 * size / PT_PER_MM,
                rgb,
            );
        }
    }

    /// Text ending at `right` mm.
    fn text_right(
        &mut self,
        weight: Weight,
        size: f32,
        right: f32,
        y: f32,
        rgb: (f32, f32, f32),
        s: &str,
    ) {
        let w = self.face(weight).width_mm(s, size);
        self.text(weight, size, right - w, y, rgb, s);
    }

    /// A filled rectangle, top-left corner at (`x`, `top`) mm.
    fn fill(&mut self, x: f32, top: f32, w: f32, h: f32, rgb: (f32, f32, f32)) {
        self.ops.push(Op::SetFillColor { col: colour(rgb) });
        self.ops.push(Op::DrawRectangle {
            rectangle: Rect {
                mode: Some(PaintMode::Fill),
                ..Rect::from_xywh(pt_x(x), pt_y(top + h), Pt(w * PT_PER_MM), Pt(h * PT_PER_MM))
            },
        });
    }

    /// Header: accent bar, title line and the line of context below it.
    fn header(&mut self, input: &ReportInput, title: &str, context: &str) {
        self.fill(0.0, 0.0, PAGE_W, 4.0, ACCENT);
        let date = format!("Generated {}", input.generated_on);
        let date_w = self.regular.width_mm(&date, 9.0);
        let title = self.bold.fit(title, 14.0, COL_R - MARGIN - date_w - 6.0);
        self.text(Weight::Bold, 14.0, MARGIN, 15.5, INK, &title);
        self.text_right(Weight::Regular, 9.0, COL_R, 15.5, MUTED, &date);
        let context = self.regular.fit(context, 9.0, COL_R - MARGIN);
        self.text(Weight::Regular, 9.0, MARGIN, 21.5, MUTED, &context);
        self.fill(MARGIN, 24.5, COL_R - MARGIN, 0.35, ACCENT);
    }

    /// Footer: rule, report name and product on the left, "Page x of y" on the right.
    fn footer(&mut self, input: &ReportInput, index: usize, count: usize) {
        self.fill(MARGIN, FOOTER_RULE, COL_R - MARGIN, 0.25, MUTED);
        let left = format!(
            "Trend report  ·  {} {}  ·  {}",
            input.product_code, input.product_name, input.site
        );
        let right = format!("Page {index} of {count}");
        let right_w = self.bold.width_mm(&right, 8.0);
        let left = self.regular.fit(&left, 8.0, COL_R - MARGIN - right_w - 6.0);
        self.text(Weight::Regular, 8.0, MARGIN, FOOTER_TEXT, INK, &left);
        self.text_right(Weight::Bold, 8.0, COL_R, FOOTER_TEXT, INK, &right);
    }

    /// Section heading with a short accent underline.
    fn heading(&mut self, x: f32, y: f32, s: &str) {
        self.text(Weight::Bold, 10.0, x, y, ACCENT, s);
        self.fill(x, y + 1.3, 12.0, 0.5, ACCENT);
    }

    /// Two-column table of label and value rows, values right-aligned at `right`; returns the
    /// baseline below the last row.
    fn key_values(&mut self, x: f32, right: f32, mut y: f32, rows: &[(String, String)]) -> f32 {
        const SIZE: f32 = 8.5;
        const STEP: f32 = 4.9;
        for (i, (label, value)) in rows.iter().enumerate() {
            if i % 2 == 0 {
                self.fill(x - 1.0, y - 3.4, right - x + 2.0, STEP, ROW_SHADE);
            }
            let value_w = self.regular.width_mm(value, SIZE).min(right - x - 20.0);
            let label = self.regular.fit(label, SIZE, right - x - value_w - 3.0);
            let value = self.regular.fit(value, SIZE, right - x - 20.0);
            self.text(Weight::Regular, SIZE, x, y, MUTED, &label);
            self.text_right(Weight::Regular, SIZE, right, y, INK, &value);
            y += STEP;
        }
        y
    }

    /// Wrapped bullet list from `y` down to `bottom`; the last line that fits says how many
    /// items were left out.
    fn bullets(
        &mut self,
        x: f32,
        right: f32,
        mut y: f32,
        bottom: f32,
        items: &[String],
        rgb: (f32, f32, f32),
    ) {
        const SIZE: f32 = 8.0;
        const STEP: f32 = 3.9;
        for (i, item) in items.iter().enumerate() {
            let lines = self.regular.wrap(item, SIZE, right - x - 4.0);
            let room_after = bottom - (y + STEP * (lines.len() as f32 - 1.0));
            let last_that_fits = i + 1 == items.len() || room_after >= STEP * 1.5;
            if room_after < 0.0 || !last_that_fits {
                let rest = items.len() - i;
                self.text(
                    Weight::Regular,
                    SIZE,
                    x,
                    y,
                    MUTED,
                    &format!("… and {rest} more"),
                );
                return;
            }
            self.text(Weight::Bold, SIZE, x, y, rgb, "•");
            for line in &lines {
                self.text(Weight::Regular, SIZE, x + 4.0, y, INK, line);
                y += STEP;
            }
            y += 1.0;
        }
    }
}

/// "a – b unit", "≤ b", "≥ a" or "none".
fn spec_text(min: Option<f64>, max: Option<f64>, unit: &str) -> String {
    let unit = if unit.is_empty() {
        String::new()
    } else {
        format!(" {unit}")
    };
    match (min, max) {
        (Some(a), Some(b)) => format!("{} – {}{unit}", fmt_value(a), fmt_value(b)),
        (None, Some(b)) => format!("≤ {}{unit}", fmt_value(b)),
        (Some(a), None) => format!("≥ {}{unit}", fmt_value(a)),
        (None, None) => "none".to_string(),
    }
}

/// An index with its interval, "1.23 (1.01 – 1.45)".
fn index_text(value: f64, ci: Option<[f64; 2]>) -> String {
    match ci {
        Some([lo, hi]) => format!("{value:.2} ({lo:.2} – {hi:.2})"),
        None => format!("{value:.2}"),
    }
}

/// The statistics table of one property.
fn statistics_rows(t: &PropertyTrend) -> Vec<(String, String)> {
    let l = &t.limits;
    let with_unit = |x: f64| {
        if t.unit.is_empty() {
            fmt_value(x)
        } else {
            format!("{} {}", fmt_value(x), t.unit)
        }
    };
    // Without spread (MR̄ = 0) there are no control limits (issue #20).
    let limit = |x: f64| {
        if l.has_spread() {
            with_unit(x)
        } else {
            "none (no spread)".to_string()
        }
    };
    let mut rows = vec![
        ("Centre line x̄".to_string(), with_unit(l.mean)),
        ("Mean moving range MR̄".to_string(), with_unit(l.mr_bar)),
        (
            "σ within (MR̄ / 1.128)".to_string(),
            with_unit(l.sigma_within),
        ),
        ("UCL (x̄ + 3σ)".to_string(), limit(l.ucl)),
        ("LCL (x̄ − 3σ)".to_string(), limit(l.lcl)),
        ("MR chart UCL (3.267 · MR̄)".to_string(), limit(l.mr_ucl)),
        (
            "Lots for the limits".to_string(),
            format!("{} of {}", t.baseline_n, t.n),
        ),
        (
            "Spec window".to_string(),
            spec_text(t.spec_min, t.spec_max, &t.unit),
        ),
        (
            "Spec revision".to_string(),
            t.spec_revision.clone().unwrap_or_else(|| "–".to_string()),
        ),
    ];
    if let Some(b) =
        chart::natural_lower_bound(&t.property, &t.unit).filter(|b| l.has_spread() && l.lcl < *b)
    {
        rows.insert(
            5,
            (
                "LCL drawn at (lowest possible value)".to_string(),
                with_unit(b),
            ),
        );
    }
    match &t.capability {
        None => {
            rows.push(("Cp, Cpk".to_string(), "no spec limit".to_string()));
            rows.push(("Pp, Ppk".to_string(), "no spec limit".to_string()));
        }
        Some(c) => {
            let one_sided = match c.cpk_side {
                Some(Side::Upper) => Some(("Cpu", "Ppu")),
                Some(Side::Lower) => Some(("Cpl", "Ppl")),
                None => None,
            };
            match one_sided {
                Some((k, pk)) => {
                    rows.push((format!("{k} (95 % CI)"), index_text(c.cpk, c.cpk_ci95)));
                    rows.push((pk.to_string(), format!("{:.2}", c.ppk)));
                    rows.push(("Cp, Pp".to_string(), "– (one-sided window)".to_string()));
                }
                None => {
                    let cp = c.cp.map_or("–".to_string(), |cp| index_text(cp, c.cp_ci95));
                    rows.push(("Cp (95 % CI)".to_string(), cp));
                    rows.push(("Cpk (95 % CI)".to_string(), index_text(c.cpk, c.cpk_ci95)));
                    let pp = c.pp.map_or("–".to_string(), |pp| format!("{pp:.2}"));
                    rows.push(("Pp".to_string(), pp));
                    rows.push(("Ppk".to_string(), format!("{:.2}", c.ppk)));
                }
            }
        }
    }
    let normality = match &t.normality {
        None => "not tested (fewer than 8 lots)".to_string(),
        Some(n) => {
            let p = if n.p_value < 0.001 {
                "p < 0.001".to_string()
            } else {
                format!("p = {:.3}", n.p_value)
            };
            if n.non_normal {
                format!("{p}, not normal")
            } else {
                p
            }
        }
    };
    rows.push(("Normality (Anderson-Darling)".to_string(), normality));
    rows
}

/// One property's page: header, chart, statistics and warnings in the right column, and the
/// first part of the signal list under the chart (`first`, lines of [`signal_lines`]).
#[allow(clippy::too_many_arguments)]
fn property_page(
    page: &mut Canvas,
    input: &ReportInput,
    t: &PropertyTrend,
    chart: &XObjectId,
    (px_w, px_h): (usize, usize),
    marked: &[MarkedLot],
    first: &[ListLine],
    rest: Option<(usize, usize)>,
) {
    let prop = property_title(t);
    // The property comes first so a long product name is what gets shortened.
    let title = format!("{prop}  ·  {} {}", input.product_code, input.product_name);
    let context = format!(
        "Lots manufactured {} to {}  ·  {} lots  ·  {}",
        t.date_from, t.date_to, t.n, input.site
    );
    page.header(input, &title, &context);

    // Chart image, scaled to CHART_W mm wide.
    let chart_h = CHART_W * px_h as f32 / px_w as f32;
    let dpi = px_w as f32 / (CHART_W / 25.4);
    page.ops.push(Op::UseXobject {
        id: chart.clone(),
        transform: XObjectTransform {
            translate_x: Some(pt_x(CHART_X)),
            translate_y: Some(pt_y(CHART_TOP + chart_h)),
            dpi: Some(dpi),
            ..XObjectTransform::default()
        },
    });

    // Statistics and warnings in the right column.
    page.heading(COL_X, CHART_TOP + 3.0, "Statistics");
    let rows = statistics_rows(t);
    let y = page.key_values(COL_X, COL_R, CHART_TOP + 10.0, &rows);
    let warn_top = y + 4.0;
    page.heading(COL_X, warn_top, &format!("Warnings ({})", t.warnings.len()));
    if t.warnings.is_empty() {
        page.text(Weight::Regular, 8.0, COL_X, warn_top + 7.0, MUTED, "None.");
    } else {
        page.bullets(COL_X, COL_R, warn_top + 7.0, BODY_BOTTOM, &t.warnings, WARN);
    }

    // Signals below the chart.
    let top = CHART_TOP + chart_h + 6.0;
    page.heading(CHART_X, top, "Signals, newest first");
    let summary = signal_summary(t, marked);
    for (k, line) in page
        .regular
        .wrap(&summary, 8.0, CHART_W)
        .iter()
        .take(2)
        .enumerate()
    {
        page.text(
            Weight::Regular,
            8.0,
            CHART_X,
            top + 5.0 + 3.7 * k as f32,
            MUTED,
            line,
        );
    }
    let y = list_lines(page, CHART_X, top + LIST_FIRST_OFFSET, first);
    if let Some((more, next_page)) = rest {
        and_more(
            page,
            (8.0, CHART_X, y),
            more,
            &format!(" (the chart marks every signalled lot): continued on page {next_page}"),
        );
    }
}

/// "Label (unit)", or the label alone without a unit.
fn property_title(t: &PropertyTrend) -> String {
    if t.unit.is_empty() {
        t.label.clone()
    } else {
        format!("{} ({})", t.label, t.unit)
    }
}

/// A page that carries on the signal list of a property whose first page ran out of room.
fn continuation_page(
    page: &mut Canvas,
    input: &ReportInput,
    t: &PropertyTrend,
    lines: &[ListLine],
    from_page: usize,
    rest: Option<(usize, usize)>,
) {
    let title = format!(
        "{}  ·  {} {}  ·  signals continued",
        property_title(t),
        input.product_code,
        input.product_name
    );
    let context = format!(
        "Signal list of the chart on page {from_page}, continued  ·  {}",
        input.site
    );
    page.header(input, &title, &context);
    page.heading(
        CHART_X,
        CHART_TOP + 3.0,
        "Signals, newest first (continued)",
    );
    let y = list_lines(page, CHART_X, CHART_TOP + 3.0 + LIST_CONT_OFFSET, lines);
    if let Some((more, next_page)) = rest {
        and_more(
            page,
            (8.0, CHART_X, y),
            more,
            &format!(" (the chart marks every signalled lot): continued on page {next_page}"),
        );
    }
}

/// How many of `count` table rows fit between the first row's baseline `y` (mm) and the foot
/// of the page body, one row every `step` mm, keeping one line for "and n more" when not all fit.
fn rows_shown(y: f32, step: f32, count: usize) -> usize {
    let room = ((BODY_BOTTOM - y) / step).floor().max(1.0) as usize + 1;
    if count <= room {
        count
    } else {
        room - 1
    }
}

/// The last line of a table cut short by [`rows_shown`]: "… and n more" and `tail`, set at
/// `size` points from `x`, `y` (mm); nothing when no row was left out (`more` = 0).
fn and_more(page: &mut Canvas, (size, x, y): (f32, f32, f32), more: usize, tail: &str) {
    if more > 0 {
        page.text(
            Weight::Regular,
            size,
            x,
            y,
            MUTED,
            &format!("… and {more} more{tail}"),
        );
    }
}

/// Line step of the signal list, mm.
const LIST_STEP: f32 = 3.9;
/// From the list heading to the first line's baseline: on a property page (below the
/// summary line) and on a continuation page, mm.
const LIST_FIRST_OFFSET: f32 = 14.2;
const LIST_CONT_OFFSET: f32 = 7.5;

/// One line of the signal list.
#[derive(Debug, Clone, PartialEq)]
enum ListLine {
    /// A group's head: what was found (coloured) and what it means.
    Head {
        /// "outside the spec window" or "rule 2".
        check: String,
        /// Colour of the check.
        colour: (f32, f32, f32),
        /// The plain-words description (or the rest of it, on a wrapped line).
        text: String,
    },
    /// Lots of the group, each with its tag number, id, manufacture date and (outside the
    /// spec window) its value, in cells of the given width (mm) so that they line up.
    Lots(Vec<ListItem>, f32),
}

/// One lot in the signal list.
#[derive(Debug, Clone, PartialEq)]
struct ListItem {
    number: usize,
    colour: (f32, f32, f32),
    lot: String,
    made: String,
    value: Option<String>,
}

/// The summary under the list heading: how many signals on how many lots, the newest and the
/// first, and the lots outside the spec window.
fn signal_summary(t: &PropertyTrend, marked: &[MarkedLot]) -> String {
    let outside = marked.iter().filter(|m| m.outside.is_some()).count();
    let outside_text = match outside {
        0 => "no lot outside the spec window".to_string(),
        1 => "1 lot outside the spec window".to_string(),
        k => format!("{k} lots outside the spec window"),
    };
    match (t.signals.first(), t.signals.last()) {
        (Some(first), Some(newest)) => {
            let lots = marked.iter().filter(|m| !m.rules.is_empty()).count();
            format!(
                "{} run-rule signals on {lots} lots: newest at {} ({}), first at {} ({}); {outside_text}. Tag numbers as on the chart.",
                t.signals.len(),
                newest.lot,
                newest.manufactured,
                first.lot,
                first.manufactured
            )
        }
        _ => format!("No Nelson rule signal among the selected lots; {outside_text}."),
    }
}

/// The signal list of one property as lines `width` mm wide: first the lots outside the spec
/// window, then one group per run rule (and direction), groups ordered by their newest lot and
/// lots newest first within each group, every lot with the tag number it has on the chart.
fn signal_lines(face: &Face, t: &PropertyTrend, marked: &[MarkedLot], width: f32) -> Vec<ListLine> {
    const SIZE: f32 = 8.0;
    let made = |i: usize| {
        if i < t.lots.len() {
            t.lots.date(i).to_string()
        } else {
            String::new()
        }
    };
    // Each group: what was found, its colour, what it means, and its lots.
    type Group = (String, (f32, f32, f32), String, Vec<ListItem>);
    let mut groups: Vec<Group> = Vec::new();
    let outside: Vec<ListItem> = marked
        .iter()
        .filter(|m| m.outside.is_some())
        .map(|m| ListItem {
            number: m.number,
            colour: OUT,
            lot: t.lots[m.index].to_string(),
            made: made(m.index),
            value: Some(fmt_value(t.values[m.index])),
        })
        .collect();
    if !outside.is_empty() {
        groups.push((
            "outside the spec window".to_string(),
            OUT,
            format!(
                "the lot's value lies outside the spec window {} (value after the date)",
                spec_text(t.spec_min, t.spec_max, &t.unit)
            ),
            outside,
        ));
    }
    let mut rule_groups: Vec<(u8, &'static str, Vec<ListItem>)> = Vec::new();
    for m in marked.iter().filter(|m| !m.rules.is_empty()) {
        for s in t.signals.iter().filter(|s| s.index == m.index) {
            let item = ListItem {
                number: m.number,
                colour: if m.outside.is_some() { OUT } else { WARN },
                lot: s.lot.clone(),
                made: s.manufactured.clone(),
                value: None,
            };
            match rule_groups
                .iter_mut()
                .find(|g| g.0 == s.rule && g.1 == s.description)
            {
                Some(g) => {
                    if !g.2.iter().any(|i| i.number == m.number) {
                        g.2.push(item);
                    }
                }
                None => rule_groups.push((s.rule, s.description, vec![item])),
            }
        }
    }
    for (rule, description, items) in rule_groups {
        let n = items.len();
        let lots = if n == 1 {
            "1 lot".to_string()
        } else {
            format!("{n} lots")
        };
        groups.push((
            format!("rule {rule}"),
            WARN,
            format!("{description} ({lots})"),
            items,
        ));
    }
    let mut lines = Vec::new();
    for (check, colour, text, items) in groups {
        let check_w = face.width_mm(&check, SIZE) + 3.0;
        let mut first = true;
        for l in face.wrap(&text, SIZE, width - check_w) {
            lines.push(ListLine::Head {
                check: if first { check.clone() } else { String::new() },
                colour,
                text: l,
            });
            first = false;
        }
        let cell = items
            .iter()
            .map(|i| item_width(face, i, SIZE))
            .fold(0.0, f32::max);
        let per_line = ((width - 3.0) / cell).floor().max(1.0) as usize;
        for chunk in items.chunks(per_line) {
            lines.push(ListLine::Lots(chunk.to_vec(), cell));
        }
    }
    lines
}

/// Width of one lot in the list: tag, lot id, date and value, with the gap after it (mm).
fn item_width(face: &Face, item: &ListItem, size: f32) -> f32 {
    let tag = face.width_mm(&item.number.to_string(), size) + 2.4;
    let value = item
        .value
        .as_ref()
        .map_or(0.0, |v| face.width_mm(v, size) + 2.0);
    tag + 1.5 + face.width_mm(&item.lot, size) + 2.0 + face.width_mm(&item.made, size) + value + 6.0
}

/// Draws list lines from baseline `y` down; returns the baseline after the last.
fn list_lines(page: &mut Canvas, x: f32, mut y: f32, lines: &[ListLine]) -> f32 {
    const SIZE: f32 = 8.0;
    for line in lines {
        match line {
            ListLine::Head {
                check,
                colour,
                text,
            } => {
                let check_w = if check.is_empty() {
                    page.bold.width_mm("rule 0", SIZE) + 3.0
                } else {
                    page.text(Weight::Bold, SIZE, x, y, *colour, check);
                    page.bold.width_mm(check, SIZE) + 3.0
                };
                page.text(Weight::Regular, SIZE, x + check_w, y, INK, text);
            }
            ListLine::Lots(items, cell) => {
                for (k, item) in items.iter().enumerate() {
                    let mut cx = x + 3.0 + cell * k as f32;
                    let number = item.number.to_string();
                    let tag_w = page.bold.width_mm(&number, SIZE) + 2.4;
                    page.fill(cx, y - 2.9, tag_w, 3.7, item.colour);
                    page.text(Weight::Bold, SIZE, cx + 1.2, y, WHITE, &number);
                    cx += tag_w + 1.5;
                    page.text(Weight::Regular, SIZE, cx, y, INK, &item.lot);
                    cx += page.regular.width_mm(&item.lot, SIZE) + 2.0;
                    page.text(Weight::Regular, SIZE, cx, y, MUTED, &item.made);
                    cx += page.regular.width_mm(&item.made, SIZE);
                    if let Some(v) = &item.value {
                        cx += 2.0;
                        page.text(Weight::Bold, SIZE, cx, y, OUT, v);
                    }
                }
            }
        }
        y += LIST_STEP;
    }
    y
}

/// Splits the list lines of one property into the part on its own page (below the chart,
/// from `first_y`) and the parts on continuation pages, keeping a line for the "continued"
/// note on every part but the last.
fn paginate(lines: Vec<ListLine>, first_y: f32) -> Vec<Vec<ListLine>> {
    let cont_y = CHART_TOP + 3.0 + LIST_CONT_OFFSET;
    let mut parts = Vec::new();
    let mut rest = lines;
    let mut y = first_y;
    loop {
        let take = rows_shown(y, LIST_STEP, rest.len());
        let tail = rest.split_off(take.min(rest.len()));
        parts.push(rest);
        if tail.is_empty() {
            return parts;
        }
        rest = tail;
        y = cont_y;
    }
}

/// Lot entries in list lines (a lot signalled by two rules is listed under each).
fn entries_in(lines: &[ListLine]) -> usize {
    lines
        .iter()
        .map(|l| match l {
            ListLine::Lots(items, _) => items.len(),
            ListLine::Head { .. } => 0,
        })
        .sum()
}

/// The viscosity–Mn page: the log-log plot, the fit, the lots off the line and what they mean.
fn viscosity_page(
    page: &mut Canvas,
    input: &ReportInput,
    v: &ViscosityCheck,
    chart: &XObjectId,
    (px_w, px_h): (usize, usize),
) {
    let title = format!(
        "{} {}  ·  Viscosity against Mn",
        input.product_code, input.product_name
    );
    let context = format!(
        "Least-squares fit of log10 viscosity on log10 Mn over {} lots  ·  {}",
        v.fit.n, input.site
    );
    page.header(input, &title, &context);
    let chart_h = CHART_W * px_h as f32 / px_w as f32;
    page.ops.push(Op::UseXobject {
        id: chart.clone(),
        transform: XObjectTransform {
            translate_x: Some(pt_x(CHART_X)),
            translate_y: Some(pt_y(CHART_TOP + chart_h)),
            dpi: Some(px_w as f32 / (CHART_W / 25.4)),
            ..XObjectTransform::default()
        },
    });
    let f = &v.fit;
    let left = COL_X;
    let right = COL_R;
    page.heading(left, CHART_TOP + 3.0, "Log-log fit");
    let rows = vec![
        (
            "Exponent (slope) ± standard error".to_string(),
            format!("{:.3} ± {:.3}", f.exponent, f.exponent_se),
        ),
        (
            "Intercept log10 K".to_string(),
            format!("{:.4}", f.intercept),
        ),
        ("R²".to_string(), format!("{:.4}", f.r_squared)),
        ("Lots with both values (n)".to_string(), f.n.to_string()),
        (
            "Robust SD of residuals (1.4826 · MAD, log10)".to_string(),
            format!("{:.4}", f.robust_sd),
        ),
        (
            "Flagged beyond".to_string(),
            format!("{} robust SD", crate::stats::regression::FLAG_SIGMAS),
        ),
        (
            "Lots off the line".to_string(),
            v.off_line.len().to_string(),
        ),
    ];
    let y = page.key_values(left, right, CHART_TOP + 10.0, &rows);
    let notes = vec![
        "Common practice: an exponent near 1 is expected for unentangled melts, about 3.4 above the entanglement molar mass.".to_string(),
        "A viscosity off the line for its Mn points to branching, contamination or a wrong solids content, which neither property's own chart shows.".to_string(),
    ];
    page.bullets(
        CHART_X,
        CHART_X + CHART_W,
        CHART_TOP + chart_h + 6.0,
        BODY_BOTTOM,
        &notes,
        ACCENT,
    );
    off_line_table(page, v, y + 6.0);
}

/// The lots off the viscosity–Mn line, in the right column from `top` (as many as fit, then a
/// count of the rest).
fn off_line_table(page: &mut Canvas, v: &ViscosityCheck, top: f32) {
    let x = COL_X;
    let r = COL_R;
    page.heading(x, top, &format!("Lots off the line ({})", v.off_line.len()));
    let mut y = top + 7.0;
    const SIZE: f32 = 8.5;
    const STEP: f32 = 4.6;
    if v.off_line.is_empty() {
        page.text(
            Weight::Regular,
            SIZE,
            x,
            y,
            MUTED,
            "No lot is off the line by more than 3 robust SD.",
        );
        return;
    }
    let x_date = x + 42.0;
    for (cx, h) in [(x, "Lot"), (x_date, "Made")] {
        page.text(Weight::Bold, SIZE, cx, y, MUTED, h);
    }
    page.text_right(Weight::Bold, SIZE, r, y, MUTED, "Robust z");
    page.fill(x, y + 1.2, r - x, 0.2, MUTED);
    y += STEP + 0.5;
    let shown = rows_shown(y, STEP, v.off_line.len());
    for (i, o) in v.off_line.iter().take(shown).enumerate() {
        if i % 2 == 1 {
            page.fill(x, y - 3.2, r - x, STEP, ROW_SHADE);
        }
        let lot = page.regular.fit(&o.lot, SIZE, 40.0);
        page.text(Weight::Regular, SIZE, x, y, INK, &lot);
        page.text(Weight::Regular, SIZE, x_date, y, INK, &o.manufactured);
        let z = if o.robust_z.is_finite() {
            format!("{:+.1}", o.robust_z)
        } else {
            "off (MAD = 0)".to_string()
        };
        page.text_right(Weight::Regular, SIZE, r, y, INK, &z);
        y += STEP;
    }
    and_more(page, (SIZE, x, y), v.off_line.len() - shown, "");
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::query::{LotRow, LotTable};
    use crate::stats::{RuleSet, SpecWindow};
    use crate::trend::product::{property_trend, viscosity_check, Baseline};
    use printpdf::PdfParseOptions;

    #[test]
    fn rows_shown_keeps_a_line_for_and_n_more() {
        // First principles: from y = BODY_BOTTOM - 10 at 4 mm a row, floor(10/4) + 1 = 3 rows fit.
        let y = BODY_BOTTOM - 10.0;
        assert_eq!(rows_shown(y, 4.0, 3), 3);
        assert_eq!(
            rows_shown(y, 4.0, 4),
            2,
            "two rows and the \"and n more\" line"
        );
        assert_eq!(
            rows_shown(BODY_BOTTOM, 4.0, 5),
            1,
            "at least two lines of room"
        );
    }

    /// INVENTED test lots "TST-001"…: column 0 is Mn (g/mol), column 1 acid value (mg KOH/g),
    /// column 2 viscosity (mPa·s). Mn scatters around 2000 for 14 lots (the frozen baseline), then
    /// sits about 4 g/mol higher, so that nine lots in a row lie above the centre line (Nelson
    /// rule 2) while staying well inside the control limits. Viscosity
    /// follows η = 1e-3 · Mn^2 except lot TST-020, which is 60 % high.
    fn invented_lots() -> Vec<LotRow> {
        let wiggle = [
            0.0, 6.0, 4.0, -5.0, -2.0, 3.0, -7.0, -3.0, 4.0, 9.0, -6.0, 2.0, -1.0, -4.0,
        ];
        (0..30)
            .map(|i| {
                let mn = if i < 14 {
                    2000.0 + wiggle[i]
                } else {
                    2007.0 + wiggle[i % 14] * 0.6
                };
                let av = 1.2 + 0.05 * ((i * 7) % 5) as f64;
                let mut visc = 1e-3 * mn * mn;
                if i == 19 {
                    visc *= 1.6;
                }
                LotRow {
                    line: i + 2,
                    lot: format!("TST-{:03}", i + 1).into(),
                    manufactured: format!("2026-03-{:02}", i + 1).as_str().into(),
                    status: "released",
                    revision: "B",
                    mn_uncertainty: Some(20.0),
                    values: vec![Some(mn), Some(av), Some(visc)],
                }
            })
            .collect()
    }

    fn trends(lots: &[LotRow]) -> Vec<PropertyTrend> {
        let mn = property_trend(
            "TP-100",
            "mn",
            0,
            "Mn",
            "g/mol",
            &std::sync::Arc::new(LotTable::from_rows(lots)),
            SpecWindow {
                min: Some(1900.0),
                max: Some(2100.0),
            },
            Some("B".into()),
            &Baseline::First(14),
            RuleSet::ALL,
        )
        .unwrap();
        let av = property_trend(
            "TP-100",
            "acid_value",
            1,
            "Acid value",
            "mg KOH/g",
            &std::sync::Arc::new(LotTable::from_rows(lots)),
            SpecWindow {
                min: None,
                max: Some(2.0),
            },
            Some("B".into()),
            &Baseline::First(20),
            RuleSet::ALL,
        )
        .unwrap();
        vec![mn, av]
    }

    fn input<'a>(
        trends: &'a [PropertyTrend],
        viscosity: Option<&'a ViscosityCheck>,
    ) -> ReportInput<'a> {
        ReportInput {
            product_code: "TP-100",
            product_name: "Test polyol (invented)",
            generated_on: NaiveDate::from_ymd_opt(2026, 4, 2).unwrap(),
            site: "Test site (invented)",
            trends,
            viscosity,
        }
    }

    /// Renders; with RESINLOT_SAMPLE_DIR set, also writes the PDF there for looking at.
    fn render(name: &str, input: &ReportInput) -> Vec<u8> {
        let pdf = render_report(input).unwrap();
        if let Some(dir) = std::env::var_os("RESINLOT_SAMPLE_DIR") {
            let dir = std::path::PathBuf::from(dir);
            std::fs::create_dir_all(&dir).unwrap();
            std::fs::write(dir.join(format!("{name}.pdf")), &pdf).unwrap();
        }
        pdf
    }

    /// Text of each page, read back with printpdf's parser, whitespace normalised.
    fn page_texts(pdf: &[u8]) -> Vec<String> {
        let mut warnings = Vec::new();
        let doc = PdfDocument::parse(pdf, &PdfParseOptions::default(), &mut warnings).unwrap();
        doc.extract_text()
            .into_iter()
            .map(|runs| {
                runs.join(" ")
                    .split_whitespace()
                    .collect::<Vec<_>>()
                    .join(" ")
            })
            .collect()
    }

    #[test]
    fn invented_drift_triggers_rule_2() {
        let lots = invented_lots();
        let t = trends(&lots);
        assert!(
            t[0].signals.iter().any(|s| s.rule == 2),
            "{:?}",
            t[0].signals
        );
    }

    #[test]
    fn one_page_per_property_with_label_page_number_signal_and_ucl() {
        let lots = invented_lots();
        let t = trends(&lots);
        let pdf = render("trend_report", &input(&t, None));
        let pages = page_texts(&pdf);
        assert_eq!(pages.len(), 2);
        for (i, (page, trend)) in pages.iter().zip(&t).enumerate() {
            assert!(page.contains(&trend.label), "page {i}: {page}");
            assert!(page.contains(&format!("Page {} of 2", i + 1)), "{page}");
            assert!(page.contains("Trend report"), "{page}");
            assert!(page.contains("TP-100"), "{page}");
            assert!(page.contains(&fmt_value(trend.limits.ucl)), "{page}");
            assert!(page.contains(&fmt_value(trend.limits.lcl)), "{page}");
        }
        let rule2 = t[0].signals.iter().find(|s| s.rule == 2).unwrap();
        assert!(pages[0].contains(&rule2.lot), "{}", pages[0]);
        assert!(pages[0].contains(rule2.description), "{}", pages[0]);
        // The one-sided acid value window gives Cpu, not Cp.
        assert!(pages[1].contains("Cpu"), "{}", pages[1]);
        assert!(pages[1].contains("≤ 2.000 mg KOH/g"), "{}", pages[1]);
        assert!(
            pages[1].contains("limits frozen from the first 20 lots"),
            "{}",
            pages[1]
        );
    }

    #[test]
    fn viscosity_page_lists_the_lot_off_the_line() {
        let lots = invented_lots();
        let t = trends(&lots);
        let v = viscosity_check(&LotTable::from_rows(&lots), 0, 2).unwrap();
        assert!(
            v.off_line.iter().any(|o| o.lot == "TST-020"),
            "{:?}",
            v.off_line
        );
        let pdf = render("trend_report_viscosity", &input(&t, Some(&v)));
        let pages = page_texts(&pdf);
        assert_eq!(pages.len(), 3);
        for (i, page) in pages.iter().enumerate() {
            assert!(page.contains(&format!("Page {} of 3", i + 1)), "{page}");
        }
        let last = &pages[2];
        assert!(last.contains("Viscosity against Mn"), "{last}");
        assert!(last.contains("TST-020"), "{last}");
        assert!(
            last.contains(&format!("{:.3} ± {:.3}", v.fit.exponent, v.fit.exponent_se)),
            "{last}"
        );
    }

    #[test]
    fn many_signals_end_in_and_n_more() {
        // INVENTED: a steadily rising series gives a rule 3 signal at nearly every lot.
        let lots: Vec<LotRow> = (0..80)
            .map(|i| LotRow {
                line: i + 2,
                lot: format!("RISE-{:03}", i + 1).into(),
                manufactured: format!("2026-{:02}-{:02}", 1 + i / 28, 1 + i % 28)
                    .as_str()
                    .into(),
                status: "released",
                revision: "A",
                mn_uncertainty: None,
                values: vec![Some(100.0 + i as f64 + 0.1 * ((i * 3) % 4) as f64)],
            })
            .collect();
        let t = vec![property_trend(
            "TP-100",
            "mn",
            0,
            "Mn",
            "g/mol",
            &std::sync::Arc::new(LotTable::from_rows(&lots)),
            SpecWindow {
                min: None,
                max: None,
            },
            None,
            &Baseline::All,
            RuleSet::ALL,
        )
        .unwrap()];
        assert!(t[0].signals.len() > 20);
        let pdf = render("trend_report_many", &input(&t, None));
        let page = &page_texts(&pdf)[0];
        assert!(
            page.contains("more (the chart marks every signalled lot)"),
            "{page}"
        );
        assert!(page.contains("no spec limit"), "{page}");
        assert!(page.contains(&t[0].signals[0].lot), "{page}");
    }

    #[test]
    fn long_names_and_many_warnings_are_cut_to_fit() {
        let lots = invented_lots();
        let mut t = trends(&lots);
        t.truncate(1);
        for i in 0..30 {
            t[0].warnings.push(format!(
                "invented warning number {i} with enough words to wrap onto a second line in the right column"
            ));
        }
        let mut inp = input(&t, None);
        inp.product_name = "An invented product name long enough to run into the date on the right of the title line";
        let pdf = render("trend_report_crowded", &inp);
        let page = &page_texts(&pdf)[0];
        assert!(page.contains("more"), "{page}");
        assert!(page.contains("…"), "{page}");
        assert!(page.contains("Page 1 of 1"), "{page}");
    }

    #[test]
    fn rendering_is_deterministic() {
        let lots = invented_lots();
        let t = trends(&lots);
        let v = viscosity_check(&LotTable::from_rows(&lots), 0, 2).unwrap();
        let a = render_report(&input(&t, Some(&v))).unwrap();
        let b = render_report(&input(&t, Some(&v))).unwrap();
        assert!(a == b, "two renders of the same input differ");
    }

    #[test]
    fn no_trend_is_an_error() {
        let err = render_report(&input(&[], None)).unwrap_err();
        assert!(err.to_string().contains("TP-100"), "{err}");
    }

    /// INVENTED: 80 lots rising steadily (as in `many_signals_end_in_and_n_more`).
    fn rising() -> Vec<PropertyTrend> {
        let lots: Vec<LotRow> = (0..80)
            .map(|i| LotRow {
                line: i + 2,
                lot: format!("RISE-{:03}", i + 1).into(),
                manufactured: format!("2026-{:02}-{:02}", 1 + i / 28, 1 + i % 28)
                    .as_str()
                    .into(),
                status: "released",
                revision: "A",
                mn_uncertainty: None,
                values: vec![Some(100.0 + i as f64 + 0.1 * ((i * 3) % 4) as f64)],
            })
            .collect();
        vec![property_trend(
            "TP-100",
            "mn",
            0,
            "Mn",
            "g/mol",
            &std::sync::Arc::new(LotTable::from_rows(&lots)),
            SpecWindow {
                min: None,
                max: Some(175.0),
            },
            None,
            &Baseline::All,
            RuleSet::ALL,
        )
        .unwrap()]
    }

    #[test]
    fn issue_19_every_signal_is_listed_newest_first_continuing_on_following_pages() {
        let t = rising();
        let pdf = render("trend_report_issue19", &input(&t, None));
        let pages = page_texts(&pdf);
        assert!(pages.len() > 1, "{} pages", pages.len());
        // The newest signal's lot is on the property's own page, and the list says where it
        // goes on.
        let newest = &t[0].signals.last().unwrap().lot;
        assert!(pages[0].contains(newest.as_str()), "{}", pages[0]);
        assert!(pages[0].contains("continued on page 2"), "{}", pages[0]);
        // Every signalled lot is listed somewhere, and every continuation page says so.
        let all = pages.join(" ");
        for s in &t[0].signals {
            assert!(
                all.contains(&format!("{} {}", s.lot, s.manufactured)),
                "{}",
                s.lot
            );
        }
        for (i, page) in pages.iter().enumerate().skip(1) {
            assert!(page.contains("signals continued"), "page {}: {page}", i + 1);
            assert!(page.contains(&format!("Page {} of {}", i + 1, pages.len())));
        }
        // Lots above the USL 175 come first, as outside the spec window, before any rule.
        let outside = pages[0]
            .find("the lot's value lies outside the spec window")
            .unwrap();
        let rule = pages[0].find("rule 1").unwrap();
        assert!(outside < rule, "{}", pages[0]);
        // Bars are drawn, not left to a combining mark the PDF text path would drop.
        assert!(!all.contains(visual::OVERBAR));
        assert!(pages[0].contains("Mean moving range MR"), "{}", pages[0]);
    }
}
