//! PDF step: lays the certificate HTML out with printpdf's HTML engine on A4, one page at a
//! time when it runs to several (see [`crate::certificate::render::layout`]), using only the
//! bundled DejaVu fonts, then stamps footer and NOT RELEASED marking with printpdf operations.

use std::collections::{BTreeMap, HashMap};
use std::sync::{Arc, Mutex, OnceLock};

use printpdf::html::{rust_fontconfig, SharedFontPool};
use printpdf::{
    Color, FontId, GeneratePdfOptions, Op, PaintMode, ParsedFont, PdfDocument, PdfFont,
    PdfFontHandle, PdfPage, PdfSaveOptions, Point, Pt, Rect, Rgb, TextItem, TextMatrix,
    TextRenderingMode,
};

use crate::certificate::model::Certificate;
use crate::certificate::render::engine::{self, PageBox, Registered};
use crate::certificate::render::layout::{self, Heights, PagePlan};
use crate::certificate::render::Templates;
use crate::error::{Error, Result};

use crate::support::fonts::{advance_width, DEJAVU_SANS, DEJAVU_SANS_BOLD};

/// A4 in millimetres (ISO 216).
const PAGE_W_MM: f32 = 210.0;
const PAGE_H_MM: f32 = 297.0;
/// Points per millimetre (1 pt = 1/72 in, 1 in = 25.4 mm).
const PT_PER_MM: f32 = 72.0 / 25.4;
/// Page margins of the HTML layout, mm. The bottom margin leaves room for the stamped footer,
/// the top margin for the NOT RELEASED banner: on continuation pages printpdf 0.12 draws a
/// table row split by a page break up to about 7 mm above the top margin, so the banner
/// (3 to 11 mm from the top edge) stays clear of content only with a 22 mm margin.
const MARGIN_TOP_MM: f32 = 22.0;
/// Distance of the banner's lower edge from the top edge of the page, mm.
pub const BANNER_BOTTOM_MM: f32 = 11.0;
const MARGIN_SIDE_MM: f32 = 16.0;
const MARGIN_BOTTOM_MM: f32 = 20.0;

/// The fonts every certificate is laid out with, parsed once and shared across threads.
///
/// Only the bundled fonts are registered: no system font is scanned or used, so a certificate
/// looks the same on every machine.
#[derive(Debug, Clone)]
pub struct FontPool {
    pool: SharedFontPool,
    /// The same faces parsed for the stamps drawn after layout (footer, marking).
    regular: ParsedFont,
    bold: ParsedFont,
    /// printpdf's built-in faces registered once with a font manager over `pool`, on first
    /// use: only a template that names one of their families needs them (issue #20).
    registered: Arc<OnceLock<std::result::Result<Registered, String>>>,
}

impl FontPool {
    /// Builds the pool from the bundled DejaVu Sans regular and bold faces. The template
    /// selects them with `font-family: "DejaVu Sans"` and `font-weight: bold`.
    pub fn bundled() -> FontPool {
        // An empty fontconfig cache with only our memory fonts: printpdf's
        // `build_font_pool` would also scan the system font folders.
        let cache = rust_fontconfig::FcFontCache::default();
        for (name, bytes) in [
            ("DejaVu Sans", DEJAVU_SANS),
            ("DejaVu Sans Bold", DEJAVU_SANS_BOLD),
        ] {
            if let Some(faces) = rust_fontconfig::FcParseFontBytes(bytes, name) {
                cache.with_memory_fonts(faces);
            }
        }
        let pool = SharedFontPool {
            fc_cache: Arc::new(cache),
            parsed_fonts: Arc::new(Mutex::new(HashMap::new())),
        };
        let parse = |bytes: &[u8]| {
            ParsedFont::from_bytes(bytes, 0, &mut Vec::new())
                .expect("the bundled DejaVu fonts are valid TrueType files")
        };
        FontPool {
            pool,
            regular: parse(DEJAVU_SANS),
            bold: parse(DEJAVU_SANS_BOLD),
            registered: Arc::new(OnceLock::new()),
        }
    }
}

