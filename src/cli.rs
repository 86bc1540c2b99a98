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
    /// Answer "what is lot X?": status, every value with unit and verdict, Mn with its
    /// uncertainty, certificates issued and retest history.
    #[command(after_help = EXIT_STATUS)]
    Lookup(cmd::lookup::Args),
    /// List the lots of a product that fit property windows or a customer's requirements,
    /// newest first.
    #[command(after_help = EXIT_STATUS)]
    Find(cmd::find::Args),
    /// Check product specs, recipes and customer files.
    #[command(after_help = EXIT_STATUS)]
    Specs(cmd::specs::Args),
    /// Check that the record is intact (trend files, hash chains, certificate log and PDFs),
    /// quarantine a torn last line, or identify certificate PDFs as genuine, altered or unknown.
    #[command(after_help = EXIT_STATUS)]
    Verify(cmd::verify::Args),
}

#[cfg(test)]
mod tests {
    #[test]
    fn cli_definition_is_consistent() {
        use clap::CommandFactory;
        super::Cli::command().debug_assert();
    }
}
