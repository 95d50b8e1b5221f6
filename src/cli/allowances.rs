//! `flue allowances ...` and `flue import allowances`: thin commands over
//! `import::allowances` (writes and the reads they check) and
//! `report::allowances` (outputs).

use crate::allowances::{Holder, Transaction, TransactionKind};
use crate::import::allowances::{
    import, program_of, program_position, program_year, settle, site_of, transfer, ProgramYear,
};
use crate::import::InputFile;
use crate::ledger::{AllowanceReads, Ledger};
use crate::report::allowances::{
    self as out, BalanceReport, PositionReport, ReconcileReport, SerialsReport, SettlementView,
    EMISSIONS_TO_DATE_BASIS,
};
use anyhow::bail;
use chrono::NaiveDate;
use clap::{Args, Subcommand, ValueEnum};
use rust_decimal::Decimal;
use std::path::{Path, PathBuf};

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    Table,
    Json,
}

/// `reconcile` also writes CSV.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum ReconcileFormat {
    Table,
    Json,
    Csv,
}

#[derive(Debug, Subcommand)]
pub enum AllowancesCommand {
    /// Record one transfer between two accounts of the site file.
    #[command(
        after_help = "Example:\n  flue allowances transfer --id T-2025-031 --date 2025-11-03 --program SO2-ANNUAL \\\n      --vintage 2025 --quantity 1200 --from MC1-TRADING --to MC1-COMPLIANCE --note \"cover 2025\""
    )]
    Transfer(TransferArgs),
    /// Holdings by account, program and vintage.
    #[command(
        after_help = "Examples:\n  flue allowances balance\n  flue allowances balance --account MC1-COMPLIANCE --program SO2-ANNUAL --as-of 2026-03-01 --format json"
    )]
    Balance(BalanceArgs),
    /// The serial-number blocks an account holds.
    #[command(after_help = "Example:\n  flue allowances serials --account MC1-COMPLIANCE")]
    Serials(SerialsArgs),
    /// A program's year: emissions against the allowances held at the true-up deadline.
    #[command(
        after_help = "Examples:\n  flue allowances reconcile --program SO2-ANNUAL --year 2025\n  flue allowances reconcile --program NOX-OZONE --year 2025 --format json\n  flue allowances reconcile --program SO2-ANNUAL --year 2025 --format csv > so2-2025.csv"
    )]
    Reconcile(YearArgs),
    /// Write a reconciled year's deductions and offset; once per program and year.
    #[command(after_help = "Example:\n  flue allowances settle --program SO2-ANNUAL --year 2025")]
    Settle(SettleArgs),
    /// Where a program's year stands part way through, projected to the period's end.
    #[command(
        after_help = "Example:\n  flue allowances position --program NOX-OZONE --as-of 2025-07-31"
    )]
    Position(PositionArgs),
}

fn date(s: &str) -> Result<NaiveDate, String> {
    if s.len() != 10 {
        return Err("expected a date YYYY-MM-DD".into());
    }
    NaiveDate::parse_from_str(s, "%Y-%m-%d").map_err(|_| "expected a date YYYY-MM-DD".into())
}

fn price(s: &str) -> Result<Decimal, String> {
    crate::decimal::parse_decimal(s, false).map_err(|e| e.to_string())
}

#[derive(Debug, Args)]
pub struct TransferArgs {
    /// The transaction's id; the same id with the same content is a no-op.
    #[arg(long)]
    pub id: String,
    #[arg(long, value_parser = date)]
    pub date: NaiveDate,
    #[arg(long)]
    pub program: String,
    #[arg(long, value_parser = clap::value_parser!(i32).range(1000..=9999))]
    pub vintage: i32,
    #[arg(long, value_parser = clap::value_parser!(u64).range(1..=crate::allowances::QUANTITY_MAX))]
    pub quantity: u64,
    #[arg(long)]
    pub from: String,
    #[arg(long)]
    pub to: String,
    /// Price paid per allowance.
    #[arg(long, value_parser = price)]
    pub price: Option<Decimal>,
    #[arg(long, default_value = "")]
    pub note: String,
    /// First serial of the block moved; needs --serial-to.
    #[arg(long, requires = "serial_to", value_parser = clap::value_parser!(u64).range(0..=i64::MAX as u64))]
    pub serial_from: Option<u64>,
    /// Last serial of the block moved; needs --serial-from.
    #[arg(long, requires = "serial_from", value_parser = clap::value_parser!(u64).range(0..=i64::MAX as u64))]
    pub serial_to: Option<u64>,
    #[command(flatten)]
    pub facility: FacilityArg,
}

#[derive(Debug, Args)]
pub struct FacilityArg {
    /// The facility, where the ledger holds more than one.
    #[arg(long)]
    pub facility: Option<String>,
}

