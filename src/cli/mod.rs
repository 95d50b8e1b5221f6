//! The command line: argument parsing and one thin file per command.
//! Only this module prints.

mod allowances;
mod certify;
mod completions;
mod demo;
mod demo_hourly;
mod explain;
mod history;
mod import;
mod init;
mod progress;
mod report;
mod site;
mod verify;

use clap::{Parser, Subcommand};
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};

const AFTER_HELP: &str = "\
Examples:
  flue init
  flue site load samples/site.toml
  flue import analyses samples/analyses.csv
  flue import fuel samples/fuel.csv
  flue import allowances samples/allowances.csv
  flue allowances reconcile --program SO2-ANNUAL --year 2025
  flue report annual --year 2025
  flue report annual --year 2025 --format html --out mc1-2025.html
  flue history fuel --unit K1 --fuel bituminous --start 2025-03-01 --end 2025-03-31
  flue demo
  flue completions bash

Results support, and never replace, the judgement of the responsible official
and the monitoring and reporting rules of the plant's permit and local rules.";

/// flue: an emissions compliance ledger for fuel-burning units.
#[derive(Debug, Parser)]
#[command(name = "flue", version, about, after_help = AFTER_HELP)]
pub struct Cli {
    /// The ledger file.
    #[arg(long, global = true, env = "FLUE_LEDGER", default_value = "flue.db")]
    pub ledger: PathBuf,

    /// Print no informational lines on stderr (such as "wrote FILE"); errors still show.
    #[arg(long, short, global = true)]
    pub quiet: bool,

    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Create an empty ledger (never overwrites a file).
    #[command(after_help = "Example:\n  flue --ledger plant.db init")]
    Init,
    /// Load or show the site file: facility, units, methods, accounts, programs.
    #[command(
        subcommand,
        after_help = "Examples:\n  flue site load samples/site.toml\n  flue site show"
    )]
    Site(site::SiteCommand),
    /// Import an input file; all rows or none.
    #[command(
        subcommand,
        after_help = "Examples:\n  flue import fuel samples/fuel.csv\n  flue import hourly k2-2025.csv"
    )]
    Import(import::ImportCommand),
    /// Reports.
    #[command(
        subcommand,
        after_help = "Examples:\n  flue report annual --year 2025\n  flue report annual --year 2025 --format html --out mc1-2025.html"
    )]
    Report(report::ReportCommand),
    /// Allowances: transfers, balances, serial blocks, reconciliation, settlement, position.
    #[command(
        subcommand,
        after_help = "Examples:\n  flue allowances balance\n  flue allowances reconcile --program SO2-ANNUAL --year 2025 --format csv"
    )]
    Allowances(allowances::AllowancesCommand),
    /// How a figure was computed: equations, constants and input rows.
    #[command(
        after_help = "Examples:\n  flue explain so2 --unit K1 --year 2025\n  flue explain nox --unit K1 --month 2025-03 --format json\n  flue explain so2 --unit K2 --month 2025-06\n  flue explain so2 --unit K2 --hour 2025-06-17T05:00\n\nLevels: --year (quarters, months, fuel records), --month (a month's fuel records with\ntheir analyses, or a CEMS unit's hours), --hour (one hour's inputs and steps). Every\nlevel's `amount` (MMBtu or lb) is the sum of the amounts below it; inputs name their\nfile, line, sha256 and the journal entry that added them."
    )]
    Explain(explain::ExplainArgs),
    /// Every stored version of one record, oldest first: values, file, line, sha256, who, when and why.
    #[command(
        after_help = "Examples:\n  flue history fuel --unit K1 --fuel bituminous --start 2025-03-01 --end 2025-03-31\n  flue history hour --unit K2 --hour 2025-06-17T05:00 --format json\n  flue history sample K1-C-2501\n  flue history transaction MC-A25-SO2"
    )]
    History(history::HistoryArgs),
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
    /// Print a completion script for a shell.
    #[command(
        after_help = "Examples:\n  flue completions bash > ~/.local/share/bash-completion/completions/flue\n  flue completions zsh > ~/.zfunc/_flue\n  flue completions fish > ~/.config/fish/completions/flue.fish"
    )]
    Completions(completions::CompletionsArgs),
    /// Print the manual page (roff).
    #[command(after_help = "Example:\n  flue manpage > flue.1 && man ./flue.1")]
    Manpage,
}

