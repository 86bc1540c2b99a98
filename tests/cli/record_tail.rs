//! The end of the record (issue #13): torn tails, missing line ends, bytes that are not UTF-8,
//! an interrupted quarantine, and the inputs that must be refused before anything is written.
//! Each case through the binary, asserting the exit code, the message, and what `verify` says.

use std::path::PathBuf;

use crate::common::{Workspace, GOOD};
use predicates::prelude::*;

/// Two more TP-2000 lots (invented values).
const MORE: &str = "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n\
T26-104,TP-2000,2026-05-23,0.50,55.6,536\n\
T26-105,TP-2000,2026-05-30,0.47,55.8,529\n";

fn verify(w: &Workspace) -> assert_cmd::assert::Assert {
    w.cmd().args(["verify", "--register", "register"]).assert()
}

fn quarantine(w: &Workspace) -> assert_cmd::assert::Assert {
    w.cmd()
        .args(["verify", "--register", "register", "--quarantine"])
        .assert()
}

/// Files in the register folder whose name holds `.torn-`.
fn side_files(w: &Workspace) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(w.path("register"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.to_string_lossy().contains(".torn-"))
        .collect();
    v.sort();
    v
}

/// Issue #13 item 3: a complete, chain-valid last row that only lacks its line feed is not
/// torn: release refuses and names the repair, quarantine restores the line end and moves
/// nothing.
#[test]
fn a_complete_last_row_without_line_end_gets_it_back_issue_13() {
    let w = Workspace::with_good_released(false);
    let p = w.path("register/TP-2000.csv");
    let whole = std::fs::read(&p).unwrap();
    std::fs::write(&p, &whole[..whole.len() - 1]).unwrap();
    let before = w.snapshot();
    verify(&w)
        .code(1)
        .stdout(predicate::str::contains(
            "TP-2000.csv:4 (byte ",
        ))
        .stdout(predicate::str::contains(
            ", lot 'T26-103'): BROKEN: the last row is complete but lacks its line end (run with --quarantine to restore the line end)",
        ));
    w.write("more.csv", MORE);
    let before_more = w.snapshot();
    w.release("more.csv")
        .arg("--no-certificates")
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "Run `resinlot verify --quarantine --register register` to restore the line end",
        ));
    assert_eq!(
        before_more,
        w.snapshot(),
        "a refused release writes nothing"
    );
    assert_eq!(before.len() + 1, w.snapshot().len());
    quarantine(&w).code(0).stdout(predicate::str::contains(
        "the last row was complete; restored its missing line end",
    ));
    assert_eq!(
        std::fs::read(&p).unwrap(),
        whole,
        "the row is kept as it was"
    );
    assert!(side_files(&w).is_empty(), "nothing is moved aside");
    let log = std::fs::read_to_string(w.path("register/quarantine.log")).unwrap();
    assert!(log.contains("restored the missing line end"), "{log}");
    verify(&w)
        .code(0)
        .stdout(predicate::str::contains("TP-2000.csv: 3 rows, intact"));
}

/// Issue #13 item 5: a write torn inside a UTF-8 character ("Jürg" cut after its first byte)
/// is a torn tail like any other: verify names it, release names the repair, quarantine works.
#[test]
fn a_tail_cut_inside_a_utf8_character_is_quarantined_issue_13() {
    let w = Workspace::with_good_released(false);
    let p = w.path("register/TP-2000.csv");
    let whole = std::fs::read(&p).unwrap();
    let mut fragment = "4,2026-12-10T00:00:00Z,T26-104,TP-2000,2026-05-23,C,released,Jürg"
        .as_bytes()
        .to_vec();
    fragment.pop(); // the second byte of "ü"
    let torn = [whole.as_slice(), &fragment].concat();
    std::fs::write(&p, &torn).unwrap();
    verify(&w)
        .code(1)
        .stdout(predicate::str::contains(format!(
            "TP-2000.csv:5 (byte {}, lot 'T26-104'): BROKEN: the last line is incomplete ({} bytes, no line end): an interrupted write (run with --quarantine to move it aside)",
            whole.len(),
            fragment.len()
        )))
        .stdout(predicate::str::contains("UTF-8").not());
    w.write("more.csv", MORE);
    let before = w.snapshot();
    w.release("more.csv")
        .arg("--no-certificates")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("interrupted write"))
        .stderr(predicate::str::contains("resinlot verify --quarantine"))
        .stderr(predicate::str::contains("UTF-8").not());
    assert_eq!(before, w.snapshot());
    quarantine(&w)
        .code(0)
        .stdout(predicate::str::contains("moved the torn last line"));
    assert_eq!(std::fs::read(&p).unwrap(), whole);
    let sides = side_files(&w);
    assert_eq!(sides.len(), 1);
    assert_eq!(
        std::fs::read(&sides[0]).unwrap(),
        fragment,
        "kept byte for byte"
    );
    verify(&w).code(0);
    w.release("more.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    verify(&w)
        .code(0)
        .stdout(predicate::str::contains("TP-2000.csv: 5 rows, intact"));
}

