//! I-MR control chart rendered as SVG bytes (individuals panel over moving-range panel).
//!
//! Colours and marks: lot values in slate blue joined in manufacture order, centre lines solid
//! grey, control limits dashed brick red, specification limits solid violet and thicker, signals
//! as an amber ring with the rule number(s) above the point, moving ranges beyond their limit as
//! filled amber dots, and a dotted grey line where frozen (baseline) limits start to apply.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::error::{Error, Result};
use crate::stats::{Limits, Signal};

/// Everything the chart shows; the caller has already computed limits and signals.
#[derive(Debug, Clone, Copy)]
pub struct ChartInput<'a> {
    /// Product code, first part of the title.
    pub product: &'a str,
    /// Property name, e.g. "Mn" or "acid value".
    pub property: &'a str,
    /// Unit of the property, e.g. "g/mol" or "mg KOH/g" (may be empty).
    pub unit: &'a str,
    /// First manufacture date shown (as the caller wants it printed).
    pub date_from: &'a str,
    /// Last manufacture date shown.
    pub date_to: &'a str,
    /// Lot ids in manufacture order, one per value.
    pub lot_ids: &'a [String],
    /// Property values in manufacture order.
    pub values: &'a [f64],
    /// Control limits (from the baseline).
    pub limits: &'a Limits,
    /// Lower specification limit, if any.
    pub spec_min: Option<f64>,
    /// Upper specification limit, if any.
    pub spec_max: Option<f64>,
    /// Run-rule signals (indices into `values`).
    pub signals: &'a [Signal],
    /// Number of leading lots the limits were frozen from, when fewer than all were used.
    pub baseline_len: Option<usize>,
}

/// Chart size in pixels.
pub const WIDTH: u32 = 1100;
/// Chart height in pixels.
pub const HEIGHT: u32 = 720;

const POINT: RGBColor = RGBColor(0x2f, 0x4b, 0x8a);
const CENTRE: RGBColor = RGBColor(0x55, 0x55, 0x55);
const CONTROL: RGBColor = RGBColor(0xb2, 0x3a, 0x2a);
const SPEC: RGBColor = RGBColor(0x7b, 0x3f, 0xa6);
const SIGNAL: RGBColor = RGBColor(0xe0, 0x8a, 0x00);
const BASELINE: RGBColor = RGBColor(0x99, 0x99, 0x99);
const TEXT: RGBColor = RGBColor(0x22, 0x22, 0x22);

/// Left margin for the y labels, right margin for the line labels, in pixels.
const Y_LABEL_AREA: u32 = 80;
const RIGHT_MARGIN: u32 = 120;
/// Above this many lots the individual point markers are left out (the line remains).
const MAX_MARKERS: usize = 400;
/// Above this many signalled lots the points get small dots instead of numbered rings.
const MAX_MARKED_SIGNALS: usize = 150;
/// Horizontal room one rotated lot label needs, in pixels.
const LABEL_PITCH: f64 = 15.0;

/// Renders the I-MR chart as an SVG document.
///
/// Errors when fewer than two values are given, the lot ids do not match the values one for one,
/// or a signal points past the end of the series.
pub fn imr_svg(input: &ChartInput) -> Result<Vec<u8>> {
    check(input)?;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        draw(&root, input).map_err(|e| {
            Error::invalid(
                "chart",
                format!("drawing failed: {e}"),
                "Report this as a bug.",
            )
        })?;
        root.present().map_err(|e| {
            Error::invalid(
                "chart",
                format!("drawing failed: {e}"),
                "Report this as a bug.",
            )
        })?;
    }
    Ok(svg.into_bytes())
}

/// Scale of the PNG relative to the SVG's pixel size (2 gives 2200 × 1440 pixels).
pub const PNG_SCALE: f32 = 2.0;

/// Renders the I-MR chart as a PNG image: the SVG of [`imr_svg`] rasterized by resvg at
/// [`PNG_SCALE`], with text in the bundled DejaVu Sans.
///
/// Errors as [`imr_svg`] does.
pub fn imr_png(input: &ChartInput) -> Result<Vec<u8>> {
    let svg = imr_svg(input)?;
    svg_to_png(&svg, PNG_SCALE)
}

