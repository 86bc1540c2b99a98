//! Trend report benchmark (plain binary, `harness = false`): time to render the PDF report of
//! one product with 8 properties over INVENTED lots (200 per property by default).
//!
//! Run: `cargo bench --bench trend_report` (release profile); `-- --lots N` changes the number
//! of lots per property.

use std::time::Instant;

use chrono::NaiveDate;
use resinlot::record::query::LotRow;
use resinlot::stats::{RuleSet, SpecWindow};
use resinlot::trend::product::{property_trend, viscosity_check, Baseline, PropertyTrend};
use resinlot::trend::report::{render_report, ReportInput};

const PROPERTIES: usize = 8;
const RUNS: usize = 5;

/// INVENTED lots: property k drifts slowly around 100·(k+1) with a deterministic wiggle.
fn lots(n: usize) -> Vec<LotRow> {
    (0..n)
        .map(|i| LotRow {
            line: i + 2,
            lot: format!("BENCH-{:05}", i + 1).into(),
            manufactured: (NaiveDate::from_ymd_opt(2025, 1, 1).unwrap()
                + chrono::Days::new(i as u64 / 3))
            .to_string()
            .as_str()
            .into(),
            status: "released",
            revision: "A",
            mn_uncertainty: None,
            values: (0..PROPERTIES)
                .map(|k| {
                    let base = 100.0 * (k + 1) as f64;
                    let wiggle = (((i * 37 + k * 11) % 17) as f64 - 8.0) * 0.01 * base / 10.0;
                    Some(base + wiggle + 0.002 * base * (i as f64 / n as f64))
                })
                .collect(),
        })
        .collect()
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let n = args
        .iter()
        .position(|a| a == "--lots")
        .and_then(|i| args.get(i + 1))
        .and_then(|s| s.parse().ok())
        .unwrap_or(200);
    let lots = std::sync::Arc::new(resinlot::record::query::LotTable::from_rows(&lots(n)));
    let trends: Vec<PropertyTrend> = (0..PROPERTIES)
        .map(|k| {
            let base = 100.0 * (k + 1) as f64;
            property_trend(
                "BX-1",
                &format!("p{k}"),
                k,
                &format!("Property {}", k + 1),
                "unit",
                &lots,
                SpecWindow {
                    min: Some(0.95 * base),
                    max: Some(1.05 * base),
                },
                Some("A".into()),
                &Baseline::All,
                RuleSet::ALL,
            )
            .expect("trend")
        })
        .collect();
    let visc = viscosity_check(&lots, 0, 1);
    let input = ReportInput {
        product_code: "BX-1",
        product_name: "Benchmark resin (invented)",
        generated_on: NaiveDate::from_ymd_opt(2026, 1, 1).unwrap(),
        site: "Benchmark site (invented)",
        trends: &trends,
        viscosity: visc.as_ref(),
    };
    let mut times = Vec::new();
    let mut size = 0;
    for _ in 0..RUNS {
        let start = Instant::now();
        let pdf = render_report(&input).expect("report");
        times.push(start.elapsed().as_secs_f64());
        size = pdf.len();
    }
    times.sort_by(f64::total_cmp);
    // The chart step alone (SVG, then PNG at the report's scale), one thread, for comparison.
    let start = Instant::now();
    for t in &trends {
        let chart = resinlot::trend::chart::ChartInput {
            baseline_len: None,
            ..resinlot::trend::chart::ChartInput::of_trend(t)
        };
        resinlot::trend::chart::imr_png(&chart).expect("chart");
    }
    let charts = start.elapsed().as_secs_f64();
    println!(
        "trend report, {PROPERTIES} properties x {n} lots (+ viscosity page): median {:.0} ms, best {:.0} ms over {RUNS} runs, {} kB, {} threads",
        times[RUNS / 2] * 1e3,
        times[0] * 1e3,
        size / 1024,
        rayon::current_num_threads()
    );
    println!(
        "of which: {PROPERTIES} charts as 2x PNG (imr_png, the --png scale), one thread: {:.0} ms",
        charts * 1e3
    );
}