/// A bundled face registered in one document, for drawing stamps.
struct StampFont<'a> {
    id: FontId,
    face: &'a ParsedFont,
}

impl<'a> StampFont<'a> {
    /// Registers `face` in `doc` under the id printpdf's HTML bridge gives it (`F<hash>`),
    /// reusing the entry when the layout already embedded the same face.
    fn register(doc: &mut PdfDocument, face: &'a ParsedFont) -> StampFont<'a> {
        let id = FontId(format!("F{}", face.hash));
        doc.resources
            .fonts
            .map
            .entry(id.clone())
            .or_insert_with(|| PdfFont::new(face.clone()));
        StampFont { id, face }
    }

    /// Advance width of `text` at `size` points ([`advance_width`]).
    fn width(&self, text: &str, size: f32) -> f32 {
        advance_width(self.face, text, size)
    }

    /// Cap height at `size` points (OS/2 sCapHeight; 0.73 em when the font omits it).
    fn cap_height(&self, size: f32) -> f32 {
        let upem = f32::from(self.face.font_metrics.units_per_em);
        self.face
            .font_metrics
            .cap_height
            .map_or(0.73 * size, |c| c / upem * size)
    }

    fn handle(&self) -> PdfFontHandle {
        PdfFontHandle::External(self.id.clone())
    }
}

/// Lays the certificate out as an A4 PDF and stamps every page with the certificate number and
/// "Page x of y", plus the NOT RELEASED marking when `cert.released` is false.
///
/// A certificate that fits one page is laid out whole. A longer one is paginated by resinlot
/// ([`layout::plan`]): the head and closing block are measured by laying them out alone, the
/// rows and footnotes with the font's metrics; each page is then laid out on its own from the
/// template (table header repeated) and checked to fit one page; a page that does not is
/// planned again with one unit fewer.
/// `whole_html` is the certificate rendered whole ([`Templates::render`]).
pub fn render_pdf(
    templates: &Templates,
    whole_html: &str,
    cert: &Certificate,
    fonts: &FontPool,
) -> Result<Vec<u8>> {
    let first = lay_out(templates, whole_html, cert, fonts)?;
    let mut doc = if first.pages.len() == 1 || !templates.paged() {
        first
    } else {
        paginate(templates, cert, fonts)?
    };
    set_metadata(&mut doc, cert);
    let regular = StampFont::register(&mut doc, &fonts.regular);
    let bold = StampFont::register(&mut doc, &fonts.bold);
    let pages = doc.pages.len();
    for (i, page) in doc.pages.iter_mut().enumerate() {
        stamp_footer(page, cert, i + 1, pages, &regular, &bold);
        if !cert.released {
            stamp_not_released(page, &bold);
        }
    }
    let mut bytes = save(&doc);
    crate::support::pdf_meta::drop_empty_pdfx_version(&mut bytes);
    set_document_id(&mut bytes, cert);
    Ok(bytes)
}

/// zlib level of the PDF's streams (content and font programs). printpdf's `save` uses the
/// best compression (level 9). Level 6 (zlib's default) takes about a fifth less time for a
/// file 0.3 % larger (the benchmark's sample: 42,960 to 43,086 bytes); level 1 took 70 % less
/// time but made the demo certificate 29 % larger (45.7 to 58.8 kB), too much for files kept
/// for good (issue #20; README, Performance).
const COMPRESSION_LEVEL: u32 = 6;

/// The PDF file of `doc`: printpdf's `save` (font subsetting, the lopdf document) with
/// the streams compressed at [`COMPRESSION_LEVEL`], deterministic for the same document.
fn save(doc: &PdfDocument) -> Vec<u8> {
    use std::io::Write;
    let mut warnings = Vec::new();
    let mut lo = doc.to_lopdf_document(&PdfSaveOptions::default(), &mut warnings);
    for object in lo.objects.values_mut() {
        if let lopdf::Object::Stream(stream) = object {
            // As lopdf's `Stream::compress`: only streams not yet filtered, and only when
            // compressing saves bytes.
            if !stream.allows_compression || stream.dict.get(b"Filter").is_ok() {
                continue;
            }
            let mut encoder = flate2::write::ZlibEncoder::new(
                Vec::new(),
                flate2::Compression::new(COMPRESSION_LEVEL),
            );
            let packed = encoder
                .write_all(&stream.content)
                .and_then(|()| encoder.finish());
            if let Ok(packed) = packed {
                if packed.len() + 19 < stream.content.len() {
                    stream.dict.set("Filter", "FlateDecode");
                    stream.set_content(packed);
                }
            }
        }
    }
    let mut bytes = Vec::new();
    lo.save_to(&mut bytes)
        .expect("writing a PDF into memory cannot fail");
    bytes
}

/// Title, author (the issuing site), subject (lot and certificate number) and keywords, and
/// the reproducible creator and dates ([`crate::support::pdf_meta::set_creator_and_day`]).
/// No conformance (PDF/A, PDF/X) is claimed: the file is plain PDF.
fn set_metadata(doc: &mut PdfDocument, cert: &Certificate) {
    let info = &mut doc.metadata.info;
    info.document_title = format!("{} {}", cert.title, cert.number);
    info.author = cert.issuer.name.clone();
    info.subject = format!(
        "Lot{} {} of {}, certificate No. {}",
        if cert.lots.len() > 1 { "s" } else { "" },
        lot_ids(cert),
        cert.product.code,
        cert.number
    );
    info.identifier = cert.number.clone();
    info.keywords = vec![
        "certificate of analysis".to_string(),
        cert.product.code.clone(),
        cert.lot.id.clone(),
    ];
    // Document dates: the issue date at 00:00 UTC, so the file is reproducible.
    crate::support::pdf_meta::set_creator_and_day(doc, cert.issue_date);
}

/// The certificate's lot ids, comma-separated (several on a delivery of several lots, #16).
fn lot_ids(cert: &Certificate) -> String {
    if cert.lots.len() > 1 {
        let ids: Vec<&str> = cert.lots.iter().map(|l| l.id.as_str()).collect();
        ids.join(", ")
    } else {
        cert.lot.id.clone()
    }
}

/// Lays one HTML document out on A4 pages with the bundled fonts: through [`engine`], with
/// the fonts set up once per process, or through printpdf's own `from_html_with_cache` when
/// the pages use a face other than the bundled ones. printpdf's built-in faces are registered
/// (once) only for templates that name one of their families
/// ([`Templates::names_builtin_family`]); no other template can reach them.
fn lay_out(
    templates: &Templates,
    html: &str,
    cert: &Certificate,
    fonts: &FontPool,
) -> Result<PdfDocument> {
    let page = PageBox {
        width: PAGE_W_MM,
        height: PAGE_H_MM,
        top: MARGIN_TOP_MM,
        right: MARGIN_SIDE_MM,
        bottom: MARGIN_BOTTOM_MM,
        left: MARGIN_SIDE_MM,
    };
    let faces = [&fonts.regular, &fonts.bold];
    let registered = if templates.names_builtin_family() {
        let once = fonts
            .registered
            .get_or_init(|| Registered::new(&fonts.pool));
        Some(once.as_ref().map_err(|e| layout_error(cert, e))?)
    } else {
        None
    };
    let mut warnings = Vec::new();
    let doc = match engine::lay_out(html, page, &fonts.pool, registered, &faces)
        .map_err(|e| layout_error(cert, &e))?
    {
        Some(doc) => doc,
        None => lay_out_printpdf(html, cert, fonts, &mut warnings)?,
    };
    if doc.pages.is_empty() {
        let detail = warnings
            .iter()
            .map(|w| w.msg.clone())
            .collect::<Vec<_>>()
            .join("; ");
        return Err(layout_error(
            cert,
            &format!("no page was produced ({detail})"),
        ));
    }
    Ok(doc)
}

/// [`lay_out`] through printpdf's own HTML entry point.
fn lay_out_printpdf(
    html: &str,
    cert: &Certificate,
    fonts: &FontPool,
    warnings: &mut Vec<printpdf::PdfWarnMsg>,
) -> Result<PdfDocument> {
    let options = GeneratePdfOptions {
        page_width: Some(PAGE_W_MM),
        page_height: Some(PAGE_H_MM),
        margin_top: Some(MARGIN_TOP_MM),
        margin_right: Some(MARGIN_SIDE_MM),
        margin_bottom: Some(MARGIN_BOTTOM_MM),
        margin_left: Some(MARGIN_SIDE_MM),
        ..GeneratePdfOptions::default()
    };
    PdfDocument::from_html_with_cache(
        html,
        &BTreeMap::new(),
        // The faces reach the layout through the pool's font cache; passing them again in
        // this map makes printpdf re-register both on every call and gives byte-identical
        // output, so the map stays empty.
        &BTreeMap::new(),
        &options,
        warnings,
        Some(fonts.pool.clone()),
    )
    .map_err(|e| layout_error(cert, &e))
}

/// Top edge of the content box, pt from the bottom of the page.
fn content_top() -> f32 {
    (PAGE_H_MM - MARGIN_TOP_MM) * PT_PER_MM
}

/// Height used on the first page of `doc`, pt from the top of the content box: down to the
/// lowest drawn line or shape, or the lowest text baseline less a descender (0.25 em).
pub(crate) fn used_height(doc: &PdfDocument) -> f32 {
    let Some(page) = doc.pages.first() else {
        return 0.0;
    };
    let mut low = content_top();
    let mut size = 9.0f32;
    let mut take = |y: f32| low = low.min(y);
    for op in &page.ops {
        match op {
            Op::SetFont { size: s, .. } => size = s.0,
            Op::SetTextMatrix { matrix } => match matrix {
                TextMatrix::Translate(_, y) | TextMatrix::TranslateRotate(_, y, _) => {
                    take(y.0 - 0.25 * size)
                }
                TextMatrix::Raw(m) => take(m[5] - 0.25 * size),
            },
            Op::DrawLine { line } => line.points.iter().for_each(|p| take(p.p.y.0)),
            Op::DrawPolygon { polygon } => polygon
                .rings
                .iter()
                .flat_map(|r| &r.points)
                .for_each(|p| take(p.p.y.0)),
            Op::DrawRectangle { rectangle } => take(rectangle.y.0),
            _ => {}
        }
    }
    content_top() - low
}

/// Height of the content box, pt.
fn content_height() -> f32 {
    (PAGE_H_MM - MARGIN_TOP_MM - MARGIN_BOTTOM_MM) * PT_PER_MM
}

/// Paginates a certificate that does not fit one page (see [`render_pdf`]).
fn paginate(templates: &Templates, cert: &Certificate, fonts: &FontPool) -> Result<PdfDocument> {
    let probe = |plan: PagePlan, index: usize| -> Result<f32> {
        let html = templates.render_page(cert, &plan.page(cert, index))?;
        Ok(used_height(&lay_out(templates, &html, cert, fonts)?))
    };
    let nothing = PagePlan {
        rows: (0, 0),
        notes: (0, 0),
        closing: false,
    };
    let head = probe(nothing.clone(), 1)?;
    let running = probe(nothing.clone(), 2)?;
    let closing = probe(
        PagePlan {
            closing: true,
            ..nothing.clone()
        },
        2,
    )? - running;
    let with_u = cert.show_uncertainty;
    let note_text = |n: &crate::certificate::model::CalculatedNote| {
        format!(
            "{} {} = {} {} ± {} {} (expanded uncertainty, k = 2), {}.",
            n.mark,
            n.label,
            n.value,
            n.unit,
            n.expanded_uncertainty.as_deref().unwrap_or(""),
            n.unit,
            n.basis
        )
    };
    let heights = Heights {
        // A little slack under the measured blocks: margins collapse differently next to
        // the table than alone.
        head: head + 4.0,
        running: running + 4.0,
        table_head: layout::table_head_height(),
        rows: cert
            .rows
            .iter()
            .map(|r| layout::row_height(&fonts.regular, &fonts.bold, r, with_u))
            .collect(),
        notes: cert
            .calculated
            .iter()
            .map(|n| layout::note_height(&fonts.regular, &note_text(n)))
            .collect(),
        closing: closing + 4.0,
        page: content_height(),
    };
    let mut limits: Vec<Option<usize>> = Vec::new();
    // Each retry takes one unit off one page, so the loop ends; the bound is a safeguard.
    for _ in 0..(cert.rows.len() + cert.calculated.len() + 8) {
        let plans = layout::plan(&heights, &limits);
        let mut docs = Vec::with_capacity(plans.len());
        let mut overflow = None;
        for (k, plan) in plans.iter().enumerate() {
            let html = templates.render_page(cert, &plan.page(cert, k + 1))?;
            let doc = lay_out(templates, &html, cert, fonts)?;
            if doc.pages.len() > 1 {
                overflow = Some((k, plan.units()));
                break;
            }
            docs.push(doc);
        }
        match overflow {
            None => return Ok(merge(docs)),
            Some((k, units)) if units > 1 => {
                if limits.len() <= k {
                    limits.resize(k + 1, None);
                }
                limits[k] = Some(units - 1);
            }
            Some((k, _)) => {
                return Err(layout_error(
                    cert,
                    &format!("page {} holds a single block taller than an A4 page", k + 1),
                ))
            }
        }
    }
    Err(layout_error(cert, "the pages could not be fitted"))
}

/// One document of the pages of `docs` in order; every page was laid out with the same
/// bundled faces, so the font resources are shared under the same ids.
fn merge(docs: Vec<PdfDocument>) -> PdfDocument {
    let mut iter = docs.into_iter();
    let mut doc = iter.next().expect("at least one page is planned");
    for other in iter {
        for (id, font) in other.resources.fonts.map {
            doc.resources.fonts.map.entry(id).or_insert(font);
        }
        doc.pages.extend(other.pages);
    }
    doc
}

/// Sets the PDF's file identifier from the certificate's content
/// ([`crate::support::pdf_meta::set_document_id`]), so the same certificate always gives the same
/// bytes (and the same SHA-256).
fn set_document_id(bytes: &mut [u8], cert: &Certificate) {
    use sha2::{Digest, Sha256};
    let json = serde_json::to_vec(cert).unwrap_or_default();
    crate::support::pdf_meta::set_document_id(bytes, &Sha256::digest(&json).into());
}

fn layout_error(cert: &Certificate, problem: &str) -> Error {
    Error::invalid(
        format!("certificate {}", cert.number),
        format!("the PDF layout failed: {problem}"),
        "Check the certificate template for markup the PDF engine cannot lay out.",
    )
}

fn rgb(r: f32, g: f32, b: f32) -> Color {
    Color::Rgb(Rgb::new(r, g, b, None))
}

fn text_ops(font: &StampFont, size: f32, x: f32, y: f32, text: &str) -> Vec<Op> {
    vec![
        Op::StartTextSection,
        Op::SetFont {
            font: font.handle(),
            size: Pt(size),
        },
        Op::SetTextCursor {
            pos: Point { x: Pt(x), y: Pt(y) },
        },
        Op::ShowText {
            items: vec![TextItem::Text(text.to_string())],
        },
        Op::EndTextSection,
    ]
}

/// Footer: a rule, the certificate and lot numbers on the left, "Page x of y" on the right.
fn stamp_footer(
    page: &mut PdfPage,
    cert: &Certificate,
    index: usize,
    count: usize,
    regular: &StampFont,
    bold: &StampFont,
) {
    let left_x = MARGIN_SIDE_MM * PT_PER_MM;
    let right_x = (PAGE_W_MM - MARGIN_SIDE_MM) * PT_PER_MM;
    let rule_y = 14.0 * PT_PER_MM;
    let text_y = 10.0 * PT_PER_MM;
    let size = 8.0;
    let left = format!(
        "Certificate No. {}  ·  Lot{} {}  ·  {} rev. {}",
        cert.number,
        if cert.lots.len() > 1 { "s" } else { "" },
        lot_ids(cert),
        cert.spec.code,
        cert.spec.revision
    );
    let right = format!("Page {index} of {count}");
    let right_w = bold.width(&right, size);
    page.ops.push(Op::SaveGraphicsState);
    page.ops.push(Op::SetFillColor {
        col: rgb(0.60, 0.66, 0.69),
    });
    page.ops.push(Op::DrawRectangle {
        rectangle: Rect {
            mode: Some(PaintMode::Fill),
            ..Rect::from_xywh(Pt(left_x), Pt(rule_y), Pt(right_x - left_x), Pt(0.6))
        },
    });
    page.ops.push(Op::SetFillColor {
        col: rgb(0.11, 0.14, 0.16),
    });
    page.ops
        .extend(text_ops(regular, size, left_x, text_y, &left));
    page.ops
        .extend(text_ops(bold, size, right_x - right_w, text_y, &right));
    page.ops.push(Op::RestoreGraphicsState);
}

/// NOT RELEASED marking: a red banner across the top edge and large outlined red letters on
/// the page diagonal, drawn over the content so no copy or crop can lose it.
fn stamp_not_released(page: &mut PdfPage, bold: &StampFont) {
    let w = PAGE_W_MM * PT_PER_MM;
    let h = PAGE_H_MM * PT_PER_MM;
    let red = rgb(0.80, 0.05, 0.05);
    page.ops.push(Op::SaveGraphicsState);

    // Banner in the top margin.
    let banner_h = 8.0 * PT_PER_MM;
    let banner_y = h - BANNER_BOTTOM_MM * PT_PER_MM;
    page.ops.push(Op::SetFillColor { col: red.clone() });
    page.ops.push(Op::DrawRectangle {
        rectangle: Rect {
            mode: Some(PaintMode::Fill),
            ..Rect::from_xywh(Pt(0.0), Pt(banner_y), Pt(w), Pt(banner_h))
        },
    });
    let banner = "NOT RELEASED · INTERNAL RECORD · NOT FOR SHIPMENT";
    let size = 11.0;
    let bw = bold.width(banner, size);
    page.ops.push(Op::SetFillColor {
        col: rgb(1.0, 1.0, 1.0),
    });
    page.ops.extend(text_ops(
        bold,
        size,
        (w - bw) / 2.0,
        banner_y + (banner_h - bold.cap_height(size)) / 2.0,
        banner,
    ));

    // Diagonal outlined letters, centred on the page.
    let text = "NOT RELEASED";
    let size: f32 = 84.0;
    let angle = (h / w).atan();
    let size = size.min(0.8 * (w * w + h * h).sqrt() / bold.width(text, 1.0));
    let tw = bold.width(text, size);
    let cap = bold.cap_height(size);
    let (s, c) = angle.sin_cos();
    let x = w / 2.0 - tw / 2.0 * c + cap / 2.0 * s;
    let y = h / 2.0 - tw / 2.0 * s - cap / 2.0 * c;
    page.ops.push(Op::SetOutlineColor { col: red });
    page.ops.push(Op::SetOutlineThickness { pt: Pt(2.0) });
    page.ops.push(Op::StartTextSection);
    page.ops.push(Op::SetTextRenderingMode {
        mode: TextRenderingMode::Stroke,
    });
    page.ops.push(Op::SetFont {
        font: bold.handle(),
        size: Pt(size),
    });
    page.ops.push(Op::SetTextMatrix {
        matrix: TextMatrix::TranslateRotate(Pt(x), Pt(y), angle.to_degrees()),
    });
    page.ops.push(Op::ShowText {
        items: vec![TextItem::Text(text.to_string())],
    });
    page.ops.push(Op::SetTextRenderingMode {
        mode: TextRenderingMode::Fill,
    });
    page.ops.push(Op::EndTextSection);
    page.ops.push(Op::RestoreGraphicsState);
}

#[cfg(test)]
mod tests {
    use super::*;

