//! The viscosity–Mn plot of one product, drawn as SVG in resinlot's visual language
//! ([`crate::support::visual`]): every lot on log-log axes, the least-squares line of
//! log10 η on log10 Mn with its 95 % prediction band, the lots off the line labelled, and the
//! exponent and R² in the title area. The PDF trend report places it at the same width as the
//! I-MR charts ([`crate::trend::chart::PLACED_WIDTH_MM`]), so its text prints at 8 pt or more.

use crate::error::{Error, Result};
use crate::stats::dist::student_t_quantile;
use crate::stats::LineFit;
use crate::support::visual::{
    self, fit_text, sig_digits, Anchor, Bounds, Label, Scale, Svg, BAND, DATA, FIT, GRID, INK,
    MUTED, SIGNAL,
};
use crate::trend::product::ViscosityCheck;

/// Chart width, px (as the I-MR chart, so both print at the same scale).
pub const WIDTH: f64 = crate::trend::chart::WIDTH as f64;
/// Chart height, px.
pub const HEIGHT: f64 = 580.0;
const TEXT: f64 = 15.0;
const TITLE: f64 = 19.0;
const PLOT_L: f64 = 104.0;
const PLOT_R: f64 = 880.0;
const TOP: f64 = 84.0;
const BOTTOM: f64 = 478.0;

/// The 95 % prediction band of a new observation at x (log10 Mn): ŷ ± t(0.975, n − 2) · s ·
/// √(1 + 1/n + (x − x̄)²/Sxx), in log10 viscosity.
///
/// Source: N. R. Draper and H. Smith, Applied Regression Analysis, 3rd ed., §1.4 (the variance
/// of a new observation at x0 is σ²(1 + 1/n + (x0 − x̄)²/Sxx)); NIST/SEMATECH e-Handbook
/// §4.5.2.2 (prediction intervals).
pub fn prediction_band(line: &LineFit, x: f64) -> (f64, f64) {
    let t = student_t_quantile(0.975, line.n as f64 - 2.0);
    let half = t * line.residual_sd * (1.0 + line.leverage(x)).sqrt();
    let y = line.at(x);
    (y - half, y + half)
}

