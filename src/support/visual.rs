//! resinlot's one visual language: the colours, line styles, markers and type sizes every chart
//! and report page uses (SVG, the PNG rasterised from it, and the PDF pages), and the small SVG
//! writer the charts are drawn with.
//!
//! | element | how it is drawn |
//! |---|---|
//! | lot value, sample used in a fit | slate-blue filled dot, lots joined by a thin slate line |
//! | centre line (x̄, MR̄) | solid grey |
//! | control limits (UCL, LCL) | dashed brick red |
//! | specification limits, target | solid violet, thicker |
//! | run-rule signal | amber ring on the point, amber numbered tag keyed to the signal list |
//! | outside the spec window | crimson diamond on the point, crimson numbered tag |
//! | fitted line or curve | solid dark ink; extrapolated beyond the data: dashed, labelled |
//! | prediction interval | pale teal band |
//! | left out of a fit (early sample) | open grey triangle |
//! | flagged outlier | amber cross |
//!
//! Text is DejaVu Sans (bundled), never below [`MIN_TEXT_PT`] at the size a chart is printed.

use std::fmt::Write as _;
use std::sync::OnceLock;

/// An sRGB colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rgb(pub u8, pub u8, pub u8);

impl Rgb {
    /// `#rrggbb` for SVG.
    pub fn hex(self) -> String {
        format!("#{:02x}{:02x}{:02x}", self.0, self.1, self.2)
    }

    /// Components from 0 to 1, for PDF colour operators.
    pub const fn unit(self) -> (f32, f32, f32) {
        (
            self.0 as f32 / 255.0,
            self.1 as f32 / 255.0,
            self.2 as f32 / 255.0,
        )
    }
}

/// Body text.
pub const INK: Rgb = Rgb(0x1c, 0x1f, 0x24);
/// Secondary text, axes, table rules.
pub const MUTED: Rgb = Rgb(0x61, 0x69, 0x70);
/// Grid lines.
pub const GRID: Rgb = Rgb(0xe4, 0xe7, 0xea);
/// Headings and page accents of the PDF pages.
pub const ACCENT: Rgb = Rgb(0x0d, 0x5c, 0x66);
/// Shaded table rows.
pub const ROW_SHADE: Rgb = Rgb(0xed, 0xf2, 0xf2);
/// Lot values and samples used in a fit.
pub const DATA: Rgb = Rgb(0x2f, 0x4b, 0x8a);
/// Centre lines.
pub const CENTRE: Rgb = Rgb(0x55, 0x55, 0x55);
/// Control limits (dashed).
pub const CONTROL: Rgb = Rgb(0xb2, 0x3a, 0x2a);
/// Specification limits and targets (solid, thicker).
pub const SPEC: Rgb = Rgb(0x7b, 0x3f, 0xa6);
/// Run-rule signals, flagged points and warnings.
pub const SIGNAL: Rgb = Rgb(0xc8, 0x6e, 0x00);
/// Lots outside the spec window.
pub const OUT_OF_SPEC: Rgb = Rgb(0xc0, 0x10, 0x4a);
/// Fitted lines and curves.
pub const FIT: Rgb = Rgb(0x2d, 0x2d, 0x3c);
/// Prediction bands.
pub const BAND: Rgb = Rgb(0xb4, 0xd6, 0xda);
/// Points left out of a fit, frozen-limit markers.
pub const LEFT_OUT: Rgb = Rgb(0x8a, 0x8f, 0x94);

/// Dash pattern of control limits (SVG `stroke-dasharray`, px).
pub const CONTROL_DASH: &str = "9 5";
/// Dash pattern of extrapolated lines.
pub const EXTRAPOLATED_DASH: &str = "6 5";
/// Dash pattern of the line where frozen limits start.
pub const BASELINE_DASH: &str = "3 4";

/// The smallest type on any chart or page, at print size (points).
pub const MIN_TEXT_PT: f64 = 8.0;
/// Points per CSS pixel (1 px = 1/96 in, 1 pt = 1/72 in; CSS Values and Units, §5.2): the
/// scale of an SVG chart viewed on its own at 100 %.
pub const PT_PER_PX: f64 = 0.75;

