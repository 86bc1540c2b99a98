//! `resinlot release`: decide every lot of a results file and append it to the trend files.

use std::collections::BTreeMap;
use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::time::Duration;

use anyhow::Context;
use serde::Serialize;

use crate::certificate::build::{self, LotRecord};
use crate::certificate::issue::{Issued, Issuer, Numbering, Pending};
use crate::certificate::model::Supersedes;
use crate::cmd::args::{CertificatesFolder, Locking, RegisterFolder, SpecsFolder, TemplatesFolder};
use crate::cmd::Outcome;
use crate::error::Error;
use crate::lot::evaluate::{evaluate, LotDecision, Status};
use crate::lot::intake::{self, LotResults};
use crate::record::append::{self, Plan};
use crate::record::certfiles::{self, Completed};
use crate::record::certlog::{Log, Withdrawn};
use crate::record::trend_file::{Locked, Trend, Wait};
use crate::spec::SpecSet;

/// Arguments of `resinlot release`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Lab results CSV: wide (one row per lot) or long (one row per test result), comma or
    /// semicolon separated, UTF-8 with or without BOM.
    pub results: PathBuf,
    /// The specs folder (`--specs`).
    #[command(flatten)]
    pub specs: SpecsFolder,
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// Name and role of the person releasing, recorded on every row and certificate.
    /// Default: the RESINLOT_APPROVER environment variable, else the login name.
    #[arg(long, value_name = "NAME")]
    pub approver: Option<String>,
    /// Numbers in the results file use a decimal comma (the file must then use ';' between
    /// columns). Default: decimal point.
    #[arg(long)]
    pub decimal_comma: bool,
    /// Record lots already in the trend file with new results as a retest: a new row that
    /// supersedes the old one (the old row stays). Needs --reason.
    #[arg(long, requires = "reason")]
    pub retest: bool,
    /// Why the lot is retested; recorded on the new row. Only with --retest.
    #[arg(long, value_name = "TEXT")]
    pub reason: Option<String>,
    /// Decide and print, but write nothing.
    #[arg(long)]
    pub dry_run: bool,
    /// Print JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// How long to wait for a lock (`--lock-timeout`).
    #[command(flatten)]
    pub locking: Locking,
    /// Do not write the internal certificate of each newly decided lot (for importing
    /// history). Default: certificates are written.
    #[arg(long)]
    pub no_certificates: bool,
    /// The certificates folder (`--certificates`).
    #[command(flatten)]
    pub certificates: CertificatesFolder,
    /// The templates folder (`--templates`).
    #[command(flatten)]
    pub templates: TemplatesFolder,
    /// Largest results file accepted, in bytes. Default: 67108864 (64 MiB).
    #[arg(hide_default_value = true, long, default_value_t = 64 << 20, value_name = "BYTES")]
    pub max_bytes: u64,
}

pub use crate::record::append::Recorded;

#[derive(Serialize)]
struct JsonLot<'a> {
    #[serde(flatten)]
    decision: &'a LotDecision,
    recorded: &'a Recorded,
}

/// Resolves the approver from the flag or the environment.
pub fn approver(flag: Option<&str>) -> anyhow::Result<String> {
    let name = flag
        .map(str::to_string)
        .or_else(|| std::env::var("RESINLOT_APPROVER").ok())
        .or_else(|| std::env::var("USER").ok())
        .unwrap_or_default();
    let name = name.trim().to_string();
    if name.is_empty() {
        return Err(Error::invalid(
            "--approver",
            "no approver name was given",
            "Pass --approver \"Name, role\" or set RESINLOT_APPROVER.",
        )
        .into());
    }
    crate::support::text::check_line("--approver", "approver name", &name, 80)?;
    Ok(name)
}

