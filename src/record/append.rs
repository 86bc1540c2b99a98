//! Appending evaluated lots to the trend files, as plan-then-commit: lock every product's
//! trend file, decide per lot what to write ([`plan`], pure), then append under the locks
//! ([`commit`]). Every check runs before the first byte is written, so a refusal leaves every
//! file as it was.

use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::Path;

use serde::Serialize;

use crate::error::{Error, Result};
use crate::lot::disposition::Decision;
use crate::lot::evaluate::{LotDecision, Status};
use crate::lot::note::LotNote;
use crate::record::heads::HeadsLog;
use crate::record::trend_file::{self, Locked, Trend, Wait};
use crate::spec::keys;
use crate::spec::SpecSet;

/// What happened to one lot in the trend file.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Recorded {
    /// Appended as row `seq`.
    New(usize),
    /// Appended as row `seq`, superseding row `supersedes`.
    Retest {
        /// New row.
        seq: usize,
        /// Superseded row.
        supersedes: usize,
    },
    /// Already recorded with identical results as row `seq`; nothing written.
    Unchanged(usize),
    /// Not written (dry run).
    NotWritten,
}

/// What the trend file needs for one lot, decided before anything is written.
#[derive(Debug, Clone, PartialEq)]
pub enum Plan {
    /// The lot is not in its trend file yet: append its first row.
    New,
    /// The lot is recorded with other results and a retest was asked for: append a row that
    /// supersedes row `supersedes` (which stays as history), giving `reason`.
    Retest {
        /// Sequence number of the lot's current row.
        supersedes: usize,
        /// Why the lot is retested, recorded on the new row.
        reason: String,
    },
    /// The lot is recorded with identical results as row `seq`: write nothing.
    Unchanged {
        /// Sequence number of the lot's current row.
        seq: usize,
    },
}

impl Plan {
    /// True when the lot gets a new row (and so a new internal certificate).
    pub fn writes(&self) -> bool {
        !matches!(self, Plan::Unchanged { .. })
    }
}

/// One release run, as the planning step needs it.
#[derive(Debug, Clone, Copy)]
pub struct Batch<'a> {
    /// The results file, named in refusals.
    pub results: &'a Path,
    /// Line of each lot in the results file (parallel to `decisions`).
    pub lines: &'a [u64],
    /// The evaluated lots.
    pub decisions: &'a [LotDecision],
    /// `Some(reason)` when lots already recorded with other results may be retested.
    pub retest: Option<&'a str>,
}

impl Batch<'_> {
    /// "file:line, lot 'id'" for lot `i`, the place named in a refusal.
    fn place(&self, i: usize) -> String {
        format!(
            "{}:{}, lot '{}'",
            self.results.display(),
            self.lines[i],
            self.decisions[i].lot
        )
    }
}

/// Locks the trend file of every product in `decisions` (in product order), creating missing
/// files with the columns of every revision of the product's spec; an existing file must hold
/// a column for every property evaluated.
pub fn lock_products<'a>(
    register: &Path,
    specs: &SpecSet,
    decisions: &'a [LotDecision],
    wait: Wait,
) -> Result<BTreeMap<&'a str, Locked>> {
    let mut needed_by: BTreeMap<&str, Vec<String>> = BTreeMap::new();
    for d in decisions {
        let needed = needed_by.entry(&d.product).or_default();
        for p in &d.properties {
            if !needed.iter().any(|n| *n == p.property) {
                needed.push(p.property.to_string());
            }
        }
    }
    let mut locks = BTreeMap::new();
    for (product, needed) in needed_by {
        let keys = specs.all_keys(product);
        let path = trend_file::path_for(register, product);
        locks.insert(product, trend_file::lock(&path, &keys, &needed, wait)?);
    }
    Ok(locks)
}

/// Refuses to append rows stamped `now` to a trend file whose last row was recorded later:
/// the clock went backwards (a wrong system clock or `SOURCE_DATE_EPOCH`), and the file's
/// rows must stay in time order (issue #13, item 15). Only the products that get a new row
/// (`plans[i].writes()` for a lot of that product) are checked; times are RFC 3339 and an
/// unreadable recorded time is left to `verify`. Pure.
pub fn check_time_order(
    trends: &BTreeMap<&str, &Trend>,
    decisions: &[LotDecision],
    plans: &[Plan],
    now: &str,
) -> Result<()> {
    let now_t = clock_time(now)?;
    let mut checked: HashSet<&str> = HashSet::new();
    for (d, _) in decisions.iter().zip(plans).filter(|(_, p)| p.writes()) {
        if !checked.insert(d.product.as_str()) {
            continue;
        }
        let Some(t) = trends.get(d.product.as_str()) else {
            continue;
        };
        check_clock(t, now_t, now)?;
    }
    Ok(())
}

/// `now` parsed, refused when it is not RFC 3339 (a bug).
fn clock_time(now: &str) -> Result<chrono::DateTime<chrono::FixedOffset>> {
    chrono::DateTime::parse_from_rfc3339(now).map_err(|_| {
        Error::invalid(
            "clock",
            format!("'{now}' is not an RFC 3339 time"),
            "Report this as a bug: the clock's time is always RFC 3339.",
        )
    })
}

/// Refuses to append a row stamped `now` (parsed: `now_t`) to `t` when its last row was
/// recorded later (see [`check_time_order`]); an unreadable recorded time is left to `verify`.
fn check_clock(t: &Trend, now_t: chrono::DateTime<chrono::FixedOffset>, now: &str) -> Result<()> {
    let Some(last) = t.rows.last() else {
        return Ok(());
    };
    let at = t.cell(last, "recorded_at");
    if let Ok(last_t) = chrono::DateTime::parse_from_rfc3339(at) {
        if now_t < last_t {
            return Err(Error::invalid(
                format!("{}:{}", t.path.display(), last.line),
                format!(
                    "the clock says {now}, earlier than {at}, when the file's last row was recorded"
                ),
                "Check the system clock and SOURCE_DATE_EPOCH; rows are appended in time order, so nothing was written.",
            ));
        }
    }
    Ok(())
}

