//! The cook chart, two panels in resinlot's visual language ([`crate::support::visual`]):
//! (a) the acid value against elapsed time, with the fitted model turned back into acid
//! values, the target, and the predicted end point with its 95 % prediction interval, the
//! model drawn dashed and marked "extrapolated" past the last sample; (b) the linearised
//! quantity Y of the chosen order against time, the kinetics check, with R² and the order.
//! The safety caution is printed at the chart's foot, because the chart travels on its own.

use crate::chem::recipe::Charge;
use crate::chem::stepgrowth;
use crate::cook::fit::CookReport;
use crate::cook::kinetics::{self, Groups};
use crate::error::{Error, Result};
use crate::support::visual::{
    self, fit_text, sig_digits, Anchor, Bounds, Label, Rgb, Scale, Svg, BAND, DATA,
    EXTRAPOLATED_DASH, FIT, GRID, INK, LEFT_OUT, MUTED, SIGNAL, SPEC,
};

/// How a sample appears on the chart.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mark {
    /// Used in the fit.
    Kept,
    /// Left out by the early-point rule.
    Excluded,
    /// Used in the fit but flagged as an outlier.
    Outlier,
}

/// What the kinetics panel shows: the linearised samples and the fitted straight line.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartInput {
    /// Title line (recipe and file).
    pub title: String,
    /// Reaction order of the plotted model.
    pub order: f64,
    /// Hydroxyl minus acid groups (mol/kg of charge) used in the linearisation.
    pub excess: f64,
    /// Samples: elapsed minutes, linearised value, mark.
    pub points: Vec<(f64, f64, Mark)>,
    /// Fitted intercept and slope (per minute).
    pub intercept: f64,
    /// Fitted slope per minute.
    pub slope: f64,
    /// Linearised value at the target.
    pub target_y: f64,
    /// Target label, e.g. "target AV 1.0 mg KOH/g".
    pub target_label: String,
    /// Predicted time and its 95 % prediction interval, when computable.
    pub predicted: Option<(f64, Option<(f64, f64)>)>,
}

/// What the acid-value panel shows, in the lab's own quantity.
#[derive(Debug, Clone, PartialEq)]
pub struct AcidValuePanel {
    /// Samples: elapsed minutes, acid value (mg KOH/g), mark.
    pub samples: Vec<(f64, f64, Mark)>,
    /// The fitted model as (elapsed minutes, acid value), from where it starts (Y ≥ 1, or the
    /// first sample) to the predicted end point.
    pub curve: Vec<(f64, f64)>,
    /// Elapsed minutes of the last sample: the model beyond it is extrapolated.
    pub last_sample_min: f64,
    /// Target acid value, mg KOH/g.
    pub target_av: f64,
    /// R² of the fit (linearised), for the kinetics panel's title.
    pub r_squared: f64,
}

/// Chart width and height, px (viewed on its own: 1 px = 0.75 pt at 100 %).
pub const WIDTH: f64 = 960.0;
/// Chart height, px.
pub const HEIGHT: f64 = 820.0;
/// The smallest chart text, px: 13 px is 9.75 pt at 100 % ([`visual::PT_PER_PX`]).
const TEXT: f64 = 13.0;
const PANEL_TITLE: f64 = 14.0;
const TITLE: f64 = 17.0;
const PLOT_L: f64 = 92.0;
const PLOT_R: f64 = 930.0;
const A_TOP: f64 = 66.0;
const A_BOTTOM: f64 = 380.0;
const B_TOP: f64 = 442.0;
const B_BOTTOM: f64 = 622.0;

fn chart_error(e: impl std::fmt::Display) -> Error {
    Error::invalid(
        "--chart",
        format!("the chart could not be drawn ({e})"),
        "Report this as a bug, with the samples file.",
    )
}

/// The y-axis label of the linearised quantity of order n with hydroxyl excess Δ (mol/kg).
pub fn y_label(order: f64, excess: f64) -> String {
    if excess != 0.0 {
        format!("Y, order {order} law with hydroxyl excess {excess:.3} mol/kg")
    } else if (order - 2.0).abs() < 1e-12 {
        "1/(1-p)".into()
    } else if (order - 3.0).abs() < 1e-12 {
        "1/(1-p)^2".into()
    } else {
        format!("(1-p)^(1-{order})")
    }
}

