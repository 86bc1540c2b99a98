//! `resinlot demo`: builds the demo plant's workspace and runs the whole job in it.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use anyhow::Context;

use crate::cmd::Outcome;
use crate::error::Error;

/// Arguments of `resinlot demo`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Folder for the demo workspace. An earlier demo workspace there is rebuilt from scratch
    /// when it holds only the files the demo wrote, unchanged; one with files added or changed
    /// since, and any other existing folder, is refused. Default: ./resinlot-demo.
    #[arg(hide_default_value = true, default_value = "resinlot-demo")]
    pub dir: PathBuf,
}

/// One step of the demo: what it shows, the command, and the exit codes that are expected.
struct Step {
    what: &'static str,
    args: Vec<String>,
    expect: &'static [i32],
}

fn step(what: &'static str, args: &[&str], expect: &'static [i32]) -> Step {
    Step {
        what,
        args: args.iter().map(|s| s.to_string()).collect(),
        expect,
    }
}

/// The demo's steps, in order.
fn steps() -> Vec<Step> {
    let approver = ["--approver", "QC Laboratory Supervisor"];
    let mut v = Vec::new();
    for product in ["pd-2000", "pb-4800", "spc-35"] {
        let file = format!("demo-lots/history-{product}.csv");
        let mut a = vec!["release", file.as_str(), "--no-certificates"];
        a.extend(approver);
        v.push(Step {
            what: "release a year of history (import, no certificates)",
            args: a.iter().map(|s| s.to_string()).collect(),
            expect: &[0, 1],
        });
    }
    let mut a = vec!["release", "demo-lots/lims-export-2026-11.csv"];
    a.extend(approver);
    v.push(step(
        "release the newest lots from the lab-system export, with internal certificates",
        &a,
        &[0],
    ));
    v.push(step(
        "certify a shipment for a customer",
        &[
            "certify",
            "F2611-D05",
            "--customer",
            "brantwick",
            "--po",
            "BE-PO-88121",
            "--quantity",
            "20 t",
            "--html",
        ],
        &[0],
    ));
    v.push(step(
        "certify a shipment for a customer",
        &[
            "certify",
            "F2611-B04",
            "--customer",
            "quillon",
            "--po",
            "QAS-5530",
            "--quantity",
            "8 drums",
        ],
        &[0],
    ));
    v.push(step(
        "certify a shipment for a customer",
        &[
            "certify",
            "F2611-C04",
            "--customer",
            "kessel",
            "--po",
            "KD/2026/417",
            "--quantity",
            "12 t",
        ],
        &[0],
    ));
    v.push(step(
        "refuse a lot that misses a customer's tighter window",
        &["certify", "F2611-D03", "--customer", "brantwick"],
        &[1],
    ));
    for (code, file) in [
        ("PD-2000", "pd-2000"),
        ("PB-4800", "pb-4800"),
        ("SPC-35", "spc-35"),
    ] {
        let report = format!("outputs/{file}-trend.pdf");
        v.push(Step {
            what: "trend every property of a product, with the PDF report",
            args: ["trend", code, "--report", report.as_str()]
                .iter()
                .map(|s| s.to_string())
                .collect(),
            expect: &[0, 1],
        });
    }
    v.push(step(
        "chart the drifting hydroxyl value",
        &[
            "trend",
            "PD-2000",
            "--property",
            "hydroxyl_value",
            "--chart",
            "outputs/pd-2000-hydroxyl-value.svg",
            "--png",
        ],
        &[0, 1],
    ));
    v.push(step(
        "customer service: what is the Mn of lot F2611-D05?",
        &["lookup", "F2611-D05"],
        &[0],
    ));
    v.push(step(
        "customer service: PD-2000 lots with Mn 1950-2050 and AV at most 0.5",
        &[
            "find",
            "--product",
            "PD-2000",
            "--where",
            "mn=1950..2050",
            "--where",
            "acid_value=..0.5",
            "--status",
            "released",
        ],
        &[0],
    ));
    v.push(step(
        "customer service: which SPC-35 lots can go to Marlpit?",
        &["find", "--product", "SPC-35", "--customer", "marlpit"],
        &[0],
    ));
    v.push(step(
        "certify a delivery of two lots on a new purchase order: one certificate, a column per lot",
        &[
            "certify",
            "F2611-D04",
            "F2611-D05",
            "--customer",
            "brantwick",
            "--po",
            "BE-PO-88164",
            "--quantity",
            "2 × 20 t",
        ],
        &[0],
    ));
    v.push(step(
        "customer service: what did we ship to Brantwick?",
        &["shipments", "--customer", "brantwick"],
        &[0],
    ));
    v.push(step(
        "fit a cook and predict its end point",
        &[
            "cook",
            "demo-lots/cooks/pd2000-200-a.csv",
            "--recipe",
            "specs/recipes/pd-2000.toml",
            "--target-av",
            "1.0",
            "--chart",
            "outputs/cook.svg",
        ],
        &[0],
    ));
    v.push(step(
        "size a correction for a batch whose hydroxyl value is low",
        &[
            "adjust",
            "--recipe",
            "specs/recipes/pd-2000.toml",
            "--batch-kg",
            "9740",
            "--av",
            "1.1",
            "--ohv",
            "50.4",
            "--target-ohv",
            "56",
        ],
        &[0],
    ));
    v.push(step(
        "check that the whole record is intact",
        &["verify"],
        &[0],
    ));
    v
}

