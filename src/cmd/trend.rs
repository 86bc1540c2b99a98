//! `resinlot trend`: I-MR charts, Nelson run rules, capability and the viscosity–Mn check
//! over a product's lots.

use std::path::PathBuf;

use serde_json::{json, Value};

use crate::cmd::Outcome;
use crate::error::Error;
use crate::record::query::parse_date;
use crate::spec::SpecSet;
use crate::stats::{RuleSet, SpecWindow};
use crate::trend::product::{self, Baseline, PropertyTrend, Selection, ViscosityCheck};

/// Arguments of `resinlot trend`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Product code, e.g. PD-2000.
    pub product: String,
    /// One property key (e.g. hydroxyl_value) for the full detail; without it, one summary
    /// line per numeric property.
    #[arg(long, value_name = "KEY")]
    pub property: Option<String>,
    /// Only lots manufactured on or after this date (YYYY-MM-DD).
    #[arg(long, value_name = "DATE")]
    pub from: Option<String>,
    /// Only lots manufactured on or before this date (YYYY-MM-DD).
    #[arg(long, value_name = "DATE")]
    pub to: Option<String>,
    /// Freeze the control limits from the first N selected lots and apply them to the later
    /// ones (phase I / phase II). Default: limits from all selected lots.
    #[arg(long, value_name = "N", conflicts_with = "baseline_until")]
    pub baseline: Option<usize>,
    /// Freeze the control limits from the lots manufactured up to this date (YYYY-MM-DD).
    #[arg(long, value_name = "DATE")]
    pub baseline_until: Option<String>,
    /// Nelson rules to apply: a list such as 1,2,3,5, or "all", or "we" (the Western Electric
    /// tests, which are Nelson rules 1, 2, 5 and 6). Default: all.
    #[arg(
        hide_default_value = true,
        long,
        default_value = "all",
        value_name = "RULES"
    )]
    pub rules: String,
    /// Leave out lots that were not released (by default held and rejected lots are part of
    /// the process and are included).
    #[arg(long)]
    pub released_only: bool,
    /// Folder holding the trend files. Default: register.
    #[arg(
        hide_default_value = true,
        long,
        default_value = "register",
        value_name = "DIR"
    )]
    pub register: PathBuf,
    /// Folder holding the product specs (labels, units, spec windows). Default: specs.
    #[arg(
        hide_default_value = true,
        long,
        default_value = "specs",
        value_name = "DIR"
    )]
    pub specs: PathBuf,
    /// Print JSON instead of text.
    #[arg(long)]
    pub json: bool,
    /// Write the I-MR chart of --property as SVG to this file.
    #[arg(long, value_name = "FILE", requires = "property")]
    pub chart: Option<PathBuf>,
    /// Also write the chart as PNG, beside the SVG (same name, .png).
    #[arg(long, requires = "chart")]
    pub png: bool,
    /// Write a PDF trend report: one page per property (or only --property), plus the
    /// viscosity–Mn check.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
    /// Folder holding site.toml, whose site name heads the report. Default: templates.
    #[arg(
        hide_default_value = true,
        long,
        default_value = "templates",
        value_name = "DIR"
    )]
    pub templates: PathBuf,
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let rules = RuleSet::parse(&args.rules, "--rules")?;
    let sel = Selection {
        from: args
            .from
            .as_deref()
            .map(|d| parse_date("--from", d))
            .transpose()?,
        to: args
            .to
            .as_deref()
            .map(|d| parse_date("--to", d))
            .transpose()?,
        released_only: args.released_only,
    };
    let baseline = match (args.baseline, &args.baseline_until) {
        (Some(n), _) if n < 2 => {
            return Err(Error::invalid(
                "--baseline",
                format!("{n} lot(s) cannot give a moving range"),
                "Give at least 2 lots (more than 20 is common practice).",
            )
            .into())
        }
        (Some(n), _) => Baseline::First(n),
        (None, Some(d)) => Baseline::Until(parse_date("--baseline-until", d)?),
        _ => Baseline::All,
    };
    let specs = SpecSet::load(&args.specs)?;
    let path = crate::record::trend_file::path_for(&args.register, &args.product);
    if !path.is_file() {
        return Err(Error::invalid(
            format!("product '{}'", args.product),
            format!("no trend file {} exists", path.display()),
            "Check the product code; lots appear once `resinlot release` has recorded them.",
        )
        .into());
    }
    let keys = crate::record::query::trend_keys(&path)?;
    if let Some(p) = &args.property {
        if !keys.contains(p) {
            return Err(Error::invalid(
                format!("--property '{p}'"),
                format!("{} has no property '{p}'", args.product),
                format!("Use one of: {}.", keys.join(", ")),
            )
            .into());
        }
    }
    // One property needs only its own column (and Mn and viscosity for their joint check).
    let keys: Vec<String> = match &args.property {
        Some(p) => keys
            .iter()
            .filter(|k| {
                *k == p
                    || (matches!(p.as_str(), "mn" | "viscosity")
                        && matches!(k.as_str(), "mn" | "viscosity"))
            })
            .cloned()
            .collect(),
        None => keys,
    };
    let (_, lots) = crate::record::query::current_lots(&path, &keys, false)?;
    let lots = product::select(lots, &sel);
    if lots.is_empty() {
        return Err(Error::invalid(
            format!("product '{}'", args.product),
            "no lots in the selection",
            "Widen --from/--to, or drop --released-only.",
        )
        .into());
    }
    let latest_date =
        chrono::NaiveDate::parse_from_str(&lots[lots.len() - 1].manufactured, "%Y-%m-%d").ok();
    let spec = latest_date
        .and_then(|d| specs.for_date(&args.product, d).ok())
        .or_else(|| specs.latest(&args.product));
    let wanted: Vec<&String> = match &args.property {
        Some(p) => keys.iter().filter(|k| *k == p).collect(),
        None => keys.iter().collect(),
    };
    let mut trends: Vec<PropertyTrend> = Vec::new();
    for key in wanted {
        let col = keys.iter().position(|k| k == key).expect("key from header");
        let p = spec.and_then(|s| s.property(key));
        let window = SpecWindow {
            min: p
                .and_then(|p| p.min)
                .and_then(|d| d.to_string().parse().ok()),
            max: p
                .and_then(|p| p.max)
                .and_then(|d| d.to_string().parse().ok()),
        };
        let label = p.map_or(key.as_str(), |p| p.label.as_str());
        let unit = p.map_or("", |p| if p.unit == "1" { "" } else { p.unit.as_str() });
        match product::property_trend(
            &args.product,
            key,
            col,
            label,
            unit,
            &lots,
            window,
            spec.map(|s| s.revision.clone()),
            &baseline,
            rules,
        ) {
            Ok(t) => trends.push(t),
            Err(e) if args.property.is_none() => {
                // A property with too few values is skipped in the overview, not fatal.
                let _ = e;
            }
            Err(e) => return Err(e.into()),
        }
    }
    if trends.is_empty() {
        return Err(Error::invalid(
            format!("product '{}'", args.product),
            "no property has at least 2 lots in the selection and the baseline",
            "Widen --from/--to, or move --baseline-until past the first lots.",
        )
        .into());
    }
    let visc = match (
        keys.iter().position(|k| k == "mn"),
        keys.iter().position(|k| k == "viscosity"),
    ) {
        (Some(m), Some(v)) => product::viscosity_check(&lots, m, v),
        _ => None,
    };
    if let (Some(path), Some(t)) = (&args.chart, trends.first()) {
        let input = chart_input(t);
        let svg = crate::trend::chart::imr_svg(&input)?;
        if path
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("png"))
        {
            // A .png name gets a PNG, not SVG text under the wrong name.
            let png = crate::trend::chart::svg_to_png(&svg, crate::trend::chart::PNG_SCALE)?;
            crate::support::output::write_atomic(path, &png, true)?;
        } else {
            crate::support::output::write_atomic(path, &svg, true)?;
        }
        if args.png {
            let png = crate::trend::chart::svg_to_png(&svg, crate::trend::chart::PNG_SCALE)?;
            crate::support::output::write_atomic(&path.with_extension("png"), &png, true)?;
        }
    }
    if let Some(path) = &args.report {
        let bytes = render_report(
            args,
            spec.map(|s| s.name.as_str()).unwrap_or(""),
            &trends,
            visc.as_ref(),
        )?;
        crate::support::output::write_atomic(path, &bytes, true)?;
    }
    let text = if args.json {
        let v = if args.property.is_some() {
            trend_json(&trends[0])
        } else {
            json!({
                "product": args.product,
                "properties": trends.iter().map(trend_json).collect::<Vec<_>>(),
                "viscosity_vs_mn": visc.as_ref().map(visc_json),
            })
        };
        serde_json::to_string_pretty(&v)? + "\n"
    } else if args.property.is_some() {
        detail(&trends[0], visc.as_ref(), args)
    } else {
        summary(&args.product, &trends, visc.as_ref(), args)
    };
    crate::support::output::print(&text)?;
    let any_signal = trends.iter().any(|t| !t.signals.is_empty())
        || visc.as_ref().is_some_and(|v| !v.off_line.is_empty());
    Ok(if any_signal {
        Outcome::FellShort
    } else {
        Outcome::AllGood
    })
}

