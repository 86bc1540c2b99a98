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
    // And its head, as `release` records it while it still holds the trend file's lock.
    resinlot::record::heads::HeadsLog::open_behind(&w.path("register"), &locked.trend)
        .unwrap()
        .record(std::iter::once(&locked.trend), "2026-12-09T00:00:00Z")
        .unwrap();
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

/// One more lot of TP-2000 (invented values), as a results file.
fn lot(id: &str, day: u32) -> String {
    format!(
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n\
         {id},TP-2000,2026-05-{day:02},0.50,55.5,540\n"
    )
}

/// The bytes of a certificate that was never logged (an issued PDF with a marker, so that its
/// SHA-256 is its own).
fn other_pdf(w: &Workspace) -> Vec<u8> {
    let bytes = std::fs::read(w.path("certificates/T26-101_FW-000001.pdf")).unwrap();
    [bytes.as_slice(), b"%not logged\n"].concat()
}

/// Issue #13 item 7: a trend row whose internal certificate was interrupted is named by
/// `verify` and completed by running the release again; stray parts are removed by
/// `verify --quarantine`; a dangling symbolic link at the certificate's path refuses the
/// release before anything is written.
///
/// The states are built by hand, as an interruption leaves them: the row appended (here with
/// `--no-certificates`) and its certificate still in its `.part` file, not logged (a kill
/// before the rename), or linked to its final name but not logged (a kill or a full disk
/// before the log row).
#[test]
fn a_row_without_its_internal_certificate_is_named_and_completed_issue_13() {
    let w = released();
    w.write("lot4.csv", &lot("T26-104", 20));
    w.write("lot5.csv", &lot("T26-105", 21));
    for f in ["lot4.csv", "lot5.csv"] {
        w.release(f).arg("--no-certificates").assert().code(0);
    }
    let pdf = other_pdf(&w);
    let part4 = w.write_bytes("certificates/T26-104_FW-000004.pdf.TP-2000-4.part", &pdf);
    let final5 = w.path("certificates/T26-105_FW-000005.pdf");
    let part5 = w.write_bytes("certificates/T26-105_FW-000005.pdf.TP-2000-5.part", &pdf);
    std::fs::hard_link(&part5, &final5).unwrap();
    let v = verify(&w, &[], 1);
    for row in [
        "row 4 of register/TP-2000.csv (lot 'T26-104') has no internal certificate: T26-104_FW-000004.pdf is pending",
        "row 5 of register/TP-2000.csv (lot 'T26-105') has no internal certificate: T26-105_FW-000005.pdf is pending",
    ] {
        assert!(v.contains(row), "{v}");
    }
    assert_eq!(v.matches("BROKEN").count(), 2, "{v}");
    // Quarantine does not touch a pending certificate whose row was written.
    verify(&w, &["--quarantine"], 1);
    assert!(part4.exists() && part5.exists());
    // Running the release again completes every pending certificate of the product.
    let again = w.release("lot4.csv").assert().code(0);
    let out = String::from_utf8(again.get_output().stdout.clone()).unwrap();
    assert!(out.contains("already recorded, unchanged"), "{out}");
    for (lot, number) in [("T26-104", "FW-000004"), ("T26-105", "FW-000005")] {
        assert!(
            out.contains(&format!(
                "Completed internal certificate {number} of lot {lot}, left pending by an interrupted release"
            )),
            "{out}"
        );
    }
    assert!(!part4.exists() && !part5.exists());
    assert_eq!(
        std::fs::read(w.path("certificates/T26-104_FW-000004.pdf")).unwrap(),
        pdf
    );
    assert_eq!(std::fs::read(&final5).unwrap(), pdf);
    let v = verify(&w, &[], 0);
    assert!(v.contains("certificates.csv: 5 rows, intact"), "{v}");

    // Killed after staging, before the row: the part is stray, as is a temporary file.
    w.write("certificates/T26-106_FW-000006.pdf.TP-2000-6.part", "%PDF");
    w.write("certificates/.resinlot-Ab12Cd.part", "%PDF");
    let v = verify(&w, &[], 1);
    assert!(
        v.contains("stray pending certificate: row 6 of TP-2000's trend file was never written"),
        "{v}"
    );
    assert!(
        v.contains(".resinlot-Ab12Cd.part: BROKEN: stray temporary file"),
        "{v}"
    );
    assert_eq!(v.matches("BROKEN").count(), 2, "{v}");
    let q = verify(&w, &["--quarantine"], 0);
    assert!(q.contains("The record is intact."), "{q}");
    assert!(!w
        .path("certificates/T26-106_FW-000006.pdf.TP-2000-6.part")
        .exists());
    assert!(!w.path("certificates/.resinlot-Ab12Cd.part").exists());

    // A dangling symbolic link where the next certificate would go: its number is not issued
    // (the certificate goes to the next one, never through the link) and `verify` names it.
    let link = w.path("certificates/T26-106_FW-000006.pdf");
    std::os::unix::fs::symlink("nowhere.pdf", &link).unwrap();
    w.write("lot6.csv", &lot("T26-106", 22));
    w.release("lot6.csv")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("(FW-000007 to FW-000007)"));
    assert!(
        std::fs::read_link(&link).is_ok(),
        "the link is left as it was"
    );
    let v = verify(&w, &[], 1);
    assert!(
        v.contains("T26-106_FW-000006.pdf: BROKEN: a link or folder with a certificate's name"),
        "{v}"
    );
    assert_eq!(v.matches("BROKEN").count(), 1, "{v}");
    std::fs::remove_file(&link).unwrap();
    verify(&w, &[], 0);
}