/// The lots of `decisions` already recorded in the trend file of a product not in `skip`:
/// lot id -> that product. Reads nothing when the register folder does not exist yet.
pub fn lots_elsewhere(
    register: &Path,
    decisions: &[LotDecision],
    skip: &dyn Fn(&str) -> bool,
) -> Result<HashMap<String, String>> {
    // Compared without regard to case (issue #14).
    let upper: Vec<String> = decisions
        .iter()
        .map(|d| d.lot.as_str().to_ascii_uppercase())
        .collect();
    let ours: HashSet<&str> = upper.iter().map(String::as_str).collect();
    lots_elsewhere_of(register, &|id| ours.contains(id), skip)
}

/// The lots recorded in the trend file of a product not in `skip` for which `ours` (given the
/// id in upper case) is true: lot id as recorded -> that product (see [`lots_elsewhere`]).
pub fn lots_elsewhere_of(
    register: &Path,
    ours: &dyn Fn(&str) -> bool,
    skip: &dyn Fn(&str) -> bool,
) -> Result<HashMap<String, String>> {
    let mut elsewhere: HashMap<String, String> = HashMap::new();
    if !register.is_dir() {
        return Ok(elsewhere);
    }
    for path in crate::record::query::trend_files(register)? {
        let product = path
            .file_stem()
            .map(|s| s.to_string_lossy().to_string())
            .unwrap_or_default();
        if skip(&product) {
            continue;
        }
        for lot in recorded_lots(&path, ours)? {
            elsewhere.insert(lot, product.clone());
        }
    }
    Ok(elsewhere)
}

/// The recorded lot ids that match `ours` (upper-case ids) without regard to case, in another
/// product's trend file, read as bytes and tolerant
/// of that file's own faults: a torn or unreadable tail of one product must not block releases
/// of every other product (issue #13, item 13); the broken product is refused when it is
/// itself released. A last line without its line feed counts only when it has every field.
fn recorded_lots(path: &Path, ours: &dyn Fn(&str) -> bool) -> Result<Vec<String>> {
    let mut columns = 0usize;
    let mut lots = Vec::new();
    crate::record::lines::for_each_block(path, crate::record::lines::CHUNK, |block| {
        for (i, line) in block.split_inclusive(|&b| b == b'\n').enumerate() {
            let complete = line.ends_with(b"\n");
            let line = line.strip_suffix(b"\n").unwrap_or(line);
            if columns == 0 && i == 0 {
                if !complete {
                    return Ok(()); // a torn header: nothing is recorded yet
                }
                let cols = trend_file::split_line(&String::from_utf8_lossy(line));
                trend_file::check_trend_header(path, &cols)?;
                columns = cols.len();
                continue;
            }
            if complete {
                // seq and recorded_at never hold a comma: the lot is the third field.
                let lot = line.split(|&b| b == b',').nth(2);
                if let Some(lot) = lot.and_then(|l| std::str::from_utf8(l).ok()) {
                    if ours(lot.to_ascii_uppercase().as_str()) {
                        lots.push(lot.to_string());
                    }
                }
            } else {
                let cells = trend_file::split_line(&String::from_utf8_lossy(line));
                if cells.len() == columns && ours(cells[2].to_ascii_uppercase().as_str()) {
                    lots.push(cells[2].clone());
                }
            }
        }
        Ok(())
    })?;
    Ok(lots)
}

/// Decides, for every lot of `batch`, what its trend file needs. Pure: reads only the trends
/// as read under their locks (`trends`, by product), the specs and `elsewhere` (lot id ->
/// product it is already recorded under, from [`lots_elsewhere`]).
///
/// Refuses, before anything is written, a lot id already recorded under another product (a lot
/// id names one lot plant-wide), and a lot already recorded with different results unless
/// `batch.retest` allows a retest. Results are the same when the manufacture date and every
/// entered value of a measured property are the same number ("0.98" = "0.980"); derived
/// properties (Mn, Xn, ...) follow from those and are not compared.
pub fn plan(
    batch: &Batch<'_>,
    trends: &BTreeMap<&str, &Trend>,
    specs: &SpecSet,
    elsewhere: &HashMap<String, String>,
) -> Result<Vec<Plan>> {
    let mut seen: HashMap<String, usize> = HashMap::new();
    for (i, d) in batch.decisions.iter().enumerate() {
        if let Some(other) = elsewhere.get(d.lot.as_str()) {
            return Err(Error::invalid(
                batch.place(i),
                format!("this lot id is already recorded for product {other}"),
                "Lot ids must be unique across products; check the lot id and the product code.",
            ));
        }
        if let Some((id, other)) = elsewhere
            .iter()
            .find(|(id, _)| id.eq_ignore_ascii_case(&d.lot))
        {
            return Err(same_but_case(
                &batch.place(i),
                &d.lot,
                id,
                &format!("product {other}"),
            ));
        }
        // Lot ids are unique without regard to case (issue #14), also within one file.
        if let Some(&j) = seen.get(&d.lot.as_str().to_ascii_uppercase()) {
            return Err(same_but_case(
                &batch.place(i),
                &d.lot,
                &batch.decisions[j].lot,
                &format!("line {} of {}", batch.lines[j], batch.results.display()),
            ));
        }
        seen.insert(d.lot.as_str().to_ascii_uppercase(), i);
    }
    let mut plans = Vec::with_capacity(batch.decisions.len());
    for (i, d) in batch.decisions.iter().enumerate() {
        let t = trends.get(d.product.as_str()).ok_or_else(|| {
            Error::invalid(
                batch.place(i),
                format!("no trend file is open for product {}", d.product),
                "Report this as a bug: every product's trend file is locked before planning.",
            )
        })?;
        plans.push(plan_lot(batch, i, t, specs)?);
    }
    Ok(plans)
}

/// The plan for lot `i` of `batch` against its product's trend `t` (see [`plan`]).
fn plan_lot(batch: &Batch<'_>, i: usize, t: &Trend, specs: &SpecSet) -> Result<Plan> {
    let d = &batch.decisions[i];
    let latest = t.lot_rows(&d.lot).first().copied();
    let case_twin = || {
        t.rows
            .iter()
            .find(|r| t.cell(r, "lot").eq_ignore_ascii_case(&d.lot))
    };
    plan_one(
        &|| batch.place(i),
        d,
        t,
        latest,
        &case_twin,
        specs,
        batch.retest,
    )
}

