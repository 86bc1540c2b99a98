//! Integration tests of `resinlot lookup` and `resinlot find` (issue #6).

use crate::common;

use common::{Workspace, GOOD};
use predicates::prelude::*;

fn recorded() -> Workspace {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    w.release("good.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    w.release("results-wide.csv")
        .arg("--no-certificates")
        .assert()
        .code(1);
    w
}

#[test]
fn lookup_answers_in_plain_words() {
    let w = recorded();
    w.cmd()
        .args(["lookup", "T26-101"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("Lot T26-101: TP-2000"))
        .stdout(predicate::str::contains("released (spec revision C)"))
        // Mn = 56100·2/(0.52 + 55.4 + 0.52) = 1988 g/mol (end-group definition, ISO 4629-2 correction).
        .stdout(predicate::str::contains("Mn is 1988 ± 28 g/mol"))
        .stdout(predicate::str::contains(
            "assuming two end groups per chain",
        ))
        .stdout(predicate::str::contains("Retest date   2027-05-02"));
}

#[test]
fn lookup_json_has_full_precision_values() {
    let w = recorded();
    let out = w
        .cmd()
        .args(["lookup", "T26-101", "--json"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["lot"], "T26-101");
    assert_eq!(v["product"], "TP-2000");
    assert_eq!(v["status"], "released");
    assert_eq!(v["manufactured"], "2026-05-02");
    let mn = v["values"]["mn"].as_f64().unwrap();
    assert!((mn - 112200.0 / 56.44).abs() < 1e-9, "{mn}");
    assert!(v["mn_uncertainty"].as_f64().unwrap() > 0.0);
    assert!(v["certificates"].as_array().unwrap().is_empty());
    assert!(v["history"].as_array().unwrap().is_empty());
}

#[test]
fn lookup_shows_retest_history_current_first() {
    let w = recorded();
    w.write("again.csv", &GOOD.replace("0.52,55.4", "0.50,55.6"));
    w.release("again.csv")
        .args(["--retest", "--reason", "burette recalibrated"])
        .assert()
        .code(0);
    let out = w
        .cmd()
        .args(["lookup", "T26-101", "--json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["values"]["acid_value"], 0.5);
    assert_eq!(v["supersedes"], 1);
    assert_eq!(v["history"][0]["values"]["acid_value"], 0.52);
    w.cmd()
        .args(["lookup", "T26-101"])
        .assert()
        .stdout(predicate::str::contains(
            "History (superseded results, newest first)",
        ))
        .stdout(predicate::str::contains(
            "Retest reason: burette recalibrated",
        ));
}

#[test]
fn unknown_lot_suggests_close_ids_and_exits_1() {
    let w = recorded();
    w.cmd()
        .args(["lookup", "T26-11"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("not in the record"))
        .stderr(predicate::str::contains("Did you mean T26-101"));
}

#[test]
fn find_windows_open_on_either_end() {
    let w = recorded();
    // Released acid values: 0.52, 0.48, 0.55 (GOOD) and 0.52 (T26-001): only 0.48 is ≤ 0.5.
    w.cmd()
        .args([
            "find",
            "--product",
            "TP-2000",
            "--where",
            "acid_value=..0.5",
            "--status",
            "released",
        ])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("T26-102"))
        .stdout(predicate::str::contains("T26-101").not())
        .stdout(predicate::str::contains("1 lot of TP-2000 match."));
    w.cmd()
        .args([
            "find",
            "--product",
            "TP-2000",
            "--where",
            "acid_value=1.0..",
        ])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("T26-003"))
        .stdout(predicate::str::contains("T26-102").not());
}

#[test]
fn find_newest_first_and_json_csv() {
    let w = recorded();
    let out = w
        .cmd()
        .args([
            "find",
            "--product",
            "TP-2000",
            "--status",
            "released",
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
    assert_eq!(lots, ["T26-103", "T26-102", "T26-101", "T26-001"]);
    assert!(v["lots"][0]["mn"].as_f64().is_some());
    let out = w
        .cmd()
        .args([
            "find",
            "--product",
            "TP-2000",
            "--status",
            "released",
            "--csv",
        ])
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.starts_with("lot,product,manufactured,status,acid_value"));
    assert_eq!(text.lines().count(), 5);
}

#[test]
fn find_customer_applies_their_windows() {
    let w = recorded();
    // Northwind (fixture) wants Mn 1950..2050 under the guarded rule: Mn 1988 ± 28 passes,
    // T26-001 (Mn 1988) too; released only.
    let out = w
        .cmd()
        .args([
            "find",
            "--product",
            "TP-2000",
            "--customer",
            "northwind",
            "--json",
        ])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let ids: Vec<&str> = v["lots"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l["lot"].as_str().unwrap())
        .collect();
    assert!(ids.contains(&"T26-101"), "{ids:?}");
    assert!(
        !ids.contains(&"T26-002"),
        "on hold lots cannot ship: {ids:?}"
    );
    for lot in v["lots"].as_array().unwrap() {
        let mn = lot["mn"].as_f64().unwrap();
        assert!((1970.0..=2030.0).contains(&mn), "guard band applied: {mn}");
        assert_eq!(lot["status"], "released");
    }
}

#[test]
fn find_with_no_match_says_so() {
    let w = recorded();
    w.cmd()
        .args(["find", "--product", "TP-2000", "--where", "mn=5000..6000"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("No lots match."));
}

#[test]
fn find_unknown_key_is_refused() {
    let w = recorded();
    w.cmd()
        .args(["find", "--product", "TP-2000", "--where", "colour=..2"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("TP-2000 has no property 'colour'"));
}

#[test]
fn find_reversed_window_is_refused() {
    let w = recorded();
    w.cmd()
        .args(["find", "--product", "TP-2000", "--where", "mn=2100..1900"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "lower end 2100 is above the upper end 1900",
        ));
}
