//! Integration tests of `resinlot cook` and `resinlot adjust`: the real binary in temp dirs.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use predicates::prelude::*;
use serde_json::Value;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn recipe() -> PathBuf {
    root().join("specs/recipes/pd-2000.toml")
}

fn demo(name: &str) -> PathBuf {
    root().join("demo-lots/cooks").join(name)
}

fn bin() -> Command {
    Command::cargo_bin("resinlot").unwrap()
}

fn json(out: &[u8]) -> Value {
    serde_json::from_slice(out).unwrap()
}

/// Acid value at extent p for the PD-2000 charge, by the first-principles water balance
/// (Odian, Principles of Polymerization, §2-1): esters x = p·E_A, AV = 56.1(E_A - x)/(m0 - w·x).
fn pd_av(p: f64) -> f64 {
    let e_a = 6210.0 * 1000.0 / 146.14 * 2.0;
    let m0 = 6210.0 + 5060.0;
    let x = p * e_a;
    56.1 * (e_a - x) / (m0 - 0.018015 * x)
}

/// Group concentrations of the demo recipe, as the library computes them.
fn groups() -> resinlot::cook::kinetics::Groups {
    let r = resinlot::chem::recipe::Recipe::load(&recipe()).unwrap();
    resinlot::cook::fit::groups_of(&r.charge())
}

/// A synthetic cook (test fixture, invented numbers): early points at p = 0.5..0.75, then the
/// order-n law with the recipe's hydroxyl excess, Y(p) = y1 + slope·(t - 60), on a grid of p
/// with a small alternating disturbance on (1-p).
fn synthetic(dir: &Path, order: f64, slope: f64, y1: f64) -> PathBuf {
    let g = groups();
    let mut text = String::from("elapsed_min,acid_value\n");
    for (t, p) in [(0.0, 0.5), (20.0, 0.62), (40.0, 0.75)] {
        text.push_str(&format!("{t},{:.6}\n", pd_av(p)));
    }
    for i in 0..14 {
        let one_minus_p = 0.15 * (0.003f64 / 0.15).powf(f64::from(i) / 13.0);
        let p = 1.0 - one_minus_p;
        let t = 60.0 + (resinlot::cook::kinetics::linearised_with_excess(p, order, g) - y1) / slope;
        let noisy = one_minus_p * (1.0 + 0.003 * f64::from(i % 3) - 0.003);
        text.push_str(&format!("{t:.3},{:.6}\n", pd_av(1.0 - noisy)));
    }
    let path = dir.join(format!("synthetic-{order}.csv"));
    std::fs::write(&path, text).unwrap();
    path
}

#[test]
fn demo_cook_picks_third_order_and_draws_the_chart() {
    let dir = tempfile::tempdir().unwrap();
    let chart = dir.path().join("cook.svg");
    let out = bin()
        .arg("cook")
        .arg(demo("pd2000-220-a.csv"))
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1.0", "--json", "--chart"])
        .arg(&chart)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let v = json(&out);
    for key in [
        "order",
        "slope_per_min",
        "intercept",
        "r_squared",
        "excluded",
        "rate_constant",
        "predicted_elapsed_min",
        "predicted_elapsed_min_pi95",
        "predicted_mn",
    ] {
        assert!(v.get(key).is_some(), "missing {key}");
    }
    // The demo cooks were generated from the self-catalysed law (demo-lots/cooks/README.md).
    assert_eq!(v["order"], 3.0);
    assert_eq!(v["excluded"], serde_json::json!([0, 1, 2, 3]));
    let t = v["predicted_elapsed_min"].as_f64().unwrap();
    let pi = v["predicted_elapsed_min_pi95"].as_array().unwrap();
    assert!(pi[0].as_f64().unwrap() < t && t < pi[1].as_f64().unwrap());
    assert!(v["caution"]
        .as_str()
        .unwrap()
        .contains("next titration decides"));
    let svg = std::fs::read_to_string(&chart).unwrap();
    assert!(svg.contains("<svg") && svg.contains("Y, order 3 law with hydroxyl excess"));
}