/// Issue #13 item 13: a torn tail in one product's trend file refuses only that product;
/// releases of every other product go on, and the refusal names `resinlot verify --quarantine`.
#[test]
fn a_torn_tail_refuses_only_its_own_product_issue_13() {
    let w = Workspace::new();
    // A second product (test fixture, invented): the TP-2000 spec under another code.
    let spec = std::fs::read_to_string(w.path("specs/tp-2000-c.toml"))
        .unwrap()
        .replace("code = \"TP-2000\"", "code = \"TQ-3000\"");
    w.write("specs/tq-3000.toml", &spec);
    w.write(
        "tq.csv",
        &GOOD.replace("TP-2000", "TQ-3000").replace("T26-", "Q26-"),
    );
    w.release("tq.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    let q = w.path("register/TQ-3000.csv");
    let mut f = std::fs::OpenOptions::new().append(true).open(&q).unwrap();
    std::io::Write::write_all(&mut f, b"4,2026-12-10T00:00:00Z,Q26-1").unwrap();
    w.write("good.csv", GOOD);
    w.release("good.csv")
        .arg("--no-certificates")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("3 lots: 3 released"));
    w.write(
        "more-q.csv",
        &MORE.replace("TP-2000", "TQ-3000").replace("T26-", "Q26-"),
    );
    let before = w.snapshot();
    w.release("more-q.csv")
        .arg("--no-certificates")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("TQ-3000.csv:5"))
        .stderr(predicate::str::contains(
            "Run `resinlot verify --quarantine --register register` to move the fragment aside",
        ));
    assert_eq!(before, w.snapshot());
    verify(&w)
        .code(1)
        .stdout(predicate::str::contains("TP-2000.csv: 3 rows, intact"))
        .stdout(predicate::str::contains("TQ-3000.csv:5 (byte "))
        .stdout(predicate::str::contains("BROKEN").count(1));
    quarantine(&w).code(0);
    w.release("more-q.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    verify(&w).code(0);
}

/// Issue #13 item 14: `verify --quarantine` killed after writing the side file and before
/// truncating leaves the side file and the torn tail; running it again finishes the job (the
/// state is built by hand, exactly as the interrupted run leaves it).
#[test]
fn an_interrupted_quarantine_finishes_when_run_again_issue_13() {
    let w = Workspace::with_good_released(false);
    let p = w.path("register/TP-2000.csv");
    let whole = std::fs::read(&p).unwrap();
    let fragment = b"4,2026-12-10T00:00:00Z,T26-104,TP-";
    std::fs::write(&p, [whole.as_slice(), fragment].concat()).unwrap();
    let side = w.path(&format!("register/TP-2000.csv.torn-{}", whole.len()));
    std::fs::write(&side, fragment).unwrap();
    quarantine(&w)
        .code(0)
        .stdout(predicate::str::contains(format!(
            "moved the torn last line to register/TP-2000.csv.torn-{}",
            whole.len()
        )))
        .stdout(predicate::str::contains("already exists").not());
    assert_eq!(std::fs::read(&p).unwrap(), whole);
    assert_eq!(side_files(&w), vec![side.clone()]);
    assert_eq!(std::fs::read(&side).unwrap(), fragment);
    verify(&w)
        .code(0)
        .stdout(predicate::str::contains("The record is intact."));
    // Nothing left to repair: a further run changes nothing.
    let before = w.snapshot();
    quarantine(&w).code(0);
    assert_eq!(before, w.snapshot());
}