/// Runs the command: check the flags, read and decide every lot, record them (with their
/// internal certificates), print.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let approver = approver(args.approver.as_deref())?;
    check_reason(args.reason.as_deref(), args.retest)?;
    let specs = SpecSet::load(&args.specs).context("cannot load the product specs")?;
    let opts = intake::Options {
        decimal_comma: args.decimal_comma,
        limits: intake::Limits {
            max_bytes: args.max_bytes,
            ..intake::Limits::default()
        },
        text_keys: specs.text_keys(),
    };
    let bytes = intake::read_bytes(&args.results, &opts)?;
    if args.dry_run {
        // A wide file's dry run streams (issue #13, item 11); a long file is read whole.
        if let Some(outcome) = streamed_dry_run(args, &specs, &bytes, opts.clone())? {
            return Ok(outcome);
        }
    }
    let parsed = intake::parse_report(&args.results.display().to_string(), &bytes, opts)?;
    drop(bytes);
    let ignored = ignored_columns(&specs, &parsed);
    let lots = parsed.lots;
    let decisions = decide(args, &specs, &lots)?;
    let now = crate::support::clock::now()?;
    let now_text = now.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let with_certs = !args.dry_run && !args.no_certificates;
    let issuer = if with_certs {
        let issuer = Issuer::new(&args.templates, &args.certificates)?;
        if let Some(note) = issuer.notice() {
            eprintln!("{note}");
        }
        Some(issuer)
    } else {
        None
    };
    let mut log: Option<Log> = None;
    let mut pending: Vec<Pending> = Vec::new();
    let mut rendered = Vec::new();
    let mut parts: Vec<String> = Vec::new();
    let mut completed: Vec<Completed> = Vec::new();
    let mut withdrawn: Vec<(String, Withdrawn)> = Vec::new();
    let (recorded, issued) = if args.dry_run {
        let lines: Vec<u64> = lots.iter().map(|l| l.line).collect();
        let plans = append::plan_unlocked(
            &args.register,
            &batch(args, &lines, &decisions),
            &specs,
            &now_text,
        )?;
        check_withdrawals_recordable(args, &decisions, &plans)?;
        (vec![Recorded::NotWritten; decisions.len()], Vec::new())
    } else {
        let (recorded, locks) = record(
            args,
            &specs,
            &lots,
            &decisions,
            &approver,
            &now_text,
            &mut |plans, trends| {
                let Some(issuer) = &issuer else {
                    return Ok(());
                };
                // Locked only once every trend-file check has passed, so a refused release
                // leaves the certificate log untouched too.
                let log = log.insert(Log::lock(
                    &args.register,
                    Wait {
                        timeout: Duration::from_secs(args.locking.lock_timeout),
                    },
                )?);
                let ctx = CertContext {
                    specs: &specs,
                    issuer,
                    approver: &approver,
                    now: &now,
                    now_text: &now_text,
                };
                let numbering = issuer.numbering(log)?;
                pending = prepare_certificates(&ctx, log, &numbering, &decisions, plans)?;
                rendered = issuer.render(&pending)?;
                issuer.check_targets(&pending)?;
                // Each certificate goes to a pending part before its row is appended, so an
                // interruption leaves a state `verify` names and a re-run completes (issue
                // #13, item 7).
                parts = issuer.stage(
                    &pending,
                    &rendered,
                    &certified_rows(&decisions, plans, trends),
                )?;
                Ok(())
            },
        )?;
        // Still under the trend files' locks: file and log the staged certificates, then
        // complete any left pending by an interrupted release of these products.
        let issued = match (&issuer, &mut log) {
            (Some(issuer), Some(log)) => {
                let issued = issuer.file_staged(log, &pending, &rendered, &parts, &now_text)?;
                for (product, l) in &locks {
                    completed.extend(certfiles::complete_pending(
                        log,
                        &issuer.out,
                        &l.trend,
                        product,
                        &now_text,
                    )?);
                }
                issued
            }
            _ => Vec::new(),
        };
        // Still under the trend files' locks, after the rows (issue #14): a retest that
        // rejects or holds a lot withdraws its current customer certificates.
        withdrawn = withdraw_after_retests(
            args, &mut log, &locks, &decisions, &recorded, &pending, &issued, &now_text,
        )?;
        drop(locks);
        (recorded, issued)
    };
    let mut text = report_text(
        args, &specs, &decisions, &recorded, &issued, &completed, &withdrawn,
    )?;
    if !ignored.is_empty() && !args.json {
        text.push_str(&format!(
            "Ignored columns (nothing reads them): {}.\n",
            ignored.join(", ")
        ));
    }
    crate::support::output::print(&text)?;
    Ok(if decisions.iter().all(|d| d.status == Status::Released) {
        Outcome::AllGood
    } else {
        Outcome::FellShort
    })
}

/// What the table output needs of one product, gathered while the lots are decided.
struct ProductTable {
    /// The property columns: those of the product's first lot.
    keys: Vec<String>,
    /// Column widths of the whole table.
    widths: Vec<usize>,
    /// The table's rows, all cells but the last ("not written").
    rows: RowStore,
    /// The positions in the file of the lots that get a line under the table.
    notes: Vec<u32>,
}

/// A dry run's table rows kept as text in blocks of about 1 MiB (no block is ever copied to
/// grow, so memory stays near the text's size): a row is its status as one digit (its
/// place in [`STATUSES`]), then every other cell followed by [`CELL_END`], then [`ROW_END`].
/// Cells never hold these control characters: intake refuses them in every cell, and the
/// other cells are numbers, words of the specs and fixed words.
#[derive(Default)]
struct RowStore {
    blocks: Vec<String>,
}

const CELL_END: char = '\u{1f}';
const ROW_END: char = '\u{1e}';
const BLOCK: usize = 1 << 20;
const STATUSES: [Status; 4] = [
    Status::Released,
    Status::OnHold,
    Status::Rejected,
    Status::Incomplete,
];

impl RowStore {
    /// Appends to `out` the row of a lot with `status` whose other cells are `cells` (lot,
    /// revision, then the properties), as the store keeps it.
    fn encode<'c>(out: &mut String, status: Status, cells: impl IntoIterator<Item = &'c str>) {
        RowStore::push_status(out, status);
        for c in cells {
            out.push_str(c);
            out.push(CELL_END);
        }
        out.push(ROW_END);
    }

    /// Starts a row in `out` with its status, as one digit (its place in [`STATUSES`]).
    fn push_status(out: &mut String, status: Status) {
        let code = STATUSES.iter().position(|s| *s == status).unwrap_or(0);
        out.push(char::from(b'0' + code as u8));
    }

    /// Keeps a row made by [`RowStore::encode`].
    fn push(&mut self, encoded: &str) {
        let fits = self
            .blocks
            .last()
            .is_some_and(|b| b.capacity() - b.len() >= encoded.len());
        if !fits {
            self.blocks
                .push(String::with_capacity(BLOCK.max(encoded.len())));
        }
        if let Some(b) = self.blocks.last_mut() {
            b.push_str(encoded);
        }
    }

    /// The rows, in the order pushed, each as its status and other cells.
    fn rows(&self) -> impl Iterator<Item = (Status, impl Iterator<Item = &str>)> {
        self.blocks
            .iter()
            .flat_map(|b| b.split_terminator(ROW_END))
            .map(|row| {
                let code = usize::from(row.as_bytes()[0] - b'0');
                (STATUSES[code], row[1..].split_terminator(CELL_END))
            })
    }
}

/// Lots decided together, on every core (issue #13, item 11): enough to share out, few
/// enough to keep memory flat.
const CHUNK: usize = 128;

/// One lot of a dry run, decided: what the bookkeeping in file order needs.
struct Decided<'s> {
    decision: LotDecision,
    /// The spec revision the lot was decided on.
    spec: Option<&'s crate::spec::ProductSpec>,
    /// Its table row by its own properties (none for JSON).
    row: Option<OwnRow>,
    /// It gets a line under the table.
    noted: bool,
}