/// Issue #19: the cook chart shows acid values and carries the caution; a .png name gets a PNG.
#[test]
fn issue_19_cook_chart_has_an_acid_value_panel_the_caution_and_a_png_form() {
    let dir = tempfile::tempdir().unwrap();
    for name in ["cook.svg", "cook.png"] {
        let chart = dir.path().join(name);
        bin()
            .arg("cook")
            .arg(demo("pd2000-200-a.csv"))
            .arg("--recipe")
            .arg(recipe())
            .args(["--target-av", "1.0", "--chart"])
            .arg(&chart)
            .assert()
            .success();
        let bytes = std::fs::read(&chart).unwrap();
        if name.ends_with(".png") {
            assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
        } else {
            let svg = String::from_utf8(bytes).unwrap();
            assert!(svg.contains(">Acid value (mg KOH/g)<"), "{svg}");
            assert!(svg.contains("class=\"extrapolated\""));
            assert!(svg.contains("CAUTION: these figures advise work at a hot reactor"));
        }
    }
}

#[test]
fn text_report_lists_excluded_points_and_cautions() {
    bin()
        .arg("cook")
        .arg(demo("pd2000-200-a.csv"))
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1.0"])
        .assert()
        .success()
        .stdout(predicate::str::contains("left out: line 4"))
        .stdout(predicate::str::contains("3 (chosen)"))
        .stdout(predicate::str::contains("Viscosity at the end point"))
        .stdout(
            predicate::str::contains("local codes").or(predicate::str::contains("Local codes")),
        );
}

#[test]
fn synthetic_cooks_round_trip_through_the_binary() {
    // Each law of Odian §2-2a, synthesised with a known slope: the binary must recover the
    // order, the slope within 2 % and the time to AV 2.0 within 3 %.
    let dir = tempfile::tempdir().unwrap();
    // y1 = Y at p = 0.85, the first late sample (at 60 min).
    let g = groups();
    for (order, slope) in [(2.0, 0.1), (2.5, 1.0), (3.0, 10.0)] {
        let y1 = resinlot::cook::kinetics::linearised_with_excess(0.85, order, g);
        let file = synthetic(dir.path(), order, slope, y1);
        let out = bin()
            .arg("cook")
            .arg(&file)
            .arg("--recipe")
            .arg(recipe())
            .args(["--target-av", "2.0", "--json"])
            .assert()
            .success()
            .get_output()
            .stdout
            .clone();
        let v = json(&out);
        assert_eq!(v["order"].as_f64().unwrap(), order, "{v}");
        let got = v["slope_per_min"].as_f64().unwrap();
        assert!(
            (got / slope - 1.0).abs() < 0.02,
            "order {order}: slope {got}"
        );
        let p = v["target_extent"].as_f64().unwrap();
        let truth = 60.0
            + (resinlot::cook::kinetics::linearised_with_excess(p, order, groups()) - y1) / slope;
        let t = v["predicted_elapsed_min"].as_f64().unwrap();
        assert!(
            (t / truth - 1.0).abs() < 0.03,
            "order {order}: {t} vs {truth}"
        );
        assert_eq!(v["excluded"], serde_json::json!([0, 1, 2]));
    }
}

#[test]
fn forced_order_is_used() {
    let out = bin()
        .arg("cook")
        .arg(demo("pd2000-220-b.csv"))
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1.0", "--order", "2", "--json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let v = json(&out);
    assert_eq!(v["order"], 2.0);
    assert_eq!(v["order_forced"], true);
}

#[test]
fn target_mn_is_converted_through_the_recipe() {
    let out = bin()
        .arg("cook")
        .arg(demo("pd2000-220-a.csv"))
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-mn", "1800", "--json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let v = json(&out);
    assert!((v["predicted_mn"].as_f64().unwrap() - 1800.0).abs() < 1e-6);
}

fn cook_file(text: &str) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("s.csv");
    std::fs::write(&p, text).unwrap();
    (dir, p)
}

#[test]
fn time_going_backwards_is_refused_and_nothing_is_written() {
    let (dir, p) = cook_file("elapsed_min,acid_value\n0,100\n60,20\n50,10\n120,5\n");
    let chart = dir.path().join("c.svg");
    bin()
        .arg("cook")
        .arg(&p)
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1", "--chart"])
        .arg(&chart)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("s.csv:4, field elapsed_min"))
        .stderr(predicate::str::contains(
            "not later than the previous sample",
        ));
    assert!(!chart.exists());
}

