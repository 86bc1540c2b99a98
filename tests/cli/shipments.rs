//! Integration tests of deliveries (issue #16): certificates per purchase order, several lots
//! on one certificate, `shipments`, `lookup CERT-NUMBER`.

use crate::common;

use common::{page_texts, pdfs, Workspace, GOOD};
use predicates::prelude::*;

/// GOOD released (three TP-2000 lots, internal certificates FW-000001..3).
fn released() -> Workspace {
    let w = Workspace::new();
    std::fs::remove_dir_all(w.path("certificates")).ok();
    w.write("good.csv", GOOD);
    w.release("good.csv").assert().code(0);
    w
}

/// `certify LOTS --customer northwind --po PO --quantity QTY`.
fn deliver(w: &Workspace, lots: &[&str], po: &str, qty: &str) -> assert_cmd::Command {
    let mut c = w.cmd();
    c.arg("certify")
        .args(lots)
        .args(["--customer", "northwind", "--po", po, "--quantity", qty]);
    c
}

fn json(out: &std::process::Output) -> serde_json::Value {
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn two_purchase_orders_give_two_current_certificates_issue_16() {
    let w = released();
    deliver(&w, &["T26-101"], "PO-7781", "20 t")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("FW-000004"));
    // A new purchase order for the same lot and customer is a new delivery: no --reason.
    deliver(&w, &["T26-101"], "PO-7790", "5 t")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("FW-000005"))
        .stdout(predicate::str::contains("superseding").not());
    let v = json(
        &w.cmd()
            .args(["shipments", "--customer", "northwind", "--json"])
            .output()
            .unwrap(),
    );
    let s = v["shipments"].as_array().unwrap();
    assert_eq!(s.len(), 2, "{v}");
    assert_eq!(s[0]["number"], "FW-000005");
    assert_eq!(s[0]["po"], "PO-7790");
    assert_eq!(s[0]["quantity"], "5 t");
    assert_eq!(s[1]["po"], "PO-7781");
    for c in s {
        assert_eq!(c["status"], "current");
        assert_eq!(c["lots"], serde_json::json!(["T26-101"]));
        let file = w.path("certificates").join(c["file"].as_str().unwrap());
        w.cmd()
            .arg("verify")
            .arg(&file)
            .assert()
            .code(0)
            .stdout(predicate::str::contains("genuine"));
    }
    w.cmd().arg("verify").assert().code(0);
}

#[test]
fn same_purchase_order_again_is_a_reissue_issue_16() {
    let w = released();
    deliver(&w, &["T26-101"], "PO-7781", "20 t")
        .assert()
        .code(0);
    let before = w.snapshot();
    deliver(&w, &["T26-101"], "PO-7781", "20 t")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("FW-000004 was already issued"))
        .stderr(predicate::str::contains("PO PO-7781"))
        .stderr(predicate::str::contains("--reason"));
    assert_eq!(before, w.snapshot(), "a refused reissue writes nothing");
    deliver(&w, &["T26-101"], "PO-7781", "20 t")
        .args(["--reason", "quantity corrected"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("superseding FW-000004"));
    let v = json(
        &w.cmd()
            .args(["shipments", "--po", "PO-7781", "--json"])
            .output()
            .unwrap(),
    );
    let s = v["shipments"].as_array().unwrap();
    assert_eq!(s.len(), 2);
    assert_eq!(
        (&s[0]["number"], &s[0]["status"]),
        (&"FW-000005".into(), &"current".into())
    );
    assert_eq!(s[0]["supersedes"], "FW-000004");
    assert_eq!(s[1]["status"], "superseded");
}

