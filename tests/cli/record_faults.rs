//! The record survives ordinary mistakes and faults (issue #13): each case through the binary,
//! asserting the exit code, the message and that nothing changed.

use crate::common::{Workspace, GOOD};

/// Issue #13 item 15: a clock before 1970 (or after 9999) is refused before anything is written.
#[test]
fn clock_outside_1970_to_9999_is_refused_issue_13() {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    let before = w.snapshot();
    for epoch in ["-1", "253402300800"] {
        w.release("good.csv")
            .env("SOURCE_DATE_EPOCH", epoch)
            .assert()
            .code(2)
            .stderr(predicates::str::contains(
                "SOURCE_DATE_EPOCH: ".to_string() + epoch + " is outside the supported date range",
            ));
        assert_eq!(before, w.snapshot(), "nothing may change");
    }
}

/// Issue #13 item 1: `trend --chart`/`--report` aimed at the register, the specs or a
/// certificate is refused with exit 2 and the target is unchanged; nothing else is written.
#[test]
fn trend_outputs_never_replace_the_record_issue_13() {
    let w = Workspace::with_good_released(true);
    let cert = std::fs::read_dir(w.path("certificates"))
        .unwrap()
        .next()
        .unwrap()
        .unwrap()
        .path();
    let cert_rel = format!(
        "certificates/{}",
        cert.file_name().unwrap().to_string_lossy()
    );
    let before = w.snapshot();
    for (flag, target) in [
        ("--chart", "register/TP-2000.csv"),
        ("--report", "register/certificates.csv"),
        ("--chart", cert_rel.as_str()),
        ("--report", "specs/tp-2000-b.toml"),
    ] {
        let mut args = vec!["trend", "TP-2000", flag, target];
        if flag == "--chart" {
            args.extend(["--property", "acid_value"]);
        }
        w.cmd()
            .args(&args)
            .assert()
            .code(2)
            .stderr(predicates::str::contains("into the record folder"));
        assert_eq!(before, w.snapshot(), "{flag} {target}: nothing may change");
    }
    // A chart and a report elsewhere are written, and written again over their own output;
    // a file of someone else's is not replaced.
    for _ in 0..2 {
        w.cmd()
            .args(["trend", "--product", "TP-2000", "--property", "acid_value"])
            .args(["--chart", "out/av.svg", "--report", "out/tp.pdf"])
            .assert()
            .code(predicates::ord::lt(2));
    }
    w.write("mine.svg", "<svg>my drawing</svg>");
    w.cmd()
        .args([
            "trend",
            "TP-2000",
            "--property",
            "acid_value",
            "--chart",
            "mine.svg",
        ])
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "not an SVG chart written by resinlot",
        ));
    assert_eq!(
        std::fs::read_to_string(w.path("mine.svg")).unwrap(),
        "<svg>my drawing</svg>"
    );
}

/// Issue #13 item 16: path-like or reserved product codes are refused by `trend` and `find`.
#[test]
fn path_like_and_reserved_product_codes_are_refused_issue_13() {
    let w = Workspace::with_good_released(true);
    for args in [
        vec!["trend", "../register/TP-2000"],
        vec!["trend", "certificates"],
        vec!["find", "--product", "/etc/passwd"],
        vec!["find", "heads"],
    ] {
        w.cmd()
            .args(&args)
            .assert()
            .code(2)
            .stderr(predicates::str::contains("not a usable product code"));
    }
}

/// Issue #13 item 1 (review): a certificate issued into another folder is neither inside a
/// default record folder nor a report, so `trend --report` onto it is refused either way.
#[test]
fn a_certificate_elsewhere_is_never_taken_for_a_report_issue_13() {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    w.release("good.csv")
        .args(["--certificates", "out/certs"])
        .assert()
        .code(0);
    let cert = std::fs::read_dir(w.path("out/certs"))
        .unwrap()
        .find_map(|e| {
            let p = e.unwrap().path();
            (p.extension()? == "pdf").then_some(p)
        })
        .unwrap();
    let before = std::fs::read(&cert).unwrap();
    // Not named as the certificates folder: the stamp check refuses it.
    w.cmd()
        .args(["trend", "TP-2000", "--report"])
        .arg(&cert)
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "not a PDF report written by resinlot",
        ));
    // Named as the certificates folder: the folder check refuses it.
    w.cmd()
        .args([
            "trend",
            "TP-2000",
            "--certificates",
            "out/certs",
            "--report",
        ])
        .arg(&cert)
        .assert()
        .code(2)
        .stderr(predicates::str::contains("into the record folder"));
    assert_eq!(before, std::fs::read(&cert).unwrap());
}

