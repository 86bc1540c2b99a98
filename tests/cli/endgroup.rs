//! Integration tests of `resinlot endgroup` (issue #2).

use crate::common;

use common::Workspace;
use predicates::prelude::*;

#[test]
fn json_keys_with_recipe() {
    let w = Workspace::new();
    let out = w
        .cmd()
        .args([
            "endgroup",
            "--av",
            "0.6",
            "--ohv",
            "55.2",
            "--raw-ohv",
            "--av-u",
            "0.05",
            "--ohv-u",
            "0.8",
        ])
        .args(["--recipe", "specs/recipes/tp-2000.toml", "--json"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for key in [
        "mn",
        "mn_uncertainty",
        "hydroxyl_value_corrected",
        "hydroxyl_equivalent_weight",
        "initial_acid_value",
        "initial_hydroxyl_value",
        "extent_of_reaction",
        "water_released_kg",
        "batch_mass_kg",
        "predicted_hydroxyl_value",
        "stoichiometric_ratio",
        "average_functionality",
        "xn_carothers",
        "gel_point_carothers",
        "mn_recipe",
    ] {
        assert!(v.get(key).is_some(), "missing key {key}");
    }
    // Acidity correction (ISO 4629-2): 55.2 + 0.6.
    assert!((v["hydroxyl_value_corrected"].as_f64().unwrap() - 55.8).abs() < 1e-12);
    assert!(
        v["gel_point_carothers"].is_null(),
        "linear charge: no gel point"
    );
}

#[test]
fn negative_value_is_refused() {
    Workspace::new()
        .cmd()
        .args(["endgroup", "--av", "-1", "--ohv", "55"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "acid value (--av): -1 is negative",
        ));
}

#[test]
fn non_finite_value_is_refused() {
    Workspace::new()
        .cmd()
        .args(["endgroup", "--av", "0.5", "--ohv", "inf"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("not a finite number"));
}

/// Issue #13 item 20: `--av 1e308` gave Mn 0; values outside physical ranges are refused.
#[test]
fn value_outside_physical_range_is_refused_issue_13() {
    Workspace::new()
        .cmd()
        .args(["endgroup", "--av", "1e308", "--ohv", "55"])
        .assert()
        .code(2)
        .stdout("")
        .stderr(predicate::str::contains("acid value (--av): 100000000"))
        .stderr(predicate::str::contains(
            "Enter a value from 0 to 2000 mg KOH/g.",
        ));
}

#[test]
fn av_above_initial_is_refused() {
    Workspace::new()
        .cmd()
        .args([
            "endgroup",
            "--av",
            "500",
            "--ohv",
            "55",
            "--recipe",
            "specs/recipes/tp-2000.toml",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "above the recipe's initial acid value",
        ));
}

#[test]
fn recipe_unknown_key_names_line_and_column() {
    let w = Workspace::new();
    w.write("r.toml", "name = 'x'\n[[component]]\nname = 'aa'\nmass_kg = 1\nmolar_mass = 146.14\nacid_groups = 2\nfoo = 1\n");
    w.cmd()
        .args(["endgroup", "--av", "1", "--ohv", "55", "--recipe", "r.toml"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("r.toml:7:1"))
        .stderr(predicate::str::contains("foo"));
}

#[test]
fn empty_recipe_is_refused() {
    let w = Workspace::new();
    w.write("r.toml", "name = 'x'\n");
    w.cmd()
        .args(["endgroup", "--av", "1", "--ohv", "55", "--recipe", "r.toml"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("no [[component]] entries"));
}

#[test]
fn recipe_without_hydroxyl_is_refused() {
    let w = Workspace::new();
    w.write("r.toml", "name = 'x'\n[[component]]\nname = 'aa'\nmass_kg = 1\nmolar_mass = 146.14\nacid_groups = 2\n");
    w.cmd()
        .args(["endgroup", "--av", "1", "--ohv", "55", "--recipe", "r.toml"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "no component carries hydroxyl groups",
        ));
}

#[test]
fn help_states_units() {
    Workspace::new()
        .cmd()
        .args(["endgroup", "--help"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("mg KOH/g"))
        .stdout(predicate::str::contains("Exit status"));
}

#[test]
fn one_uncertainty_without_the_other_is_refused() {
    Workspace::new()
        .cmd()
        .args(["endgroup", "--av", "0.5", "--ohv", "55", "--ohv-u", "0.8"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "only one of the two uncertainties",
        ));
}

fn pb_recipe() -> String {
    concat!(env!("CARGO_MANIFEST_DIR"), "/specs/recipes/pb-4800.toml").to_string()
}

#[test]
fn batch_past_the_gel_point_is_flagged_and_exits_1_issue_18() {
    // PB-4800 (invented demo recipe): statistical gel point p_c 0.99926 at AV 0.35.
    Workspace::new()
        .cmd()
        .args(["endgroup", "--av", "0.3", "--ohv", "40", "--recipe", &pb_recipe()])
        .assert()
        .code(1)
        .stdout(predicate::str::contains(
            "GEL WARNING: the batch (p = 0.99936) is at or past the statistical gel point p_c = 0.99926",
        ))
        .stdout(predicate::str::contains("not meaningful for a gelled batch"));
    let out = Workspace::new()
        .cmd()
        .args([
            "endgroup",
            "--av",
            "0.5",
            "--ohv",
            "40",
            "--json",
            "--recipe",
            &pb_recipe(),
        ])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["gel_state"], "near");
    assert!(v["gel_warning"]
        .as_str()
        .unwrap()
        .starts_with("GEL WARNING"));
}

#[test]
fn alkyd_with_benzoic_acid_gels_at_0_866_issue_18() {
    // Issue #18's alkyd (test fixture): glycerol 2, phthalic anhydride 2, benzoic acid 1 mol;
    // Stockmayer's condition with benzoic acid as a group consumer gives √3/2 = 0.8660.
    let w = Workspace::new();
    w.write(
        "alkyd.toml",
        "name = 'alkyd test charge'\n\
         [[component]]\nname = 'glycerol'\nmass_kg = 0.184188\nmolar_mass = 92.094\nhydroxyl_groups = 3\n\
         [[component]]\nname = 'phthalic anhydride'\nmass_kg = 0.29624\nmolar_mass = 148.12\nacid_groups = 2\nanhydride = true\n\
         [[component]]\nname = 'benzoic acid'\nmass_kg = 0.12212\nmolar_mass = 122.12\nacid_groups = 1\n",
    );
    let out = w
        .cmd()
        .args([
            "endgroup",
            "--av",
            "150",
            "--ohv",
            "150",
            "--json",
            "--recipe",
            "alkyd.toml",
        ])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let p_c = v["gel_point_statistical"].as_f64().unwrap();
    assert!((p_c - 0.866).abs() <= 0.001, "{p_c}");
}

#[test]
fn gel_margin_without_recipe_is_refused() {
    Workspace::new()
        .cmd()
        .args([
            "endgroup",
            "--av",
            "1",
            "--ohv",
            "50",
            "--gel-margin",
            "0.01",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--gel-margin"))
        .stderr(predicate::str::contains("--recipe"));
}

#[test]
fn ohv_method_table_decides_the_correction_issue_18() {
    // ASTM E1899 measures OHV + AV, so 56.4 raw at AV 0.6 is OHV 55.8; an acetylation method
    // (ISO 4629-2, the default) measures OHV − AV: 56.4 + 0.6 = 57.0.
    let ohv = |extra: &[&str]| {
        let out = Workspace::new()
            .cmd()
            .args([
                "endgroup",
                "--av",
                "0.6",
                "--ohv",
                "56.4",
                "--raw-ohv",
                "--json",
            ])
            .args(extra)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(0));
        let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        (
            v["hydroxyl_value_corrected"].as_f64().unwrap(),
            v["acidity_correction"].as_str().unwrap().to_string(),
        )
    };
    let (e1899, how) = ohv(&["--ohv-method", "ASTM E1899-16"]);
    assert!(
        (e1899 - 55.8).abs() < 1e-12 && how == "subtract",
        "{e1899} {how}"
    );
    let (iso, how) = ohv(&["--ohv-method", "ISO 4629-2"]);
    assert!((iso - 57.0).abs() < 1e-12 && how == "add", "{iso} {how}");
    let (default, _) = ohv(&[]);
    assert!((default - 57.0).abs() < 1e-12);
}

#[test]
fn unknown_ohv_method_is_refused() {
    Workspace::new()
        .cmd()
        .args([
            "endgroup",
            "--av",
            "0.6",
            "--ohv",
            "56.4",
            "--raw-ohv",
            "--ohv-method",
            "ISO 9999",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--ohv-method"))
        .stderr(predicate::str::contains(
            "'ISO 9999' is not in resinlot's table",
        ))
        .stderr(predicate::str::contains("ASTM E1899"));
}

#[test]
fn ohv_method_needs_raw_ohv() {
    Workspace::new()
        .cmd()
        .args([
            "endgroup",
            "--av",
            "0.6",
            "--ohv",
            "56.4",
            "--ohv-method",
            "ASTM E1899",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--raw-ohv"));
}
