//! The HTML layout step with the fonts set up once per process (issue #20).
//!
//! printpdf 0.12's `PdfDocument::from_html_with_cache` registers its 14 built-in faces with
//! the layout's font manager on every call: it decompresses each face, parses its tables and
//! reads its style, about 40 % of the instructions of one certificate (callgrind, 2026-12-02)
//! and more on a paginated certificate, which is laid out once per page and probe. This module
//! runs the same steps as that function (printpdf 0.12.8, `html::xml_to_pdf_pages`, MIT
//! licence) with one difference: the faces are registered once, into a [`Registered`] kept in
//! the [`super::FontPool`], and every layout starts from a copy of that font manager's
//! state. The font manager then holds exactly what printpdf's own path gives it, so the pages
//! are the same; the test `engine_lays_out_as_printpdf_does_issue_20` compares the two.

// Parts of this module follow printpdf 0.12.8 (`src/html/mod.rs`), used under its licence:
//
// MIT License
//
// Copyright (c) 2017 Felix Schütt
//
// Permission is hereby granted, free of charge, to any person obtaining a copy
// of this software and associated documentation files (the "Software"), to deal
// in the Software without restriction, including without limitation the rights
// to use, copy, modify, merge, publish, distribute, sublicense, and/or sell
// copies of the Software, and to permit persons to whom the Software is
// furnished to do so, subject to the following conditions:
//
// The above copyright notice and this permission notice shall be included in all
// copies or substantial portions of the Software.
//
// THE SOFTWARE IS PROVIDED "AS IS", WITHOUT WARRANTY OF ANY KIND, EXPRESS OR
// IMPLIED, INCLUDING BUT NOT LIMITED TO THE WARRANTIES OF MERCHANTABILITY,
// FITNESS FOR A PARTICULAR PURPOSE AND NONINFRINGEMENT. IN NO EVENT SHALL THE
// AUTHORS OR COPYRIGHT HOLDERS BE LIABLE FOR ANY CLAIM, DAMAGES OR OTHER
// LIABILITY, WHETHER IN AN ACTION OF CONTRACT, TORT OR OTHERWISE, ARISING FROM,
// OUT OF OR IN CONNECTION WITH THE SOFTWARE OR THE USE OR OTHER DEALINGS IN THE
// SOFTWARE.

use std::collections::{BTreeMap, HashMap, HashSet};

use azul_core::dom::DomId;
use azul_core::geom::{LogicalPosition, LogicalRect, LogicalSize};
use azul_core::resources::RendererResources;
use azul_css::props::basic::FontRef;
use azul_layout::font_traits::{FontManager, TextLayoutCache};
use azul_layout::solver3::display_list::DisplayListItem;
use azul_layout::solver3::page_breaks::BreakPolicy;
use azul_layout::solver3::pagination::FakePageConfig;
use azul_layout::text3::cache::{MemoryFace, MemoryFontTier, ShapedItem, UnifiedLayout};
use printpdf::html::{bridge, rust_fontconfig, SharedFontPool};
use printpdf::{BuiltinFont, FontId, Mm, ParsedFont, PdfDocument, PdfFont, PdfPage};

/// Points per millimetre as printpdf's HTML step rounds it.
const MM_TO_PT: f32 = 2.83465;
/// CSS pixels per point (96 px = 72 pt = 1 in, CSS Values and Units Level 3, 6.2).
const PT_TO_CSS_PX: f32 = 96.0 / 72.0;

/// A font manager's state after the built-in faces were registered, copied into each layout.
#[derive(Debug, Clone)]
pub(crate) struct Registered {
    memory_families: HashMap<String, Vec<MemoryFace>>,
}

