//! The command line: argument parsing and one thin file per command.
//! Only this module prints.

mod allowances;
mod certify;
mod demo;
mod demo_hourly;
mod explain;
mod import;
mod init;
mod report;
mod site;
mod verify;

use clap::{Parser, Subcommand};
use std::path::PathBuf;

const AFTER_HELP: &str = "\
Examples:
  flue init
  flue site load samples/site.toml
  flue import analyses samples/analyses.csv
  flue import fuel samples/fuel.csv
  flue import allowances samples/allowances.csv
  flue allowances reconcile --program SO2-ANNUAL --year 2025
  flue report annual --year 2025
  flue demo

Results support, and never replace, the judgement of the responsible official
and the monitoring and reporting rules of the plant's permit and local rules.";

/// flue: an emissions compliance ledger for fuel-burning units.
#[derive(Debug, Parser)]
#[command(name = "flue", version, about, after_help = AFTER_HELP)]
pub struct Cli {
    /// The ledger file.
    #[arg(long, global = true, env = "FLUE_LEDGER", default_value = "flue.db")]
    pub ledger: PathBuf,

    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Create an empty ledger (never overwrites a file).
    #[command(after_help = "Example:\n  flue --ledger plant.db init")]
    Init,
    /// Load or show the site file: facility, units, methods, accounts, programs.
    #[command(subcommand)]
    Site(site::SiteCommand),
    /// Import an input file; all rows or none.
    #[command(subcommand)]
    Import(import::ImportCommand),
    /// Reports.
    #[command(subcommand)]
    Report(report::ReportCommand),
    /// Allowances: transfers, balances, serial blocks, reconciliation, settlement, position.
    #[command(subcommand)]
    Allowances(allowances::AllowancesCommand),
    /// How a figure was computed: equations, constants and input rows.
    #[command(
        after_help = "Examples:\n  flue explain so2 --unit K2 --hour 2025-06-17T05:00\n  flue explain nox --unit K1 --year 2025 --format json"
    )]
    Explain(explain::ExplainArgs),
    /// Build the invented demo plant in a new directory and print its year-end report.
    #[command(after_help = "Examples:\n  flue demo\n  flue demo --dir /tmp/flue-demo")]
    Demo(demo::DemoArgs),
    /// Recheck the whole ledger: file, schema, every journal entry and its rows; exit 1 if anything changed.
    #[command(
        after_help = "Examples:\n  flue verify\n  flue verify --receipt certification-2025.json"
    )]
    Verify(verify::VerifyArgs),
    /// Certify a year: record its report digest and the journal head, and write a receipt.
    #[command(
        after_help = "Example:\n  flue certify --year 2025 --by \"A. Official\" --statement \"true, accurate and complete\" --out receipt-2025.json"
    )]
    Certify(certify::CertifyArgs),
}

/// What a command leaves for `main` to turn into an exit status.
pub type Outcome = anyhow::Result<()>;

pub fn run(cli: Cli) -> Outcome {
    match &cli.command {
        Command::Init => init::run(&cli.ledger),
        Command::Site(cmd) => site::run(cmd, &cli.ledger),
        Command::Import(cmd) => import::run(cmd, &cli.ledger),
        Command::Report(cmd) => report::run(cmd, &cli.ledger),
        Command::Allowances(cmd) => allowances::run(cmd, &cli.ledger),
        Command::Demo(args) => demo::run(args),
        Command::Explain(args) => explain::run(args, &cli.ledger),
        Command::Verify(args) => verify::run(args, &cli.ledger),
        Command::Certify(args) => certify::run(args, &cli.ledger),
    }
}

/// Who and when, for what a command writes. `FLUE_NOW` fixes the time for
/// reproducible runs (tests never read the real clock); `FLUE_USER` names who.
pub fn stamp() -> crate::import::Stamp {
    let at = std::env::var("FLUE_NOW")
        .ok()
        .filter(|s| !s.is_empty())
        .unwrap_or_else(|| chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true));
    let by = ["FLUE_USER", "USER", "LOGNAME"]
        .iter()
        .find_map(|v| std::env::var(v).ok().filter(|s| !s.is_empty()))
        .unwrap_or_else(|| "unknown".to_string());
    crate::import::Stamp { at, by }
}

/// Write to stdout, or to a new file with `--out` (never overwriting without `--force`).
pub fn emit(
    out: Option<&std::path::Path>,
    force: bool,
    write: impl FnOnce(&mut dyn std::io::Write) -> std::io::Result<()>,
) -> Outcome {
    use anyhow::Context;
    use std::io::Write;
    match out {
        None => {
            let stdout = std::io::stdout();
            let mut lock = stdout.lock();
            write(&mut lock)?;
            lock.flush()?;
        }
        Some(path) => {
            let mut options = std::fs::OpenOptions::new();
            options.write(true);
            if force {
                options.create(true).truncate(true);
            } else {
                options.create_new(true);
            }
            let mut file = options.open(path).with_context(|| {
                if path.exists() && !force {
                    format!(
                        "{}: already exists; pass --force to replace it",
                        path.display()
                    )
                } else {
                    format!("{}: cannot create", path.display())
                }
            })?;
            write(&mut file).with_context(|| format!("{}: cannot write", path.display()))?;
            file.sync_all()?;
            eprintln!("wrote {}", path.display());
        }
    }
    Ok(())
}
