//! The viscosity–Mn plot as SVG bytes: each lot's viscosity against its Mn on log–log axes,
//! the least-squares line of the `trend` check (log10 η = log10 K + a·log10 Mn), and the lots
//! off the line by more than 3 robust standard deviations as amber rings with their ids.
//!
//! The straight line on log–log axes is the Mark–Houwink-type power law between melt or
//! solution viscosity and molar mass (Flory, *Principles of Polymer Chemistry*, 1953, ch. VII;
//! the fit itself is `stats::log_log_fit`).

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::error::{Error, Result};
use crate::stats::LogLogFit;

/// One lot on the plot.
#[derive(Debug, Clone, PartialEq)]
pub struct ViscPoint {
    /// Lot id.
    pub lot: String,
    /// Mn, g/mol.
    pub mn: f64,
    /// Viscosity, in the product's unit.
    pub viscosity: f64,
    /// True when the lot is off the line.
    pub off_line: bool,
}

/// Chart size in pixels.
pub const WIDTH: u32 = 760;
/// Chart height in pixels.
pub const HEIGHT: u32 = 480;

const POINT: RGBColor = RGBColor(0x2f, 0x4b, 0x8a);
const LINE: RGBColor = RGBColor(0x55, 0x55, 0x55);
const SIGNAL: RGBColor = RGBColor(0xe0, 0x8a, 0x00);
const TEXT: RGBColor = RGBColor(0x22, 0x22, 0x22);

/// A tick label of a log10 axis, as the plain number it stands for.
fn tick(log10: f64) -> String {
    crate::trend::chart::fmt_value(10f64.powf(log10))
}

/// The low and high end of an axis holding `values` (log10), with 5 % room either side.
fn span(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    let pad = ((hi - lo) * 0.05).max(0.01);
    (lo - pad, hi + pad)
}

/// Renders the plot. `unit` is the viscosity's unit (may be empty). Errors when fewer than
/// two points are given or a value is not positive.
pub fn viscosity_mn_svg(
    product: &str,
    points: &[ViscPoint],
    fit: &LogLogFit,
    unit: &str,
) -> Result<Vec<u8>> {
    if points.len() < 2 || points.iter().any(|p| !(p.mn > 0.0 && p.viscosity > 0.0)) {
        return Err(Error::invalid(
            "viscosity–Mn plot",
            "needs at least two lots with a positive Mn and viscosity",
            "Report this as a bug in resinlot.",
        ));
    }
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        draw(&root, product, points, fit, unit).map_err(|e| {
            Error::invalid(
                "viscosity–Mn plot",
                format!("drawing failed: {e}"),
                "Report this as a bug.",
            )
        })?;
        root.present().map_err(|e| {
            Error::invalid(
                "viscosity–Mn plot",
                format!("drawing failed: {e}"),
                "Report this as a bug.",
            )
        })?;
    }
    Ok(svg.into_bytes())
}

type DrawResult = std::result::Result<(), Box<dyn std::error::Error>>;

fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, plotters::coord::Shift>,
    product: &str,
    points: &[ViscPoint],
    fit: &LogLogFit,
    unit: &str,
) -> DrawResult
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE)?;
    let title = format!(
        "{product}: viscosity against Mn ({} lots), viscosity ∝ Mn^{:.2}",
        fit.n, fit.exponent
    );
    let (x_lo, x_hi) = span(points.iter().map(|p| p.mn.log10()));
    let (y_lo, y_hi) = span(points.iter().map(|p| p.viscosity.log10()));
    let mut chart = ChartBuilder::on(root)
        .caption(title, ("sans-serif", 18).into_font().color(&TEXT))
        .margin(12)
        .x_label_area_size(42)
        .y_label_area_size(70)
        .build_cartesian_2d(x_lo..x_hi, y_lo..y_hi)?;
    let y_desc = if unit.is_empty() {
        "viscosity (log scale)".to_string()
    } else {
        format!("viscosity, {unit} (log scale)")
    };
    chart
        .configure_mesh()
        .light_line_style(WHITE.mix(0.0))
        .bold_line_style(BLACK.mix(0.06))
        .x_labels(6)
        .y_labels(6)
        .x_label_formatter(&|x| tick(*x))
        .y_label_formatter(&|y| tick(*y))
        .x_desc("Mn, g/mol (log scale)")
        .y_desc(y_desc)
        .label_style(("sans-serif", 13).into_font().color(&TEXT))
        .draw()?;
    let line = |x: f64| fit.intercept + fit.exponent * x;
    chart.draw_series(LineSeries::new(
        vec![(x_lo, line(x_lo)), (x_hi, line(x_hi))],
        LINE.stroke_width(2),
    ))?;
    chart.draw_series(points.iter().map(|p| {
        Circle::new(
            (p.mn.log10(), p.viscosity.log10()),
            3,
            POINT.mix(0.8).filled(),
        )
    }))?;
    for p in points.iter().filter(|p| p.off_line) {
        let at = (p.mn.log10(), p.viscosity.log10());
        // A ring around the point and the lot id beside it, offset in pixels.
        chart.draw_series(std::iter::once(
            EmptyElement::at(at)
                + Circle::new((0, 0), 8, SIGNAL.stroke_width(2))
                + Text::new(
                    p.lot.clone(),
                    (11, -4),
                    ("sans-serif", 12)
                        .into_font()
                        .color(&TEXT)
                        .pos(Pos::new(HPos::Left, VPos::Center)),
                ),
        ))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Points on η = 10^-6 · Mn^3 exactly (invented), one lot pushed off the line.
    #[test]
    fn the_plot_shows_every_lot_and_names_the_one_off_the_line() {
        let mut points: Vec<ViscPoint> = (0..12)
            .map(|i| {
                let mn = 1800.0 + 40.0 * i as f64;
                ViscPoint {
                    lot: format!("L{i}"),
                    mn,
                    viscosity: 1e-6 * mn.powi(3),
                    off_line: false,
                }
            })
            .collect();
        points[5].viscosity *= 3.0;
        points[5].off_line = true;
        let (m, v): (Vec<f64>, Vec<f64>) = points.iter().map(|p| (p.mn, p.viscosity)).unzip();
        let fit = crate::stats::log_log_fit(&m, &v).unwrap();
        let svg =
            String::from_utf8(viscosity_mn_svg("TP-1", &points, &fit, "Pa·s").unwrap()).unwrap();
        assert!(svg.starts_with("<svg"), "{}", &svg[..80]);
        assert!(
            svg.contains("\nL5\n</text>"),
            "the lot off the line is named"
        );
        assert!(!svg.contains("\nL4\n</text>"), "lots on the line are not");
        assert!(svg.contains("viscosity, Pa·s (log scale)"));
        // 12 dots and one ring.
        assert_eq!(svg.matches("<circle").count(), 13);
        assert!(viscosity_mn_svg("TP-1", &points[..1], &fit, "").is_err());
    }

    #[test]
    fn log_ticks_read_as_plain_numbers() {
        assert_eq!(tick(3.0), "1000");
        assert_eq!(tick(0.0), "1.000");
    }
}
