//! Anchors kept outside the trend files (issue #13, item 4) and the upgrade of a register
//! written before them ("Records written by earlier versions keep working").

use std::path::{Path, PathBuf};

use crate::common::{copy_dir, Workspace, GOOD};

/// Runs `verify` in `w`; returns the exit code and stdout.
fn verify(w: &Workspace) -> (i32, String) {
    let out = w.cmd().arg("verify").output().unwrap();
    (
        out.status.code().unwrap(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
    )
}

/// Removes the last line of a file, as `sed -i '$d'` does.
fn delete_last_line(p: &Path) {
    let text = std::fs::read_to_string(p).unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    lines.pop();
    std::fs::write(
        p,
        lines.iter().map(|l| format!("{l}\n")).collect::<String>(),
    )
    .unwrap();
}

/// A workspace holding a copy of the register written before issue #13 (the fixture itself is
/// never written).
fn before_13() -> Workspace {
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    copy_dir(&root.join("tests/registers/before-13"), dir.path());
    Workspace { dir }
}

fn fixture(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/registers/before-13")
        .join(rel)
}

fn sha256(p: &Path) -> String {
    use sha2::Digest;
    resinlot::record::trend_file::hex(&sha2::Sha256::digest(std::fs::read(p).unwrap()))
}

/// A PD-2000 lot for the before-13 register (invented values within the demo spec).
const PD_LOT: &str = "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,water\n\
F2611-D99,PD-2000,2026-11-30,0.41,55.60,536,0.024\n";

#[test]
fn deleting_the_last_row_is_detected_issue_13() {
    let w = Workspace::new();
    w.write("lots.csv", GOOD);
    w.release("lots.csv").assert().success();
    assert!(w.path("register/heads.csv").is_file());
    assert_eq!(verify(&w).0, 0);
    delete_last_line(&w.path("register/TP-2000.csv"));
    let (code, text) = verify(&w);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("register/TP-2000.csv:4"), "{text}");
    assert!(text.contains("BROKEN: row 3 is missing"), "{text}");
    assert!(
        text.contains("register/heads.csv:2 records 3 rows"),
        "{text}"
    );
    // A later release of the shortened product is refused and writes nothing.
    w.write(
        "more.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nT26-104,TP-2000,2026-05-23,0.50,55.5,541\n",
    );
    let before = w.snapshot();
    let out = w.release("more.csv").assert().code(2);
    let err = String::from_utf8_lossy(&out.get_output().stderr).into_owned();
    assert!(err.contains("register/TP-2000.csv"), "{err}");
    assert!(err.contains("row 3 is missing"), "{err}");
    assert_eq!(w.snapshot(), before);
}

#[test]
fn deleting_the_last_row_and_its_head_is_detected_by_the_certificate_log_issue_13() {
    let w = Workspace::new();
    w.write("lots.csv", GOOD);
    w.release("lots.csv").assert().success();
    delete_last_line(&w.path("register/TP-2000.csv"));
    // The heads file forged by hand, chain and all, to agree with the shortened file.
    use resinlot::record::trend_file::{chain_hash, seed};
    let trend = std::fs::read_to_string(w.path("register/TP-2000.csv")).unwrap();
    let last_chain = trend.lines().last().unwrap().rsplit(',').next().unwrap();
    let heads = w.path("register/heads.csv");
    let text = std::fs::read_to_string(&heads).unwrap();
    let header = text.lines().next().unwrap();
    let body = format!("1,2026-12-10T00:00:00Z,TP-2000.csv,2,{last_chain}");
    let chain = chain_hash(&seed(header), &body);
    std::fs::write(&heads, format!("{header}\n{body},{chain}\n")).unwrap();
    let (code, text) = verify(&w);
    assert_eq!(code, 1, "{text}");
    assert!(
        text.contains("row 3 (lot 'T26-103') is missing: certificate"),
        "{text}"
    );
    assert!(text.contains("register/certificates.csv:4"), "{text}");
}

