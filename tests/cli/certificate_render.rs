//! Certificate rendering end to end: fixture data -> template -> HTML -> PDF -> text read back
//! with printpdf's own PDF parser.

use std::path::{Path, PathBuf};

use printpdf::{PdfDocument, PdfParseOptions};
use resinlot::certificate::model::{Certificate, ResultRow};
use resinlot::certificate::render::{self, FontPool, Templates};

fn templates_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("templates")
}

/// Loads a FICTIONAL fixture certificate (see tests/fixtures/certificates/README.md).
fn fixture(name: &str) -> Certificate {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/certificates")
        .join(format!("{name}.json"));
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// Renders `cert`; with RESINLOT_SAMPLE_DIR set, also writes `<name>.html` and `<name>.pdf`
/// there for looking at (pdftoppm -png -r 100).
fn render(name: &str, cert: &Certificate) -> render::Rendered {
    let templates = Templates::load(&templates_dir()).unwrap();
    let out = render::render_one(&templates, &FontPool::bundled(), cert).unwrap();
    if let Some(dir) = std::env::var_os("RESINLOT_SAMPLE_DIR") {
        let dir = PathBuf::from(dir);
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(dir.join(format!("{name}.html")), &out.html).unwrap();
        std::fs::write(dir.join(format!("{name}.pdf")), &out.pdf).unwrap();
    }
    out
}

/// Text of each page of a PDF, read back with printpdf's parser; runs joined by single
/// spaces so phrases split across runs still match.
fn page_texts(pdf: &[u8]) -> Vec<String> {
    let mut warnings = Vec::new();
    let doc = PdfDocument::parse(pdf, &PdfParseOptions::default(), &mut warnings).unwrap();
    doc.extract_text()
        .into_iter()
        .map(|runs| {
            runs.join(" ")
                .split_whitespace()
                .collect::<Vec<_>>()
                .join(" ")
        })
        .collect()
}

/// Drops all whitespace: a value may wrap onto a second line in its table cell.
fn squash(s: &str) -> String {
    s.split_whitespace().collect()
}

/// Asserts that every field of `cert` appears in `text` with its value.
fn assert_all_fields(cert: &Certificate, text: &str) {
    let mut expected: Vec<String> = vec![
        cert.title.clone(),
        cert.issuer.name.clone(),
        cert.number.clone(),
        format!("Issued {}", cert.issue_date),
        cert.product.code.clone(),
        cert.product.name.clone(),
        format!("{} rev. {}", cert.spec.code, cert.spec.revision),
        cert.lot.id.clone(),
        format!("Manufactured {}", cert.lot.manufactured),
        format!("Retest date {}", cert.lot.retest),
        cert.conformity.statement.clone(),
        cert.conformity.decision_rule.clone(),
        cert.conformity.guard_band.clone(),
        cert.scope_statement.clone(),
        cert.authorisation.name.clone(),
        cert.authorisation.role.clone(),
        cert.authorisation.date.to_string(),
        format!("Certificate No. {}", cert.number),
    ];
    expected.extend(cert.issuer.address.iter().cloned());
    expected.extend(cert.issuer.contact.iter().cloned());
    expected.extend(cert.statements.iter().cloned());
    for ResultRow {
        label,
        method,
        unit,
        limits,
        result,
        verdict,
        ..
    } in &cert.rows
    {
        // One table row reads left to right in this order.
        expected.push(format!(
            "{label} {method} {unit} {limits} {result} {verdict}"
        ));
    }
    for n in &cert.calculated {
        let u = n.expanded_uncertainty.as_deref().unwrap();
        let unit = if n.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", n.unit)
        };
        expected.push(format!("{} = {}{unit} ± {u}{unit}", n.label, n.value));
        expected.push(n.basis.clone());
    }
    if let Some(c) = &cert.customer {
        expected.push(format!("Customer {}", c.name));
        expected.push(format!(
            "Purchase order {}",
            c.purchase_order.as_deref().unwrap()
        ));
        expected.push(format!(
            "Customer part no. {}",
            c.part_number.as_deref().unwrap()
        ));
        expected.push(format!("Quantity {}", c.quantity.as_deref().unwrap()));
    }
    if let Some(s) = &cert.supersedes {
        expected.push(format!("supersedes certificate No. {}", s.number));
        expected.push(s.reason.clone());
    }
    let squashed = squash(text);
    for e in expected {
        assert!(
            squashed.contains(&squash(&e)),
            "missing {e:?} in PDF text:\n{text}"
        );
    }
}

