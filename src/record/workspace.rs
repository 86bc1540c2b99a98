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

/// Prepares `dir` for the demo: creates it, or clears it when it is a demo workspace made
/// earlier (it carries [`DEMO_MARKER`]); any other existing, non-empty folder is refused.
pub fn prepare_demo(dir: &Path) -> Result<()> {
    if dir.exists() {
        let empty = std::fs::read_dir(dir)
            .map_err(|e| Error::io(dir, "reading folder", e))?
            .next()
            .is_none();
        if dir.join(DEMO_MARKER).is_file() {
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
    std::fs::write(
        dir.join(DEMO_MARKER),
        "This folder was made by `resinlot demo` and is rebuilt from scratch by running it again.\n",
    )
    .map_err(|e| Error::io(dir, "writing", e))?;
    extract(&SPECS, &dir.join("specs"))?;
    extract(&TEMPLATES, &dir.join("templates"))?;
    extract(&DEMO_LOTS, &dir.join("demo-lots"))?;
    Ok(())
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
        std::fs::write(demo.join("stale.txt"), "old output").unwrap();
        prepare_demo(&demo).unwrap();
        assert!(!demo.join("stale.txt").exists());
        assert!(demo.join("specs/pd-2000.toml").exists());
    }
}
