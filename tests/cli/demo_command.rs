//! `resinlot demo` and `resinlot init` (issue #9): the whole job in one command, rebuilt
//! safely, and a starter workspace.

use predicates::prelude::*;

fn cmd(dir: &std::path::Path) -> assert_cmd::Command {
    let mut c = assert_cmd::Command::cargo_bin("resinlot").unwrap();
    c.current_dir(dir).env("SOURCE_DATE_EPOCH", "1796860800");
    c
}

#[test]
fn demo_runs_the_whole_job_and_rebuilds_its_own_workspace() {
    let d = tempfile::tempdir().unwrap();
    cmd(d.path())
        .args(["demo", "ws"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains(
            "Every step behaved as the demo scenario intends.",
        ));
    let ws = d.path().join("ws");
    for f in [
        "register/PD-2000.csv",
        "register/certificates.csv",
        "outputs/pd-2000-trend.pdf",
        "outputs/pd-2000-hydroxyl-value.svg",
        "outputs/pd-2000-hydroxyl-value.png",
        "outputs/cook.svg",
        "outputs/13-lookup-f2611-d05.txt",
    ] {
        assert!(ws.join(f).is_file(), "missing {f}");
    }
    let certs = std::fs::read_dir(ws.join("certificates")).unwrap().count();
    assert!(certs >= 8, "internal and customer certificates: {certs}");
    cmd(d.path()).args(["demo", "ws"]).assert().code(0);
}

#[test]
fn demo_refuses_a_folder_that_is_not_its_own() {
    let d = tempfile::tempdir().unwrap();
    std::fs::create_dir(d.path().join("lab")).unwrap();
    std::fs::write(d.path().join("lab/results.csv"), "keep").unwrap();
    cmd(d.path())
        .args(["demo", "lab"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("not a demo workspace"));
    assert_eq!(
        std::fs::read_to_string(d.path().join("lab/results.csv")).unwrap(),
        "keep"
    );
}

#[test]
fn init_creates_a_valid_workspace_and_refuses_an_existing_one() {
    let d = tempfile::tempdir().unwrap();
    cmd(d.path())
        .args(["init", "lab"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("Edit first"));
    cmd(&d.path().join("lab"))
        .args(["specs", "check"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("EX-1000"));
    cmd(d.path())
        .args(["init", "lab"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("not empty"));
}
