//! Benchmark (not a test): whole-process time and peak memory of `release --dry-run` on
//! generated wide results files of one product, 10,000 to 1,000,000 lots (issue #13 item 11:
//! intake must grow linearly; targets for 1,000,000 lots: at most 10 s and 200 MB peak RSS).
//! Run with `cargo bench --bench release`; `cargo bench --bench release -- --quick` skips the
//! 1,000,000-lot run.
//!
//! The generated lots are invented benchmark data (random scatter around the PD-2000 demo
//! spec, some of them out of spec).

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

/// Lot counts measured; the last one carries the targets.
const SIZES: [usize; 4] = [10_000, 20_000, 40_000, 1_000_000];
/// Targets for the largest run (issue #13 item 11).
const TARGET_SECONDS: f64 = 10.0;
const TARGET_MB: f64 = 200.0;

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

/// Writes a wide PD-2000 results file of `n` lots (one row each) to `path`.
fn generate(path: &Path, n: usize) -> std::io::Result<()> {
    let mut out = std::io::BufWriter::with_capacity(1 << 20, std::fs::File::create(path)?);
    writeln!(
        out,
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity,water"
    )?;
    let mut rng = Rng(7);
    let start = chrono::NaiveDate::from_ymd_opt(2026, 3, 1).unwrap();
    for i in 0..n {
        let av = (0.5 + 0.15 * rng.normal()).max(0.05);
        let ohv = 55.5 + 1.2 * rng.normal();
        let visc = 540.0 + 40.0 * rng.normal();
        let water = (0.025 + 0.006 * rng.normal()).max(0.001);
        let made = start + chrono::Days::new((i % 250) as u64);
        writeln!(
            out,
            "R{i:07},PD-2000,{made},{av:.2},{ohv:.1},{visc:.0},{water:.3}"
        )?;
    }
    out.flush()
}

/// Runs the binary; returns (wall seconds, peak resident memory in MB, exit code).
// The child is reaped by wait4 below (which also gives its rusage), not by Child::wait.
#[allow(clippy::zombie_processes)]
fn measure(bin: &Path, dir: &Path, args: &[&str]) -> (f64, f64, i32) {
    let t = Instant::now();
    let child = Command::new(bin)
        .current_dir(dir)
        .args(args)
        // Fixed clock (2026-12-09), so no generated manufacture date is in the future.
        .env("SOURCE_DATE_EPOCH", "1796860800")
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
    (
        secs,
        usage.ru_maxrss as f64 / 1024.0,
        libc::WEXITSTATUS(status),
    )
}

fn main() {
    if std::env::args().any(|a| a == "--list") {
        return;
    }
    let quick = std::env::args().any(|a| a == "--quick");
    let bin = PathBuf::from(env!("CARGO_BIN_EXE_resinlot"));
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let dir = root.join("target/bench-release");
    std::fs::create_dir_all(&dir).unwrap();
    let specs = dir.join("specs");
    if !specs.exists() {
        copy_dir(&root.join("specs"), &specs);
    }
    let mut per_lot = Vec::new();
    for &n in SIZES.iter().filter(|&&n| !quick || n < 1_000_000) {
        let file = format!("results-{n}.csv");
        if !dir.join(&file).exists() {
            generate(&dir.join(&file), n).unwrap();
        }
        let args = [
            "release",
            file.as_str(),
            "--dry-run",
            "--approver",
            "Benchmark",
            "--max-bytes",
            "1000000000",
        ];
        let runs = if n >= 1_000_000 { 1 } else { 3 };
        let mut times = Vec::new();
        let mut peak: f64 = 0.0;
        for _ in 0..runs {
            let (t, m, code) = measure(&bin, &dir, &args);
            assert!(code == 0 || code == 1, "release exited {code} on {file}");
            times.push(t);
            peak = peak.max(m);
        }
        times.sort_by(f64::total_cmp);
        let t = times[times.len() / 2];
        per_lot.push((n, t / n as f64 * 1e6));
        let verdict = if n >= 1_000_000 {
            format!(
                "  target <= {TARGET_SECONDS} s, <= {TARGET_MB} MB: {}",
                if t <= TARGET_SECONDS && peak <= TARGET_MB {
                    "met"
                } else {
                    "MISSED"
                }
            )
        } else {
            String::new()
        };
        println!(
            "release --dry-run {n:>9} lots  median {t:>7.2} s  peak RSS {peak:>6.0} MB  ({:.1} us/lot){verdict}",
            t / n as f64 * 1e6
        );
    }
    if let (Some(first), Some(last)) = (per_lot.first(), per_lot.last()) {
        println!(
            "time per lot grows {:.2}x from {} to {} lots (1.0 = linear)",
            last.1 / first.1,
            first.0,
            last.0
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
