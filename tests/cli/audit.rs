//! A record that stands an audit (issue #15): who tested and when, the limits frozen by the
//! spec's SHA-256, history imports' decision times, text and below-LOQ results, columns
//! nothing reads, and registers written before all this. Every value is invented.

use crate::common::{page_texts, pdfs, Workspace};

/// Test fixture (invented): a product with a text result and a result that may be below its
/// limit of quantification.
const TW_SPEC: &str = r#"# Test fixture (invented values), issue #15.
code = "TW-10"
name = "Test polyester with appearance and water"
revision = "A"
effective = 2026-01-01
functionality = 2.0
decision_rule = "guarded"
retest_months = 12

[properties.acid_value]
label = "Acid value"
unit = "mg KOH/g"
max = 1.0
decimals = 2
uncertainty = 0.05

[properties.water]
label = "Water"
unit = "%"
method = "ISO 760"
max = 0.05
decimals = 2
uncertainty = 0.01
loq = 0.01

[properties.appearance]
label = "Appearance"
method = "visual"
kind = "text"
allowed = ["clear", "slightly hazy", "hazy"]
conforming = ["clear", "slightly hazy"]
"#;

/// Test fixture (invented customer) for TW-10.
const TW_CUSTOMER: &str = r#"# Test fixture (invented customer), issue #15.
name = "Ashby Coatings Ltd"
[products.TW-10]
part_number = "AC-10"
report = ["acid_value", "water", "appearance"]
"#;

/// The trend-file row of `lot` as (column, cell) pairs.
fn row_of(w: &Workspace, product: &str, lot: &str) -> Vec<(String, String)> {
    let text = std::fs::read_to_string(w.path(&format!("register/{product}.csv"))).unwrap();
    let header = resinlot::record::trend_file::split_line(text.lines().next().unwrap());
    let line = text
        .lines()
        .rev()
        .find(|l| l.contains(&format!(",{lot},")))
        .unwrap();
    header
        .into_iter()
        .zip(resinlot::record::trend_file::split_line(line))
        .collect()
}

fn cell(row: &[(String, String)], column: &str) -> String {
    row.iter()
        .find(|(c, _)| c == column)
        .map(|(_, v)| v.clone())
        .unwrap_or_else(|| panic!("no column {column}"))
}

/// The login name of the passwd entry of this uid, as the POSIX `id -un` prints it.
fn login() -> String {
    let out = std::process::Command::new("id")
        .arg("-un")
        .output()
        .unwrap();
    String::from_utf8_lossy(&out.stdout).trim().to_string()
}

fn stdout(out: &assert_cmd::assert::Assert) -> String {
    String::from_utf8_lossy(&out.get_output().stdout).into_owned()
}

fn stderr(out: &assert_cmd::assert::Assert) -> String {
    String::from_utf8_lossy(&out.get_output().stderr).into_owned()
}

fn sha256_of(w: &Workspace, rel: &str) -> String {
    use sha2::Digest;
    resinlot::record::trend_file::hex(&sha2::Sha256::digest(std::fs::read(w.path(rel)).unwrap()))
}

/// A TP-2000 lot in a long results file with two analysts, test times, a note and a column
/// nothing reads.
const LONG_WITH_AUDIT: &str =
    "lot,product,property,value,analyst,tested_at,manufactured,instrument,notes\n\
T26-201,TP-2000,acid_value,0.50,AB,2026-05-03,2026-05-02,T-7,\n\
T26-201,TP-2000,hydroxyl_value,55.6,CD,2026-05-04T09:30:00Z,,T-9,re-run after calibration\n\
T26-201,TP-2000,viscosity,540,AB,2026-05-03 14:10,,V-2,\n";