fn chart_input(t: &PropertyTrend) -> crate::trend::chart::ChartInput<'_> {
    crate::trend::chart::ChartInput {
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
    }
}

fn render_report(
    args: &Args,
    name: &str,
    trends: &[PropertyTrend],
    visc: Option<&ViscosityCheck>,
) -> anyhow::Result<Vec<u8>> {
    let site_file = args.templates.join(crate::certificate::model::SITE_FILE);
    let site = if site_file.is_file() {
        crate::certificate::model::Site::load(&site_file)?.name
    } else {
        String::new()
    };
    let input = crate::trend::report::ReportInput {
        product_code: &args.product,
        product_name: name,
        generated_on: crate::support::clock::now()?.date_naive(),
        site: &site,
        trends,
        viscosity: visc,
    };
    Ok(crate::trend::report::render_report(&input)?)
}

/// The JSON of one property's trend (the documented keys, and more).
pub fn trend_json(t: &PropertyTrend) -> Value {
    let cap = t.capability.as_ref();
    json!({
        "product": t.product,
        "property": t.property,
        "label": t.label,
        "unit": t.unit,
        "n": t.n,
        "date_from": t.date_from,
        "date_to": t.date_to,
        "baseline_n": t.baseline_n,
        "mean": t.limits.mean,
        "mr_bar": t.limits.mr_bar,
        "sigma_within": t.limits.sigma_within,
        "ucl": t.limits.ucl,
        "lcl": t.limits.lcl,
        "mr_ucl": t.limits.mr_ucl,
        "signals": t.signals,
        "spec_min": t.spec_min,
        "spec_max": t.spec_max,
        "spec_revision": t.spec_revision,
        "cp": cap.and_then(|c| c.cp),
        "cpk": cap.map(|c| c.cpk),
        "cpk_side": cap.and_then(|c| c.cpk_side),
        "cpk_ci95": cap.and_then(|c| c.cpk_ci95),
        "cp_ci95": cap.and_then(|c| c.cp_ci95),
        "pp": cap.and_then(|c| c.pp),
        "ppk": cap.map(|c| c.ppk),
        "sigma_overall": cap.map(|c| c.sigma_overall),
        "normality": t.normality,
        "warnings": t.warnings,
    })
}