impl AcidValuePanel {
    /// The acid-value panel of a fitted cook: the samples as measured and the fitted line
    /// Y = a + b·t turned back into acid values through the rate law's linearisation and the
    /// charge's water balance.
    ///
    /// For extents p on a grid uniform in −ln(1 − p) from 0 to the target extent, t =
    /// (Y(p) − a)/b ([`kinetics::linearised_with_excess`]) and the acid value is the one at
    /// which [`stepgrowth::progress_at`] gives p (found by bisection; AV falls as p rises).
    /// Points before the line's start (t < 0) are left out. Source: the inverse of the two
    /// mappings the fit itself uses (first principles).
    pub fn of(rep: &CookReport, ch: &Charge) -> Result<AcidValuePanel> {
        let flagged: Vec<usize> = rep.outliers.iter().map(|o| o.index).collect();
        let samples = rep
            .samples
            .iter()
            .enumerate()
            .map(|(i, s)| {
                (
                    s.elapsed_min,
                    s.acid_value,
                    mark_of(s.kept, flagged.contains(&i)),
                )
            })
            .collect();
        let groups = Groups {
            c0: rep.c0_mol_per_kg,
            excess: rep.hydroxyl_excess_mol_per_kg,
        };
        let u_end = -(1.0 - rep.target_extent).ln();
        const NODES: usize = 240;
        let av0 = stepgrowth::initial_acid_value(ch);
        // The model is drawn from the first sample used in the fit (before it the early-point
        // rule says the law does not hold yet).
        let t_first = rep
            .samples
            .iter()
            .filter(|s| s.kept)
            .map(|s| s.elapsed_min)
            .fold(f64::INFINITY, f64::min);
        let mut curve = Vec::with_capacity(NODES + 1);
        for k in 0..=NODES {
            let p = 1.0 - (-u_end * k as f64 / NODES as f64).exp();
            let y = kinetics::linearised_with_excess(p, rep.order, groups);
            let t = (y - rep.intercept) / rep.slope_per_min;
            if !(t.is_finite() && t >= 0.0 && t >= t_first) {
                continue;
            }
            let av = acid_value_at(ch, p, av0)?;
            curve.push((t, av));
        }
        Ok(AcidValuePanel {
            samples,
            curve,
            last_sample_min: rep
                .samples
                .iter()
                .map(|s| s.elapsed_min)
                .fold(0.0, f64::max),
            target_av: rep.target_acid_value,
            r_squared: rep.r_squared,
        })
    }
}

fn mark_of(kept: bool, flagged: bool) -> Mark {
    if !kept {
        Mark::Excluded
    } else if flagged {
        Mark::Outlier
    } else {
        Mark::Kept
    }
}

/// The acid value (mg KOH/g) at which the charge has reached extent `p` of its acid groups:
/// bisection on [0, AV0] over [`stepgrowth::progress_at`].
pub fn acid_value_at(ch: &Charge, p: f64, av0: f64) -> Result<f64> {
    crate::stats::solve::bisect(
        0.0,
        av0,
        |av| Ok::<bool, Error>(stepgrowth::progress_at(ch, av)?.p_acid > p),
        |lo, hi| hi - lo < 1e-9 * av0.max(1.0),
    )
}

/// Renders the two-panel chart as SVG bytes.
///
/// Errors when there is no sample, or when the fit's slope is not positive (nothing to draw
/// towards an end point).
pub fn render(input: &ChartInput, av: &AcidValuePanel) -> Result<Vec<u8>> {
    if input.points.is_empty() || av.samples.is_empty() {
        return Err(chart_error("no sample to draw"));
    }
    if !(input.slope > 0.0 && input.slope.is_finite()) {
        return Err(chart_error("the fitted slope is not positive"));
    }
    let mut svg = Svg::new(WIDTH, HEIGHT);
    let title = fit_text(&input.title, TITLE, true, WIDTH - 24.0);
    svg.text(&Label::new(&title, 12.0, 26.0, TITLE).bold());
    let x = x_scale(input, av);
    let a = acid_value_panel(&mut svg, input, av, &x);
    kinetics_panel(&mut svg, input, av, &x);
    svg.text(
        &Label::new(
            "Elapsed time (min)",
            (PLOT_L + PLOT_R) / 2.0,
            B_BOTTOM + 44.0,
            TEXT,
        )
        .anchor(Anchor::Middle)
        .colour(MUTED),
    );
    let y = legend(&mut svg, input, B_BOTTOM + 72.0);
    caution(&mut svg, y + 10.0);
    let _ = a;
    Ok(svg.finish())
}