/// A lot's table row laid out by its own properties: as [`RowStore::encode`] writes it, and
/// the display width of each cell ([`lot_row`] with the lot's own keys, without a string for
/// each cell).
struct OwnRow {
    encoded: String,
    /// Inline for a product of up to 16 properties, so that a row costs one allocation.
    widths: smallvec::SmallVec<[usize; 20]>,
}

impl OwnRow {
    fn of(d: &LotDecision) -> OwnRow {
        use crate::support::table::width;
        let mut encoded = String::with_capacity(16 * (d.properties.len() + 2));
        let mut widths = smallvec::SmallVec::new();
        RowStore::push_status(&mut encoded, d.status);
        for cell in [d.lot.as_str(), d.spec_revision.as_str()] {
            encoded.push_str(cell);
            encoded.push(CELL_END);
            widths.push(width(cell));
        }
        widths.push(width(d.status.as_str()));
        for p in &d.properties {
            let start = encoded.len();
            encoded.push_str(p.reported.as_deref().unwrap_or("missing"));
            encoded.push_str(short(p.verdict));
            widths.push(width(&encoded[start..]));
            encoded.push(CELL_END);
        }
        encoded.push(ROW_END);
        widths.push(width(NOT_WRITTEN));
        OwnRow { encoded, widths }
    }
}

/// A chunk of lots as read, the earlier lot of each whose id differs only in case, and each
/// lot's decision or refusal.
type DecidedChunk<'s> = (
    Vec<LotResults>,
    Vec<Option<intake::Twin>>,
    Vec<anyhow::Result<Decided<'s>>>,
);

/// Decides `lots` on every core, in order: the lot's decision or its refusal.
fn decide_chunk<'s>(
    file: &str,
    specs: &'s SpecSet,
    lots: &[LotResults],
    now: &chrono::DateTime<chrono::Utc>,
    rows: bool,
) -> Vec<anyhow::Result<Decided<'s>>> {
    use rayon::prelude::*;
    lots.par_iter()
        .map(|lot| {
            let decision = decide_lot(file, specs, lot, now)?;
            let spec = specs.for_date(&lot.product, lot.manufactured).ok();
            let row = rows.then(|| OwnRow::of(&decision));
            let noted = note_line(&decision).is_some();
            Ok(Decided {
                decision,
                spec,
                row,
                noted,
            })
        })
        .collect()
}

