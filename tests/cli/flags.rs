//! Shared flags and typed values (issue #12): every command names and checks them the same way.

use crate::common::{Workspace, GOOD};

/// Issue #12: bad dates, statuses and orders are refused by the flag's parser, exit 2.
#[test]
fn typed_values_are_refused_with_what_to_give_issue_12() {
    let w = Workspace::with_good_released(false);
    for (args, needle) in [
        (
            vec!["find", "TP-2000", "--status", "held"],
            "not a lot status. Use released, on_hold, rejected or incomplete",
        ),
        (
            vec!["trend", "TP-2000", "--from", "01/05/2026"],
            "not a date. Write dates as YYYY-MM-DD",
        ),
        (
            vec!["trend", "TP-2000", "--baseline-until", "2026-02-30"],
            "not a date",
        ),
        (
            vec![
                "cook",
                "c.csv",
                "--recipe",
                "r.toml",
                "--target-av",
                "1",
                "--order",
                "4",
            ],
            "not a reaction order resinlot fits",
        ),
    ] {
        w.cmd()
            .args(&args)
            .assert()
            .code(2)
            .stderr(predicates::str::contains(needle));
    }
}

/// Issue #12: the product is given the same way to `trend` and `find`, as the first argument
/// or with --product, and a missing one asks for it.
#[test]
fn product_given_either_way_issue_12() {
    let w = Workspace::with_good_released(false);
    for cmd in ["trend", "find"] {
        let a = w.cmd().args([cmd, "TP-2000", "--json"]).output().unwrap();
        let b = w
            .cmd()
            .args([cmd, "--product", "TP-2000", "--json"])
            .output()
            .unwrap();
        assert_eq!(a.stdout, b.stdout, "{cmd}");
        assert_eq!(a.status.code(), b.status.code(), "{cmd}");
        assert!(a.status.code().unwrap() < 2, "{cmd}");
        w.cmd()
            .arg(cmd)
            .assert()
            .code(2)
            .stderr(predicates::str::contains("<PRODUCT>"));
    }
}

/// Issue #12: one name for the certificates folder; the older spellings still work.
#[test]
fn certificates_folder_has_one_name_and_its_old_aliases_issue_12() {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    w.release("good.csv")
        .args(["--certificates", "issued"])
        .assert()
        .code(0);
    assert!(std::fs::read_dir(w.path("issued")).unwrap().count() >= 3);
    w.cmd()
        .args(["verify", "--certificates-dir", "issued"])
        .assert()
        .code(0);
    w.cmd()
        .args(["verify", "--certificates", "issued"])
        .assert()
        .code(0);
}