    fn page() -> PageBox {
        PageBox {
            width: PAGE_W_MM,
            height: PAGE_H_MM,
            top: MARGIN_TOP_MM,
            right: MARGIN_SIDE_MM,
            bottom: MARGIN_BOTTOM_MM,
            left: MARGIN_SIDE_MM,
        }
    }

    /// The PDF bytes of `doc` with fixed metadata and file identifier, so two documents laid
    /// out by different paths compare by what they draw and embed.
    fn bytes(mut doc: PdfDocument) -> Vec<u8> {
        doc.metadata = PdfDocument::new("same").metadata;
        crate::support::pdf_meta::set_creator_and_day(
            &mut doc,
            chrono::NaiveDate::from_ymd_opt(2026, 12, 2).unwrap(),
        );
        let mut bytes = save(&doc);
        crate::support::pdf_meta::set_document_id(&mut bytes, &[7; 32]);
        bytes
    }

    /// Lays `html` out through printpdf's `from_html_with_cache` and through [`engine`]
    /// (with the built-in faces registered when `builtins`) and checks the pages and the PDF
    /// bytes agree.
    fn same_as_printpdf(html: &str, builtins: bool) {
        let fonts = FontPool::bundled();
        let sample: Certificate = serde_json::from_str(
            &std::fs::read_to_string(concat!(
                env!("CARGO_MANIFEST_DIR"),
                "/tests/fixtures/certificates/sample.json"
            ))
            .unwrap(),
        )
        .unwrap();
        let theirs = lay_out_printpdf(html, &sample, &fonts, &mut Vec::new()).unwrap();
        let registered = builtins.then(|| Registered::new(&fonts.pool).unwrap());
        let faces = [&fonts.regular, &fonts.bold];
        let ours = engine::lay_out(html, page(), &fonts.pool, registered.as_ref(), &faces)
            .unwrap()
            .expect("only the bundled faces are used");
        assert!(!ours.pages.is_empty());
        assert_eq!(ours.pages, theirs.pages);
        assert_eq!(
            ours.resources.fonts.map.keys().collect::<Vec<_>>(),
            theirs.resources.fonts.map.keys().collect::<Vec<_>>()
        );
        assert!(bytes(ours) == bytes(theirs), "the PDF files differ");
    }