/// Issue #13 item 7, a real fault: the disk fills while the certificate is written. The
/// process runs with a file-size limit (RLIMIT_FSIZE, 20 000 bytes: the trend file and log
/// stay below it, a certificate of about 40 kB does not), so writing the certificate fails as
/// on a full disk. The release is refused before its row is appended: no row without its
/// certificate, no part left behind, and `verify` passes.
#[test]
fn a_full_disk_while_writing_the_certificate_appends_no_row_issue_13() {
    use std::os::unix::process::CommandExt;
    let w = released();
    w.write("lot4.csv", &lot("T26-104", 20));
    let record = |w: &Workspace| {
        (
            std::fs::read(w.path("register/TP-2000.csv")).unwrap(),
            std::fs::read(w.path("register/certificates.csv")).unwrap(),
            std::fs::read_dir(w.path("certificates")).unwrap().count(),
        )
    };
    let before = record(&w);
    let mut c = std::process::Command::new(assert_cmd::cargo::cargo_bin("resinlot"));
    c.current_dir(w.dir.path())
        .env("SOURCE_DATE_EPOCH", "1796860800")
        .args([
            "release",
            "lot4.csv",
            "--approver",
            "QC Laboratory Supervisor",
        ]);
    // SAFETY: only async-signal-safe calls (signal, setrlimit) between fork and exec.
    unsafe {
        c.pre_exec(|| {
            libc::signal(libc::SIGXFSZ, libc::SIG_IGN);
            let limit = libc::rlimit {
                rlim_cur: 20_000,
                rlim_max: 20_000,
            };
            if libc::setrlimit(libc::RLIMIT_FSIZE, &limit) != 0 {
                return Err(std::io::Error::last_os_error());
            }
            Ok(())
        });
    }
    let out = c.output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("T26-104_FW-000004.pdf.TP-2000-4.part") && stderr.contains("writing"),
        "{stderr}"
    );
    assert_eq!(before, record(&w), "no row, no log entry, no file left");
    verify(&w, &[], 0);
    w.release("lot4.csv")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("(FW-000004 to FW-000004)"));
    verify(&w, &[], 0);
}

/// Issue #13 item 8: a certificate file left unlogged by a `certify` killed after the rename
/// keeps its number: the next certificate takes the one after, `verify` names the file, and
/// `verify --quarantine` logs it as void (then `verify FILE` says VOID).
#[test]
fn an_unlogged_certificate_keeps_its_number_and_is_voided_issue_13() {
    let w = released();
    let stray = w.write_bytes("certificates/T26-102_FW-000004.pdf", &other_pdf(&w));
    let v = verify(&w, &[], 1);
    assert!(
        v.contains("T26-102_FW-000004.pdf: BROKEN: certificate file not in the certificate log"),
        "{v}"
    );
    assert_eq!(v.matches("BROKEN").count(), 1, "{v}");
    certify(&w, "T26-101")
        .assert()
        .code(0)
        .stdout(predicate::str::contains(
            "Certificate FW-000005 for lot T26-101",
        ));
    let q = verify(&w, &["--quarantine"], 0);
    assert!(
        q.contains("logged certificates/T26-102_FW-000004.pdf as void: certificate number FW-000004 stays used"),
        "{q}"
    );
    assert!(q.contains("The record is intact."), "{q}");
    w.cmd()
        .args(["verify", "certificates/T26-102_FW-000004.pdf"])
        .assert()
        .code(1)
        .stdout(predicate::str::contains(
            "VOID: number FW-000004 was logged as void",
        ));
    w.cmd()
        .args(["lookup", "T26-102"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("FW-000004  VOID"));
    assert!(stray.exists(), "the file is kept");
    certify(&w, "T26-103")
        .assert()
        .code(0)
        .stdout(predicate::str::contains(
            "Certificate FW-000006 for lot T26-103",
        ));
    verify(&w, &[], 0);
}

/// Issue #13 item 9: with the certificate log gone and certificates present, nothing is
/// issued (exit 2, nothing written) and `verify` names the missing log.
#[test]
fn a_missing_certificate_log_stops_numbering_issue_13() {
    let w = released();
    std::fs::remove_file(w.path("register/certificates.csv")).unwrap();
    w.write("lot4.csv", &lot("T26-104", 20));
    let before = w.snapshot();
    let missing = "the certificate log is missing, but 3 certificate file(s) are in certificates";
    certify(&w, "T26-101")
        .assert()
        .code(2)
        .stderr(predicate::str::contains(missing))
        .stderr(predicate::str::contains(
            "Restore the certificate log from backup",
        ));
    w.release("lot4.csv")
        .assert()
        .code(2)
        .stderr(predicate::str::contains(missing));
    assert_eq!(before, w.snapshot(), "nothing may change");
    let v = verify(&w, &[], 1);
    assert!(
        v.contains("register/certificates.csv: BROKEN: the certificate log is missing, but 3 certificate file(s)"),
        "{v}"
    );
    assert_eq!(v.matches("BROKEN").count(), 1, "{v}");
}