#[derive(Debug, Args)]
pub struct BalanceArgs {
    #[arg(long)]
    pub account: Option<String>,
    #[arg(long)]
    pub program: Option<String>,
    /// Holdings at the end of this day; after every transaction when omitted.
    #[arg(long, value_parser = date)]
    pub as_of: Option<NaiveDate>,
    #[arg(long, value_enum, default_value = "table")]
    pub format: Format,
    #[command(flatten)]
    pub facility: FacilityArg,
}

#[derive(Debug, Args)]
pub struct SerialsArgs {
    #[arg(long)]
    pub account: String,
    #[arg(long, value_enum, default_value = "table")]
    pub format: Format,
    #[command(flatten)]
    pub facility: FacilityArg,
}

#[derive(Debug, Args)]
pub struct YearArgs {
    #[arg(long)]
    pub program: String,
    #[arg(long, value_parser = clap::value_parser!(i32).range(1900..=9998))]
    pub year: i32,
    #[arg(long, value_enum, default_value = "table")]
    pub format: ReconcileFormat,
    #[command(flatten)]
    pub facility: FacilityArg,
}

#[derive(Debug, Args)]
pub struct SettleArgs {
    #[arg(long)]
    pub program: String,
    #[arg(long, value_parser = clap::value_parser!(i32).range(1900..=9998))]
    pub year: i32,
    #[command(flatten)]
    pub facility: FacilityArg,
}

#[derive(Debug, Args)]
pub struct PositionArgs {
    #[arg(long)]
    pub program: String,
    #[arg(long, value_parser = date)]
    pub as_of: NaiveDate,
    #[arg(long, value_enum, default_value = "table")]
    pub format: Format,
    #[command(flatten)]
    pub facility: FacilityArg,
}

#[derive(Debug, Args)]
pub struct ImportAllowancesArgs {
    pub file: PathBuf,
    /// Supersede transactions held with other values; the old versions stay
    /// readable (`flue history transaction ID`). A settled year's
    /// transactions are frozen and are not corrected.
    #[arg(long, value_name = "REASON", value_parser = super::import::non_empty)]
    pub correct: Option<String>,
    /// Allow a correction to touch a certified year, recording an amendment.
    #[arg(long, requires = "correct")]
    pub amend: bool,
    #[command(flatten)]
    pub facility: FacilityArg,
}

/// The reconcile output of one program's year.
pub fn reconcile_report(py: ProgramYear) -> ReconcileReport {
    ReconcileReport {
        settled: py.settlement.is_some(),
        settlement: py.settlement.map(|s| SettlementView {
            date: s.true_up_date,
            deducted: s.deducted,
            offset_owed: s.offset_owed,
            offset_deducted: s.offset_deducted,
            offset_outstanding: s.offset_outstanding,
            settled_at: s.settled_at,
            settled_by: s.settled_by,
        }),
        reconciliation: py.reconciliation,
        cost: py.cost,
    }
}

/// Every program's reconciliation of `year`, for `report annual`.
pub fn program_reports(
    ledger: &Ledger,
    site: &crate::site::Site,
    year: i32,
) -> anyhow::Result<Vec<serde_json::Value>> {
    let book = ledger.allowance_book(site)?;
    site.programs
        .iter()
        .map(|p| {
            let report = reconcile_report(program_year(ledger, site, &book, p, year)?);
            Ok(serde_json::to_value(report)?)
        })
        .collect()
}

pub fn run_import(args: &ImportAllowancesArgs, ledger_path: &Path) -> super::Outcome {
    let mut ledger = Ledger::open(ledger_path)?;
    ledger.set_amend(args.correct.clone().filter(|_| args.amend));
    let file = InputFile::read(&args.file)?;
    ledger.check_free_space(file.bytes.len() as u64)?;
    let outcome = import(
        &mut ledger,
        &file,
        args.facility.facility.as_deref(),
        args.correct.as_deref(),
        &super::stamp(),
    )?;
    println!("{}: {outcome}", args.file.display());
    Ok(())
}

fn emit_json<T: serde::Serialize>(body: &T) -> super::Outcome {
    super::emit(None, false, |w| out::json(body, w))
}

fn emit_text(text: String) -> super::Outcome {
    super::emit(None, false, |w| w.write_all(text.as_bytes()))
}

