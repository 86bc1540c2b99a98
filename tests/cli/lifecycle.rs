//! Integration tests of a lot's life after its first decision (issue #14): QA disposition,
//! concessions, withdrawn and superseded certificates and what `verify` says of them, shelf
//! life in certify/find/lookup, and lot ids unique without regard to case. Every lot and value
//! here is invented (test fixtures).

use crate::common;

use common::{pdfs, Workspace, GOOD};
use predicates::prelude::*;

/// An invented second customer for TP-2000, with no tighter window.
const OTHER_CUSTOMER: &str = "# Test fixture (invented customer).\nname = \"Ostrava Foam Works\"\n[products.TP-2000]\npart_number = \"OF-12\"\n";

fn certify(w: &Workspace, lot: &str, customer: &str) -> assert_cmd::Command {
    let mut c = w.cmd();
    c.args(["certify", lot, "--customer", customer, "--po", "PO-7781"]);
    c
}

fn disposition(w: &Workspace, lot: &str, decision: &str) -> assert_cmd::Command {
    let mut c = w.cmd();
    c.args([
        "disposition",
        lot,
        "--decision",
        decision,
        "--reason",
        "QA review of the lot's results",
        "--approver",
        "R. Okafor, QA Manager",
    ]);
    c
}

fn pdf_of(w: &Workspace, number: &str) -> std::path::PathBuf {
    pdfs(&w.path("certificates"))
        .into_iter()
        .find(|p| p.to_string_lossy().contains(number))
        .unwrap_or_else(|| panic!("no certificate {number}"))
}

fn stdout(out: &std::process::Output) -> String {
    String::from_utf8_lossy(&out.stdout).to_string()
}

/// The fixture's held lot T26-002 (AV 0.98 against a maximum of 1.00 with U 0.05: conditional
/// pass, so on hold) and three released lots, with internal certificates.
fn with_held_lot() -> Workspace {
    let w = Workspace::with_good_released(true);
    w.write("specs/customers/ostrava.toml", OTHER_CUSTOMER);
    w.write(
        "held.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nT26-002,TP-2000,2026-04-09,0.98,55.0,555\n",
    );
    w.release("held.csv").assert().code(1);
    w
}

/// Issue #14: a concession lot is certified for its customer (naming the concession) and
/// refused for any other; the record verifies after every step.
#[test]
fn a_concession_lot_goes_to_its_customer_only_issue_14() {
    let w = with_held_lot();
    let out = disposition(&w, "T26-002", "concession")
        .args([
            "--customer",
            "northwind",
            "--concession-ref",
            "NW-DEV-17",
            "--json",
        ])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["lot"], "T26-002");
    assert_eq!(v["status"], "released");
    assert_eq!(v["decision"], "concession");
    assert_eq!(v["previous_status"], "on_hold");
    assert_eq!(v["row"], 5);
    w.cmd().arg("verify").assert().code(0);
    let out = certify(&w, "T26-002", "northwind").output().unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = stdout(&out);
    assert!(text.contains("concession NW-DEV-17"), "{text}");
    // The property outside the window: AV 0.98 is a conditional pass against the spec.
    assert!(text.contains("Acid value 0.98"), "{text}");
    let before = w.snapshot();
    certify(&w, "T26-002", "ostrava")
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "released under concession NW-DEV-17 for customer 'northwind' only",
        ));
    assert_eq!(w.snapshot(), before, "a refusal writes nothing");
    // find lists it for its customer only.
    let found = |c: &str| {
        stdout(
            &w.cmd()
                .args(["find", "TP-2000", "--customer", c])
                .output()
                .unwrap(),
        )
    };
    assert!(found("northwind").contains("T26-002"));
    assert!(!found("ostrava").contains("T26-002"));
    let lookup = stdout(&w.cmd().args(["lookup", "T26-002"]).output().unwrap());
    assert!(
        lookup.contains("under concession NW-DEV-17 for customer 'northwind' only"),
        "{lookup}"
    );
    assert!(
        lookup.contains("released under concession (R. Okafor, QA Manager)"),
        "{lookup}"
    );
    w.cmd().arg("verify").assert().code(0);
}