/// Renders the viscosity–Mn plot as an SVG document. `product` heads the title and `unit` is
/// the viscosity's unit (may be empty).
///
/// Errors when the check holds no lot or a lot value is not positive (log axes).
pub fn viscosity_svg(product: &str, unit: &str, v: &ViscosityCheck) -> Result<Vec<u8>> {
    if v.points.len() < 3
        || v.points.iter().any(|p| {
            !(p.mn > 0.0 && p.viscosity > 0.0 && p.mn.is_finite() && p.viscosity.is_finite())
        })
    {
        return Err(Error::invalid(
            format!("viscosity–Mn plot of {product}"),
            "fewer than 3 lots with positive Mn and viscosity",
            "Select lots that have both results.",
        ));
    }
    let f = &v.fit;
    let mut svg = Svg::new(WIDTH, HEIGHT);
    let title = format!(
        "{product} · Viscosity against Mn, log-log · {} lots",
        v.points.len()
    );
    svg.text(
        &Label::new(
            &fit_text(&title, TITLE, true, WIDTH - 24.0),
            12.0,
            26.0,
            TITLE,
        )
        .bold(),
    );
    let sub = format!(
        "viscosity ∝ Mn^{} ± {} (standard error), R² {:.3}; {} off the line by more than {} robust SD",
        sig_digits(f.exponent, 3),
        sig_digits(f.exponent_se, 2),
        f.r_squared,
        match v.off_line.len() {
            1 => "1 lot".to_string(),
            k => format!("{k} lots"),
        },
        crate::stats::regression::FLAG_SIGMAS
    );
    svg.text(&Label::new(&fit_text(&sub, TEXT, false, WIDTH - 24.0), 12.0, 50.0, TEXT).colour(INK));

    let (mut x_lo, mut x_hi, mut y_lo, mut y_hi) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for p in &v.points {
        x_lo = x_lo.min(p.mn);
        x_hi = x_hi.max(p.mn);
        y_lo = y_lo.min(p.viscosity);
        y_hi = y_hi.max(p.viscosity);
    }
    // Room for the band: widen the value range to the band at both ends.
    for x in [x_lo, x_hi] {
        let (a, b) = prediction_band(&f.line, x.log10());
        y_lo = y_lo.min(10f64.powf(a));
        y_hi = y_hi.max(10f64.powf(b));
    }
    let pad = |lo: f64, hi: f64| {
        let r = (hi / lo).max(1.0001).ln();
        ((lo.ln() - 0.06 * r).exp(), (hi.ln() + 0.10 * r).exp())
    };
    let (x_lo, x_hi) = pad(x_lo, x_hi);
    let (y_lo, y_hi) = pad(y_lo, y_hi);
    let xs = Scale::log10(x_lo, x_hi, PLOT_L, PLOT_R);
    let ys = Scale::log10(y_lo, y_hi, BOTTOM, TOP);

    // Grid, ticks and axis titles with units.
    for t in ys.ticks(6) {
        let py = ys.px(t);
        svg.line(&[(PLOT_L, py), (PLOT_R, py)], GRID, 1.0, None, "grid");
        svg.text(
            &Label::new(&sig_digits(t, 3), PLOT_L - 7.0, py + 5.0, TEXT)
                .anchor(Anchor::End)
                .colour(MUTED),
        );
    }
    for t in xs.ticks(6) {
        let px = xs.px(t);
        svg.line(&[(px, TOP), (px, BOTTOM)], GRID, 1.0, None, "grid");
        svg.line(
            &[(px, BOTTOM), (px, BOTTOM + 5.0)],
            MUTED,
            1.0,
            None,
            "tick",
        );
        svg.text(
            &Label::new(&sig_digits(t, 3), px, BOTTOM + 21.0, TEXT)
                .anchor(Anchor::Middle)
                .colour(MUTED),
        );
    }
    svg.line(
        &[(PLOT_L, TOP), (PLOT_L, BOTTOM), (PLOT_R, BOTTOM)],
        MUTED,
        1.0,
        None,
        "axis",
    );
    svg.text(
        &Label::new(
            "Mn (g/mol), log scale",
            (PLOT_L + PLOT_R) / 2.0,
            BOTTOM + 44.0,
            TEXT,
        )
        .anchor(Anchor::Middle)
        .colour(INK),
    );
    let y_title = if unit.is_empty() {
        "Viscosity (as recorded), log scale".to_string()
    } else {
        format!("Viscosity ({unit}), log scale")
    };
    svg.text(
        &Label::new(&y_title, 26.0, (TOP + BOTTOM) / 2.0, TEXT)
            .anchor(Anchor::Middle)
            .vertical(),
    );

    // The band and the line, over 60 steps of log Mn.
    let steps = 60;
    let lx = |k: usize| x_lo.log10() + (x_hi.log10() - x_lo.log10()) * k as f64 / steps as f64;
    let mut band: Vec<(f64, f64)> = (0..=steps)
        .map(|k| (lx(k), prediction_band(&f.line, lx(k)).1))
        .map(|(x, y)| (xs.px(10f64.powf(x)), ys.px(10f64.powf(y))))
        .collect();
    band.extend(
        (0..=steps)
            .rev()
            .map(|k| (lx(k), prediction_band(&f.line, lx(k)).0))
            .map(|(x, y)| (xs.px(10f64.powf(x)), ys.px(10f64.powf(y)))),
    );
    let clipped: Vec<(f64, f64)> = band
        .into_iter()
        .map(|(x, y)| (x, y.clamp(TOP, BOTTOM)))
        .collect();
    svg.polygon(&clipped, Some(BAND), None, "prediction-band");
    let line: Vec<(f64, f64)> = [0, steps]
        .iter()
        .map(|&k| {
            (
                xs.px(10f64.powf(lx(k))),
                ys.px(10f64.powf(f.line.at(lx(k)))),
            )
        })
        .map(|(x, y)| (x, y.clamp(TOP, BOTTOM)))
        .collect();
    svg.line(&line, FIT, 2.2, None, "fit");

    // One marker per lot; lots off the line as amber diamonds, labelled with their ids.
    let off: Vec<&str> = v.off_line.iter().map(|o| o.lot.as_str()).collect();
    for p in &v.points {
        let (px, py) = (xs.px(p.mn), ys.px(p.viscosity));
        if off.contains(&p.lot.as_str()) {
            svg.diamond(px, py, 7.0, SIGNAL, "lot-off-line");
        } else {
            svg.circle(px, py, 3.5, Some(DATA), None, "lot");
        }
        svg.reserve(Bounds {
            x0: px - 4.0,
            y0: py - 4.0,
            x1: px + 4.0,
            y1: py + 4.0,
        });
    }
    let plot = Bounds {
        x0: PLOT_L,
        y0: TOP,
        x1: PLOT_R,
        y1: BOTTOM,
    };
    let mut unlabelled = 0;
    for p in v.points.iter().filter(|p| off.contains(&p.lot.as_str())) {
        let (px, py) = (xs.px(p.mn), ys.px(p.viscosity));
        let spots = [
            (px + 10.0, py - 8.0, Anchor::Start),
            (px - 10.0, py - 8.0, Anchor::End),
            (px + 10.0, py + 18.0, Anchor::Start),
            (px - 10.0, py + 18.0, Anchor::End),
            (px, py - 24.0, Anchor::Middle),
            (px, py + 32.0, Anchor::Middle),
        ];
        let placed = spots.iter().any(|&(x, y, a)| {
            let l = Label::new(&p.lot, x, y, TEXT)
                .anchor(a)
                .colour(SIGNAL)
                .bold();
            plot.contains(&l.bounds()) && svg.text_if_free(&l)
        });
        if !placed {
            unlabelled += 1;
        }
    }

    // Legend (and a note when a lot id found no room).
    let mut x = 12.0;
    let y = HEIGHT - 14.0;
    let items = [
        ("lot", 0),
        ("off the line (named)", 1),
        ("least-squares line", 2),
        ("95 % prediction interval for one lot", 3),
    ];
    for (text, kind) in items {
        let cy = y - 5.0;
        match kind {
            0 => svg.circle(x + 11.0, cy, 3.5, Some(DATA), None, "legend"),
            1 => svg.diamond(x + 11.0, cy, 7.0, SIGNAL, "legend"),
            2 => svg.line(&[(x, cy), (x + 22.0, cy)], FIT, 2.2, None, "legend"),
            _ => svg.rect(x, cy - 7.0, 22.0, 14.0, BAND, 1.0, "legend"),
        }
        svg.text(&Label::new(text, x + 28.0, y, TEXT));
        x += 28.0 + visual::text_width(text, TEXT, false) + 20.0;
    }
    if unlabelled > 0 {
        let note = format!("{unlabelled} off-line lot(s) unnamed here: see the list");
        svg.text_if_free(
            &Label::new(&note, WIDTH - 12.0, y, TEXT)
                .anchor(Anchor::End)
                .colour(MUTED),
        );
    }
    Ok(svg.finish())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::query::{LotRow, LotTable};
    use crate::support::visual::check;
    use crate::trend::product::viscosity_check;

    /// INVENTED lots: Mn 1900–2100 g/mol, viscosity 1e-3·Mn² mPa·s with a small wobble, and lot
    /// V-007 60 % high (off the line).
    fn lots() -> Vec<LotRow> {
        (0..40)
            .map(|i| {
                let mn = 1900.0 + 5.0 * i as f64;
                let wobble = 1.0 + 0.01 * (((i * 7) % 5) as f64 - 2.0);
                let mut visc = 1e-3 * mn * mn * wobble;
                if i == 6 {
                    visc *= 1.6;
                }
                LotRow {
                    line: i + 2,
                    lot: format!("V-{:03}", i + 1).into(),
                    manufactured: "2026-05-01".into(),
                    status: "released",
                    revision: "A",
                    mn_uncertainty: None,
                    values: vec![Some(mn), Some(visc)],
                }
            })
            .collect()
    }

    #[test]
    fn band_at_the_mean_is_t_s_root_of_one_plus_one_over_n() {
        // Draper & Smith §1.4: at x = x̄ the half-width is t·s·√(1 + 1/n).
        let v = viscosity_check(&LotTable::from_rows(&lots()), 0, 1).unwrap();
        let l = &v.fit.line;
        let (lo, hi) = prediction_band(l, l.x_mean);
        let t = student_t_quantile(0.975, (l.n - 2) as f64);
        let expect = t * l.residual_sd * (1.0 + 1.0 / l.n as f64).sqrt();
        assert!(((hi - lo) / 2.0 - expect).abs() < 1e-12);
        assert!(((hi + lo) / 2.0 - l.at(l.x_mean)).abs() < 1e-12);
        // Wider away from the mean.
        let (a, b) = prediction_band(l, l.x_mean + 0.05);
        assert!(b - a > hi - lo);
    }

    #[test]
    fn one_marker_per_lot_the_off_line_lot_named_and_tidy_text() {
        let v = viscosity_check(&LotTable::from_rows(&lots()), 0, 1).unwrap();
        assert!(
            v.off_line.iter().any(|o| o.lot == "V-007"),
            "{:?}",
            v.off_line
        );
        let svg = String::from_utf8(viscosity_svg("TP-100", "mPa·s", &v).unwrap()).unwrap();
        if let Ok(dir) = std::env::var("RESINLOT_CHART_DIR") {
            std::fs::write(format!("{dir}/viscosity.svg"), &svg).unwrap();
        }
        let markers = check::count_class(&svg, "lot") + check::count_class(&svg, "lot-off-line");
        assert_eq!(markers, 40);
        assert_eq!(check::count_class(&svg, "lot-off-line"), v.off_line.len());
        assert_eq!(check::count_class(&svg, "prediction-band"), 1);
        let texts = check::texts(&svg);
        assert!(texts.iter().any(|t| t.text == "V-007"));
        let title_area: Vec<&str> = texts.iter().take(2).map(|t| t.text.as_str()).collect();
        let exponent = format!("Mn^{}", sig_digits(v.fit.exponent, 3));
        let r2 = format!("R² {:.3}", v.fit.r_squared);
        assert!(
            title_area[1].contains(&exponent) && title_area[1].contains(&r2),
            "{title_area:?}"
        );
        assert!(texts
            .iter()
            .any(|t| t.text == "Viscosity (mPa·s), log scale"));
        let pt = visual::placed_pt_per_px(WIDTH, crate::trend::chart::PLACED_WIDTH_MM);
        for t in &texts {
            assert!(t.size * pt >= visual::MIN_TEXT_PT, "{t:?}");
        }
        let clash = check::overlapping(&texts);
        assert!(clash.is_empty(), "{clash:?}");
    }
}