/// Issue #13 item 18: a file that is not UTF-8 is reported BROKEN at its line (exit 1) and
/// the other files are still checked.
#[test]
fn a_file_that_is_not_utf8_is_broken_and_the_rest_are_checked_issue_13() {
    let w = Workspace::with_good_released(false);
    let good = std::fs::read(w.path("register/TP-2000.csv")).unwrap();
    // A copy of the trend file under another product, one lot id retyped in Latin-1.
    let text = String::from_utf8(good.clone()).unwrap();
    let row3_at = text.match_indices('\n').nth(2).unwrap().0 + 1;
    let mut latin1 = good.clone();
    let lot_at = row3_at + text[row3_at..].find("T26-103").unwrap();
    latin1[lot_at] = 0xDC; // "Ü" in ISO 8859-1
    std::fs::write(w.path("register/AA-1000.csv"), &latin1).unwrap();
    let before = w.snapshot();
    verify(&w)
        .code(1)
        .stdout(predicate::str::contains(format!(
            "AA-1000.csv:4 (byte {row3_at}, lot '\u{FFFD}26-103'): BROKEN: the line is not valid UTF-8 (byte {lot_at})"
        )))
        .stdout(predicate::str::contains("TP-2000.csv: 3 rows, intact"))
        .stdout(predicate::str::contains("BROKEN").count(1));
    assert_eq!(before, w.snapshot());
}

/// Issue #13 item 12: `--max-bytes` holds for files with no size up front: `/dev/zero` and a
/// FIFO are read only up to the limit, then refused.
#[test]
fn max_bytes_is_counted_while_reading_issue_13() {
    let w = Workspace::with_good_released(false);
    let before = w.snapshot();
    w.release("/dev/zero")
        .args(["--max-bytes", "1000"])
        .timeout(std::time::Duration::from_secs(60))
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "/dev/zero: the file is more than 1000 bytes, over the limit of 1000 bytes",
        ))
        .stderr(predicate::str::contains("--max-bytes"));
    // A FIFO outside the workspace (a snapshot would block reading it), fed without end.
    let fifo_dir = tempfile::tempdir().unwrap();
    let fifo = fifo_dir.path().join("results.csv");
    let c_path = std::ffi::CString::new(fifo.to_str().unwrap()).unwrap();
    assert_eq!(unsafe { libc::mkfifo(c_path.as_ptr(), 0o600) }, 0);
    let feed = fifo.clone();
    std::thread::spawn(move || {
        // Blocks until the reader opens the FIFO; ends when the reader closes it (EPIPE).
        let mut f = std::fs::OpenOptions::new().write(true).open(feed).unwrap();
        let mut text =
            String::from("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n");
        for i in 0..200 {
            text.push_str(&format!("F{i:04},TP-2000,2026-05-02,0.52,55.4,540\n"));
        }
        while std::io::Write::write_all(&mut f, text.as_bytes()).is_ok() {}
    });
    w.release(fifo.to_str().unwrap())
        .args(["--max-bytes", "4096"])
        .timeout(std::time::Duration::from_secs(60))
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "the file is more than 4096 bytes, over the limit of 4096 bytes",
        ));
    assert_eq!(before, w.snapshot(), "nothing was written");
    verify(&w).code(0);
}

/// Issue #13 item 10: only plain decimals are numbers; "0.5_0", "5_30", "0_5" (which was read
/// as 5) and "1E2" are refused before anything is written.
#[test]
fn numbers_are_plain_decimals_only_issue_13() {
    let w = Workspace::with_good_released(false);
    let before = w.snapshot();
    for (av, ohv, visc, bad, column) in [
        ("0.5_0", "55.4", "540", "0.5_0", "acid_value"),
        ("0.52", "55.4", "5_30", "5_30", "viscosity"),
        ("0_5", "55.4", "540", "0_5", "acid_value"),
        ("0.52", "1E2", "540", "1E2", "hydroxyl_value"),
    ] {
        let file = format!(
            "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n\
             T26-110,TP-2000,2026-06-01,{av},{ohv},{visc}\n"
        );
        w.write("odd.csv", &file);
        let snap = w.snapshot();
        w.release("odd.csv")
            .assert()
            .code(2)
            .stderr(predicate::str::contains(format!(
                "odd.csv:2, column '{column}': '{bad}' is not a number"
            )))
            .stderr(predicate::str::contains("plain decimal number"));
        assert_eq!(snap, w.snapshot(), "{bad}: nothing may change");
    }
    // With --decimal-comma, "0,52" still reads and "0,5_2" does not.
    w.write(
        "comma.csv",
        "lot;product;manufactured;acid_value;hydroxyl_value;viscosity\n\
         T26-111;TP-2000;2026-06-01;0,5_2;55,4;540\n",
    );
    w.release("comma.csv")
        .arg("--decimal-comma")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("'0,5_2' is not a number"));
    std::fs::remove_file(w.path("odd.csv")).unwrap();
    std::fs::remove_file(w.path("comma.csv")).unwrap();
    assert_eq!(before, w.snapshot());
    verify(&w)
        .code(0)
        .stdout(predicate::str::contains("TP-2000.csv: 3 rows, intact"));
}

