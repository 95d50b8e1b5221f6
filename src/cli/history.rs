//! `flue history`: every stored version of one record, oldest first.

use crate::ledger::{HistoryReads, Ledger};
use crate::records::hour_index;
use crate::report::history::{self, History};
use anyhow::{anyhow, bail};
use chrono::{NaiveDate, NaiveDateTime};
use clap::{Args, Subcommand, ValueEnum};
use std::path::Path;

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum HistoryFormat {
    Text,
    Json,
}

#[derive(Debug, Args)]
pub struct HistoryArgs {
    #[command(subcommand)]
    pub record: HistoryCommand,
    /// text, or json (with a format_version and the versions array)
    #[arg(long, global = true, value_enum, default_value = "text")]
    pub format: HistoryFormat,
}

#[derive(Debug, Subcommand)]
pub enum HistoryCommand {
    /// A fuel sample's analysis, by sample id.
    #[command(after_help = "Example:\n  flue history sample K1-C-2501")]
    Sample { id: String },
    /// A fuel record, by unit, fuel and period (dates inclusive, as imported).
    #[command(
        after_help = "Example:\n  flue history fuel --unit K1 --fuel bituminous --start 2025-03-01 --end 2025-03-31"
    )]
    Fuel {
        #[arg(long)]
        unit: String,
        #[arg(long)]
        fuel: String,
        #[arg(long, value_parser = date)]
        start: NaiveDate,
        #[arg(long, value_parser = date)]
        end: NaiveDate,
    },
    /// A unit-hour of monitor data (hour start, local standard time).
    #[command(after_help = "Example:\n  flue history hour --unit K2 --hour 2025-06-17T05:00")]
    Hour {
        #[arg(long)]
        unit: String,
        /// YYYY-MM-DDTHH:00, local standard time
        #[arg(long, value_parser = hour)]
        hour: NaiveDateTime,
    },
    /// An allowance transaction, by id.
    #[command(after_help = "Example:\n  flue history transaction MC-A25-SO2 --format json")]
    Transaction { id: String },
}

fn date(s: &str) -> Result<NaiveDate, String> {
    NaiveDate::parse_from_str(s, "%Y-%m-%d")
        .map_err(|_| format!("expected YYYY-MM-DD, found {s:?}"))
}

fn hour(s: &str) -> Result<NaiveDateTime, String> {
    NaiveDateTime::parse_from_str(s, "%Y-%m-%dT%H:%M")
        .ok()
        .filter(|t| t.format("%M").to_string() == "00")
        .ok_or_else(|| format!("expected YYYY-MM-DDTHH:00, found {s:?}"))
}

pub fn run(args: &HistoryArgs, ledger_path: &Path) -> super::Outcome {
    let ledger = Ledger::open_read_only(ledger_path)?;
    let h = match &args.record {
        HistoryCommand::Sample { id } => {
            let stored = ledger.sample_versions(id)?;
            if stored.is_empty() {
                bail!("no fuel sample analysis {id:?} in the ledger");
            }
            History::of_fields("sample", vec![("sample", id.clone())], stored)
        }
        HistoryCommand::Fuel {
            unit,
            fuel,
            start,
            end,
        } => {
            let (start, end) = (start.to_string(), end.to_string());
            let stored = ledger.fuel_versions(unit, fuel, &start, &end)?;
            if stored.is_empty() {
                bail!(
                    "no fuel record for unit {unit}, fuel {fuel}, {start} to {end} in the ledger"
                );
            }
            let key = vec![
                ("unit", unit.clone()),
                ("fuel", fuel.clone()),
                ("start", start),
                ("end", end),
            ];
            History::of_fields("fuel", key, stored)
        }
        HistoryCommand::Hour { unit, hour } => {
            let label = hour.format("%Y-%m-%dT%H:00").to_string();
            let stored = ledger.hour_versions(unit, hour_index(*hour))?;
            if stored.is_empty() {
                bail!("no stored hour {label} for unit {unit} in the ledger");
            }
            History::of_hours(vec![("unit", unit.clone()), ("hour", label)], stored)
        }
        HistoryCommand::Transaction { id } => {
            let stored = ledger.transaction_versions(id)?;
            if stored.is_empty() {
                bail!("no allowance transaction {id:?} in the ledger");
            }
            History::of_fields("transaction", vec![("id", id.clone())], stored)
        }
    };
    let text = match args.format {
        HistoryFormat::Text => history::text(&h),
        HistoryFormat::Json => history::json(&h).map_err(|e| anyhow!(e))?,
    };
    super::emit(None, false, |w| w.write_all(text.as_bytes()))
}
