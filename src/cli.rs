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
    /// Fit a cook's in-process acid values to step-growth kinetics (order 2, 2.5 or 3), predict
    /// when the target is reached with a 95 % prediction interval, and optionally chart it; with
    /// --arrhenius, fit the activation energy over several cooks.
    #[command(after_help = EXIT_STATUS)]
    Cook(cmd::cook::Args),
    /// Compute the diol or acid addition that brings a batch to a target hydroxyl value, with
    /// the expected acid value, hydroxyl value and Mn afterwards.
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