/// `release --dry-run` of a wide results file, one lot at a time (issue #13, item 11): the
/// first pass reads and checks each lot, decides lots in chunks on every core, and plans
/// each against the trend files (`record::append::StreamPlan`), keeping counts, column
/// widths, the plan's compact state and, for the table, each lot's row as text; once nothing
/// is refused, the table is written from the rows kept (only lots with a note line are read
/// and decided again), or the JSON as the lots are read and decided again. It refuses what
/// the whole-file path refuses, with the same message, and prints the same bytes. `None` for
/// a long file.
fn streamed_dry_run<'s>(
    args: &Args,
    specs: &'s SpecSet,
    bytes: &[u8],
    opts: intake::Options,
) -> anyhow::Result<Option<Outcome>> {
    let file = args.results.display().to_string();
    let now = crate::support::clock::now()?;
    let now_text = now.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let retest = args
        .retest
        .then(|| args.reason.as_deref().unwrap_or_default());
    let mut plan = append::StreamPlan::new(&args.register, &args.results, specs, retest);
    let mut refused: Option<anyhow::Error> = None;
    let mut counts = Counts::default();
    let mut tables: BTreeMap<String, ProductTable> = BTreeMap::new();
    let mut used: Vec<&'s crate::spec::ProductSpec> = Vec::new();
    let bar = progress_unsized();
    let mut position: u32 = 0;
    // Takes a decided chunk in file order; after a refusal, the later lots are not planned,
    // as on the whole-file path.
    let mut take = |chunk: DecidedChunk<'s>| {
        let (lots, twins, decided) = chunk;
        if refused.is_some() {
            return;
        }
        let mut spent = Vec::with_capacity(decided.len());
        for ((lot, twin), decided) in lots.iter().zip(twins).zip(decided) {
            let Decided {
                decision: d,
                spec,
                row,
                noted,
            } = match decided {
                Ok(x) => x,
                Err(e) => {
                    refused = Some(e);
                    break;
                }
            };
            bar.inc(1);
            counts.add(d.status);
            if let Some(spec) = spec {
                if !used.iter().any(|u| std::ptr::eq(*u, spec)) {
                    used.push(spec);
                }
            }
            if let Some(row) = row {
                if !tables.contains_key(d.product.as_str()) {
                    let keys: Vec<String> = d
                        .properties
                        .iter()
                        .map(|p| p.property.to_string())
                        .collect();
                    let mut widths = Vec::new();
                    crate::support::table::widen(&mut widths, &table_header(&keys));
                    let table = ProductTable {
                        keys,
                        widths,
                        rows: RowStore::default(),
                        notes: Vec::new(),
                    };
                    tables.insert(d.product.to_string(), table);
                }
                let Some(t) = tables.get_mut(d.product.as_str()) else {
                    continue;
                };
                // A lot decided on another revision than the product's first lot has its
                // row laid out by the first lot's properties.
                let same_keys = d.properties.iter().map(|p| &p.property).eq(t.keys.iter());
                if same_keys {
                    for (w, cell) in t.widths.iter_mut().zip(&row.widths) {
                        *w = (*w).max(*cell);
                    }
                    t.rows.push(&row.encoded);
                } else {
                    let cells = lot_row(&d, &t.keys, &Recorded::NotWritten);
                    crate::support::table::widen(&mut t.widths, &cells);
                    // Every cell but the status and the last ("not written").
                    let kept = cells[..cells.len() - 1]
                        .iter()
                        .enumerate()
                        .filter(|(i, _)| *i != 2)
                        .map(|(_, c)| c.as_str());
                    let mut encoded = String::new();
                    RowStore::encode(&mut encoded, d.status, kept);
                    t.rows.push(&encoded);
                }
                if noted {
                    t.notes.push(position);
                }
            }
            position += 1;
            plan.add(
                &d,
                lot.line,
                twin.as_ref().map(|t| (t.lot.as_str(), t.line)),
            );
            spent.push(d);
        }
        // Freed by a worker while this thread reads on.
        rayon::spawn(move || drop((lots, spent)));
    };
    // While one chunk is decided on the workers, this thread reads the next (at most two
    // chunks in flight, taken in file order).
    let scan = rayon::in_place_scope(|scope| {
        let mut lots: Vec<LotResults> = Vec::with_capacity(CHUNK);
        let mut twins: Vec<Option<intake::Twin>> = Vec::with_capacity(CHUNK);
        let mut in_flight: Option<std::sync::mpsc::Receiver<DecidedChunk<'s>>> = None;
        let (file, now, json) = (&file, &now, args.json);
        let send = |lots: Vec<LotResults>, twins: Vec<Option<intake::Twin>>| {
            let (tx, rx) = std::sync::mpsc::sync_channel(1);
            scope.spawn(move |_| {
                let decided = decide_chunk(file, specs, &lots, now, !json);
                // The receiver is gone only when the run already failed.
                let _ = tx.send((lots, twins, decided));
            });
            rx
        };
        let mut take_previous = |in_flight: &mut Option<std::sync::mpsc::Receiver<_>>| {
            if let Some(chunk) = in_flight.take().and_then(|rx| rx.recv().ok()) {
                take(chunk);
            }
        };
        let scan = intake::scan_wide(file, bytes, opts.clone(), &mut |lot, twin| {
            lots.push(lot);
            twins.push(twin);
            if lots.len() == CHUNK {
                let rx = send(
                    std::mem::replace(&mut lots, Vec::with_capacity(CHUNK)),
                    std::mem::replace(&mut twins, Vec::with_capacity(CHUNK)),
                );
                take_previous(&mut in_flight);
                in_flight = Some(rx);
            }
        });
        if scan.is_ok() && !lots.is_empty() {
            let rx = send(lots, twins);
            take_previous(&mut in_flight);
            in_flight = Some(rx);
        }
        take_previous(&mut in_flight);
        scan
    })?;
    bar.finish_and_clear();
    let Some(scan) = scan else {
        return Ok(None);
    };
    if let Some(e) = refused {
        return Err(e);
    }
    let position_of = |id: &str| scan.position_of(id).ok().flatten();
    let lot_at = |i: usize| scan.lot_at(i).unwrap_or_default();
    let withdrawing = plan.finish(&position_of, &lot_at, &now_text)?;
    let lots: Vec<&str> = withdrawing.iter().map(String::as_str).collect();
    crate::record::certlog::check_withdrawable(&args.register, &lots)?;
    let ignored: Vec<String> = scan
        .empty
        .iter()
        .filter(|key| !used.iter().any(|s| s.property(key).is_some()))
        .cloned()
        .collect();

    // Nothing was refused: the report.
    let mut out = std::io::BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
    let decide = |lot: &LotResults| decide_lot(&file, specs, lot, &now);
    if args.json {
        write_json_streamed(&mut out, &scan, &decide)?;
    } else {
        let mut line = String::new();
        let mut cells: Vec<&str> = Vec::new();
        for (product, t) in &tables {
            let name = specs.latest(product).map_or("", |s| s.name.as_str());
            writeln!(out, "{product}  {name}")?;
            out.write_all(
                crate::support::table::line(&table_header(&t.keys), &t.widths).as_bytes(),
            )?;
            out.write_all(crate::support::table::rule(&t.widths).as_bytes())?;
            for (status, mut row) in t.rows.rows() {
                cells.clear();
                cells.extend(row.by_ref().take(2));
                cells.push(status.as_str());
                cells.extend(row);
                cells.push(NOT_WRITTEN);
                line.clear();
                crate::support::table::push_line(&mut line, &cells, &t.widths);
                out.write_all(line.as_bytes())?;
            }
            // The lots with a line under the table, read again and decided again.
            in_chunks(
                |visit| scan.for_each_at(&t.notes, visit),
                &|lot| Ok(note_line(&decide(lot)?)),
                &mut |line| Ok(out.write_all(line.as_bytes())?),
            )?;
            out.write_all(b"\n")?;
        }
        out.write_all(summary_line(&counts, 0, &args.register, true).as_bytes())?;
        if !ignored.is_empty() {
            writeln!(
                out,
                "Ignored columns (nothing reads them): {}.",
                ignored.join(", ")
            )?;
        }
    }
    out.flush()?;
    Ok(Some(if counts.released == counts.lots {
        Outcome::AllGood
    } else {
        Outcome::FellShort
    }))
}

/// Writes a dry run's JSON as [`report_text`] builds it (the same keys in the same order,
/// pretty-printed alike): the lots are read again in chunks, each chunk decided and written
/// as text on every core, and the texts written in file order.
fn write_json_streamed(
    out: &mut dyn Write,
    scan: &intake::WideScan<'_>,
    decide: &(dyn Fn(&LotResults) -> anyhow::Result<LotDecision> + Sync),
) -> anyhow::Result<()> {
    // The other members of a dry run's report are empty; an empty list prints as `[]`.
    let wrapper = serde_json::json!({
        "lots": [],
        "certificates": [],
        "completed": [],
        "withdrawn": [],
    });
    let Some(members) = wrapper.as_object() else {
        anyhow::bail!("the JSON report is not an object");
    };
    out.write_all(b"{\n")?;
    for (n, (key, value)) in members.iter().enumerate() {
        write!(out, "  {}: ", serde_json::to_string(key)?)?;
        if key == "lots" {
            out.write_all(b"[\n")?;
            let mut first = true;
            in_chunks(
                |visit| scan.for_each(None, visit),
                &|lot| json_lot(&decide(lot)?).map(Some),
                &mut |text| {
                    if !first {
                        out.write_all(b",\n")?;
                    }
                    first = false;
                    Ok(out.write_all(text.as_bytes())?)
                },
            )?;
            out.write_all(b"\n  ]")?;
        } else {
            out.write_all(serde_json::to_string_pretty(value)?.as_bytes())?;
        }
        out.write_all(if n + 1 < members.len() { b",\n" } else { b"\n" })?;
    }
    out.write_all(b"}\n")?;
    Ok(())
}