#[test]
fn three_lots_on_one_certificate_issue_16() {
    let w = released();
    // T26-102 (Mn 1973) is only a conditional pass in Northwind's window; an invented fourth
    // lot with Mn = 56100·2/(0.50 + 55.5 + 0.50) = 1986 passes.
    w.write(
        "more.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity
T26-104,TP-2000,2026-05-23,0.50,55.5,535
",
    );
    w.release("more.csv").assert().code(0);
    let v = json(
        &deliver(
            &w,
            &["T26-101", "T26-104", "T26-103"],
            "4711",
            "3 × 80 drums",
        )
        .arg("--json")
        .output()
        .unwrap(),
    );
    assert_eq!(v["certificate_number"], "FW-000005");
    assert_eq!(
        v["lots"],
        serde_json::json!(["T26-101", "T26-104", "T26-103"])
    );
    let pdf = std::fs::read(w.path(v["path"].as_str().unwrap())).unwrap();
    let text = page_texts(&pdf).join(" ");
    for needle in [
        "T26-101",
        "T26-104",
        "T26-103",
        "4711",
        "3 × 80 drums",
        "0.535",
        "0.548",
        "1986",
    ] {
        assert!(text.contains(needle), "missing {needle}: {text}");
    }
    // The JSON companion (issue #17) lists all three lots, each with its own results, and
    // the footer names every lot.
    assert!(text.contains("Lots T26-101, T26-104, T26-103"), "{text}");
    let data: serde_json::Value =
        serde_json::from_slice(&std::fs::read(w.path(v["json_path"].as_str().unwrap())).unwrap())
            .unwrap();
    let lots = data["lots"].as_array().unwrap();
    assert_eq!(lots.len(), 3, "{data}");
    let viscosity = |i: usize| {
        lots[i]["properties"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| p["key"] == "viscosity")
            .unwrap()["result"]
            .clone()
    };
    assert_eq!(lots[1]["lot"], "T26-104");
    assert_eq!(viscosity(1), "0.535");
    assert_ne!(viscosity(0), viscosity(1));
    // The log has one row per lot with the same number; shipments gathers them.
    let log = std::fs::read_to_string(w.path("register/certificates.csv")).unwrap();
    assert_eq!(log.matches(",FW-000005,").count(), 3, "{log}");
    let json_sha = resinlot::record::certlog::entries(&w.path("register"))
        .unwrap()
        .into_iter()
        .filter(|e| e.number == "FW-000005")
        .map(|e| e.json_sha256)
        .collect::<Vec<_>>();
    assert_eq!(json_sha.len(), 3);
    assert!(json_sha.iter().all(|s| s.len() == 64 && *s == json_sha[0]));
    let v = json(
        &w.cmd()
            .args(["shipments", "--lot", "T26-104", "--json"])
            .output()
            .unwrap(),
    );
    assert_eq!(
        v["shipments"][0]["lots"],
        serde_json::json!(["T26-101", "T26-104", "T26-103"])
    );
    w.cmd().arg("verify").assert().code(0);
    w.cmd()
        .arg("verify")
        .arg(w.path(&format!(
            "certificates/{}",
            v["shipments"][0]["file"].as_str().unwrap()
        )))
        .assert()
        .code(0)
        .stdout(predicate::str::contains("genuine"));
    // Three log rows are one certificate: the next delivery takes the next number.
    deliver(&w, &["T26-103"], "4712", "1 drum")
        .assert()
        .code(0)
        .stdout(predicate::str::contains("Certificate FW-000006 "));
}

#[test]
fn a_delivery_with_one_lot_out_of_window_is_refused_whole_issue_16() {
    let w = released();
    // Mn = 56100·2/(0.30 + 57.4 + 0.30) = 1934.5 (end-group definition): outside
    // Northwind's 1950–2050 (invented lot).
    w.write(
        "low.csv",
        "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nT26-401,TP-2000,2026-06-01,0.30,57.4,520\n",
    );
    w.release("low.csv").assert().code(0);
    let before = w.snapshot();
    deliver(&w, &["T26-101", "T26-401", "T26-102"], "4711", "60 drums")
        .assert()
        .code(1)
        .stderr(predicate::str::contains("lot T26-401 cannot be certified"))
        .stderr(predicate::str::contains("customer's window 1950 – 2050"))
        .stderr(predicate::str::contains("Nothing was issued"))
        .stderr(predicate::str::contains("T26-101 cannot").not());
    assert_eq!(before, w.snapshot(), "nothing issued when one lot misses");
}