#[test]
fn sample_certificate_carries_every_field() {
    let cert = fixture("sample");
    let out = render("sample", &cert);
    let pages = page_texts(&out.pdf);
    assert_eq!(pages.len(), 1, "a certificate fits one page");
    assert_all_fields(&cert, &pages[0]);
    assert!(pages[0].contains("Page 1 of 1"), "{}", pages[0]);
    assert!(pages[0].contains("Release authorised 2026-09-15"));
    assert!(!pages[0].contains("NOT RELEASED"), "{}", pages[0]);
    // Only the bundled faces are embedded: no base-14 or system font.
    let raw = String::from_utf8_lossy(&out.pdf);
    assert!(raw.contains("DejaVuSans-Bold") && raw.contains("DejaVuSans"));
    assert_eq!(
        raw.matches("/FontFile2").count(),
        2,
        "exactly two embedded faces"
    );
    assert!(!raw.contains("/Helvetica"));
    // The symbols of the trade render as themselves.
    for sym in ["≤ 1.00", "≥ 99.5", "53.0 – 59.0", "°C", "mPa·s", "± 29"] {
        assert!(pages[0].contains(sym), "{sym} missing");
    }
}

#[test]
fn customer_certificate_carries_shipment_and_escapes_html() {
    let cert = fixture("customer");
    assert_eq!(cert.customer.as_ref().unwrap().name, "A&B <Ltd>");
    let out = render("customer", &cert);
    // Escaped in the HTML (tera autoescape), so the name cannot inject markup ...
    assert!(out.html.contains("A&amp;B &lt;Ltd&gt;"), "{}", out.html);
    assert!(!out.html.contains("A&B <Ltd>"));
    // ... and printed literally in the PDF.
    let pages = page_texts(&out.pdf);
    assert_eq!(pages.len(), 1);
    assert_all_fields(&cert, &pages[0]);
    assert!(pages[0].contains("A&B <Ltd>"), "{}", pages[0]);
    assert!(
        !pages[0].contains("Water"),
        "only the customer's properties are reported"
    );
}

#[test]
fn held_certificate_is_marked_not_released() {
    let cert = fixture("held");
    let out = render("held", &cert);
    let pages = page_texts(&out.pdf);
    assert_eq!(pages.len(), 1);
    assert_all_fields(&cert, &pages[0]);
    assert!(
        pages[0].contains("NOT RELEASED · INTERNAL RECORD · NOT FOR SHIPMENT"),
        "{}",
        pages[0]
    );
    assert!(pages[0].contains("Conditional pass"));
    assert!(!pages[0].contains("Release authorised"));
}

#[test]
fn every_page_of_a_long_unreleased_certificate_is_stamped() {
    // A deliberately over-long certificate (60 rows) to force several pages.
    let mut cert = fixture("held");
    let row = cert.rows[1].clone();
    cert.rows = (1..=60)
        .map(|i| ResultRow {
            key: format!("p{i}"),
            label: format!("Property {i}"),
            ..row.clone()
        })
        .collect();
    let out = render("held-long", &cert);
    let pages = page_texts(&out.pdf);
    assert!(
        pages.len() >= 2,
        "expected several pages, got {}",
        pages.len()
    );
    let n = pages.len();
    for (i, text) in pages.iter().enumerate() {
        assert!(text.contains("NOT RELEASED"), "page {} unmarked", i + 1);
        assert!(
            text.contains(&format!("Page {} of {n}", i + 1)),
            "page {}",
            i + 1
        );
        assert!(
            text.contains("Certificate No. FW-2026-000125"),
            "page {}",
            i + 1
        );
    }
    // Nothing is hidden under the banner: only the banner's own line sits in its strip, and
    // every other line's cap height (under 10 pt at these sizes) stays below it.
    let strip_bottom = (297.0 - render::BANNER_BOTTOM_MM) * 72.0 / 25.4;
    for (i, baselines) in text_baselines(&out.pdf).iter().enumerate() {
        let in_strip = baselines.iter().filter(|&&y| y >= strip_bottom).count();
        assert_eq!(in_strip, 1, "page {}: text inside the banner strip", i + 1);
        for &y in baselines.iter().filter(|&&y| y < strip_bottom) {
            assert!(
                y + 10.0 < strip_bottom,
                "page {}: line at {y} pt under the banner",
                i + 1
            );
        }
    }
    // Every row made it onto some page.
    let all = pages.join(" ");
    for i in 1..=60 {
        assert!(all.contains(&format!("Property {i} ")), "row {i} lost");
    }
}

