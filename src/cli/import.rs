use crate::import::{analyses, fuel, hourly, InputFile, Outcome};
use crate::ledger::Ledger;
use clap::{Args, Subcommand};
use std::path::{Path, PathBuf};

#[derive(Debug, Subcommand)]
pub enum ImportCommand {
    /// Fuel sample analyses: sample,fuel,sampled_on,sulfur_pct,sulfur_gr_per_100scf,gcv,gcv_uom,carbon_pct,
    /// hydrogen_pct,nitrogen_pct,oxygen_pct,density_lb_per_gal
    #[command(
        after_help = "Examples:\n  flue import analyses samples/analyses.csv\n  flue import analyses lab-fix.csv --correct \"lab reissued sample C-07\""
    )]
    Analyses(ImportArgs),
    /// Fuel use records: unit,start,end,fuel,quantity,uom,sample (one calendar month at most per record)
    #[command(
        after_help = "Examples:\n  flue import fuel samples/fuel.csv\n  flue import fuel june.csv --correct \"meter K1 re-read\""
    )]
    Fuel(ImportArgs),
    /// Hourly monitor data: unit,hour,op_time,load_mw,so2_ppm_wet,nox_ppm_dry,o2_pct_dry,co2_pct_wet,flow_scfh_wet,h2o_pct
    /// (a dry/wet variant such as so2_ppm_dry may replace a concentration column; an empty cell is a missing reading)
    #[command(
        after_help = "Examples:\n  flue import hourly k2-2025.csv\n  flue import hourly k2-fix.csv --correct \"flow monitor re-calibrated\""
    )]
    Hourly(ImportArgs),
    /// Allowance transactions: id,date,kind,program,vintage,quantity,from,to,price,note[,serial_from,serial_to]
    /// (kind allocation, transfer or adjustment; an empty from or to is the program's issuer)
    #[command(
        after_help = "Examples:\n  flue import allowances samples/allowances.csv\n  flue import allowances fix.csv --correct \"registry statement: 1,150 allocated, not 1,500\""
    )]
    Allowances(super::allowances::ImportAllowancesArgs),
}

#[derive(Debug, Args)]
pub struct ImportArgs {
    pub file: PathBuf,
    /// Supersede rows held with other values; the old rows stay readable.
    #[arg(long, value_name = "REASON", value_parser = non_empty)]
    pub correct: Option<String>,
    /// Allow the import to touch a certified year, recording an amendment.
    #[arg(long, requires = "correct")]
    pub amend: bool,
}

pub(super) fn non_empty_name(s: &str) -> Result<String, String> {
    if s.trim().is_empty() {
        Err("a name is needed".into())
    } else {
        Ok(s.to_string())
    }
}

pub(super) fn non_empty(s: &str) -> Result<String, String> {
    if s.trim().is_empty() {
        Err("a correction needs a reason".into())
    } else {
        Ok(s.to_string())
    }
}

pub fn run(cmd: &ImportCommand, ledger_path: &Path) -> super::Outcome {
    if let ImportCommand::Allowances(a) = cmd {
        return super::allowances::run_import(a, ledger_path);
    }
    let mut ledger = Ledger::open(ledger_path)?;
    let stamp = super::stamp();
    let amend = match cmd {
        ImportCommand::Analyses(a) | ImportCommand::Fuel(a) | ImportCommand::Hourly(a) => {
            a.correct.clone().filter(|_| a.amend)
        }
        ImportCommand::Allowances(_) => None,
    };
    ledger.set_amend(amend);
    let file = match cmd {
        ImportCommand::Analyses(a) | ImportCommand::Fuel(a) | ImportCommand::Hourly(a) => &a.file,
        ImportCommand::Allowances(a) => &a.file,
    };
    // An unreadable file is reported by the import itself, naming it.
    let input_bytes = std::fs::metadata(file).map(|m| m.len()).unwrap_or(0);
    ledger.check_free_space(input_bytes)?;
    let spinner = super::progress::Spinner::start(format!("importing {}", file.display()));
    let (args, outcome): (&ImportArgs, Outcome) = match cmd {
        ImportCommand::Analyses(a) => (
            a,
            analyses::import(
                &mut ledger,
                &InputFile::read(&a.file)?,
                a.correct.as_deref(),
                &stamp,
            )?,
        ),
        ImportCommand::Hourly(a) => (
            a,
            hourly::import(&mut ledger, &a.file, a.correct.as_deref(), &stamp)?,
        ),
        ImportCommand::Allowances(_) => unreachable!("handled above"),
        ImportCommand::Fuel(a) => (
            a,
            fuel::import(
                &mut ledger,
                &InputFile::read(&a.file)?,
                a.correct.as_deref(),
                &stamp,
            )?,
        ),
    };
    drop(spinner);
    println!("{}: {outcome}", args.file.display());
    Ok(())
}
