//! Integration tests of certificates (issue #4): internal and customer certificates, the
//! reissue chain, verify, customer windows, templates and escaping.

use crate::common;

use common::{page_texts, pdfs, Workspace, GOOD};
use predicates::prelude::*;

fn released() -> Workspace {
    let w = Workspace::new();
    std::fs::remove_dir_all(w.path("certificates")).ok();
    w.write("good.csv", GOOD);
    w.release("good.csv")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("3 internal certificates written"));
    w
}

fn certify(w: &Workspace, lot: &str) -> assert_cmd::Command {
    let mut c = w.cmd();
    c.args([
        "certify",
        lot,
        "--customer",
        "northwind",
        "--po",
        "PO-7781",
        "--quantity",
        "20 t",
    ]);
    c
}

#[test]
fn release_writes_an_internal_certificate_per_lot() {
    let w = released();
    let files = pdfs(&w.path("certificates"));
    assert_eq!(files.len(), 3);
    let text = &page_texts(&std::fs::read(&files[0]).unwrap())[0];
    for needle in [
        "Certificate of Analysis",
        "Harrowgate Resins Ltd, Fenmoor Works",
        "T26-101",
        "TP-2000",
        "2026-05-02",
        "2027-05-02",
        "Page 1 of 1",
        "FW-000001",
        "ILAC-G8",
        "QC Laboratory Supervisor",
        "reproduced except in full",
    ] {
        assert!(text.contains(needle), "missing {needle}: {text}");
    }
    // Mn = 56100·2/(0.52 + 55.4 + 0.52) = 1988 g/mol (end-group definition, ISO 4629-2).
    assert!(text.contains("1988"), "{text}");
    assert!(!text.contains("NOT RELEASED"));
}

#[test]
fn held_lot_certificate_is_marked_not_released() {
    let w = Workspace::new();
    std::fs::remove_dir_all(w.path("certificates")).ok();
    w.release("results-wide.csv").assert().code(1);
    let held = pdfs(&w.path("certificates"))
        .into_iter()
        .find(|p| p.to_string_lossy().contains("T26-002"))
        .unwrap();
    for page in page_texts(&std::fs::read(held).unwrap()) {
        assert!(page.contains("NOT RELEASED"), "{page}");
    }
}

#[test]
fn customer_certificate_has_every_field() {
    let w = released();
    let out = certify(&w, "T26-101")
        .arg("--json")
        .arg("--html")
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["certificate_number"], "FW-000004");
    let path = w.path(v["path"].as_str().unwrap());
    let bytes = std::fs::read(&path).unwrap();
    use sha2::Digest;
    assert_eq!(
        v["sha256"],
        resinlot::record::trend_file::hex(&sha2::Sha256::digest(&bytes))
    );
    let text = &page_texts(&bytes)[0];
    for needle in [
        "Northwind & Sons <Foams>",
        "NW-4471",
        "PO-7781",
        "20 t",
        "Shelf life 12 months",
        "1950 – 2050",
        "Pa·s",
        "0.540",
        "FW-000004",
    ] {
        assert!(text.contains(needle), "missing {needle}: {text}");
    }
    // HTML special characters in the customer's name are escaped in the HTML.
    let html = std::fs::read_to_string(path.with_extension("html")).unwrap();
    assert!(
        html.contains("Northwind &amp; Sons &lt;Foams&gt;"),
        "escaped name"
    );
    assert!(!html.contains("<Foams>"));
}

#[test]
fn reissue_needs_a_reason_and_supersedes() {
    let w = released();
    certify(&w, "T26-101").assert().code(0);
    let before = w.snapshot();
    certify(&w, "T26-101")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("already issued"))
        .stderr(predicate::str::contains("--reason"));
    assert_eq!(before, w.snapshot(), "refused reissue writes nothing");
    certify(&w, "T26-101")
        .args(["--reason", "PO number corrected"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("superseding FW-000004"));
    let files = pdfs(&w.path("certificates"));
    assert_eq!(files.len(), 5, "the old certificate file stays");
    let new = files
        .iter()
        .find(|p| p.to_string_lossy().contains("FW-000005"))
        .unwrap();
    let text = &page_texts(&std::fs::read(new).unwrap())[0];
    assert!(
        text.contains("FW-000004"),
        "names what it supersedes: {text}"
    );
}