#[test]
fn rendering_is_deterministic() {
    let cert = fixture("sample");
    let a = render("sample", &cert);
    let b = render("sample", &cert);
    assert_eq!(a.html, b.html);
    assert!(a.pdf == b.pdf, "the same certificate gives the same bytes");
}

#[test]
fn batch_keeps_order_and_matches_single_renders() {
    let base = fixture("sample");
    let certs: Vec<Certificate> = (0..6)
        .map(|i| {
            let mut c = base.clone();
            c.number = format!("FW-2026-0009{i:02}");
            c.lot.id = format!("L26-09{i:02}");
            c
        })
        .collect();
    let fonts = FontPool::bundled();
    let batch = render::render_batch(&templates_dir(), &certs, &fonts).unwrap();
    assert_eq!(batch.len(), certs.len());
    for (cert, out) in certs.iter().zip(&batch) {
        let text = &page_texts(&out.pdf)[0];
        assert!(text.contains(&format!("Certificate No. {}", cert.number)));
        assert!(text.contains(&cert.lot.id));
    }
}

/// Copies the shipped templates into a temp dir and edits the certificate template.
fn edited_templates(edit: impl Fn(&str) -> String) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    for name in [render::CERTIFICATE_TEMPLATE, render::STYLESHEET] {
        let text = std::fs::read_to_string(templates_dir().join(name)).unwrap();
        let text = if name == render::CERTIFICATE_TEMPLATE {
            edit(&text)
        } else {
            text
        };
        std::fs::write(dir.path().join(name), text).unwrap();
    }
    dir
}

#[test]
fn undefined_variable_names_template_and_line() {
    let dir = edited_templates(|t| {
        t.replacen(
            "<h2>Results</h2>",
            "<h2>Results</h2>\n<p>{{ lot.colour }}</p>",
            1,
        )
    });
    let text = std::fs::read_to_string(dir.path().join(render::CERTIFICATE_TEMPLATE)).unwrap();
    let line = text.lines().position(|l| l.contains("lot.colour")).unwrap() + 1;
    let err = render::render_html(dir.path(), &fixture("sample")).unwrap_err();
    let msg = err.to_string();
    assert!(
        msg.contains(&format!("certificate.html.tera:{line}:")),
        "{msg}"
    );
    assert!(msg.contains("colour"), "{msg}");
    assert_eq!(err.exit_code(), 2);
}

#[test]
fn template_syntax_error_names_template_and_line() {
    let dir = edited_templates(|t| t.replacen("{% endfor %}", "{% endfro %}", 1));
    let text = std::fs::read_to_string(dir.path().join(render::CERTIFICATE_TEMPLATE)).unwrap();
    let line = text.lines().position(|l| l.contains("endfro")).unwrap() + 1;
    let msg = render::render_html(dir.path(), &fixture("sample"))
        .unwrap_err()
        .to_string();
    assert!(
        msg.contains(&format!("certificate.html.tera:{line}:")),
        "{msg}"
    );
}

#[test]
fn templates_cannot_include_files_outside_the_folder() {
    let dir = edited_templates(|t| t.replacen("<body>", "<body>{% include \"../site.toml\" %}", 1));
    let msg = render::render_html(dir.path(), &fixture("sample"))
        .unwrap_err()
        .to_string();
    assert!(msg.contains("certificate.html.tera"), "{msg}");
    assert!(msg.contains("site.toml"), "{msg}");
}

#[test]
fn missing_template_is_an_io_error_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let msg = render::render_html(dir.path(), &fixture("sample"))
        .unwrap_err()
        .to_string();
    assert!(msg.contains("certificate.css"), "{msg}");
}

