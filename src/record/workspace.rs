//! Workspaces: the embedded demo plant and starter files, and safe creation of a folder.

use std::path::Path;

use include_dir::{include_dir, Dir};

use crate::error::{Error, Result};

/// The shipped product specs, recipes and customers (the demo plant).
pub static SPECS: Dir<'_> = include_dir!("$CARGO_MANIFEST_DIR/specs");
/// The shipped templates and site file.
pub static TEMPLATES: Dir<'_> = include_dir!("$CARGO_MANIFEST_DIR/templates");
/// The shipped demo lots and cooks.
pub static DEMO_LOTS: Dir<'_> = include_dir!("$CARGO_MANIFEST_DIR/demo-lots");

/// Name of the file that marks a folder as a demo workspace made by `resinlot demo`.
pub const DEMO_MARKER: &str = ".resinlot-demo-workspace";

/// Writes every file of `dir` below `target`.
pub fn extract(dir: &Dir<'_>, target: &Path) -> Result<()> {
    for f in dir.files() {
        let p = target.join(f.path());
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).map_err(|e| Error::io(parent, "creating folder", e))?;
        }
        std::fs::write(&p, f.contents()).map_err(|e| Error::io(&p, "writing", e))?;
    }
    for d in dir.dirs() {
        extract(d, target)?;
    }
    Ok(())
}

/// First lines of the demo marker; the manifest of what the demo wrote follows.
const MARKER_HEAD: &str =
    "This folder was made by `resinlot demo`. Running the demo again rebuilds it from\n\
scratch, but only while every file in it is one the demo wrote, as listed below\n\
(SHA-256 and path); otherwise the demo refuses and deletes nothing.\n";

/// Prepares `dir` for the demo: creates it, or clears it when it is a demo workspace made
/// earlier (it carries [`DEMO_MARKER`]) holding only files the demo wrote, unchanged; a demo
/// workspace with a file added or changed since (a later real release, its certificate, a
/// user's file) is refused, naming the files, and so is any other existing, non-empty folder.
pub fn prepare_demo(dir: &Path) -> Result<()> {
    if dir.exists() {
        let empty = std::fs::read_dir(dir)
            .map_err(|e| Error::io(dir, "reading folder", e))?
            .next()
            .is_none();
        if dir.join(DEMO_MARKER).is_file() {
            check_demo_unchanged(dir)?;
            std::fs::remove_dir_all(dir).map_err(|e| Error::io(dir, "removing the old demo", e))?;
        } else if !empty {
            return Err(Error::invalid(
                dir.display().to_string(),
                "the folder exists and is not a demo workspace made by resinlot",
                "Choose another folder (resinlot demo DIR); the demo only ever replaces its own workspace.",
            ));
        }
    }
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, "creating folder", e))?;
    std::fs::write(dir.join(DEMO_MARKER), MARKER_HEAD).map_err(|e| Error::io(dir, "writing", e))?;
    extract(&SPECS, &dir.join("specs"))?;
    extract(&TEMPLATES, &dir.join("templates"))?;
    extract(&DEMO_LOTS, &dir.join("demo-lots"))?;
    seal_demo(dir)
}

/// Records in the demo marker every file now in the demo workspace `dir`, with its SHA-256,
/// as written by the demo; the demo calls it after every step, so a rebuild can tell the
/// demo's own files from anything added or changed later.
pub fn seal_demo(dir: &Path) -> Result<()> {
    let mut text = MARKER_HEAD.to_string();
    for (path, digest) in workspace_files(dir)? {
        text.push_str(&format!("{digest}  {path}\n"));
    }
    crate::support::output::write_atomic(&dir.join(DEMO_MARKER), text.as_bytes(), true)
}