/// Gives `sink`, in file order, the text `make` makes of each lot that `read` hands on (none
/// where it makes `None`): the lots are gathered in chunks of [`CHUNK`] and each chunk's texts
/// made on every core, so a dry run's second pass decides its lots in parallel and writes
/// them in order.
fn in_chunks(
    read: impl FnOnce(&mut dyn FnMut(LotResults) -> anyhow::Result<()>) -> anyhow::Result<()>,
    make: &(dyn Fn(&LotResults) -> anyhow::Result<Option<String>> + Sync),
    sink: &mut dyn FnMut(String) -> anyhow::Result<()>,
) -> anyhow::Result<()> {
    use rayon::prelude::*;
    let mut chunk: Vec<LotResults> = Vec::with_capacity(CHUNK);
    let mut flush = |chunk: &mut Vec<LotResults>| -> anyhow::Result<()> {
        let texts: Vec<anyhow::Result<Option<String>>> = chunk.par_iter().map(make).collect();
        chunk.clear();
        for text in texts {
            if let Some(text) = text? {
                sink(text)?;
            }
        }
        Ok(())
    };
    read(&mut |lot| {
        chunk.push(lot);
        if chunk.len() == CHUNK {
            flush(&mut chunk)?;
        }
        Ok(())
    })?;
    flush(&mut chunk)
}

/// One lot of a dry run's JSON report: its member of `"lots"`, pretty-printed and indented
/// by four spaces as `serde_json::to_string_pretty` lays it out inside the report.
fn json_lot(d: &LotDecision) -> anyhow::Result<String> {
    let v = serde_json::to_value(JsonLot {
        decision: d,
        recorded: &Recorded::NotWritten,
    })?;
    let mut text = String::new();
    // Strings in JSON hold no raw line break, so each line is indented alike.
    for (i, line) in serde_json::to_string_pretty(&v)?.split('\n').enumerate() {
        if i > 0 {
            text.push('\n');
        }
        text.push_str("    ");
        text.push_str(line);
    }
    Ok(text)
}

/// The columns of the results file that nothing reads (issue #15): unknown columns of a long
/// file, and value columns of a wide file that are empty on every row and are no property of
/// any product in the file.
fn ignored_columns(specs: &SpecSet, parsed: &intake::Parsed) -> Vec<String> {
    let mut ignored = parsed.ignored.clone();
    for key in &parsed.empty {
        let known = parsed.lots.iter().any(|l| {
            specs
                .for_date(&l.product, l.manufactured)
                .is_ok_and(|s| s.property(key).is_some())
        });
        if !known {
            ignored.push(key.clone());
        }
    }
    ignored
}

/// Refuses a test or decision time after `now` (a wrong clock or a typing error).
fn check_lab_times(file: &str, lot: &LotResults, now: chrono::NaiveDateTime) -> anyhow::Result<()> {
    for (column, t) in [
        ("tested_at", &lot.tested_to),
        ("decided_at", &lot.decided_at),
    ] {
        if let Some(t) = t.as_ref().filter(|t| t.earliest_utc() > now) {
            return Err(Error::invalid(
                format!("{file}:{}, lot '{}', column '{column}'", lot.line, lot.lot),
                format!(
                    "{} is in the future (now is {})",
                    t.text,
                    now.format("%Y-%m-%dT%H:%M:%S")
                ),
                "Check the date and time.",
            )
            .into());
        }
    }
    Ok(())
}

/// After a release's rows and certificates are filed, under the trend files' locks: withdraws
/// the current customer certificates of every retested lot that is now rejected or on hold
/// (trend row first, then the log rows; `verify` finds and completes a withdrawal cut short
/// between the two). A retest's internal certificate supersedes the old one by its own row's
/// `supersedes` cell. Returns (lot, certificate) for every certificate withdrawn.
#[allow(clippy::too_many_arguments)]
fn withdraw_after_retests(
    args: &Args,
    log: &mut Option<Log>,
    locks: &BTreeMap<&str, Locked>,
    decisions: &[LotDecision],
    recorded: &[Recorded],
    pending: &[Pending],
    issued: &[Issued],
    now: &str,
) -> anyhow::Result<Vec<(String, Withdrawn)>> {
    let retests: Vec<(&LotDecision, usize)> = decisions
        .iter()
        .zip(recorded)
        .filter_map(|(d, r)| match r {
            Recorded::Retest { seq, .. } => Some((d, *seq)),
            _ => None,
        })
        .collect();
    if retests.is_empty() {
        return Ok(Vec::new());
    }
    let log = match log {
        Some(l) => l,
        None => log.insert(Log::lock(
            &args.register,
            Wait {
                timeout: Duration::from_secs(args.locking.lock_timeout),
            },
        )?),
    };
    let mut out = Vec::new();
    for (d, seq) in retests {
        if !crate::lot::disposition::withdraws(d.status) {
            continue;
        }
        let Some(locked) = locks.get(d.product.as_str()) else {
            continue;
        };
        let t = &locked.trend;
        let Some(row) = t.rows.get(seq - 1) else {
            continue;
        };
        let cause = crate::record::lifecycle::cause_of(t, row, &d.product);
        let new: Vec<String> = pending
            .iter()
            .zip(issued)
            .filter(|(p, _)| p.certificate.lot.id == d.lot)
            .map(|(_, i)| i.certificate_number.clone())
            .collect();
        for e in log.withdraw_lot(&d.lot, &cause, &new, now)? {
            out.push((d.lot.to_string(), log.notice(&e)));
        }
    }
    Ok(out)
}

