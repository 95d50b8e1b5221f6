//! `flue certify --year Y --by NAME`: freeze a year and write the receipt.

use crate::audit::{Receipt, RECEIPT_FORMAT_VERSION};
use crate::ledger::Ledger;
use anyhow::Context;
use clap::Args;
use std::path::{Path, PathBuf};

#[derive(Debug, Args)]
pub struct CertifyArgs {
    #[arg(long, value_parser = clap::value_parser!(i32).range(1900..=9999))]
    pub year: i32,
    /// Who certifies: the responsible official.
    #[arg(long, value_name = "NAME", value_parser = super::import::non_empty_name)]
    pub by: String,
    /// The certification statement, stored with the certification.
    #[arg(long, value_name = "TEXT")]
    pub statement: Option<String>,
    /// Where to write the receipt (JSON); default certification-YEAR.json.
    #[arg(long, value_name = "RECEIPT.json")]
    pub out: Option<PathBuf>,
    /// Replace the receipt file if it exists.
    #[arg(long)]
    pub force: bool,
}

pub fn run(args: &CertifyArgs, ledger_path: &Path) -> super::Outcome {
    let out = args
        .out
        .clone()
        .unwrap_or_else(|| PathBuf::from(format!("certification-{}.json", args.year)));
    // Refuse before writing anything when the receipt cannot be written.
    if out.exists() && !args.force {
        anyhow::bail!(
            "{}: already exists; pass --force to replace it (nothing was certified)",
            out.display()
        );
    }
    let mut ledger = Ledger::open(ledger_path)?;
    let digest = super::verify::year_digest(&ledger, args.year)?;
    let at = super::stamp().at;
    let c = ledger
        .certify(args.year, &args.by, &at, args.statement.as_deref(), &digest)
        .with_context(|| format!("year {}: not certified", args.year))?;
    let receipt = Receipt {
        format_version: RECEIPT_FORMAT_VERSION,
        year: args.year,
        by: args.by.clone(),
        at,
        statement: args.statement.clone(),
        report_sha256: digest,
        entry_count: c.entry_count,
        head_hash: c.head_hash,
        schema_digest: c.schema_digest,
    };
    super::emit(Some(&out), args.force, |w| {
        serde_json::to_writer_pretty(&mut *w, &receipt)?;
        w.write_all(b"\n")
    })?;
    println!(
        "year {} certified by {}: report {}, journal entry {}, head {}",
        receipt.year, receipt.by, receipt.report_sha256, receipt.entry_count, receipt.head_hash
    );
    Ok(())
}
