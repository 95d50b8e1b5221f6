use crate::ledger::{AsOfPoint, JournalReads, Ledger, Reads};
use crate::report::model::{AmendmentView, AsOfView, CertificationView, JournalView};
use crate::report::{self, AnnualReport, Format};
use anyhow::{anyhow, bail};
use clap::{Args, Subcommand};
use std::path::{Path, PathBuf};

#[derive(Debug, Subcommand)]
pub enum ReportCommand {
    /// A facility's year: heat input and SO2, NOx and CO2 tons per unit, by quarter and ozone season.
    #[command(
        after_help = "Examples:\n  flue report annual --year 2025\n  flue report annual --year 2025 --format json --out mc1-2025.json\n  flue report annual --year 2025 --format csv > mc1-2025.csv\n  flue report annual --year 2025 --format html --out mc1-2025.html\n  flue report annual --year 2025 --as-of 12\n  flue report annual --year 2025 --as-of 2026-02-15T17:00 --format json\n\n--as-of reports the ledger as it stood right after one journal entry (numbered as\n`flue verify` counts them), or at a moment: the last entry recorded at or before it."
    )]
    Annual(AnnualArgs),
    /// One calendar quarter and the year to its end, per unit.
    #[command(
        after_help = "Examples:\n  flue report quarter --year 2025 --quarter 3\n  flue report quarter --year 2025 --quarter 2 --format csv\n  flue report quarter --year 2025 --quarter 4 --as-of 2026-01-31T23:59:59Z"
    )]
    Quarter(QuarterArgs),
}

#[derive(Debug, Args)]
pub struct QuarterArgs {
    #[arg(long, value_parser = clap::value_parser!(i32).range(1900..=9999))]
    pub year: i32,
    #[arg(long, value_parser = clap::value_parser!(u32).range(1..=4))]
    pub quarter: u32,
    #[arg(long, value_enum, default_value = "table")]
    pub format: Format,
    /// Write to this new file instead of stdout.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Replace the --out file if it exists.
    #[arg(long)]
    pub force: bool,
    /// The facility, where the ledger holds more than one.
    #[arg(long)]
    pub facility: Option<String>,
    /// The report as it stood right after journal entry ENTRY, or at DATETIME
    /// (the last entry recorded at or before it; RFC 3339, or
    /// YYYY-MM-DDTHH:MM[:SS] in UTC).
    #[arg(long, value_name = "ENTRY|DATETIME")]
    pub as_of: Option<AsOfPoint>,
}

#[derive(Debug, Args)]
pub struct AnnualArgs {
    /// The calendar year to report.
    #[arg(long, value_parser = clap::value_parser!(i32).range(1900..=9999))]
    pub year: i32,
    #[arg(long, value_enum, default_value = "table")]
    pub format: Format,
    /// Write to this new file instead of stdout.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Replace the --out file if it exists.
    #[arg(long)]
    pub force: bool,
    /// The facility, where the ledger holds more than one.
    #[arg(long)]
    pub facility: Option<String>,
    /// The report as it stood right after journal entry ENTRY, or at DATETIME
    /// (the last entry recorded at or before it; RFC 3339, or
    /// YYYY-MM-DDTHH:MM[:SS] in UTC).
    #[arg(long, value_name = "ENTRY|DATETIME")]
    pub as_of: Option<AsOfPoint>,
}