/// Refuses, before anything is written, retests that would withdraw certificates from a
/// certificate log that cannot record withdrawals (an earlier layout: `resinlot upgrade`).
fn check_withdrawals_recordable(
    args: &Args,
    decisions: &[LotDecision],
    plans: &[Plan],
) -> anyhow::Result<()> {
    let lots: Vec<&str> = decisions
        .iter()
        .zip(plans)
        .filter(|(d, p)| {
            matches!(p, Plan::Retest { .. }) && crate::lot::disposition::withdraws(d.status)
        })
        .map(|(d, _)| d.lot.as_str())
        .collect();
    Ok(crate::record::certlog::check_withdrawable(
        &args.register,
        &lots,
    )?)
}

/// Refuses an unusable --reason, and a --reason without --retest (it would be recorded
/// nowhere; issue #13, item 22).
fn check_reason(reason: Option<&str>, retest: bool) -> anyhow::Result<()> {
    if reason.is_some() && !retest {
        return Err(Error::invalid(
            "--reason",
            "--reason was given without --retest, so it would be recorded nowhere",
            "Add --retest to record lots already in the trend file as a retest with this reason, or leave out --reason.",
        )
        .into());
    }
    if let Some(r) = reason {
        crate::support::text::check_line("--reason", "reason", r, 300)?;
    }
    Ok(())
}

/// Evaluates every lot against the spec revision in force on its manufacture date, refusing
/// a manufacture date in the future.
fn decide(args: &Args, specs: &SpecSet, lots: &[LotResults]) -> anyhow::Result<Vec<LotDecision>> {
    let file = args.results.display().to_string();
    let bar = progress(lots.len());
    let mut decisions = Vec::with_capacity(lots.len());
    let now = crate::support::clock::now()?;
    for lot in lots {
        decisions.push(decide_lot(&file, specs, lot, &now)?);
        bar.inc(1);
    }
    bar.finish_and_clear();
    Ok(decisions)
}

/// Evaluates one lot against the spec revision in force on its manufacture date, refusing a
/// test, decision or manufacture date after `now`.
fn decide_lot(
    file: &str,
    specs: &SpecSet,
    lot: &LotResults,
    now: &chrono::DateTime<chrono::Utc>,
) -> anyhow::Result<LotDecision> {
    let today = now.date_naive();
    check_lab_times(file, lot, now.naive_utc())?;
    if lot.manufactured > today {
        return Err(Error::invalid(
            format!("{file}:{}, lot '{}'", lot.line, lot.lot),
            format!(
                "manufacture date {} is in the future (today is {today})",
                lot.manufactured
            ),
            "Check the manufacture date.",
        )
        .into());
    }
    let spec = specs
        .for_date(&lot.product, lot.manufactured)
        .map_err(|e| match e {
            Error::Invalid {
                place,
                problem,
                fix,
            } => Error::invalid(format!("{file}:{}: {place}", lot.line), problem, fix),
            other => other,
        })?;
    Ok(evaluate(spec, lot, file)?)
}

/// What building the internal certificates of a release needs.
struct CertContext<'a> {
    specs: &'a SpecSet,
    issuer: &'a Issuer,
    approver: &'a str,
    now: &'a chrono::DateTime<chrono::Utc>,
    now_text: &'a str,
}

/// The product and trend-row sequence number of every lot that gets a new row, in order: the
/// rows [`append::commit`] will append after each product's last.
fn certified_rows(
    decisions: &[LotDecision],
    plans: &[Plan],
    trends: &BTreeMap<&str, &Trend>,
) -> Vec<(String, usize)> {
    let mut next: BTreeMap<&str, usize> = BTreeMap::new();
    let mut rows = Vec::new();
    for (d, _) in decisions.iter().zip(plans).filter(|(_, p)| p.writes()) {
        let seq = next
            .entry(d.product.as_str())
            .or_insert_with(|| trends.get(d.product.as_str()).map_or(0, |t| t.rows.len()));
        *seq += 1;
        rows.push((d.product.to_string(), *seq));
    }
    rows
}

/// Builds the internal certificate of every lot that gets a new row, numbered by `numbering`;
/// a retested lot's certificate supersedes its latest internal one.
fn prepare_certificates(
    ctx: &CertContext<'_>,
    log: &Log,
    numbering: &Numbering,
    decisions: &[LotDecision],
    plans: &[Plan],
) -> anyhow::Result<Vec<Pending>> {
    let entries = log.entries();
    let mut pending: Vec<Pending> = Vec::new();
    for (d, plan) in decisions.iter().zip(plans) {
        if !plan.writes() {
            continue;
        }
        let spec = ctx.specs.for_date(&d.product, d.manufactured)?;
        let mut rec = LotRecord::from_decision(
            d,
            d.approver.as_deref().unwrap_or(ctx.approver),
            d.decided_at.as_deref().unwrap_or(ctx.now_text),
        );
        if matches!(plan, Plan::Retest { .. }) {
            // This retest is the lot's latest; tested today (or when the results file says),
            // it may extend the retest date printed on its certificate (issue #14).
            rec.latest_retest = Some(
                d.tested_to
                    .as_deref()
                    .and_then(|t| t.get(..10))
                    .and_then(|t| chrono::NaiveDate::parse_from_str(t, "%Y-%m-%d").ok())
                    .unwrap_or(ctx.now.date_naive()),
            );
            if d.tested_to.is_none() {
                // The row leaves them empty: the day the retest is recorded.
                let today = Some(ctx.now.date_naive());
                rec.tested = (today, today);
            }
        }
        // Only a retest supersedes, and only its reason is logged: a new lot in the same
        // batch carries neither.
        let retest_reason = match plan {
            Plan::Retest { reason, .. } => Some(if reason.is_empty() {
                "retest".to_string()
            } else {
                reason.clone()
            }),
            _ => None,
        };
        let supersedes = retest_reason.as_ref().and_then(|reason| {
            entries
                .iter()
                .rev()
                .find(|e| e.lot == d.lot && e.customer.is_empty() && !certfiles::is_void(e))
                .map(|e| Supersedes {
                    number: e.number.clone(),
                    reason: reason.clone(),
                })
        });
        let number = numbering.nth(pending.len());
        let certificate = build::build(
            &ctx.issuer.site,
            spec,
            &rec,
            None,
            &number,
            ctx.now.date_naive(),
            supersedes,
        )?;
        pending.push(Pending {
            certificate,
            customer: String::new(),
            reason: match plan {
                Plan::Retest { reason, .. } => reason.clone(),
                _ => String::new(),
            },
            po: String::new(),
            quantity: String::new(),
        });
    }
    Ok(pending)
}