/// The plan for lot `d` (named by `place` in refusals, made only for a refusal) against its
/// product's trend `t`, where `latest` is its latest row and `case_twin` finds a row of a lot
/// whose id differs from its own only in case (see [`plan`]).
fn plan_one<'t>(
    place: &dyn Fn() -> String,
    d: &LotDecision,
    t: &'t Trend,
    latest: Option<&'t trend_file::Row>,
    case_twin: &dyn Fn() -> Option<&'t trend_file::Row>,
    specs: &SpecSet,
    retest: Option<&str>,
) -> Result<Plan> {
    let Some(row) = latest else {
        if let Some(r) = case_twin() {
            let where_ = format!("{} (row {})", t.path.display(), t.cell(r, "seq"));
            return Err(same_but_case(&place(), &d.lot, t.cell(r, "lot"), &where_));
        }
        return Ok(Plan::New);
    };
    let seq: usize = t.cell(row, "seq").parse().unwrap_or(0);
    let recorded_date = t.cell(row, "manufactured");
    if recorded_date != d.manufactured.to_string() {
        // A retest re-measures the same lot; it cannot move the lot's manufacture date, which
        // decides the spec revision and the retest period (issue #13, item 22).
        return Err(Error::invalid(
            place(),
            format!(
                "manufacture date {} differs from {recorded_date}, recorded for this lot in {} (row {seq})",
                d.manufactured,
                t.path.display()
            ),
            format!(
                "A lot keeps its manufacture date, also when retested: enter {recorded_date} in the results file. If the recorded date itself is wrong, follow the site's procedure for correcting the record; resinlot never rewrites a row."
            ),
        ));
    }
    if same_results(t, row, d, specs) {
        return Ok(Plan::Unchanged { seq });
    }
    match retest {
        Some(reason) => Ok(Plan::Retest {
            supersedes: seq,
            reason: reason.to_string(),
        }),
        None => Err(Error::invalid(
            place(),
            format!(
                "the lot is already recorded in {} (row {seq}) with different results",
                t.path.display()
            ),
            "If this is a retest, run again with --retest --reason \"...\"; the old row stays as history.",
        )),
    }
}

/// The refusal of lot `lot` (named `place`), whose id differs only in case from `recorded`,
/// recorded at `where_` (issue #14: lot ids are unique without regard to case, as labels are
/// read).
fn same_but_case(place: &str, lot: &str, recorded: &str, where_: &str) -> Error {
    Error::invalid(
        place,
        format!("lot id '{lot}' differs only in case from lot '{recorded}', recorded in {where_}"),
        format!(
            "Lot ids are unique without regard to case: write '{recorded}' for that lot (a retest needs --retest), or give the new lot another id."
        ),
    )
}

/// True when `row` records the same manufacture date and entered values as `d` (see [`plan`]).
fn same_results(t: &Trend, row: &trend_file::Row, d: &LotDecision, specs: &SpecSet) -> bool {
    t.cell(row, "manufactured") == d.manufactured.to_string()
        && d.properties.iter().all(|p| {
            let spec_p = specs
                .for_date(&d.product, d.manufactured)
                .ok()
                .and_then(|s| s.property(&p.property).cloned());
            let entered_col = if p.property == keys::HYDROXYL_VALUE {
                keys::HYDROXYL_VALUE_ENTERED
            } else {
                p.property.as_str()
            };
            spec_p.is_none_or(|sp| sp.derived)
                || same_number(
                    t.cell(row, entered_col),
                    p.entered.as_deref().or(p.exact.as_deref()).unwrap_or(""),
                )
        })
}

/// The audit cells of a row (issue #15): who tested and when, when it was decided (the
/// results file's `decided_at` for a history import, else `now`), the login name of the
/// person running the command, and the SHA-256 of the spec revision used.
///
/// Without `tested_at` in the results file, a lot's first row records its manufacture date as
/// the test date (end-of-batch testing); a retest's row leaves the test dates empty, which
/// means the day the row was recorded (a retest is not tested on the manufacture date).
fn audit_cells(d: &LotDecision, plan: &Plan, now: &str) -> Vec<(&'static str, String)> {
    let untested = match plan {
        Plan::Retest { .. } => String::new(),
        _ => d.manufactured.to_string(),
    };
    vec![
        ("analysts", d.analysts.join(";")),
        (
            "tested_from",
            d.tested_from.clone().unwrap_or_else(|| untested.clone()),
        ),
        ("tested_to", d.tested_to.clone().unwrap_or(untested)),
        (
            "decided_at",
            d.decided_at.clone().unwrap_or_else(|| now.to_string()),
        ),
        (
            "recorded_by",
            crate::support::audit::recorded_by().to_string(),
        ),
        ("spec_sha256", d.spec_sha256.to_string()),
    ]
}

/// The cells of the trend-file row recording `d`, by column name (`seq` and `chain` are the
/// writer's). The approver is the results file's for the lot when it names one (a history
/// import), else `approver`.
pub fn row_cells(d: &LotDecision, plan: &Plan, approver: &str, now: &str) -> Vec<(String, String)> {
    let mut cells: Vec<(&str, String)> = vec![
        ("recorded_at", now.to_string()),
        ("lot", d.lot.to_string()),
        ("product", d.product.to_string()),
        ("manufactured", d.manufactured.to_string()),
        ("spec_revision", d.spec_revision.to_string()),
        ("status", d.status.as_str().to_string()),
        (
            "approver",
            d.approver.clone().unwrap_or_else(|| approver.to_string()),
        ),
        ("notes", LotNote::cell(&d.notes)),
    ];
    cells.extend(audit_cells(d, plan, now));
    let verdicts: Vec<String> = d
        .properties
        .iter()
        .map(|p| format!("{}_verdict", p.property))
        .collect();
    for (p, verdict) in d.properties.iter().zip(&verdicts) {
        let value = p
            .exact
            .as_deref()
            .map(str::to_string)
            .or_else(|| p.value.map(|v| v.to_string()))
            .unwrap_or_default();
        cells.push((p.property.as_str(), value));
        cells.push((
            verdict.as_str(),
            p.verdict
                .map(|v| v.as_str().to_string())
                .unwrap_or_default(),
        ));
        if p.property == keys::HYDROXYL_VALUE {
            cells.push((
                keys::HYDROXYL_VALUE_ENTERED,
                p.entered.as_deref().unwrap_or_default().to_string(),
            ));
        }
        if p.property == keys::MN {
            cells.push((
                "mn_uncertainty",
                p.uncertainty.map(|u| u.to_string()).unwrap_or_default(),
            ));
        }
    }
    if let Plan::Retest { supersedes, reason } = plan {
        cells.push(("supersedes", supersedes.to_string()));
        cells.push(("reason", reason.clone()));
    }
    cells.into_iter().map(|(k, v)| (k.to_string(), v)).collect()
}

