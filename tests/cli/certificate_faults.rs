//! Certificates survive faults and races (issue #13, items 2, 6, 7, 8 and 9): each case through
//! the binary, asserting the exit code, the message, and what `verify` says afterwards.
//!
//! Kills and full disks are not provoked: each test builds by hand the exact state such a
//! fault leaves (a `.part` file, a row without its certificate, an unlogged PDF), which is
//! what the binary must then detect and repair.

use std::io::BufRead;
use std::time::Duration;

use crate::common::{Workspace, GOOD};
use predicates::prelude::*;
use resinlot::record::trend_file::{self, Wait};

/// A workspace with three released lots of TP-2000 and their internal certificates
/// FW-000001 to FW-000003.
fn released() -> Workspace {
    let w = Workspace::new();
    std::fs::remove_dir_all(w.path("certificates")).ok();
    w.write("good.csv", GOOD);
    w.release("good.csv").assert().code(0);
    w
}

/// `certify LOT --customer northwind`.
fn certify(w: &Workspace, lot: &str) -> assert_cmd::Command {
    let mut c = w.cmd();
    c.args(["certify", lot, "--customer", "northwind"]);
    c
}

/// `verify`, expecting `code`; returns stdout.
fn verify(w: &Workspace, args: &[&str], code: i32) -> String {
    let out = w.cmd().arg("verify").args(args).assert().code(code);
    String::from_utf8(out.get_output().stdout.clone()).unwrap()
}

/// Issue #13 item 2: `certify` reads the lot's status under the trend file's lock. While a
/// retest holds that lock, certify waits; the retest rejects the lot; certify then refuses
/// (exit 1) instead of certifying the superseded row.
#[test]
fn certify_decides_under_the_trend_lock_and_sees_a_concurrent_rejection_issue_13() {
    let w = released();
    let wait = Wait {
        timeout: Duration::from_secs(10),
    };
    // The test plays the retest: it holds the trend file's lock as `release` does.
    let mut locked = trend_file::lock(&w.path("register/TP-2000.csv"), &[], &[], wait).unwrap();
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("resinlot"))
        .current_dir(w.dir.path())
        .env("SOURCE_DATE_EPOCH", "1796860800")
        .args(["certify", "T26-101", "--customer", "northwind"])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let mut stderr = std::io::BufReader::new(child.stderr.take().unwrap());
    let mut first = String::new();
    stderr.read_line(&mut first).unwrap();
    assert!(
        first.contains("waiting for another release to finish writing"),
        "certify must wait for the trend file's lock: {first}"
    );
    // The retest row, as `release --retest` writes it: same lot, now rejected.
    let columns = locked.trend.columns.clone();
    let row = locked.trend.lot_rows("T26-101")[0].clone();
    let seq = row.cells[0].clone();
    let cells: Vec<(&str, String)> = columns
        .iter()
        .zip(&row.cells)
        .filter(|(c, _)| *c != "seq" && *c != "chain")
        .map(|(c, v)| {
            let v = match c.as_str() {
                "status" => "rejected".to_string(),
                "supersedes" => seq.clone(),
                "reason" => "re-titrated".to_string(),
                _ => v.clone(),
            };
            (c.as_str(), v)
        })
        .collect();
    locked.append(&cells).unwrap();
    locked.sync().unwrap();
    drop(locked);
    let out = child.wait_with_output().unwrap();
    let mut rest = String::new();
    std::io::Read::read_to_string(&mut stderr, &mut rest).unwrap();
    assert_eq!(out.status.code(), Some(1), "{rest}");
    assert!(
        rest.contains(
            "lot T26-101 is rejected: a customer certificate is issued only for released lots"
        ),
        "{rest}"
    );
    assert!(
        common_pdfs(&w).len() == 3,
        "no customer certificate was written"
    );
    let v = verify(&w, &[], 0);
    assert!(v.contains("The record is intact."), "{v}");
}

fn common_pdfs(w: &Workspace) -> Vec<std::path::PathBuf> {
    crate::common::pdfs(&w.path("certificates"))
}

/// Issue #13 item 6: text fields of customer files and results cells are checked with the one
/// printable-text rule: a right-to-left override in a customer's name or a results cell is
/// refused with exit 2 naming file and field; nothing is written and `verify` passes.
#[test]
fn direction_overrides_in_customers_and_results_are_refused_issue_13() {
    let w = released();
    let customer = w.path("specs/customers/northwind.toml");
    let text = std::fs::read_to_string(&customer).unwrap();
    w.write(
        "specs/customers/northwind.toml",
        &text.replace("Northwind & Sons", "Northwind \u{202E}snoS &"),
    );
    let before = w.snapshot();
    certify(&w, "T26-101")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("northwind.toml: name"))
        .stderr(predicate::str::contains("reverses the direction"));
    w.write(
        "specs/customers/northwind.toml",
        &text.replace("Shelf life 12 months", "Shelf life\\u0007 12 months"),
    );
    certify(&w, "T26-101")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("products.TP-2000.statements[1]"))
        .stderr(predicate::str::contains("control character"));
    w.write("specs/customers/northwind.toml", &text);
    w.write(
        "bidi.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n\
         T26-104,TP-2000\u{202E},2026-05-20,0.50,55.5,540\n",
    );
    let before_release = w.snapshot();
    w.release("bidi.csv")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("bidi.csv:2, column 'product'"))
        .stderr(predicate::str::contains("reverses the direction"));
    assert_eq!(before_release, w.snapshot(), "nothing may change");
    assert_eq!(
        before.len(),
        before_release.len() - 1,
        "only bidi.csv was added"
    );
    let v = verify(&w, &[], 0);
    assert!(v.contains("The record is intact."), "{v}");
}
