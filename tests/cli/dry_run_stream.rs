//! `release --dry-run` of a wide file streams its lots (issue #13, item 11): its report and
//! its refusals must be those of the whole-file path. The reference for a report is the same
//! lots as a long file (read whole); the reference for a refusal is the real release of the
//! same file, which reads the file whole and must refuse it with the same message, writing
//! nothing either way. The lots and the second product are invented test data.

use crate::common::{Workspace, GOOD};

const WIDE_HEADER: &str = "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,notes\n";

/// A workspace with GOOD released and a second product, TP-3000 (a copy of TP-2000's spec).
fn workspace() -> Workspace {
    let ws = Workspace::with_good_released(false);
    let spec = std::fs::read_to_string(ws.path("specs/tp-2000-c.toml"))
        .unwrap()
        .replace("code = \"TP-2000\"", "code = \"TP-3000\"")
        .replace("name = \"Test polyester diol", "name = \"Second test diol");
    ws.write("specs/tp-3000-c.toml", &spec);
    ws
}

/// One lot: (lot, product, made, av, ohv, visc, note).
type Lot = (
    &'static str,
    &'static str,
    &'static str,
    &'static str,
    &'static str,
    &'static str,
    &'static str,
);

/// A mix of lots: new ones of two products, in and out of spec, with and without notes, a
/// lot already recorded unchanged (T26-101) and one recorded with other results (T26-102,
/// a retest when --retest is given).
const MIXED: [Lot; 8] = [
    ("M-001", "TP-3000", "2026-06-01", "0.52", "55.4", "540", ""),
    (
        "T26-101",
        "TP-2000",
        "2026-05-02",
        "0.52",
        "55.4",
        "540",
        "",
    ),
    (
        "M-002",
        "TP-2000",
        "2026-06-02",
        "1.40",
        "55.0",
        "555",
        "kettle 2",
    ),
    (
        "T26-102",
        "TP-2000",
        "2026-05-09",
        "0.50",
        "55.9",
        "530",
        "",
    ),
    (
        "M-003",
        "TP-3000",
        "2026-06-03",
        "0.97",
        "52.9",
        "700",
        "slow filtration",
    ),
    ("M-004", "TP-2000", "2026-06-04", "0.45", "", "548", ""),
    (
        "M-005",
        "TP-2000",
        "2026-06-05",
        "0.45",
        "56.0",
        "548",
        "a, quoted; note",
    ),
    ("M-006", "TP-3000", "2026-06-06", "0.40", "56.2", "551", ""),
];

fn wide(lots: &[Lot]) -> String {
    let mut t = WIDE_HEADER.to_string();
    for (lot, product, made, av, ohv, visc, note) in lots {
        t.push_str(&format!(
            "{lot},{product},{made},{av},{ohv},{visc},\"{note}\"\n"
        ));
    }
    t
}

fn long(lots: &[Lot]) -> String {
    let mut t = "lot,product,manufactured,property,value,notes\n".to_string();
    for (lot, product, made, av, ohv, visc, note) in lots {
        for (key, v) in [
            ("acid_value", av),
            ("hydroxyl_value", ohv),
            ("viscosity", visc),
        ] {
            if !v.is_empty() {
                t.push_str(&format!("{lot},{product},{made},{key},{v},\"{note}\"\n"));
            }
        }
    }
    t
}