/// Parses back, before anything is written, the row of every lot whose plan writes
/// ([`trend_file::encode_row`]): a row that would not read back refuses the whole release
/// with exit 2 and leaves every file as it was (issue #13, item 6). Pure.
pub fn check_rows_read_back(
    trends: &BTreeMap<&str, &Trend>,
    decisions: &[LotDecision],
    plans: &[Plan],
    approver: &str,
    now: &str,
) -> Result<()> {
    for (d, plan) in decisions.iter().zip(plans).filter(|(_, p)| p.writes()) {
        if let Some(t) = trends.get(d.product.as_str()) {
            let owned = row_cells(d, plan, approver, now);
            let cells: Vec<(&str, String)> =
                owned.iter().map(|(k, v)| (k.as_str(), v.clone())).collect();
            trend_file::encode_row(t, &cells)
                .map_err(|e| e.at(|old| format!("{old}, lot '{}'", d.lot)))?;
        }
    }
    Ok(())
}

/// Opens the heads file for a batch that writes (issue #13, item 4): a trend file that
/// disagrees with its recorded head is refused here, before anything of the batch (rows or
/// staged certificates) is written. `None` when nothing is written or for a register kept
/// in the earlier layout.
pub fn open_heads(locks: &BTreeMap<&str, Locked>, plans: &[Plan]) -> Result<Option<HeadsLog>> {
    let register = locks
        .values()
        .next()
        .and_then(|l| l.trend.path.parent())
        .map(Path::to_path_buf);
    match register {
        Some(r) if plans.iter().any(Plan::writes) => {
            HeadsLog::open(&r, locks.values().map(|l| &l.trend))
        }
        _ => Ok(None),
    }
}

/// Plans a batch without locking or writing anything, for a dry run: every product's trend
/// file is read as it stands (a product without one plans against an empty trend), and the
/// same rules as a real release apply (lot ids unique across products, retests, manufacture
/// dates, time order), so a dry run refuses what the release would refuse.
pub fn plan_unlocked(
    register: &Path,
    batch: &Batch<'_>,
    specs: &SpecSet,
    now: &str,
) -> Result<Vec<Plan>> {
    let mut owned: BTreeMap<&str, Trend> = BTreeMap::new();
    for d in batch.decisions {
        if owned.contains_key(d.product.as_str()) {
            continue;
        }
        let path = trend_file::path_for(register, &d.product);
        let t = if path.is_file() {
            trend_file::read(&path)?
        } else {
            Trend {
                path,
                columns: Vec::new(),
                rows: Vec::new(),
                head: String::new(),
            }
        };
        owned.insert(d.product.as_str(), t);
    }
    let elsewhere = lots_elsewhere(register, batch.decisions, &|p| owned.contains_key(p))?;
    let trends: BTreeMap<&str, &Trend> = owned.iter().map(|(p, t)| (*p, t)).collect();
    let plans = plan(batch, &trends, specs, &elsewhere)?;
    check_time_order(&trends, batch.decisions, &plans, now)?;
    Ok(plans)
}

/// A trend's lot ids in upper case -> their rows (indices), newest first.
type LotRowsIndex = HashMap<String, Vec<usize>>;

/// Plans a dry run one lot at a time (issue #13, item 11), with the rules and refusals of
/// [`plan_unlocked`] and its messages, keeping only what the plan needs: each product's trend
/// as read (with an index of its lot ids), the first refusal, the products that would get a
/// row and the retested lots whose certificates would be withdrawn. Lots are given in file
/// order with [`StreamPlan::add`]; [`StreamPlan::finish`] checks what needs every lot (ids
/// recorded for other products, the clock) and returns the first refusal, chosen as
/// [`plan_unlocked`] would choose it.
pub struct StreamPlan<'a> {
    register: &'a Path,
    results: &'a Path,
    specs: &'a SpecSet,
    retest: Option<&'a str>,
    /// Each product's trend as read (an empty one for a product without a file) and its lot
    /// ids in upper case -> rows, newest first; `None` for one that could not be read.
    trends: BTreeMap<String, Option<(Trend, LotRowsIndex)>>,
    /// The first trend file that could not be read (products in order of first lot).
    unreadable: Option<Error>,
    /// The first lot (position, refusal) whose id equals an earlier lot's but for case.
    twin: Option<(usize, Error)>,
    /// The first lot refused against its trend file.
    refused: Option<Error>,
    /// Products that get a new row, in the order of their first such lot.
    writes: Vec<String>,
    /// Lots retested with a status that withdraws their customer certificates.
    withdrawing: Vec<String>,
    /// Lots added so far.
    count: usize,
}

impl<'a> StreamPlan<'a> {
    /// A plan for the results file `results` (named in refusals) against the register;
    /// `retest` as in [`Batch::retest`].
    pub fn new(
        register: &'a Path,
        results: &'a Path,
        specs: &'a SpecSet,
        retest: Option<&'a str>,
    ) -> Self {
        StreamPlan {
            register,
            results,
            specs,
            retest,
            trends: BTreeMap::new(),
            unreadable: None,
            twin: None,
            refused: None,
            writes: Vec::new(),
            withdrawing: Vec::new(),
            count: 0,
        }
    }