/// Rasterizes an SVG document to PNG bytes at `scale` with resvg, using the bundled fonts.
pub fn svg_to_png(svg: &[u8], scale: f32) -> Result<Vec<u8>> {
    let pixmap = rasterize(svg, scale)?;
    pixmap.encode_png().map_err(|e| {
        Error::invalid(
            "--png",
            format!("PNG encoding failed: {e}"),
            "Report this as a bug.",
        )
    })
}

fn rasterize(svg: &[u8], scale: f32) -> Result<resvg::tiny_skia::Pixmap> {
    use resvg::{tiny_skia, usvg};
    let mut options = usvg::Options::default();
    let fonts = options.fontdb_mut();
    // The bundled DejaVu faces (fonts/, with their licence), so the PNG looks the same on every
    // machine and needs no system fonts.
    fonts.load_font_data(crate::support::fonts::DEJAVU_SANS.to_vec());
    fonts.load_font_data(crate::support::fonts::DEJAVU_SANS_BOLD.to_vec());
    fonts.set_sans_serif_family("DejaVu Sans");
    let tree = usvg::Tree::from_data(svg, &options).map_err(|e| {
        Error::invalid(
            "--png",
            format!("the chart could not be read back: {e}"),
            "Report this as a bug.",
        )
    })?;
    let size = tree.size().to_int_size().scale_by(scale).ok_or_else(|| {
        Error::invalid(
            "--png",
            "the image size is out of range",
            "Report this as a bug.",
        )
    })?;
    let mut pixmap = tiny_skia::Pixmap::new(size.width(), size.height()).ok_or_else(|| {
        Error::invalid(
            "--png",
            "the image size is out of range",
            "Report this as a bug.",
        )
    })?;
    resvg::render(
        &tree,
        tiny_skia::Transform::from_scale(scale, scale),
        &mut pixmap.as_mut(),
    );
    Ok(pixmap)
}

fn check(input: &ChartInput) -> Result<()> {
    let n = input.values.len();
    if n < 2 {
        return Err(Error::invalid(
            "chart",
            format!("{n} value(s), an I-MR chart needs at least 2"),
            "Select at least two lots.",
        ));
    }
    if input.lot_ids.len() != n {
        return Err(Error::invalid(
            "chart",
            format!("{} lot ids for {n} values", input.lot_ids.len()),
            "Pass one lot id per value.",
        ));
    }
    if let Some(s) = input.signals.iter().find(|s| s.index >= n) {
        return Err(Error::invalid(
            "chart",
            format!(
                "a rule {} signal points at lot {} of {n}",
                s.rule,
                s.index + 1
            ),
            "Compute the signals from the same values.",
        ));
    }
    Ok(())
}

/// Title: product, property with unit, and the date range.
pub fn title(input: &ChartInput) -> String {
    let prop = if input.unit.is_empty() {
        input.property.to_string()
    } else {
        format!("{} ({})", input.property, input.unit)
    };
    format!(
        "{} · {} · {} to {}",
        input.product, prop, input.date_from, input.date_to
    )
}