/// Points per SVG pixel when a chart `width_px` wide is placed `width_mm` wide on a page.
pub fn placed_pt_per_px(width_px: f64, width_mm: f64) -> f64 {
    width_mm / 25.4 * 72.0 / width_px
}

fn faces() -> &'static (printpdf::ParsedFont, printpdf::ParsedFont) {
    static FACES: OnceLock<(printpdf::ParsedFont, printpdf::ParsedFont)> = OnceLock::new();
    FACES.get_or_init(|| {
        let parse = |bytes: &[u8]| {
            printpdf::ParsedFont::from_bytes(bytes, 0, &mut Vec::new())
                .expect("the bundled DejaVu fonts are valid TrueType files")
        };
        (
            parse(crate::support::fonts::DEJAVU_SANS),
            parse(crate::support::fonts::DEJAVU_SANS_BOLD),
        )
    })
}

/// Advance width in px of `text` in DejaVu Sans (bold or regular) at `size` px; combining
/// marks count as nothing, because [`Svg::text`] draws them as separate strokes.
pub fn text_width(text: &str, size: f64, bold: bool) -> f64 {
    let (regular, bold_face) = faces();
    let face = if bold { bold_face } else { regular };
    let plain: String = text.chars().filter(|&c| c != OVERBAR).collect();
    f64::from(crate::support::fonts::advance_width(
        face,
        &plain,
        size as f32,
    ))
}

/// The combining macron: in chart and page text it asks for a bar over the letters before it.
pub const OVERBAR: char = '\u{0304}';

/// Splits text with combining macrons into the plain text and the character ranges to bar: a
/// macron after an upper-case letter bars the run of upper-case letters before it ("MR̄" bars
/// "MR"), otherwise the one character before it ("x̄" bars "x").
pub fn overbars(text: &str) -> (String, Vec<(usize, usize)>) {
    let mut plain: Vec<char> = Vec::new();
    let mut bars = Vec::new();
    for c in text.chars() {
        if c != OVERBAR {
            plain.push(c);
            continue;
        }
        let end = plain.len();
        if end == 0 {
            continue;
        }
        let mut start = end - 1;
        if plain[start].is_uppercase() {
            while start > 0 && plain[start - 1].is_uppercase() {
                start -= 1;
            }
        }
        bars.push((start, end));
    }
    (plain.into_iter().collect(), bars)
}

/// An axis-aligned box in px: left, top, right, bottom.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bounds {
    /// Left edge.
    pub x0: f64,
    /// Top edge.
    pub y0: f64,
    /// Right edge.
    pub x1: f64,
    /// Bottom edge.
    pub y1: f64,
}

impl Bounds {
    /// True when the two boxes share more than a hairline.
    pub fn overlaps(&self, o: &Bounds) -> bool {
        const EPS: f64 = 0.5;
        self.x0 + EPS < o.x1 && o.x0 + EPS < self.x1 && self.y0 + EPS < o.y1 && o.y0 + EPS < self.y1
    }

    /// True when `o` lies wholly inside this box.
    pub fn contains(&self, o: &Bounds) -> bool {
        o.x0 >= self.x0 && o.x1 <= self.x1 && o.y0 >= self.y0 && o.y1 <= self.y1
    }

    /// The box grown by `d` px on every side.
    pub fn grow(&self, d: f64) -> Bounds {
        Bounds {
            x0: self.x0 - d,
            y0: self.y0 - d,
            x1: self.x1 + d,
            y1: self.y1 + d,
        }
    }
}

/// Horizontal alignment of text at its anchor point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Anchor {
    /// Text starts at the point.
    Start,
    /// Text is centred on the point.
    Middle,
    /// Text ends at the point.
    End,
}

impl Anchor {
    fn svg(self) -> &'static str {
        match self {
            Anchor::Start => "start",
            Anchor::Middle => "middle",
            Anchor::End => "end",
        }
    }
}

