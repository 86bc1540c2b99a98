//! Limits frozen into the record (issue #15): every trend row written since layout v3 records
//! `spec_sha256`, the SHA-256 of the spec revision file the lot was decided on. A revision
//! edited in place after use no longer matches; `verify`, `specs check`, `certify` and
//! `find --customer` find it here and refuse to work from it ("make a new revision instead").

use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::Path;

use serde::Serialize;

use crate::error::{Error, Result};
use crate::record::{lines, trend_file};
use crate::spec::SpecSet;

/// A spec revision whose file is not the one lots were decided on.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ChangedSpec {
    /// Product code.
    pub product: String,
    /// Revision label.
    pub revision: String,
    /// SHA-256 recorded on the lots.
    pub recorded: String,
    /// SHA-256 of today's file, `None` when the revision is no longer in the specs folder.
    pub now: Option<String>,
    /// Distinct lots decided on the recorded file.
    pub lots: usize,
}

impl ChangedSpec {
    /// One sentence for people: what changed, how many lots it concerns, what to do.
    pub fn message(&self) -> String {
        let what = match &self.now {
            Some(_) => "was changed after",
            None => "is no longer in the specs folder, but",
        };
        format!(
            "{} revision {} {what} {} lot{} {} decided on it (recorded SHA-256 {}…{}); make a new revision instead of editing one in use, and restore revision {} as it was from backup",
            self.product,
            self.revision,
            self.lots,
            if self.lots == 1 { "" } else { "s" },
            if self.lots == 1 { "was" } else { "were" },
            &self.recorded[..self.recorded.len().min(12)],
            self.now
                .as_ref()
                .map(|n| format!(", file now {}…", &n[..n.len().min(12)]))
                .unwrap_or_default(),
            self.revision
        )
    }
}

/// What one trend file says about the spec revisions its lots were decided on.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct SpecUse {
    /// Revisions changed since use, by revision.
    pub changed: Vec<ChangedSpec>,
    /// Rows that record no spec SHA-256 (written before layout v3): they cannot be checked.
    pub unrecorded: usize,
}

/// True for a SHA-256 in lower-case hex.
fn is_sha256(s: &str) -> bool {
    s.len() == 64
        && s.bytes()
            .all(|b| b.is_ascii_digit() || (b'a'..=b'f').contains(&b))
}

/// The lot, product and spec revision of a row (cells 2, 3 and 5) and its `spec_sha256` cell,
/// the last but one (just before `chain`). `None` for a line that does not end in a chain
/// value or whose `spec_sha256` is neither empty nor a SHA-256 (damage, which the chain
/// check reports).
fn cells_of(line: &str) -> Option<(String, String, String, String)> {
    let mut it = line.rsplitn(3, ',');
    let (chain, sha) = (it.next()?, it.next()?);
    if !is_sha256(chain) || !(sha.is_empty() || is_sha256(sha)) {
        return None;
    }
    let head: Vec<&str> = line.splitn(7, ',').collect();
    if head.len() < 7 || head[..6].iter().any(|c| c.starts_with('"')) {
        // A quoted cell (a revision label holding a comma): the slow, exact split.
        let cells = trend_file::split_line(line);
        let n = cells.len();
        return (n >= 8).then(|| {
            (
                cells[2].clone(),
                cells[3].clone(),
                cells[5].clone(),
                cells[n - 2].clone(),
            )
        });
    }
    Some((
        head[2].to_string(),
        head[3].to_string(),
        head[5].to_string(),
        sha.to_string(),
    ))
}

/// Compares the `spec_sha256` of every row of the trend file at `path` with today's spec
/// files in `specs` (each row names its product and revision); streams the file, keeping only
/// the lots of changed revisions. Damaged lines are skipped: the chain check reports them.
pub fn spec_use(path: &Path, specs: &SpecSet) -> Result<SpecUse> {
    let mut out = SpecUse::default();
    let mut has_column = false;
    // (product, revision, recorded sha) -> today's sha when it differs (Some(None): no file).
    type Key = (String, String, String);
    let mut differs: HashMap<Key, Option<Option<String>>> = HashMap::new();
    let mut lots: BTreeMap<Key, HashSet<String>> = BTreeMap::new();
    lines::for_each_line(path, lines::CHUNK, |line_no, bytes| {
        let line = String::from_utf8_lossy(bytes);
        if line_no == 1 {
            let cols = trend_file::split_line(&line);
            has_column = cols.len() >= 2 && cols[cols.len() - 2] == "spec_sha256";
            return Ok(());
        }
        if line.is_empty() {
            return Ok(());
        }
        if !has_column {
            out.unrecorded += 1;
            return Ok(());
        }
        let Some((lot, product, revision, sha)) = cells_of(&line) else {
            return Ok(());
        };
        if sha.is_empty() {
            out.unrecorded += 1;
            return Ok(());
        }
        let key = (product, revision, sha);
        let verdict = differs.entry(key.clone()).or_insert_with(|| {
            let now = specs.revision(&key.0, &key.1).map(|s| s.sha256.to_string());
            (now.as_deref() != Some(key.2.as_str())).then_some(now)
        });
        if verdict.is_some() {
            lots.entry(key).or_default().insert(lot);
        }
        Ok(())
    })?;
    for (key, set) in lots {
        let now = differs.get(&key).cloned().flatten().flatten();
        let (product, revision, recorded) = key;
        out.changed.push(ChangedSpec {
            product,
            revision,
            recorded,
            now,
            lots: set.len(),
        });
    }
    Ok(out)
}