/// A number with about four significant digits, for axis and line labels.
pub fn fmt_value(x: f64) -> String {
    if !x.is_finite() {
        return x.to_string();
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let magnitude = x.abs().log10().floor() as i32;
    let decimals = (3 - magnitude).clamp(0, 6) as usize;
    format!("{x:.decimals$}")
}

type DrawResult<T = ()> = std::result::Result<T, Box<dyn std::error::Error>>;

/// A label in the right margin: its height on the value axis, its text and colour.
type RightLabel = (f64, String, RGBColor);

/// Sizes both panels share, from the input.
struct Frame {
    /// Number of lots.
    n: usize,
    /// Right end of the x axis (lots sit at 0..n-1).
    x_end: f64,
    /// Buckets a polyline is decimated to (two per pixel of plot width).
    buckets: usize,
    /// Most lot labels that fit under the chart.
    max_labels: usize,
    /// Height of the lot-label area under the moving-range panel.
    x_label_area: u32,
}

impl Frame {
    fn of(input: &ChartInput) -> Frame {
        let n = input.values.len();
        let plot_width = WIDTH as f64 - Y_LABEL_AREA as f64 - RIGHT_MARGIN as f64 - 10.0;
        let longest = input
            .lot_ids
            .iter()
            .map(|s| s.chars().count())
            .max()
            .unwrap_or(1);
        Frame {
            n,
            x_end: n as f64 - 0.5,
            buckets: 2 * plot_width as usize,
            max_labels: ((plot_width / LABEL_PITCH) as usize).max(2),
            x_label_area: (longest as u32 * 7 + 14).clamp(30, 110),
        }
    }

    fn hline(&self, y: f64) -> Vec<(f64, f64)> {
        vec![(-0.5, y), (self.x_end, y)]
    }
}

fn draw<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, input: &ChartInput) -> DrawResult
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE)?;
    // `root` covers the whole backend, so backend (pixel) coordinates can be drawn on it as is.
    let titled = root.titled(&title(input), ("sans-serif", 20).into_font().color(&TEXT))?;
    let (upper, lower) = titled.split_vertically((HEIGHT as f64 * 0.58) as u32);
    let frame = Frame::of(input);
    let top = draw_individuals(root, &titled, &upper, input, &frame)?;
    let bottom = draw_moving_ranges(root, &lower, input, &frame)?;
    draw_lot_axis(
        root,
        &top,
        &bottom,
        input.lot_ids,
        label_step(frame.n, frame.max_labels),
    )?;
    root.draw(&Text::new(
        "ring and number: Nelson rule signalled at that lot; filled dot: moving range above its limit",
        (WIDTH as i32 - 12, HEIGHT as i32 - 6),
        ("sans-serif", 12)
            .into_font()
            .color(&TEXT)
            .pos(Pos::new(HPos::Right, VPos::Bottom)),
    ))?;
    Ok(())
}

/// The individuals panel: axes, centre line, control and spec limits, the frozen-limits
/// marker, the values and their signals.
fn draw_individuals<'a, DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    titled: &DrawingArea<DB, Shift>,
    upper: &'a DrawingArea<DB, Shift>,
    input: &ChartInput,
    frame: &Frame,
) -> DrawResult<Chart<'a, DB>>
where
    DB::ErrorType: 'static,
{
    let n = frame.n;
    let l = input.limits;
    let mut ys: Vec<f64> = vec![l.ucl, l.lcl, l.mean];
    ys.extend(input.spec_min);
    ys.extend(input.spec_max);
    let (y_lo, y_hi) = padded_range(input.values.iter().copied().chain(ys));
    let mut top = ChartBuilder::on(upper)
        .margin_top(8)
        .margin_right(RIGHT_MARGIN)
        .margin_left(10)
        .x_label_area_size(10)
        .y_label_area_size(Y_LABEL_AREA)
        .build_cartesian_2d(-0.5..frame.x_end, y_lo..y_hi)?;
    top.configure_mesh()
        .disable_x_mesh()
        .light_line_style(WHITE.mix(0.0))
        .bold_line_style(BLACK.mix(0.06))
        .x_labels(0)
        .y_labels(8)
        .y_label_formatter(&|y| fmt_tick(*y, y_hi - y_lo))
        .y_desc(input.property)
        .label_style(("sans-serif", 13).into_font().color(&TEXT))
        .draw()?;
    let right_labels = draw_limit_lines(&mut top, input, frame)?;
    if let Some(b) = input.baseline_len.filter(|&b| b > 0 && b < n) {
        let x = b as f64 - 0.5;
        top.draw_series(DashedLineSeries::new(
            vec![(x, y_lo), (x, y_hi)],
            3,
            4,
            BASELINE.stroke_width(1),
        ))?;
        let (px, py) = top.backend_coord(&(x, y_hi));
        titled.draw(
            &Text::new(
                "limits frozen",
                (px + 4, py + 4),
                ("sans-serif", 12).into_font(),
            )
            .into_dyn(),
        )?;
    }
    top.draw_series(LineSeries::new(
        decimate(input.values.iter().copied().enumerate(), n, frame.buckets),
        POINT.stroke_width(1),
    ))?;
    if n <= MAX_MARKERS {
        top.draw_series(
            input
                .values
                .iter()
                .enumerate()
                .map(|(i, &v)| Circle::new((i as f64, v), 3, POINT.filled())),
        )?;
    }
    draw_signals(root, &top, input)?;
    draw_right_labels(root, &top, frame.x_end, &right_labels)?;
    Ok(top)
}