impl Registered {
    /// Registers printpdf's 14 built-in faces with a font manager over `pool` (the shared
    /// cache keeps them) and keeps the manager's family index. Same names, tiers and order as
    /// printpdf 0.12.8's `register_builtin_fonts`.
    pub(crate) fn new(pool: &SharedFontPool) -> Result<Registered, String> {
        let mut fm = manager(pool)?;
        for font in BuiltinFont::all_ids() {
            let bytes = font.get_subset_font().bytes;
            let coverage: Vec<rust_fontconfig::UnicodeRange> =
                rust_fontconfig::FcParseFontBytes(&bytes, font.get_id())
                    .and_then(|faces| faces.into_iter().next())
                    .map_or_else(Vec::new, |(pattern, _)| pattern.unicode_ranges);
            let mut register = |family: &str, tier: MemoryFontTier| {
                // Every spelling the resolver may look a family up by (printpdf's
                // `register_all_spellings`): bare, double- and single-quoted.
                for name in [
                    family.to_string(),
                    format!("\"{family}\""),
                    format!("'{family}'"),
                ] {
                    let _ = fm.register_named_font_in_tier(&name, &bytes, coverage.clone(), tier);
                }
            };
            register(font.get_id(), MemoryFontTier::Primary);
            for css_name in css_names(font) {
                register(css_name, MemoryFontTier::Primary);
            }
            if let Some(generic) = generic_family(font) {
                register(generic, MemoryFontTier::Fallback);
            }
        }
        Ok(Registered {
            memory_families: fm.memory_families,
        })
    }
}

/// The CSS family names printpdf 0.12.8 maps to each built-in face.
fn css_names(font: BuiltinFont) -> &'static [&'static str] {
    use BuiltinFont::*;
    match font {
        TimesRoman | TimesBold | TimesItalic | TimesBoldItalic => &["Times New Roman", "Times"],
        Helvetica | HelveticaBold | HelveticaOblique | HelveticaBoldOblique => {
            &["Helvetica", "Arial"]
        }
        Courier | CourierBold | CourierOblique | CourierBoldOblique => &["Courier New", "Courier"],
        Symbol => &["Symbol"],
        ZapfDingbats => &["Zapf Dingbats", "ZapfDingbats"],
    }
}

/// The generic family a built-in face stands behind (printpdf 0.12.8).
fn generic_family(font: BuiltinFont) -> Option<&'static str> {
    match font {
        BuiltinFont::TimesRoman => Some("serif"),
        BuiltinFont::Helvetica => Some("sans-serif"),
        BuiltinFont::Courier => Some("monospace"),
        _ => None,
    }
}

/// A fresh font manager over the pool's cache and parsed faces.
fn manager(pool: &SharedFontPool) -> Result<FontManager<FontRef>, String> {
    FontManager::from_arc_shared((*pool.fc_cache).clone(), pool.parsed_fonts.clone())
        .map_err(|e| format!("the font manager could not be set up: {e:?}"))
}

/// Page size and margins of one layout, mm.
#[derive(Debug, Clone, Copy)]
pub(crate) struct PageBox {
    pub width: f32,
    pub height: f32,
    pub top: f32,
    pub right: f32,
    pub bottom: f32,
    pub left: f32,
}

