use crate::compute::facility_year;
use crate::compute::hourly::{stream_config, HourlyResult, HourlyYear};
use crate::ledger::{Ledger, Reads};
use crate::report::{self, AnnualReport, Format};
use anyhow::{anyhow, bail};
use clap::{Args, Subcommand};
use std::path::{Path, PathBuf};

#[derive(Debug, Subcommand)]
pub enum ReportCommand {
    /// A facility's year: heat input and SO2, NOx and CO2 tons per unit, by quarter and ozone season.
    #[command(
        after_help = "Examples:\n  flue report annual --year 2025\n  flue report annual --year 2025 --format json --out mc1-2025.json\n  flue report annual --year 2025 --format csv > mc1-2025.csv"
    )]
    Annual(AnnualArgs),
}

#[derive(Debug, Args)]
pub struct AnnualArgs {
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
}

pub fn run(cmd: &ReportCommand, ledger_path: &Path) -> super::Outcome {
    let ReportCommand::Annual(args) = cmd;
    let ledger = Ledger::open(ledger_path)?;
    let model = annual_report(&ledger, args.facility.as_deref(), args.year)?;
    super::emit(args.out.as_deref(), args.force, |w| {
        report::render(&model, args.format, w)
    })
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
    let site = crate::site::parse(&version.source)
        .map_err(|e| anyhow!("stored site file no longer parses: {}", e[0]))?;
    let samples = ledger.samples()?;
    let uses = ledger.fuel_uses()?;
    let mut years = facility_year(&site, &samples, &uses, year).map_err(|errors| {
        anyhow!(
            "cannot compute {year} for facility {}:\n{}",
            site.facility.id,
            errors.join("\n")
        )
    })?;
    for unit_year in years.iter_mut() {
        if let Some(result) = hourly_year(ledger, unit_year.unit, site.facility.rounding, year)? {
            unit_year.add_hourly(result);
        }
    }
    Ok(report::model::annual(&site, version.version, year, &years))
}

/// Stream a CEMS unit's stored hours through the hourly engine for one year.
pub fn hourly_year(
    ledger: &Ledger,
    unit: &crate::site::Unit,
    rounding: crate::site::Rounding,
    year: i32,
) -> anyhow::Result<Option<HourlyResult>> {
    if !unit.methods.iter().any(|m| unit.from_hourly(&m.method)) {
        return Ok(None);
    }
    let Some(present) = ledger.hourly_present(&unit.id)? else {
        return Ok(None);
    };
    let config = stream_config(unit, rounding, &present).map_err(|e| anyhow!(e))?;
    let mut acc = HourlyYear::new(unit, config, year).map_err(|e| anyhow!(e))?;
    let mut failed: Option<String> = None;
    ledger.each_hour(&unit.id, i64::MIN, acc.end_hour(), |row| {
        if failed.is_none() {
            if let Err(e) = acc.push(row) {
                failed = Some(e);
            }
        }
    })?;
    // A missing-data period open at the year's end closes at a later
    // stored hour: stream on until it does (40 CFR 75.31(b), 75.33).
    if failed.is_none() && acc.waits_past_year_end() {
        ledger.each_hour_while(&unit.id, acc.end_hour(), |row| {
            if let Err(e) = acc.push(row) {
                failed = Some(e);
                return false;
            }
            acc.waits_past_year_end()
        })?;
    }
    if let Some(e) = failed {
        bail!(e);
    }
    Ok(Some(acc.finish().map_err(|e| anyhow!(e))?))
}
