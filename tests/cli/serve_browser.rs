//! Browser test of `resinlot serve` (issue #21): headless Chromium loads the lot page and the
//! product page from the server on loopback, saves screenshots under
//! `target/tmp/serve-screenshots/` (CI keeps them) and its DOM is checked for the values.
//! `.ci/run` installs Debian's `chromium` when it is missing; where no browser can be found the
//! test prints why and does nothing else.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use crate::serve::{demo, Server};

/// The Chromium binary, if one is installed.
fn browser() -> Option<PathBuf> {
    let path = std::env::var_os("PATH")?;
    ["chromium", "chromium-browser", "google-chrome"]
        .iter()
        .flat_map(|name| std::env::split_paths(&path).map(move |d| d.join(name)))
        .find(|p| p.is_file())
}

/// Runs headless Chromium on `url` with `args`; returns stdout and stderr. Killed after 90 s.
fn chromium(bin: &Path, profile: &Path, args: &[&str], url: &str) -> (String, String) {
    let mut child = Command::new(bin)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-extensions",
            "--hide-scrollbars",
            "--enable-logging=stderr",
            "--v=0",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .args(args)
        .arg(url)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let (mut out, mut err) = (child.stdout.take().unwrap(), child.stderr.take().unwrap());
    let reader = std::thread::spawn(move || {
        let mut s = String::new();
        std::io::Read::read_to_string(&mut out, &mut s).unwrap();
        s
    });
    let err_reader = std::thread::spawn(move || {
        let mut s = String::new();
        let _ = std::io::Read::read_to_string(&mut err, &mut s);
        s
    });
    let start = Instant::now();
    loop {
        if child.try_wait().unwrap().is_some() {
            break;
        }
        if start.elapsed() > Duration::from_secs(90) {
            let _ = child.kill();
            let _ = child.wait();
            panic!("chromium did not finish {url} in 90 s");
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    (reader.join().unwrap(), err_reader.join().unwrap())
}

#[test]
fn chromium_shows_the_lot_and_product_pages() {
    let Some(bin) = browser() else {
        println!(
            "SKIPPED chromium_shows_the_lot_and_product_pages: no chromium on PATH \
             (`bash .ci/run` installs Debian's chromium; install it with apt-get to run this test)"
        );
        return;
    };
    let shots = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("serve-screenshots");
    std::fs::create_dir_all(&shots).unwrap();
    let profile = tempfile::tempdir().unwrap();
    let s = Server::start(demo(), &[]);
    for (path, shot, size, expected) in [
        (
            "/lot/F2611-D05",
            "lot.png",
            "1280,1100",
            &[
                "<span id=\"lot-id\">F2611-D05</span>",
                "released (spec revision C)",
                "Mn is 1994 ± 29 g/mol",
                "href=\"/certificate/FW-000006\"",
            ][..],
        ),
        (
            "/product/PD-2000",
            "product.png",
            "1280,2400",
            &[
                "Product PD-2000",
                "PD-2000 · Hydroxyl value (mg KOH/g)",
                "Signals, newest first",
                "Viscosity against Mn",
            ][..],
        ),
    ] {
        let url = format!("{}{path}", s.base);
        let (dom, _) = chromium(&bin, profile.path(), &["--dump-dom"], &url);
        for text in expected {
            assert!(dom.contains(text), "{path}: {text} not in the DOM");
        }
        let file = shots.join(shot);
        let _ = std::fs::remove_file(&file);
        let (_, log) = chromium(
            &bin,
            profile.path(),
            &[
                &format!("--screenshot={}", file.display()),
                &format!("--window-size={size}"),
            ],
            &url,
        );
        // The page needs nothing the Content-Security-Policy forbids.
        assert!(!log.contains("Content Security Policy"), "{path}: {log}");
        let png = std::fs::read(&file).unwrap();
        assert!(
            png.starts_with(b"\x89PNG") && png.len() > 20_000,
            "{path}: screenshot"
        );
        println!("screenshot of {path}: {}", file.display());
    }
}