#[test]
fn rising_acid_value_is_a_warning() {
    let text = format!(
        "elapsed_min,acid_value\n0,{}\n60,{}\n120,{}\n180,{}\n240,{}\n",
        pd_av(0.9),
        pd_av(0.97),
        pd_av(0.968),
        pd_av(0.985),
        pd_av(0.99)
    );
    let (_d, p) = cook_file(&text);
    bin()
        .arg("cook")
        .arg(&p)
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1"])
        .assert()
        .success()
        .stdout(predicate::str::contains("s.csv:4, field acid_value"))
        .stdout(predicate::str::contains("acid value rose"));
}

#[test]
fn fewer_than_three_kept_points_is_refused() {
    let text = format!(
        "elapsed_min,acid_value\n0,{}\n60,{}\n120,{}\n180,{}\n",
        pd_av(0.5),
        pd_av(0.7),
        pd_av(0.9),
        pd_av(0.95)
    );
    let (_d, p) = cook_file(&text);
    bin()
        .arg("cook")
        .arg(&p)
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("s.csv"))
        .stderr(predicate::str::contains("at least three"))
        .stderr(predicate::str::contains("--exclude-below"));
}

#[test]
fn target_already_passed_is_a_warning() {
    bin()
        .arg("cook")
        .arg(demo("pd2000-220-a.csv"))
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "3.5"])
        .assert()
        .success()
        .stdout(predicate::str::contains("already reached"));
}

#[test]
fn acid_value_above_the_charge_is_refused_with_line() {
    let (_d, p) = cook_file("elapsed_min,acid_value\n0,100\n60,500\n");
    bin()
        .arg("cook")
        .arg(&p)
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("s.csv:3, field acid_value"))
        .stderr(predicate::str::contains("initial acid value"));
}

#[test]
fn unknown_column_is_refused() {
    let (_d, p) = cook_file("elapsed_min,acid_value,colour\n0,100,red\n");
    bin()
        .arg("cook")
        .arg(&p)
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("s.csv:1"))
        .stderr(predicate::str::contains("unknown column 'colour'"));
}

#[test]
fn bad_number_names_line_and_field() {
    let (_d, p) = cook_file("elapsed_min,acid_value\n0,1O0\n");
    bin()
        .arg("cook")
        .arg(&p)
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("s.csv:2, field acid_value"))
        .stderr(predicate::str::contains("'1O0' is not a number"));
}

#[test]
fn several_files_need_arrhenius() {
    bin()
        .arg("cook")
        .arg(demo("pd2000-220-a.csv"))
        .arg(demo("pd2000-220-b.csv"))
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--arrhenius"));
}

#[test]
fn threshold_of_one_or_more_is_refused() {
    bin()
        .arg("cook")
        .arg(demo("pd2000-220-a.csv"))
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1", "--exclude-below", "1.2"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--exclude-below"));
}

#[test]
fn missing_target_is_a_usage_error() {
    bin()
        .arg("cook")
        .arg(demo("pd2000-220-a.csv"))
        .arg("--recipe")
        .arg(recipe())
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--target-av"));
}

#[test]
fn arrhenius_on_the_demo_cooks() {
    let mut cmd = bin();
    cmd.arg("cook");
    for f in [
        "pd2000-200-a.csv",
        "pd2000-200-b.csv",
        "pd2000-220-a.csv",
        "pd2000-220-b.csv",
    ] {
        cmd.arg(demo(f));
    }
    let out = cmd
        .arg("--recipe")
        .arg(recipe())
        .args(["--arrhenius", "--json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let v = json(&out);
    assert_eq!(v["order"], 3.0);
    // The demo generator used slope ratios of about 1.9 between 220 and 200 °C, i.e. an
    // activation energy near 60 kJ/mol (demo-lots/cooks/make_cooks.py).
    let ea = v["activation_energy_kj_per_mol"].as_f64().unwrap();
    assert!((45.0..75.0).contains(&ea), "{ea}");
    assert!(v["activation_energy_se"].as_f64().unwrap() > 0.0);
}

#[test]
fn arrhenius_needs_temperatures() {
    let (d, p) = cook_file("elapsed_min,acid_value\n0,100\n");
    let q = d.path().join("t.csv");
    std::fs::write(&q, "elapsed_min,acid_value\n0,100\n").unwrap();
    bin()
        .arg("cook")
        .arg(&p)
        .arg(&q)
        .arg(demo("pd2000-220-a.csv"))
        .arg("--recipe")
        .arg(recipe())
        .arg("--arrhenius")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("s.csv:2, field temperature_c"));
}

#[test]
fn arrhenius_needs_three_cooks() {
    bin()
        .arg("cook")
        .arg(demo("pd2000-220-a.csv"))
        .arg(demo("pd2000-200-a.csv"))
        .arg("--recipe")
        .arg(recipe())
        .arg("--arrhenius")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("at least three"));
}