/// The command's output: JSON, or the table per product and the certificates line.
fn report_text(
    args: &Args,
    specs: &SpecSet,
    decisions: &[LotDecision],
    recorded: &[Recorded],
    issued: &[Issued],
    completed: &[Completed],
    withdrawn: &[(String, Withdrawn)],
) -> anyhow::Result<String> {
    if args.json {
        let lots: Vec<JsonLot> = decisions
            .iter()
            .zip(recorded)
            .map(|(decision, recorded)| JsonLot { decision, recorded })
            .collect();
        let withdrawn: Vec<serde_json::Value> = withdrawn
            .iter()
            .map(|(lot, w)| {
                let mut v = serde_json::to_value(w).unwrap_or_default();
                if let Some(o) = v.as_object_mut() {
                    o.insert("lot".into(), serde_json::json!(lot));
                }
                v
            })
            .collect();
        return Ok(serde_json::to_string_pretty(&serde_json::json!({
            "lots": lots,
            "certificates": issued,
            "completed": completed,
            "withdrawn": withdrawn,
        }))? + "\n");
    }
    let mut t = render(specs, decisions, recorded, &args.register, args.dry_run);
    if !issued.is_empty() {
        t.push_str(&format!(
            "{} internal certificate{} written to {} ({} to {}).\n",
            issued.len(),
            if issued.len() == 1 { "" } else { "s" },
            args.certificates.display(),
            issued[0].certificate_number,
            issued[issued.len() - 1].certificate_number
        ));
    }
    let mut lots: Vec<&str> = withdrawn.iter().map(|(l, _)| l.as_str()).collect();
    lots.dedup();
    for lot in lots {
        let of_lot: Vec<Withdrawn> = withdrawn
            .iter()
            .filter(|(l, _)| l == lot)
            .map(|(_, w)| w.clone())
            .collect();
        t.push_str(&crate::cmd::disposition::notify_text(lot, &of_lot));
    }
    for c in completed {
        t.push_str(&format!(
            "Completed internal certificate {} of lot {}, left pending by an interrupted release: {}\n",
            c.certificate_number,
            c.lot,
            c.path.display()
        ));
    }
    Ok(t)
}

/// A counter of decided lots on a terminal, when the number of lots is not known yet.
fn progress_unsized() -> indicatif::ProgressBar {
    if std::io::stderr().is_terminal() {
        let bar = indicatif::ProgressBar::new_spinner();
        bar.set_style(
            indicatif::ProgressStyle::with_template("deciding lots {pos}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_spinner()),
        );
        bar
    } else {
        indicatif::ProgressBar::hidden()
    }
}

fn progress(n: usize) -> indicatif::ProgressBar {
    if n > 20 && std::io::stderr().is_terminal() {
        let bar = indicatif::ProgressBar::new(n as u64);
        bar.set_style(
            indicatif::ProgressStyle::with_template("deciding lots {bar:40} {pos}/{len}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        bar
    } else {
        indicatif::ProgressBar::hidden()
    }
}

/// What `release` does once every check has passed and before the first row is written:
/// given the plans and the trends as locked, prepare and stage the certificates.
type BeforeWrite<'a> = dyn FnMut(&[Plan], &BTreeMap<&str, &Trend>) -> anyhow::Result<()> + 'a;

/// Appends every decision, under one exclusive lock per trend file: lock, plan (every check
/// runs before the first byte is written, so an error leaves every file as it was), let
/// `before_write` prepare the certificates (given the plans and the trends as locked), commit.
/// Returns what was recorded and the locks, still held, for filing the certificates.
fn record<'d>(
    args: &Args,
    specs: &SpecSet,
    lots: &[LotResults],
    decisions: &'d [LotDecision],
    approver: &str,
    now: &str,
    before_write: &mut BeforeWrite<'_>,
) -> anyhow::Result<(Vec<Recorded>, BTreeMap<&'d str, Locked>)> {
    let wait = Wait {
        timeout: Duration::from_secs(args.locking.lock_timeout),
    };
    let mut locks = append::lock_products(&args.register, specs, decisions, wait)?;
    let elsewhere = append::lots_elsewhere(&args.register, decisions, &|p| locks.contains_key(p))?;
    let lines: Vec<u64> = lots.iter().map(|l| l.line).collect();
    let batch = batch(args, &lines, decisions);
    let trends = locks.iter().map(|(&p, l)| (p, &l.trend)).collect();
    let plans = append::plan(&batch, &trends, specs, &elsewhere)?;
    check_withdrawals_recordable(args, decisions, &plans)?;
    append::check_time_order(&trends, decisions, &plans, now)?;
    append::check_rows_read_back(&trends, decisions, &plans, approver, now)?;
    // The heads are checked before anything is staged, so a refusal leaves no part behind.
    let heads = append::open_heads(&locks, &plans)?;
    before_write(&plans, &trends)?;
    let recorded = append::commit(&mut locks, heads, decisions, &plans, approver, now)?;
    Ok((recorded, locks))
}

/// The batch a release plans: the results file, its lines, the decisions and the retest reason.
fn batch<'a>(args: &'a Args, lines: &'a [u64], decisions: &'a [LotDecision]) -> append::Batch<'a> {
    append::Batch {
        results: &args.results,
        lines,
        decisions,
        retest: args
            .retest
            .then(|| args.reason.as_deref().unwrap_or_default()),
    }
}