/// Centre line, control limits (dashed) and spec limits of the individuals panel; returns
/// their labels for the right margin.
fn draw_limit_lines<DB: DrawingBackend>(
    top: &mut Chart<'_, DB>,
    input: &ChartInput,
    frame: &Frame,
) -> DrawResult<Vec<RightLabel>>
where
    DB::ErrorType: 'static,
{
    let l = input.limits;
    let mut right_labels: Vec<RightLabel> = Vec::new();
    top.draw_series(LineSeries::new(frame.hline(l.mean), CENTRE.stroke_width(1)))?;
    right_labels.push((l.mean, format!("CL {}", fmt_value(l.mean)), CENTRE));
    for (y, name) in [(l.ucl, "UCL"), (l.lcl, "LCL")] {
        top.draw_series(DashedLineSeries::new(
            frame.hline(y),
            8,
            5,
            CONTROL.stroke_width(2),
        ))?;
        right_labels.push((y, format!("{name} {}", fmt_value(y)), CONTROL));
    }
    for (y, name) in [(input.spec_max, "USL"), (input.spec_min, "LSL")] {
        if let Some(y) = y {
            top.draw_series(LineSeries::new(frame.hline(y), SPEC.stroke_width(3)))?;
            right_labels.push((y, format!("{name} {}", fmt_value(y)), SPEC));
        }
    }
    Ok(right_labels)
}

/// The moving-range panel: axes, MR̄ and its upper limit, the ranges, and the ranges beyond
/// the limit as filled dots.
fn draw_moving_ranges<'a, DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    lower: &'a DrawingArea<DB, Shift>,
    input: &ChartInput,
    frame: &Frame,
) -> DrawResult<Chart<'a, DB>>
where
    DB::ErrorType: 'static,
{
    let (n, l) = (frame.n, input.limits);
    let (_, mr_hi) =
        padded_range(crate::stats::moving_ranges(input.values).chain([l.mr_ucl, l.mr_bar]));
    let mut bottom = ChartBuilder::on(lower)
        .margin_top(6)
        .margin_bottom(22)
        .margin_right(RIGHT_MARGIN)
        .margin_left(10)
        .x_label_area_size(frame.x_label_area)
        .y_label_area_size(Y_LABEL_AREA)
        .build_cartesian_2d(-0.5..frame.x_end, 0.0..mr_hi)?;
    bottom
        .configure_mesh()
        .disable_x_mesh()
        .light_line_style(WHITE.mix(0.0))
        .bold_line_style(BLACK.mix(0.06))
        .label_style(("sans-serif", 13).into_font().color(&TEXT))
        .x_labels(0)
        .y_labels(5)
        .y_label_formatter(&|y| fmt_tick(*y, mr_hi))
        .y_desc("moving range")
        .draw()?;
    bottom.draw_series(LineSeries::new(
        frame.hline(l.mr_bar),
        CENTRE.stroke_width(1),
    ))?;
    bottom.draw_series(DashedLineSeries::new(
        frame.hline(l.mr_ucl),
        8,
        5,
        CONTROL.stroke_width(2),
    ))?;
    let mr_labels = vec![
        (l.mr_bar, format!("MR̄ {}", fmt_value(l.mr_bar)), CENTRE),
        (l.mr_ucl, format!("UCL {}", fmt_value(l.mr_ucl)), CONTROL),
    ];
    let mr_points = || {
        crate::stats::moving_ranges(input.values)
            .enumerate()
            .map(|(i, r)| ((i + 1) as f64, r))
    };
    let mr_line = decimate(
        crate::stats::moving_ranges(input.values)
            .enumerate()
            .map(|(i, r)| (i + 1, r)),
        n - 1,
        frame.buckets,
    );
    bottom.draw_series(LineSeries::new(mr_line, POINT.stroke_width(1)))?;
    if n <= MAX_MARKERS {
        bottom.draw_series(mr_points().map(|p| Circle::new(p, 2, POINT.filled())))?;
    }
    let beyond = mr_points().filter(|&(_, r)| r > l.mr_ucl).count();
    let dot = if beyond > MAX_MARKED_SIGNALS { 2 } else { 4 };
    bottom.draw_series(
        mr_points()
            .filter(|&(_, r)| r > l.mr_ucl)
            .map(|p| Circle::new(p, dot, SIGNAL.filled())),
    )?;
    draw_right_labels(root, &bottom, frame.x_end, &mr_labels)?;
    Ok(bottom)
}