    /// Plans the next lot of the file, `d`, from line `line`; `twin` is an earlier lot of the
    /// file whose id equals its own but for case (id, line), if any.
    pub fn add(&mut self, d: &LotDecision, line: u64, twin: Option<(&str, u64)>) {
        let position = self.count;
        self.count += 1;
        let place = || format!("{}:{line}, lot '{}'", self.results.display(), d.lot);
        if let (Some((lot, at)), None) = (twin, &self.twin) {
            let where_ = format!("line {at} of {}", self.results.display());
            self.twin = Some((position, same_but_case(&place(), &d.lot, lot, &where_)));
        }
        if !self.trends.contains_key(d.product.as_str()) {
            let path = trend_file::path_for(self.register, &d.product);
            let read = if path.is_file() {
                trend_file::read(&path)
            } else {
                Ok(Trend {
                    path,
                    columns: Vec::new(),
                    rows: Vec::new(),
                    head: String::new(),
                })
            };
            let entry = match read {
                Ok(t) => {
                    let mut ids: LotRowsIndex = HashMap::new();
                    for (i, r) in t.rows.iter().enumerate().rev() {
                        ids.entry(t.cell(r, "lot").to_ascii_uppercase())
                            .or_default()
                            .push(i);
                    }
                    Some((t, ids))
                }
                Err(e) => {
                    self.unreadable.get_or_insert(e);
                    None
                }
            };
            self.trends.insert(d.product.to_string(), entry);
        }
        if self.unreadable.is_some() || self.refused.is_some() {
            return;
        }
        let Some(Some((t, ids))) = self.trends.get(d.product.as_str()) else {
            return;
        };
        let rows: &[usize] = ids
            .get(d.lot.to_ascii_uppercase().as_str())
            .map_or(&[], Vec::as_slice);
        let latest = rows
            .iter()
            .map(|&i| &t.rows[i])
            .find(|r| t.cell(r, "lot") == d.lot);
        let case_twin = || {
            rows.iter()
                .map(|&i| &t.rows[i])
                .min_by_key(|r| r.line)
                .filter(|r| t.cell(r, "lot") != d.lot)
        };
        match plan_one(&place, d, t, latest, &case_twin, self.specs, self.retest) {
            Ok(plan) => {
                if plan.writes() && !self.writes.iter().any(|w| *w == d.product) {
                    self.writes.push(d.product.to_string());
                }
                if matches!(plan, Plan::Retest { .. })
                    && crate::lot::disposition::withdraws(d.status)
                {
                    self.withdrawing.push(d.lot.to_string());
                }
            }
            Err(e) => self.refused = Some(e),
        }
    }

    /// Finishes the plan: refuses as [`plan_unlocked`] would (an unreadable trend file, a
    /// lot id recorded for another product or repeated in the file but for case, a lot
    /// refused against its trend file, a clock behind a trend file that gets a row), else
    /// returns the retested lots whose customer certificates a release would withdraw.
    /// `position_of` gives the position of the first lot of the file whose id equals the
    /// given one but for case, and `lot_at` the id and line of the lot at a position.
    pub fn finish(
        self,
        position_of: &dyn Fn(&str) -> Option<usize>,
        lot_at: &dyn Fn(usize) -> (String, u64),
        now: &str,
    ) -> Result<Vec<String>> {
        if let Some(e) = self.unreadable {
            return Err(e);
        }
        let elsewhere =
            lots_elsewhere_of(self.register, &|upper| position_of(upper).is_some(), &|p| {
                self.trends.contains_key(p)
            })?;
        // The first lot refused for its id: recorded for another product (exactly, then but
        // for case), or equal to an earlier lot of the file but for case.
        let first_elsewhere = elsewhere.keys().filter_map(|id| position_of(id)).min();
        let twin_first = match (&self.twin, first_elsewhere) {
            (Some((t, _)), Some(e)) => *t < e,
            (Some(_), None) => true,
            _ => false,
        };
        if twin_first {
            if let Some((_, e)) = self.twin {
                return Err(e);
            }
        }
        if let Some(i) = first_elsewhere {
            let (lot, line) = lot_at(i);
            let place = format!("{}:{line}, lot '{lot}'", self.results.display());
            if let Some(other) = elsewhere.get(&lot) {
                return Err(Error::invalid(
                    place,
                    format!("this lot id is already recorded for product {other}"),
                    "Lot ids must be unique across products; check the lot id and the product code.",
                ));
            }
            if let Some((id, other)) = elsewhere
                .iter()
                .find(|(id, _)| id.eq_ignore_ascii_case(&lot))
            {
                return Err(same_but_case(&place, &lot, id, &format!("product {other}")));
            }
        }
        if let Some(e) = self.refused {
            return Err(e);
        }
        let now_t = clock_time(now)?;
        for product in &self.writes {
            if let Some(Some((t, _))) = self.trends.get(product) {
                check_clock(t, now_t, now)?;
            }
        }
        Ok(self.withdrawing)
    }
}

/// Appends the row of every lot whose plan writes, under the locks taken by
/// [`lock_products`], then syncs every file and records the new head of each file written in
/// `heads` (opened by [`open_heads`] under its lock, while the trend files are still locked).
/// Returns what happened to each lot.
pub fn commit(
    locks: &mut BTreeMap<&str, Locked>,
    mut heads: Option<HeadsLog>,
    decisions: &[LotDecision],
    plans: &[Plan],
    approver: &str,
    now: &str,
) -> Result<Vec<Recorded>> {
    let mut out = Vec::with_capacity(decisions.len());
    for (d, plan) in decisions.iter().zip(plans) {
        let recorded = match plan {
            Plan::Unchanged { seq } => Recorded::Unchanged(*seq),
            Plan::New | Plan::Retest { .. } => {
                let locked = locks.get_mut(d.product.as_str()).ok_or_else(|| {
                    Error::invalid(
                        d.product.clone(),
                        "the trend file is not locked",
                        "Report this as a bug: lock_products locks every product first.",
                    )
                })?;
                let owned = row_cells(d, plan, approver, now);
                let cells: Vec<(&str, String)> =
                    owned.iter().map(|(k, v)| (k.as_str(), v.clone())).collect();
                let seq = locked.append(&cells)?;
                match plan {
                    Plan::Retest { supersedes, .. } => Recorded::Retest {
                        seq,
                        supersedes: *supersedes,
                    },
                    _ => Recorded::New(seq),
                }
            }
        };
        out.push(recorded);
    }
    for locked in locks.values_mut() {
        locked.sync()?;
    }
    if let Some(heads) = &mut heads {
        let written: HashSet<&str> = decisions
            .iter()
            .zip(plans)
            .filter(|(_, p)| p.writes())
            .map(|(d, _)| d.product.as_str())
            .collect();
        let trends = locks
            .iter()
            .filter(|(p, _)| written.contains(*p))
            .map(|(_, l)| &l.trend);
        heads.record(trends, now)?;
    }
    Ok(out)
}

/// A QA disposition to record (issue #14).
#[derive(Debug, Clone, Copy)]
pub struct Disposition<'a> {
    /// The decision.
    pub decision: Decision,
    /// Why, recorded on the row.
    pub reason: &'a str,
    /// Who decided, recorded on the row.
    pub approver: &'a str,
    /// The customer's concession (deviation) number; empty unless a concession.
    pub concession_ref: &'a str,
    /// The customer (file stem) a concession is for; empty unless a concession.
    pub concession_customer: &'a str,
    /// When (RFC 3339, UTC).
    pub now: &'a str,
}