fn short(v: Option<crate::spec::decision::Verdict>) -> &'static str {
    use crate::spec::decision::Verdict::*;
    match v {
        Some(Pass) | None => "",
        Some(ConditionalPass) => " (cond. pass)",
        Some(ConditionalFail) => " (cond. fail)",
        Some(Fail) => " (FAIL)",
    }
}

/// The header row of a product's table, whose property columns are `keys`.
fn table_header(keys: &[String]) -> Vec<String> {
    let mut h = vec!["lot".to_string(), "rev".into(), "status".into()];
    h.extend(keys.iter().cloned());
    h.push("record".into());
    h
}

/// The record cell of a lot a dry run decides.
const NOT_WRITTEN: &str = "not written";

/// The table row of one lot.
fn lot_row(d: &LotDecision, keys: &[String], recorded: &Recorded) -> Vec<String> {
    let mut r = vec![
        d.lot.to_string(),
        d.spec_revision.to_string(),
        d.status.as_str().to_string(),
    ];
    for k in keys {
        r.push(d.get(k).map_or("-".to_string(), |p| {
            format!(
                "{}{}",
                p.reported.as_deref().unwrap_or("missing"),
                short(p.verdict)
            )
        }));
    }
    r.push(match recorded {
        Recorded::New(s) => format!("row {s}"),
        Recorded::Retest { seq, supersedes } => {
            format!("row {seq} (retest of {supersedes})")
        }
        Recorded::Unchanged(s) => format!("unchanged (row {s})"),
        Recorded::NotWritten => NOT_WRITTEN.into(),
    });
    r
}

/// The line under a product's table naming why a lot was not released, if it was not and
/// has notes.
fn note_line(d: &LotDecision) -> Option<String> {
    (d.status != Status::Released && !d.notes.is_empty()).then(|| {
        format!(
            "  {} {}: {}\n",
            d.lot,
            d.status.as_str(),
            crate::lot::note::LotNote::cell(&d.notes)
        )
    })
}

/// How many lots of each status a release decided.
#[derive(Debug, Default, Clone, Copy)]
struct Counts {
    lots: usize,
    released: usize,
    on_hold: usize,
    rejected: usize,
    incomplete: usize,
}

impl Counts {
    fn add(&mut self, s: Status) {
        self.lots += 1;
        match s {
            Status::Released => self.released += 1,
            Status::OnHold => self.on_hold += 1,
            Status::Rejected => self.rejected += 1,
            Status::Incomplete => self.incomplete += 1,
        }
    }
}

/// The closing line of the table output: the lots by status, and what was written.
fn summary_line(c: &Counts, unchanged: usize, register: &std::path::Path, dry_run: bool) -> String {
    format!(
        "{} lots: {} released, {} on hold, {} rejected, {} incomplete. {}\n",
        c.lots,
        c.released,
        c.on_hold,
        c.rejected,
        c.incomplete,
        if dry_run {
            "Dry run: nothing was written.".to_string()
        } else {
            format!(
                "Recorded in {}{}.",
                register.display(),
                if unchanged > 0 {
                    format!(" ({unchanged} already recorded, unchanged)")
                } else {
                    String::new()
                }
            )
        }
    )
}

fn render(
    specs: &SpecSet,
    decisions: &[LotDecision],
    recorded: &[Recorded],
    register: &std::path::Path,
    dry_run: bool,
) -> String {
    let mut out = String::new();
    let mut products: Vec<&str> = decisions.iter().map(|d| d.product.as_str()).collect();
    products.sort_unstable();
    products.dedup();
    for product in products {
        let idx: Vec<usize> = (0..decisions.len())
            .filter(|&i| decisions[i].product == product)
            .collect();
        let name = specs.latest(product).map_or("", |s| s.name.as_str());
        out.push_str(&format!("{product}  {name}\n"));
        let keys: Vec<String> = decisions[idx[0]]
            .properties
            .iter()
            .map(|p| p.property.to_string())
            .collect();
        let mut rows = vec![table_header(&keys)];
        for &i in &idx {
            rows.push(lot_row(&decisions[i], &keys, &recorded[i]));
        }
        out.push_str(&crate::support::table::render(&rows));
        for &i in &idx {
            if let Some(line) = note_line(&decisions[i]) {
                out.push_str(&line);
            }
        }
        out.push('\n');
    }
    let mut counts = Counts::default();
    for d in decisions {
        counts.add(d.status);
    }
    let unchanged = recorded
        .iter()
        .filter(|r| matches!(r, Recorded::Unchanged(_)))
        .count();
    out.push_str(&summary_line(&counts, unchanged, register, dry_run));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Issue #13 item 11: the rows a dry run keeps come back as they went in, empty cells,
    /// every status and rows across a block boundary included.
    #[test]
    fn row_store_gives_back_its_rows_issue_13() {
        let mut store = RowStore::default();
        let rows: Vec<(Status, Vec<String>)> = (0..40_000)
            .map(|i| {
                let status = STATUSES[i % 4];
                let cells = vec![
                    format!("L{i:06}"),
                    if i % 11 == 0 {
                        String::new()
                    } else {
                        "C".into()
                    },
                    format!("{}.{:02} (cond. pass)", i % 7, i % 100),
                    "mPa·s".into(),
                ];
                (status, cells)
            })
            .collect();
        for (status, cells) in &rows {
            let mut encoded = String::new();
            RowStore::encode(&mut encoded, *status, cells.iter().map(String::as_str));
            store.push(&encoded);
        }
        assert!(store.blocks.len() > 1, "the rows should span blocks");
        let back: Vec<(Status, Vec<String>)> = store
            .rows()
            .map(|(s, cells)| (s, cells.map(str::to_string).collect()))
            .collect();
        assert_eq!(back, rows);
    }
}
