//! The record survives (issue #8): concurrent releases, kills mid-write, tampering, torn tails.

use crate::common;

use std::process::{Command, Stdio};

use common::Workspace;
use predicates::prelude::*;

fn bin() -> std::path::PathBuf {
    assert_cmd::cargo::cargo_bin("resinlot")
}

fn lots_file(w: &Workspace, name: &str, prefix: &str, n: usize) -> String {
    let mut text = String::from("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n");
    for i in 0..n {
        text.push_str(&format!(
            "{prefix}-{i:04},TP-2000,2026-06-01,0.5{},55.{},540\n",
            i % 10,
            i % 7
        ));
    }
    w.write(name, &text);
    name.to_string()
}

fn release_cmd(w: &Workspace, file: &str) -> Command {
    let mut c = Command::new(bin());
    c.current_dir(w.dir.path())
        .args([
            "release",
            file,
            "--specs",
            "specs",
            "--register",
            "register",
            "--approver",
            "QC",
            "--no-certificates",
        ])
        .env("SOURCE_DATE_EPOCH", "1796860800")
        .stdout(Stdio::null())
        .stderr(Stdio::null());
    c
}

#[test]
fn eight_concurrent_releases_lose_nothing() {
    let w = Workspace::new();
    let files: Vec<String> = (0..8)
        .map(|p| lots_file(&w, &format!("p{p}.csv"), &format!("C{p}"), 100))
        .collect();
    let mut children: Vec<_> = files
        .iter()
        .map(|f| release_cmd(&w, f).spawn().unwrap())
        .collect();
    for c in &mut children {
        assert!(c.wait().unwrap().success());
    }
    let text = std::fs::read_to_string(w.path("register/TP-2000.csv")).unwrap();
    assert_eq!(text.lines().count(), 801, "header + 800 rows");
    for p in 0..8 {
        for i in 0..100 {
            assert_eq!(text.matches(&format!(",C{p}-{i:04},")).count(), 1);
        }
    }
    w.cmd()
        .args(["verify", "--register", "register"])
        .assert()
        .code(0);
}

/// A small deterministic generator (64-bit LCG, Knuth MMIX constants) for kill timings.
struct Lcg(u64);
impl Lcg {
    fn next(&mut self) -> u64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        self.0 >> 33
    }
}

#[test]
fn killed_releases_leave_a_verifiable_record() {
    let w = Workspace::new();
    let mut rng = Lcg(20261201);
    let mut reported_ok: Vec<String> = Vec::new();
    let mut killed = 0;
    // Kill times span one uninterrupted release as long as it takes on this machine now (a
    // loaded machine starts processes slowly; fixed times would kill every run before it
    // wrote anything, and the test would check nothing).
    let file = lots_file(&w, "k-first.csv", "KFIRST", 5);
    let started = std::time::Instant::now();
    assert!(release_cmd(&w, &file).status().unwrap().success());
    let span = (started.elapsed().as_micros() as u64 * 5 / 4).max(12_000);
    reported_ok.push("KFIRST".to_string());
    for run in 0..200 {
        let prefix = format!("K{run:03}");
        let file = lots_file(&w, &format!("k{run}.csv"), &prefix, 5);
        let mut child = release_cmd(&w, &file).spawn().unwrap();
        std::thread::sleep(std::time::Duration::from_micros(rng.next() % span));
        let _ = child.kill();
        let status = child.wait().unwrap();
        if status.success() {
            reported_ok.push(prefix);
        } else {
            killed += 1;
        }
        if !w.path("register").exists() {
            continue;
        }
        let verify = w
            .cmd()
            .args(["verify", "--register", "register"])
            .output()
            .unwrap();
        if !verify.status.success() {
            let text = String::from_utf8_lossy(&verify.stdout);
            assert!(
                text.contains("quarantine"),
                "only a torn tail is acceptable: {text}"
            );
            w.cmd()
                .args(["verify", "--register", "register", "--quarantine"])
                .assert()
                .code(0);
        }
    }
    eprintln!("{killed} runs killed, {} completed", reported_ok.len());
    assert!(killed > 0, "the test must actually interrupt releases");
    let text = std::fs::read_to_string(w.path("register/TP-2000.csv")).unwrap_or_default();
    for prefix in &reported_ok {
        for i in 0..5 {
            assert!(
                text.contains(&format!(",{prefix}-{i:04},")),
                "{prefix}-{i} reported recorded but missing"
            );
        }
    }
    let last = w
        .cmd()
        .args(["verify", "--register", "register"])
        .output()
        .unwrap();
    assert!(
        last.status.success(),
        "the record must verify after the last repair:\n{}{}",
        String::from_utf8_lossy(&last.stdout),
        String::from_utf8_lossy(&last.stderr)
    );
}

fn recorded() -> Workspace {
    let w = Workspace::new();
    let f = lots_file(&w, "t.csv", "T", 6);
    assert!(release_cmd(&w, &f).status().unwrap().success());
    w
}

fn tampered(edit: impl Fn(&str) -> String, needle: &str) {
    let w = recorded();
    let p = w.path("register/TP-2000.csv");
    let text = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, edit(&text)).unwrap();
    w.cmd()
        .args(["verify", "--register", "register"])
        .assert()
        .code(1)
        .stdout(predicate::str::contains(needle))
        .stdout(predicate::str::contains("NOT intact"));
}

#[test]
fn editing_one_digit_is_detected_at_its_row() {
    // Row 4 holds lot T-0003 with acid value 0.53: change it to 0.58.
    tampered(|t| t.replacen(",0.53,", ",0.58,", 1), "TP-2000.csv:5 (byte");
}

#[test]
fn deleting_a_row_is_detected() {
    tampered(
        |t| {
            let mut lines: Vec<&str> = t.lines().collect();
            lines.remove(3);
            lines.join("\n") + "\n"
        },
        "row deleted or moved",
    );
}

#[test]
fn swapping_two_rows_is_detected() {
    tampered(
        |t| {
            let mut lines: Vec<&str> = t.lines().collect();
            lines.swap(2, 3);
            lines.join("\n") + "\n"
        },
        "TP-2000.csv:3",
    );
}

#[test]
fn torn_tail_blocks_release_and_quarantine_keeps_the_fragment() {
    let w = recorded();
    let p = w.path("register/TP-2000.csv");
    let mut f = std::fs::OpenOptions::new().append(true).open(&p).unwrap();
    std::io::Write::write_all(&mut f, b"7,2026-05-28T20:26:40Z,T-0099,TP-").unwrap();
    let size = std::fs::metadata(&p).unwrap().len();
    w.cmd()
        .args(["verify", "--register", "register"])
        .assert()
        .code(1)
        .stdout(predicate::str::contains("last line is incomplete"))
        .stdout(predicate::str::contains("--quarantine"));
    let more = lots_file(&w, "more.csv", "M", 2);
    w.release(&more)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("interrupted write"));
    w.cmd()
        .args(["verify", "--register", "register", "--quarantine"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("moved the torn last line"));
    let side = std::fs::read_dir(w.path("register"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.to_string_lossy().contains(".torn-"))
        .expect("side file");
    assert_eq!(
        std::fs::read(&side).unwrap(),
        b"7,2026-05-28T20:26:40Z,T-0099,TP-"
    );
    assert!(std::fs::metadata(&p).unwrap().len() < size);
    assert!(std::fs::read_to_string(w.path("register/quarantine.log"))
        .unwrap()
        .contains("moved 33 bytes"));
    w.release(&more).arg("--no-certificates").assert().code(0);
}
