//! SVG chart of a cook: the linearised quantity of the chosen order against time, built in memory.

use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;

use crate::error::{Error, Result};

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

/// Everything the chart shows.
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

// Colours of the resinlot cook chart (our own palette).
const KEPT: RGBColor = RGBColor(0, 109, 119);
const EXCLUDED: RGBColor = RGBColor(214, 140, 40);
const OUTLIER: RGBColor = RGBColor(176, 28, 70);
const FIT: RGBColor = RGBColor(45, 45, 60);
const TARGET: RGBColor = RGBColor(96, 64, 168);
const BAND: RGBColor = RGBColor(170, 200, 205);

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

/// Renders the chart as SVG bytes: axes, the prediction band, the fitted line, the target
/// line, the samples by mark, and the legend.
pub fn render(input: &ChartInput) -> Result<Vec<u8>> {
    let (x_max, y_max) = axis_ranges(input);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 600)).into_drawing_area();
        root.fill(&WHITE).map_err(chart_error)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(&input.title, ("sans-serif", 20))
            .margin(18)
            .x_label_area_size(48)
            .y_label_area_size(84)
            .build_cartesian_2d(0.0..x_max, 0.0..y_max)
            .map_err(chart_error)?;
        chart
            .configure_mesh()
            .light_line_style(RGBColor(236, 236, 236))
            .x_label_formatter(&|v| format!("{v:.0}"))
            .y_label_formatter(&|v| format!("{v:.0}"))
            .x_desc("Elapsed time (min)")
            .y_desc(y_label(input.order, input.excess))
            .draw()
            .map_err(chart_error)?;
        draw_lines(&mut chart, input, x_max, y_max)?;
        draw_samples(&mut chart, input)?;
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.9))
            .border_style(RGBColor(190, 190, 190))
            .draw()
            .map_err(chart_error)?;
        root.present().map_err(chart_error)?;
    }
    Ok(svg.into_bytes())
}

/// The cook chart's drawing context: minutes against the linearised quantity.
type CookChart<'a, 'b> =
    ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// Upper ends of the axes: 5 % beyond the last time or prediction, 8 % above the highest value.
fn axis_ranges(input: &ChartInput) -> (f64, f64) {
    let mut x_max = input.points.iter().map(|p| p.0).fold(0.0_f64, f64::max);
    if let Some((t, pi)) = input.predicted {
        x_max = x_max.max(t);
        if let Some((_, hi)) = pi {
            x_max = x_max.max(hi);
        }
    }
    x_max = if x_max > 0.0 { x_max * 1.05 } else { 1.0 };
    let mut y_max = input
        .points
        .iter()
        .map(|p| p.1)
        .fold(input.target_y, f64::max);
    y_max = if y_max > 0.0 { y_max * 1.08 } else { 1.0 };
    (x_max, y_max)
}

/// The prediction band, the fitted line (clipped to the plot) and the dashed target line.
fn draw_lines(
    chart: &mut CookChart<'_, '_>,
    input: &ChartInput,
    x_max: f64,
    y_max: f64,
) -> Result<()> {
    if let Some((t, Some((lo, hi)))) = input.predicted {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(lo, 0.0), (hi, y_max)],
                BAND.mix(0.35).filled(),
            )))
            .map_err(chart_error)?
            .label(format!(
                "predicted end point {t:.0} min, 95 % prediction interval {lo:.0} to {hi:.0} min"
            ))
            .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 20, y + 5)], BAND.filled()));
    }
    // Draw only the part of the fitted line inside the plot (plotters does not clip lines).
    let fit_end = input.predicted.map_or(x_max, |(t, _)| t.clamp(0.0, x_max));
    let fit_start = if input.intercept < 0.0 && input.slope > 0.0 {
        (-input.intercept / input.slope).min(fit_end)
    } else {
        0.0
    };
    chart
        .draw_series(LineSeries::new(
            [fit_start, fit_end]
                .iter()
                .map(|&t| (t, input.intercept + input.slope * t)),
            FIT.stroke_width(2),
        ))
        .map_err(chart_error)?
        .label(format!(
            "fit: {:.4} + {:.5}·t",
            input.intercept, input.slope
        ))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], FIT.stroke_width(2)));
    chart
        .draw_series(DashedLineSeries::new(
            [(0.0, input.target_y), (x_max, input.target_y)],
            8,
            5,
            TARGET.stroke_width(2),
        ))
        .map_err(chart_error)?
        .label(input.target_label.clone())
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], TARGET.stroke_width(2)));
    Ok(())
}

/// The samples: kept, left out (triangles) and flagged (crosses).
fn draw_samples(chart: &mut CookChart<'_, '_>, input: &ChartInput) -> Result<()> {
    let pts = |m: Mark| {
        input
            .points
            .iter()
            .filter(move |p| p.2 == m)
            .map(|p| (p.0, p.1))
    };
    chart
        .draw_series(pts(Mark::Kept).map(|c| Circle::new(c, 5, KEPT.filled())))
        .map_err(chart_error)?
        .label("sample used in the fit")
        .legend(|(x, y)| Circle::new((x + 10, y), 5, KEPT.filled()));
    if pts(Mark::Excluded).next().is_some() {
        chart
            .draw_series(
                pts(Mark::Excluded).map(|c| TriangleMarker::new(c, 6, EXCLUDED.stroke_width(2))),
            )
            .map_err(chart_error)?
            .label("early sample, left out")
            .legend(|(x, y)| TriangleMarker::new((x + 10, y), 6, EXCLUDED.stroke_width(2)));
    }
    if pts(Mark::Outlier).next().is_some() {
        chart
            .draw_series(pts(Mark::Outlier).map(|c| Cross::new(c, 6, OUTLIER.stroke_width(3))))
            .map_err(chart_error)?
            .label("flagged outlier (kept in the fit)")
            .legend(|(x, y)| Cross::new((x + 10, y), 6, OUTLIER.stroke_width(3)));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

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
        let svg = String::from_utf8(render(&input).unwrap()).unwrap();
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
}