/// Ascent and descent of DejaVu Sans as fractions of the size (the font's `hhea` ascender 0.928
/// and descender 0.236 of the em, from the font file; rounded outward for layout).
const ASCENT: f64 = 0.93;
const DESCENT: f64 = 0.24;

/// The box of a text line with baseline at (`x`, `y`), unrotated, or turned −90° (reading
/// upwards) about its anchor point when `vertical`.
pub fn text_bounds(
    text: &str,
    x: f64,
    y: f64,
    size: f64,
    anchor: Anchor,
    bold: bool,
    vertical: bool,
) -> Bounds {
    let w = text_width(text, size, bold);
    let (a, b) = match anchor {
        Anchor::Start => (0.0, w),
        Anchor::Middle => (-w / 2.0, w / 2.0),
        Anchor::End => (-w, 0.0),
    };
    if vertical {
        // rotate(-90, x, y): the text's advance runs up the page, its ascent to the left.
        Bounds {
            x0: x - ASCENT * size,
            y0: y - b,
            x1: x + DESCENT * size,
            y1: y - a,
        }
    } else {
        Bounds {
            x0: x + a,
            y0: y - ASCENT * size,
            x1: x + b,
            y1: y + DESCENT * size,
        }
    }
}

/// One line of text to draw.
#[derive(Debug, Clone)]
pub struct Label<'a> {
    /// The text; a combining macron bars the letters before it ([`overbars`]).
    pub text: &'a str,
    /// Anchor x, px.
    pub x: f64,
    /// Baseline y (for vertical text, the anchor's y), px.
    pub y: f64,
    /// Size, px.
    pub size: f64,
    /// Alignment at the anchor.
    pub anchor: Anchor,
    /// Colour.
    pub colour: Rgb,
    /// Bold face.
    pub bold: bool,
    /// Turned to read upwards (y-axis titles, lot ids).
    pub vertical: bool,
}

impl<'a> Label<'a> {
    /// Regular, horizontal, start-anchored text in ink.
    pub fn new(text: &'a str, x: f64, y: f64, size: f64) -> Label<'a> {
        Label {
            text,
            x,
            y,
            size,
            anchor: Anchor::Start,
            colour: INK,
            bold: false,
            vertical: false,
        }
    }

    /// With another anchor.
    pub fn anchor(mut self, anchor: Anchor) -> Self {
        self.anchor = anchor;
        self
    }

    /// With another colour.
    pub fn colour(mut self, colour: Rgb) -> Self {
        self.colour = colour;
        self
    }

    /// In bold.
    pub fn bold(mut self) -> Self {
        self.bold = true;
        self
    }

    /// Reading upwards.
    pub fn vertical(mut self) -> Self {
        self.vertical = true;
        self
    }

    /// Its box ([`text_bounds`]).
    pub fn bounds(&self) -> Bounds {
        text_bounds(
            self.text,
            self.x,
            self.y,
            self.size,
            self.anchor,
            self.bold,
            self.vertical,
        )
    }
}

/// A small SVG writer: shapes and text in px, keeping the box of every text and of every
/// obstacle a later label must avoid.
#[derive(Debug)]
pub struct Svg {
    width: f64,
    height: f64,
    body: String,
    taken: Vec<Bounds>,
}

fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            c => out.push(c),
        }
    }
    out
}

/// A coordinate with two decimals (enough at chart resolution, and short).
fn n(v: f64) -> String {
    let s = format!("{v:.2}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".to_string()
    } else {
        s.to_string()
    }
}

impl Svg {
    /// An empty white drawing of `width` × `height` px.
    pub fn new(width: f64, height: f64) -> Svg {
        let mut svg = Svg {
            width,
            height,
            body: String::new(),
            taken: Vec::new(),
        };
        svg.rect(0.0, 0.0, width, height, Rgb(255, 255, 255), 1.0, "");
        svg
    }

    /// Width in px.
    pub fn width(&self) -> f64 {
        self.width
    }

    /// Height in px.
    pub fn height(&self) -> f64 {
        self.height
    }

