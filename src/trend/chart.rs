//! The I-MR chart of one property, drawn as SVG in resinlot's visual language
//! ([`crate::support::visual`]): an individuals chart over a moving-range chart (the chart
//! names of ISO 7870-2 and the NIST/SEMATECH e-Handbook §6.3.2).
//!
//! Lot values are slate-blue dots joined in manufacture order; the centre line is solid grey,
//! control limits dashed brick red, spec limits solid violet. Every lot with a run-rule signal
//! carries an amber ring and every lot outside its spec window a crimson diamond, each with a
//! numbered tag keyed to the signal list of the report ([`marked_lots`]: 1 is the newest). Tags
//! are placed where they cover no other text, data point or limit line, joined to their point
//! by a leader when set apart. A dotted grey line shows where frozen limits start.

use crate::error::{Error, Result};
use crate::stats::{Limits, Signal};
use crate::support::visual::{
    self, fit_text, linear_ticks, Anchor, Bounds, Label, Rgb, Svg, CENTRE, CONTROL, CONTROL_DASH,
    DATA, GRID, INK, LEFT_OUT, MUTED, OUT_OF_SPEC, SIGNAL, SPEC,
};

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
    pub lot_ids: &'a crate::trend::product::TrendLots,
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
    /// The lowest value the property can take (0 for concentrations, viscosity, colour), at
    /// which the LCL is held when x̄ − 3σ falls below it ([`natural_lower_bound`]).
    pub lower_bound: Option<f64>,
}

/// Chart width in px.
pub const WIDTH: u32 = 900;
/// Chart height in px.
pub const HEIGHT: u32 = 600;
/// Width at which the PDF trend report places the chart, mm; with [`WIDTH`] it sets the print
/// size of the chart's text ([`visual::placed_pt_per_px`]).
pub const PLACED_WIDTH_MM: f64 = 178.0;
/// Size of the smallest chart text, px: 15 px placed at [`PLACED_WIDTH_MM`] is 8.4 pt.
const TEXT: f64 = 15.0;
/// Panel titles, px.
const PANEL_TITLE: f64 = 16.0;
/// The chart title, px.
const TITLE: f64 = 19.0;

/// Plot area edges, px.
const PLOT_L: f64 = 100.0;
const PLOT_R: f64 = 762.0;
const I_TOP: f64 = 58.0;
const I_BOTTOM: f64 = 270.0;
const MR_TOP: f64 = 306.0;
const MR_BOTTOM: f64 = 382.0;
/// Top of the rotated lot ids, and their longest extent, px.
const LOTS_TOP: f64 = MR_BOTTOM + 11.0;
const LOTS_MAX: f64 = 88.0;
/// Above this many lots the individual point markers are left out (the line remains).
const MAX_MARKERS: usize = 400;
/// Above this many marked lots the tags are left out (rings and diamonds stay, the list
/// numbers them).
const MAX_MARKED_SIGNALS: usize = 150;
/// Most tags drawn on one chart; more would crowd the plot.
const MAX_TAGS: usize = 60;
/// Horizontal room one rotated lot id needs, px.
const LABEL_PITCH: f64 = 19.0;

/// The lowest value a property can take, for holding the LCL there: 0 for the acid and
/// hydroxyl values, viscosity, water, colour, the molar masses and degree of polymerisation,
/// the extent of reaction, and for any property whose unit is a concentration, mass fraction,
/// viscosity or colour scale; none otherwise (a temperature such as Tg can be negative).
/// Source: first principles (an amount, a concentration or a colour index is never negative).
pub fn natural_lower_bound(key: &str, unit: &str) -> Option<f64> {
    const KEYS: [&str; 9] = [
        "acid_value",
        "hydroxyl_value",
        "viscosity",
        "water",
        "colour",
        "mn",
        "xn",
        "extent_of_reaction",
        "hydroxyl_equivalent_weight",
    ];
    const UNITS: [&str; 16] = [
        "mg KOH/g", "%", "% w/w", "wt %", "wt%", "ppm", "mg/kg", "g/mol", "g/eq", "mPa·s", "Pa·s",
        "cP", "APHA", "Hazen", "Pt-Co", "Gardner",
    ];
    (KEYS.contains(&key) || key.starts_with("colour") || UNITS.contains(&unit.trim()))
        .then_some(0.0)
}

/// Where a lot lies against its spec window.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outside {
    /// Above the upper spec limit.
    Above,
    /// Below the lower spec limit.
    Below,
}

/// A lot the chart marks: outside its spec window, signalled by a run rule, or both.
#[derive(Debug, Clone, PartialEq)]
pub struct MarkedLot {
    /// Index of the lot in the series (from 0).
    pub index: usize,
    /// Its tag number: 1 for the newest marked lot, counting back in time.
    pub number: usize,
    /// Outside the spec window, and on which side.
    pub outside: Option<Outside>,
    /// Run rules signalled at this lot, in increasing order.
    pub rules: Vec<u8>,
}

