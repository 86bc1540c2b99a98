//! `resinlot demo DIR` never deletes what it did not write (issue #13 item 21): a demo
//! workspace that a later real release or the user added to is refused, naming the files.

use predicates::prelude::*;

fn cmd(dir: &std::path::Path) -> assert_cmd::Command {
    let mut c = assert_cmd::Command::cargo_bin("resinlot").unwrap();
    c.current_dir(dir).env("SOURCE_DATE_EPOCH", "1796860800");
    c
}

#[test]
fn demo_refuses_to_rebuild_over_a_later_release_issue_13() {
    let d = tempfile::tempdir().unwrap();
    cmd(d.path()).args(["demo", "ws"]).assert().code(0);
    let ws = d.path().join("ws");
    // A real release made in the demo workspace afterwards (invented test lot), and a file of
    // the user's own.
    std::fs::write(
        ws.join("new-lots.csv"),
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,water\n\
         F2612-D01,PD-2000,2026-12-01,0.45,55.6,540,0.025\n",
    )
    .unwrap();
    cmd(&ws)
        .args([
            "release",
            "new-lots.csv",
            "--approver",
            "QC Laboratory Supervisor",
        ])
        .assert()
        .code(0);
    let trend = std::fs::read(ws.join("register/PD-2000.csv")).unwrap();
    let certs_before = std::fs::read_dir(ws.join("certificates")).unwrap().count();
    std::fs::write(ws.join("outputs/my-notes.txt"), "keep me").unwrap();

    cmd(d.path())
        .args(["demo", "ws"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("register/PD-2000.csv (changed)"))
        .stderr(predicate::str::contains("new-lots.csv (added)"))
        .stderr(predicate::str::contains("outputs/my-notes.txt (added)"))
        .stderr(predicate::str::is_match(r"certificates/[^ ,]+\.pdf \(added\)").unwrap());

    assert_eq!(
        std::fs::read(ws.join("register/PD-2000.csv")).unwrap(),
        trend
    );
    assert_eq!(
        std::fs::read_dir(ws.join("certificates")).unwrap().count(),
        certs_before
    );
    assert_eq!(
        std::fs::read_to_string(ws.join("outputs/my-notes.txt")).unwrap(),
        "keep me"
    );
    assert!(ws.join("new-lots.csv").is_file());
}