    fn class(class: &str) -> String {
        if class.is_empty() {
            String::new()
        } else {
            format!(" class=\"{}\"", esc(class))
        }
    }

    /// A filled rectangle.
    #[allow(clippy::too_many_arguments)]
    pub fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, fill: Rgb, opacity: f64, class: &str) {
        let _ = writeln!(
            self.body,
            "<rect{} x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{}\"{}/>",
            Self::class(class),
            n(x),
            n(y),
            n(w.max(0.0)),
            n(h.max(0.0)),
            fill.hex(),
            if opacity < 1.0 {
                format!(" fill-opacity=\"{}\"", n(opacity))
            } else {
                String::new()
            }
        );
    }

    /// An open polyline, solid or dashed (`dash` as an SVG dash array).
    pub fn line(
        &mut self,
        points: &[(f64, f64)],
        colour: Rgb,
        width: f64,
        dash: Option<&str>,
        class: &str,
    ) {
        if points.len() < 2 {
            return;
        }
        let mut pts = String::new();
        for (i, (x, y)) in points.iter().enumerate() {
            if i > 0 {
                pts.push(' ');
            }
            let _ = write!(pts, "{},{}", n(*x), n(*y));
        }
        let _ = writeln!(
            self.body,
            "<polyline{} points=\"{pts}\" fill=\"none\" stroke=\"{}\" stroke-width=\"{}\" stroke-linejoin=\"round\"{}/>",
            Self::class(class),
            colour.hex(),
            n(width),
            dash.map(|d| format!(" stroke-dasharray=\"{d}\"")).unwrap_or_default()
        );
    }

    /// A closed polygon, filled and/or stroked.
    pub fn polygon(
        &mut self,
        points: &[(f64, f64)],
        fill: Option<Rgb>,
        stroke: Option<(Rgb, f64)>,
        class: &str,
    ) {
        let pts: Vec<String> = points
            .iter()
            .map(|(x, y)| format!("{},{}", n(*x), n(*y)))
            .collect();
        let _ = writeln!(
            self.body,
            "<polygon{} points=\"{}\" fill=\"{}\"{}/>",
            Self::class(class),
            pts.join(" "),
            fill.map_or("none".to_string(), Rgb::hex),
            stroke
                .map(|(c, w)| format!(" stroke=\"{}\" stroke-width=\"{}\"", c.hex(), n(w)))
                .unwrap_or_default()
        );
    }

    /// A circle, filled and/or stroked.
    pub fn circle(
        &mut self,
        cx: f64,
        cy: f64,
        r: f64,
        fill: Option<Rgb>,
        stroke: Option<(Rgb, f64)>,
        class: &str,
    ) {
        let _ = writeln!(
            self.body,
            "<circle{} cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"{}\"{}/>",
            Self::class(class),
            n(cx),
            n(cy),
            n(r),
            fill.map_or("none".to_string(), Rgb::hex),
            stroke
                .map(|(c, w)| format!(" stroke=\"{}\" stroke-width=\"{}\"", c.hex(), n(w)))
                .unwrap_or_default()
        );
    }

    /// A diamond (square on its corner) of half-diagonal `r`.
    pub fn diamond(&mut self, cx: f64, cy: f64, r: f64, fill: Rgb, class: &str) {
        self.polygon(
            &[(cx, cy - r), (cx + r, cy), (cx, cy + r), (cx - r, cy)],
            Some(fill),
            Some((Rgb(255, 255, 255), 0.8)),
            class,
        );
    }

    /// An open triangle pointing up, of circumradius `r`.
    pub fn triangle(&mut self, cx: f64, cy: f64, r: f64, colour: Rgb, class: &str) {
        let h = r * 0.866;
        self.polygon(
            &[(cx, cy - r), (cx + h, cy + r / 2.0), (cx - h, cy + r / 2.0)],
            Some(Rgb(255, 255, 255)),
            Some((colour, 1.8)),
            class,
        );
    }

    /// A diagonal cross of half-size `r`.
    pub fn cross(&mut self, cx: f64, cy: f64, r: f64, colour: Rgb, class: &str) {
        let _ = writeln!(
            self.body,
            "<path{} d=\"M{},{}L{},{}M{},{}L{},{}\" stroke=\"{}\" stroke-width=\"2.5\" fill=\"none\"/>",
            Self::class(class),
            n(cx - r),
            n(cy - r),
            n(cx + r),
            n(cy + r),
            n(cx - r),
            n(cy + r),
            n(cx + r),
            n(cy - r),
            colour.hex()
        );
    }

    /// Whether `b` is inside the drawing and clear of every text and obstacle so far.
    pub fn is_free(&self, b: &Bounds) -> bool {
        b.x0 >= 0.0
            && b.y0 >= 0.0
            && b.x1 <= self.width
            && b.y1 <= self.height
            && !self.taken.iter().any(|t| t.overlaps(b))
    }

    /// Marks `b` as taken, so later labels placed with [`Svg::is_free`] avoid it.
    pub fn reserve(&mut self, b: Bounds) {
        self.taken.push(b);
    }

    /// Draws a line of text and reserves its box; a combining macron becomes a drawn bar over
    /// the letters before it, so the bar shows in every renderer and font.
    pub fn text(&mut self, l: &Label) {
        let (plain, bars) = overbars(l.text);
        let b = l.bounds();
        self.taken.push(b);
        let rotate = if l.vertical {
            format!(" transform=\"rotate(-90 {} {})\"", n(l.x), n(l.y))
        } else {
            String::new()
        };
        let _ = writeln!(
            self.body,
            "<text x=\"{}\" y=\"{}\" font-family=\"DejaVu Sans, sans-serif\" font-size=\"{}\" text-anchor=\"{}\" fill=\"{}\"{}{}>{}</text>",
            n(l.x),
            n(l.y),
            n(l.size),
            l.anchor.svg(),
            l.colour.hex(),
            if l.bold { " font-weight=\"bold\"" } else { "" },
            rotate,
            esc(&plain)
        );
        if !l.vertical {
            let chars: Vec<char> = plain.chars().collect();
            let width =
                |k: usize| text_width(&chars[..k].iter().collect::<String>(), l.size, l.bold);
            for (s, e) in bars {
                let (a, z) = (b.x0 + width(s), b.x0 + width(e));
                let y = l.y - 0.80 * l.size;
                self.line(
                    &[(a + 0.08 * l.size, y), (z - 0.04 * l.size, y)],
                    l.colour,
                    (l.size * 0.07).max(1.0),
                    None,
                    "overbar",
                );
            }
        }
    }

    /// Draws `l` when its box is free ([`Svg::is_free`]); returns whether it was drawn.
    pub fn text_if_free(&mut self, l: &Label) -> bool {
        if self.is_free(&l.bounds()) {
            self.text(l);
            true
        } else {
            false
        }
    }

    /// Word-wraps `text` into lines at most `width` px wide at `size` px.
    pub fn wrap(text: &str, size: f64, width: f64) -> Vec<String> {
        let mut lines = Vec::new();
        let mut line = String::new();
        for word in text.split_whitespace() {
            let candidate = if line.is_empty() {
                word.to_string()
            } else {
                format!("{line} {word}")
            };
            if line.is_empty() || text_width(&candidate, size, false) <= width {
                line = candidate;
            } else {
                lines.push(std::mem::replace(&mut line, word.to_string()));
            }
        }
        if !line.is_empty() {
            lines.push(line);
        }
        lines
    }

    /// The finished document (starting with `<svg`, as the output stamp expects).
    pub fn finish(self) -> Vec<u8> {
        let mut out = format!(
            "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\">\n",
            w = n(self.width),
            h = n(self.height)
        );
        out.push_str(&self.body);
        out.push_str("</svg>\n");
        out.into_bytes()
    }
}