fn adjust(extra: &[&str]) -> assert_cmd::assert::Assert {
    bin()
        .arg("adjust")
        .arg("--recipe")
        .arg(recipe())
        .args(["--batch-kg", "9740", "--av", "1.1"])
        .args(extra)
        .assert()
}

#[test]
fn adjust_adds_diol_and_balances() {
    let out = adjust(&["--ohv", "50.4", "--target-ohv", "56", "--json"])
        .success()
        .get_output()
        .stdout
        .clone();
    let v = json(&out);
    for key in [
        "component",
        "add_kg",
        "new_acid_value",
        "new_hydroxyl_value",
        "new_mn",
    ] {
        assert!(v.get(key).is_some(), "missing {key}");
    }
    assert_eq!(v["component"], "diethylene glycol");
    // First-principles group balance: x = m(OHV* - OHV)/(OHV_DEG - OHV*), OHV_DEG = 112200/106.12.
    let ohv_deg = 112_200.0 / 106.12;
    let x = 9740.0 * (56.0 - 50.4) / (ohv_deg - 56.0);
    assert!((v["add_kg"].as_f64().unwrap() / x - 1.0).abs() < 1e-9);
    assert!((v["new_hydroxyl_value"].as_f64().unwrap() - 56.0).abs() < 1e-9);
    let g = &v["hydroxyl_groups_mol"];
    let lhs = g["before"].as_f64().unwrap() + g["added"].as_f64().unwrap();
    assert!((lhs / g["after"].as_f64().unwrap() - 1.0).abs() < 1e-9);
    assert!(v["caution"]
        .as_str()
        .unwrap()
        .contains("operating procedure"));
}

#[test]
fn adjust_text_shows_assumption_and_cautions() {
    adjust(&["--ohv", "60.2", "--target-ohv", "56"])
        .success()
        .stdout(predicate::str::contains("adipic acid"))
        .stdout(predicate::str::contains("Assumption:"))
        .stdout(predicate::str::contains("inerting"))
        .stdout(predicate::str::contains("flash point"))
        .stdout(predicate::str::contains("next titration decides"))
        .stdout(predicate::str::contains(
            "process-safety rules take precedence",
        ));
}

#[test]
fn adjust_unknown_component_is_refused() {
    adjust(&[
        "--ohv",
        "50.4",
        "--target-ohv",
        "56",
        "--diol",
        "neopentyl glycol",
    ])
    .code(2)
    .stderr(predicate::str::contains(
        "'neopentyl glycol' is not a component",
    ))
    .stderr(predicate::str::contains("diethylene glycol"));
}

#[test]
fn adjust_diol_to_lower_is_refused() {
    adjust(&[
        "--ohv",
        "60",
        "--target-ohv",
        "56",
        "--diol",
        "diethylene glycol",
    ])
    .code(2)
    .stderr(predicate::str::contains("--diol"))
    .stderr(predicate::str::contains("--acid"));
}