/// Every file below `dir` but the marker, as (path relative to `dir` with '/', digest): the
/// SHA-256 hex of a file's bytes, `symlink:<target>` for a link (not followed), `other` for
/// anything else that is not a folder. Sorted by path.
fn workspace_files(dir: &Path) -> Result<Vec<(String, String)>> {
    fn walk(root: &Path, p: &Path, out: &mut Vec<(String, String)>) -> Result<()> {
        for e in std::fs::read_dir(p).map_err(|e| Error::io(p, "reading folder", e))? {
            let e = e.map_err(|e| Error::io(p, "reading folder", e))?;
            let path = e.path();
            let meta =
                std::fs::symlink_metadata(&path).map_err(|e| Error::io(&path, "reading", e))?;
            let rel = path
                .strip_prefix(root)
                .unwrap_or(&path)
                .components()
                .map(|c| c.as_os_str().to_string_lossy())
                .collect::<Vec<_>>()
                .join("/");
            if meta.is_dir() {
                walk(root, &path, out)?;
            } else if rel == DEMO_MARKER
                || e.file_name()
                    .to_str()
                    .is_some_and(crate::record::index::is_index_name)
            {
                // The marker itself, and lot indexes (derived, rebuilt at will, not the record).
                continue;
            } else if meta.file_type().is_symlink() {
                let target =
                    std::fs::read_link(&path).map_err(|e| Error::io(&path, "reading", e))?;
                out.push((rel, format!("symlink:{}", target.display())));
            } else if meta.is_file() {
                use sha2::Digest;
                let bytes = std::fs::read(&path).map_err(|e| Error::io(&path, "reading", e))?;
                out.push((
                    rel,
                    crate::record::trend_file::hex(&sha2::Sha256::digest(bytes)),
                ));
            } else {
                out.push((rel, "other".to_string()));
            }
        }
        Ok(())
    }
    let mut out = Vec::new();
    walk(dir, dir, &mut out)?;
    out.sort();
    Ok(out)
}

/// The manifest in a demo marker's text: path -> digest.
fn manifest(marker: &str) -> std::collections::HashMap<&str, &str> {
    marker
        .lines()
        .filter_map(|l| l.split_once("  "))
        .filter(|(digest, _)| {
            digest.starts_with("symlink:")
                || *digest == "other"
                || (digest.len() == 64 && digest.bytes().all(|b| b.is_ascii_hexdigit()))
        })
        .map(|(digest, path)| (path, digest))
        .collect()
}

/// Files of the demo workspace `dir` that differ from what the demo recorded in its marker:
/// "path (added)" for a file the demo did not write, "path (changed)" for one that changed
/// since. A file the demo wrote and that is gone is not a difference: rebuilding loses nothing.
pub fn demo_differences(dir: &Path) -> Result<Vec<String>> {
    let marker_path = dir.join(DEMO_MARKER);
    let marker = std::fs::read(&marker_path).map_err(|e| Error::io(&marker_path, "reading", e))?;
    let marker = String::from_utf8_lossy(&marker);
    let recorded = manifest(&marker);
    Ok(workspace_files(dir)?
        .into_iter()
        .filter_map(|(path, digest)| match recorded.get(path.as_str()) {
            None => Some(format!("{path} (added)")),
            Some(d) if *d != digest => Some(format!("{path} (changed)")),
            Some(_) => None,
        })
        .collect())
}

/// Refuses to rebuild the demo workspace `dir` when it holds a file added or changed since
/// the demo wrote it (see [`demo_differences`]), naming the files.
fn check_demo_unchanged(dir: &Path) -> Result<()> {
    let diffs = demo_differences(dir)?;
    if diffs.is_empty() {
        return Ok(());
    }
    const SHOWN: usize = 12;
    let mut list = diffs
        .iter()
        .take(SHOWN)
        .cloned()
        .collect::<Vec<_>>()
        .join(", ");
    if diffs.len() > SHOWN {
        list.push_str(&format!(" and {} more", diffs.len() - SHOWN));
    }
    Err(Error::invalid(
        dir.display().to_string(),
        format!(
            "the demo workspace holds {} file{} the demo did not write as it is now: {list}",
            diffs.len(),
            if diffs.len() == 1 { "" } else { "s" }
        ),
        "The demo will not delete them: move what you want to keep out of the folder (and delete the rest yourself), or give the demo another folder (resinlot demo DIR).",
    ))
}