#[test]
fn the_heads_file_tampered_is_detected_issue_13() {
    let w = Workspace::new();
    w.write("lots.csv", GOOD);
    w.release("lots.csv").assert().success();
    let heads = w.path("register/heads.csv");
    let good = std::fs::read_to_string(&heads).unwrap();
    // An edited row breaks the heads file's own chain.
    std::fs::write(&heads, good.replacen(",3,", ",2,", 1)).unwrap();
    let (code, text) = verify(&w);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("register/heads.csv:2"), "{text}");
    assert!(text.contains("the chain value does not match"), "{text}");
    // A heads file that disagrees with the trend file: its only head removed.
    let header = good.lines().next().unwrap();
    std::fs::write(&heads, format!("{header}\n")).unwrap();
    let (code, text) = verify(&w);
    assert_eq!(code, 1, "{text}");
    assert!(
        text.contains("the file has 3 rows but register/heads.csv records no head for it"),
        "{text}"
    );
    // A lost heads file, where the certificate log keeps anchors, is a fault, not legacy.
    std::fs::remove_file(&heads).unwrap();
    let (code, text) = verify(&w);
    assert_eq!(code, 1, "{text}");
    assert!(text.contains("the heads file is missing"), "{text}");
    std::fs::write(&heads, good).unwrap();
    assert_eq!(verify(&w).0, 0);
}

#[test]
fn upgrade_of_the_fixture_verifies_naming_the_old_hash_issue_13() {
    let w = before_13();
    let old_sha = sha256(&fixture("register/certificates.csv"));
    let out = w.cmd().arg("upgrade").assert().success();
    let text = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    assert!(text.contains(&old_sha), "{text}");
    assert!(text.contains("register/heads.csv: started"), "{text}");
    // The old log is kept byte for byte beside the new one.
    assert_eq!(
        std::fs::read(w.path("register/certificates.csv.v1")).unwrap(),
        std::fs::read(fixture("register/certificates.csv")).unwrap()
    );
    // Layout v3 (issues #14-#17) widens the trend files: with the empty extension cells
    // taken out again, each is the fixture byte for byte (every row and chain value kept).
    for f in ["PB-4800.csv", "PD-2000.csv", "SPC-35.csv"] {
        let wide = std::fs::read_to_string(w.path(&format!("register/{f}"))).unwrap();
        assert_eq!(
            narrowed(&wide),
            std::fs::read_to_string(fixture(&format!("register/{f}"))).unwrap()
        );
        assert!(wide.lines().next().unwrap().contains(",notes,disposition,"));
    }
    let (code, text) = verify(&w);
    assert_eq!(code, 0, "{text}");
    for line in [
        "register/certificates.csv.v1: 8 rows, intact: the predecessor of register/certificates.csv",
        &format!("SHA-256 {old_sha}, as its layout row records"),
        "register/certificates.csv: 8 rows, intact",
        "register/heads.csv: 3 rows, intact",
        "register/PD-2000.csv: 62 rows, intact",
    ] {
        assert!(text.contains(line), "{line} missing from:\n{text}");
    }
    // A release after the upgrade keeps heads and anchors, and numbers on from FW-000008.
    w.write("lot.csv", PD_LOT);
    w.release("lot.csv").assert().success();
    let log = std::fs::read_to_string(w.path("register/certificates.csv")).unwrap();
    let last = log.lines().last().unwrap();
    assert!(last.contains(",FW-000009,F2611-D99,PD-2000,"), "{last}");
    assert!(last.contains(",63,"), "the anchor names row 63: {last}");
    assert_eq!(verify(&w).0, 0);
    // The predecessor changed afterwards is named.
    let pred = w.path("register/certificates.csv.v1");
    let bytes = std::fs::read(&pred).unwrap();
    std::fs::write(&pred, [bytes.as_slice(), b"\n"].concat()).unwrap();
    let (code, text) = verify(&w);
    assert_eq!(code, 1, "{text}");
    assert!(
        text.contains(&format!("not {old_sha} as the layout row records")),
        "{text}"
    );
}

