//! Integration tests of `resinlot release` (issue #3): decisions, trend file, bad input.

use crate::common;

use common::{Workspace, GOOD};
use predicates::prelude::*;

#[test]
fn mixed_file_decides_every_lot_and_exits_1() {
    let w = Workspace::new();
    w.release("results-wide.csv")
        .assert()
        .code(1)
        .stdout(predicate::str::contains("T26-001  C    released"))
        .stdout(predicate::str::contains("T26-003  C    rejected"))
        .stdout(predicate::str::contains("T25-090  B    on_hold"))
        .stdout(predicate::str::contains(
            "5 lots: 1 released, 2 on hold, 1 rejected, 1 incomplete",
        ));
    let text = std::fs::read_to_string(w.path("register/TP-2000.csv")).unwrap();
    assert_eq!(text.lines().count(), 6);
    assert!(
        text.contains("2026-12-10T00:00:00Z"),
        "SOURCE_DATE_EPOCH is the recorded-at time"
    );
}

#[test]
fn all_released_exits_0_and_rerun_is_a_no_op() {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    w.release("good.csv").assert().code(0);
    let before = w.snapshot();
    w.release("good.csv")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("unchanged (row 1)"))
        .stdout(predicate::str::contains("3 already recorded, unchanged"));
    assert_eq!(before, w.snapshot());
}

#[test]
fn changed_results_need_retest_and_keep_history() {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    w.release("good.csv").assert().code(0);
    w.write("again.csv", &GOOD.replace("0.52,55.4", "0.50,55.6"));
    let before = w.snapshot();
    w.release("again.csv")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("already recorded"))
        .stderr(predicate::str::contains("--retest"));
    assert_eq!(before, w.snapshot(), "nothing written for any lot");
    w.release("again.csv")
        .args(["--retest", "--reason", "re-titrated after burette check"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("row 4 (retest of 1)"));
    let text = std::fs::read_to_string(w.path("register/TP-2000.csv")).unwrap();
    assert_eq!(text.lines().count(), 5, "old row stays");
    assert!(text.contains("re-titrated after burette check"));
}

#[test]
fn json_has_the_documented_shape() {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    let out = w
        .release("good.csv")
        .arg("--json")
        .arg("--dry-run")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let lot = &v["lots"][0];
    assert_eq!(lot["lot"], "T26-101");
    assert_eq!(lot["spec_revision"], "C");
    assert_eq!(lot["status"], "released");
    let mn = lot["properties"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["property"] == "mn")
        .unwrap();
    // Mn = 56100·2/(0.52 + 55.4 + 0.52) (ISO 4629-2 acidity correction, end-group definition).
    let expected = 112200.0 / (0.52 + 55.4 + 0.52);
    assert!((mn["value"].as_f64().unwrap() - expected).abs() < 1e-9);
    assert_eq!(mn["reported"], "1988");
    assert_eq!(mn["verdict"], "pass");
    assert!(!w.path("register").exists(), "dry run writes nothing");
}

#[test]
fn long_format_with_replicates_units_and_temperature() {
    let w = Workspace::new();
    w.write(
        "lims.csv",
        "lot,product,property,value,unit,replicate,analyst,tested_at,temperature_c,manufactured\n\
         T26-201,TP-2000,acid_value,0.50,mg KOH/g,1,Lab technician A,2026-06-01T08:00,,2026-05-30\n\
         T26-201,TP-2000,acid_value,0.54,mg KOH/g,2,Lab technician A,2026-06-01T08:10,,\n\
         T26-201,TP-2000,hydroxyl_value,55.3,mg KOH/g,1,Lab technician B,2026-06-01T09:00,,\n\
         T26-201,TP-2000,viscosity,0.45,Pa·s,1,Lab technician B,2026-06-01T10:00,80,\n",
    );
    let out = w.release("lims.csv").arg("--json").output().unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let props = v["lots"][0]["properties"].as_array().unwrap();
    let av = props
        .iter()
        .find(|p| p["property"] == "acid_value")
        .unwrap();
    assert_eq!(av["reported"], "0.52");
    let visc = props.iter().find(|p| p["property"] == "viscosity").unwrap();
    // 0.45 Pa·s = 450 mPa·s at 80 °C; Andrade with B = 6000 K to 75 °C: ×1.27635 = 574.4.
    assert_eq!(visc["reported"], "574");
    assert!(v["lots"][0]["notes"].to_string().contains("Andrade"));
}

fn refused(w: &Workspace, file: &str, text: &str, needle: &str) {
    w.write(file, text);
    let before = w.snapshot();
    w.release(file)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(needle));
    assert_eq!(before, w.snapshot(), "no file may change on bad input");
}

#[test]
fn missing_column_is_refused() {
    refused(
        &Workspace::new(),
        "r.csv",
        "lot,product,acid_value\nX1,TP-2000,0.5\n",
        "lacks column(s): manufactured",
    );
}

#[test]
fn non_numeric_cell_is_refused() {
    refused(
        &Workspace::new(),
        "r.csv",
        "lot,product,manufactured,acid_value\nX1,TP-2000,2026-05-01,0.5 mg\n",
        "r.csv:2, column 'acid_value': '0.5 mg' is not a number",
    );
}

#[test]
fn empty_file_is_refused() {
    refused(&Workspace::new(), "r.csv", "", "the file is empty");
}

#[test]
fn unknown_product_is_refused() {
    refused(
        &Workspace::new(),
        "r.csv",
        "lot,product,manufactured,acid_value\nX1,ZZ-1,2026-05-01,0.5\n",
        "product 'ZZ-1'",
    );
}