/// A commented example product spec for `resinlot init`.
pub const EXAMPLE_SPEC: &str = r#"# Example product spec: edit it for your product, one file per product revision.
# The tool finds a product by `code`; a new revision gets a new file with a later `effective`
# date (old revisions stay in place and keep applying to lots made before that date).
code = "EX-1000"
name = "Example polyester diol, 1000 g/mol class"
revision = "A"
effective = 2026-01-01
functionality = 2.0             # end groups per molecule, for the end-group Mn
decision_rule = "guarded"       # "simple" (ILAC-G8 4.2.1) or "guarded" (guard band w = U, ILAC-G8 4.2.3)
recipe = "recipes/example.toml" # optional; enables extent_of_reaction and xn
retest_months = 12
rounding = "half_even"          # ASTM E29 (default); "half_up" where your pharmacopoeia asks

[properties.acid_value]
label = "Acid value"
unit = "mg KOH/g"
method = "ISO 2114"
max = 1.0
decimals = 2
uncertainty = 0.05              # expanded uncertainty U (k = 2) of your method, same unit

[properties.hydroxyl_value]
label = "Hydroxyl value"
unit = "mg KOH/g"
method = "ISO 4629-2"
acidity_correction = true       # results are entered raw; the acid value is added
min = 106.0
max = 118.0
decimals = 1
uncertainty = 1.5

[properties.mn]                 # derived: computed from AV and OHV, never entered
min = 950
max = 1050
decimals = 0

[properties.extent_of_reaction]
decimals = 4
"#;

/// A commented example recipe for `resinlot init`.
pub const EXAMPLE_RECIPE: &str = r#"# Example batch recipe: what is charged to the reactor.
name = "EX-1000 charge"

[[component]]
name = "adipic acid"
mass_kg = 5000.0
molar_mass = 146.14        # g/mol
acid_groups = 2            # carboxyl equivalents per molecule; an anhydride counts 2
hydroxyl_groups = 0
anhydride = false          # true: opening the ring forms an ester without releasing water

[[component]]
name = "diethylene glycol"
mass_kg = 4300.0
molar_mass = 106.12
acid_groups = 0
hydroxyl_groups = 2
"#;

/// A commented example customer file for `resinlot init`.
pub const EXAMPLE_CUSTOMER: &str = r#"# Example customer overlay; the file stem is the name given to --customer.
name = "Example Customer Ltd"

[products.EX-1000]
part_number = "EXC-001"
report = ["acid_value", "hydroxyl_value", "mn"]   # in this order
statements = ["Shelf life 12 months in closed original drums."]

[products.EX-1000.limits.mn]     # may only tighten the product spec
min = 970
max = 1030
"#;