#[test]
fn analysts_test_dates_and_login_reach_the_row_and_lookup_issue_15() {
    let w = Workspace::new();
    w.write("lab.csv", LONG_WITH_AUDIT);
    // The login is the passwd entry's, not whatever USER says.
    let out = w.release("lab.csv").env("USER", "mallory").assert().code(0);
    let text = stdout(&out);
    assert!(
        text.contains("Ignored columns (nothing reads them): instrument."),
        "{text}"
    );
    let row = row_of(&w, "TP-2000", "T26-201");
    assert_eq!(cell(&row, "analysts"), "AB;CD");
    assert_eq!(cell(&row, "tested_from"), "2026-05-03");
    assert_eq!(cell(&row, "tested_to"), "2026-05-04T09:30:00Z");
    assert_eq!(cell(&row, "recorded_by"), login());
    assert_ne!(cell(&row, "recorded_by"), "mallory");
    assert_eq!(cell(&row, "decided_at"), cell(&row, "recorded_at"));
    assert_eq!(cell(&row, "decided_at"), "2026-12-10T00:00:00Z");
    assert_eq!(
        cell(&row, "spec_sha256"),
        sha256_of(&w, "specs/tp-2000-c.toml")
    );
    assert!(cell(&row, "notes").contains("lab note: re-run after calibration"));
    let out = w.cmd().args(["lookup", "T26-201"]).assert().code(0);
    let text = stdout(&out);
    for want in [
        "Tested        2026-05-03 to 2026-05-04T09:30:00Z by AB, CD",
        &format!("Recorded      2026-12-10T00:00:00Z by login {}", login()),
        "Limits: TP-2000 revision C, the file the lot was decided against (SHA-256 ",
        "lab note: re-run after calibration",
    ] {
        assert!(text.contains(want), "{want} missing from:\n{text}");
    }
    let out = w
        .cmd()
        .args(["lookup", "T26-201", "--json"])
        .assert()
        .code(0);
    let v: serde_json::Value = serde_json::from_slice(&out.get_output().stdout).unwrap();
    assert_eq!(v["analysts"], "AB;CD");
    assert_eq!(v["tested_to"], "2026-05-04T09:30:00Z");
}

#[test]
fn a_wide_file_without_test_dates_records_the_manufacture_date_issue_15() {
    let w = Workspace::with_good_released(false);
    let row = row_of(&w, "TP-2000", "T26-102");
    assert_eq!(cell(&row, "tested_from"), "2026-05-09");
    assert_eq!(cell(&row, "tested_to"), "2026-05-09");
    assert_eq!(cell(&row, "analysts"), "");
}

#[test]
fn a_test_date_before_manufacture_or_in_the_future_is_refused_issue_15() {
    let w = Workspace::new();
    let before = w.snapshot();
    w.write(
        "early.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,tested_at\n\
         T26-301,TP-2000,2026-05-02,0.5,55.6,540,2026-05-01\n",
    );
    let out = w.release("early.csv").assert().code(2);
    let err = stderr(&out);
    assert!(
        err.contains("early.csv:2, lot 'T26-301', column 'tested_at'")
            && err.contains("before the manufacture date 2026-05-02"),
        "{err}"
    );
    w.write(
        "future.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,tested_at\n\
         T26-302,TP-2000,2026-05-02,0.5,55.6,540,2027-01-05\n",
    );
    let err = stderr(&w.release("future.csv").assert().code(2));
    assert!(err.contains("2027-01-05 is in the future"), "{err}");
    w.write(
        "bad.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,tested_at\n\
         T26-303,TP-2000,2026-05-02,0.5,55.6,540,May 3rd\n",
    );
    let err = stderr(&w.release("bad.csv").assert().code(2));
    assert!(
        err.contains("bad.csv:2, column 'tested_at'") && err.contains("not a date or time"),
        "{err}"
    );
    for f in ["early.csv", "future.csv", "bad.csv"] {
        std::fs::remove_file(w.path(f)).unwrap();
    }
    assert_eq!(w.snapshot(), before);
}

