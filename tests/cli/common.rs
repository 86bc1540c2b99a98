//! Shared helpers for the integration tests: a temp workspace with the fixtures and the binary.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

use assert_cmd::Command;

/// A temporary workspace holding a copy of tests/fixtures.
pub struct Workspace {
    pub dir: tempfile::TempDir,
}

/// Copies a folder tree.
pub fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let target = to.join(e.file_name());
        if e.path().is_dir() {
            copy_dir(&e.path(), &target);
        } else {
            std::fs::copy(e.path(), target).unwrap();
        }
    }
}

impl Workspace {
    pub fn new() -> Workspace {
        let dir = tempfile::tempdir().unwrap();
        let root = Path::new(env!("CARGO_MANIFEST_DIR"));
        copy_dir(&root.join("tests/fixtures"), dir.path());
        copy_dir(&root.join("templates"), &dir.path().join("templates"));
        Workspace { dir }
    }

    pub fn path(&self, rel: &str) -> PathBuf {
        self.dir.path().join(rel)
    }

    pub fn write(&self, rel: &str, text: &str) -> PathBuf {
        let p = self.path(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(&p, text).unwrap();
        p
    }

    /// A workspace with GOOD released: three TP-2000 lots, with their internal certificates
    /// when `certificates` is true.
    pub fn with_good_released(certificates: bool) -> Workspace {
        let w = Workspace::new();
        w.write("good.csv", GOOD);
        let mut c = w.release("good.csv");
        if !certificates {
            c.arg("--no-certificates");
        }
        c.assert().code(0);
        w
    }

    /// Writes bytes to a file of the workspace, creating its folder.
    pub fn write_bytes(&self, rel: &str, bytes: &[u8]) -> PathBuf {
        let p = self.path(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(&p, bytes).unwrap();
        p
    }

    /// The binary, run inside the workspace with a fixed clock.
    pub fn cmd(&self) -> Command {
        let mut c = Command::cargo_bin("resinlot").unwrap();
        c.current_dir(self.dir.path())
            .env("SOURCE_DATE_EPOCH", "1796860800")
            .env_remove("RESINLOT_APPROVER");
        c
    }

    /// `release FILE --specs specs --register register --approver ...`.
    pub fn release(&self, file: &str) -> Command {
        let mut c = self.cmd();
        c.args([
            "release",
            file,
            "--specs",
            "specs",
            "--register",
            "register",
        ])
        .args(["--approver", "QC Laboratory Supervisor"]);
        c
    }

    /// Every file under the workspace with a digest of its bytes, for "nothing changed" checks.
    pub fn snapshot(&self) -> Vec<(PathBuf, String)> {
        fn walk(p: &Path, out: &mut Vec<(PathBuf, String)>) {
            let mut entries: Vec<_> = std::fs::read_dir(p)
                .unwrap()
                .map(|e| e.unwrap().path())
                .collect();
            entries.sort();
            for e in entries {
                // A lot index is derived and rebuilt at will: not part of what a command changed.
                let name = e.file_name().and_then(|n| n.to_str()).unwrap_or("");
                if resinlot::record::index::is_index_name(name) {
                    continue;
                }
                if e.is_dir() {
                    out.push((e.clone(), "folder".into()));
                    walk(&e, out);
                } else {
                    use sha2::Digest;
                    let digest = sha2::Sha256::digest(std::fs::read(&e).unwrap());
                    out.push((e.clone(), resinlot::record::trend_file::hex(&digest)));
                }
            }
        }
        let mut v = Vec::new();
        walk(self.dir.path(), &mut v);
        v
    }
}

/// Three released lots of TP-2000 (wide CSV).
pub const GOOD: &str = "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\n\
T26-101,TP-2000,2026-05-02,0.52,55.4,540\n\
T26-102,TP-2000,2026-05-09,0.48,55.9,530\n\
T26-103,TP-2000,2026-05-16,0.55,55.1,548\n";

/// Text of each page of a PDF, read back with printpdf's parser; runs joined by single
/// spaces so phrases split across runs still match.
pub fn page_texts(pdf: &[u8]) -> Vec<String> {
    use printpdf::{PdfDocument, PdfParseOptions};
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

/// The PDFs in a folder, sorted by name.
pub fn pdfs(dir: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .map(|rd| {
            rd.map(|e| e.unwrap().path())
                .filter(|p| p.extension().is_some_and(|x| x == "pdf"))
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}