/// Output file name of step `n`: the command and its first argument that is not a flag or a
/// flag's value, e.g. `03-release-history-spc-35.txt`, `15-find-spc-35.txt`.
fn slug(n: usize, args: &[String]) -> String {
    let mut parts = vec![args[0].clone()];
    let mut skip = false;
    for a in &args[1..] {
        if skip {
            skip = false;
            continue;
        }
        if a.starts_with("--") {
            if matches!(a.as_str(), "--product" | "--customer") {
                continue;
            }
            skip = !matches!(a.as_str(), "--no-certificates" | "--html" | "--png");
            continue;
        }
        let stem = std::path::Path::new(a)
            .file_stem()
            .map_or(a.clone(), |s| s.to_string_lossy().to_string());
        parts.push(stem);
        break;
    }
    let name: String = parts
        .join("-")
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' {
                c.to_ascii_lowercase()
            } else {
                '-'
            }
        })
        .collect();
    format!("{n:02}-{name}.txt")
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let dir = &args.dir;
    crate::record::workspace::prepare_demo(dir)?;
    let outputs = dir.join("outputs");
    std::fs::create_dir_all(&outputs).map_err(|e| Error::io(&outputs, "creating folder", e))?;
    let exe = std::env::current_exe()
        .context("cannot find the resinlot executable to run the demo steps")?;
    let steps = steps();
    let bar = indicatif::ProgressBar::new(steps.len() as u64);
    bar.set_style(
        indicatif::ProgressStyle::with_template("demo {bar:30} {pos}/{len} {msg}")
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    let mut report = format!("Demo workspace: {}\n\n", dir.display());
    let mut all_ok = true;
    for (i, s) in steps.iter().enumerate() {
        bar.set_message(s.what);
        let out_name = slug(i + 1, &s.args);
        let code = run_step(&exe, dir, &s.args, &outputs.join(&out_name))?;
        // Record what the demo has written so far, so a later rebuild deletes only that.
        crate::record::workspace::seal_demo(dir)?;
        let ok = s.expect.contains(&code);
        all_ok &= ok;
        report.push_str(&format!(
            "{:>2}. {}\n    resinlot {}\n    exit {code}{}; output in outputs/{out_name}\n",
            i + 1,
            s.what,
            s.args
                .iter()
                .map(|a| if a.contains(' ') {
                    format!("\"{a}\"")
                } else {
                    a.clone()
                })
                .collect::<Vec<_>>()
                .join(" "),
            if ok { "" } else { " (UNEXPECTED)" },
        ));
        bar.inc(1);
    }
    bar.finish_and_clear();
    report.push_str(&format!(
        "\nWhere to look:\n  trend files        {}\n  certificates       {}\n  charts and reports {}\n",
        dir.join("register").display(),
        dir.join("certificates").display(),
        outputs.display()
    ));
    report.push_str(if all_ok {
        "Every step behaved as the demo scenario intends.\n"
    } else {
        "Some steps did not behave as intended: see the outputs marked UNEXPECTED.\n"
    });
    crate::support::output::print(&report)?;
    Ok(if all_ok {
        Outcome::AllGood
    } else {
        Outcome::FellShort
    })
}

fn run_step(exe: &Path, dir: &Path, args: &[String], out: &Path) -> anyhow::Result<i32> {
    let file = std::fs::File::create(out).map_err(|e| Error::io(out, "creating", e))?;
    let err = file
        .try_clone()
        .map_err(|e| Error::io(out, "creating", e))?;
    let status = Command::new(exe)
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .stdout(Stdio::from(file))
        .stderr(Stdio::from(err))
        .status()
        .with_context(|| format!("cannot run demo step resinlot {}", args.join(" ")))?;
    Ok(status.code().unwrap_or(-1))
}

#[cfg(test)]
mod tests {
    #[test]
    fn step_output_names_are_readable() {
        let a = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        assert_eq!(
            super::slug(
                3,
                &a(&[
                    "release",
                    "demo-lots/history-spc-35.csv",
                    "--no-certificates"
                ])
            ),
            "03-release-history-spc-35.txt"
        );
        assert_eq!(
            super::slug(
                15,
                &a(&["find", "--product", "SPC-35", "--customer", "marlpit"])
            ),
            "15-find-spc-35.txt"
        );
        assert_eq!(
            super::slug(17, &a(&["adjust", "--recipe", "r.toml", "--av", "1"])),
            "17-adjust.txt"
        );
        assert_eq!(super::slug(18, &a(&["verify"])), "18-verify.txt");
        assert_eq!(
            super::slug(17, &a(&["shipments", "--customer", "brantwick"])),
            "17-shipments-brantwick.txt"
        );
    }
}