/// The lots to mark, newest first and numbered so: a lot is marked when its value lies outside
/// the spec window or a run rule signals at it. The chart's tags and the report's list use the
/// same numbers.
pub fn marked_lots(
    values: &[f64],
    signals: &[Signal],
    spec_min: Option<f64>,
    spec_max: Option<f64>,
) -> Vec<MarkedLot> {
    let mut rules: Vec<Vec<u8>> = vec![Vec::new(); values.len()];
    for s in signals.iter().filter(|s| s.index < values.len()) {
        if !rules[s.index].contains(&s.rule) {
            rules[s.index].push(s.rule);
        }
    }
    let mut out = Vec::new();
    for (i, &v) in values.iter().enumerate().rev() {
        let outside = if spec_max.is_some_and(|m| v > m) {
            Some(Outside::Above)
        } else if spec_min.is_some_and(|m| v < m) {
            Some(Outside::Below)
        } else {
            None
        };
        if outside.is_some() || !rules[i].is_empty() {
            let mut r = std::mem::take(&mut rules[i]);
            r.sort_unstable();
            out.push(MarkedLot {
                index: i,
                number: out.len() + 1,
                outside,
                rules: r,
            });
        }
    }
    out
}

impl<'a> ChartInput<'a> {
    /// The chart of one property's trend, its LCL held at the property's natural lower bound
    /// ([`natural_lower_bound`]).
    pub fn of_trend(t: &'a crate::trend::product::PropertyTrend) -> ChartInput<'a> {
        ChartInput {
            product: &t.product,
            property: &t.label,
            unit: &t.unit,
            date_from: &t.date_from,
            date_to: &t.date_to,
            lot_ids: &t.lots,
            values: &t.values,
            limits: &t.limits,
            spec_min: t.spec_min,
            spec_max: t.spec_max,
            signals: &t.raw_signals,
            baseline_len: (t.baseline_n < t.n).then_some(t.baseline_n),
            lower_bound: natural_lower_bound(&t.property, &t.unit),
        }
    }
}

/// Renders the I-MR chart as an SVG document.
///
/// Errors when fewer than two values are given, the lot ids do not match the values one for one,
/// or a signal points past the end of the series.
pub fn imr_svg(input: &ChartInput) -> Result<Vec<u8>> {
    check(input)?;
    let mut svg = Svg::new(f64::from(WIDTH), f64::from(HEIGHT));
    draw(&mut svg, input);
    Ok(svg.finish())
}

/// Scale of the PNG relative to the SVG's pixel size (2 gives 1800 × 1200 pixels).
pub const PNG_SCALE: f32 = 2.0;

/// Renders the I-MR chart as a PNG image: the SVG of [`imr_svg`] rasterized by resvg at
/// [`PNG_SCALE`], with text in the bundled DejaVu Sans.
///
/// Errors as [`imr_svg`] does.
pub fn imr_png(input: &ChartInput) -> Result<Vec<u8>> {
    let svg = imr_svg(input)?;
    svg_to_png(&svg, PNG_SCALE)
}

pub use crate::support::visual::{rasterize, svg_to_png};

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

/// A y-axis title that always keeps its unit: the label is shortened (with "…") to fit
/// `room` px at `size`, the unit in brackets never.
pub fn axis_title(label: &str, unit: &str, size: f64, room: f64) -> String {
    let tail = if unit.is_empty() {
        String::new()
    } else {
        format!(" ({unit})")
    };
    let tail_w = visual::text_width(&tail, size, false);
    format!("{}{tail}", fit_text(label, size, false, room - tail_w))
}

/// The value axis of one panel: data range to pixels.
struct Panel {
    y: visual::Scale,
    top: f64,
    bottom: f64,
}

impl Panel {
    fn py(&self, v: f64) -> f64 {
        self.y.px(v)
    }
}

/// x pixel of lot `i` of `n`.
fn px(i: f64, n: usize) -> f64 {
    let step = (PLOT_R - PLOT_L) / n as f64;
    PLOT_L + step * (i + 0.5)
}

fn draw(svg: &mut Svg, input: &ChartInput) {
    let title_text = fit_text(&title(input), TITLE, true, f64::from(WIDTH) - 24.0);
    svg.text(&Label::new(&title_text, 12.0, 24.0, TITLE).bold());
    svg.text(&Label::new("Individuals chart", PLOT_L, I_TOP - 12.0, PANEL_TITLE).bold());
    svg.text(&Label::new("Moving-range chart", PLOT_L, MR_TOP - 12.0, PANEL_TITLE).bold());
    let mut notes: Vec<String> = Vec::new();
    let lcl_shown = held_lcl(input, &mut notes);
    let ind = individuals_panel(input, lcl_shown);
    let mr = mr_panel(input);
    axes(svg, input, &ind, &mr);
    limit_lines(svg, input, &ind, lcl_shown);
    let marked = marked_lots(input.values, input.signals, input.spec_min, input.spec_max);
    data(svg, input, &ind, &marked);
    moving_ranges(svg, input, &mr);
    baseline_marker(svg, input, &mut notes);
    tags(svg, input, &ind, &marked, &mut notes);
    let axis_title = lot_axis(svg, input);
    legend_and_notes(svg, input, &marked, &notes, axis_title);
}

/// The LCL as drawn: x̄ − 3σ, or the property's natural lower bound when that is higher (with
/// a note saying so).
fn held_lcl(input: &ChartInput, notes: &mut Vec<String>) -> f64 {
    let l = input.limits;
    if !l.has_spread() {
        notes.push(
            "No spread: every baseline lot has the same value, so there are no control limits."
                .into(),
        );
        return l.lcl;
    }
    match input.lower_bound {
        Some(b) if l.lcl < b => {
            notes.push(format!(
                "LCL held at {}, the lowest value {} can take (x̄ − 3σ = {}).",
                fmt_value(b),
                input.property.to_lowercase(),
                fmt_value(l.lcl)
            ));
            b
        }
        _ => l.lcl,
    }
}

/// Data range with 8 % padding below and 12 % above (never empty).
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

fn individuals_panel(input: &ChartInput, lcl: f64) -> Panel {
    let l = input.limits;
    let mut ys: Vec<f64> = vec![l.ucl, lcl, l.mean];
    ys.extend(input.spec_min);
    ys.extend(input.spec_max);
    let (mut lo, hi) = padded_range(input.values.iter().copied().chain(ys));
    if let Some(b) = input.lower_bound {
        lo = lo.max(b - 0.02 * (hi - b).abs());
    }
    Panel {
        y: visual::Scale::linear(lo, hi, I_BOTTOM, I_TOP),
        top: I_TOP,
        bottom: I_BOTTOM,
    }
}

fn mr_panel(input: &ChartInput) -> Panel {
    let l = input.limits;
    let (_, hi) =
        padded_range(crate::stats::moving_ranges(input.values).chain([l.mr_ucl, l.mr_bar, 0.0]));
    Panel {
        y: visual::Scale::linear(0.0, hi, MR_BOTTOM, MR_TOP),
        top: MR_TOP,
        bottom: MR_BOTTOM,
    }
}

/// Frames, grid lines, tick labels and the axis titles (with the unit) of both panels.
fn axes(svg: &mut Svg, input: &ChartInput, ind: &Panel, mr: &Panel) {
    // The two vertical titles share the left margin: the individuals title is centred on its
    // panel, the moving-range title hangs from just below it and may run past its panel.
    let ind_mid = (I_TOP + I_BOTTOM) / 2.0;
    let ind_title = axis_title(input.property, input.unit, TEXT, 232.0);
    let ind_end = ind_mid + visual::text_width(&ind_title, TEXT, false) / 2.0;
    let mr_top = (ind_end + 12.0).max(MR_TOP - 16.0);
    // Down to the lot axis title's line, which starts far to the right of the margin.
    let mr_room = LOTS_TOP + lot_extent(input) + 20.0 - mr_top;
    let mr_full = axis_title("Moving range", input.unit, TEXT, f64::MAX);
    let mr_title = if visual::text_width(&mr_full, TEXT, false) <= mr_room {
        mr_full
    } else {
        axis_title("MR", input.unit, TEXT, mr_room)
    };
    for (panel, count, title, vertical_at) in [
        (ind, 6, ind_title, (ind_mid, Anchor::Middle)),
        (mr, 3, mr_title, (mr_top, Anchor::End)),
    ] {
        let (lo, hi) = (panel.y.d0, panel.y.d1);
        for t in linear_ticks(lo, hi, count) {
            let y = panel.py(t);
            svg.line(&[(PLOT_L, y), (PLOT_R, y)], GRID, 1.0, None, "grid");
            let text = fmt_tick(t, hi - lo);
            svg.text(
                &Label::new(&text, PLOT_L - 7.0, y + 5.0, TEXT)
                    .anchor(Anchor::End)
                    .colour(MUTED),
            );
        }
        svg.line(
            &[
                (PLOT_L, panel.top),
                (PLOT_L, panel.bottom),
                (PLOT_R, panel.bottom),
            ],
            MUTED,
            1.0,
            None,
            "axis",
        );
        svg.text(
            &Label::new(&title, 24.0, vertical_at.0, TEXT)
                .anchor(vertical_at.1)
                .vertical(),
        );
    }
    let _ = input;
}

/// Horizontal line at value `v` across a panel, reserved so that tags keep clear of it.
fn hline(
    svg: &mut Svg,
    panel: &Panel,
    v: f64,
    colour: Rgb,
    width: f64,
    dash: Option<&str>,
    class: &str,
) {
    let y = panel.py(v);
    svg.line(&[(PLOT_L, y), (PLOT_R, y)], colour, width, dash, class);
    svg.reserve(Bounds {
        x0: PLOT_L,
        y0: y - width / 2.0 - 1.0,
        x1: PLOT_R,
        y1: y + width / 2.0 + 1.0,
    });
}

/// Centre line, control limits and spec limits of the individuals panel, labelled at the right.
fn limit_lines(svg: &mut Svg, input: &ChartInput, ind: &Panel, lcl: f64) {
    let l = input.limits;
    let mut labels: Vec<(f64, String, Rgb)> = Vec::new();
    hline(svg, ind, l.mean, CENTRE, 1.2, None, "centre-line");
    labels.push((ind.py(l.mean), format!("CL {}", fmt_value(l.mean)), CENTRE));
    if !l.has_spread() {
        // Issue #20: limits that collapse onto the centre line are not drawn.
        spec_lines(svg, input, ind, &mut labels);
        right_labels(svg, &mut labels, ind);
        return;
    }
    hline(
        svg,
        ind,
        l.ucl,
        CONTROL,
        2.0,
        Some(visual::CONTROL_DASH),
        "control-limit",
    );
    labels.push((ind.py(l.ucl), format!("UCL {}", fmt_value(l.ucl)), CONTROL));
    hline(
        svg,
        ind,
        lcl,
        CONTROL,
        2.0,
        Some(CONTROL_DASH),
        "control-limit",
    );
    let lcl_text = if lcl > l.lcl {
        format!("LCL {} (held)", fmt_value(lcl))
    } else {
        format!("LCL {}", fmt_value(lcl))
    };
    labels.push((ind.py(lcl), lcl_text, CONTROL));
    spec_lines(svg, input, ind, &mut labels);
    right_labels(svg, &mut labels, ind);
}

/// The spec limits as lines, with their labels added to `labels`.
fn spec_lines(
    svg: &mut Svg,
    input: &ChartInput,
    ind: &Panel,
    labels: &mut Vec<(f64, String, Rgb)>,
) {
    for (y, name) in [(input.spec_max, "USL"), (input.spec_min, "LSL")] {
        if let Some(y) = y {
            hline(svg, ind, y, SPEC, 3.0, None, "spec-limit");
            labels.push((ind.py(y), format!("{name} {}", fmt_value(y)), SPEC));
        }
    }
}

/// Labels at the right end of horizontal lines, pushed apart so that none overlaps, kept within
/// the panel's height (give or take one line).
fn right_labels(svg: &mut Svg, labels: &mut [(f64, String, Rgb)], panel: &Panel) {
    const GAP: f64 = 19.0;
    labels.sort_by(|a, b| a.0.total_cmp(&b.0));
    for k in 1..labels.len() {
        if labels[k].0 - labels[k - 1].0 < GAP {
            labels[k].0 = labels[k - 1].0 + GAP;
        }
    }
    let floor = panel.bottom + 8.0;
    if let Some(last) = labels.last().map(|l| l.0) {
        if last > floor {
            let shift = last - floor;
            for l in labels.iter_mut() {
                l.0 -= shift;
            }
            for k in (0..labels.len().saturating_sub(1)).rev() {
                if labels[k + 1].0 - labels[k].0 < GAP {
                    labels[k].0 = labels[k + 1].0 - GAP;
                }
            }
        }
    }
    for (y, text, colour) in labels.iter() {
        let text = fit_text(text, TEXT, false, f64::from(WIDTH) - PLOT_R - 10.0);
        svg.text(&Label::new(&text, PLOT_R + 6.0, y + 5.0, TEXT).colour(*colour));
    }
}

/// The values (line and dots) and the marks of the marked lots (amber ring for a signal,
/// crimson diamond outside the spec window); reserves the points so tags keep clear of them.
fn data(svg: &mut Svg, input: &ChartInput, ind: &Panel, marked: &[MarkedLot]) {
    let n = input.values.len();
    let buckets = 2 * (PLOT_R - PLOT_L) as usize;
    let line: Vec<(f64, f64)> = decimate(input.values.iter().copied().enumerate(), n, buckets)
        .into_iter()
        .map(|(i, v)| (px(i, n), ind.py(v)))
        .collect();
    svg.line(&line, DATA, 1.2, None, "values");
    // The data line, sampled every few pixels, is an obstacle for tags.
    for w in line.windows(2) {
        let (a, b) = (w[0], w[1]);
        let steps = ((b.0 - a.0).hypot(b.1 - a.1) / 4.0).ceil().max(1.0) as usize;
        for s in 0..=steps {
            let t = s as f64 / steps as f64;
            let (x, y) = (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
            svg.reserve(Bounds {
                x0: x - 1.5,
                y0: y - 1.5,
                x1: x + 1.5,
                y1: y + 1.5,
            });
        }
    }
    if n <= MAX_MARKERS {
        for (i, &v) in input.values.iter().enumerate() {
            svg.circle(px(i as f64, n), ind.py(v), 3.0, Some(DATA), None, "lot");
        }
    }
    let small = marked.len() > MAX_MARKED_SIGNALS;
    for m in marked {
        let (x, y) = (px(m.index as f64, n), ind.py(input.values[m.index]));
        if !m.rules.is_empty() {
            let r = if small { 4.0 } else { 7.0 };
            svg.circle(x, y, r, None, Some((SIGNAL, 2.0)), "signal");
        }
        if m.outside.is_some() {
            svg.diamond(
                x,
                y,
                if small { 5.0 } else { 7.0 },
                OUT_OF_SPEC,
                "outside-spec",
            );
        }
        svg.reserve(Bounds {
            x0: x - 8.0,
            y0: y - 8.0,
            x1: x + 8.0,
            y1: y + 8.0,
        });
    }
}

/// The moving ranges (line and dots), MR̄ and its UCL; ranges above the UCL as amber dots.
fn moving_ranges(svg: &mut Svg, input: &ChartInput, mr: &Panel) {
    let n = input.values.len();
    let l = input.limits;
    let buckets = 2 * (PLOT_R - PLOT_L) as usize;
    let line: Vec<(f64, f64)> = decimate(
        crate::stats::moving_ranges(input.values)
            .enumerate()
            .map(|(i, r)| (i + 1, r)),
        n - 1,
        buckets,
    )
    .into_iter()
    .map(|(i, r)| (px(i, n), mr.py(r)))
    .collect();
    svg.line(&line, DATA, 1.2, None, "moving-ranges");
    // Without spread there is no MR limit (issue #20), so no range is beyond it.
    let beyond_limit = |r: f64| l.has_spread() && r > l.mr_ucl;
    let beyond = crate::stats::moving_ranges(input.values)
        .filter(|&r| beyond_limit(r))
        .count();
    for (i, r) in crate::stats::moving_ranges(input.values).enumerate() {
        let (x, y) = (px((i + 1) as f64, n), mr.py(r));
        if beyond_limit(r) {
            let dot = if beyond > MAX_MARKED_SIGNALS {
                2.5
            } else {
                4.5
            };
            svg.circle(x, y, dot, Some(SIGNAL), None, "range-beyond");
        } else if n <= MAX_MARKERS {
            svg.circle(x, y, 2.5, Some(DATA), None, "range");
        }
    }
    let mut labels = Vec::new();
    hline(svg, mr, l.mr_bar, CENTRE, 1.2, None, "centre-line");
    labels.push((
        mr.py(l.mr_bar),
        format!("MR̄ {}", fmt_value(l.mr_bar)),
        CENTRE,
    ));
    if !l.has_spread() {
        right_labels(svg, &mut labels, mr);
        return;
    }
    hline(
        svg,
        mr,
        l.mr_ucl,
        CONTROL,
        2.0,
        Some(CONTROL_DASH),
        "control-limit",
    );
    labels.push((
        mr.py(l.mr_ucl),
        format!("UCL {}", fmt_value(l.mr_ucl)),
        CONTROL,
    ));
    right_labels(svg, &mut labels, mr);
}

/// The dotted line where frozen limits start, with its label inside the plot when there is
/// room, else as a note.
fn baseline_marker(svg: &mut Svg, input: &ChartInput, notes: &mut Vec<String>) {
    let n = input.values.len();
    let Some(b) = input.baseline_len.filter(|&b| b > 0 && b < n) else {
        return;
    };
    let x = px(b as f64 - 0.5, n);
    svg.line(
        &[(x, I_TOP), (x, MR_BOTTOM)],
        LEFT_OUT,
        1.2,
        Some(visual::BASELINE_DASH),
        "baseline",
    );
    let text = format!("limits frozen after lot {b}");
    let placed = [I_TOP + 17.0, I_BOTTOM - 8.0, I_TOP + 36.0]
        .iter()
        .any(|&y| {
            svg.text_if_free(&Label::new(&text, x + 5.0, y, TEXT).colour(MUTED))
                || svg.text_if_free(
                    &Label::new(&text, x - 5.0, y, TEXT)
                        .anchor(Anchor::End)
                        .colour(MUTED),
                )
        });
    if !placed {
        notes.push(format!(
            "Dotted grey line: {text}; they apply unchanged to the later lots."
        ));
    }
}

/// Numbered tags of the marked lots, placed clear of every text, point and line, newest first
/// (so the lot needing action gets the best place), joined to their point by a leader line
/// when set apart.
fn tags(
    svg: &mut Svg,
    input: &ChartInput,
    ind: &Panel,
    marked: &[MarkedLot],
    notes: &mut Vec<String>,
) {
    if marked.is_empty() {
        return;
    }
    let n = input.values.len();
    if marked.len() > MAX_TAGS {
        notes.push(format!(
            "{} lots signalled or outside the spec window: too many to number here; the list gives each one (1 = newest).",
            marked.len()
        ));
        return;
    }
    let plot = Bounds {
        x0: PLOT_L + 2.0,
        y0: ind.top + 2.0,
        x1: PLOT_R - 2.0,
        y1: ind.bottom - 2.0,
    };
    const DIRS: [(f64, f64); 8] = [
        (0.0, -1.0),
        (0.0, 1.0),
        (-0.75, -0.75),
        (0.75, -0.75),
        (-0.75, 0.75),
        (0.75, 0.75),
        (-1.0, 0.0),
        (1.0, 0.0),
    ];
    let mut unplaced = 0;
    for m in marked {
        let (x, y) = (px(m.index as f64, n), ind.py(input.values[m.index]));
        let colour = if m.outside.is_some() {
            OUT_OF_SPEC
        } else {
            SIGNAL
        };
        let text = m.number.to_string();
        let found = [18.0, 30.0, 44.0, 60.0, 78.0].iter().find_map(|&d| {
            DIRS.iter().find_map(|&(dx, dy)| {
                let (cx, cy) = (x + dx * d, y + dy * d);
                let label = Label::new(&text, cx, cy + 5.0, TEXT)
                    .anchor(Anchor::Middle)
                    .bold()
                    .colour(Rgb(255, 255, 255));
                let b = label.bounds();
                let tag = Bounds {
                    x0: b.x0 - 3.0,
                    y0: b.y0 - 1.0,
                    x1: b.x1 + 3.0,
                    y1: b.y1 + 1.0,
                };
                (plot.contains(&tag) && svg.is_free(&tag)).then_some((label, tag, d))
            })
        });
        let Some((label, tag, d)) = found else {
            unplaced += 1;
            continue;
        };
        if d > 20.0 {
            // Leader from the mark's edge to the tag's nearest edge.
            let tx = x.clamp(tag.x0, tag.x1);
            let ty = y.clamp(tag.y0, tag.y1);
            let len = (tx - x).hypot(ty - y).max(1e-9);
            let (ux, uy) = ((tx - x) / len, (ty - y) / len);
            svg.line(
                &[(x + 8.0 * ux, y + 8.0 * uy), (tx, ty)],
                colour,
                1.0,
                None,
                "leader",
            );
        }
        svg.rect(
            tag.x0,
            tag.y0,
            tag.x1 - tag.x0,
            tag.y1 - tag.y0,
            colour,
            1.0,
            "tag",
        );
        svg.reserve(tag.grow(1.0));
        svg.text(&label);
    }
    if unplaced > 0 {
        notes.push(format!(
            "{unplaced} of the {} marked lots carry no number here (no free room next to the point); the list gives each one.",
            marked.len()
        ));
    }
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

/// Lot ids shown under the chart: one in every `step`.
fn lot_step(input: &ChartInput) -> usize {
    let max_labels = (((PLOT_R - PLOT_L) / LABEL_PITCH) as usize).max(2);
    label_step(input.values.len(), max_labels)
}

/// How far the rotated lot ids reach below the moving-range panel, px.
fn lot_extent(input: &ChartInput) -> f64 {
    input
        .lot_ids
        .iter()
        .step_by(lot_step(input))
        .map(|id| visual::text_width(id, TEXT, false))
        .fold(0.0, f64::max)
        .min(LOTS_MAX)
}

/// Tick marks under both panels and the lot ids, read upwards, under the moving-range panel.
fn lot_axis(svg: &mut Svg, input: &ChartInput) -> f64 {
    let n = input.values.len();
    let step = lot_step(input);
    for (i, id) in input.lot_ids.iter().enumerate().step_by(step) {
        let x = px(i as f64, n);
        svg.line(
            &[(x, MR_BOTTOM), (x, MR_BOTTOM + 5.0)],
            MUTED,
            1.0,
            None,
            "tick",
        );
        svg.line(
            &[(x, I_BOTTOM), (x, I_BOTTOM + 5.0)],
            MUTED,
            1.0,
            None,
            "tick",
        );
        let id = fit_text(id, TEXT, false, LOTS_MAX);
        svg.text(
            &Label::new(&id, x + 5.0, LOTS_TOP, TEXT)
                .anchor(Anchor::End)
                .colour(INK)
                .vertical(),
        );
    }
    let extent = lot_extent(input);
    let every = if step == 1 {
        "Lot, in order of manufacture".to_string()
    } else {
        format!("Lot, in order of manufacture (one in every {step} named)")
    };
    svg.text(
        &Label::new(
            &every,
            (PLOT_L + PLOT_R) / 2.0,
            LOTS_TOP + extent + 20.0,
            TEXT,
        )
        .anchor(Anchor::Middle)
        .colour(MUTED),
    );
    LOTS_TOP + extent + 20.0
}

/// The legend (one sample of each mark used, flowing onto a second line when needed) and the
/// notes below it.
fn legend_and_notes(
    svg: &mut Svg,
    input: &ChartInput,
    marked: &[MarkedLot],
    notes: &[String],
    above: f64,
) {
    #[derive(Clone, Copy)]
    enum Sample {
        Dot,
        Line(Rgb, f64, Option<&'static str>),
        Ring,
        Diamond,
        Tag,
    }
    let mut items: Vec<(Sample, &str)> = vec![
        (Sample::Dot, "lot value"),
        (Sample::Line(CENTRE, 1.2, None), "centre line"),
        (
            Sample::Line(CONTROL, 2.0, Some(CONTROL_DASH)),
            "control limit (3σ)",
        ),
    ];
    if input.spec_min.is_some() || input.spec_max.is_some() {
        items.push((Sample::Line(SPEC, 3.0, None), "spec limit"));
    }
    if marked.iter().any(|m| !m.rules.is_empty()) {
        items.push((Sample::Ring, "run-rule signal"));
    }
    if marked.iter().any(|m| m.outside.is_some()) {
        items.push((Sample::Diamond, "outside the spec window"));
    }
    if !marked.is_empty() {
        items.push((Sample::Tag, "tag n: lot n of the signal list (1 = newest)"));
    }
    let mut x = 12.0;
    let mut y = above + 24.0;
    for (sample, text) in &items {
        let w = 26.0 + visual::text_width(text, TEXT, false) + 18.0;
        if x + w > f64::from(WIDTH) - 8.0 {
            x = 12.0;
            y += 21.0;
        }
        let cy = y - 5.0;
        match sample {
            Sample::Tag => {
                let l = Label::new("n", x + 11.0, y, TEXT)
                    .anchor(Anchor::Middle)
                    .bold()
                    .colour(Rgb(255, 255, 255));
                let b = l.bounds();
                svg.rect(
                    b.x0 - 4.0,
                    b.y0 - 1.0,
                    b.x1 - b.x0 + 8.0,
                    b.y1 - b.y0 + 2.0,
                    SIGNAL,
                    1.0,
                    "legend",
                );
                svg.text(&l);
            }
            Sample::Dot => {
                svg.line(&[(x, cy), (x + 22.0, cy)], DATA, 1.2, None, "legend");
                svg.circle(x + 11.0, cy, 3.0, Some(DATA), None, "legend");
            }
            Sample::Line(c, w, dash) => {
                svg.line(&[(x, cy), (x + 22.0, cy)], *c, *w, *dash, "legend")
            }
            Sample::Ring => svg.circle(x + 11.0, cy, 7.0, None, Some((SIGNAL, 2.0)), "legend"),
            Sample::Diamond => svg.diamond(x + 11.0, cy, 7.0, OUT_OF_SPEC, "legend"),
        }
        svg.text(&Label::new(text, x + 26.0, y, TEXT).colour(INK));
        x += w;
    }
    for note in notes {
        for line in Svg::wrap(note, TEXT, f64::from(WIDTH) - 24.0) {
            y += 20.0;
            if y > f64::from(HEIGHT) - 4.0 {
                return;
            }
            svg.text(&Label::new(&line, 12.0, y, TEXT).colour(MUTED));
        }
    }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::{imr_limits, nelson_signals, RuleSet};

    fn lot_ids(ids: &[String]) -> crate::trend::product::TrendLots {
        crate::trend::product::TrendLots::of_ids(ids)
    }

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
            lot_ids: &lot_ids(&ids),
            values: &values,
            limits: &limits,
            spec_min,
            spec_max,
            signals: &signals,
            baseline_len: Some(15),
            lower_bound: None,
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
            lot_ids: &lot_ids(&ids),
            values: &values,
            limits: &limits,
            spec_min: None,
            spec_max: None,
            signals: &[],
            baseline_len: None,
            lower_bound: None,
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
            lot_ids: &lot_ids(&ids),
            values: &values,
            limits: &limits,
            spec_min: None,
            spec_max: None,
            signals: &signals,
            baseline_len: Some(2),
            lower_bound: None,
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
            lot_ids: &lot_ids(&ids),
            values: &[1.0, 2.0],
            limits: &limits,
            spec_min: None,
            spec_max: None,
            signals: &[],
            baseline_len: None,
            lower_bound: None,
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

    /// Every text at least 8 pt where the PDF report places the chart, no two text boxes
    /// overlapping, and every vertical (axis) title carrying its unit in brackets.
    fn assert_tidy(svg: &str, unit: &str) {
        use crate::support::visual::check;
        let texts = check::texts(svg);
        let pt = visual::placed_pt_per_px(f64::from(WIDTH), PLACED_WIDTH_MM);
        for t in &texts {
            assert!(
                t.size * pt >= visual::MIN_TEXT_PT,
                "{t:?} is {} pt",
                t.size * pt
            );
        }
        let clash = check::overlapping(&texts);
        assert!(clash.is_empty(), "{clash:?}");
        let titles: Vec<&str> = texts
            .iter()
            .filter(|t| t.text.contains(&format!("({unit})")))
            .filter(|t| t.bounds.y1 - t.bounds.y0 > 2.0 * (t.bounds.x1 - t.bounds.x0))
            .map(|t| t.text.as_str())
            .collect();
        assert_eq!(titles.len(), 2, "y-axis titles with ({unit}): {titles:?}");
        assert!(
            !svg.contains(visual::OVERBAR),
            "a combining macron left in the SVG"
        );
    }

    #[test]
    fn issue_19_tidy_text_units_and_standard_chart_names() {
        let (svg, _, _) = render(Some(1900.0), Some(2100.0));
        assert_tidy(&svg, "g/mol");
        assert!(svg.contains(">Individuals chart<") && svg.contains(">Moving-range chart<"));
        // MR̄ is drawn with a bar stroke, not a combining mark.
        assert!(svg.contains(">MR 1") || svg.contains(">MR "), "{svg}");
        assert!(crate::support::visual::check::count_class(&svg, "overbar") >= 1);
    }

    #[test]
    fn issue_19_marked_lots_are_numbered_newest_first_and_out_of_spec_has_its_own_mark() {
        let (ids, values) = fixture();
        let limits = imr_limits(&values[..15]).unwrap();
        let signals = nelson_signals(&values, &limits, RuleSet::ALL);
        let marked = marked_lots(&values, &signals, Some(1900.0), Some(2100.0));
        // Numbers run 1, 2, … from the newest marked lot back in time.
        assert!(marked.windows(2).all(|w| w[0].index > w[1].index));
        assert!(marked.iter().enumerate().all(|(k, m)| m.number == k + 1));
        // Lot 25 (2110 g/mol) is above the USL 2100: marked outside, whatever its rules.
        let out: Vec<_> = marked.iter().filter(|m| m.outside.is_some()).collect();
        assert_eq!(out.len(), 1);
        assert_eq!((out[0].index, out[0].outside), (24, Some(Outside::Above)));
        let (svg, _, _) = render(Some(1900.0), Some(2100.0));
        use crate::support::visual::check::count_class;
        assert_eq!(count_class(&svg, "outside-spec"), 1);
        assert_eq!(
            count_class(&svg, "signal"),
            marked.iter().filter(|m| !m.rules.is_empty()).count()
        );
        // Every tag's number is drawn once (the fixture has room for all).
        assert_eq!(count_class(&svg, "tag"), marked.len());
        let _ = ids;
    }

    /// INVENTED: 62 lots of a fictional polyol whose hydroxyl value drifts down over the last
    /// 30, as in the demo, so that many lots signal and the tags must find room.
    fn crowded() -> (Vec<String>, Vec<f64>) {
        let ids = (1..=62)
            .map(|i| format!("F26{:02}-D{:02}", 1 + i / 6, i % 6 + 1))
            .collect();
        let values = (0..62)
            .map(|i| {
                let noise = (((i * 37) % 11) as f64 - 5.0) * 0.12;
                let drift = if i > 31 {
                    -0.045 * (i - 31) as f64
                } else {
                    0.0
                };
                56.0 + noise + drift
            })
            .collect();
        (ids, values)
    }

    #[test]
    fn issue_19_a_crowded_chart_stays_tidy() {
        let (ids, values) = crowded();
        let limits = imr_limits(&values[..30]).unwrap();
        let signals = nelson_signals(&values, &limits, RuleSet::ALL);
        assert!(signals.len() > 15, "{}", signals.len());
        let input = ChartInput {
            product: "PX-200",
            property: "Hydroxyl value",
            unit: "mg KOH/g",
            date_from: "2026-01-01",
            date_to: "2026-11-28",
            lot_ids: &lot_ids(&ids),
            values: &values,
            limits: &limits,
            spec_min: Some(53.0),
            spec_max: Some(59.0),
            signals: &signals,
            baseline_len: Some(30),
            lower_bound: Some(0.0),
        };
        let svg = String::from_utf8(imr_svg(&input).unwrap()).unwrap();
        if let Ok(dir) = std::env::var("RESINLOT_CHART_DIR") {
            std::fs::write(format!("{dir}/crowded.svg"), &svg).unwrap();
            let png = svg_to_png(svg.as_bytes(), 1.0).unwrap();
            std::fs::write(format!("{dir}/crowded.png"), png).unwrap();
        }
        assert_tidy(&svg, "mg KOH/g");
        // The newest signalled lot carries tag 1.
        let marked = marked_lots(&values, &signals, Some(53.0), Some(59.0));
        assert_eq!(
            marked[0].index,
            *signals.iter().map(|s| &s.index).max().unwrap()
        );
    }

    #[test]
    fn issue_19_lcl_is_held_at_zero_for_water_with_a_note() {
        // INVENTED water contents (% w/w): small values with one wet lot, so x̄ − 3σ < 0.
        let values = [
            0.020, 0.031, 0.018, 0.045, 0.012, 0.029, 0.060, 0.015, 0.024, 0.038, 0.011, 0.027,
        ];
        let ids: Vec<String> = (1..=12).map(|i| format!("W-{i:02}")).collect();
        let limits = imr_limits(&values).unwrap();
        assert!(limits.lcl < 0.0, "{}", limits.lcl);
        let input = ChartInput {
            product: "PX-300",
            property: "Water",
            unit: "%",
            date_from: "2026-01-01",
            date_to: "2026-02-01",
            lot_ids: &lot_ids(&ids),
            values: &values,
            limits: &limits,
            spec_min: None,
            spec_max: Some(0.05),
            signals: &[],
            baseline_len: None,
            lower_bound: natural_lower_bound("water", "%"),
        };
        let svg = String::from_utf8(imr_svg(&input).unwrap()).unwrap();
        assert_tidy(&svg, "%");
        assert!(svg.contains(">LCL 0 (held)<"), "{svg}");
        assert!(
            svg.contains("LCL held at 0, the lowest value water can take"),
            "{svg}"
        );
        assert!(svg.contains(&fmt_value(limits.lcl)));
        // The lot above the USL 0.05 is marked outside the spec window.
        assert_eq!(
            crate::support::visual::check::count_class(&svg, "outside-spec"),
            1
        );
    }

    #[test]
    fn natural_lower_bounds() {
        assert_eq!(natural_lower_bound("water", "%"), Some(0.0));
        assert_eq!(natural_lower_bound("colour", "APHA"), Some(0.0));
        assert_eq!(natural_lower_bound("acid_value", "mg KOH/g"), Some(0.0));
        assert_eq!(natural_lower_bound("solids", "% w/w"), Some(0.0));
        // A glass transition temperature can be below zero: no bound.
        assert_eq!(natural_lower_bound("tg", "°C"), None);
    }

    #[test]
    fn issue_19_long_series_and_many_signals_stay_tidy() {
        let ids: Vec<String> = (0..500).map(|i| format!("L{i:04}")).collect();
        let values: Vec<f64> = (0..500).map(|i| ((i * 37) % 23) as f64).collect();
        let limits = imr_limits(&values).unwrap();
        let signals = nelson_signals(&values, &limits, RuleSet::ALL);
        let input = ChartInput {
            product: "PX-100",
            property: "Acid value",
            unit: "mg KOH/g",
            date_from: "2025-01-01",
            date_to: "2026-12-01",
            lot_ids: &lot_ids(&ids),
            values: &values,
            limits: &limits,
            spec_min: None,
            spec_max: Some(20.0),
            signals: &signals,
            baseline_len: None,
            lower_bound: Some(0.0),
        };
        let svg = String::from_utf8(imr_svg(&input).unwrap()).unwrap();
        assert_tidy(&svg, "mg KOH/g");
    }
}
