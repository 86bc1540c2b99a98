//! The `resinlot` binary: parses the command line, runs one command, maps errors to exit codes.

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    match run() {
        Ok(code) => code,
        Err(err) => {
            if resinlot::support::output::is_broken_pipe(&err) {
                return ExitCode::SUCCESS;
            }
            eprintln!("resinlot: error: {err:#}");
            let code = err
                .chain()
                .find_map(|e| e.downcast_ref::<resinlot::Error>())
                .map_or(2, resinlot::Error::exit_code);
            ExitCode::from(code)
        }
    }
}

fn run() -> anyhow::Result<ExitCode> {
    let cli = resinlot::cmd::cli::Cli::parse();
    let outcome = resinlot::cmd::dispatch(cli)?;
    Ok(ExitCode::from(outcome.code()))
}
