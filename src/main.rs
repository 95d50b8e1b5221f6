//! The `flue` binary: parse arguments, run the command, map the outcome to
//! an exit status: 0 success, 1 refused input or failed operation, 2 usage.

use clap::Parser;
use flueledger::cli::{run, Cli};
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            // A closed pipe (`flue report ... | head`) is not a failure: exit quietly.
            if e.chain().any(|c| {
                c.downcast_ref::<std::io::Error>()
                    .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
            }) {
                return ExitCode::SUCCESS;
            }
            eprintln!("error: {e:#}");
            ExitCode::from(1)
        }
    }
}
