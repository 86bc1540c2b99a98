//! The shipped demo plant behaves as designed (issues #3, #5, #6, #9): every history lot is
//! decided, the planted glycol-loss drift is caught by a run rule before any lot fails, and
//! the customer-service questions get the designed answers. Expected values come from the
//! demo scenario in demo-lots/README.md (invented data).

use crate::common;

use std::path::Path;

use common::Workspace;
use predicates::prelude::*;

fn demo() -> Workspace {
    let w = Workspace::new();
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    std::fs::remove_dir_all(w.path("specs")).unwrap();
    for (from, to) in [("specs", "specs"), ("demo-lots", "demo-lots")] {
        common::copy_dir(&root.join(from), &w.path(to));
    }
    for product in ["pd-2000", "pb-4800", "spc-35"] {
        w.release(&format!("demo-lots/history-{product}.csv"))
            .arg("--no-certificates")
            .assert()
            .code(1);
    }
    w.release("demo-lots/lims-export-2026-11.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    w
}

fn status_of(w: &Workspace, lot: &str) -> String {
    let out = w.cmd().args(["lookup", lot, "--json"]).output().unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    v["status"].as_str().unwrap().to_string()
}

#[test]
fn demo_lots_are_decided_as_designed() {
    let w = demo();
    for (lot, status) in [
        ("F2602-D01", "on_hold"),
        ("F2604-D02", "on_hold"),
        ("F2603-B02", "on_hold"),
        ("F2605-D02", "rejected"),
        ("F2608-B01", "rejected"),
        ("F2602-C05", "rejected"),
        ("F2607-C01", "rejected"),
        ("F2601-D03", "released"),
        ("F2611-D05", "released"),
    ] {
        assert_eq!(status_of(&w, lot), status, "{lot}");
    }
    w.cmd().args(["verify"]).assert().code(0);
}

#[test]
fn planted_drift_is_caught_by_rule_2_before_any_lot_fails() {
    let w = demo();
    let out = w
        .cmd()
        .args(["trend", "PD-2000", "--property", "hydroxyl_value", "--json"])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(1),
        "signals make the check fall short"
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let first_rule2 = v["signals"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["rule"] == 2)
        .unwrap();
    assert_eq!(first_rule2["lot"], "F2610-D04");
    // No lot of the drift (from F2608-D04 on) was rejected: the rule fired while lots passed.
    for lot in ["F2610-D04", "F2610-D05", "F2611-D01", "F2611-D02"] {
        assert_eq!(status_of(&w, lot), "released", "{lot}");
    }
}

#[test]
fn off_line_viscosity_lot_is_flagged() {
    let w = demo();
    w.cmd()
        .args(["trend", "PD-2000"])
        .assert()
        .code(1)
        .stdout(predicate::str::contains("OFF THE LINE: lot F2606-D03"));
}

#[test]
fn customer_service_questions() {
    let w = demo();
    let out = w
        .cmd()
        .args(["lookup", "F2611-D05", "--json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!((v["values"]["mn"].as_f64().unwrap() - 1993.60).abs() < 0.01);
    let out = w
        .cmd()
        .args([
            "find",
            "--product",
            "PD-2000",
            "--where",
            "mn=1950..2050",
            "--where",
            "acid_value=..0.49",
            "--json",
            // Lots of December 2025 are past their retest date on the demo's clock (issue
            // #14); the scenario's count is of every lot made.
            "--include-expired",
        ])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(
        v["lots"].as_array().unwrap().len(),
        31,
        "the scenario's 31 lots with AV under 0.5"
    );
    let out = w
        .cmd()
        .args([
            "find",
            "--product",
            "PD-2000",
            "--customer",
            "brantwick",
            "--json",
        ])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let lots: Vec<&str> = v["lots"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l["lot"].as_str().unwrap())
        .collect();
    assert!(lots.contains(&"F2611-D05"));
    assert!(
        !lots.contains(&"F2611-D03") && !lots.contains(&"F2611-D02"),
        "outside Brantwick's guard-banded window"
    );
}
