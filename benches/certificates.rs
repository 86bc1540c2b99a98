//! Certificate rendering benchmark (plain binary, `harness = false`): certificates per second
//! for 1,000 FICTIONAL sample certificates rendered in parallel, and the time for one.
//!
//! Run: `cargo bench --bench certificates` (release profile). `-- --one` renders a single
//! certificate and exits, for timing a whole process with `/usr/bin/time`.

use std::path::Path;
use std::time::Instant;

use resinlot::certificate::model::Certificate;
use resinlot::certificate::render::{self, FontPool, Templates};

const BATCH: usize = 1_000;

/// CPU time used by this process so far (user + system), in seconds, from /proc/self/stat
/// (fields 14 and 15, in clock ticks of 1/100 s on Linux); `None` elsewhere. Reported beside
/// wall time because these machines are shared and wall time depends on the other load.
fn cpu_seconds() -> Option<f64> {
    let stat = std::fs::read_to_string("/proc/self/stat").ok()?;
    let after = &stat[stat.rfind(')')? + 2..];
    let fields: Vec<&str> = after.split_whitespace().collect();
    let utime: f64 = fields.get(11)?.parse().ok()?;
    let stime: f64 = fields.get(12)?.parse().ok()?;
    Some((utime + stime) / 100.0)
}

fn sample() -> Certificate {
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/certificates/sample.json");
    serde_json::from_str(&std::fs::read_to_string(path).expect("fixture")).expect("fixture json")
}

fn main() {
    let templates_dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("templates");
    let args: Vec<String> = std::env::args().collect();
    // `cargo bench` passes `--bench`; ignore it.
    if args.iter().any(|a| a == "--one") {
        let start = Instant::now();
        let fonts = FontPool::bundled();
        let templates = Templates::load(&templates_dir).expect("templates");
        let out = render::render_one(&templates, &fonts, &sample()).expect("render");
        eprintln!(
            "one certificate in-process: {:.1} ms ({} bytes)",
            start.elapsed().as_secs_f64() * 1e3,
            out.pdf.len()
        );
        return;
    }

    let start = Instant::now();
    let fonts = FontPool::bundled();
    let pool_ms = start.elapsed().as_secs_f64() * 1e3;

    let templates = Templates::load(&templates_dir).expect("templates");
    let base = sample();
    let t = Instant::now();
    let first = render::render_one(&templates, &fonts, &base).expect("render");
    let first_ms = t.elapsed().as_secs_f64() * 1e3;

    // Warm single-thread time per certificate (median of 20).
    let mut times: Vec<f64> = (0..20)
        .map(|_| {
            let t = Instant::now();
            render::render_one(&templates, &fonts, &base).expect("render");
            t.elapsed().as_secs_f64() * 1e3
        })
        .collect();
    times.sort_by(f64::total_cmp);
    let warm_ms = times[times.len() / 2];

    let certs: Vec<Certificate> = (0..BATCH)
        .map(|i| {
            let mut c = base.clone();
            c.number = format!("FW-2026-{:06}", 100_000 + i);
            c.lot.id = format!("L26-{:04}", i);
            c.released = i % 10 != 0;
            c
        })
        .collect();
    let cpu0 = cpu_seconds();
    let t = Instant::now();
    let batch = render::render_batch(&templates_dir, &certs, &fonts).expect("batch");
    let batch_s = t.elapsed().as_secs_f64();
    let cpu_per_cert_ms = cpu_seconds()
        .zip(cpu0)
        .map(|(b, a)| (b - a) / BATCH as f64 * 1e3);
    assert_eq!(batch.len(), BATCH);
    let bytes: usize = batch.iter().map(|r| r.pdf.len()).sum();

    println!("font pool build:              {pool_ms:8.1} ms");
    println!(
        "first certificate (cold):     {first_ms:8.1} ms ({} bytes)",
        first.pdf.len()
    );
    println!("one certificate (warm, p50):  {warm_ms:8.1} ms");
    println!(
        "batch of {BATCH} in parallel ({} threads): {batch_s:.2} s = {:.0} certificates/s, {:.1} MB",
        rayon::current_num_threads(),
        BATCH as f64 / batch_s,
        bytes as f64 / 1e6
    );
    if let Some(ms) = cpu_per_cert_ms {
        println!(
            "CPU time per certificate in the batch: {ms:.1} ms (= {:.0} certificates/s per idle core)",
            1e3 / ms
        );
    }
    if let Ok(load) = std::fs::read_to_string("/proc/loadavg") {
        println!("load average during the run: {}", load.trim());
    }
}