/// The polyline of `points` (index, value), thinned for long series: when there are more than
/// `buckets` points, each run of consecutive points sharing a bucket is replaced by its minimum
/// and maximum in index order, so the drawn envelope is the same at the chart's resolution. O(n).
pub fn decimate(
    points: impl Iterator<Item = (usize, f64)>,
    len: usize,
    buckets: usize,
) -> Vec<(f64, f64)> {
    if len <= buckets.max(1) {
        return points.map(|(i, v)| (i as f64, v)).collect();
    }
    let size = len.div_ceil(buckets.max(1));
    let mut out = Vec::with_capacity(2 * buckets + 2);
    /// A bucket number with its lowest and highest (index, value).
    type Bucket = (usize, (usize, f64), (usize, f64));
    let mut current: Option<Bucket> = None;
    let flush = |out: &mut Vec<(f64, f64)>, (_, lo, hi): Bucket| {
        let (a, b) = if lo.0 <= hi.0 { (lo, hi) } else { (hi, lo) };
        out.push((a.0 as f64, a.1));
        if b.0 != a.0 {
            out.push((b.0 as f64, b.1));
        }
    };
    for (i, v) in points {
        let bucket = i / size;
        match current.as_mut() {
            Some((b, lo, hi)) if *b == bucket => {
                if v < lo.1 {
                    *lo = (i, v);
                }
                if v > hi.1 {
                    *hi = (i, v);
                }
            }
            _ => {
                if let Some(c) = current.take() {
                    flush(&mut out, c);
                }
                current = Some((bucket, (i, v), (i, v)));
            }
        }
    }
    if let Some(c) = current {
        flush(&mut out, c);
    }
    out
}

/// The smallest step of the 1-2-5 series with which at most `max_labels` lot labels are shown.
pub fn label_step(n: usize, max_labels: usize) -> usize {
    let max_labels = max_labels.max(1);
    let mut decade = 1usize;
    loop {
        for m in [1, 2, 5] {
            let k = m * decade;
            if n.div_ceil(k) <= max_labels {
                return k;
            }
        }
        decade *= 10;
    }
}

