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