/// Issue #13 item 6 (review): the approver, a retest reason, a purchase order and a quantity
/// are one printable line without direction overrides, like every other text of the record.
#[test]
fn flag_texts_refuse_direction_overrides_issue_13() {
    let w = Workspace::with_good_released(true);
    w.write("more.csv", &GOOD.replace("T26-10", "T26-20"));
    let before = w.snapshot();
    w.cmd()
        .args(["release", "more.csv", "--approver", "QC \u{202E}rosivrepuS"])
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "--approver: the approver name cannot be used",
        ));
    for (flag, what) in [("--po", "po"), ("--quantity", "quantity")] {
        w.cmd()
            .args([
                "certify",
                "T26-101",
                "--customer",
                "northwind",
                flag,
                "12\u{202E}34",
            ])
            .assert()
            .code(2)
            .stderr(predicates::str::contains(format!(
                "{flag}: the {what} cannot be used"
            )));
    }
    assert_eq!(before, w.snapshot(), "nothing may change");
}

/// Review of issue #13: in a `--retest --reason` run that also records a new lot, only the
/// retested lot's certificate carries the reason and supersedes anything.
#[test]
fn a_retest_reason_stays_with_the_retested_lot_issue_13() {
    let w = Workspace::with_good_released(true);
    let retest = GOOD.replace(
        "T26-101,TP-2000,2026-05-02,0.52",
        "T26-101,TP-2000,2026-05-02,0.61",
    ) + "T26-104,TP-2000,2026-05-20,0.50,55.5,541\n";
    w.write("retest.csv", &retest);
    w.release("retest.csv")
        .args(["--retest", "--reason", "re-titrated"])
        .assert()
        .code(0);
    let log = std::fs::read_to_string(w.path("register/certificates.csv")).unwrap();
    let mut rdr = csv::Reader::from_reader(log.as_bytes());
    let headers = rdr.headers().unwrap().clone();
    let col = |name: &str| headers.iter().position(|h| h == name).unwrap();
    let rows: Vec<csv::StringRecord> = rdr.records().map(Result::unwrap).collect();
    // The lot's last issue row (issue #14 adds event rows, e.g. "superseded", after it).
    let row_of = |lot: &str| {
        rows.iter()
            .rev()
            .find(|r| &r[col("lot")] == lot && r[col("event")].is_empty())
            .unwrap()
            .clone()
    };
    let retested = row_of("T26-101");
    assert_eq!(&retested[col("reason")], "re-titrated");
    assert_eq!(&retested[col("supersedes")], "FW-000001");
    let new = row_of("T26-104");
    assert_eq!(&new[col("reason")], "", "{log}");
    assert_eq!(&new[col("supersedes")], "", "{log}");
    w.cmd().arg("verify").assert().code(0);
}

/// Review of issue #13: `release --dry-run` applies the same planning rules as the release
/// (here: changed results of a recorded lot without --retest) and writes nothing.
#[test]
fn a_dry_run_refuses_what_the_release_would_issue_13() {
    let w = Workspace::with_good_released(false);
    w.write(
        "changed.csv",
        &GOOD.replace(
            "T26-101,TP-2000,2026-05-02,0.52",
            "T26-101,TP-2000,2026-05-02,0.61",
        ),
    );
    let before = w.snapshot();
    for dry in [true, false] {
        let mut c = w.release("changed.csv");
        c.arg("--no-certificates");
        if dry {
            c.arg("--dry-run");
        }
        c.assert()
            .code(2)
            .stderr(predicates::str::contains("T26-101"))
            .stderr(predicates::str::contains("--retest"));
    }
    assert_eq!(before, w.snapshot(), "nothing may change");
    // On a fresh workspace a dry run creates no trend file.
    let fresh = Workspace::new();
    fresh.write("good.csv", GOOD);
    fresh.release("good.csv").arg("--dry-run").assert().code(0);
    assert!(!fresh.path("register/TP-2000.csv").exists());
}