pub fn run(cmd: &AllowancesCommand, ledger_path: &Path) -> super::Outcome {
    match cmd {
        AllowancesCommand::Transfer(a) => {
            let mut ledger = Ledger::open(ledger_path)?;
            let serials = match (a.serial_from, a.serial_to) {
                (Some(f), Some(t)) => {
                    Some(crate::allowances::SerialBlock::new(f, t).ok_or_else(|| {
                        anyhow::anyhow!("--serial-to {t} is below --serial-from {f}")
                    })?)
                }
                _ => None,
            };
            let t = Transaction {
                id: a.id.clone(),
                date: a.date,
                kind: TransactionKind::Transfer,
                program: a.program.clone(),
                vintage: a.vintage,
                quantity: a.quantity,
                from: Holder::account(&a.from),
                to: Holder::account(&a.to),
                price_usd_per_allowance: a.price,
                note: a.note.clone(),
                serials,
            };
            let outcome = transfer(
                &mut ledger,
                &t,
                a.facility.facility.as_deref(),
                &super::stamp(),
            )?;
            if outcome.added == 0 {
                println!("transaction {}: nothing new: already present", t.id);
            } else {
                println!(
                    "transaction {}: recorded: {} {} of vintage {} from {} to {}",
                    t.id, t.quantity, t.program, t.vintage, t.from, t.to
                );
            }
            Ok(())
        }
        AllowancesCommand::Balance(a) => {
            let ledger = Ledger::open(ledger_path)?;
            let site = site_of(&ledger, a.facility.facility.as_deref())?;
            if let Some(p) = &a.program {
                program_of(&site, p)?;
            }
            if let Some(acc) = &a.account {
                if !site.accounts.iter().any(|x| &x.id == acc) {
                    bail!(
                        "account {acc}: not in the site file of {}",
                        site.facility.id
                    );
                }
            }
            let book = ledger.allowance_book(&site)?;
            let holdings = match a.as_of {
                Some(d) => book.holdings_at_end_of(d),
                None => book.holdings().clone(),
            };
            let report = BalanceReport::new(
                &site.facility.id,
                a.as_of,
                holdings.balances(a.account.as_deref(), a.program.as_deref()),
            );
            match a.format {
                Format::Table => emit_text(out::balances(&report)),
                Format::Json => emit_json(&report),
            }
        }
        AllowancesCommand::Serials(a) => {
            let ledger = Ledger::open(ledger_path)?;
            let site = site_of(&ledger, a.facility.facility.as_deref())?;
            if !site.accounts.iter().any(|x| x.id == a.account) {
                bail!(
                    "account {}: not in the site file of {}",
                    a.account,
                    site.facility.id
                );
            }
            let book = ledger.allowance_book(&site)?;
            let report = SerialsReport {
                account: a.account.clone(),
                blocks: book.holdings().blocks(&Holder::account(&a.account)),
            };
            match a.format {
                Format::Table => emit_text(out::serials(&report)),
                Format::Json => emit_json(&report),
            }
        }
        AllowancesCommand::Reconcile(a) => {
            let ledger = Ledger::open(ledger_path)?;
            let site = site_of(&ledger, a.facility.facility.as_deref())?;
            let program = program_of(&site, &a.program)?;
            let book = ledger.allowance_book(&site)?;
            let report = reconcile_report(program_year(&ledger, &site, &book, program, a.year)?);
            match a.format {
                ReconcileFormat::Table => emit_text(out::reconcile(&report)),
                ReconcileFormat::Json => emit_json(&report),
                ReconcileFormat::Csv => emit_text(crate::report::csv::reconcile(
                    &serde_json::to_value(&report)?,
                    crate::report::CAUTION,
                )),
            }
        }
        AllowancesCommand::Settle(a) => {
            let mut ledger = Ledger::open(ledger_path)?;
            let (py, s) = settle(
                &mut ledger,
                a.facility.facility.as_deref(),
                &a.program,
                a.year,
                &super::stamp(),
            )?;
            println!(
                "program {} {} settled: {} transactions dated {}; {} allowances deducted, offset {} of {} owed ({} outstanding)",
                s.program,
                s.year,
                s.transactions.len(),
                s.date,
                s.deducted,
                s.offset_deducted,
                s.offset_owed,
                s.offset_outstanding
            );
            emit_text(out::reconcile(&reconcile_report(py)))
        }
        AllowancesCommand::Position(a) => {
            let ledger = Ledger::open(ledger_path)?;
            let site = site_of(&ledger, a.facility.facility.as_deref())?;
            let program = program_of(&site, &a.program)?;
            let book = ledger.allowance_book(&site)?;
            let (position, cost) = program_position(&ledger, &site, &book, program, a.as_of)?;
            let report = PositionReport {
                projection: out::projection_text(position.projection_method),
                position,
                emissions_to_date_basis: EMISSIONS_TO_DATE_BASIS,
                cost,
            };
            match a.format {
                Format::Table => emit_text(out::position(&report)),
                Format::Json => emit_json(&report),
            }
        }
    }
}