/// What the specs folder says of the register, for `verify` and `specs check`: the changed
/// revisions of every trend file, and how many rows could not be compared.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct RegisterSpecs {
    /// Every revision changed after use, all products.
    pub changed: Vec<ChangedSpec>,
    /// Rows written before spec hashes were recorded.
    pub unrecorded: usize,
}

/// Compares every trend file of `register` with the spec files of `specs`.
pub fn check_register(register: &Path, specs: &SpecSet) -> Result<RegisterSpecs> {
    let mut out = RegisterSpecs::default();
    for path in crate::record::query::trend_files(register)? {
        let used = spec_use(&path, specs)?;
        out.changed.extend(used.changed);
        out.unrecorded += used.unrecorded;
    }
    Ok(out)
}

/// Refuses (exit 1) to work from a spec revision of `product` that changed after lots were
/// decided on it, for `certify` and `find --customer`; `only` limits the check to one
/// revision (a lot's).
pub fn refuse_changed(
    path: &Path,
    product: &str,
    specs: &SpecSet,
    only: Option<&str>,
) -> Result<()> {
    let used = spec_use(path, specs)?;
    let changed: Vec<String> = used
        .changed
        .iter()
        .filter(|c| c.product == product && only.is_none_or(|r| r == c.revision))
        .map(ChangedSpec::message)
        .collect();
    if changed.is_empty() {
        Ok(())
    } else {
        Err(Error::Shortfall(format!(
            "the limits on record cannot be relied on: {}",
            changed.join("; ")
        )))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Test fixture: an invented spec, not a real product.
    const SPEC: &str = "code='PX-1'\nname='x'\nrevision='A'\neffective=2026-01-01\nfunctionality=2.0\n\
        decision_rule='simple'\nretest_months=12\n[properties.acid_value]\nlabel='AV'\nunit='mg KOH/g'\nmax=1.0\ndecimals=2\n";

    fn specs(dir: &Path, text: &str) -> SpecSet {
        std::fs::write(dir.join("px.toml"), text).unwrap();
        SpecSet::load(dir).unwrap()
    }

    fn row(lot: &str, rev: &str, sha: &str) -> Vec<(&'static str, String)> {
        vec![
            ("lot", lot.to_string()),
            ("product", "PX-1".into()),
            ("manufactured", "2026-02-01".into()),
            ("spec_revision", rev.to_string()),
            ("status", "released".into()),
            ("spec_sha256", sha.to_string()),
        ]
    }

    #[test]
    fn an_edited_revision_is_found_with_its_lots_issue_15() {
        let dir = tempfile::tempdir().unwrap();
        let set = specs(dir.path(), SPEC);
        let sha = set.revision("PX-1", "A").unwrap().sha256.to_string();
        let path = dir.path().join("PX-1.csv");
        let keys = vec!["acid_value".to_string()];
        trend_file::write_for_test(
            &path,
            &keys,
            &[
                row("L1", "A", &sha),
                row("L2", "A", &sha),
                row("L2", "A", &sha),
                row("L3", "A", ""),
            ],
        );
        let used = spec_use(&path, &set).unwrap();
        assert_eq!(used.changed, vec![]);
        assert_eq!(used.unrecorded, 1);
        assert!(refuse_changed(&path, "PX-1", &set, None).is_ok());
        // Edited in place: AV max 1.0 -> 0.5, same revision letter.
        let edited = specs(dir.path(), &SPEC.replace("max=1.0", "max=0.5"));
        let used = spec_use(&path, &edited).unwrap();
        assert_eq!(used.changed.len(), 1);
        let c = &used.changed[0];
        assert_eq!((c.revision.as_str(), c.lots), ("A", 2));
        assert_eq!(c.recorded, sha);
        assert!(c
            .message()
            .contains("PX-1 revision A was changed after 2 lots were decided on it"));
        let e = refuse_changed(&path, "PX-1", &edited, Some("A")).unwrap_err();
        assert_eq!(e.exit_code(), 1, "{e}");
        assert!(refuse_changed(&path, "PX-1", &edited, Some("B")).is_ok());
    }

    #[test]
    fn row_cells_are_found_with_a_quoted_revision() {
        let (a, b) = ("a".repeat(64), "b".repeat(64));
        assert_eq!(
            cells_of(&format!(
                "1,t,L1,P,2026-01-01,A,released,x,,,0.5,pass,{a},{b}"
            )),
            Some(("L1".into(), "P".into(), "A".into(), a.clone()))
        );
        assert_eq!(
            cells_of(&format!("1,t,L1,P,2026-01-01,\"A,1\",released,x,{a},{b}")),
            Some(("L1".into(), "P".into(), "A,1".into(), a.clone()))
        );
        // A torn line (no whole chain value) or a damaged hash cell is skipped.
        assert_eq!(
            cells_of(&format!("1,t,L1,P,2026-01-01,A,x,{a},{}", &b[..20])),
            None
        );
        assert_eq!(cells_of(&format!("1,t,L1,P,2026-01-01,A,x,zz,{b}")), None);
    }
}
