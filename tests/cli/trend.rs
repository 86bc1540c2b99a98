//! Integration tests of `resinlot trend` (issue #5): JSON shape, one-sided windows, baseline,
//! rule subsets, charts, bad input.

use crate::common;

use common::Workspace;
use predicates::prelude::*;

/// Twelve released lots; the acid value steps up for the last seven (fixture values).
fn trended() -> Workspace {
    let w = Workspace::new();
    let mut csv = String::from("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n");
    let av = [
        0.40, 0.42, 0.41, 0.43, 0.40, 0.55, 0.56, 0.57, 0.55, 0.58, 0.56, 0.57,
    ];
    let ohv = [
        55.1, 55.6, 55.3, 55.9, 55.4, 55.2, 55.8, 55.5, 55.0, 55.7, 55.3, 55.6,
    ];
    for i in 0..12 {
        csv.push_str(&format!(
            "T27-{i:03},TP-2000,2026-06-{:02},{},{},{}\n",
            i + 1,
            av[i],
            ohv[i],
            520 + 3 * i
        ));
    }
    w.write("lots.csv", &csv);
    w.release("lots.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    w
}

#[test]
fn json_has_the_documented_keys() {
    let w = trended();
    let out = w
        .cmd()
        .args(["trend", "TP-2000", "--property", "hydroxyl_value", "--json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for k in [
        "product",
        "property",
        "n",
        "mean",
        "mr_bar",
        "sigma_within",
        "ucl",
        "lcl",
        "mr_ucl",
        "signals",
        "cp",
        "cpk",
        "cpk_ci95",
        "pp",
        "ppk",
    ] {
        assert!(v.get(k).is_some(), "missing {k}");
    }
    assert_eq!(v["n"], 12);
    // x̄ and σ_within = MR̄/1.128 checked against a hand computation of the same 12 values
    // (ASTM E2587 formulas).
    let ohv = [
        55.1, 55.6, 55.3, 55.9, 55.4, 55.2, 55.8, 55.5, 55.0, 55.7, 55.3, 55.6,
    ];
    let corrected: Vec<f64> = ohv
        .iter()
        .zip([
            0.40, 0.42, 0.41, 0.43, 0.40, 0.55, 0.56, 0.57, 0.55, 0.58, 0.56, 0.57,
        ])
        .map(|(o, a)| o + a)
        .collect();
    let mean = corrected.iter().sum::<f64>() / 12.0;
    let mr: f64 = corrected
        .windows(2)
        .map(|p| (p[1] - p[0]).abs())
        .sum::<f64>()
        / 11.0;
    assert!((v["mean"].as_f64().unwrap() - mean).abs() < 1e-9);
    assert!((v["sigma_within"].as_f64().unwrap() - mr / 1.128).abs() < 1e-9);
    assert!(v["cp"].as_f64().is_some(), "two-sided window gives Cp");
}

#[test]
fn one_sided_window_gives_cpk_side() {
    let w = trended();
    let out = w
        .cmd()
        .args(["trend", "TP-2000", "--property", "acid_value", "--json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(v["cp"].is_null() && v["pp"].is_null());
    assert_eq!(v["cpk_side"], "upper");
    assert!(v["cpk"].as_f64().is_some());
}

#[test]
fn property_without_limits_has_null_capability() {
    let w = trended();
    let out = w
        .cmd()
        .args(["trend", "TP-2000", "--property", "xn", "--json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(v["cp"].is_null() && v["cpk"].is_null() && v["ppk"].is_null());
}

#[test]
fn frozen_baseline_flags_the_step() {
    let w = trended();
    let out = w
        .cmd()
        .args([
            "trend",
            "TP-2000",
            "--property",
            "acid_value",
            "--baseline",
            "5",
            "--json",
        ])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["baseline_n"], 5);
    let s = &v["signals"][0];
    assert_eq!(s["rule"], 1, "the step is beyond the frozen 3σ limit");
    assert_eq!(s["lot"], "T27-005");
    assert_eq!(s["index"], 5);
    // With only rule 2 (nine in a row on one side), the seven stepped lots are too few.
    let out = w
        .cmd()
        .args([
            "trend",
            "TP-2000",
            "--property",
            "acid_value",
            "--baseline",
            "5",
            "--rules",
            "2",
            "--json",
        ])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(v["signals"].as_array().unwrap().is_empty());
    assert_eq!(out.status.code(), Some(0));
}

#[test]
fn chart_svg_parses_and_carries_limits_and_signals() {
    let w = trended();
    w.cmd()
        .args([
            "trend",
            "TP-2000",
            "--property",
            "acid_value",
            "--baseline",
            "5",
            "--chart",
            "av.svg",
            "--png",
        ])
        .assert()
        .code(1);
    let svg = std::fs::read_to_string(w.path("av.svg")).unwrap();
    roxmltree::Document::parse(&svg).expect("well-formed SVG");
    assert!(svg.contains("UCL") && svg.contains("T27-005"));
    let png = std::fs::read(w.path("av.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
}

#[test]
fn summary_lists_every_property() {
    let w = trended();
    w.cmd()
        .args(["trend", "TP-2000"])
        .assert()
        .stdout(predicate::str::contains("acid_value"))
        .stdout(predicate::str::contains("hydroxyl_value"))
        .stdout(predicate::str::contains("mn"));
}

#[test]
fn unknown_property_is_refused() {
    let w = trended();
    w.cmd()
        .args(["trend", "TP-2000", "--property", "colour"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("TP-2000 has no property 'colour'"));
}

#[test]
fn bad_rule_list_is_refused() {
    let w = trended();
    w.cmd()
        .args(["trend", "TP-2000", "--rules", "1,9"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--rules"));
}

#[test]
fn unknown_product_is_refused() {
    let w = trended();
    w.cmd()
        .args(["trend", "XX-1"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("no trend file"));
}

#[test]
fn baseline_of_fewer_than_two_lots_is_refused() {
    let w = trended();
    w.cmd()
        .args(["trend", "TP-2000", "--baseline", "1"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--baseline"));
    w.cmd()
        .args(["trend", "TP-2000", "--baseline-until", "2020-01-01"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("at least 2 lots"));
}

/// Issue #20: a property every lot records with the same value has no spread (MR̄ = 0). Its
/// limits would collapse onto the centre line and every lot signalled; now there are no
/// limits, no signals and one warning, and the exit code says nothing fell short.
#[test]
fn a_property_without_spread_has_no_limits_and_no_signals_issue_20() {
    let w = Workspace::new();
    let mut csv = String::from("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n");
    let ohv = [
        55.1, 55.6, 55.3, 55.9, 55.4, 55.2, 55.8, 55.5, 55.0, 55.7, 55.3, 55.6,
    ];
    for (i, o) in ohv.iter().enumerate() {
        csv.push_str(&format!(
            "T28-{i:03},TP-2000,2026-07-{:02},0.45,{o},{}\n",
            i + 1,
            520 + 3 * i
        ));
    }
    w.write("lots.csv", &csv);
    w.release("lots.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    let out = w
        .cmd()
        .args(["trend", "TP-2000", "--property", "acid_value", "--json"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{out:?}");
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["mr_bar"], 0.0);
    assert!(
        v["ucl"].is_null() && v["lcl"].is_null() && v["mr_ucl"].is_null(),
        "{v}"
    );
    assert_eq!(v["signals"].as_array().unwrap().len(), 0);
    let warnings = v["warnings"].to_string();
    assert!(
        warnings.contains("no spread: all 12 baseline lots have the value 0.45"),
        "{warnings}"
    );
    // The text detail says the same, and the chart draws no control limit.
    w.cmd()
        .args(["trend", "TP-2000", "--property", "acid_value"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("UCL / LCL"))
        .stdout(predicate::str::contains("none (no spread)"))
        .stdout(predicate::str::contains("No run-rule signals"));
    w.cmd()
        .args(["trend", "TP-2000", "--property", "acid_value", "--chart"])
        .arg(w.path("av.svg"))
        .assert()
        .code(0);
    let svg = std::fs::read_to_string(w.path("av.svg")).unwrap();
    assert!(!svg.contains("control-limit"), "no limit line expected");
    assert!(svg.contains("No spread"), "the chart says why");
    // A property with spread beside it still gets its limits.
    let out = w
        .cmd()
        .args(["trend", "TP-2000", "--property", "hydroxyl_value", "--json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(v["ucl"].as_f64().is_some(), "{v}");
}