/// Issue #13 item 15: a time earlier than the last recorded row of the trend file being
/// appended to is refused before anything is written.
#[test]
fn a_clock_behind_the_last_row_is_refused_issue_13() {
    let w = Workspace::with_good_released(false); // rows recorded at 2026-12-10T00:00:00Z
    w.write("more.csv", MORE);
    let before = w.snapshot();
    w.release("more.csv")
        .env("SOURCE_DATE_EPOCH", "1790000000") // 2026-09-21T14:13:20Z
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "register/TP-2000.csv:4: the clock says 2026-09-21T14:13:20Z, earlier than 2026-12-10T00:00:00Z, when the file's last row was recorded",
        ))
        .stderr(predicate::str::contains("SOURCE_DATE_EPOCH"));
    assert_eq!(before, w.snapshot(), "nothing may change");
    // A rerun that writes nothing is not refused.
    w.release("good.csv")
        .env("SOURCE_DATE_EPOCH", "1790000000")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("3 already recorded, unchanged"));
    assert_eq!(before, w.snapshot());
    verify(&w).code(0);
}

/// Issue #13 item 22: a retest that changes the manufacture date, --reason without --retest,
/// duplicate wide rows differing only in temperature or analyst, and UTF-16 without a BOM are
/// each refused with what to do, and nothing is written.
#[test]
fn silent_changes_and_encodings_are_refused_issue_13() {
    let w = Workspace::with_good_released(false);
    // T26-101 retested with new results and a manufacture date moved by a day.
    w.write(
        "moved.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n\
         T26-101,TP-2000,2026-05-03,0.49,55.4,540\n",
    );
    w.write(
        "dup.csv",
        "lot,product,manufactured,viscosity,viscosity_temperature_c,analyst\n\
         T26-120,TP-2000,2026-06-01,540,60,AB\n\
         T26-120,TP-2000,2026-06-01,540,25,AB\n\
         T26-121,TP-2000,2026-06-01,540,60,AB\n\
         T26-121,TP-2000,2026-06-01,540,60,CD\n",
    );
    let dup_analyst = std::fs::read_to_string(w.path("dup.csv"))
        .unwrap()
        .replace("T26-120,TP-2000,2026-06-01,540,25,AB\n", "");
    w.write("dup-analyst.csv", &dup_analyst);
    let utf16: Vec<u8> = GOOD
        .replace("T26-", "U26-")
        .encode_utf16()
        .flat_map(u16::to_le_bytes)
        .collect();
    std::fs::write(w.path("utf16.csv"), utf16).unwrap();
    let before = w.snapshot();
    w.release("moved.csv")
        .args(["--retest", "--reason", "re-titrated"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "moved.csv:2, lot 'T26-101': manufacture date 2026-05-03 differs from 2026-05-02, recorded for this lot in register/TP-2000.csv (row 1)",
        ))
        .stderr(predicate::str::contains("enter 2026-05-02 in the results file"));
    w.release("moved.csv")
        .args(["--reason", "re-titrated"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "--reason: --reason was given without --retest, so it would be recorded nowhere",
        ))
        .stderr(predicate::str::contains("Add --retest"));
    w.release("dup.csv")
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "dup.csv:3, lot 'T26-120': the lot already appears on line 2 with a different measurement temperature",
        ))
        .stderr(predicate::str::contains("Keep one row per lot"));
    w.release("dup-analyst.csv")
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "dup-analyst.csv:4, lot 'T26-121': the lot already appears on line 3 with a different analyst ('AB' there, 'CD' here)",
        ));
    w.release("utf16.csv")
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "utf16.csv:1: the file is not valid UTF-8 text: it looks like UTF-16",
        ))
        .stderr(predicate::str::contains("CSV UTF-8"))
        .stderr(predicate::str::contains("lacks column").not());
    assert_eq!(before, w.snapshot(), "nothing may change");
    verify(&w)
        .code(0)
        .stdout(predicate::str::contains("TP-2000.csv: 3 rows, intact"));
}