#[test]
fn adjust_negative_mass_is_refused() {
    bin()
        .arg("adjust")
        .arg("--recipe")
        .arg(recipe())
        .args([
            "--batch-kg",
            "-5",
            "--av",
            "1",
            "--ohv",
            "50",
            "--target-ohv",
            "56",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--batch-kg"))
        .stderr(predicate::str::contains("negative"));
}

#[test]
fn adjust_unreachable_target_is_refused() {
    adjust(&["--ohv", "50", "--target-ohv", "1500"])
        .code(2)
        .stderr(predicate::str::contains(
            "not below the hydroxyl value of pure",
        ));
}

#[test]
fn late_outlier_is_flagged_and_kept() {
    // A synthetic third-order cook (test fixture) with one late titration 25 % off in (1-p).
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("elapsed_min,acid_value\n");
    let g = groups();
    for i in 0..14 {
        let one_minus_p = 0.15 * (0.003f64 / 0.15).powf(f64::from(i) / 13.0);
        let t = (resinlot::cook::kinetics::linearised_with_excess(1.0 - one_minus_p, 3.0, g)
            - 15.0)
            / 10.0;
        let mut noisy = one_minus_p * (1.0 + 0.002 * f64::from(i % 3));
        if i == 10 {
            noisy *= 1.25;
        }
        text.push_str(&format!("{t:.3},{:.6}\n", pd_av(1.0 - noisy)));
    }
    let path = dir.path().join("o.csv");
    std::fs::write(&path, text).unwrap();
    let out = bin()
        .arg("cook")
        .arg(&path)
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1.0", "--order", "3", "--json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let v = json(&out);
    assert_eq!(v["outliers"][0]["index"], 10, "{v}");
    assert_eq!(v["outliers"][0]["line"], 12);
    assert_eq!(v["excluded"], serde_json::json!([]));
    assert!(v["samples"][10]["kept"].as_bool().unwrap());
}

/// Issue #13 item 20: `adjust --batch-kg 1e308` printed "Add inf kg"; a batch outside 1 kg to
/// 1000 t is refused before any work.
#[test]
fn adjust_refuses_an_absurd_batch_mass_issue_13() {
    bin()
        .arg("adjust")
        .arg("--recipe")
        .arg(recipe())
        .args(["--batch-kg", "1e308", "--av", "1.1", "--ohv", "50.4"])
        .args(["--target-ohv", "56"])
        .assert()
        .code(2)
        .stdout("")
        .stderr(predicates::str::contains("batch mass (--batch-kg)"))
        .stderr(predicates::str::contains("from 1 to 1000000 kg"));
}

/// Issue #13 item 1: `cook ... --chart register/SPC-35.csv` replaced the trend file.
#[test]
fn cook_chart_never_lands_in_the_register_issue_13() {
    let w = crate::common::Workspace::new();
    std::fs::create_dir_all(w.path("register")).unwrap();
    w.write("register/SPC-35.csv", "seq,lot\n");
    let samples = w.write(
        "c.csv",
        "elapsed_min,acid_value\n0,60\n60,30\n120,20\n180,15\n240,12\n300,10\n",
    );
    w.cmd()
        .arg("cook")
        .arg(&samples)
        .args(["--recipe", "specs/recipes/tp-2000.toml", "--target-av", "5"])
        .args(["--chart", "register/SPC-35.csv"])
        .assert()
        .code(2)
        .stderr(predicates::str::contains("into the record folder register"));
    assert_eq!(
        std::fs::read_to_string(w.path("register/SPC-35.csv")).unwrap(),
        "seq,lot\n"
    );
}

/// The PB-4800 demo recipe (invented), whose statistical gel point is p_c 0.99926 at AV 0.35.
fn pb_recipe() -> PathBuf {
    root().join("specs/recipes/pb-4800.toml")
}

/// A PB-4800 cook (test fixture, invented numbers): AV falling from 250 to 4 over 9 hours.
const PB_COOK: &str = "elapsed_min,acid_value\n0,250\n60,120\n120,60\n180,30\n240,18\n\
300,12\n360,8.5\n420,6.4\n480,5.0\n540,4.0\n";

fn pb_cook(extra: &[&str]) -> (tempfile::TempDir, assert_cmd::assert::Assert) {
    let (dir, path) = cook_file(PB_COOK);
    let a = bin()
        .arg("cook")
        .arg(&path)
        .arg("--recipe")
        .arg(pb_recipe())
        .args(extra)
        .assert();
    (dir, a)
}

#[test]
fn cook_target_past_gel_point_exits_1_issue_18() {
    let dir = tempfile::tempdir().unwrap();
    let chart = dir.path().join("pb.svg");
    let (_d, a) = pb_cook(&["--target-av", "0.2", "--chart", chart.to_str().unwrap()]);
    a.code(1)
        .stdout(predicate::str::is_empty())
        .stderr(predicate::str::contains(
            "lies at or past the statistical gel point p_c = 0.99926",
        ))
        .stderr(predicate::str::contains("AV 0.35 mg KOH/g"))
        .stderr(predicate::str::contains("--beyond-gel"));
    assert!(!chart.exists(), "a refused cook writes no chart");
}

#[test]
fn cook_beyond_gel_flag_predicts_with_a_gel_warning_issue_18() {
    let (_d, a) = pb_cook(&["--target-av", "0.2", "--beyond-gel"]);
    a.success()
        .stdout(predicate::str::contains(
            "GEL WARNING: the target AV 0.2 mg KOH/g (p = 0.99957) is at or past",
        ))
        .stdout(predicate::str::contains(
            "not meaningful for a gelled batch",
        ))
        .stdout(predicate::str::contains("Predicted end point"))
        .stdout(predicate::str::contains("next titration decides"))
        .stdout(predicate::str::contains(
            "process-safety rules take precedence",
        ));
    let (_d, a) = pb_cook(&["--target-av", "0.2", "--beyond-gel", "--json"]);
    let v = json(&a.success().get_output().stdout);
    assert_eq!(v["target_gel_state"], "beyond");
    assert!((v["gel"]["statistical"]["p_minority"].as_f64().unwrap() - 0.99926).abs() < 5e-6);
    assert!(v["caution"]
        .as_str()
        .unwrap()
        .contains("operating procedure"));
}

#[test]
fn cook_target_near_gel_point_warns_and_margin_is_settable_issue_18() {
    let (_d, a) = pb_cook(&["--target-av", "0.5"]);
    a.success().stdout(predicate::str::contains(
        "GEL WARNING: the target AV 0.5 mg KOH/g (p = 0.99893) is within Δp = 0.005",
    ));
    let (_d, a) = pb_cook(&["--target-av", "0.5", "--gel-margin", "0.0001"]);
    a.success()
        .stdout(predicate::str::contains("GEL WARNING").not())
        .stdout(predicate::str::contains("target clear of it"));
    let (_d, a) = pb_cook(&["--target-av", "0.5", "--gel-margin", "0.2av"]);
    a.success()
        .stdout(predicate::str::contains("within ΔAV = 0.2 mg KOH/g"));
}

#[test]
fn cook_bad_gel_margin_is_refused() {
    let (_d, a) = pb_cook(&["--target-av", "1", "--gel-margin", "2"]);
    a.code(2)
        .stderr(predicate::str::contains("--gel-margin"))
        .stderr(predicate::str::contains("0.005"));
}

#[test]
fn extrapolated_end_point_is_a_warning_issue_18() {
    // pd2000-200-a (invented demo cook): samples over 0..720 min, end point at AV 1 near
    // 1653 min = 2.3 sampled spans; pd2000-220-a reaches it within 1.3 spans.
    let out = |file: &str| {
        bin()
            .arg("cook")
            .arg(demo(file))
            .arg("--recipe")
            .arg(recipe())
            .args(["--target-av", "1.0", "--json"])
            .assert()
            .success()
            .get_output()
            .stdout
            .clone()
    };
    let v = json(&out("pd2000-200-a.csv"));
    let ratio = v["extrapolation_ratio"].as_f64().unwrap();
    let t = v["predicted_elapsed_min"].as_f64().unwrap();
    assert!((ratio - t / 720.0).abs() < 1e-9 && ratio > 2.0, "{ratio}");
    let text = v["warnings"].to_string();
    assert!(
        text.contains("sampled time spans from the first sample, beyond the limit of 2"),
        "{text}"
    );
    let v = json(&out("pd2000-220-a.csv"));
    assert!(v["extrapolation_ratio"].as_f64().unwrap() < 2.0);
    assert!(!v["warnings"].to_string().contains("sampled time spans"));
    bin()
        .arg("cook")
        .arg(demo("pd2000-200-a.csv"))
        .arg("--recipe")
        .arg(recipe())
        .args(["--target-av", "1.0"])
        .assert()
        .success()
        .stdout(predicate::str::contains("extrapolation of the rate law"))
        .stdout(predicate::str::contains("next titration decides"));
}

fn adjust_with(recipe: &Path, args: &[&str]) -> assert_cmd::assert::Assert {
    bin()
        .arg("adjust")
        .arg("--recipe")
        .arg(recipe)
        .args(args)
        .assert()
}

#[test]
fn adjust_over_five_percent_exits_1_issue_18() {
    // Issue #18: 4518 kg neopentyl glycol into 8500 kg is 53 % of the batch.
    let spc = root().join("specs/recipes/spc-35.toml");
    let args = [
        "--batch-kg",
        "8500",
        "--av",
        "3",
        "--ohv",
        "40",
        "--target-ohv",
        "400",
    ];
    adjust_with(&spc, &args)
        .code(1)
        .stdout(predicate::str::is_empty())
        .stderr(predicate::str::contains(
            "4518.0 kg neopentyl glycol, 53.2 %",
        ))
        .stderr(predicate::str::contains("limit of 5 %"));
    let mut wide = args.to_vec();
    wide.extend(["--max-addition-pct", "60"]);
    adjust_with(&spc, &wide)
        .success()
        .stdout(predicate::str::contains("4518.0 kg neopentyl glycol"))
        .stdout(predicate::str::contains("next titration decides"));
}

#[test]
fn adjust_bad_max_addition_pct_is_refused() {
    adjust(&[
        "--ohv",
        "50.4",
        "--target-ohv",
        "56",
        "--max-addition-pct",
        "-1",
    ])
    .code(2)
    .stderr(predicate::str::contains("--max-addition-pct"));
}

#[test]
fn adjust_shift_beyond_initial_ohv_exits_1_issue_18() {
    // PD-2000's charge has OHV0 = 56.1·2·(5040/106.12)/11250 = 473.7 mg KOH/g (first
    // principles); 50 → 600 is a shift of 550.
    adjust(&[
        "--ohv",
        "50",
        "--target-ohv",
        "600",
        "--max-addition-pct",
        "100",
    ])
    .code(1)
    .stderr(predicate::str::contains("change of 550.0 mg KOH/g"))
    .stderr(predicate::str::contains("initial hydroxyl value 473.7"));
}

#[test]
fn adjust_raw_ohv_is_corrected_like_endgroup_issue_18() {
    let add = |args: &[&str]| {
        json(&adjust(args).success().get_output().stdout.clone())["add_kg"]
            .as_f64()
            .unwrap()
    };
    // Acetylation raw result 49.3 at AV 1.1 is OHV 50.4 (ISO 4629-2 acidity correction).
    let raw = add(&["--ohv", "49.3", "--raw-ohv", "--target-ohv", "56", "--json"]);
    let corrected = add(&["--ohv", "50.4", "--target-ohv", "56", "--json"]);
    assert!(
        (raw / corrected - 1.0).abs() < 1e-12,
        "{raw} vs {corrected}"
    );
}

#[test]
fn adjust_near_gel_warns_and_an_addition_that_gels_is_refused_issue_18() {
    // PB-4800 (invented demo recipe) at AV 1.8 is p = 0.99615, within 0.005 of p_c 0.99926.
    let pb = pb_recipe();
    adjust_with(
        &pb,
        &[
            "--batch-kg",
            "7830",
            "--av",
            "1.8",
            "--ohv",
            "36",
            "--target-ohv",
            "40",
        ],
    )
    .success()
    .stdout(predicate::str::contains(
        "GEL WARNING: the batch now (p = 0.99615) is within Δp = 0.005",
    ))
    .stdout(predicate::str::contains("flash point"));
    // Adipic acid to bring the OHV to 26 moves the corrected charge's gel point below the
    // batch's extent: refused, nothing advised.
    adjust_with(
        &pb,
        &[
            "--batch-kg",
            "7830",
            "--av",
            "1.8",
            "--ohv",
            "36",
            "--target-ohv",
            "26",
        ],
    )
    .code(1)
    .stdout(predicate::str::is_empty())
    .stderr(predicate::str::contains(
        "at or past the statistical gel point",
    ))
    .stderr(predicate::str::contains("nothing is advised"));
}