fn visc_json(v: &ViscosityCheck) -> Value {
    json!({
        "n": v.fit.n,
        "exponent": v.fit.exponent,
        "exponent_se": v.fit.exponent_se,
        "intercept_log10": v.fit.intercept,
        "r_squared": v.fit.r_squared,
        "robust_sd": v.fit.robust_sd,
        "off_line": v.off_line,
    })
}

fn num(x: f64) -> String {
    let a = x.abs();
    if a >= 1000.0 {
        format!("{x:.0}")
    } else if a >= 100.0 {
        format!("{x:.1}")
    } else if a >= 1.0 {
        format!("{x:.3}")
    } else {
        format!("{x:.4}")
    }
}

fn cap_text(t: &PropertyTrend) -> String {
    match &t.capability {
        None => "no spec limit".into(),
        Some(c) => {
            let ci = c
                .cpk_ci95
                .map(|[a, b]| format!(" [{a:.2}, {b:.2}]"))
                .unwrap_or_default();
            let side = c
                .cpk_side
                .map(|s| {
                    format!(
                        " ({})",
                        serde_json::to_value(s)
                            .ok()
                            .and_then(|v| v.as_str().map(String::from))
                            .unwrap_or_default()
                    )
                })
                .unwrap_or_default();
            format!("Cpk {:.2}{ci}{side}", c.cpk)
        }
    }
}

fn visc_text(v: Option<&ViscosityCheck>) -> String {
    let Some(v) = v else { return String::new() };
    let mut s = format!(
        "\nViscosity against Mn ({} lots): viscosity ∝ Mn^{:.2} ± {:.2} (standard error), R² {:.3}.\n",
        v.fit.n, v.fit.exponent, v.fit.exponent_se, v.fit.r_squared
    );
    if v.off_line.is_empty() {
        s.push_str("  No lot is off the line by more than 3 robust standard deviations.\n");
    } else {
        for o in &v.off_line {
            s.push_str(&format!(
                "  OFF THE LINE: lot {} ({}) viscosity is {:+.1} robust standard deviations from the line for its Mn: check for branching, contamination or solids content.\n",
                o.lot, o.manufactured, o.robust_z
            ));
        }
    }
    s
}