/// Issue #14: a retest that rejects a certified lot withdraws its certificates, lists the
/// customers to notify, and `verify` on the old certificate says withdrawn (exit 1).
#[test]
fn a_retest_that_rejects_a_certified_lot_withdraws_its_certificates_issue_14() {
    let w = Workspace::with_good_released(true);
    certify(&w, "T26-101", "northwind").assert().code(0); // FW-000004
    w.write(
        "retest.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nT26-101,TP-2000,2026-05-02,1.40,55.4,540\n",
    );
    let out = w
        .release("retest.csv")
        .args([
            "--retest",
            "--reason",
            "retained sample re-titrated",
            "--json",
        ])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let withdrawn = v["withdrawn"].as_array().unwrap();
    let numbers: Vec<&str> = withdrawn
        .iter()
        .map(|x| x["number"].as_str().unwrap())
        .collect();
    assert!(numbers.contains(&"FW-000004"), "{v}");
    let nw = withdrawn
        .iter()
        .find(|x| x["number"] == "FW-000004")
        .unwrap();
    assert_eq!(nw["customer"], "northwind");
    assert_eq!(nw["customer_name"], "Northwind & Sons <Foams>");
    // Since issue #16 the log records the purchase order, so the notice names it.
    assert_eq!(nw["po"], "PO-7781");
    let old = pdf_of(&w, "FW-000004");
    let out = w.cmd().arg("verify").arg(&old).output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    let text = stdout(&out);
    assert!(text.contains("WITHDRAWN: certificate FW-000004"), "{text}");
    assert!(text.contains("retained sample re-titrated"), "{text}");
    let out = w
        .cmd()
        .args(["verify", "--json"])
        .arg(&old)
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v[0]["verdict"], "withdrawn");
    assert_eq!(v[0]["withdrawn_at"], "2026-12-10T00:00:00Z");
    assert!(v[0]["reason"]
        .as_str()
        .unwrap()
        .contains("lot rejected by retest"));
    assert!(v[0]["superseded_by"].is_null());
    w.cmd().arg("verify").assert().code(0);
    // lookup names the withdrawal.
    let lookup = stdout(&w.cmd().args(["lookup", "T26-101"]).output().unwrap());
    assert!(
        lookup.contains("FW-000004  Northwind & Sons <Foams>"),
        "{lookup}"
    );
    assert!(
        lookup.contains("WITHDRAWN 2026-12-10T00:00:00Z"),
        "{lookup}"
    );
}

/// Issue #14: the text output of a withdrawing disposition names the customers to notify.
#[test]
fn a_rejecting_disposition_lists_the_customers_to_notify_issue_14() {
    let w = Workspace::with_good_released(true);
    certify(&w, "T26-101", "northwind").assert().code(0); // FW-000004
    disposition(&w, "T26-101", "rejected")
        .assert()
        .code(0)
        .stdout(predicate::str::contains(
            "rejected by QA: released -> rejected",
        ))
        .stdout(predicate::str::contains(
            "NOTIFY these customers that their certificates for lot T26-101 are withdrawn",
        ))
        .stdout(
            predicate::str::contains("FW-000004  Northwind & Sons <Foams>  PO PO-7781").or(
                predicate::str::contains("FW-000004  Northwind & Sons <Foams>"),
            ),
        );
    w.cmd()
        .arg("verify")
        .arg(pdf_of(&w, "FW-000004"))
        .assert()
        .code(1)
        .stdout(predicate::str::contains("WITHDRAWN"));
    w.cmd().arg("verify").assert().code(0);
    // A rejected lot is certified for no one.
    certify(&w, "T26-101", "northwind")
        .arg("--reason")
        .arg("again")
        .assert()
        .code(1)
        .stderr(predicate::str::contains("lot T26-101 is rejected"));
}

