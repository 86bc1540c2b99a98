//! Benchmark (not a test): whole-process time and peak memory of `lookup`, `find` and `trend`
//! on a generated trend file of 1,000,000 lots. Run with `cargo bench --bench record`.
//!
//! The generated lots are invented benchmark data (random scatter around a PD-2000 recipe).

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use resinlot::record::layout::TREND_EXTENSION;
use resinlot::record::trend_file::{chain_hash, chain_seed, header_line, split_line};

const LOTS: usize = 1_000_000;

/// Deterministic 64-bit LCG (Knuth MMIX constants) and a Box-Muller normal deviate.
struct Rng(u64);
impl Rng {
    fn uniform(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        (-2.0 * self.uniform().ln()).sqrt() * (std::f64::consts::TAU * self.uniform()).cos()
    }
}

/// Writes a valid, hash-chained PD-2000 trend file of `n` lots.
pub fn generate(register: &Path, n: usize) -> std::io::Result<()> {
    std::fs::create_dir_all(register)?;
    let keys: Vec<String> = [
        "acid_value",
        "hydroxyl_value",
        "viscosity",
        "water",
        "mn",
        "xn",
        "extent_of_reaction",
        "hydroxyl_equivalent_weight",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let header = header_line(&keys);
    let mut out = std::io::BufWriter::with_capacity(
        1 << 20,
        std::fs::File::create(register.join("PD-2000.csv"))?,
    );
    writeln!(out, "{header}")?;
    let mut prev = chain_seed(&split_line(&header));
    let mut rng = Rng(42);
    let start = chrono::NaiveDate::from_ymd_opt(2026, 3, 1).unwrap();
    for i in 0..n {
        let av = (0.5 + 0.1 * rng.normal()).max(0.05);
        let ohv = 55.5 + 0.9 * rng.normal();
        let corrected = ohv + av;
        let mn = 112200.0 / (av + corrected);
        let visc = (-7.38 + 1.80 * mn.ln()).exp() * (1.0 + 0.02 * rng.normal());
        let water = (0.025 + 0.006 * rng.normal()).max(0.001);
        // Xn and p follow from the values above, so they scatter as real lots do (issue #20;
        // constant columns made every lot signal). Xn = Mn / M0 with an invented mean
        // repeat-unit mass M0 = 114.3 g/mol; p = 1 − AV/AV0 (naive extent, `chem::stepgrowth::
        // naive_extent`) with an invented initial acid value AV0 = 454 mg KOH/g.
        let xn = mn / 114.3;
        let p = 1.0 - av / 454.0;
        let made = start + chrono::Days::new((i / 4000) as u64);
        let v = |x: f64| if x > 0.0 { "pass" } else { "fail" };
        let body = format!(
            "{},2026-11-30T12:00:00Z,B{:07},PD-2000,{made},C,released,Benchmark,,,{av:.2},{},{corrected:.2},{},{visc:.0},pass,{water:.3},pass,{mn},pass,{xn:.1},,{p:.4},,{},,{ohv:.1},28.5,",
            i + 1,
            i,
            v(1.0 - av),
            v(corrected - 53.0),
            56100.0 / corrected
        );
        // The chain signs the row without its trailing empty layout-v3 extension cells.
        let chain = chain_hash(&prev, &body);
        let empty_extension = ",".repeat(TREND_EXTENSION.len());
        writeln!(out, "{body}{empty_extension},{chain}")?;
        prev = chain;
    }
    out.flush()
}

/// Runs the binary; returns (wall seconds, peak resident memory in MB).
// The child is reaped by wait4 below (which also gives its rusage), not by Child::wait.
#[allow(clippy::zombie_processes)]
fn measure(bin: &Path, dir: &Path, args: &[&str]) -> (f64, f64) {
    let t = Instant::now();
    let child = Command::new(bin)
        .current_dir(dir)
        .args(args)
        .stdout(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let pid = child.id() as libc::pid_t;
    let mut status = 0;
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    // SAFETY: wait4 on our own child with valid pointers; collects its rusage (ru_maxrss in kB).
    unsafe { libc::wait4(pid, &mut status, 0, &mut usage) };
    let secs = t.elapsed().as_secs_f64();
    assert!(libc::WIFEXITED(status), "{args:?} did not exit normally");
    (secs, usage.ru_maxrss as f64 / 1024.0)
}

fn main() {
    if std::env::args().any(|a| a == "--list") {
        return;
    }
    let bin = PathBuf::from(env!("CARGO_BIN_EXE_resinlot"));
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/bench-record");
    let register = dir.join("register");
    if !register.join("PD-2000.csv").exists() {
        let t = Instant::now();
        generate(&register, LOTS).unwrap();
        eprintln!(
            "generated {LOTS} lots in {:.1} s",
            t.elapsed().as_secs_f64()
        );
    }
    let specs = dir.join("specs");
    if !specs.exists() {
        let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("specs");
        copy_dir(&src, &specs);
    }
    let size = std::fs::metadata(register.join("PD-2000.csv"))
        .unwrap()
        .len();
    println!("trend file: {LOTS} lots, {:.0} MB", size as f64 / 1e6);
    let runs: &[(&str, Vec<&str>)] = &[
        ("lookup (one lot)", vec!["lookup", "B0500000"]),
        (
            "find (narrow windows)",
            vec![
                "find",
                "--product",
                "PD-2000",
                "--where",
                "mn=1995..2000",
                "--where",
                "acid_value=..0.3",
            ],
        ),
        (
            "find (broad, CSV out)",
            vec![
                "find",
                "--product",
                "PD-2000",
                "--where",
                "mn=1950..2050",
                "--where",
                "acid_value=..0.5",
                "--csv",
            ],
        ),
        (
            "trend (one property)",
            vec!["trend", "PD-2000", "--property", "hydroxyl_value", "--json"],
        ),
    ];
    for (name, args) in runs {
        let mut times = Vec::new();
        let mut peak: f64 = 0.0;
        for _ in 0..5 {
            let (t, m) = measure(&bin, &dir, args);
            times.push(t);
            peak = peak.max(m);
        }
        times.sort_by(f64::total_cmp);
        let hits = if args[0] == "find" {
            let out = Command::new(&bin)
                .current_dir(&dir)
                .args(args)
                .output()
                .unwrap();
            format!(
                "  ({} lines out)",
                out.stdout.iter().filter(|b| **b == b'\n').count()
            )
        } else {
            String::new()
        };
        println!(
            "{name:<22} median {:>7.0} ms  (min {:.0}, max {:.0})  peak RSS {peak:.0} MB{hits}",
            times[2] * 1e3,
            times[0] * 1e3,
            times[4] * 1e3
        );
    }
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        if e.path().is_dir() {
            copy_dir(&e.path(), &to.join(e.file_name()));
        } else {
            std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
        }
    }
}
