//! A large results file decides every lot as a small one does (issue #13 item 11: intake was
//! quadratic in the number of lots; its speed is measured by `cargo bench --bench release`,
//! never here). The generated lots are invented test data.

use crate::common::Workspace;

const LOTS: usize = 5000;

/// Row `i` of the generated wide file: values cycle through passing and failing results.
fn row(i: usize) -> String {
    format!(
        "S{i:05},TP-2000,2026-05-{:02},{:.2},{:.1},{}",
        1 + i % 28,
        0.40 + (i % 9) as f64 * 0.09,
        52.0 + (i % 17) as f64 * 0.45,
        440 + (i % 23) * 10
    )
}

const HEADER: &str = "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n";

fn dry_run_json(ws: &Workspace, file: &str) -> serde_json::Value {
    let out = ws
        .release(file)
        .args(["--dry-run", "--json"])
        .output()
        .unwrap();
    assert!(
        matches!(out.status.code(), Some(0 | 1)),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn a_large_file_gives_the_same_decisions_as_small_ones_issue_13() {
    let ws = Workspace::new();
    let mut big = HEADER.to_string();
    for i in 0..LOTS {
        big.push_str(&row(i));
        big.push('\n');
    }
    // An identical repeat of an early lot, far down the file, is merged as before.
    big.push_str(&row(7));
    big.push('\n');
    ws.write("big.csv", &big);
    let sample: Vec<usize> = (0..LOTS).step_by(499).collect();
    let mut small = HEADER.to_string();
    for &i in &sample {
        small.push_str(&row(i));
        small.push('\n');
    }
    ws.write("small.csv", &small);

    let big = dry_run_json(&ws, "big.csv");
    let lots = big["lots"].as_array().unwrap();
    assert_eq!(lots.len(), LOTS);
    let statuses: std::collections::HashSet<&str> =
        lots.iter().map(|l| l["status"].as_str().unwrap()).collect();
    assert!(
        statuses.contains("released") && statuses.contains("rejected"),
        "{statuses:?}"
    );
    let small = dry_run_json(&ws, "small.csv");
    let small = small["lots"].as_array().unwrap();
    assert_eq!(small.len(), sample.len());
    for (k, &i) in sample.iter().enumerate() {
        assert_eq!(lots[i], small[k], "lot {i}");
    }

    // A repeat with other results, far down the file, is still refused naming the first line.
    let mut conflicting = std::fs::read_to_string(ws.path("big.csv")).unwrap();
    conflicting.push_str(&row(12).replace("S00012,", "S00013,"));
    conflicting.push('\n');
    ws.write("conflict.csv", &conflicting);
    ws.release("conflict.csv")
        .arg("--dry-run")
        .assert()
        .code(2)
        .stderr(predicates::str::contains(format!(
            "conflict.csv:{}, lot 'S00013'",
            LOTS + 3
        )))
        .stderr(predicates::str::contains("already appears on line 15"));
}

/// The rows of lot `i` in long format (one per property, replicate 1), same values as [`row`].
fn long_rows(i: usize) -> String {
    let wide = row(i);
    let c: Vec<&str> = wide.split(',').collect();
    ["acid_value", "hydroxyl_value", "viscosity"]
        .iter()
        .enumerate()
        .map(|(k, key)| format!("{},{},{key},{},1,{}\n", c[0], c[1], c[3 + k], c[2]))
        .collect()
}

#[test]
fn a_large_long_file_decides_as_the_wide_one_issue_13() {
    const N: usize = 3000;
    let ws = Workspace::new();
    let mut wide = HEADER.to_string();
    let mut long = "lot,product,property,value,replicate,manufactured\n".to_string();
    for i in 0..N {
        wide.push_str(&row(i));
        wide.push('\n');
        long.push_str(&long_rows(i));
    }
    // An identical repeat of a numbered replicate far down the file is skipped as before.
    long.push_str(&long_rows(3));
    ws.write("wide.csv", &wide);
    ws.write("long.csv", &long);
    let wide = dry_run_json(&ws, "wide.csv");
    let long = dry_run_json(&ws, "long.csv");
    assert_eq!(long["lots"].as_array().unwrap().len(), N);
    assert_eq!(wide["lots"], long["lots"]);

    let read_long = || std::fs::read_to_string(ws.path("long.csv")).unwrap();
    // A conflicting replicate and a lot under another product, far down, are still refused
    // naming the earlier line (lot 5's acid value is on line 2 + 3 * 5).
    let conflict = format!("{}S00005,TP-2000,acid_value,9.99,1,\n", read_long());
    ws.write("conflict.csv", &conflict);
    ws.release("conflict.csv")
        .arg("--dry-run")
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "replicate 1 of acid_value already appears on line 17",
        ));
    let other = format!("{}S00005,TP-9000,water,0.1,,\n", read_long());
    ws.write("other.csv", &other);
    ws.release("other.csv")
        .arg("--dry-run")
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "product 'TP-9000' differs from 'TP-2000' on line 17",
        ));
}