#[test]
fn six_lots_get_a_block_each_issue_16() {
    let w = Workspace::new();
    std::fs::remove_dir_all(w.path("certificates")).ok();
    let mut csv = String::from("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n");
    for i in 0..6 {
        // Invented lots around Mn 1990.
        csv.push_str(&format!(
            "T26-60{i},TP-2000,2026-06-0{},0.5{i},55.{i},540\n",
            i + 1
        ));
    }
    w.write("six.csv", &csv);
    w.release("six.csv")
        .arg("--no-certificates")
        .assert()
        .code(0);
    let lots: Vec<String> = (0..6).map(|i| format!("T26-60{i}")).collect();
    let lots: Vec<&str> = lots.iter().map(String::as_str).collect();
    deliver(&w, &lots, "4711", "6 drums")
        .arg("--html")
        .assert()
        .code(0);
    let pdf = &pdfs(&w.path("certificates"))[0];
    let html = std::fs::read_to_string(pdf.with_extension("html")).unwrap();
    assert!(
        html.contains("<strong>Lot T26-605</strong>"),
        "a block per lot"
    );
    let text = page_texts(&std::fs::read(pdf).unwrap()).join(" ");
    assert!(text.contains("T26-605"), "{text}");
}

#[test]
fn lots_of_two_products_or_twice_named_are_refused_issue_16() {
    let w = released();
    let before = w.snapshot();
    deliver(&w, &["T26-101", "T26-101"], "4711", "1 t")
        .assert()
        .code(2)
        .stderr(predicate::str::contains("named twice"));
    deliver(&w, &["T26-101", "T26-999"], "4711", "1 t")
        .assert()
        .code(1)
        .stderr(predicate::str::contains("'T26-999' is not in the record"));
    assert_eq!(before, w.snapshot());
}

#[test]
fn lookup_answers_for_a_certificate_number_issue_16() {
    let w = released();
    deliver(&w, &["T26-101", "T26-103"], "4711", "40 drums")
        .assert()
        .code(0);
    w.cmd()
        .args(["lookup", "FW-000004"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("Certificate FW-000004 (TP-2000)"))
        .stdout(predicate::str::contains("4711"))
        .stdout(predicate::str::contains("T26-101, T26-103"))
        .stdout(predicate::str::contains("Lot T26-101: TP-2000"))
        .stdout(predicate::str::contains("Lot T26-103: TP-2000"));
    let v = json(
        &w.cmd()
            .args(["lookup", "FW-000004", "--json"])
            .output()
            .unwrap(),
    );
    assert_eq!(v["certificate"]["status"], "current");
    assert_eq!(v["lots"].as_array().unwrap().len(), 2);
    assert_eq!(v["lots"][1]["lot"], "T26-103");
}

#[test]
fn shipments_filters_and_csv_issue_16() {
    let w = released();
    deliver(&w, &["T26-101"], "4711", "20 t").assert().code(0);
    deliver(&w, &["T26-103"], "4712", "10 t").assert().code(0);
    let out = w
        .cmd()
        .args(["shipments", "--part-number", "NW-4471", "--csv"])
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.starts_with("number,issued,customer,po,quantity,lots,product,status"));
    assert_eq!(text.lines().count(), 3, "{text}");
    w.cmd()
        .args(["shipments", "--part-number", "XX-1"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("No certificates issued match."));
    w.cmd()
        .args(["shipments"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("2 certificates (2 current)."));
    w.cmd()
        .args(["shipments", "--since", "2099-01-01"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("No certificates issued match."));
}

#[test]
fn shipments_refuses_an_unknown_customer_and_a_backward_period_issue_16() {
    let w = released();
    w.cmd()
        .args(["shipments", "--customer", "nortwind"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("--customer 'nortwind'"))
        .stderr(predicate::str::contains("Known customers: northwind"));
    w.cmd()
        .args([
            "shipments",
            "--since",
            "2026-12-02",
            "--until",
            "2026-12-01",
        ])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("ends before it starts"));
}