fn summary(
    product: &str,
    trends: &[PropertyTrend],
    visc: Option<&ViscosityCheck>,
    args: &Args,
) -> String {
    let mut rows = vec![vec![
        "property".to_string(),
        "n".into(),
        "mean".into(),
        "σ_within".into(),
        "capability (95 % CI)".into(),
        "signals".into(),
        "first signal".into(),
    ]];
    for t in trends {
        let first = t.signals.first().map_or(String::new(), |s| {
            format!("rule {} at {} ({})", s.rule, s.lot, s.manufactured)
        });
        let lots_signalled = {
            let mut l: Vec<&str> = t.signals.iter().map(|s| s.lot.as_str()).collect();
            l.dedup();
            l.len()
        };
        rows.push(vec![
            t.property.clone(),
            t.n.to_string(),
            num(t.limits.mean),
            num(t.limits.sigma_within),
            cap_text(t),
            if t.signals.is_empty() {
                "0".into()
            } else {
                format!("{} on {} lots", t.signals.len(), lots_signalled)
            },
            first,
        ]);
    }
    let mut out = format!(
        "{product}: {} lots from {} to {}{}\n\n",
        trends.first().map_or(0, |t| t.n),
        trends.first().map_or("", |t| t.date_from.as_str()),
        trends.first().map_or("", |t| t.date_to.as_str()),
        if args.released_only {
            " (released lots only)"
        } else {
            ""
        }
    );
    out.push_str(&crate::support::table::render(&rows));
    out.push_str(&visc_text(visc));
    out
}

fn detail(t: &PropertyTrend, visc: Option<&ViscosityCheck>, args: &Args) -> String {
    let l = &t.limits;
    let mut out = format!(
        "{} {} ({}{}): {} lots from {} to {}\n",
        t.product,
        t.property,
        t.label,
        if t.unit.is_empty() {
            String::new()
        } else {
            format!(", {}", t.unit)
        },
        t.n,
        t.date_from,
        t.date_to
    );
    let base = if t.baseline_n < t.n {
        format!("the first {} lots (frozen)", t.baseline_n)
    } else {
        format!("all {} lots", t.n)
    };
    let mut pairs = vec![
        ("Control limits from".to_string(), base),
        ("Centre line x̄".to_string(), num(l.mean)),
        (
            "UCL / LCL".to_string(),
            format!("{} / {}", num(l.ucl), num(l.lcl)),
        ),
        (
            "MR̄ / MR UCL".to_string(),
            format!("{} / {}", num(l.mr_bar), num(l.mr_ucl)),
        ),
        ("σ_within = MR̄/1.128".to_string(), num(l.sigma_within)),
        (
            "Spec window".to_string(),
            match (t.spec_min, t.spec_max) {
                (None, None) => "none".into(),
                (a, b) => format!(
                    "{} to {}{}",
                    a.map_or("open".into(), num),
                    b.map_or("open".into(), num),
                    t.spec_revision
                        .as_ref()
                        .map(|r| format!(" (revision {r})"))
                        .unwrap_or_default()
                ),
            },
        ),
    ];
    if let Some(c) = &t.capability {
        let ci = |v: Option<[f64; 2]>| {
            v.map(|[a, b]| format!(" (95 % CI {a:.2} to {b:.2})"))
                .unwrap_or_default()
        };
        if let Some(cp) = c.cp {
            pairs.push(("Cp".into(), format!("{cp:.2}{}", ci(c.cp_ci95))));
        }
        pairs.push(("Cpk".into(), format!("{:.2}{}", c.cpk, ci(c.cpk_ci95))));
        if let Some(pp) = c.pp {
            pairs.push(("Pp".into(), format!("{pp:.2}")));
        }
        pairs.push((
            "Ppk".into(),
            format!("{:.2} (overall s = {})", c.ppk, num(c.sigma_overall)),
        ));
    }
    if let Some(n) = &t.normality {
        pairs.push((
            "Normality (Anderson-Darling)".into(),
            format!("A²* = {:.3}, p = {:.3}", n.a2_star, n.p_value),
        ));
    }
    out.push_str(&crate::support::table::pairs(&pairs));
    if t.signals.is_empty() {
        out.push_str(&format!("\nNo run-rule signals (rules: {}).\n", args.rules));
    } else {
        out.push_str(&format!("\nSignals ({}):\n", t.signals.len()));
        let mut rows = vec![vec![
            "rule".to_string(),
            "lot".into(),
            "manufactured".into(),
            "#".into(),
            "pattern".into(),
        ]];
        for s in &t.signals {
            rows.push(vec![
                s.rule.to_string(),
                s.lot.clone(),
                s.manufactured.clone(),
                s.index.to_string(),
                s.description.to_string(),
            ]);
        }
        out.push_str(&crate::support::table::render(&rows));
    }
    for w in &t.warnings {
        out.push_str(&format!("Warning: {w}\n"));
    }
    if matches!(t.property.as_str(), "viscosity" | "mn") {
        out.push_str(&visc_text(visc));
    }
    out
}
