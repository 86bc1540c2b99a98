//! `resinlot trend`: I-MR charts, Nelson run rules, capability and the viscosity–Mn check
//! over a product's lots.

use std::path::{Path, PathBuf};

use chrono::NaiveDate;

use crate::cmd::args::{
    self, CertificatesFolder, ProductArg, RegisterFolder, SpecsFolder, TemplatesFolder,
};
use crate::cmd::Outcome;
use crate::error::Error;
use crate::spec::SpecSet;
use crate::stats::RuleSet;
use crate::support::output::{self, OutputKind};
use crate::trend::product::{
    self, Baseline, PropertyTrend, Selection, TrendRequest, ViscosityCheck,
};
use crate::trend::text;

/// Arguments of `resinlot trend`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The product, as the first argument or `--product`.
    #[command(flatten)]
    pub product: ProductArg,
    /// One property key (e.g. hydroxyl_value) for the full detail; without it, one summary
    /// line per numeric property.
    #[arg(long, value_name = "KEY")]
    pub property: Option<String>,
    /// Only lots manufactured on or after this date (YYYY-MM-DD).
    #[arg(long, value_name = "DATE", value_parser = args::date)]
    pub from: Option<NaiveDate>,
    /// Only lots manufactured on or before this date (YYYY-MM-DD).
    #[arg(long, value_name = "DATE", value_parser = args::date)]
    pub to: Option<NaiveDate>,
    /// Freeze the control limits from the first N selected lots and apply them to the later
    /// ones (phase I / phase II). Default: limits from all selected lots.
    #[arg(long, value_name = "N", conflicts_with = "baseline_until")]
    pub baseline: Option<usize>,
    /// Freeze the control limits from the lots manufactured up to this date (YYYY-MM-DD).
    #[arg(long, value_name = "DATE", value_parser = args::date)]
    pub baseline_until: Option<NaiveDate>,
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
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// The specs folder (`--specs`).
    #[command(flatten)]
    pub specs: SpecsFolder,
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
    /// The templates folder (`--templates`).
    #[command(flatten)]
    pub templates: TemplatesFolder,
    /// The certificates folder (`--certificates`), which charts and reports never enter.
    #[command(flatten)]
    pub certificates: CertificatesFolder,
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let rules = RuleSet::parse(&args.rules, "--rules")?;
    let sel = Selection {
        from: args.from,
        to: args.to,
        released_only: args.released_only,
    };
    let baseline = match (args.baseline, &args.baseline_until) {
        (Some(n), _) => product::baseline_first(n)?,
        (None, Some(d)) => Baseline::Until(*d),
        _ => Baseline::All,
    };
    let specs = SpecSet::load(&args.specs)?;
    let path = args.product.trend_file(&args.register, "product")?;
    let record = args::record_folders(&args.specs, &args.register, &args.certificates);
    for (file, kind) in outputs(args) {
        output::check_destination(&file, kind, &record)?;
    }
    let all_keys = crate::record::query::trend_keys(&path)?;
    // Text properties are not trended (issue #15); they are named once below.
    let text_keys = product::text_columns(&specs, args.product.code(), &all_keys);
    if let Some(p) = args.property.as_ref().filter(|p| text_keys.contains(p)) {
        return Err(Error::invalid(
            format!("--property '{p}'"),
            format!("{p} is a text property: its results are words, which have no trend"),
            "Choose a numeric property; `resinlot find` and `lookup` show the words.",
        )
        .into());
    }
    let keys: Vec<String> = all_keys
        .into_iter()
        .filter(|k| !text_keys.contains(k))
        .collect();
    if let Some(p) = &args.property {
        if !keys.contains(p) {
            return Err(Error::invalid(
                format!("--property '{p}'"),
                format!("{} has no property '{p}'", args.product.code()),
                format!("Use one of: {}.", keys.join(", ")),
            )
            .into());
        }
    }
    let columns = product::columns_for(&keys, args.property.as_deref());
    let (_, lots) = crate::record::query::current_table(&path, &columns, false)?;
    let lots = std::sync::Arc::new(product::select(lots, &sel));
    if lots.is_empty() {
        return Err(Error::invalid(
            format!("product '{}'", args.product.code()),
            "no lots in the selection",
            "Widen --from/--to, or drop --released-only.",
        )
        .into());
    }
    let spec = product::spec_for(&specs, args.product.code(), &lots);
    let censorable = product::censorable_columns(&specs, args.product.code(), &columns);
    let censored: Vec<(String, usize)> = if censorable.is_empty() {
        Vec::new()
    } else {
        let lines: Vec<usize> = (0..lots.len()).map(|i| lots.line(i)).collect();
        let counts = crate::record::query::censored_counts(&path, &censorable, &lines)?;
        censorable.into_iter().zip(counts).collect()
    };
    let text_keys: Vec<String> = if args.property.is_some() {
        Vec::new()
    } else {
        text_keys
    };
    let mut trends = product::property_trends(&TrendRequest {
        product: args.product.code(),
        columns: &columns,
        lots: &lots,
        spec,
        property: args.property.as_deref(),
        baseline: &baseline,
        rules,
    })?;
    product::note_censored(&mut trends, &censored);
    let visc = product::viscosity_check_of(&lots, &columns);
    if let (Some(path), Some(t)) = (&args.chart, trends.first()) {
        write_chart(path, t, args.png, &record)?;
    }
    if let Some(path) = &args.report {
        let bytes = render_report(
            args,
            spec.map(|s| s.name.as_str()).unwrap_or(""),
            &trends,
            visc.as_ref(),
        )?;
        output::write_output(path, bytes, OutputKind::Pdf, &record)?;
    }
    let text = if args.json && args.property.is_none() {
        // Every property: written one at a time (issue #20), the document never held whole.
        let mut out = std::io::BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
        text::write_overview_json(
            &mut out,
            args.product.code(),
            &trends,
            visc.as_ref(),
            &text_keys,
        )?;
        std::io::Write::flush(&mut out)?;
        None
    } else if args.json {
        let mut out = std::io::BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
        text::write_trend_json(&mut out, &trends[0])?;
        std::io::Write::write_all(&mut out, b"\n")?;
        std::io::Write::flush(&mut out)?;
        None
    } else if args.property.is_some() {
        Some(text::detail(&trends[0], visc.as_ref(), &args.rules))
    } else {
        Some(
            text::summary(
                args.product.code(),
                &trends,
                visc.as_ref(),
                args.released_only,
            ) + &product::exclusions_text(&text_keys, &censored),
        )
    };
    if let Some(text) = text {
        crate::support::output::print(&text)?;
    }
    Ok(if product::any_signal(&trends, visc.as_ref()) {
        Outcome::FellShort
    } else {
        Outcome::AllGood
    })
}