/// Creates an empty workspace for a lab adopting the tool; refuses an existing folder.
pub fn init(dir: &Path) -> Result<Vec<String>> {
    if dir.exists()
        && std::fs::read_dir(dir)
            .map_err(|e| Error::io(dir, "reading folder", e))?
            .next()
            .is_some()
    {
        return Err(Error::invalid(
            dir.display().to_string(),
            "the folder exists and is not empty",
            "Give a new folder name; init never overwrites a workspace.",
        ));
    }
    let files: [(&str, &str); 4] = [
        ("specs/example-product.toml", EXAMPLE_SPEC),
        ("specs/recipes/example.toml", EXAMPLE_RECIPE),
        ("specs/customers/example-customer.toml", EXAMPLE_CUSTOMER),
        (
            "README.md",
            "# resinlot workspace\n\nEdit first: `templates/site.toml` (your site's name, address and certificate number prefix), then `specs/example-product.toml` and its recipe. Check with `resinlot specs check specs`.\n",
        ),
    ];
    let mut written = Vec::new();
    for (rel, text) in files {
        let p = dir.join(rel);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).map_err(|e| Error::io(parent, "creating folder", e))?;
        }
        std::fs::write(&p, text).map_err(|e| Error::io(&p, "writing", e))?;
        written.push(rel.to_string());
    }
    extract(&TEMPLATES, &dir.join("templates"))?;
    written.push("templates/".to_string());
    Ok(written)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn init_files_are_valid_and_init_refuses_existing() {
        let d = tempfile::tempdir().unwrap();
        let ws = d.path().join("lab");
        init(&ws).unwrap();
        let set = crate::spec::SpecSet::load(&ws.join("specs")).unwrap();
        assert!(set.products.contains_key("EX-1000"));
        crate::spec::customer::load_all(&ws.join("specs/customers"), &set).unwrap();
        assert!(init(&ws).is_err());
    }

    #[test]
    fn demo_refuses_foreign_folders_and_rebuilds_its_own() {
        let d = tempfile::tempdir().unwrap();
        let foreign = d.path().join("mine");
        std::fs::create_dir(&foreign).unwrap();
        std::fs::write(foreign.join("notes.txt"), "keep me").unwrap();
        assert!(prepare_demo(&foreign).is_err());
        assert!(foreign.join("notes.txt").exists());
        let demo = d.path().join("demo");
        prepare_demo(&demo).unwrap();
        // An output of the earlier demo run, recorded as the demo does after each step.
        std::fs::write(demo.join("stale.txt"), "old output").unwrap();
        seal_demo(&demo).unwrap();
        prepare_demo(&demo).unwrap();
        assert!(!demo.join("stale.txt").exists());
        assert!(demo.join("specs/pd-2000.toml").exists());
    }

    /// Issue #13 item 21: a file added to or changed in a demo workspace after the demo wrote
    /// it stops the rebuild, which names it and deletes nothing; a removed one does not.
    #[test]
    fn demo_refuses_to_delete_files_it_did_not_write_issue_13() {
        let d = tempfile::tempdir().unwrap();
        let demo = d.path().join("demo");
        prepare_demo(&demo).unwrap();
        assert!(demo_differences(&demo).unwrap().is_empty());
        std::fs::write(demo.join("notes.txt"), "mine").unwrap();
        let spec = demo.join("specs/pd-2000.toml");
        let mut text = std::fs::read_to_string(&spec).unwrap();
        text.push_str("# edited by hand\n");
        std::fs::write(&spec, &text).unwrap();
        std::fs::remove_file(demo.join("templates/site.toml")).unwrap();
        assert_eq!(
            demo_differences(&demo).unwrap(),
            vec!["notes.txt (added)", "specs/pd-2000.toml (changed)"]
        );
        let e = prepare_demo(&demo).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        let msg = e.to_string();
        assert!(msg.contains("notes.txt (added)"), "{msg}");
        assert!(msg.contains("specs/pd-2000.toml (changed)"), "{msg}");
        assert_eq!(
            std::fs::read_to_string(demo.join("notes.txt")).unwrap(),
            "mine"
        );
        assert_eq!(std::fs::read_to_string(&spec).unwrap(), text);
        std::fs::remove_file(demo.join("notes.txt")).unwrap();
        seal_demo(&demo).unwrap();
        prepare_demo(&demo).unwrap();
        assert!(demo.join("templates/site.toml").is_file());
    }

    /// A marker written before the manifest existed lists no files: nothing is deleted.
    #[test]
    fn demo_marker_without_manifest_is_refused_issue_13() {
        let d = tempfile::tempdir().unwrap();
        let demo = d.path().join("demo");
        std::fs::create_dir(&demo).unwrap();
        std::fs::write(
            demo.join(DEMO_MARKER),
            "This folder was made by `resinlot demo` and is rebuilt from scratch by running it again.\n",
        )
        .unwrap();
        std::fs::create_dir(demo.join("register")).unwrap();
        std::fs::write(demo.join("register/PD-2000.csv"), "rows").unwrap();
        let e = prepare_demo(&demo).unwrap_err();
        assert!(
            e.to_string().contains("register/PD-2000.csv (added)"),
            "{e}"
        );
        assert!(demo.join("register/PD-2000.csv").is_file());
    }
}