#[test]
fn verify_tells_genuine_altered_and_unknown() {
    let w = released();
    certify(&w, "T26-101").assert().code(0);
    let file = pdfs(&w.path("certificates"))
        .into_iter()
        .find(|p| p.to_string_lossy().contains("FW-000004"))
        .unwrap();
    w.cmd()
        .arg("verify")
        .arg(&file)
        .assert()
        .code(0)
        .stdout(predicate::str::contains("genuine"));
    let mut bytes = std::fs::read(&file).unwrap();
    let altered = w.path("altered").join(file.file_name().unwrap());
    std::fs::create_dir_all(altered.parent().unwrap()).unwrap();
    let n = bytes.len();
    bytes[n / 2] ^= 1;
    std::fs::write(&altered, &bytes).unwrap();
    w.cmd()
        .arg("verify")
        .arg(&altered)
        .assert()
        .code(1)
        .stdout(predicate::str::contains("ALTERED"));
    let unknown = w.write("other.pdf", "%PDF-1.7 not ours");
    w.cmd()
        .arg("verify")
        .arg(&unknown)
        .assert()
        .code(1)
        .stdout(predicate::str::contains("UNKNOWN"));
    // The whole record, certificates included, checks out; a changed PDF on disk does not.
    w.cmd().args(["verify"]).assert().code(0);
    std::fs::write(&file, &bytes).unwrap();
    w.cmd()
        .args(["verify"])
        .assert()
        .code(1)
        .stdout(predicate::str::contains("SHA-256 mismatch"));
}

#[test]
fn customer_window_tighter_than_product_refuses() {
    let w = Workspace::new();
    // Mn = 56100·2/(0.30 + 57.4 + 0.30) = 1934.5: inside the product's 1900–2100 (with its
    // guard band of about 28) but outside the customer's 1950–2050.
    w.write("lot.csv", "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nT26-401,TP-2000,2026-06-01,0.30,57.4,520\n");
    w.release("lot.csv").assert().code(0);
    let before = w.snapshot();
    certify(&w, "T26-401")
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "cannot be certified for Northwind & Sons <Foams>",
        ))
        .stderr(predicate::str::contains("customer's window 1950 – 2050"))
        .stderr(predicate::str::contains("1900 – 2100"));
    assert_eq!(before, w.snapshot());
}

#[test]
fn unreleased_lot_gets_no_customer_certificate() {
    let w = Workspace::new();
    w.release("results-wide.csv").assert().code(1);
    let before = w.snapshot();
    certify(&w, "T26-002")
        .assert()
        .code(1)
        .stderr(predicate::str::contains("only for released lots"));
    assert_eq!(before, w.snapshot());
}

#[test]
fn template_with_undefined_variable_names_its_line() {
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    let t = std::fs::read_to_string(w.path("templates/certificate.html.tera")).unwrap();
    let broken = t.replacen("{{ number }}", "{{ numbr }}", 1);
    assert_ne!(t, broken);
    w.write("templates/certificate.html.tera", &broken);
    let before = w.snapshot();
    w.release("good.csv")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("certificate.html.tera:"));
    assert_eq!(
        before,
        w.snapshot(),
        "nothing recorded when a certificate cannot be rendered"
    );
}

#[test]
fn looser_customer_file_is_refused() {
    let w = Workspace::new();
    w.release("results-wide.csv")
        .arg("--no-certificates")
        .assert()
        .code(1);
    w.write(
        "specs/customers/loose.toml",
        "name = \"Loose\"\n[products.TP-2000.limits.mn]\nmin = 1800\nmax = 2050\n",
    );
    w.cmd()
        .args(["certify", "T26-001", "--customer", "loose"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "looser than the TP-2000 revision C window",
        ));
}

#[test]
fn temperature_corrected_viscosity_is_stated_on_the_certificate() {
    let w = Workspace::new();
    std::fs::remove_dir_all(w.path("certificates")).ok();
    w.write(
        "lims.csv",
        "lot,product,property,value,unit,temperature_c,manufactured\n\
         T26-501,TP-2000,acid_value,0.50,mg KOH/g,,2026-05-30\n\
         T26-501,TP-2000,hydroxyl_value,55.3,mg KOH/g,,\n\
         T26-501,TP-2000,viscosity,0.45,Pa·s,80,\n",
    );
    w.release("lims.csv").assert().code(0);
    let pdf = &pdfs(&w.path("certificates"))[0];
    let text = &page_texts(&std::fs::read(pdf).unwrap())[0];
    assert!(text.contains("corrected to 75 °C by Andrade"), "{text}");
}

#[test]
fn certify_refuses_a_tampered_record() {
    // Regression (issue #8): a certificate must never be issued from an edited row.
    let w = released();
    let p = w.path("register/TP-2000.csv");
    let text = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, text.replacen(",0.52,", ",0.42,", 1)).unwrap();
    let before = w.snapshot();
    certify(&w, "T26-101")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("TP-2000.csv:2"))
        .stderr(predicate::str::contains("was changed"));
    assert_eq!(before, w.snapshot());
}

#[test]
fn unwritable_certificate_folder_refuses_before_recording() {
    // Regression (issue #4): a certificate that cannot be filed must not leave a recorded row.
    let w = Workspace::new();
    w.write("good.csv", GOOD);
    w.write("afile", "not a folder");
    let before = w.snapshot();
    w.release("good.csv")
        .args(["--out", "afile/sub"])
        .assert()
        .code(2);
    assert_eq!(
        before,
        w.snapshot(),
        "no row recorded when certificates cannot be written"
    );
}