/// The files this run will write, each with its kind, so that every destination is checked
/// before anything is written (issue #13 item 1).
fn outputs(args: &Args) -> Vec<(PathBuf, OutputKind)> {
    let mut files = Vec::new();
    if let Some(chart) = &args.chart {
        files.push((chart.clone(), chart_kind(chart)));
        if args.png {
            files.push((chart.with_extension("png"), OutputKind::Png));
        }
    }
    if let Some(report) = &args.report {
        files.push((report.clone(), OutputKind::Pdf));
    }
    files
}

/// A chart named .png is written as PNG, any other name as SVG.
fn chart_kind(path: &Path) -> OutputKind {
    if path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("png"))
    {
        OutputKind::Png
    } else {
        OutputKind::Svg
    }
}

/// Writes the I-MR chart: SVG, or PNG for a .png name; with `png`, a PNG beside the SVG too.
fn write_chart(path: &Path, t: &PropertyTrend, png: bool, record: &[&Path]) -> anyhow::Result<()> {
    let input = crate::trend::chart::ChartInput::of_trend(t);
    let svg = crate::trend::chart::imr_svg(&input)?;
    if chart_kind(path) == OutputKind::Png {
        // A .png name gets a PNG, not SVG text under the wrong name.
        let png = crate::trend::chart::svg_to_png(&svg, crate::trend::chart::PNG_SCALE)?;
        output::write_output(path, png, OutputKind::Png, record)?;
    } else {
        output::write_output(path, svg.clone(), OutputKind::Svg, record)?;
    }
    if png {
        let png = crate::trend::chart::svg_to_png(&svg, crate::trend::chart::PNG_SCALE)?;
        output::write_output(&path.with_extension("png"), png, OutputKind::Png, record)?;
    }
    Ok(())
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
        product_code: args.product.code(),
        product_name: name,
        generated_on: crate::support::clock::now()?.date_naive(),
        site: &site,
        trends,
        viscosity: visc,
    };
    Ok(crate::trend::report::render_report(&input)?)
}