/// Issue #14: a reissued certificate is superseded and names its successor (exit 1); the
/// successor is genuine.
#[test]
fn a_superseded_certificate_names_its_successor_issue_14() {
    let w = Workspace::with_good_released(true);
    certify(&w, "T26-101", "northwind").assert().code(0); // FW-000004
    certify(&w, "T26-101", "northwind")
        .args(["--reason", "purchase order corrected"])
        .assert()
        .code(0); // FW-000005
    let out = w
        .cmd()
        .args(["verify", "--json"])
        .arg(pdf_of(&w, "FW-000004"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v[0]["verdict"], "superseded");
    assert_eq!(v[0]["superseded_by"], "FW-000005");
    assert_eq!(v[0]["reason"], "purchase order corrected");
    assert!(v[0]["withdrawn_at"].is_null());
    w.cmd()
        .arg("verify")
        .arg(pdf_of(&w, "FW-000004"))
        .assert()
        .code(1)
        .stdout(predicate::str::contains(
            "replaced by certificate FW-000005",
        ));
    w.cmd()
        .arg("verify")
        .arg(pdf_of(&w, "FW-000005"))
        .assert()
        .code(0)
        .stdout(predicate::str::contains("genuine"));
    // The log carries the supersession as an event row too.
    let log = std::fs::read_to_string(w.path("register/certificates.csv")).unwrap();
    assert!(
        log.lines()
            .any(|l| l.contains(",FW-000004,") && l.contains(",superseded,")),
        "{log}"
    );
    w.cmd().arg("verify").assert().code(0);
}

/// An invented lot of revision B, made 2025-11-01: its retest date 2026-11-01 has passed on
/// the tests' clock (2026-12-10).
const OLD_LOT: &str = "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nT25-080,TP-2000,2025-11-01,0.50,55.5,540\n";

/// Issue #14: an expired lot is refused by certify, left out (and counted) by find, and
/// lookup says since when; a retest after the date extends the shelf life.
#[test]
fn an_expired_lot_is_refused_and_left_out_issue_14() {
    let w = Workspace::new();
    w.write("old.csv", OLD_LOT);
    w.write("good.csv", GOOD);
    w.release("old.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    w.release("good.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    let before = w.snapshot();
    certify(&w, "T25-080", "northwind")
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "passed its retest date 2026-11-01",
        ));
    assert_eq!(w.snapshot(), before);
    let listed = stdout(&w.cmd().args(["find", "TP-2000"]).output().unwrap());
    assert!(!listed.contains("T25-080"), "{listed}");
    assert!(listed.contains("T26-101"), "{listed}");
    assert!(
        listed.contains("1 more lot matched but is past its retest date"),
        "{listed}"
    );
    let all = stdout(
        &w.cmd()
            .args(["find", "TP-2000", "--include-expired"])
            .output()
            .unwrap(),
    );
    assert!(all.contains("T25-080"), "{all}");
    let json = w
        .cmd()
        .args(["find", "TP-2000", "--json"])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&json.stdout).unwrap();
    assert_eq!(v["expired_left_out"], 1);
    w.cmd()
        .args(["lookup", "T25-080"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("expired since 2026-11-01"));
    // A retest on 2026-12-10, after the retest date, extends it to 2027-12-10.
    w.write("retest.csv", &OLD_LOT.replace("0.50,55.5", "0.52,55.5"));
    w.release("retest.csv")
        .args([
            "--retest",
            "--reason",
            "shelf-life retest",
            "--no-certificates",
        ])
        .assert()
        .code(0);
    certify(&w, "T25-080", "northwind").assert().code(0);
    let listed = stdout(&w.cmd().args(["find", "TP-2000"]).output().unwrap());
    assert!(listed.contains("T25-080"), "{listed}");
    w.cmd().args(["lookup", "T25-080"]).assert().stdout(
        predicate::str::contains("Retest date   2027-12-10")
            .or(predicate::str::contains("2027-12-10")),
    );
    w.cmd().arg("verify").assert().code(0);
}

/// Issue #14: a lot id that differs from a recorded one only in case is refused (exit 2)
/// naming the recorded one; lookup and certify accept any case.
#[test]
fn lot_ids_are_unique_without_regard_to_case_issue_14() {
    let w = Workspace::new();
    let lot = |id: &str| {
        format!("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n{id},TP-2000,2026-11-28,0.50,55.6,540\n")
    };
    w.write("upper.csv", &lot("X2612-D05"));
    w.write("lower.csv", &lot("x2612-d05").replace("0.50", "0.51"));
    w.release("upper.csv").assert().code(0);
    let before = w.snapshot();
    w.release("lower.csv")
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "lot id 'x2612-d05' differs only in case from lot 'X2612-D05'",
        ));
    assert_eq!(w.snapshot(), before, "nothing written");
    // Two spellings of one id in one file are refused too.
    w.write(
        "both.csv",
        &(lot("T26-900")
            + &lot("t26-900")
                .lines()
                .nth(1)
                .unwrap()
                .replace("0.50", "0.51")
            + "\n"),
    );
    w.release("both.csv")
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "differs only in case from lot 'T26-900'",
        ));
    w.cmd()
        .args(["lookup", "x2612-d05"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("Lot X2612-D05"));
    certify(&w, "x2612-D05", "northwind")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("for lot X2612-D05"));
    w.cmd().arg("verify").assert().code(0);
}

