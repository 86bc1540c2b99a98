//! Command layer: one module per subcommand, each with clap `Args` and a `run` entry point that
//! only orchestrates (parse and validate flags, call the domain, print); `dispatch` picks one.
//! May use every layer below; nothing below uses it.

pub mod adjust;
pub mod args;
pub mod certify;
pub mod cli;
pub mod cook;
pub mod demo;
pub mod disposition;
pub mod endgroup;
pub mod find;
pub mod init;
pub mod lookup;
pub mod release;
pub mod serve;
pub mod shipments;
pub mod specs;
pub mod trend;
pub mod upgrade;
pub mod verify;

use cli::{Cli, Command};

/// How a command ended when it did not fail outright.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything passed (exit 0).
    AllGood,
    /// The command ran but a lot or check fell short (exit 1).
    FellShort,
}

impl Outcome {
    /// The process exit code.
    pub fn code(self) -> u8 {
        match self {
            Outcome::AllGood => 0,
            Outcome::FellShort => 1,
        }
    }
}

/// Runs the command the user asked for.
pub fn dispatch(cli: Cli) -> anyhow::Result<Outcome> {
    match cli.command {
        Command::Endgroup(args) => endgroup::run(&args),
        Command::Release(args) => release::run(&args),
        Command::Demo(args) => demo::run(&args),
        Command::Init(args) => init::run(&args),
        Command::Certify(args) => certify::run(&args),
        Command::Disposition(args) => disposition::run(&args),
        Command::Lookup(args) => lookup::run(&args),
        Command::Trend(args) => trend::run(&args),
        Command::Find(args) => find::run(&args),
        Command::Serve(args) => serve::run(&args),
        Command::Shipments(args) => shipments::run(&args),
        Command::Specs(args) => specs::run(&args),
        Command::Verify(args) => verify::run(&args),
        Command::Upgrade(args) => upgrade::run(&args),
        Command::Cook(args) => cook::run(&args),
        Command::Adjust(args) => adjust::run(&args),
    }
}