/// Time axis: 0 to 5 % beyond the last sample, the end point and its interval.
fn x_scale(input: &ChartInput, av: &AcidValuePanel) -> Scale {
    let mut x_max = input
        .points
        .iter()
        .map(|p| p.0)
        .fold(av.last_sample_min, f64::max);
    if let Some((t, pi)) = input.predicted {
        x_max = x_max.max(t);
        if let Some((_, hi)) = pi {
            x_max = x_max.max(hi);
        }
    }
    let x_max = if x_max > 0.0 { x_max * 1.05 } else { 1.0 };
    Scale::linear(0.0, x_max, PLOT_L, PLOT_R)
}

/// Grid, frame, tick labels and the (vertical) axis title of one panel.
fn frame(svg: &mut Svg, x: &Scale, y: &Scale, top: f64, bottom: f64, y_title: &str) {
    for t in y.ticks(6) {
        let py = y.px(t);
        svg.line(&[(PLOT_L, py), (PLOT_R, py)], GRID, 1.0, None, "grid");
        let text = if y.log {
            sig_digits(t, 1)
        } else {
            tick_text(t, y.d1 - y.d0)
        };
        svg.text(
            &Label::new(&text, PLOT_L - 7.0, py + 4.5, TEXT)
                .anchor(Anchor::End)
                .colour(MUTED),
        );
    }
    for t in x.ticks(10) {
        let px = x.px(t);
        svg.line(
            &[(px, bottom), (px, bottom + 5.0)],
            MUTED,
            1.0,
            None,
            "tick",
        );
        svg.text(
            &Label::new(&format!("{t:.0}"), px, bottom + 19.0, TEXT)
                .anchor(Anchor::Middle)
                .colour(MUTED),
        );
    }
    svg.line(
        &[(PLOT_L, top), (PLOT_L, bottom), (PLOT_R, bottom)],
        MUTED,
        1.0,
        None,
        "axis",
    );
    let title = fit_text(y_title, TEXT, false, bottom - top + 40.0);
    svg.text(
        &Label::new(&title, 26.0, (top + bottom) / 2.0, TEXT)
            .anchor(Anchor::Middle)
            .vertical(),
    );
}

fn tick_text(v: f64, span: f64) -> String {
    let decimals = if span > 0.0 && span.is_finite() {
        (1 - span.log10().floor() as i32).clamp(0, 4) as usize
    } else {
        1
    };
    let s = format!("{v:.decimals$}");
    if s.trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        s.trim_start_matches('-').to_string()
    } else {
        s
    }
}

/// The predicted end point: its 95 % interval as a band over the panel and a line at the
/// predicted time.
fn end_point(svg: &mut Svg, input: &ChartInput, x: &Scale, top: f64, bottom: f64) {
    let Some((t, pi)) = input.predicted else {
        return;
    };
    if let Some((lo, hi)) = pi {
        let (a, b) = (x.px(lo.max(0.0)), x.px(hi));
        svg.rect(
            a,
            top,
            b - a,
            bottom - top,
            BAND,
            0.55,
            "end-point-interval",
        );
    }
    let px = x.px(t);
    svg.line(
        &[(px, top), (px, bottom)],
        FIT,
        1.2,
        Some("2 3"),
        "end-point",
    );
}

/// A series of (t, value) split at the last sample: solid up to it, dashed beyond.
fn model_line(
    svg: &mut Svg,
    pts: &[(f64, f64)],
    split: f64,
    x: &Scale,
    y: &Scale,
) -> Option<(f64, f64)> {
    let mut fitted: Vec<(f64, f64)> = pts
        .iter()
        .filter(|p| p.0 <= split)
        .map(|&(t, v)| (x.px(t), y.px(v)))
        .collect();
    // Both parts meet exactly at the last sample (linear interpolation between nodes).
    if let Some(k) = pts.iter().position(|p| p.0 > split).filter(|&k| k > 0) {
        let ((t0, v0), (t1, v1)) = (pts[k - 1], pts[k]);
        let v = v0 + (v1 - v0) * (split - t0) / (t1 - t0);
        fitted.push((x.px(split), y.px(v)));
    }
    let mut beyond: Vec<(f64, f64)> = Vec::new();
    if let Some(&last) = fitted.last() {
        beyond.push(last);
    }
    beyond.extend(
        pts.iter()
            .filter(|p| p.0 > split)
            .map(|&(t, v)| (x.px(t), y.px(v))),
    );
    svg.line(&fitted, FIT, 2.2, None, "model");
    if beyond.len() >= 2 {
        svg.line(&beyond, FIT, 2.2, Some(EXTRAPOLATED_DASH), "extrapolated");
        return Some(beyond[beyond.len() / 2]);
    }
    None
}