/// (exit code, stdout, stderr) of a release of `file` with `args`.
fn run(ws: &Workspace, file: &str, args: &[&str]) -> (Option<i32>, String, String) {
    let out = ws.release(file).args(args).output().unwrap();
    (
        out.status.code(),
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

#[test]
fn a_streamed_dry_run_prints_what_the_whole_file_path_prints_issue_13() {
    let ws = workspace();
    let mut lots = MIXED.to_vec();
    // An exact repeat of an earlier row is skipped (in a long file, it would be a replicate).
    lots.push(MIXED[2]);
    ws.write("mixed.csv", &wide(&lots));
    ws.write("mixed-long.csv", &long(&MIXED));
    let before = ws.snapshot();
    for flags in [
        &["--dry-run", "--retest", "--reason", "re-titrated"][..],
        &["--dry-run", "--json", "--retest", "--reason", "re-titrated"][..],
    ] {
        let streamed = run(&ws, "mixed.csv", flags);
        let whole = run(&ws, "mixed-long.csv", flags);
        assert_eq!(streamed.0, Some(1), "{}", streamed.2);
        assert_eq!(streamed, whole, "{flags:?}");
    }
    let (_, text, _) = run(
        &ws,
        "mixed.csv",
        &["--dry-run", "--retest", "--reason", "r"],
    );
    assert!(text.contains("TP-2000  Test polyester diol"), "{text}");
    assert!(text.contains("TP-3000  Second test diol"), "{text}");
    assert!(text.contains("8 lots: "), "{text}");
    assert_eq!(ws.snapshot(), before, "a dry run wrote something");
}

#[test]
fn a_streamed_dry_run_names_ignored_columns_as_the_whole_file_path_issue_13() {
    let ws = workspace();
    let mut text =
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,colour_hazen\n".to_string();
    text.push_str("M-101,TP-2000,2026-06-01,0.52,55.4,540,\n");
    ws.write("extra.csv", &text);
    let (code, out, err) = run(&ws, "extra.csv", &["--dry-run"]);
    assert_eq!(code, Some(0), "{err}");
    assert!(out.ends_with(
        "1 lots: 1 released, 0 on hold, 0 rejected, 0 incomplete. Dry run: nothing was written.\n\
         Ignored columns (nothing reads them): colour_hazen.\n"
    ), "{out}");
    // The real release prints the same table, recording the lot.
    let (code, real, err) = run(&ws, "extra.csv", &["--no-certificates"]);
    assert_eq!(code, Some(0), "{err}");
    assert_eq!(
        out.replace("not written", "row 4").lines().next(),
        real.lines().next()
    );
    assert!(
        real.ends_with("Ignored columns (nothing reads them): colour_hazen.\n"),
        "{real}"
    );
}

/// Each faulty file is refused by the dry run with the real release's message and exit code,
/// and neither writes anything; where a file has several faults, the one named is the one
/// the whole-file path meets first (a bad cell before a future date, a future date before a
/// lot id clash).
#[test]
fn a_streamed_dry_run_refuses_what_the_release_refuses_issue_13() {
    let ws = workspace();
    let ok = |lot: &'static str, made: &'static str| -> Lot {
        (lot, "TP-2000", made, "0.50", "55.5", "540", "")
    };
    let cases: Vec<(&str, String, &str)> = vec![
        // Recorded with other results, no --retest.
        (
            "retest.csv",
            wide(&[ok("N-1", "2026-06-01"), MIXED[3]]),
            "with different results",
        ),
        // A lot id that differs from an earlier one of the file only in case.
        (
            "case.csv",
            wide(&[ok("N-1", "2026-06-01"), ok("n-1", "2026-06-01")]),
            "differs only in case from lot 'N-1', recorded in line 2",
        ),
        // Differs only in case from a recorded lot.
        (
            "case-recorded.csv",
            wide(&[ok("t26-103", "2026-05-16")]),
            "differs only in case",
        ),
        // A later row repeats a lot with other results.
        (
            "repeat.csv",
            wide(&[
                ok("N-1", "2026-06-01"),
                ok("N-2", "2026-06-01"),
                ("N-1", "TP-2000", "2026-06-01", "0.51", "55.5", "540", ""),
            ]),
            "the lot already appears on line 2 with different results",
        ),
        // The manufacture date of a recorded lot changed.
        (
            "moved.csv",
            wide(&[ok("T26-101", "2026-05-03")]),
            "differs from 2026-05-02",
        ),
        // A future date on line 2 and a lot id clash on line 3: the date is named.
        (
            "future.csv",
            wide(&[ok("N-1", "2027-01-01"), ok("n-1", "2026-06-01")]),
            "is in the future",
        ),
        // A future date on line 2 and a bad number on line 3: the bad number is named.
        (
            "bad-cell.csv",
            wide(&[
                ok("N-1", "2027-01-01"),
                ("N-2", "TP-2000", "2026-06-01", "0.5x", "55", "540", ""),
            ]),
            "'0.5x' is not a number",
        ),
        // An unknown product.
        (
            "product.csv",
            wide(&[("N-1", "TP-9999", "2026-06-01", "0.5", "55", "540", "")]),
            "TP-9999",
        ),
    ];
    // A lot id recorded for another product: record N-9 as TP-3000 first.
    ws.write(
        "tp3000.csv",
        &wide(&[("N-9", "TP-3000", "2026-06-01", "0.5", "55.5", "540", "")]),
    );
    ws.release("tp3000.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    let mut cases = cases;
    cases.push((
        "elsewhere.csv",
        wide(&[ok("N-1", "2026-06-01"), ok("N-9", "2026-06-01")]),
        "already recorded for product TP-3000",
    ));
    cases.push((
        "elsewhere-case.csv",
        wide(&[ok("N-1", "2026-06-01"), ok("n-9", "2026-06-01")]),
        "differs only in case from lot 'N-9', recorded in product TP-3000",
    ));
    for (file, text, expected) in &cases {
        ws.write(file, text);
        let before = ws.snapshot();
        let dry = run(&ws, file, &["--dry-run"]);
        let real = run(&ws, file, &["--no-certificates"]);
        assert_eq!(dry.0, Some(2), "{file}: {}", dry.2);
        assert!(dry.2.contains(expected), "{file}: {}", dry.2);
        assert_eq!(dry, real, "{file}");
        assert!(dry.1.is_empty(), "{file}: printed {}", dry.1);
        assert_eq!(ws.snapshot(), before, "{file}: something was written");
    }
    // GOOD itself, all unchanged, passes both ways.
    ws.write("again.csv", GOOD);
    assert_eq!(run(&ws, "again.csv", &["--dry-run"]).0, Some(0));
}

/// Lot `i` of a generated file of many lots (invented test data): two products, lots made
/// under revision B and C, results cycling through passing, held and failing values, some
/// with a lab note.
fn many(
    i: usize,
) -> (
    String,
    &'static str,
    String,
    String,
    String,
    String,
    &'static str,
) {
    (
        format!("Q{i:05}"),
        if i.is_multiple_of(3) {
            "TP-3000"
        } else {
            "TP-2000"
        },
        if i % 5 == 1 {
            format!("2025-08-{:02}", 1 + i % 28)
        } else {
            format!("2026-05-{:02}", 1 + i % 28)
        },
        format!("{:.2}", 0.40 + (i % 9) as f64 * 0.09),
        format!("{:.1}", 52.0 + (i % 17) as f64 * 0.45),
        format!("{}", 440 + (i % 23) * 10),
        if i.is_multiple_of(7) {
            "batch note"
        } else {
            ""
        },
    )
}

/// Issue #13 item 11: lots are decided in chunks on every core and each table row is kept
/// from the first pass; with several chunks, two products, a product whose later lots are
/// decided on a revision with other properties than its first lot's, and note lines, the
/// report is still byte for byte the whole-file path's, and a refusal in a later chunk is
/// the real release's.
#[test]
fn a_streamed_dry_run_over_several_chunks_prints_what_the_whole_file_path_prints_issue_13() {
    let ws = workspace();
    // TP-3000 revision B lacks extent_of_reaction: its first lot (revision C) sets the
    // columns, so revision B lots show '-' there.
    let b = std::fs::read_to_string(ws.path("specs/tp-2000-b.toml")).unwrap();
    let cut = b.find("[properties.extent_of_reaction]").unwrap();
    let b3 = b[..cut]
        .replace("code = \"TP-2000\"", "code = \"TP-3000\"")
        .replace("name = \"Test polyester diol", "name = \"Second test diol");
    ws.write("specs/tp-3000-b.toml", &b3);
    let n = 5000;
    let mut wide = WIDE_HEADER.to_string();
    let mut long = "lot,product,manufactured,property,value,notes\n".to_string();
    for i in 0..n {
        let (lot, product, made, av, ohv, visc, note) = many(i);
        wide.push_str(&format!(
            "{lot},{product},{made},{av},{ohv},{visc},{note}\n"
        ));
        for (key, v) in [
            ("acid_value", &av),
            ("hydroxyl_value", &ohv),
            ("viscosity", &visc),
        ] {
            long.push_str(&format!("{lot},{product},{made},{key},{v},{note}\n"));
        }
    }
    ws.write("many.csv", &wide);
    ws.write("many-long.csv", &long);
    let before = ws.snapshot();
    for flags in [&["--dry-run"][..], &["--dry-run", "--json"][..]] {
        let streamed = run(&ws, "many.csv", flags);
        let whole = run(&ws, "many-long.csv", flags);
        assert_eq!(streamed.0, Some(1), "{}", streamed.2);
        assert!(streamed == whole, "{flags:?}: the reports differ");
    }
    let (_, text, _) = run(&ws, "many.csv", &["--dry-run"]);
    assert!(text.contains(&format!("{n} lots: ")), "{text}");
    assert!(text.contains("\nQ00001  B  "), "{text}");
    assert!(text.contains("; lab note: batch note\n"), "{text}");
    assert!(
        text.contains("16.9  -                   not written\n"),
        "{text}"
    );
    assert_eq!(ws.snapshot(), before, "a dry run wrote something");
    // A future date in a late chunk; then also a bad cell after it, which is named first.
    let mut lines: Vec<String> = wide.lines().map(str::to_string).collect();
    lines[4501] = lines[4501].replace("2026-05-", "2027-05-");
    let future = lines.join("\n") + "\n";
    let (lot, product, made, _, ohv, visc, note) = many(4998);
    lines[4999] = format!("{lot},{product},{made},0.5x,{ohv},{visc},{note}");
    let bad = lines.join("\n") + "\n";
    for (file, text, expected) in [
        ("future.csv", future, "is in the future"),
        ("bad.csv", bad, "'0.5x' is not a number"),
    ] {
        ws.write(file, &text);
        let dry = run(&ws, file, &["--dry-run"]);
        let real = run(&ws, file, &["--no-certificates"]);
        assert_eq!(dry.0, Some(2), "{file}: {}", dry.2);
        assert!(dry.2.contains(expected), "{file}: {}", dry.2);
        assert_eq!(dry, real, "{file}");
    }
}