pub fn run(cmd: &ReportCommand, ledger_path: &Path) -> super::Outcome {
    let point = match cmd {
        ReportCommand::Annual(args) => args.as_of.as_ref(),
        ReportCommand::Quarter(args) => args.as_of.as_ref(),
    };
    // An as-of report reads a read-only connection cut at the entry
    // (src/ledger/as_of.rs); the same code computes it.
    let (ledger, as_of) = match point {
        Some(point) => {
            let (ledger, e) = Ledger::open_as_of(ledger_path, point)?;
            let view = AsOfView {
                seq: e.seq,
                at: e.at,
                hash: e.hash,
            };
            (ledger, Some(view))
        }
        None => (Ledger::open(ledger_path)?, None),
    };
    match cmd {
        ReportCommand::Annual(args)
            if args.facility.is_none() && ledger.latest_sites()?.len() > 1 =>
        {
            if args.format == Format::Html {
                bail!("the HTML report is one facility's document: pass --facility");
            }
            let mut model = fleet_report(&ledger, args.year)?;
            for f in &mut model.facilities {
                f.as_of.clone_from(&as_of);
            }
            model.as_of = as_of;
            super::emit(args.out.as_deref(), args.force, |w| {
                report::render_fleet(&model, args.format, w)
            })
        }
        ReportCommand::Annual(args) => {
            let mut model = annual_report(&ledger, args.facility.as_deref(), args.year)?;
            model.certification = certification_view(&ledger, args.year)?;
            let (entries, head_sha256) = ledger.journal_head()?;
            model.journal = Some(JournalView {
                entries,
                head_sha256,
            });
            model.as_of = as_of;
            super::emit(args.out.as_deref(), args.force, |w| {
                report::render(&model, args.format, w)
            })
        }
        ReportCommand::Quarter(args) => {
            let mut annual = annual_report(&ledger, args.facility.as_deref(), args.year)?;
            annual.as_of = as_of;
            let model = report::model::quarter(&annual, args.quarter);
            super::emit(args.out.as_deref(), args.force, |w| {
                report::render_quarter(&model, args.format, w)
            })
        }
    }
}

/// Compute one facility's annual report from the ledger.
pub fn annual_report(
    ledger: &Ledger,
    facility: Option<&str>,
    year: i32,
) -> anyhow::Result<AnnualReport> {
    let latest = ledger.latest_sites()?;
    let version = match (facility, latest.as_slice()) {
        (Some(f), all) => all
            .iter()
            .find(|v| v.facility_id == f)
            .ok_or_else(|| anyhow!("no facility {f} in the ledger"))?,
        (None, [only]) => only,
        (None, []) => bail!("no site file loaded yet (run `flue site load FILE`)"),
        (None, many) => bail!(
            "the ledger holds several facilities; pass --facility (one of {})",
            many.iter()
                .map(|v| v.facility_id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    };
    Ok(facility_report(ledger, version, year)?.0)
}

/// One facility's report and the sum of its units' years.
fn facility_report(
    ledger: &Ledger,
    version: &crate::ledger::SiteVersion,
    year: i32,
) -> anyhow::Result<(AnnualReport, crate::emissions::periods::Year)> {
    let site = crate::site::parse(&version.source)
        .map_err(|e| anyhow!("stored site file no longer parses: {}", e[0]))?;
    let years = crate::assemble::facility_years(ledger, &site, year, None)?;
    let mut model = report::model::annual(&site, version.version, year, &years);
    model.programs = super::allowances::program_reports(ledger, &site, year)?;
    let sum = years
        .iter()
        .fold(crate::emissions::periods::Year::default(), |acc, u| {
            acc + u.year
        });
    Ok((model, sum))
}

/// Every facility of the ledger and the fleet's totals.
pub fn fleet_report(ledger: &Ledger, year: i32) -> anyhow::Result<report::model::FleetReport> {
    let mut facilities = Vec::new();
    let mut fleet = crate::emissions::periods::Year::default();
    for version in ledger.latest_sites()? {
        let (mut model, sum) = facility_report(ledger, &version, year)?;
        model.certification = certification_view(ledger, year)?;
        facilities.push(model);
        fleet = fleet + sum;
    }
    Ok(report::model::FleetReport {
        format_version: report::FORMAT_VERSION,
        year,
        facilities,
        fleet: report::model::totals(&fleet),
        as_of: None,
        caution: report::CAUTION,
    })
}

/// The year's certification, for the report to show.
pub fn certification_view(ledger: &Ledger, year: i32) -> anyhow::Result<Option<CertificationView>> {
    Ok(ledger.certification(year)?.map(|c| CertificationView {
        amended: !c.amendments.is_empty(),
        amendments: c
            .amendments
            .into_iter()
            .map(|a| AmendmentView {
                at: a.at,
                by: a.by,
                reason: a.reason,
            })
            .collect(),
        by: c.by,
        at: c.at,
        statement: c.statement,
        report_sha256: c.report_sha256,
    }))
}