/// Samples by mark: used (dot), left out (open triangle), flagged (cross).
fn samples(svg: &mut Svg, pts: impl Iterator<Item = (f64, f64, Mark)>, x: &Scale, y: &Scale) {
    for (t, v, m) in pts {
        let (px, py) = (x.px(t), y.px(v));
        match m {
            Mark::Kept => svg.circle(px, py, 4.5, Some(DATA), None, "sample"),
            Mark::Excluded => svg.triangle(px, py, 6.5, LEFT_OUT, "sample-left-out"),
            Mark::Outlier => svg.cross(px, py, 5.5, SIGNAL, "sample-flagged"),
        }
        svg.reserve(Bounds {
            x0: px - 7.0,
            y0: py - 7.0,
            x1: px + 7.0,
            y1: py + 7.0,
        });
    }
}

/// A label placed at the first free spot of `spots` (anchor points), if any.
fn place(svg: &mut Svg, text: &str, colour: Rgb, spots: &[(f64, f64, Anchor)]) -> bool {
    spots
        .iter()
        .any(|&(x, y, a)| svg.text_if_free(&Label::new(text, x, y, TEXT).anchor(a).colour(colour)))
}

fn acid_value_panel(svg: &mut Svg, input: &ChartInput, av: &AcidValuePanel, x: &Scale) -> Scale {
    // A log scale: the approach to a target of about 1 mg KOH/g stays readable next to
    // early samples of a few hundred.
    let values = || {
        av.samples
            .iter()
            .map(|s| s.1)
            .chain(av.curve.iter().map(|c| c.1))
            .chain([av.target_av])
            .filter(|v| *v > 0.0 && v.is_finite())
    };
    let hi = values().fold(f64::MIN, f64::max);
    let lo = values().fold(f64::MAX, f64::min);
    let y = Scale::log10(lo / 1.6, hi * 1.4, A_BOTTOM, A_TOP);
    svg.text(
        &Label::new(
            "(a) Acid value against time (log scale): samples, the fitted model and the end point",
            PLOT_L,
            A_TOP - 12.0,
            PANEL_TITLE,
        )
        .bold(),
    );
    end_point(svg, input, x, A_TOP, A_BOTTOM);
    frame(svg, x, &y, A_TOP, A_BOTTOM, "Acid value (mg KOH/g)");
    let ty = y.px(av.target_av);
    svg.line(&[(PLOT_L, ty), (PLOT_R, ty)], SPEC, 2.5, None, "target");
    svg.reserve(Bounds {
        x0: PLOT_L,
        y0: ty - 2.5,
        x1: PLOT_R,
        y1: ty + 2.5,
    });
    samples(svg, av.samples.iter().copied(), x, &y);
    let mid = model_line(svg, &av.curve, av.last_sample_min, x, &y);
    // Reserve the drawn curve so labels keep clear of it.
    for &(t, v) in &av.curve {
        let (px, py) = (x.px(t), y.px(v));
        svg.reserve(Bounds {
            x0: px - 2.0,
            y0: py - 2.0,
            x1: px + 2.0,
            y1: py + 2.0,
        });
    }
    let target = format!("target AV {} mg KOH/g", sig_digits(av.target_av, 3));
    place(
        svg,
        &target,
        SPEC,
        &[
            (PLOT_R - 6.0, ty - 7.0, Anchor::End),
            (PLOT_R - 6.0, ty + 17.0, Anchor::End),
            (PLOT_L + 8.0, ty - 7.0, Anchor::Start),
        ],
    );
    if let Some((mx, my)) = mid {
        place(
            svg,
            "extrapolated",
            FIT,
            &[
                (mx + 8.0, my - 12.0, Anchor::Start),
                (mx + 8.0, my - 28.0, Anchor::Start),
                (mx - 8.0, my - 12.0, Anchor::End),
                (mx, my + 24.0, Anchor::Middle),
                (mx, my - 40.0, Anchor::Middle),
            ],
        );
    }
    if let Some((t, pi)) = input.predicted {
        let text = match pi {
            Some((lo, hi)) => format!(
                "end point {} min (95 %: {} to {} min)",
                sig_digits(t, 3),
                sig_digits(lo, 3),
                sig_digits(hi, 3)
            ),
            None => format!("end point {} min (no finite interval)", sig_digits(t, 3)),
        };
        let px = x.px(t);
        place(
            svg,
            &text,
            INK,
            &[
                (px - 6.0, A_TOP + 16.0, Anchor::End),
                (px + 6.0, A_TOP + 16.0, Anchor::Start),
                (px - 6.0, A_TOP + 34.0, Anchor::End),
                (px + 6.0, A_TOP + 34.0, Anchor::Start),
            ],
        );
    }
    y
}

