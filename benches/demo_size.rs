//! Benchmark (not a test): issue #20's "nothing gets slower at demo size": every command on the
//! demo workspace (`resinlot demo`, invented data, about 60 lots per product), whole process
//! of the release build, against the 50 ms target (the PDF trend report is exempt). Run with
//! `cargo bench --bench demo_size`.
//!
//! Each command runs RUNS times; commands that write (a customer certificate) run each time
//! on a fresh copy of the workspace, made outside the timed span. Prints the median and the
//! fastest wall time; on a machine shared with other work the fastest run is the better
//! reading of what the command itself costs.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

const RUNS: usize = 9;
const TARGET_MS: f64 = 50.0;

/// Copies folder `from` into `to` (created), files and folders only.
fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let target = to.join(e.file_name());
        if e.file_type().unwrap().is_dir() {
            copy_dir(&e.path(), &target);
        } else {
            std::fs::copy(e.path(), &target).unwrap();
        }
    }
}

/// Runs `args` in `dir`; returns the wall time, refusing an exit status above 1 (1 is an
/// answer: a signal, a lot that fell short).
fn run(bin: &Path, dir: &Path, args: &[&str]) -> Duration {
    let t = Instant::now();
    let out = Command::new(bin)
        .current_dir(dir)
        .args(args)
        .output()
        .unwrap();
    let took = t.elapsed();
    assert!(
        matches!(out.status.code(), Some(0 | 1)),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    took
}

fn main() {
    let bin = PathBuf::from(env!("CARGO_BIN_EXE_resinlot"));
    let dir = tempfile::tempdir().unwrap();
    let out = Command::new(&bin)
        .current_dir(dir.path())
        .args(["demo", "ws"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "demo: {out:?}");
    let ws = dir.path().join("ws");
    let out_dir = dir.path().join("out");
    std::fs::create_dir_all(&out_dir).unwrap();
    let chart = out_dir.join("chart.svg");
    let report = out_dir.join("report.pdf");
    let (chart, report) = (chart.to_str().unwrap(), report.to_str().unwrap());
    let reads: Vec<(&str, Vec<&str>)> = vec![
        (
            "release --dry-run (lab-system export, 3 products)",
            vec![
                "release",
                "demo-lots/lims-export-2026-11.csv",
                "--dry-run",
                "--approver",
                "QC Laboratory Supervisor",
            ],
        ),
        ("lookup F2611-D05", vec!["lookup", "F2611-D05"]),
        (
            "lookup FW-000006 (a certificate)",
            vec!["lookup", "FW-000006"],
        ),
        (
            "find, two windows",
            vec![
                "find",
                "--product",
                "PD-2000",
                "--where",
                "mn=1950..2050",
                "--where",
                "acid_value=..0.5",
            ],
        ),
        (
            "find --customer",
            vec!["find", "--product", "SPC-35", "--customer", "marlpit"],
        ),
        ("find --csv, every lot", vec!["find", "PD-2000", "--csv"]),
        (
            "shipments --customer",
            vec!["shipments", "--customer", "brantwick"],
        ),
        ("trend, text", vec!["trend", "PD-2000"]),
        (
            "trend --json, every property",
            vec!["trend", "PD-2000", "--json"],
        ),
        (
            "trend --property --chart (SVG)",
            vec![
                "trend",
                "PD-2000",
                "--property",
                "hydroxyl_value",
                "--chart",
                chart,
            ],
        ),
        (
            "cook fit and end point",
            vec![
                "cook",
                "demo-lots/cooks/pd2000-200-a.csv",
                "--recipe",
                "specs/recipes/pd-2000.toml",
                "--target-av",
                "1.0",
            ],
        ),
        (
            "adjust",
            vec![
                "adjust",
                "--recipe",
                "specs/recipes/pd-2000.toml",
                "--batch-kg",
                "9740",
                "--av",
                "1.1",
                "--ohv",
                "50.4",
                "--target-ohv",
                "56",
            ],
        ),
        (
            "endgroup with recipe",
            vec![
                "endgroup",
                "--av",
                "0.6",
                "--ohv",
                "56",
                "--recipe",
                "specs/recipes/pd-2000.toml",
            ],
        ),
        ("specs check", vec!["specs", "check"]),
        ("verify (whole record)", vec!["verify"]),
    ];
    println!(
        "demo workspace, {} build, {RUNS} runs each; load average before: {}",
        if cfg!(debug_assertions) {
            "debug (not a reading)"
        } else {
            "release"
        },
        std::fs::read_to_string("/proc/loadavg")
            .unwrap_or_default()
            .split_whitespace()
            .take(3)
            .collect::<Vec<_>>()
            .join(" ")
    );
    println!(
        "{:<52} {:>10} {:>10}  target {TARGET_MS} ms",
        "command", "median ms", "min ms"
    );
    let show = |what: &str, mut times: Vec<Duration>, exempt: bool| {
        times.sort();
        let ms = |d: Duration| d.as_secs_f64() * 1000.0;
        let (median, min) = (ms(times[times.len() / 2]), ms(times[0]));
        let verdict = if exempt {
            "exempt"
        } else if min <= TARGET_MS {
            "met"
        } else {
            "MISSED"
        };
        println!("{what:<52} {median:>10.1} {min:>10.1}  {verdict}");
    };
    for (what, args) in &reads {
        let times = (0..RUNS).map(|_| run(&bin, &ws, args)).collect();
        show(what, times, false);
    }
    // A customer certificate: writes the PDF, its JSON companion and the log row.
    let times = (0..RUNS)
        .map(|i| {
            let copy = tempfile::tempdir().unwrap();
            copy_dir(&ws, copy.path());
            let po = format!("BENCH-{i}");
            run(
                &bin,
                copy.path(),
                &[
                    "certify",
                    "F2611-D05",
                    "--customer",
                    "brantwick",
                    "--po",
                    &po,
                    "--quantity",
                    "1 t",
                ],
            )
        })
        .collect();
    show(
        "certify (one customer certificate, PDF + log)",
        times,
        false,
    );
    let times = (0..3)
        .map(|_| run(&bin, &ws, &["trend", "PD-2000", "--report", report]))
        .collect();
    show("trend --report (PDF, 8 properties)", times, true);
}
