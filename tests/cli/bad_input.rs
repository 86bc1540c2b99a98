//! The bad-input catalogue (issue #8): every malformed file gets a clear message naming the
//! file and place, exit code 2, and leaves every file as it was.

use crate::common;

use common::{Workspace, GOOD};

/// Which command reads the file.
#[derive(Clone, Copy)]
enum Kind {
    Results,
    Spec,
    Recipe,
    Customer,
    Samples,
}

fn check(kind: Kind, contents: &[u8], needle: &str) {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    let (rel, args): (&str, Vec<&str>) = match kind {
        Kind::Results => (
            "bad.csv",
            vec![
                "release",
                "bad.csv",
                "--specs",
                "specs",
                "--register",
                "register",
                "--approver",
                "QC",
            ],
        ),
        Kind::Spec => (
            "specs/zz-bad.toml",
            vec![
                "release",
                "good.csv",
                "--specs",
                "specs",
                "--register",
                "register",
                "--approver",
                "QC",
            ],
        ),
        Kind::Recipe => (
            "bad.toml",
            vec![
                "endgroup", "--av", "1", "--ohv", "55", "--recipe", "bad.toml",
            ],
        ),
        Kind::Customer => ("specs/customers/bad.toml", vec!["specs", "check", "specs"]),
        Kind::Samples => (
            "bad.csv",
            vec![
                "cook",
                "bad.csv",
                "--recipe",
                "specs/recipes/tp-2000.toml",
                "--target-av",
                "1",
            ],
        ),
    };
    let path = w.path(rel);
    std::fs::create_dir_all(path.parent().unwrap()).unwrap();
    std::fs::write(&path, contents).unwrap();
    let before = w.snapshot();
    let out = w.cmd().args(&args).output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(
        out.status.code(),
        Some(2),
        "{rel} (expecting {needle}): {stderr}"
    );
    let name = std::path::Path::new(rel)
        .file_name()
        .unwrap()
        .to_string_lossy()
        .to_string();
    assert!(
        stderr.contains(&name),
        "message must name the file {name}: {stderr}"
    );
    assert!(stderr.contains(needle), "expected '{needle}' in: {stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert_eq!(before, w.snapshot(), "no file may change: {rel}");
}

const H: &str = "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n";

fn results(body: &str) -> Vec<u8> {
    format!("{H}{body}").into_bytes()
}

const SPEC: &str = "code = \"ZZ-1\"\nname = \"x\"\nrevision = \"A\"\neffective = 2026-01-01\nfunctionality = 2.0\ndecision_rule = \"simple\"\nretest_months = 12\n[properties.acid_value]\nlabel = \"AV\"\nunit = \"mg KOH/g\"\nmax = 1.0\ndecimals = 2\n";

const RECIPE: &str = "name = \"r\"\n[[component]]\nname = \"aa\"\nmass_kg = 146.14\nmolar_mass = 146.14\nacid_groups = 2\n[[component]]\nname = \"deg\"\nmass_kg = 106.12\nmolar_mass = 106.12\nhydroxyl_groups = 2\n";

#[test]
fn results_csv_catalogue() {
    let cases: Vec<(Vec<u8>, &str)> = vec![
        (b"".to_vec(), "empty"),
        (H.as_bytes().to_vec(), "no results"),
        (results("T1,TP-2000,2026-05-01,0.5,55"), "fields where the header has"),
        (results("T1,TP-2000,2026-05-01,0.5,55,540,9"), "fields where the header has"),
        (results("T1,TP-2000,2026-05-01,NaN,55,540"), "not a number"),
        (results("T1,TP-2000,2026-05-01,inf,55,540"), "not a number"),
        (results("T1,TP-2000,2026-05-01,-0.5,55,540"), "negative"),
        (results("T1,TP-2000,2026-05-01,1e99,55,540"), "not a number"),
        (results("T1,TP-2000,2026-05-01,99999999999999,55,540"), "implausibly large"),
        (results("T1,TP-2000,2026-05-01,=SUM(A1),55,540"), "not a number"),
        (results("T1,TP-2000,2026-05-01,0.5,55,@cmd"), "not a number"),
        (results("T1,TP-2000,2026-05-01,\"0,5\",55,540"), "decimal comma"),
        (results("T1,TP-2000,01/05/2026,0.5,55,540"), "not a date"),
        (results("T1,TP-2000,2026-02-30,0.5,55,540"), "not a date"),
        (results("T1,TP-2000,2099-01-01,0.5,55,540"), "in the future"),
        (
            b"lot,product,manufactured,acid_value,hydroxyl_value,viscosity,viscosity_temperature_c\nT1,TP-2000,2026-05-01,0.5,55,540,25\n".to_vec(),
            "more than 10 °C from the spec temperature",
        ),
        (results("../x,TP-2000,2026-05-01,0.5,55,540"), "not a usable lot id"),
        (results("a/b,TP-2000,2026-05-01,0.5,55,540"), "not a usable lot id"),
        (results(&format!("{},TP-2000,2026-05-01,0.5,55,540", "L".repeat(300))), "longer than"),
        (results("T1,TP/2000,2026-05-01,0.5,55,540"), "not a usable product code"),
        (results("T1,ZZ-9,2026-05-01,0.5,55,540"), "no spec in"),
        (results("T1,TP-2000,2026-05-01,0.5,55,540\nT1,TP-2000,2026-05-01,0.6,55,540"), "different results"),
        (b"lot,product,manufactured,acid_value,acid_value\nT1,TP-2000,2026-05-01,1,1\n".to_vec(), "appears twice"),
        (b"lot,product,manufactured,Acid Value\nT1,TP-2000,2026-05-01,1\n".to_vec(), "not a property key"),
        (b"lot,product,manufactured,mn\nT1,TP-2000,2026-05-01,2000\n".to_vec(), "computed by resinlot"),
        (b"\xff\xfelot,product\n".to_vec(), "not valid UTF-8"),
        (results("T1,TP-2000,2026-05-01,0.5,55,\"540"), "never closed"),
        (
            format!("{}\n", (0..300).map(|i| format!("c{i}")).collect::<Vec<_>>().join(",")).into_bytes(),
            "more than 200 columns",
        ),
        (b"lot,product,property,value\nT1,TP-2000,acid_value,0.5\n".to_vec(), "no manufacture date"),
        (b"lot,product,property,value,unit,manufactured\nT1,TP-2000,viscosity,5,stokes,2026-05-01\n".to_vec(), "cannot be converted"),
        (b"lot,product,property,value,replicate,manufactured\nT1,TP-2000,acid_value,0.5,1,2026-05-01\nT1,TP-2000,acid_value,0.6,1,\n".to_vec(), "replicate 1"),
    ];
    assert!(cases.len() >= 25);
    for (contents, needle) in cases {
        check(Kind::Results, &contents, needle);
    }
}

#[test]
fn spec_toml_catalogue() {
    let cases: Vec<(String, &str)> = vec![
        (SPEC[..SPEC.len() / 2].to_string(), "zz-bad.toml:"),
        (
            SPEC.replace("decimals = 2", "decimals = 2\ndecimals = 3"),
            "duplicate key",
        ),
        (SPEC.replace("max = 1.0", "max = nan"), "not finite"),
        (
            SPEC.replace("max = 1.0", "max = 1.0\nmin = 5.0"),
            "greater than max",
        ),
        (SPEC.replace("unit = \"mg KOH/g\"\n", ""), "unit is missing"),
        (
            SPEC.replace("decision_rule = \"simple\"", "decision_rule = \"strict\""),
            "unknown variant",
        ),
        (
            SPEC.replace("decision_rule = \"simple\"", "decision_rule = \"guarded\""),
            "expanded uncertainty",
        ),
        (
            SPEC.replace("code = \"ZZ-1\"", "code = \"../ZZ\""),
            "not a usable product code",
        ),
        (
            SPEC.replace("effective = 2026-01-01", "effective = \"soon\""),
            "zz-bad.toml:",
        ),
        (
            format!("{SPEC}[properties.xn]\ndecimals = 1\n"),
            "without a recipe",
        ),
        (
            format!("{SPEC}[properties.mn]\ndecimals = 0\n"),
            "cannot be computed without a measured 'hydroxyl_value'",
        ),
        (
            format!("{SPEC}recipe = \"recipes/none.toml\"\n"),
            "zz-bad.toml:",
        ),
        (
            SPEC.replace("functionality = 2.0", "functionality = -2.0"),
            "negative",
        ),
        // Issue #13 item 16: a product code that would share the certificate log's file.
        (
            SPEC.replace("code = \"ZZ-1\"", "code = \"certificates\""),
            "'certificates' is not a usable product code",
        ),
        // Issue #13 item 6: a revision or label with a line break would write a row that
        // cannot be read back; a bidirectional override would spoof text on a certificate.
        (
            SPEC.replace("revision = \"A\"", "revision = \"C\\nD\""),
            "revision: the revision cannot be used",
        ),
        (
            SPEC.replace("label = \"AV\"", "label = \"AV\\u202E\""),
            "properties.acid_value.label: the label cannot be used",
        ),
        // Issue #13 item 19: spec numbers must be finite and physically sensible.
        (
            SPEC.replace("retest_months = 12", "retest_months = 4294967295"),
            "not a usable retest interval",
        ),
        (
            SPEC.replace("functionality = 2.0", "functionality = 1e9"),
            "outside the range 1 to 20",
        ),
        (
            format!("{SPEC}repeatability = -0.1\n"),
            "properties.acid_value.repeatability: -0.1 is negative",
        ),
        (
            format!("{SPEC}[properties.viscosity]\nlabel = \"V\"\nunit = \"mPa·s\"\ndecimals = 0\ntemperature_c = nan\n"),
            "properties.viscosity.temperature_c: NaN",
        ),
        (
            format!("{SPEC}[properties.viscosity]\nlabel = \"V\"\nunit = \"mPa·s\"\ndecimals = 0\ntemperature_c = 25.0\nandrade_b_k = inf\n"),
            "properties.viscosity.andrade_b_k: inf K is outside the range",
        ),
    ];
    for (contents, needle) in cases {
        check(Kind::Spec, contents.as_bytes(), needle);
    }
}

#[test]
fn recipe_toml_catalogue() {
    let cases: Vec<(String, &str)> = vec![
        ("name = \"r\"\n".to_string(), "no [[component]]"),
        (
            RECIPE.replacen("mass_kg = 146.14", "mass_kg = 0", 1),
            "zero",
        ),
        (
            RECIPE.replacen("mass_kg = 146.14", "mass_kg = -5", 1),
            "negative",
        ),
        (
            RECIPE.replacen("molar_mass = 146.14", "molar_mass = inf", 1),
            "not a finite number",
        ),
        (
            RECIPE.replace("acid_groups = 2\n", ""),
            "no component carries acid groups",
        ),
        (
            RECIPE.replace("hydroxyl_groups = 2\n", ""),
            "no component carries hydroxyl groups",
        ),
        (
            RECIPE.replacen("acid_groups = 2", "acid_groups = -2", 1),
            "bad.toml:6",
        ),
        (format!("{RECIPE}density = 1.2\n"), "density"),
        (RECIPE[..40].to_string(), "bad.toml:"),
        // Issue #13 item 6: names are one printable line.
        (
            RECIPE.replacen("name = \"aa\"", "name = \"a\\na\"", 1),
            "the component name cannot be used",
        ),
    ];
    for (contents, needle) in cases {
        check(Kind::Recipe, contents.as_bytes(), needle);
    }
}

#[test]
fn customer_toml_catalogue() {
    let cases: Vec<(&str, &str)> = vec![
        (
            "name = \"C\"\n[products.TP-2000.limits.mn]\nmin = 1800\n",
            "looser",
        ),
        (
            "name = \"C\"\n[products.TP-2000.limits.mn]\nmax = 2200\n",
            "looser",
        ),
        (
            "name = \"C\"\n[products.XX-1]\npart_number = \"1\"\n",
            "no product spec has code XX-1",
        ),
        (
            "name = \"C\"\n[products.TP-2000]\nreport = [\"colour\"]\n",
            "'colour' is not a property",
        ),
        (
            "name = \"C\"\n[products.TP-2000.units]\nviscosity = \"stokes\"\n",
            "cannot be converted",
        ),
        ("name = \"C\"\n[products.TP-2000]\nprice = 3\n", "price"),
        ("name = \"\"\n", "name"),
        (
            "name = \"C\"\n[products.TP-2000.limits.viscosity]\nmax = 0.6\n",
            "leaves nothing",
        ),
    ];
    for (contents, needle) in cases {
        check(Kind::Customer, contents.as_bytes(), needle);
    }
}

#[test]
fn samples_csv_catalogue() {
    let cases: Vec<(&str, &str)> = vec![
        ("", "bad.csv"),
        ("elapsed_min\n0\n", "acid_value"),
        (
            "elapsed_min,acid_value\n0,300\n30,abc\n",
            "'abc' is not a number",
        ),
        ("elapsed_min,acid_value\n0,300\n30,NaN\n", "bad.csv:3"),
        ("elapsed_min,acid_value\n0,300\n30,-5\n", "bad.csv:3"),
        (
            "elapsed_min,acid_value\n60,300\n30,200\n90,100\n",
            "bad.csv",
        ),
        ("elapsed_min,acid_value,colour\n0,300\n", "colour"),
    ];
    for (contents, needle) in cases {
        check(Kind::Samples, contents.as_bytes(), needle);
    }
}