/// Baseline heights (pt from the bottom edge) of every text run on each page.
fn text_baselines(pdf: &[u8]) -> Vec<Vec<f32>> {
    use printpdf::{Op, TextMatrix};
    let mut warnings = Vec::new();
    let doc = PdfDocument::parse(pdf, &PdfParseOptions::default(), &mut warnings).unwrap();
    doc.pages
        .iter()
        .map(|page| {
            let mut y = 0.0;
            let mut out = Vec::new();
            for op in &page.ops {
                match op {
                    Op::SetTextCursor { pos } => y = pos.y.0,
                    Op::SetTextMatrix { matrix } => {
                        y = match matrix {
                            TextMatrix::Translate(_, ty)
                            | TextMatrix::TranslateRotate(_, ty, _) => ty.0,
                            TextMatrix::Raw(m) => m[5],
                        }
                    }
                    Op::ShowText { .. } => out.push(y),
                    _ => {}
                }
            }
            out
        })
        .collect()
}

/// Horizontal rules (pt from the bottom edge) and text baselines of each page, read from the
/// content streams with lopdf: a rule is a painted path or rectangle (`m`/`l`/`re`, then `S`
/// or `f`) whose bounding box is at most 2 pt high and wider than it is high; its height is
/// the middle of that box. A baseline is the y of each `Tm`.
fn rules_and_baselines(pdf: &[u8]) -> Vec<(Vec<f32>, Vec<f32>)> {
    use lopdf::content::Content;
    let doc = lopdf::Document::load_mem(pdf).unwrap();
    let num = |o: &lopdf::Object| o.as_float().unwrap_or(0.0);
    doc.get_pages()
        .values()
        .map(|&id| {
            let content = Content::decode(&doc.get_page_content(id)).unwrap();
            let (mut rules, mut baselines) = (Vec::new(), Vec::new());
            let mut points: Vec<(f32, f32)> = Vec::new();
            for op in &content.operations {
                let a = &op.operands;
                match op.operator.as_str() {
                    "m" | "l" => points.push((num(&a[0]), num(&a[1]))),
                    "re" => {
                        let (x, y, w, h) = (num(&a[0]), num(&a[1]), num(&a[2]), num(&a[3]));
                        points.extend([(x, y), (x + w, y + h)]);
                    }
                    "S" | "s" | "f" | "F" | "f*" | "B" | "b" | "n" => {
                        if op.operator != "n" && !points.is_empty() {
                            let lo = points.iter().map(|p| p.1).fold(f32::MAX, f32::min);
                            let hi = points.iter().map(|p| p.1).fold(f32::MIN, f32::max);
                            let left = points.iter().map(|p| p.0).fold(f32::MAX, f32::min);
                            let right = points.iter().map(|p| p.0).fold(f32::MIN, f32::max);
                            if hi - lo <= 2.0 && right - left > hi - lo {
                                rules.push((lo + hi) / 2.0);
                            }
                        }
                        points.clear();
                    }
                    "Tm" => baselines.push(num(&a[5])),
                    _ => {}
                }
            }
            (rules, baselines)
        })
        .collect()
}

/// A certificate of `n` FICTIONAL properties (invented labels and values), guarded rule, with
/// the U column, some labels long enough to wrap.
fn long_certificate(n: usize) -> Certificate {
    let mut cert = fixture("sample");
    let row = cert.rows[1].clone();
    cert.show_uncertainty = true;
    cert.rows = (1..=n)
        .map(|i| ResultRow {
            key: format!("p{i}"),
            label: if i % 3 == 0 {
                format!("Property {i} measured after conditioning at 23\u{a0}°C and 50\u{a0}% relative humidity")
            } else {
                format!("Property {i}")
            },
            result: format!("{}.{}", 50 + i % 9, i % 10),
            uncertainty: Some("0.8".into()),
            ..row.clone()
        })
        .collect();
    cert
}

