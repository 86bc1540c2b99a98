//! Benchmark (not a test): issue #21's load check of `resinlot serve`. Builds the demo
//! workspace (invented data), starts the release build's server on a free loopback port and
//! sends 200 page loads at once, twice: the customer-service mix (lot, certificate and find
//! pages) and the heaviest page (a product's trend with its charts). Prints the slowest,
//! median and 95th-percentile answer times. Run with `cargo bench --bench serve`.
//!
//! Every request goes to 127.0.0.1 only; the run is bounded (400 requests) and the server is
//! killed at the end.

use std::io::{BufRead, BufReader};
use std::path::PathBuf;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

const CONCURRENT: usize = 200;

fn agent() -> ureq::Agent {
    ureq::Agent::config_builder()
        .http_status_as_error(false)
        .timeout_global(Some(Duration::from_secs(60)))
        .build()
        .into()
}

/// Loads every URL at once (one thread each); returns each answer's time, in order.
fn burst(urls: Vec<String>) -> Vec<Duration> {
    let barrier = std::sync::Arc::new(std::sync::Barrier::new(urls.len()));
    let handles: Vec<_> = urls
        .into_iter()
        .map(|url| {
            let barrier = barrier.clone();
            std::thread::spawn(move || {
                let a = agent();
                barrier.wait();
                let t = Instant::now();
                let mut r = a.get(&url).call().expect("answer");
                assert_eq!(r.status().as_u16(), 200, "{url}");
                let body = r
                    .body_mut()
                    .with_config()
                    .limit(50 << 20)
                    .read_to_vec()
                    .unwrap();
                assert!(body.ends_with(b"</html>\n"), "{url}: whole page");
                t.elapsed()
            })
        })
        .collect();
    handles.into_iter().map(|h| h.join().unwrap()).collect()
}

fn report(what: &str, mut times: Vec<Duration>) {
    times.sort();
    let at = |q: f64| times[((times.len() - 1) as f64 * q).round() as usize].as_secs_f64();
    let slowest = times.last().unwrap().as_secs_f64();
    println!(
        "{what}: {} loads at once, median {:.3} s, 95th percentile {:.3} s, slowest {:.3} s{}",
        times.len(),
        at(0.5),
        at(0.95),
        slowest,
        if slowest <= 1.0 {
            " (none over 1 s)"
        } else {
            " (OVER 1 s)"
        }
    );
}

fn main() {
    let bin = PathBuf::from(env!("CARGO_BIN_EXE_resinlot"));
    let dir = tempfile::tempdir().unwrap();
    let out = Command::new(&bin)
        .current_dir(dir.path())
        .args(["demo", "ws"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "demo: {out:?}");
    let ws = dir.path().join("ws");
    let mut child = Command::new(&bin)
        .current_dir(&ws)
        .args(["serve", "--bind", "127.0.0.1:0"])
        .stdout(Stdio::piped())
        .spawn()
        .unwrap();
    let mut first = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut first)
        .unwrap();
    let base = first
        .split_whitespace()
        .find(|w| w.starts_with("http://"))
        .expect("address")
        .trim_end_matches('/')
        .to_string();
    let lots = [
        "F2611-D05",
        "F2611-B04",
        "F2611-C04",
        "F2611-D03",
        "F2610-D05",
    ];
    let mix: Vec<String> = (0..CONCURRENT)
        .map(|i| match i % 10 {
            0 => format!("{base}/find?product=PD-2000&where=mn%3D1950..2050"),
            1 => format!("{base}/certificate/FW-000006"),
            2 => format!("{base}/"),
            3 => format!("{base}/shipments?customer=brantwick"),
            _ => format!("{base}/lot/{}", lots[i % lots.len()]),
        })
        .collect();
    report(
        "customer-service mix (lot, certificate, find, search, shipments)",
        burst(mix),
    );
    let heavy: Vec<String> = (0..CONCURRENT)
        .map(|_| format!("{base}/product/PD-2000"))
        .collect();
    report(
        "product page (I-MR charts of 8 properties, 62 lots)",
        burst(heavy),
    );
    let _ = child.kill();
    let _ = child.wait();
}