/// Lays `html` out on pages as printpdf 0.12.8's `PdfDocument::from_html_with_cache` does
/// (no images, no page numbers, header or footer text), with the font manager starting from
/// `registered` (or without printpdf's built-in faces when `None`). The faces the pages use are taken from `faces` (by their hash); `Ok(None)`
/// when a page uses a face that is not among them (a template naming another family), so the
/// caller can lay the page out through printpdf's own path instead.
pub(crate) fn lay_out(
    html: &str,
    page: PageBox,
    pool: &SharedFontPool,
    registered: Option<&Registered>,
    faces: &[&ParsedFont],
) -> Result<Option<PdfDocument>, String> {
    let preprocessed = printpdf::html::RawHtml::new(html).preprocess();
    let root_nodes = azul_layout::xml::parse_xml_string(preprocessed.as_str())
        .map_err(|e| format!("Failed to parse XML: {e}"))?;
    let page_w = page.width * MM_TO_PT;
    let page_h = page.height * MM_TO_PT;
    let (top, left) = (page.top * MM_TO_PT, page.left * MM_TO_PT);
    let content_w = (page_w - left - page.right * MM_TO_PT) * PT_TO_CSS_PX;
    let content_h = (page_h - top - page.bottom * MM_TO_PT) * PT_TO_CSS_PX;
    let components = printpdf::components::printpdf_default_components();
    let styled_dom = azul_core::xml::str_to_dom(root_nodes.as_ref(), &components, Some(content_w))
        .map_err(|e| format!("Failed to convert XML to DOM: {e}"))?;

    let mut font_manager = manager(pool)?;
    if let Some(registered) = registered {
        font_manager.memory_families = registered.memory_families.clone();
    }

    let content_size = LogicalSize::new(content_w, content_h);
    let fragmentation = azul_layout::paged::FragmentationContext::new_paged(content_size);
    let mut layout_cache = azul_layout::Solver3LayoutCache::default();
    let mut text_cache = TextLayoutCache::new();
    let viewport = LogicalRect {
        origin: LogicalPosition::zero(),
        size: content_size,
    };
    let renderer_resources = RendererResources::default();
    let mut debug_messages = None;
    let loader = azul_layout::text3::default::PathLoader::new();
    let font_loader = |bytes: std::sync::Arc<rust_fontconfig::FontBytes>, index: usize| {
        loader.load_font_shared(bytes, index)
    };
    let mut page_config = FakePageConfig::new();
    page_config.break_policy = BreakPolicy {
        honor_break_inside: true,
        widows_orphans: true,
        atomic_lines: true,
        atomic_table_rows: true,
        repeat_table_headers: true,
        ..BreakPolicy::default()
    };
    let display_lists = azul_layout::solver3::paged_layout::layout_document_paged_v2(
        &mut layout_cache,
        &mut text_cache,
        fragmentation,
        &styled_dom,
        viewport,
        &mut font_manager,
        &BTreeMap::new(),
        &mut debug_messages,
        None,
        &renderer_resources,
        azul_core::resources::IdNamespace(0),
        DomId::ROOT_ID,
        font_loader,
        page_config,
        &azul_core::resources::ImageCache::default(),
        azul_core::task::GetSystemTimeCallback {
            cb: azul_core::task::get_system_time_libstd,
        },
        false,
    )
    .map_err(|e| format!("Layout solving failed: {e:?}"))?
    .pages;

    let images = bridge::resolve_html_images(&BTreeMap::new());
    let mut bridge_res = bridge::BridgeResources::default();
    let mut pages = Vec::new();
    let mut used: HashSet<u64> = HashSet::new();
    let full_page = LogicalSize::new(page_w, page_h);
    for list in &display_lists {
        // Pages with nothing but background fills are dropped, as printpdf does.
        let real = list.items.iter().any(|item| {
            matches!(
                item,
                DisplayListItem::TextLayout { .. }
                    | DisplayListItem::Image { .. }
                    | DisplayListItem::LinearGradient { .. }
                    | DisplayListItem::RadialGradient { .. }
                    | DisplayListItem::ConicGradient { .. }
                    | DisplayListItem::BoxShadow { .. }
            )
        });
        if !real {
            continue;
        }
        let ops = bridge::display_list_to_printpdf_ops_with_margins(
            list,
            full_page,
            left,
            top,
            &font_manager,
            &images,
            &mut bridge_res,
        )
        .map_err(|e| format!("Failed to convert display list: {e}"))?;
        for item in &list.items {
            if let DisplayListItem::TextLayout { layout, .. } = item {
                if let Some(unified) = layout.downcast_ref::<UnifiedLayout>() {
                    for positioned in &unified.items {
                        if let ShapedItem::Cluster(cluster) = &positioned.item {
                            used.extend(cluster.glyphs.iter().map(|g| g.font_hash));
                        }
                    }
                }
            }
        }
        pages.push(PdfPage::new(Mm(page.width), Mm(page.height), ops));
    }
    if pages.is_empty() {
        pages.push(PdfPage::new(Mm(page.width), Mm(page.height), Vec::new()));
    }

    let mut doc = PdfDocument::new("PDF Document");
    for hash in used {
        let Some(face) = faces.iter().find(|f| f.hash == hash) else {
            return Ok(None);
        };
        doc.resources
            .fonts
            .map
            .insert(FontId(format!("F{hash}")), PdfFont::new((*face).clone()));
    }
    bridge_res.register_into(&mut doc.resources);
    doc.pages.extend(pages);
    Ok(Some(doc))
}