#[test]
fn upgrade_runs_once_and_refuses_a_broken_register_issue_13() {
    let w = before_13();
    w.cmd().arg("upgrade").assert().success();
    let before = w.snapshot();
    let out = w.cmd().arg("upgrade").assert().success();
    let text = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    assert!(
        text.contains("already in the current layout: nothing to upgrade, nothing written"),
        "{text}"
    );
    assert_eq!(w.snapshot(), before);
    // A register that does not verify is not upgraded.
    let b = before_13();
    delete_last_line(&b.path("register/certificates.csv"));
    std::fs::write(
        b.path("register/PB-4800.csv"),
        std::fs::read_to_string(b.path("register/PB-4800.csv"))
            .unwrap()
            .replacen(",1.59,", ",1.58,", 1),
    )
    .unwrap();
    let before = b.snapshot();
    let out = b.cmd().arg("upgrade").assert().code(2);
    let err = String::from_utf8_lossy(&out.get_output().stderr).into_owned();
    assert!(err.contains("register/PB-4800.csv:2"), "{err}");
    assert!(err.contains("the record is not intact"), "{err}");
    assert_eq!(b.snapshot(), before);
}

#[test]
fn old_registers_still_read_and_append_without_upgrade_issue_13() {
    let w = before_13();
    let (code, text) = verify(&w);
    assert_eq!(code, 0, "{text}");
    assert!(
        text.contains("register/heads.csv: none: this register was written before heads were kept"),
        "{text}"
    );
    assert!(text.contains("`resinlot upgrade` adds them"), "{text}");
    w.write("lot.csv", PD_LOT);
    // Issue #15: a new row records who tested when, the login name and the spec's SHA-256,
    // which the earlier layout has no columns for, so the release is refused naming
    // `resinlot upgrade` and nothing is written (nothing is dropped silently); the old
    // register still reads and verifies as it is.
    let before = w.snapshot();
    let out = w.release("lot.csv").assert().code(2);
    let err = String::from_utf8_lossy(&out.get_output().stderr).into_owned();
    assert!(err.contains("resinlot upgrade"), "{err}");
    assert_eq!(w.snapshot(), before);
    let log = std::fs::read_to_string(w.path("register/certificates.csv")).unwrap();
    let old = std::fs::read_to_string(fixture("register/certificates.csv")).unwrap();
    assert!(log.starts_with(&old));
    assert!(!w.path("register/heads.csv").exists());
    let (code, text) = verify(&w);
    assert_eq!(code, 0, "{text}");
    assert!(
        text.contains("register/PD-2000.csv: 62 rows, intact"),
        "{text}"
    );
    assert!(
        text.contains("register/certificates.csv: 8 rows, intact"),
        "{text}"
    );
    // The upgrade carries the eight log rows over; the release then appends and numbers on.
    w.cmd().arg("upgrade").assert().success();
    w.release("lot.csv").assert().success();
    let log = std::fs::read_to_string(w.path("register/certificates.csv")).unwrap();
    assert!(log
        .lines()
        .last()
        .unwrap()
        .contains(",FW-000009,F2611-D99,"));
    let (code, text) = verify(&w);
    assert_eq!(code, 0, "{text}");
    assert!(
        text.contains("register/PD-2000.csv: 63 rows, intact"),
        "{text}"
    );
    assert!(
        text.contains("register/certificates.csv.v1: 8 rows, intact"),
        "{text}"
    );
}

#[test]
fn rows_appended_without_their_head_are_recorded_by_quarantine_issue_13() {
    let w = Workspace::new();
    w.write("lots.csv", GOOD);
    w.release("lots.csv").assert().success();
    w.write(
        "more.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nT26-104,TP-2000,2026-05-23,0.50,55.5,541\n",
    );
    w.release("more.csv").assert().success();
    // As if the second release had been killed after its row and before its head.
    delete_last_line(&w.path("register/heads.csv"));
    let (code, text) = verify(&w);
    assert_eq!(code, 1, "{text}");
    assert!(
        text.contains("BROKEN: rows 4 to 4 have no head in register/heads.csv"),
        "{text}"
    );
    assert!(
        text.contains("run with --quarantine to record their head"),
        "{text}"
    );
    let out = w.cmd().args(["verify", "--quarantine"]).assert().success();
    let text = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    assert!(text.contains("recorded its head at 4 rows"), "{text}");
    let log = std::fs::read_to_string(w.path("register/quarantine.log")).unwrap();
    assert!(
        log.contains("recorded the head of register/TP-2000.csv at 4 rows"),
        "{log}"
    );
    assert_eq!(verify(&w).0, 0);
}