/// `text` cut to at most `width` px at `size`, ending in "…" when cut.
pub fn fit_text(text: &str, size: f64, bold: bool, width: f64) -> String {
    if text_width(text, size, bold) <= width {
        return text.to_string();
    }
    let mut out: Vec<char> = text.chars().collect();
    while !out.is_empty()
        && text_width(&format!("{}…", out.iter().collect::<String>()), size, bold) > width
    {
        out.pop();
    }
    format!("{}…", out.iter().collect::<String>().trim_end())
}

/// A linear or base-10 logarithmic map from data values to px.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Scale {
    /// Data value at `p0`.
    pub d0: f64,
    /// Data value at `p1`.
    pub d1: f64,
    /// Pixel of `d0`.
    pub p0: f64,
    /// Pixel of `d1`.
    pub p1: f64,
    /// Logarithmic (values must be positive).
    pub log: bool,
}

impl Scale {
    /// A linear map of [d0, d1] onto [p0, p1].
    pub fn linear(d0: f64, d1: f64, p0: f64, p1: f64) -> Scale {
        Scale {
            d0,
            d1,
            p0,
            p1,
            log: false,
        }
    }

    /// A log10 map of [d0, d1] (both positive) onto [p0, p1].
    pub fn log10(d0: f64, d1: f64, p0: f64, p1: f64) -> Scale {
        Scale {
            d0,
            d1,
            p0,
            p1,
            log: true,
        }
    }