#[test]
fn a_history_file_keeps_its_decision_time_and_approver_issue_15() {
    let w = Workspace::new();
    w.write(
        "history.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,approver,decided_at\n\
         T25-001,TP-2000,2026-04-02,0.52,55.4,540,\"J. Roe, QC Manager\",2026-04-04\n\
         T25-002,TP-2000,2026-04-09,0.48,55.9,530,,2026-04-10T15:20:00+02:00\n",
    );
    w.release("history.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    let row = row_of(&w, "TP-2000", "T25-001");
    assert_eq!(cell(&row, "decided_at"), "2026-04-04");
    assert_eq!(cell(&row, "approver"), "J. Roe, QC Manager");
    assert_eq!(cell(&row, "recorded_at"), "2026-12-10T00:00:00Z");
    let row = row_of(&w, "TP-2000", "T25-002");
    assert_eq!(cell(&row, "decided_at"), "2026-04-10T13:20:00Z");
    assert_eq!(cell(&row, "approver"), "QC Laboratory Supervisor");
    let text = stdout(&w.cmd().args(["lookup", "T25-001"]).assert().code(0));
    assert!(
        text.contains("Decided       2026-04-04 by J. Roe, QC Manager"),
        "{text}"
    );
    // One lot, two decision times: refused, nothing written.
    let before = w.snapshot();
    w.write(
        "twice.csv",
        "lot,product,property,value,manufactured,decided_at\n\
         T25-003,TP-2000,acid_value,0.5,2026-04-09,2026-04-10\n\
         T25-003,TP-2000,hydroxyl_value,55.5,,2026-04-11\n",
    );
    let err = stderr(&w.release("twice.csv").assert().code(2));
    assert!(
        err.contains("twice.csv:3, lot 'T25-003', column 'decided_at'")
            && err.contains("'2026-04-11' differs from '2026-04-10'"),
        "{err}"
    );
    std::fs::remove_file(w.path("twice.csv")).unwrap();
    assert_eq!(w.snapshot(), before);
}

#[test]
fn a_revision_edited_in_place_is_caught_and_refused_issue_15() {
    let w = Workspace::with_good_released(true);
    let spec = w.path("specs/tp-2000-c.toml");
    let text = std::fs::read_to_string(&spec).unwrap();
    // AV max 1.0 -> 0.5, same revision letter.
    std::fs::write(&spec, text.replace("max = 1.0", "max = 0.5")).unwrap();
    let before = w.snapshot();
    let out = w.cmd().arg("verify").assert().code(1);
    let text = stdout(&out);
    assert!(
        text.contains("TP-2000 revision C was changed after 3 lots were decided on it")
            && text.contains("make a new revision instead"),
        "{text}"
    );
    let text = stdout(&w.cmd().args(["specs", "check", "specs"]).assert().code(1));
    assert!(
        text.contains("CHANGED AFTER USE: TP-2000 revision C was changed after 3 lots"),
        "{text}"
    );
    let err = stderr(
        &w.cmd()
            .args(["certify", "T26-101", "--customer", "northwind"])
            .assert()
            .code(1),
    );
    assert!(
        err.contains("TP-2000 revision C was changed after 3 lots were decided on it"),
        "{err}"
    );
    let err = stderr(
        &w.cmd()
            .args(["find", "--product", "TP-2000", "--customer", "northwind"])
            .assert()
            .code(1),
    );
    assert!(err.contains("revision C was changed after"), "{err}");
    let text = stdout(&w.cmd().args(["lookup", "T26-101"]).assert().code(0));
    assert!(
        text.contains("CAUTION: TP-2000 revision C was changed after this lot was decided")
            && text.contains("NOT those the lot was decided against"),
        "{text}"
    );
    assert_eq!(w.snapshot(), before);
    // Restored as it was, everything works again.
    std::fs::write(
        &spec,
        std::fs::read_to_string(&spec)
            .unwrap()
            .replace("max = 0.5", "max = 1.0"),
    )
    .unwrap();
    w.cmd().arg("verify").assert().code(0);
    w.cmd()
        .args(["certify", "T26-101", "--customer", "northwind"])
        .assert()
        .code(0);
}

/// The TW-10 workspace with four lots released (with internal certificates).
fn tw_released() -> Workspace {
    let w = Workspace::new();
    w.write("specs/tw-10.toml", TW_SPEC);
    w.write("specs/customers/ashby.toml", TW_CUSTOMER);
    w.write(
        "tw.csv",
        "lot,product,manufactured,acid_value,water,appearance\n\
         W26-001,TW-10,2026-06-01,0.40,<0.01,clear\n\
         W26-002,TW-10,2026-06-08,0.42,0.02,Slightly Hazy\n\
         W26-003,TW-10,2026-06-15,0.45,< 0.02,hazy\n\
         W26-004,TW-10,2026-06-22,0.41,nd,CLEAR\n\
         W26-005,TW-10,2026-06-29,0.44,<0.045,clear\n\
         W26-006,TW-10,2026-07-06,0.43,0.03,clear\n",
    );
    w
}

#[test]
fn text_and_below_loq_results_are_decided_printed_and_excluded_issue_15() {
    let w = tw_released();
    let out = w.release("tw.csv").assert().code(1);
    let text = stdout(&out);
    assert!(
        text.contains("6 lots: 4 released, 1 on hold, 1 rejected"),
        "{text}"
    );
    // Words are stored as the spec writes them; censored results as <L.
    let r1 = row_of(&w, "TW-10", "W26-001");
    assert_eq!(cell(&r1, "water"), "<0.01");
    assert_eq!(cell(&r1, "water_verdict"), "pass");
    assert_eq!(cell(&r1, "appearance"), "clear");
    let r2 = row_of(&w, "TW-10", "W26-002");
    assert_eq!(cell(&r2, "appearance"), "slightly hazy");
    assert_eq!(cell(&r2, "appearance_verdict"), "pass");
    let r3 = row_of(&w, "TW-10", "W26-003");
    assert_eq!(cell(&r3, "appearance_verdict"), "fail");
    assert_eq!(cell(&r3, "status"), "rejected");
    // nd is censored at the LOQ.
    assert_eq!(cell(&row_of(&w, "TW-10", "W26-004"), "water"), "<0.01");
    // <0.045 is within U = 0.01 of the maximum 0.05: conditional, so the lot is held.
    let r5 = row_of(&w, "TW-10", "W26-005");
    assert_eq!(cell(&r5, "water_verdict"), "conditional_pass");
    assert_eq!(cell(&r5, "status"), "on_hold");
    // The internal certificate prints "< 0.01" and the word.
    let files = pdfs(&w.path("certificates"));
    let first = files
        .iter()
        .find(|p| p.to_string_lossy().contains("W26-001"))
        .unwrap();
    let page = &page_texts(&std::fs::read(first).unwrap())[0];
    assert!(page.contains("< 0.01"), "{page}");
    assert!(page.contains("clear"), "{page}");
    // A customer certificate too.
    w.cmd()
        .args(["certify", "W26-001", "--customer", "ashby"])
        .assert()
        .code(0);
    let files = pdfs(&w.path("certificates"));
    let cust = files
        .iter()
        .find(|p| {
            let t = page_texts(&std::fs::read(p).unwrap()).join(" ");
            t.contains("Ashby Coatings Ltd") && t.contains("W26-001")
        })
        .unwrap();
    let page = page_texts(&std::fs::read(cust).unwrap()).join(" ");
    assert!(page.contains("< 0.01") && page.contains("clear"), "{page}");
    // find --customer applies the same rule: released lots with a conforming word and water
    // below the LOQ fit.
    let text = stdout(
        &w.cmd()
            .args(["find", "--product", "TW-10", "--customer", "ashby"])
            .assert()
            .code(0),
    );
    for lot in ["W26-001", "W26-002", "W26-004", "W26-006"] {
        assert!(text.contains(lot), "{lot}: {text}");
    }
    assert!(
        !text.contains("W26-003") && !text.contains("W26-005"),
        "{text}"
    );
    // Lookup prints them as a certificate does.
    let text = stdout(&w.cmd().args(["lookup", "W26-001"]).assert().code(0));
    assert!(text.contains("< 0.01") && text.contains("clear"), "{text}");
    // Trend leaves out the text property and the censored results, and says so once.
    let out = w.cmd().args(["trend", "TW-10"]).output().unwrap();
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(
        text.contains("Not trended: appearance (text results; statistics need numbers)."),
        "{text}"
    );
    assert!(
        text.contains(
            "Excluded from the statistics, results below the limit of quantification: water 4."
        ),
        "{text}"
    );
    assert_eq!(text.matches("Not trended").count(), 1, "{text}");
    let out = w
        .cmd()
        .args(["trend", "TW-10", "--property", "water", "--json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["n"], 2, "{v}");
    assert!(
        v["warnings"].as_array().unwrap().iter().any(|w| w
            .as_str()
            .unwrap()
            .starts_with("4 results below the limit of quantification")),
        "{v}"
    );
    let err = String::from_utf8_lossy(
        &w.cmd()
            .args(["trend", "TW-10", "--property", "appearance"])
            .output()
            .unwrap()
            .stderr,
    )
    .into_owned();
    assert!(err.contains("appearance is a text property"), "{err}");
}

#[test]
fn unusable_text_and_censored_results_are_refused_issue_15() {
    let w = Workspace::new();
    w.write("specs/tw-10.toml", TW_SPEC);
    let before = w.snapshot();
    let cases = [
        (
            "W9,TW-10,2026-06-01,0.4,<0.06,clear",
            "'<0.06' is above the maximum 0.05",
        ),
        (
            "W9,TW-10,2026-06-01,0.4,<0.005,clear",
            "'<0.005' is below the limit of quantification 0.01",
        ),
        (
            "W9,TW-10,2026-06-01,0.4,0.02,cloudy",
            "'cloudy' is not one of the words this property allows",
        ),
        (
            "W9,TW-10,2026-06-01,<0.1,0.02,clear",
            "the spec gives no limit of quantification for acid_value",
        ),
        (
            "W9,TW-10,2026-06-01,0.4,<abc,clear",
            "'abc' is not a number",
        ),
    ];
    for (row, want) in cases {
        w.write(
            "bad.csv",
            &format!("lot,product,manufactured,acid_value,water,appearance\n{row}\n"),
        );
        let err = stderr(&w.release("bad.csv").assert().code(2));
        assert!(err.contains("bad.csv:2"), "{err}");
        assert!(err.contains(want), "{want}: {err}");
    }
    std::fs::remove_file(w.path("bad.csv")).unwrap();
    assert_eq!(w.snapshot(), before);
}

#[test]
fn a_spec_with_a_bad_text_or_loq_property_is_refused_issue_15() {
    let w = Workspace::new();
    for (from, to, want) in [
        (
            "conforming = [\"clear\", \"slightly hazy\"]",
            "conforming = [\"bright\"]",
            "'bright' is not one of the allowed words",
        ),
        (
            "kind = \"text\"",
            "kind = \"text\"\nmax = 1",
            "a text property has no max",
        ),
        (
            "loq = 0.01",
            "loq = 0.2",
            "the limit of quantification 0.2 is above the maximum 0.05",
        ),
        (
            "kind = \"text\"",
            "kind = \"words\"",
            "'words' is not a kind of property",
        ),
    ] {
        w.write("specs/tw-10.toml", &TW_SPEC.replace(from, to));
        let err = stderr(&w.cmd().args(["specs", "check", "specs"]).assert().code(2));
        assert!(err.contains("tw-10.toml"), "{err}");
        assert!(err.contains(want), "{want}: {err}");
    }
    // A customer window on a text property would be ignored, so it is refused.
    w.write("specs/tw-10.toml", TW_SPEC);
    w.write(
        "specs/customers/ashby.toml",
        &format!("{TW_CUSTOMER}[products.TW-10.limits.appearance]\nmax = 1\n"),
    );
    let err = stderr(&w.cmd().args(["specs", "check", "specs"]).assert().code(2));
    assert!(
        err.contains("ashby.toml: products.TW-10.limits.appearance")
            && err.contains("appearance is a text property"),
        "{err}"
    );
}

#[test]
fn a_register_from_before_issue_15_verifies_and_upgrades_issue_15() {
    let dir = tempfile::tempdir().unwrap();
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    crate::common::copy_dir(&root.join("tests/registers/before-14"), dir.path());
    let w = Workspace { dir };
    let text = stdout(&w.cmd().arg("verify").assert().code(0));
    assert!(text.contains("The record is intact."), "{text}");
    assert!(
        text.contains("rows recorded before spec hashes were kept cannot be compared"),
        "{text}"
    );
    w.cmd().arg("upgrade").assert().code(0);
    w.write(
        "lot.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,water,analyst\n\
         F2611-D98,PD-2000,2026-11-30,0.41,55.60,536,0.024,EF\n",
    );
    w.release("lot.csv").assert().code(0);
    let row = row_of(&w, "PD-2000", "F2611-D98");
    assert_eq!(cell(&row, "analysts"), "EF");
    assert_eq!(cell(&row, "spec_sha256").len(), 64);
    w.cmd().arg("verify").assert().code(0);
    // An old lot: its limits cannot be confirmed as the file used, and lookup says so.
    let old = row_of(&w, "PD-2000", "F2611-D05");
    assert_eq!(cell(&old, "spec_sha256"), "");
    let text = stdout(&w.cmd().args(["lookup", "F2611-D05"]).assert().code(0));
    assert!(
        text.contains("recorded before the spec's SHA-256 was kept"),
        "{text}"
    );
}
