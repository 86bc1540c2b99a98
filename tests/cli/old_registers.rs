//! Registers written by earlier versions keep verifying (issue #13, "Records written by
//! earlier versions keep working").

use std::path::Path;

use crate::common::copy_dir;

/// Issue #13: the register written by main before the record-integrity work verifies as it is.
#[test]
fn register_from_before_issue_13_verifies_issue_13() {
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    copy_dir(&root.join("tests/registers/before-13"), dir.path());
    let out = assert_cmd::Command::cargo_bin("resinlot")
        .unwrap()
        .current_dir(dir.path())
        .arg("verify")
        .assert()
        .success();
    let text = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    for line in [
        "register/PB-4800.csv: 61 rows, intact",
        "register/PD-2000.csv: 62 rows, intact",
        "register/SPC-35.csv: 62 rows, intact",
        "register/certificates.csv: 8 rows, intact",
    ] {
        assert!(text.contains(line), "{line} missing from:\n{text}");
    }
}