fn kinetics_panel(svg: &mut Svg, input: &ChartInput, av: &AcidValuePanel, x: &Scale) {
    let top_y = input
        .points
        .iter()
        .map(|p| p.1)
        .fold(input.target_y, f64::max);
    let y = Scale::linear(0.0, top_y * 1.08, B_BOTTOM, B_TOP);
    let title = format!(
        "(b) Kinetics check: {} against time, order {}, R² {:.4}",
        y_label(input.order, input.excess),
        input.order,
        av.r_squared
    );
    let title = fit_text(&title, PANEL_TITLE, true, PLOT_R - PLOT_L);
    svg.text(&Label::new(&title, PLOT_L, B_TOP - 12.0, PANEL_TITLE).bold());
    end_point(svg, input, x, B_TOP, B_BOTTOM);
    frame(svg, x, &y, B_TOP, B_BOTTOM, "Y (no unit)");
    let ty = y.px(input.target_y);
    svg.line(&[(PLOT_L, ty), (PLOT_R, ty)], SPEC, 2.5, None, "target");
    samples(svg, input.points.iter().copied(), x, &y);
    let t_end = input.predicted.map_or(x.d1, |(t, _)| t.clamp(0.0, x.d1));
    let t_start = if input.intercept < 0.0 {
        (-input.intercept / input.slope).min(t_end)
    } else {
        0.0
    };
    let line: Vec<(f64, f64)> = [t_start, av.last_sample_min.min(t_end), t_end]
        .iter()
        .map(|&t| (t, input.intercept + input.slope * t))
        .collect();
    model_line(svg, &line, av.last_sample_min, x, &y);
    let target = format!("Y at the target: {}", sig_digits(input.target_y, 3));
    place(
        svg,
        &target,
        SPEC,
        &[
            (PLOT_L + 8.0, ty - 7.0, Anchor::Start),
            (PLOT_L + 8.0, ty + 17.0, Anchor::Start),
        ],
    );
}