/// What a command leaves for `main` to turn into an exit status.
pub type Outcome = anyhow::Result<()>;

/// Set once from `--quiet`, before the command runs.
static QUIET: AtomicBool = AtomicBool::new(false);

/// An informational line on stderr, silenced by `--quiet`.
pub fn note(line: impl std::fmt::Display) {
    if !quiet() {
        eprintln!("{line}");
    }
}

/// Whether `--quiet` was given.
pub fn quiet() -> bool {
    QUIET.load(Ordering::Relaxed)
}

pub fn run(cli: Cli) -> Outcome {
    QUIET.store(cli.quiet, Ordering::Relaxed);
    match &cli.command {
        Command::Init => init::run(&cli.ledger),
        Command::Site(cmd) => site::run(cmd, &cli.ledger),
        Command::Import(cmd) => import::run(cmd, &cli.ledger),
        Command::Report(cmd) => report::run(cmd, &cli.ledger),
        Command::Allowances(cmd) => allowances::run(cmd, &cli.ledger),
        Command::Demo(args) => demo::run(args),
        Command::Explain(args) => explain::run(args, &cli.ledger),
        Command::History(args) => history::run(args, &cli.ledger),
        Command::Verify(args) => verify::run(args, &cli.ledger),
        Command::Certify(args) => certify::run(args, &cli.ledger),
        Command::Completions(args) => completions::completions(args),
        Command::Manpage => completions::manpage(),
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

/// Write to stdout, or to a file with `--out` (never overwriting without `--force`).
///
/// A file is written whole under a temporary name in its directory, synced,
/// then moved into place (RELIABILITY.md R12), so a crash or a full disk
/// leaves the old file or the new one, never half a report. Without
/// `--force` the move is a hard link, which fails if the name has appeared
/// meanwhile; a symlink at the name is replaced, never followed.
pub fn emit(
    out: Option<&std::path::Path>,
    force: bool,
    write: impl FnOnce(&mut dyn std::io::Write) -> std::io::Result<()>,
) -> Outcome {
    use std::io::Write;
    match out {
        None => {
            let stdout = std::io::stdout();
            let mut lock = stdout.lock();
            write(&mut lock)?;
            lock.flush()?;
        }
        Some(path) => {
            write_atomically(path, force, write)?;
            note(format_args!("wrote {}", path.display()));
        }
    }
    Ok(())
}

/// Removes a temporary file unless it was moved into place.
struct TempFile(Option<std::path::PathBuf>);

impl Drop for TempFile {
    fn drop(&mut self) {
        if let Some(p) = self.0.take() {
            let _ = std::fs::remove_file(p);
        }
    }
}

fn write_atomically(
    path: &std::path::Path,
    force: bool,
    write: impl FnOnce(&mut dyn std::io::Write) -> std::io::Result<()>,
) -> Outcome {
    use anyhow::Context;
    let shown = path.display();
    let exists = || anyhow::anyhow!("{shown}: already exists; pass --force to replace it");
    if !force && std::fs::symlink_metadata(path).is_ok() {
        return Err(exists());
    }
    let Some(name) = path.file_name() else {
        anyhow::bail!("{shown}: cannot create: not a file name");
    };
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => std::path::Path::new("."),
    };
    let temp = dir.join(format!(
        ".{}.{}.tmp",
        name.to_string_lossy(),
        std::process::id()
    ));
    let mut file = std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&temp)
        .with_context(|| format!("{shown}: cannot create"))?;
    let mut guard = TempFile(Some(temp.clone()));
    write(&mut file).with_context(|| format!("{shown}: cannot write"))?;
    file.sync_all()
        .with_context(|| format!("{shown}: cannot write"))?;
    drop(file);
    crate::crashpoint::crashpoint("out-temp");
    if force {
        std::fs::rename(&temp, path).with_context(|| format!("{shown}: cannot replace"))?;
    } else {
        match std::fs::hard_link(&temp, path) {
            Ok(()) => {}
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => return Err(exists()),
            Err(e) => return Err(e).with_context(|| format!("{shown}: cannot create")),
        }
        std::fs::remove_file(&temp).with_context(|| format!("{shown}: cannot create"))?;
    }
    guard.0 = None;
    // The new name is durable once its directory is synced.
    if let Ok(d) = std::fs::File::open(dir) {
        let _ = d.sync_all();
    }
    Ok(())
}