/// Columns a disposition row does not copy from the lot's latest row: the row's own
/// identity, decision and audit cells.
const OWN_COLUMNS: [&str; 12] = [
    "seq",
    "recorded_at",
    "status",
    "approver",
    "supersedes",
    "reason",
    "disposition",
    "concession_ref",
    "concession_customer",
    "decided_at",
    "recorded_by",
    "chain",
];

/// The cells of the disposition row that follows `latest`, the lot's latest row in `t`: the
/// measured and derived values, verdicts, notes and test details copied as they are (the
/// lot's results do not change), the new status, the approver, the row it supersedes, the
/// reason and the disposition columns. Pure.
pub fn disposition_cells(
    t: &Trend,
    latest: &trend_file::Row,
    d: &Disposition,
    status: Status,
) -> Vec<(String, String)> {
    let mut cells: Vec<(String, String)> = t
        .columns
        .iter()
        .filter(|c| !OWN_COLUMNS.contains(&c.as_str()))
        .map(|c| (c.clone(), t.cell(latest, c).to_string()))
        .collect();
    for (k, v) in [
        ("recorded_at", d.now),
        ("status", status.as_str()),
        ("approver", d.approver),
        ("supersedes", t.cell(latest, "seq")),
        ("reason", d.reason),
        ("disposition", d.decision.as_str()),
        ("concession_ref", d.concession_ref),
        ("concession_customer", d.concession_customer),
        ("decided_at", d.now),
    ] {
        cells.push((k.to_string(), v.to_string()));
    }
    cells
}

/// What a recorded disposition did.
#[derive(Debug, Clone, PartialEq)]
pub struct Dispositioned {
    /// The lot's status before.
    pub previous: Status,
    /// Its status now.
    pub status: Status,
    /// The row appended.
    pub seq: usize,
}

/// Records disposition `d` of `lot` in its trend file, locked by the caller (who keeps the
/// lock until any withdrawal is logged): checks the rule against the lot's latest row
/// ([`crate::lot::disposition::check`]; a refusal is a shortfall, exit 1), checks the file
/// against its head, appends the row (chained, parsed back first), syncs and records the
/// new head. Nothing is written when anything is refused.
pub fn record_disposition(
    locked: &mut Locked,
    lot: &str,
    d: &Disposition,
) -> Result<Dispositioned> {
    let t = &locked.trend;
    let latest = *t
        .lot_rows(lot)
        .first()
        .ok_or_else(|| Error::Shortfall(format!("lot '{lot}' is not in {}", t.path.display())))?;
    let standing = crate::record::lifecycle::standing_of(t, latest).ok_or_else(|| {
        Error::invalid(
            format!("{}:{}", t.path.display(), latest.line),
            "the lot's status cannot be read",
            "Check the record with `resinlot verify`.",
        )
    })?;
    let status = crate::lot::disposition::check(standing, d.decision).map_err(|why| {
        Error::Shortfall(format!(
            "lot {lot} cannot be dispositioned {}: {why}",
            d.decision.as_str()
        ))
    })?;
    let owned = disposition_cells(t, latest, d, status);
    let cells: Vec<(&str, String)> = owned.iter().map(|(k, v)| (k.as_str(), v.clone())).collect();
    trend_file::encode_row(t, &cells)?;
    if let Ok(now_t) = chrono::DateTime::parse_from_rfc3339(d.now) {
        check_clock(t, now_t, d.now)?;
    }
    let register = t.path.parent().unwrap_or(Path::new(".")).to_path_buf();
    let mut heads = HeadsLog::open(&register, std::iter::once(t))?;
    let seq = locked.append(&cells)?;
    locked.sync()?;
    if let Some(h) = &mut heads {
        h.record(std::iter::once(&locked.trend), d.now)?;
    }
    Ok(Dispositioned {
        previous: standing.status,
        status,
        seq,
    })
}

