//! The command-line interface: clap derive definitions shared by `main` and the tests.

use clap::{Parser, Subcommand};

use crate::cmd;

/// Exit status text shown under every `--help`.
pub const EXIT_STATUS: &str = "\
Exit status:
  0  everything asked for was done and every lot or check passed
  1  the command ran, but a lot or check fell short (held, rejected, incomplete,
     unknown lot, broken record)
  2  bad input or usage: nothing was written";

/// resinlot turns a polyester batch's end-of-batch titrations into Mn, Xn and extent of
/// reaction, decides release against the product spec, issues certificates of analysis and
/// keeps the lot trend record.
#[derive(Debug, Parser)]
#[command(name = "resinlot", version, after_help = EXIT_STATUS, max_term_width = 100)]
pub struct Cli {
    /// The command to run.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Compute Mn, hydroxyl equivalent weight and (with a recipe) extent of reaction, Xn, gel
    /// points and water loss from one acid value and hydroxyl value.
    #[command(after_help = EXIT_STATUS)]
    Endgroup(cmd::endgroup::Args),
    /// Decide every lot of a lab results file against its product spec and append it to the
    /// product's trend file.
    #[command(after_help = EXIT_STATUS)]
    Release(cmd::release::Args),
    /// Issue a customer's certificate of analysis (PDF) for a released lot, checked against
    /// the customer's tighter windows, numbered and recorded in the certificate log.
    #[command(after_help = EXIT_STATUS)]
    Certify(cmd::certify::Args),
    /// QA's decision on a lot after its first decision (ISO 9001 §8.7): release a held lot,
    /// release it under one customer's concession, send it to rework or reject it. Appends a
    /// chained row to the trend file; a lot rejected or held has its certificates withdrawn
    /// in the certificate log, and the customers to notify are listed.
    #[command(after_help = EXIT_STATUS)]
    Disposition(cmd::disposition::Args),
    /// Trend a product's lots: I-MR control charts, Nelson run rules, capability (Cp, Cpk,
    /// Pp, Ppk) and the viscosity–Mn check; SVG/PNG charts and a PDF report.
    #[command(after_help = EXIT_STATUS)]
    Trend(cmd::trend::Args),
    /// Answer "what is lot X?" (or "what is on certificate FW-000123?"): status, every value
    /// with unit and verdict, Mn with its uncertainty, certificates issued and retest history.
    #[command(after_help = EXIT_STATUS)]
    Lookup(cmd::lookup::Args),
    /// List the lots of a product that fit property windows or a customer's requirements,
    /// newest first.
    #[command(after_help = EXIT_STATUS)]
    Find(cmd::find::Args),
    /// Serve read-only web pages over the record for customer service and QA: search, lot
    /// pages, find with CSV download, product trends, certificates and certificate checks.
    #[command(after_help = EXIT_STATUS)]
    Serve(cmd::serve::Args),
    /// List the customer certificates issued (one per delivery: customer, purchase order,
    /// quantity, lots, status), newest first, by customer, lot, PO, part number or period.
    #[command(after_help = EXIT_STATUS)]
    Shipments(cmd::shipments::Args),
    /// Build the demo plant's workspace (default ./resinlot-demo) and run the whole job there:
    /// releases, certificates, trends, customer questions, a cook fit and a correction.
    #[command(after_help = EXIT_STATUS)]
    Demo(cmd::demo::Args),
    /// Create an empty workspace with a commented example spec, recipe, customer and the
    /// default templates.
    #[command(after_help = EXIT_STATUS)]
    Init(cmd::init::Args),
    /// Check product specs, recipes and customer files.
    #[command(after_help = EXIT_STATUS)]
    Specs(cmd::specs::Args),
    /// Check that the record is intact (trend files, hash chains, certificate log and PDFs),
    /// quarantine a torn last line, or identify certificate PDFs as genuine, superseded,
    /// withdrawn, altered or unknown.
    ///
    /// Every trend file is also checked against the anchors kept outside it: each row of
    /// register/heads.csv (row count and last chain value after every append) and each
    /// certificate's trend row and chain value in the certificate log, so that rows deleted
    /// from the end are named. A register written before heads were kept passes with a note
    /// that `resinlot upgrade` adds them; an upgraded certificate log is checked back to the
    /// SHA-256 of the log it replaced.
    #[command(after_help = EXIT_STATUS)]
    Verify(cmd::verify::Args),
    /// Bring a register written by an earlier version of resinlot to the current layout: start
    /// the heads file, and write the certificate log in the current layout beside the old one.
    ///
    /// The record must verify first. No old row is rewritten: the old certificate log is kept
    /// byte for byte as register/certificates.csv.v1, and the new log's first row records its
    /// SHA-256, row count and last chain value, followed by its rows unchanged, so `verify`
    /// checks the new log back to the old one. The heads file records every trend file's row
    /// count and last chain value as they are now. Running it again completes an interrupted
    /// upgrade, or says there is nothing to do.
    #[command(after_help = EXIT_STATUS)]
    Upgrade(cmd::upgrade::Args),
    /// Fit a cook's in-process acid values to step-growth kinetics (order 2, 2.5 or 3), predict
    /// when the target is reached with a 95 % prediction interval, and optionally chart it; with
    /// --arrhenius, fit the activation energy over several cooks.
    ///
    /// Each acid value becomes an extent of reaction p through the recipe's condensation-water
    /// balance. For order n the quantity y = (1-p)^(1-n) is fitted against elapsed minutes by
    /// least squares weighted by 1/y², as suits a constant relative titration error (n = 2:
    /// 1/(1-p), external acid catalysis; n = 3: 1/(1-p)², self-catalysis), and
    /// the rate constant k = slope / ((n-1)·C0^(n-1)) is given in (kg/mol)^(n-1) per minute with
    /// C0 the acid groups in mol per kg of charge. The laws assume equal reactivity of all chain
    /// lengths; a hydroxyl excess Δ of the recipe enters the rate law -dc/dt = k·c^(n-1)·(c+Δ),
    /// integrated exactly, which reduces to the forms above for an equal charge. Early samples below --exclude-below are left out and listed with their
    /// reason; later samples are never left out, and those with a studentized residual beyond ±3
    /// are flagged. The end point comes with a 95 % prediction interval, and, when the samples
    /// carry viscosities, with the viscosity expected at the end point from a log-log fit
    /// against Mn. The safety cautions are printed with every result.
    #[command(after_help = EXIT_STATUS)]
    Cook(cmd::cook::Args),
    /// Compute the diol or acid addition that brings a batch to a target hydroxyl value, with
    /// the expected acid value, hydroxyl value and Mn afterwards.
    ///
    /// Raising the hydroxyl value: the named hydroxyl component is mixed in and taken up by
    /// transesterification, which conserves every end group, so the mass follows from the group
    /// balance. Lowering it: the named acid is esterified until the acid value is back at its
    /// present value, with the condensation water removed. The result states its assumption,
    /// shows the group balance, and always prints the safety cautions: additions to a hot batch
    /// follow the site's operating procedure, and the lab's next titration decides.
    #[command(after_help = EXIT_STATUS)]
    Adjust(cmd::adjust::Args),
}

#[cfg(test)]
mod tests {
    #[test]
    fn cli_definition_is_consistent() {
        use clap::CommandFactory;
        super::Cli::command().debug_assert();
    }
}