/// A widened trend file with its nine (empty) extension cells removed from every line.
fn narrowed(wide: &str) -> String {
    let ext = ",disposition,concession_ref,concession_customer,analysts,tested_from,tested_to,decided_at,recorded_by,spec_sha256";
    let mut out = String::new();
    for (i, line) in wide.lines().enumerate() {
        if i == 0 {
            out.push_str(&line.replace(ext, ""));
        } else {
            let k = line.rfind(',').unwrap();
            assert_eq!(
                &line[k - 9..k],
                ",,,,,,,,,",
                "extension cells not empty: {line}"
            );
            out.push_str(&line[..k - 9]);
            out.push_str(&line[k..]);
        }
        out.push('\n');
    }
    out
}

/// The register as the build before layout v3 wrote it (issues #14-#17).
fn before_14() -> Workspace {
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    copy_dir(&root.join("tests/registers/before-14"), dir.path());
    Workspace { dir }
}

/// Layout v3 (issues #14, #15, #16, #17): a register written before the extension columns
/// verifies as it is, and `upgrade` widens its trend files and certificate log keeping every
/// row, chain value, head and anchor, so `verify` (and its certificates) still pass; running
/// the upgrade again does nothing.
#[test]
fn upgrade_widens_a_register_from_before_layout_v3_issue_14() {
    let w = before_14();
    let fixture14 = |rel: &str| {
        std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR"))
                .join("tests/registers/before-14")
                .join(rel),
        )
        .unwrap()
    };
    assert_eq!(verify(&w).0, 0);
    let heads = std::fs::read(w.path("register/heads.csv")).unwrap();
    let out = w.cmd().arg("upgrade").assert().success();
    let text = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    for f in [
        "PB-4800.csv",
        "PD-2000.csv",
        "SPC-35.csv",
        "certificates.csv",
    ] {
        assert!(
            text.contains(&format!("register/{f}: widened to the current layout")),
            "{f}: {text}"
        );
    }
    for f in ["PB-4800.csv", "PD-2000.csv", "SPC-35.csv"] {
        let wide = std::fs::read_to_string(w.path(&format!("register/{f}"))).unwrap();
        assert_eq!(narrowed(&wide), fixture14(&format!("register/{f}")));
    }
    let log = std::fs::read_to_string(w.path("register/certificates.csv")).unwrap();
    assert!(log.starts_with(
        "seq,issued_at,number,lot,product,customer,customer_name,file,sha256,supersedes,reason,trend_row,trend_chain,event,po,quantity,json_sha256,cause,chain\n"
    ));
    assert_eq!(std::fs::read(w.path("register/heads.csv")).unwrap(), heads);
    let (code, text) = verify(&w);
    assert_eq!(code, 0, "{text}");
    assert!(
        text.contains("register/PD-2000.csv: 62 rows, intact"),
        "{text}"
    );
    for pdf in std::fs::read_dir(w.path("certificates")).unwrap() {
        let pdf = pdf.unwrap().path();
        w.cmd().arg("verify").arg(&pdf).assert().success();
    }
    let again = w.cmd().arg("upgrade").assert().success();
    assert!(String::from_utf8_lossy(&again.get_output().stdout).contains("nothing to upgrade"));
    // A release after the widening chains on from the kept heads.
    w.write("lot.csv", PD_LOT);
    w.release("lot.csv").assert().success();
    assert_eq!(verify(&w).0, 0);
}