    /// The pixel of value `v`.
    pub fn px(&self, v: f64) -> f64 {
        let (a, b, x) = if self.log {
            (self.d0.log10(), self.d1.log10(), v.log10())
        } else {
            (self.d0, self.d1, v)
        };
        if b == a {
            return (self.p0 + self.p1) / 2.0;
        }
        self.p0 + (x - a) / (b - a) * (self.p1 - self.p0)
    }

    /// Tick values: about `target` steps of 1, 2 or 5 × 10^k on a linear scale; on a log
    /// scale the 1, 2, 5 of each decade (only 1 when the range spans many decades).
    pub fn ticks(&self, target: usize) -> Vec<f64> {
        let (lo, hi) = (self.d0.min(self.d1), self.d0.max(self.d1));
        if self.log {
            return log_ticks(lo, hi);
        }
        linear_ticks(lo, hi, target)
    }
}

/// Ticks at multiples of 1, 2 or 5 × 10^k inside [lo, hi], about `target` of them (common
/// practice for chart axes).
pub fn linear_ticks(lo: f64, hi: f64, target: usize) -> Vec<f64> {
    if !(lo.is_finite() && hi.is_finite()) || hi <= lo {
        return vec![lo];
    }
    let raw = (hi - lo) / target.max(1) as f64;
    let e = raw.log10().floor() as i32;
    let mag = 10f64.powi(e);
    let m = [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .find(|m| m * mag >= raw)
        .unwrap_or(10.0);
    let step = m * mag;
    let first = (lo / step).ceil() as i64;
    let last = (hi / step).floor() as i64;
    // k·m is an exact integer; dividing it by a power of ten gives the decimal tick correctly
    // rounded (0.3, not 3 × 0.1 = 0.30000000000000004).
    let tick = |k: i64| {
        if e < 0 {
            k as f64 * m / 10f64.powi(-e)
        } else {
            k as f64 * m * mag
        }
    };
    (first..=last).map(tick).collect()
}

/// Ticks of a log10 axis inside [lo, hi]: 1, 2 and 5 of each decade when at most four decades
/// are spanned, otherwise the decades; at least the two ends when no such tick falls inside.
pub fn log_ticks(lo: f64, hi: f64) -> Vec<f64> {
    if !(lo > 0.0 && hi > lo && hi.is_finite()) {
        return vec![lo];
    }
    let (a, b) = (lo.log10().floor() as i32, hi.log10().ceil() as i32);
    let mults: &[f64] = if b - a <= 4 { &[1.0, 2.0, 5.0] } else { &[1.0] };
    let mut out = Vec::new();
    for e in a..=b {
        for m in mults {
            let v = m * 10f64.powi(e);
            if v >= lo * (1.0 - 1e-9) && v <= hi * (1.0 + 1e-9) {
                out.push(v);
            }
        }
    }
    if out.len() < 2 {
        // A narrow range: linear-style steps inside it, which a log axis places correctly.
        return linear_ticks(lo, hi, 4);
    }
    out
}

/// A number rounded to `sig` significant digits and printed without exponent, for legends and
/// labels ("−478.99" → "−479" at 3 digits, 4.97619 → "4.98").
pub fn sig_digits(x: f64, sig: u32) -> String {
    if !x.is_finite() {
        return x.to_string();
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let mag = x.abs().log10().floor() as i32;
    let decimals = (sig as i32 - 1 - mag).clamp(0, 8) as usize;
    let factor = 10f64.powi(mag - sig as i32 + 1);
    let rounded = (x / factor).round() * factor;
    let s = format!("{rounded:.decimals$}");
    s.replace('-', "−")
}

/// Rasterizes an SVG document to PNG bytes at `scale` with resvg, using the bundled fonts.
pub fn svg_to_png(svg: &[u8], scale: f32) -> crate::error::Result<Vec<u8>> {
    let pixmap = rasterize(svg, scale)?;
    pixmap.encode_png().map_err(|e| {
        crate::error::Error::invalid(
            "--png",
            format!("PNG encoding failed: {e}"),
            "Report this as a bug.",
        )
    })
}

/// Rasterizes an SVG document with resvg at `scale` over white, using the bundled fonts.
pub fn rasterize(svg: &[u8], scale: f32) -> crate::error::Result<resvg::tiny_skia::Pixmap> {
    use resvg::{tiny_skia, usvg};
    let mut options = usvg::Options::default();
    let fonts = options.fontdb_mut();
    // The bundled DejaVu faces (fonts/, with their licence), so the PNG looks the same on every
    // machine and needs no system fonts.
    fonts.load_font_data(crate::support::fonts::DEJAVU_SANS.to_vec());
    fonts.load_font_data(crate::support::fonts::DEJAVU_SANS_BOLD.to_vec());
    fonts.set_sans_serif_family("DejaVu Sans");
    let tree = usvg::Tree::from_data(svg, &options).map_err(|e| {
        crate::error::Error::invalid(
            "--png",
            format!("the chart could not be read back: {e}"),
            "Report this as a bug.",
        )
    })?;
    let size = tree.size().to_int_size().scale_by(scale).ok_or_else(|| {
        crate::error::Error::invalid(
            "--png",
            "the image size is out of range",
            "Report this as a bug.",
        )
    })?;
    let mut pixmap = tiny_skia::Pixmap::new(size.width(), size.height()).ok_or_else(|| {
        crate::error::Error::invalid(
            "--png",
            "the image size is out of range",
            "Report this as a bug.",
        )
    })?;
    pixmap.fill(tiny_skia::Color::WHITE);
    resvg::render(
        &tree,
        tiny_skia::Transform::from_scale(scale, scale),
        &mut pixmap.as_mut(),
    );
    Ok(pixmap)
}

/// Test helpers that read a chart back from its SVG text alone (roxmltree), as a user's viewer
/// would: every text's box from its attributes and the bundled font's metrics.
#[cfg(test)]
pub mod check {
    use super::*;

    /// One `<text>` element read back.
    #[derive(Debug, Clone)]
    pub struct TextBox {
        /// Its characters.
        pub text: String,
        /// Its font size, px.
        pub size: f64,
        /// Its box, px.
        pub bounds: Bounds,
    }

    /// Every text element of `svg` with its box (rotation by −90° understood).
    pub fn texts(svg: &str) -> Vec<TextBox> {
        let doc = roxmltree::Document::parse(svg).expect("well-formed SVG");
        doc.descendants()
            .filter(|n| n.has_tag_name("text"))
            .map(|n| {
                let num = |a: &str| n.attribute(a).map_or(0.0, |v| v.parse::<f64>().unwrap());
                let size = num("font-size");
                let anchor = match n.attribute("text-anchor") {
                    Some("middle") => Anchor::Middle,
                    Some("end") => Anchor::End,
                    _ => Anchor::Start,
                };
                let bold = n.attribute("font-weight") == Some("bold");
                let vertical = n
                    .attribute("transform")
                    .is_some_and(|t| t.starts_with("rotate(-90"));
                let text = n.text().unwrap_or_default().to_string();
                let bounds = text_bounds(&text, num("x"), num("y"), size, anchor, bold, vertical);
                TextBox { text, size, bounds }
            })
            .collect()
    }

    /// Pairs of texts whose boxes overlap.
    pub fn overlapping(boxes: &[TextBox]) -> Vec<(String, String)> {
        let mut out = Vec::new();
        for (i, a) in boxes.iter().enumerate() {
            for b in &boxes[i + 1..] {
                if a.bounds.overlaps(&b.bounds) {
                    out.push((a.text.clone(), b.text.clone()));
                }
            }
        }
        out
    }

    /// Elements of `svg` whose class attribute is `class`.
    pub fn count_class(svg: &str, class: &str) -> usize {
        let doc = roxmltree::Document::parse(svg).expect("well-formed SVG");
        doc.descendants()
            .filter(|n| n.attribute("class") == Some(class))
            .count()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn overbars_cover_the_letters_before_the_macron() {
        assert_eq!(overbars("MR̄ 0.35"), ("MR 0.35".to_string(), vec![(0, 2)]));
        assert_eq!(overbars("x̄ 55.8"), ("x 55.8".to_string(), vec![(0, 1)]));
        assert_eq!(overbars("plain"), ("plain".to_string(), vec![]));
    }

    #[test]
    fn placement_scale() {
        // First principles: 25.4 mm = 72 pt, so 900 px placed 127 mm wide is 360 pt: 0.4 pt/px.
        assert!((placed_pt_per_px(900.0, 127.0) - 0.4).abs() < 1e-12);
    }

    #[test]
    fn ticks_step_by_1_2_5() {
        // Ticks are k · step in floating point: compared to 1e-12 relative.
        let same = |got: Vec<f64>, want: &[f64]| {
            assert_eq!(got.len(), want.len(), "{got:?}");
            for (g, w) in got.iter().zip(want) {
                assert!((g - w).abs() <= 1e-12 * w.abs().max(1.0), "{got:?}");
            }
        };
        same(linear_ticks(0.0, 10.0, 5), &[0.0, 2.0, 4.0, 6.0, 8.0, 10.0]);
        same(linear_ticks(0.13, 0.61, 5), &[0.2, 0.3, 0.4, 0.5, 0.6]);
        same(log_ticks(150.0, 3000.0), &[200.0, 500.0, 1000.0, 2000.0]);
        // More than four decades: the decades only.
        same(log_ticks(1.0, 1e5), &[1.0, 10.0, 100.0, 1000.0, 1e4, 1e5]);
    }

    #[test]
    fn significant_digits() {
        assert_eq!(sig_digits(-478.9934, 3), "−479");
        assert_eq!(sig_digits(4.97619, 3), "4.98");
        assert_eq!(sig_digits(0.0012345, 2), "0.0012");
        assert_eq!(sig_digits(123456.0, 3), "123000");
    }

    #[test]
    fn text_boxes_read_back_as_drawn() {
        let mut svg = Svg::new(300.0, 200.0);
        let a = Label::new("Moving range (mg KOH/g)", 40.0, 150.0, 15.0).vertical();
        svg.text(&a);
        let b = Label::new("MR̄ 0.35", 100.0, 50.0, 15.0).anchor(Anchor::Middle);
        svg.text(&b);
        assert!(!svg.is_free(&b.bounds()));
        let s = String::from_utf8(svg.finish()).unwrap();
        let boxes = check::texts(&s);
        assert_eq!(boxes.len(), 2);
        assert_eq!(boxes[0].bounds, a.bounds());
        assert_eq!(boxes[1].bounds, b.bounds());
        // Vertical text is tall and narrow.
        let v = boxes[0].bounds;
        assert!(v.y1 - v.y0 > 3.0 * (v.x1 - v.x0));
        assert_eq!(check::count_class(&s, "overbar"), 1);
        assert!(check::overlapping(&boxes).is_empty());
    }
}