/// The legend under the panels; returns the baseline of its last line.
fn legend(svg: &mut Svg, input: &ChartInput, mut y: f64) -> f64 {
    #[derive(Clone, Copy)]
    enum Sample {
        Dot,
        Triangle,
        Cross,
        Line(Rgb, f64, Option<&'static str>),
        Band,
    }
    let has = |m: Mark| input.points.iter().any(|p| p.2 == m);
    let mut items: Vec<(Sample, String)> = vec![(Sample::Dot, "sample used in the fit".into())];
    if has(Mark::Excluded) {
        items.push((Sample::Triangle, "early sample, left out of the fit".into()));
    }
    if has(Mark::Outlier) {
        items.push((Sample::Cross, "flagged outlier (kept in the fit)".into()));
    }
    items.push((
        Sample::Line(FIT, 2.2, None),
        format!(
            "fitted model: Y = {} + {}·t (t in min)",
            sig_digits(input.intercept, 3),
            sig_digits(input.slope, 3)
        ),
    ));
    items.push((
        Sample::Line(FIT, 2.2, Some(EXTRAPOLATED_DASH)),
        "extrapolated past the last sample".into(),
    ));
    items.push((Sample::Line(SPEC, 2.5, None), input.target_label.clone()));
    if let Some((t, pi)) = input.predicted {
        items.push((
            Sample::Band,
            match pi {
                Some((lo, hi)) => format!(
                    "predicted end point {} min, 95 % prediction interval {} to {} min",
                    sig_digits(t, 3),
                    sig_digits(lo, 3),
                    sig_digits(hi, 3)
                ),
                None => format!("predicted end point {} min", sig_digits(t, 3)),
            },
        ));
    }
    let mut x = 12.0;
    for (sample, text) in &items {
        let w = 28.0 + visual::text_width(text, TEXT, false) + 20.0;
        if x + w > WIDTH - 8.0 {
            x = 12.0;
            y += 20.0;
        }
        let cy = y - 4.5;
        match sample {
            Sample::Dot => svg.circle(x + 11.0, cy, 4.5, Some(DATA), None, "legend"),
            Sample::Triangle => svg.triangle(x + 11.0, cy, 6.5, LEFT_OUT, "legend"),
            Sample::Cross => svg.cross(x + 11.0, cy, 5.5, SIGNAL, "legend"),
            Sample::Line(c, w, dash) => {
                svg.line(&[(x, cy), (x + 22.0, cy)], *c, *w, *dash, "legend")
            }
            Sample::Band => svg.rect(x, cy - 7.0, 22.0, 14.0, BAND, 1.0, "legend"),
        }
        svg.text(&Label::new(text, x + 28.0, y, TEXT).colour(INK));
        x += w;
    }
    y
}

/// The safety caution, wrapped across the chart's foot.
fn caution(svg: &mut Svg, mut y: f64) {
    let text = crate::cook::correction::SAFETY_CAUTION.replace('\n', " ");
    for line in Svg::wrap(&text, TEXT, WIDTH - 24.0) {
        y += 18.0;
        svg.text(&Label::new(&line, 12.0, y, TEXT).colour(INK));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::chem::recipe::Recipe;
    use crate::cook::fit::{self, Target};
    use crate::cook::samples;
    use crate::support::visual::check;
    use approx::assert_relative_eq;

    /// An invented acid-value panel to go with the invented points of the first test.
    fn invented_panel() -> AcidValuePanel {
        AcidValuePanel {
            samples: vec![
                (0.0, 60.0, Mark::Excluded),
                (60.0, 20.0, Mark::Kept),
                (120.0, 9.0, Mark::Outlier),
            ],
            curve: vec![(0.0, 40.0), (60.0, 20.0), (120.0, 10.0), (325.0, 1.0)],
            last_sample_min: 120.0,
            target_av: 1.0,
            r_squared: 0.99,
        }
    }

    #[test]
    fn chart_has_every_element() {
        let input = ChartInput {
            title: "t".into(),
            order: 3.0,
            excess: 0.0,
            points: vec![
                (0.0, 5.0, Mark::Excluded),
                (60.0, 80.0, Mark::Kept),
                (120.0, 150.0, Mark::Outlier),
            ],
            intercept: 10.0,
            slope: 1.2,
            target_y: 400.0,
            target_label: "target AV 1.0 mg KOH/g".into(),
            predicted: Some((325.0, Some((300.0, 350.0)))),
        };
        let svg = String::from_utf8(render(&input, &invented_panel()).unwrap()).unwrap();
        assert!(svg.starts_with("<svg"));
        for text in [
            "Elapsed time (min)",
            "1/(1-p)^2",
            "target AV 1.0 mg KOH/g",
            "early sample, left out",
            "flagged outlier",
        ] {
            assert!(svg.contains(text), "missing {text}");
        }
    }

    const PD: &str = include_str!("../../specs/recipes/pd-2000.toml");
    /// The demo's invented cook (demo-lots/cooks, generated by make_cooks.py).
    const COOK: &str = include_str!("../../demo-lots/cooks/pd2000-200-a.csv");

    /// The demo cook fitted to AV 1.0 and drawn; with RESINLOT_CHART_DIR set, also written
    /// there as SVG and PNG for looking at.
    fn demo_chart() -> (CookReport, AcidValuePanel, String) {
        let recipe = Recipe::parse("pd", PD).unwrap();
        let data = samples::parse("pd2000-200-a.csv", COOK).unwrap();
        let rep = fit::analyse(
            &data,
            &recipe,
            Target::AcidValue(1.0),
            None,
            0.8,
            fit::GelGuard::default(),
        )
        .unwrap();
        let panel = AcidValuePanel::of(&rep, &recipe.charge()).unwrap();
        let svg = render(
            &rep.chart_input("PD-2000 — pd2000-200-a.csv".into()),
            &panel,
        )
        .unwrap();
        let svg = String::from_utf8(svg).unwrap();
        if let Ok(dir) = std::env::var("RESINLOT_CHART_DIR") {
            std::fs::write(format!("{dir}/cook.svg"), &svg).unwrap();
            let png = crate::trend::chart::svg_to_png(svg.as_bytes(), 1.0).unwrap();
            std::fs::write(format!("{dir}/cook.png"), png).unwrap();
        }
        (rep, panel, svg)
    }

    #[test]
    fn the_model_curve_is_the_fitted_line_turned_back_into_acid_values() {
        // First principles: each (t, AV) of the curve, taken forward again through the water
        // balance and the linearisation, lies on the fitted line Y = a + b·t.
        let recipe = Recipe::parse("pd", PD).unwrap();
        let ch = recipe.charge();
        let (rep, panel, _) = demo_chart();
        assert!(panel.curve.len() > 100);
        let groups = Groups {
            c0: rep.c0_mol_per_kg,
            excess: rep.hydroxyl_excess_mol_per_kg,
        };
        for &(t, av) in panel.curve.iter().step_by(17) {
            let p = stepgrowth::progress_at(&ch, av).unwrap().p_acid;
            let y = kinetics::linearised_with_excess(p, rep.order, groups);
            assert_relative_eq!(
                y,
                rep.intercept + rep.slope_per_min * t,
                max_relative = 1e-6
            );
        }
        // It ends at the target at the predicted time.
        let (t_end, av_end) = *panel.curve.last().unwrap();
        assert_relative_eq!(av_end, 1.0, max_relative = 1e-6);
        assert_relative_eq!(t_end, rep.predicted_elapsed_min, max_relative = 1e-6);
    }

    #[test]
    fn the_chart_reads_as_the_issue_asks() {
        let (_, panel, svg) = demo_chart();
        let texts = check::texts(&svg);
        // An acid-value axis with its unit, and units or "no unit" on every vertical title.
        let vertical: Vec<&str> = texts
            .iter()
            .filter(|t| t.bounds.y1 - t.bounds.y0 > 2.0 * (t.bounds.x1 - t.bounds.x0))
            .map(|t| t.text.as_str())
            .collect();
        assert!(vertical.contains(&"Acid value (mg KOH/g)"), "{vertical:?}");
        assert!(vertical.iter().all(|t| t.contains('(')), "{vertical:?}");
        // Text at least 8 pt when the chart is viewed at 100 %.
        for t in &texts {
            assert!(t.size * visual::PT_PER_PX >= visual::MIN_TEXT_PT, "{t:?}");
        }
        // No two texts overlap.
        let clash = check::overlapping(&texts);
        assert!(clash.is_empty(), "{clash:?}");
        // The caution travels with the chart.
        let all: String = texts
            .iter()
            .map(|t| t.text.as_str())
            .collect::<Vec<_>>()
            .join(" ");
        assert!(
            all.contains("CAUTION: these figures advise work at a hot reactor"),
            "{all}"
        );
        assert!(all.contains("next titration decides"), "{all}");
        assert!(texts.iter().any(|t| t.text == "extrapolated"), "{all}");
        // A dashed extrapolated segment in each panel, starting at the last sample.
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let x_last = x_scale(
            &ChartInput {
                ..demo_chart().0.chart_input(String::new())
            },
            &panel,
        )
        .px(panel.last_sample_min);
        let dashed: Vec<_> = doc
            .descendants()
            .filter(|n| n.attribute("class") == Some("extrapolated"))
            .collect();
        assert_eq!(dashed.len(), 2);
        for d in dashed {
            assert!(d.attribute("stroke-dasharray").is_some());
            let xs: Vec<f64> = d
                .attribute("points")
                .unwrap()
                .split(' ')
                .map(|p| p.split(',').next().unwrap().parse().unwrap())
                .collect();
            assert!(
                xs.iter().all(|&x| x >= x_last - 0.01),
                "{xs:?} from {x_last}"
            );
        }
        // Legend values in meaningful digits: no long decimals.
        let legend = texts
            .iter()
            .find(|t| t.text.starts_with("fitted model"))
            .unwrap();
        assert!(!legend.text.contains("0000"), "{}", legend.text);
    }
}