/// True when two recorded values are the same number ("0.98" and "0.980" are), or both empty.
fn same_number(a: &str, b: &str) -> bool {
    match (
        a.parse::<rust_decimal::Decimal>(),
        b.parse::<rust_decimal::Decimal>(),
    ) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lot::evaluate::evaluate;
    use crate::lot::intake::{parse, Options};
    use crate::spec::product::ProductSpec;
    use std::time::Duration;

    // Test fixture: an invented spec, not a real product.
    const SPEC: &str = r#"
code = "PD-2000"
name = "Linear polyester diol"
revision = "C"
effective = 2026-01-01
functionality = 2.0
decision_rule = "guarded"
retest_months = 12
[properties.acid_value]
label = "Acid value"
unit = "mg KOH/g"
max = 1.0
decimals = 2
uncertainty = 0.05
[properties.hydroxyl_value]
label = "Hydroxyl value"
unit = "mg KOH/g"
acidity_correction = true
min = 53.0
max = 59.0
decimals = 1
uncertainty = 0.8
[properties.mn]
min = 1900
max = 2100
decimals = 0
"#;

    fn specs() -> SpecSet {
        let spec = ProductSpec::parse(Path::new("s.toml"), SPEC).unwrap();
        let mut set = SpecSet::default();
        set.products.insert(spec.code.clone(), vec![spec]);
        set
    }

    fn decide(specs: &SpecSet, lot: &str, av: &str, ohv: &str) -> LotDecision {
        let csv = format!(
            "lot,product,manufactured,acid_value,hydroxyl_value\n{lot},PD-2000,2026-10-01,{av},{ohv}\n"
        );
        let lots = parse("r.csv", csv.as_bytes(), Options::default()).unwrap();
        let spec = specs.for_date("PD-2000", lots[0].manufactured).unwrap();
        evaluate(spec, &lots[0], "r.csv").unwrap()
    }

    fn wait() -> Wait {
        Wait {
            timeout: Duration::from_secs(5),
        }
    }

    /// Plans `decisions` against the register as it is, with `retest` and `elsewhere`.
    fn plan_in(
        register: &Path,
        specs: &SpecSet,
        decisions: &[LotDecision],
        retest: Option<&str>,
        elsewhere: &HashMap<String, String>,
    ) -> Result<Vec<Plan>> {
        let locks = lock_products(register, specs, decisions, wait()).unwrap();
        let trends = locks.iter().map(|(&p, l)| (p, &l.trend)).collect();
        let lines = vec![2; decisions.len()];
        let batch = Batch {
            results: Path::new("r.csv"),
            lines: &lines,
            decisions,
            retest,
        };
        plan(&batch, &trends, specs, elsewhere)
    }

    /// Records `decisions` as new lots.
    fn record(register: &Path, specs: &SpecSet, decisions: &[LotDecision]) -> Vec<Recorded> {
        let plans = plan_in(register, specs, decisions, None, &HashMap::new()).unwrap();
        let mut locks = lock_products(register, specs, decisions, wait()).unwrap();
        let heads = open_heads(&locks, &plans).unwrap();
        commit(
            &mut locks,
            heads,
            decisions,
            &plans,
            "A. Tester, QC",
            "2026-10-02T08:00:00Z",
        )
        .unwrap()
    }

    #[test]
    fn a_lot_not_yet_recorded_is_new() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        let d = vec![decide(&specs, "L1", "0.50", "55.6")];
        let plans = plan_in(dir.path(), &specs, &d, None, &HashMap::new()).unwrap();
        assert_eq!(plans, [Plan::New]);
        assert!(plans[0].writes());
    }

    #[test]
    fn an_identical_rerun_is_unchanged() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        let first = vec![decide(&specs, "L1", "0.50", "55.6")];
        assert_eq!(record(dir.path(), &specs, &first), [Recorded::New(1)]);
        // "0.5" is the same number as "0.50": the same results.
        let again = vec![decide(&specs, "L1", "0.5", "55.60")];
        let plans = plan_in(dir.path(), &specs, &again, None, &HashMap::new()).unwrap();
        assert_eq!(plans, [Plan::Unchanged { seq: 1 }]);
        assert!(!plans[0].writes());
    }

    #[test]
    fn other_results_need_a_retest_which_supersedes_the_row() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        let first = vec![
            decide(&specs, "L1", "0.50", "55.6"),
            decide(&specs, "L2", "0.40", "56.0"),
        ];
        record(dir.path(), &specs, &first);
        let changed = vec![decide(&specs, "L2", "0.45", "56.0")];
        let err = plan_in(dir.path(), &specs, &changed, None, &HashMap::new()).unwrap_err();
        let text = err.to_string();
        assert!(text.contains("r.csv:2, lot 'L2'"), "{text}");
        assert!(text.contains("(row 2) with different results"), "{text}");
        let plans = plan_in(
            dir.path(),
            &specs,
            &changed,
            Some("re-titrated"),
            &HashMap::new(),
        )
        .unwrap();
        let retest = Plan::Retest {
            supersedes: 2,
            reason: "re-titrated".into(),
        };
        assert_eq!(plans, std::slice::from_ref(&retest));
        let cells = row_cells(&changed[0], &retest, "A. Tester, QC", "now");
        assert!(cells.contains(&("supersedes".into(), "2".into())));
        assert!(cells.contains(&("reason".into(), "re-titrated".into())));
        let mut locks = lock_products(dir.path(), &specs, &changed, wait()).unwrap();
        let heads = open_heads(&locks, &plans).unwrap();
        let done = commit(&mut locks, heads, &changed, &plans, "A. Tester, QC", "now").unwrap();
        assert_eq!(
            done,
            [Recorded::Retest {
                seq: 3,
                supersedes: 2
            }]
        );
    }

    #[test]
    fn a_lot_recorded_under_another_product_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        let d = vec![decide(&specs, "L1", "0.50", "55.6")];
        let elsewhere = HashMap::from([("L1".to_string(), "PE-3000".to_string())]);
        let err = plan_in(dir.path(), &specs, &d, Some("retest"), &elsewhere).unwrap_err();
        assert!(err
            .to_string()
            .contains("this lot id is already recorded for product PE-3000"));
    }

    #[test]
    fn lots_elsewhere_skips_the_products_being_released() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        let d = vec![decide(&specs, "L1", "0.50", "55.6")];
        record(dir.path(), &specs, &d);
        let found = lots_elsewhere(dir.path(), &d, &|_| false).unwrap();
        assert_eq!(found.get("L1").map(String::as_str), Some("PD-2000"));
        assert!(lots_elsewhere(dir.path(), &d, &|p| p == "PD-2000")
            .unwrap()
            .is_empty());
        assert!(lots_elsewhere(&dir.path().join("none"), &d, &|_| false)
            .unwrap()
            .is_empty());
    }

    /// Issue #13 item 13: another product's torn tail neither blocks the search nor counts.
    #[test]
    fn recorded_lots_tolerates_a_torn_tail_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        let d = vec![
            decide(&specs, "L1", "0.50", "55.6"),
            decide(&specs, "L2", "0.40", "56.0"),
        ];
        record(dir.path(), &specs, &d);
        let p = trend_file::path_for(dir.path(), "PD-2000");
        let whole = std::fs::read(&p).unwrap();
        let ours = HashSet::from(["L1", "L2", "L3"]);
        let torn = [whole.as_slice(), b"3,2026-10-02T08:00:00Z,L3,PD-\xC3"].concat();
        std::fs::write(&p, &torn).unwrap();
        assert_eq!(
            recorded_lots(&p, &|id| ours.contains(id)).unwrap(),
            ["L1", "L2"]
        );
        // A complete last row without its line feed is recorded all the same.
        std::fs::write(&p, &whole[..whole.len() - 1]).unwrap();
        assert_eq!(
            recorded_lots(&p, &|id| ours.contains(id)).unwrap(),
            ["L1", "L2"]
        );
    }

    /// Issue #13 item 22: a retest may not move the lot's manufacture date.
    #[test]
    fn a_retest_keeps_the_manufacture_date_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        record(dir.path(), &specs, &[decide(&specs, "L1", "0.50", "55.6")]);
        let mut moved = decide(&specs, "L1", "0.45", "55.6");
        moved.manufactured = chrono::NaiveDate::from_ymd_opt(2026, 9, 30).unwrap();
        let err = plan_in(dir.path(), &specs, &[moved], Some("r"), &HashMap::new()).unwrap_err();
        let text = err.to_string();
        assert!(
            text.contains("manufacture date 2026-09-30 differs from 2026-10-01"),
            "{text}"
        );
        assert!(
            text.contains("enter 2026-10-01 in the results file"),
            "{text}"
        );
    }

    /// Issue #13 item 15: rows are appended in time order; an unchanged lot writes nothing and
    /// is not checked.
    #[test]
    fn a_clock_behind_the_last_row_is_refused_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        let first = vec![decide(&specs, "L1", "0.50", "55.6")];
        record(dir.path(), &specs, &first); // recorded 2026-10-02T08:00:00Z
        let next = vec![decide(&specs, "L2", "0.40", "56.0")];
        let locks = lock_products(dir.path(), &specs, &next, wait()).unwrap();
        let trends: BTreeMap<&str, &Trend> = locks.iter().map(|(&p, l)| (p, &l.trend)).collect();
        let new = [Plan::New];
        let e = check_time_order(&trends, &next, &new, "2026-10-01T23:59:59Z").unwrap_err();
        assert!(
            e.to_string()
                .contains("earlier than 2026-10-02T08:00:00Z, when the file's last row"),
            "{e}"
        );
        assert!(check_time_order(&trends, &next, &new, "2026-10-02T08:00:00Z").is_ok());
        let unchanged = [Plan::Unchanged { seq: 1 }];
        assert!(check_time_order(&trends, &next, &unchanged, "2020-01-01T00:00:00Z").is_ok());
    }

    /// Issue #13 item 6: every row is parsed back before the first is written; a reason with
    /// a line break refuses the whole batch.
    #[test]
    fn rows_that_would_not_read_back_refuse_the_batch_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        let d = vec![
            decide(&specs, "L1", "0.50", "55.6"),
            decide(&specs, "L2", "0.40", "56.0"),
        ];
        let locks = lock_products(dir.path(), &specs, &d, wait()).unwrap();
        let trends: BTreeMap<&str, &Trend> = locks.iter().map(|(&p, l)| (p, &l.trend)).collect();
        let fine = [Plan::New, Plan::New];
        assert!(check_rows_read_back(&trends, &d, &fine, "A. Tester", "now").is_ok());
        let broken = [
            Plan::New,
            Plan::Retest {
                supersedes: 1,
                reason: "line\nbreak".into(),
            },
        ];
        let e = check_rows_read_back(&trends, &d, &broken, "A. Tester", "now").unwrap_err();
        let text = e.to_string();
        assert!(
            text.contains("column 'reason'") && text.contains("lot 'L2'"),
            "{text}"
        );
    }

    /// Issue #14: a disposition row copies the lot's results from its latest row, supersedes
    /// it, and records the decision; the rules refuse (exit 1) without writing.
    #[test]
    fn a_disposition_row_copies_the_results_and_records_the_decision_issue_14() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        // AV 0.98 against a maximum of 1.00 with U 0.05: conditional pass, on hold.
        record(dir.path(), &specs, &[decide(&specs, "L1", "0.98", "55.6")]);
        let path = trend_file::path_for(dir.path(), "PD-2000");
        let mut locked = trend_file::lock(&path, &[], &[], wait()).unwrap();
        let d = Disposition {
            decision: Decision::Concession,
            reason: "deviation agreed",
            approver: "R. Okafor, QA Manager",
            concession_ref: "AC-17",
            concession_customer: "acme",
            now: "2026-10-03T08:00:00Z",
        };
        let done = record_disposition(&mut locked, "L1", &d).unwrap();
        assert_eq!(
            done,
            Dispositioned {
                previous: Status::OnHold,
                status: Status::Released,
                seq: 2
            }
        );
        let t = &locked.trend;
        let (old, new) = (&t.rows[0], &t.rows[1]);
        for k in [
            "acid_value",
            "acid_value_verdict",
            "mn",
            "notes",
            "manufactured",
        ] {
            assert_eq!(t.cell(old, k), t.cell(new, k), "{k} is copied");
        }
        assert_eq!(t.cell(new, "status"), "released");
        assert_eq!(t.cell(new, "supersedes"), "1");
        assert_eq!(t.cell(new, "disposition"), "concession");
        assert_eq!(t.cell(new, "concession_ref"), "AC-17");
        assert_eq!(t.cell(new, "concession_customer"), "acme");
        assert_eq!(t.cell(new, "approver"), "R. Okafor, QA Manager");
        // Released now: a second release by disposition is refused, nothing written.
        let again = Disposition {
            decision: Decision::Released,
            ..d
        };
        let e = record_disposition(&mut locked, "L1", &again).unwrap_err();
        assert_eq!(e.exit_code(), 1);
        assert!(
            e.to_string().contains("only a lot on hold or incomplete"),
            "{e}"
        );
        drop(locked);
        assert_eq!(trend_file::read(&path).unwrap().rows.len(), 2);
    }

    /// Issue #14: lot ids are unique without regard to case, against the trend file and
    /// within one results file.
    #[test]
    fn a_lot_id_differing_only_in_case_is_refused_issue_14() {
        let dir = tempfile::tempdir().unwrap();
        let specs = specs();
        record(
            dir.path(),
            &specs,
            &[decide(&specs, "X2612-D05", "0.50", "55.6")],
        );
        let d = vec![decide(&specs, "x2612-d05", "0.51", "55.6")];
        let e = plan_in(dir.path(), &specs, &d, None, &HashMap::new()).unwrap_err();
        assert!(
            e.to_string()
                .contains("differs only in case from lot 'X2612-D05'"),
            "{e}"
        );
        assert_eq!(e.exit_code(), 2);
        let both = vec![
            decide(&specs, "L7", "0.50", "55.6"),
            decide(&specs, "l7", "0.50", "55.6"),
        ];
        let e = plan_in(dir.path(), &specs, &both, None, &HashMap::new()).unwrap_err();
        assert!(
            e.to_string()
                .contains("from lot 'L7', recorded in line 2 of r.csv"),
            "{e}"
        );
        let elsewhere = HashMap::from([("L9".to_string(), "PE-3000".to_string())]);
        let e = plan_in(
            dir.path(),
            &specs,
            &[decide(&specs, "l9", "0.50", "55.6")],
            None,
            &elsewhere,
        )
        .unwrap_err();
        assert!(e.to_string().contains("recorded in product PE-3000"), "{e}");
    }

    #[test]
    fn same_number_compares_decimals() {
        assert!(same_number("0.98", "0.980"));
        assert!(same_number("", ""));
        assert!(!same_number("0.98", "0.97"));
        assert!(!same_number("", "0.97"));
    }
}