#[test]
fn unknown_property_is_refused() {
    refused(
        &Workspace::new(),
        "r.csv",
        "lot,product,manufactured,acid_value,colour\nX1,TP-2000,2026-05-01,0.5,3\n",
        "property 'colour' is not in the spec",
    );
}

#[test]
fn conflicting_duplicate_rows_are_refused() {
    refused(
        &Workspace::new(),
        "r.csv",
        "lot,product,manufactured,acid_value\nX1,TP-2000,2026-05-01,0.5\nX1,TP-2000,2026-05-01,0.6\n",
        "already appears on line 2 with different results",
    );
}

#[test]
fn lot_id_with_path_separator_is_refused() {
    refused(
        &Workspace::new(),
        "r.csv",
        "lot,product,manufactured,acid_value\n../../etc,TP-2000,2026-05-01,0.5\n",
        "not a usable lot id",
    );
}

#[test]
fn lot_id_with_control_character_is_refused() {
    refused(
        &Workspace::new(),
        "r.csv",
        "lot,product,manufactured,acid_value\nX1\u{7},TP-2000,2026-05-01,0.5\n",
        "control character",
    );
}

#[test]
fn spec_error_is_refused_with_file_and_line() {
    let w = Workspace::new();
    let spec = std::fs::read_to_string(w.path("specs/tp-2000-c.toml")).unwrap();
    w.write(
        "specs/tp-2000-c.toml",
        &spec.replace("decimals = 2", "decimals = 2\nprecision = 3"),
    );
    refused(&w, "good.csv", GOOD, "tp-2000-c.toml:");
}

#[test]
fn spec_with_min_above_max_is_refused() {
    let w = Workspace::new();
    let spec = std::fs::read_to_string(w.path("specs/tp-2000-c.toml")).unwrap();
    w.write(
        "specs/tp-2000-c.toml",
        &spec.replace("min = 450", "min = 700"),
    );
    refused(&w, "good.csv", GOOD, "min 700 is greater than max 650");
}

#[test]
fn manufacture_before_any_revision_is_refused() {
    refused(
        &Workspace::new(),
        "r.csv",
        "lot,product,manufactured,acid_value\nX1,TP-2000,2024-01-01,0.5\n",
        "no revision is effective yet",
    );
}

#[test]
fn decimal_comma_files_are_read() {
    let w = Workspace::new();
    w.write(
        "r.csv",
        "lot;product;manufactured;acid_value;hydroxyl_value;viscosity\nT26-301;TP-2000;2026-05-01;0,52;55,4;540\n",
    );
    w.release("r.csv").arg("--decimal-comma").assert().code(0);
}

#[test]
fn viscosity_at_wrong_temperature_without_coefficient_is_refused() {
    let w = Workspace::new();
    let spec = std::fs::read_to_string(w.path("specs/tp-2000-c.toml")).unwrap();
    w.write(
        "specs/tp-2000-c.toml",
        &spec.replace("andrade_b_k = 6000\n", ""),
    );
    let spec = std::fs::read_to_string(w.path("specs/tp-2000-b.toml")).unwrap();
    w.write(
        "specs/tp-2000-b.toml",
        &spec.replace("andrade_b_k = 6000\n", ""),
    );
    refused(
        &w,
        "r.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,viscosity_temperature_c\nX1,TP-2000,2026-05-01,0.5,55,500,80\n",
        "measured at 80 °C but the spec temperature is 75 °C",
    );
}

#[test]
fn missing_approver_is_refused() {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    w.cmd()
        .env_remove("USER")
        .args([
            "release",
            "good.csv",
            "--specs",
            "specs",
            "--register",
            "register",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--approver"));
}

#[test]
fn specs_check_summarises_products() {
    let w = Workspace::new();
    w.cmd()
        .args(["specs", "check", "specs"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("TP-2000"))
        .stdout(predicate::str::contains(
            "B from 2025-06-01, C from 2026-03-01",
        ));
}

#[test]
fn lot_id_already_used_by_another_product_is_refused() {
    // Regression (issue #6): lookup finds a lot by id alone, so an id names one lot plant-wide.
    let w = Workspace::new();
    let spec = std::fs::read_to_string(w.path("specs/tp-2000-c.toml")).unwrap();
    w.write(
        "specs/tq-1.toml",
        &spec.replace("code = \"TP-2000\"", "code = \"TQ-1\""),
    );
    w.write("good.csv", GOOD);
    w.release("good.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    refused(
        &w,
        "other.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nT26-101,TQ-1,2026-05-02,0.5,55,540\n",
        "already recorded for product TP-2000",
    );
}

#[test]
fn decimal_comma_file_refuses_points() {
    // Regression (issue #3): "1.530" in a decimal-comma file is a thousands separator, not 1.53.
    refused_with(
        &["--decimal-comma"],
        "lot;product;manufactured;acid_value;hydroxyl_value;viscosity\nT26-302;TP-2000;2026-05-01;0,52;55,4;1.530\n",
        "has a point in a file read with --decimal-comma",
    );
}

fn refused_with(extra: &[&str], text: &str, needle: &str) {
    let w = Workspace::new();
    w.write("r.csv", text);
    let before = w.snapshot();
    w.release("r.csv")
        .args(extra)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(needle));
    assert_eq!(before, w.snapshot());
}

#[test]
fn same_numbers_with_other_trailing_zeros_are_unchanged() {
    // Regression (issue #3): 0.52 and 0.520 are the same result; a re-import is a no-op.
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    w.release("good.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    w.write("again.csv", &GOOD.replace("0.52,55.4", "0.520,55.40"));
    w.release("again.csv")
        .arg("--no-certificates")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("unchanged (row 1)"));
}
