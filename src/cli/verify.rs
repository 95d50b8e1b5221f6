//! `flue verify [--receipt FILE]`: recheck the whole ledger, read-only.

use crate::audit::{report_digest, Receipt};
use crate::ledger::{JournalReads, Ledger, Reads};
use anyhow::{bail, Context};
use clap::Args;
use std::path::{Path, PathBuf};

#[derive(Debug, Args)]
pub struct VerifyArgs {
    /// A receipt written by `flue certify`: the ledger must still hold its entries.
    #[arg(long, value_name = "FILE")]
    pub receipt: Option<PathBuf>,
}

pub fn run(args: &VerifyArgs, ledger_path: &Path) -> super::Outcome {
    let receipt: Option<Receipt> = match &args.receipt {
        None => None,
        Some(p) => {
            let text = std::fs::read_to_string(p)
                .with_context(|| format!("{}: cannot read the receipt", p.display()))?;
            Some(
                serde_json::from_str(&text)
                    .with_context(|| format!("{}: not a flue receipt", p.display()))?,
            )
        }
    };
    let ledger = Ledger::open_read_only(ledger_path)?;
    let v = ledger
        .verify()
        .with_context(|| format!("{}: cannot be verified", ledger_path.display()))?;
    let mut problems: Vec<String> = v.problems.iter().map(|p| p.to_string()).collect();
    if let Some(r) = &receipt {
        let name = args.receipt.as_ref().expect("read above").display();
        if v.entry_count < r.entry_count {
            problems.push(format!(
                "receipt {name}: the ledger has {} journal entries, the receipt expects at least {} ({} missing since the receipt)",
                v.entry_count,
                r.entry_count,
                r.entry_count - v.entry_count
            ));
        } else if ledger.journal_hash(r.entry_count)?.as_deref() != Some(r.head_hash.as_str()) {
            problems.push(format!(
                "receipt {name}: journal entry {} has another hash than the receipt's {}",
                r.entry_count, r.head_hash
            ));
        }
    }
    // A certified report must still reproduce its digest, unless amended.
    if problems.is_empty() {
        for c in ledger.certifications()? {
            let digest = year_digest(&ledger, c.year)?;
            if digest != c.report_sha256 && c.amendments.is_empty() {
                problems.push(format!(
                    "certified report of {} (by {} on {}) no longer reproduces its digest: certified {}, now {}, and no amendment explains the change",
                    c.year, c.by, c.at, c.report_sha256, digest
                ));
            }
        }
    }
    if !problems.is_empty() {
        for p in &problems {
            eprintln!("verify: {p}");
        }
        bail!(
            "{}: verification failed ({} problems; the first: {})",
            ledger_path.display(),
            problems.len(),
            problems[0]
        );
    }
    println!(
        "{}: intact: {} journal entries, head {}",
        ledger_path.display(),
        v.entry_count,
        v.head_hash
    );
    println!("schema {}", v.schema_digest);
    if let Some(r) = &receipt {
        println!(
            "receipt: year {} certified by {}: entry {} matches",
            r.year, r.by, r.entry_count
        );
    }
    Ok(())
}

/// The digest of year `year`'s annual reports, every facility in order.
pub fn year_digest(ledger: &Ledger, year: i32) -> anyhow::Result<String> {
    let mut reports = Vec::new();
    for site in ledger.latest_sites()? {
        reports.push(super::report::annual_report(
            ledger,
            Some(&site.facility_id),
            year,
        )?);
    }
    Ok(report_digest(&reports)?)
}