    #[test]
    fn engine_lays_out_as_printpdf_does_issue_20() {
        let templates =
            Templates::load(&std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("templates"))
                .unwrap();
        assert!(!templates.names_builtin_family());
        let sample: Certificate = serde_json::from_str(
            &std::fs::read_to_string(concat!(
                env!("CARGO_MANIFEST_DIR"),
                "/tests/fixtures/certificates/sample.json"
            ))
            .unwrap(),
        )
        .unwrap();
        // The shipped template: without the built-in faces, as render_pdf lays it out.
        same_as_printpdf(&templates.render(&sample).unwrap(), false);
        // Every printable Windows-1252 character (the built-in faces' whole repertoire), in
        // regular and bold: DejaVu Sans sets each one, so the built-in faces change nothing.
        let cp1252: String = (0x20u8..=0xff)
            .filter(|b| *b != 0x7f && !(0x80..0xa0).contains(b))
            .map(char::from)
            .chain("€‚ƒ„…†‡ˆ‰Š‹ŒŽ‘’“”•–—˜™š›œžŸ".chars())
            .collect();
        let escaped = cp1252
            .replace('&', "&amp;")
            .replace('<', "&lt;")
            .replace('>', "&gt;");
        let html = format!(
            "<html><head><style>body {{ font-family: \"DejaVu Sans\"; font-size: 9pt; }}</style></head>\
             <body><p>{escaped}</p><p><b>{escaped}</b></p></body></html>"
        );
        same_as_printpdf(&html, false);
        // A stylesheet naming a generic family: laid out with the built-in faces registered.
        same_as_printpdf(
            &html.replace("\"DejaVu Sans\";", "\"DejaVu Sans\", sans-serif;"),
            true,
        );
    }
}