#[test]
fn forty_properties_run_to_three_pages_that_hold_up_issue_17() {
    let cert = long_certificate(40);
    let out = render("forty", &cert);
    let pages = page_texts(&out.pdf);
    assert_eq!(pages.len(), 3, "40 properties take three pages");
    for (i, text) in pages.iter().enumerate() {
        // The table header is repeated on every page that has rows, and every page is numbered.
        assert!(
            text.contains("Property Method Unit Limits Result U (k = 2) Verdict"),
            "page {}: no header row:\n{text}",
            i + 1
        );
        assert!(
            text.contains(&format!("Page {} of 3", i + 1)),
            "page {}",
            i + 1
        );
    }
    // Every row is printed once, in order.
    let all = pages.join(" ");
    let mut at = 0;
    for i in 1..=40 {
        let needle = format!("Property {i} ");
        let found = all[at..]
            .find(&needle)
            .unwrap_or_else(|| panic!("row {i} missing or out of order"));
        at += found + needle.len();
        assert_eq!(all.matches(&needle).count(), 1, "row {i} printed twice");
    }
    // The statement of conformity and the signature block share a page.
    let statement = squash(&cert.conformity.statement);
    let on = |t: &str| pages.iter().position(|p| squash(p).contains(t));
    let s = on(&statement).expect("statement printed");
    assert_eq!(on(&squash(&cert.authorisation.name)), Some(s));
    assert_eq!(
        on(&squash(&format!(
            "Release authorised {}",
            cert.authorisation.date
        ))),
        Some(s)
    );
    // No text baseline lies within 1 pt of a horizontal rule on any page.
    let geometry = rules_and_baselines(&out.pdf);
    assert_eq!(geometry.len(), 3);
    for (i, (rules, baselines)) in geometry.iter().enumerate() {
        assert!(
            rules.len() > 10,
            "page {}: rules found {}",
            i + 1,
            rules.len()
        );
        for r in rules {
            for b in baselines {
                assert!(
                    (r - b).abs() > 1.0,
                    "page {}: baseline {b} pt within 1 pt of the rule at {r} pt",
                    i + 1
                );
            }
        }
    }
}

#[test]
fn the_rule_check_catches_a_rule_through_text_issue_17() {
    // The check above can fail: a rule drawn through a line of text is found.
    let cert = fixture("sample");
    let out = render("sample-ruled", &cert);
    let geometry = rules_and_baselines(&out.pdf);
    let (_, baselines) = &geometry[0];
    let y = baselines[3];
    let mut doc = lopdf::Document::load_mem(&out.pdf).unwrap();
    let page = *doc.get_pages().values().next().unwrap();
    let mut content = lopdf::content::Content::decode(&doc.get_page_content(page)).unwrap();
    for (op, args) in [("m", vec![40.0, y]), ("l", vec![500.0, y]), ("S", vec![])] {
        content.operations.push(lopdf::content::Operation::new(
            op,
            args.into_iter().map(lopdf::Object::Real).collect(),
        ));
    }
    doc.change_page_content(page, content.encode().unwrap())
        .unwrap();
    let mut bytes = Vec::new();
    doc.save_to(&mut bytes).unwrap();
    let (rules, baselines) = &rules_and_baselines(&bytes)[0];
    assert!(rules
        .iter()
        .any(|r| baselines.iter().any(|b| (r - b).abs() <= 1.0)));
}

#[test]
fn a_template_without_page_rows_keeps_the_engines_page_breaks_issue_17() {
    // A template edited before issue #17 prints every row itself: resinlot does not paginate
    // it (each page would repeat the whole table) but leaves the breaks to the HTML engine.
    let dir = edited_templates(|t| {
        t.replace("{% if page.rows %}", "{% if rows %}")
            .replace("{% for row in page.rows %}", "{% for row in rows %}")
    });
    let templates = Templates::load(dir.path()).unwrap();
    assert!(!templates.paged());
    assert!(Templates::load(&templates_dir()).unwrap().paged());
    let cert = long_certificate(40);
    let out = render::render_one(&templates, &FontPool::bundled(), &cert).unwrap();
    let pages = page_texts(&out.pdf);
    assert!(pages.len() >= 2, "{}", pages.len());
    let all = pages.join(" ");
    for i in 1..=40 {
        assert_eq!(all.matches(&format!("Property {i} ")).count(), 1, "row {i}");
    }
}

#[test]
fn test_dates_are_printed_issue_17() {
    let mut cert = fixture("sample");
    let day = |d: u32| chrono::NaiveDate::from_ymd_opt(2026, 9, d);
    cert.lot.tested_from = day(14);
    cert.lot.tested_to = day(15);
    let text = page_texts(&render("tested", &cert).pdf).join(" ");
    // A range is printed on two lines (the narrow column cannot hold it), never split inside
    // a date.
    assert!(text.contains("Tested 2026-09-14 – 2026-09-15"), "{text}");
    cert.lot.tested_to = day(14);
    let text = page_texts(&render("tested-one-day", &cert).pdf).join(" ");
    assert!(text.contains("Tested 2026-09-14 Retest"), "{text}");
}