/// Tick marks on both panels and rotated lot ids under the moving-range panel, every `step` lots.
fn draw_lot_axis<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    top: &Chart<'_, DB>,
    bottom: &Chart<'_, DB>,
    ids: &[String],
    step: usize,
) -> DrawResult
where
    DB::ErrorType: 'static,
{
    let top_y = top.y_range().start;
    for (i, id) in ids.iter().enumerate().step_by(step) {
        let x = i as f64;
        let (px, py) = bottom.backend_coord(&(x, 0.0));
        root.draw(&PathElement::new(
            vec![(px, py), (px, py + 5)],
            TEXT.stroke_width(1),
        ))?;
        let (tx, ty) = top.backend_coord(&(x, top_y));
        root.draw(&PathElement::new(
            vec![(tx, ty), (tx, ty + 5)],
            TEXT.stroke_width(1),
        ))?;
        root.draw(&Text::new(
            id.clone(),
            (px, py + 8),
            ("sans-serif", 12)
                .into_font()
                .transform(FontTransform::Rotate90)
                .color(&TEXT)
                .pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

/// An axis tick label with as many decimals as the axis span needs (about 3 significant steps).
pub fn fmt_tick(y: f64, span: f64) -> String {
    let decimals = if span > 0.0 && span.is_finite() {
        (1 - span.log10().floor() as i32).clamp(0, 6) as usize
    } else {
        2
    };
    let text = format!("{y:.decimals$}");
    // Avoid "-0" and "-0.00" for ticks at zero.
    if text
        .trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        text.trim_start_matches('-').to_string()
    } else {
        text
    }
}

/// Data range with 8 % padding on each side (never empty).
fn padded_range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    let span = if hi > lo {
        hi - lo
    } else {
        lo.abs().max(1.0) * 0.1
    };
    (lo - 0.08 * span, hi + 0.12 * span)
}

type Chart<'b, DB> = ChartContext<
    'b,
    DB,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// Rings the signalled points and writes their rule numbers above them; labels that would
/// overlap the previous one with the same text are left out, others are staggered.
fn draw_signals<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &Chart<'_, DB>,
    input: &ChartInput,
) -> DrawResult
where
    DB::ErrorType: 'static,
{
    let mut by_point: Vec<(usize, String)> = Vec::new();
    for s in input.signals {
        match by_point.last_mut() {
            Some((i, text)) if *i == s.index => {
                let r = s.rule.to_string();
                if !text.split(',').any(|t| t == r) {
                    text.push(',');
                    text.push_str(&r);
                }
            }
            _ => by_point.push((s.index, s.rule.to_string())),
        }
    }
    if by_point.len() > MAX_MARKED_SIGNALS {
        // Too many to ring and number legibly: small dots and one note instead.
        for (i, _) in &by_point {
            let p = chart.backend_coord(&(*i as f64, input.values[*i]));
            root.draw(&Circle::new(p, 2, SIGNAL.filled()))?;
        }
        let (x0, y0) = chart.backend_coord(&(chart.x_range().start, chart.y_range().end));
        root.draw(&Text::new(
            format!(
                "{} lots signalled (amber dots): too many to number here, see the list of signals",
                by_point.len()
            ),
            (x0 + 8, y0 + 4),
            ("sans-serif", 12).into_font().color(&TEXT),
        ))?;
        return Ok(());
    }
    // Boxes (x0, y0, x1, y1 in pixels) of the labels placed so far; only recent ones can collide.
    let mut placed: Vec<(i32, i32, i32, i32)> = Vec::new();
    for (i, text) in &by_point {
        let (px, py) = chart.backend_coord(&(*i as f64, input.values[*i]));
        root.draw(&Circle::new((px, py), 6, SIGNAL.stroke_width(2)))?;
        let half = (7 * text.len() as i32 + 4) / 2;
        // Try above the point at growing heights, then below; a label that fits nowhere is left
        // out (the ring still marks the point).
        let candidates = [-9, -23, -37, 23, 37];
        let free = |bottom: i32| {
            let rect = (px - half, bottom - 13, px + half, bottom);
            let clear = placed
                .iter()
                .rev()
                .take(12)
                .all(|r| rect.2 < r.0 || rect.0 > r.2 || rect.3 < r.1 || rect.1 > r.3);
            clear.then_some(rect)
        };
        let Some(rect) = candidates.iter().find_map(|&dy| free(py + dy)) else {
            continue;
        };
        placed.push(rect);
        root.draw(&Text::new(
            text.clone(),
            (px, rect.3),
            ("sans-serif", 13)
                .into_font()
                .color(&SIGNAL)
                .pos(Pos::new(HPos::Center, VPos::Bottom)),
        ))?;
    }
    Ok(())
}

/// Labels the horizontal lines at the right edge, pushed apart so they never overlap.
fn draw_right_labels<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &Chart<'_, DB>,
    x_end: f64,
    labels: &[(f64, String, RGBColor)],
) -> DrawResult
where
    DB::ErrorType: 'static,
{
    const GAP: i32 = 14;
    let mut placed: Vec<(i32, i32, &str, RGBColor)> = labels
        .iter()
        .map(|(y, text, colour)| {
            let (px, py) = chart.backend_coord(&(x_end, *y));
            (px + 6, py, text.as_str(), *colour)
        })
        .collect();
    placed.sort_by_key(|p| p.1);
    for k in 1..placed.len() {
        if placed[k].1 - placed[k - 1].1 < GAP {
            placed[k].1 = placed[k - 1].1 + GAP;
        }
    }
    for (x, y, text, colour) in placed {
        root.draw(&Text::new(
            text.to_string(),
            (x, y),
            ("sans-serif", 12)
                .into_font()
                .color(&colour)
                .pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::{imr_limits, nelson_signals, RuleSet};

    /// Invented test fixture: 30 lots of a fictional product with a planted upward shift.
    fn fixture() -> (Vec<String>, Vec<f64>) {
        let ids = (1..=30).map(|i| format!("T26-{i:03}")).collect();
        let noise = [
            3.0, -6.0, 8.0, 1.0, -4.0, -9.0, 5.0, 2.0, -2.0, 7.0, -5.0, 0.0, 4.0, -8.0, 6.0, -1.0,
            3.0, -3.0, 9.0, -7.0, 2.0, 5.0, -4.0, 1.0, -6.0, 8.0, -2.0, 3.0, -5.0, 0.0,
        ];
        let mut values: Vec<f64> = noise.iter().map(|e| 2000.0 + 1.5 * e).collect();
        for v in values.iter_mut().skip(18) {
            *v += 25.0;
        }
        values[24] = 2110.0;
        (ids, values)
    }

    fn render(spec_min: Option<f64>, spec_max: Option<f64>) -> (String, Limits, Vec<Signal>) {
        let (ids, values) = fixture();
        let limits = imr_limits(&values[..15]).unwrap();
        let signals = nelson_signals(&values, &limits, RuleSet::ALL);
        let input = ChartInput {
            product: "PX-100 & co",
            property: "Mn",
            unit: "g/mol",
            date_from: "2026-01-05",
            date_to: "2026-03-02",
            lot_ids: &ids,
            values: &values,
            limits: &limits,
            spec_min,
            spec_max,
            signals: &signals,
            baseline_len: Some(15),
        };
        let svg = String::from_utf8(imr_svg(&input).unwrap()).unwrap();
        if let Ok(dir) = std::env::var("RESINLOT_CHART_DIR") {
            std::fs::write(format!("{dir}/fixture.svg"), &svg).unwrap();
        }
        (svg, limits, signals)
    }

    #[test]
    fn svg_is_well_formed_and_carries_limits_and_signals() {
        let (svg, limits, signals) = render(Some(1900.0), Some(2100.0));
        let doc = roxmltree::Document::parse(&svg).expect("well-formed SVG");
        let texts: Vec<&str> = doc
            .descendants()
            .filter(|n| n.has_tag_name("text"))
            .filter_map(|n| n.text())
            .collect();
        let has = |s: &str| texts.iter().any(|t| t.contains(s));
        assert!(has(&format!("UCL {}", fmt_value(limits.ucl))), "{texts:?}");
        assert!(has(&format!("LCL {}", fmt_value(limits.lcl))));
        assert!(has(&format!("CL {}", fmt_value(limits.mean))));
        assert!(has(&format!("UCL {}", fmt_value(limits.mr_ucl))));
        assert!(has("USL 2100") && has("LSL 1900"));
        assert!(has("PX-100 & co · Mn (g/mol) · 2026-01-05 to 2026-03-02"));
        assert!(!signals.is_empty());
        for s in &signals {
            assert!(
                has(&format!("T26-{:03}", s.index + 1)),
                "lot of signal {s:?}"
            );
        }
        assert!(signals.iter().any(|s| s.rule == 1 && s.index == 24));
        assert!(has("1"));
        assert!(has("limits frozen"));
    }

    #[test]
    fn png_has_the_right_size_and_draws_the_title_text() {
        let (svg, _, _) = render(Some(1900.0), Some(2100.0));
        let png = svg_to_png(svg.as_bytes(), PNG_SCALE).unwrap();
        // PNG signature and IHDR width/height (ISO/IEC 15948 §5.2, §11.2.2).
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
        let w = u32::from_be_bytes(png[16..20].try_into().unwrap());
        let h = u32::from_be_bytes(png[20..24].try_into().unwrap());
        assert_eq!((w, h), (2 * WIDTH, 2 * HEIGHT));
        if let Ok(dir) = std::env::var("RESINLOT_CHART_DIR") {
            std::fs::write(format!("{dir}/fixture-resvg.png"), &png).unwrap();
        }
        // The title band (above the plots) holds only text: dark pixels there mean a font was found.
        let pixmap = rasterize(svg.as_bytes(), 1.0).unwrap();
        let dark = (0..24)
            .flat_map(|y| (0..WIDTH).map(move |x| (x, y)))
            .filter(|&(x, y)| pixmap.pixel(x, y).is_some_and(|p| p.red() < 100))
            .count();
        assert!(dark > 50, "{dark} dark pixels in the title band");
    }

    #[test]
    fn without_spec_limits_no_spec_lines() {
        let (svg, _, _) = render(None, Some(2100.0));
        assert!(svg.contains("USL 2100"));
        assert!(!svg.contains("LSL"));
    }

    #[test]
    fn many_lots_thin_the_axis_labels() {
        let ids: Vec<String> = (0..500).map(|i| format!("L{i:04}")).collect();
        let values: Vec<f64> = (0..500).map(|i| ((i * 37) % 23) as f64).collect();
        let limits = imr_limits(&values).unwrap();
        let input = ChartInput {
            product: "PX-100",
            property: "acid value",
            unit: "mg KOH/g",
            date_from: "2025-01-01",
            date_to: "2026-12-01",
            lot_ids: &ids,
            values: &values,
            limits: &limits,
            spec_min: None,
            spec_max: None,
            signals: &[],
            baseline_len: None,
        };
        let svg = String::from_utf8(imr_svg(&input).unwrap()).unwrap();
        if let Ok(dir) = std::env::var("RESINLOT_CHART_DIR") {
            std::fs::write(format!("{dir}/many.svg"), &svg).unwrap();
        }
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let shown = doc
            .descendants()
            .filter(|n| n.has_tag_name("text"))
            .filter_map(|n| n.text())
            .filter(|t| ids.iter().any(|id| t.trim() == id))
            .count();
        assert!(shown > 5 && shown < 80, "{shown} lot labels");
    }

    #[test]
    fn many_signals_become_dots_with_a_note() {
        // Invented fixture: 300 lots alternating up and down fire rule 4 at almost every lot.
        let values: Vec<f64> = (0..300)
            .map(|i| if i % 2 == 0 { 10.0 } else { 12.0 })
            .collect();
        let ids: Vec<String> = (0..300).map(|i| format!("A{i:03}")).collect();
        let limits = imr_limits(&values[..2]).unwrap();
        let signals = nelson_signals(&values, &limits, RuleSet::parse("4", "--rules").unwrap());
        assert!(signals.len() > MAX_MARKED_SIGNALS);
        let input = ChartInput {
            product: "PX-100",
            property: "OHV",
            unit: "mg KOH/g",
            date_from: "2026-01-01",
            date_to: "2026-02-01",
            lot_ids: &ids,
            values: &values,
            limits: &limits,
            spec_min: None,
            spec_max: None,
            signals: &signals,
            baseline_len: Some(2),
        };
        let svg = String::from_utf8(imr_svg(&input).unwrap()).unwrap();
        roxmltree::Document::parse(&svg).unwrap();
        assert!(svg.contains(&format!("{} lots signalled", signals.len())));
    }

    #[test]
    fn mismatched_input_is_refused() {
        let limits = imr_limits(&[1.0, 2.0]).unwrap();
        let ids = vec!["a".to_string()];
        let input = ChartInput {
            product: "P",
            property: "Mn",
            unit: "",
            date_from: "",
            date_to: "",
            lot_ids: &ids,
            values: &[1.0, 2.0],
            limits: &limits,
            spec_min: None,
            spec_max: None,
            signals: &[],
            baseline_len: None,
        };
        let e = imr_svg(&input).unwrap_err().to_string();
        assert!(e.contains("1 lot ids for 2 values"), "{e}");
    }

    #[test]
    fn decimation_keeps_the_envelope() {
        let pts: Vec<f64> = (0..10_000).map(|i| ((i * 7919) % 1000) as f64).collect();
        let out = decimate(pts.iter().copied().enumerate(), pts.len(), 100);
        assert!(out.len() <= 200, "{}", out.len());
        let max = out.iter().map(|p| p.1).fold(f64::MIN, f64::max);
        let min = out.iter().map(|p| p.1).fold(f64::MAX, f64::min);
        assert_eq!((min, max), (0.0, 999.0));
        assert!(out.windows(2).all(|w| w[0].0 < w[1].0));
        let short = decimate([(0, 1.0), (1, 2.0)].into_iter(), 2, 100);
        assert_eq!(short, vec![(0.0, 1.0), (1.0, 2.0)]);
    }

    #[test]
    fn label_steps() {
        assert_eq!(label_step(30, 58), 1);
        assert_eq!(label_step(100, 58), 2);
        assert_eq!(label_step(500, 58), 10);
        assert_eq!(label_step(1_000_000, 58), 20_000);
    }

    #[test]
    fn value_formatting() {
        assert_eq!(fmt_value(55.80408), "55.80");
        assert_eq!(fmt_value(2034.56), "2035");
        assert_eq!(fmt_value(0.8531), "0.8531");
        assert_eq!(fmt_value(0.0), "0");
    }
}