/// Issue #14: the disposition rules, each refusal with its exit code, writing nothing.
#[test]
fn disposition_rules_refuse_with_reasons_issue_14() {
    let w = with_held_lot();
    let before = w.snapshot();
    // A released lot cannot be released again by disposition (exit 1).
    disposition(&w, "T26-101", "released")
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "the lot is released: only a lot on hold or incomplete",
        ));
    // A concession needs its customer and reference (exit 2), and only a concession takes them.
    disposition(&w, "T26-002", "concession")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--customer"));
    disposition(&w, "T26-002", "released")
        .args(["--customer", "northwind"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "applies only to --decision concession",
        ));
    disposition(&w, "T26-002", "approve")
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "released, rejected, rework, concession",
        ));
    disposition(&w, "T99-999", "rejected").assert().code(1);
    assert_eq!(w.snapshot(), before, "refusals write nothing");
    // Rework holds the lot until new results; then release by disposition is refused.
    disposition(&w, "T26-002", "rework")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("on hold -> on hold"));
    disposition(&w, "T26-002", "released")
        .assert()
        .code(1)
        .stderr(predicate::str::contains("awaits new results"));
    disposition(&w, "T26-002", "rejected").assert().code(0);
    disposition(&w, "T26-002", "rejected")
        .assert()
        .code(1)
        .stderr(predicate::str::contains("already rejected"));
    w.cmd().arg("verify").assert().code(0);
    let lookup = stdout(&w.cmd().args(["lookup", "T26-002"]).output().unwrap());
    assert!(lookup.contains("sent to rework"), "{lookup}");
    assert!(lookup.contains("rejected by QA"), "{lookup}");
}

/// Issue #14: a hand-edited disposition row breaks the chain and is named by `verify`.
#[test]
fn a_hand_edited_disposition_row_is_detected_issue_14() {
    let w = with_held_lot();
    disposition(&w, "T26-002", "released").assert().code(0);
    let p = w.path("register/TP-2000.csv");
    let text = std::fs::read_to_string(&p).unwrap();
    let edited = text.replace(
        "QA review of the lot's results",
        "QA review of the lot's results and its retained sample",
    );
    assert_ne!(edited, text);
    std::fs::write(&p, edited).unwrap();
    w.cmd()
        .arg("verify")
        .assert()
        .code(1)
        .stdout(predicate::str::contains("TP-2000.csv:6"))
        .stdout(predicate::str::contains("BROKEN"));
}

/// Issue #14, fault safety: a withdrawal cut short after its trend row (the log rows never
/// written, as a kill at that instant leaves it) is found by `verify` and completed by
/// `verify --quarantine`, after which the old certificate is withdrawn.
#[test]
fn an_interrupted_withdrawal_is_found_and_completed_by_verify_issue_14() {
    let w = Workspace::with_good_released(true);
    certify(&w, "T26-103", "northwind").assert().code(0); // FW-000004
    let log = w.path("register/certificates.csv");
    let log_before = std::fs::read(&log).unwrap();
    disposition(&w, "T26-103", "rework").assert().code(0);
    // The state a kill between the trend row and the log rows leaves: the log as it was.
    std::fs::write(&log, &log_before).unwrap();
    let cert = pdf_of(&w, "FW-000004");
    w.cmd()
        .arg("verify")
        .arg(&cert)
        .assert()
        .code(0)
        .stdout(predicate::str::contains("genuine"));
    w.cmd()
        .arg("verify")
        .assert()
        .code(1)
        .stdout(predicate::str::contains("its withdrawal was never logged"))
        .stdout(predicate::str::contains("TP-2000.csv row 4"))
        .stdout(predicate::str::contains(
            "--quarantine to record the withdrawals",
        ));
    w.cmd()
        .args(["verify", "--quarantine"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains(
            "recorded the withdrawal of certificate FW-000004",
        ));
    w.cmd().arg("verify").assert().code(0);
    w.cmd()
        .arg("verify")
        .arg(&cert)
        .assert()
        .code(1)
        .stdout(predicate::str::contains("WITHDRAWN"));
    let q = std::fs::read_to_string(w.path("register/quarantine.log")).unwrap();
    assert!(q.contains("FW-000004"), "{q}");
}

/// Issue #14: a register in the layout before issue #14 refuses a disposition (exit 2,
/// naming `resinlot upgrade`) and writes nothing; upgraded, it takes it.
#[test]
fn an_earlier_register_needs_upgrade_for_a_disposition_issue_14() {
    let w = Workspace::new();
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    for d in ["register", "certificates", "specs"] {
        std::fs::remove_dir_all(w.path(d)).ok();
        common::copy_dir(&root.join("tests/registers/before-14").join(d), &w.path(d));
    }
    let before = w.snapshot();
    disposition(&w, "F2611-D05", "rejected")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("resinlot upgrade"));
    assert_eq!(w.snapshot(), before);
    w.cmd().arg("upgrade").assert().code(0);
    disposition(&w, "F2611-D05", "rejected")
        .assert()
        .code(0)
        .stdout(predicate::str::contains(
            "FW-000006  Brantwick Elastomers Ltd",
        ));
    w.cmd().arg("verify").assert().code(0);
}
