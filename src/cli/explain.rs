use crate::assemble::{facility_years, hour_out};
use crate::compute::record_amounts;
use crate::emissions::method::{Method, Quantity};
use crate::ledger::{HourlyReads, Ledger, Reads};
use crate::records::hour_index;
use crate::report::explain;
use anyhow::{anyhow, bail};
use chrono::{Datelike, NaiveDateTime};
use clap::{Args, ValueEnum};
use rust_decimal::Decimal;
use serde::Serialize;
use std::fmt::Write as _;
use std::path::Path;

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ExplainFormat {
    Text,
    Json,
}

#[derive(Debug, Args)]
#[command(group(clap::ArgGroup::new("when").required(true).args(["year", "hour"])))]
pub struct ExplainArgs {
    /// heat_input, so2, nox or co2
    pub quantity: String,
    #[arg(long)]
    pub unit: String,
    /// A year: broken down by quarter, month and input record.
    #[arg(long, value_parser = clap::value_parser!(i32).range(1900..=9999))]
    pub year: Option<i32>,
    /// One hour of a CEMS unit, YYYY-MM-DDTHH:00 local standard time.
    #[arg(long)]
    pub hour: Option<String>,
    #[arg(long, value_enum, default_value = "text")]
    pub format: ExplainFormat,
}

pub fn run(args: &ExplainArgs, ledger_path: &Path) -> super::Outcome {
    let quantity: Quantity = args
        .quantity
        .parse()
        .map_err(|e: String| anyhow!("quantity {:?}: {e}", args.quantity))?;
    let ledger = Ledger::open(ledger_path)?;
    let site = ledger
        .sites()?
        .into_iter()
        .find(|s| s.unit(&args.unit).is_some())
        .ok_or_else(|| anyhow!("no unit {} in any site file", args.unit))?;
    let unit = site.unit(&args.unit).expect("found above");
    if !unit.tracks(quantity) {
        bail!(
            "unit {} does not track {quantity}: its site file has no method for it",
            unit.id
        );
    }
    let text = match (args.year, &args.hour) {
        (_, Some(h)) => {
            let t = NaiveDateTime::parse_from_str(h, "%Y-%m-%dT%H:%M")
                .map_err(|_| anyhow!("--hour {h:?}: expected YYYY-MM-DDTHH:00"))?;
            let hour = hour_index(t);
            let Some((row, source)) = ledger.hour_with_source(&unit.id, hour)? else {
                bail!("unit {} has no stored hour {h}", unit.id);
            };
            let out = hour_out(&ledger, unit, site.facility.rounding, hour)
                .map_err(|e| anyhow!(e))?
                .ok_or_else(|| anyhow!("unit {} hour {h} was not computed", unit.id))?;
            let day = t.date();
            let default_rate = match unit
                .method_for(quantity, unit.fuel, day, day)
                .map(|m| &m.method)
            {
                Some(Method::DefaultRate { rate_lb_per_mmbtu }) if unit.heat_input_by_cems() => {
                    Some(*rate_lb_per_mmbtu)
                }
                Some(Method::Cems { .. }) => None,
                _ => bail!(
                    "unit {} computes {quantity} from fuel records, not hourly data; use --year",
                    unit.id
                ),
            };
            let e = explain::hour(
                &unit.id,
                quantity,
                &out,
                &row,
                &source,
                crate::assemble::unit_f_factors(&ledger, unit).map_err(|e| anyhow!(e))?,
                &match &unit.f_factors_sample {
                    Some(id) => {
                        format!("40 CFR 75 App. F Eq. F-7a/F-7b, ultimate analysis of sample {id}")
                    }
                    None => format!("40 CFR 75 App. F Table 1, {}", unit.fuel),
                },
                default_rate,
                &ledger.hourly_present(&unit.id)?.unwrap_or_default(),
            );
            match args.format {
                ExplainFormat::Json => serde_json::to_string_pretty(&e)? + "\n",
                ExplainFormat::Text => explain::hour_text(&e),
            }
        }
        (Some(year), None) => year_explanation(&ledger, &site, unit, quantity, year, args.format)?,
        (None, None) => unreachable!("clap requires --year or --hour"),
    };
    super::emit(None, false, |w| w.write_all(text.as_bytes()))
}

#[derive(Serialize)]
struct RecordLine {
    file: String,
    line: usize,
    sha256: String,
    start: String,
    end: String,
    fuel: &'static str,
    quantity: String,
    sample: String,
    method: &'static str,
    equation: &'static str,
    value: Decimal,
}

#[derive(Serialize)]
struct MonthLine {
    month: u32,
    value: Option<Decimal>,
    fuel_records: Vec<RecordLine>,
}

#[derive(Serialize)]
struct QuarterLine {
    quarter: u32,
    value: Option<Decimal>,
    months: Vec<MonthLine>,
}

#[derive(Serialize)]
struct YearExplanation {
    format_version: u32,
    unit: String,
    year: i32,
    quantity: &'static str,
    uom: &'static str,
    value: Option<Decimal>,
    methods: Vec<String>,
    hourly_hours: Option<u64>,
    quarters: Vec<QuarterLine>,
    caution: &'static str,
}

/// Heat input stays in MMBtu; masses are shown in tons.
fn shown(q: Quantity, v: Option<Decimal>) -> Option<Decimal> {
    v.map(|v| {
        if q == Quantity::HeatInput {
            v
        } else {
            v / crate::units::LB_PER_TON
        }
        .normalize()
    })
}

fn year_explanation(
    ledger: &Ledger,
    site: &crate::site::Site,
    unit: &crate::site::Unit,
    q: Quantity,
    year: i32,
    format: ExplainFormat,
) -> anyhow::Result<String> {
    let years = facility_years(ledger, site, year, None)?;
    let uy = years
        .iter()
        .find(|y| y.unit.id == unit.id)
        .expect("every unit has a year");
    let samples = ledger.samples()?;
    let uses = ledger.fuel_uses()?;
    let mut months: Vec<MonthLine> = (1..=12)
        .map(|m| MonthLine {
            month: m,
            value: shown(q, uy.year.month(m).get(q)),
            fuel_records: Vec::new(),
        })
        .collect();
    for u in uses
        .iter()
        .filter(|u| u.value.unit == unit.id && u.value.start.year() == year)
    {
        let Some(sample) = samples.iter().find(|s| s.value.sample == u.value.sample) else {
            continue;
        };
        let amounts = record_amounts(unit, &u.value, &sample.value)
            .map_err(|e| anyhow!("{}: {e}", u.source.place()))?;
        let Some(value) = amounts.get(q) else {
            continue;
        };
        let method = unit
            .method_for(q, u.value.fuel, u.value.start, u.value.end)
            .expect("a computed record has a method");
        months[u.value.start.month() as usize - 1]
            .fuel_records
            .push(RecordLine {
                file: u.source.file.clone(),
                line: u.source.line,
                sha256: u.source.sha256.clone(),
                start: u.value.start.to_string(),
                end: u.value.end.to_string(),
                fuel: u.value.fuel.as_str(),
                quantity: u.value.amount.to_string(),
                sample: u.value.sample.clone(),
                method: method.method.name(),
                equation: method.method.equation(q),
                value: shown(q, Some(value)).expect("some"),
            });
    }
    let mut quarters = Vec::new();
    let mut it = months.into_iter();
    for quarter in 1..=4 {
        quarters.push(QuarterLine {
            quarter,
            value: shown(q, uy.year.quarter(quarter).get(q)),
            months: it.by_ref().take(3).collect(),
        });
    }
    let e = YearExplanation {
        format_version: crate::report::FORMAT_VERSION,
        unit: unit.id.clone(),
        year,
        quantity: q.as_str(),
        uom: if q == Quantity::HeatInput {
            "MMBtu"
        } else {
            "tons"
        },
        value: shown(q, uy.year.annual().get(q)),
        methods: unit
            .methods
            .iter()
            .filter(|m| m.quantity == q)
            .map(|m| {
                format!(
                    "{} (site file line {}): {}",
                    m.method.name(),
                    m.line,
                    m.method.equation(q)
                )
            })
            .collect(),
        hourly_hours: uy.hourly.as_ref().map(|h| h.hours),
        quarters,
        caution: crate::report::CAUTION,
    };
    if format == ExplainFormat::Json {
        return Ok(serde_json::to_string_pretty(&e)? + "\n");
    }
    let v = |d: Option<Decimal>| d.map(|d| d.to_string()).unwrap_or_else(|| "absent".into());
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{} of unit {} in {}: {} {}",
        e.quantity,
        e.unit,
        e.year,
        v(e.value),
        e.uom
    );
    for m in &e.methods {
        let _ = writeln!(out, "  method {m}");
    }
    if let Some(h) = e.hourly_hours {
        let _ = writeln!(out, "  hourly monitor data: {h} hours of the year; explain one with --hour YYYY-MM-DDTHH:00");
    }
    for qt in &e.quarters {
        let _ = writeln!(out, "├─ Q{}: {}", qt.quarter, v(qt.value));
        for m in &qt.months {
            let _ = writeln!(out, "│  ├─ month {:02}: {}", m.month, v(m.value));
            for r in &m.fuel_records {
                let _ = writeln!(
                    out,
                    "│  │  └─ {}:{} {} to {} {} {} sample {}: {} by {} ({})",
                    r.file,
                    r.line,
                    r.start,
                    r.end,
                    r.fuel,
                    r.quantity,
                    r.sample,
                    r.value,
                    r.method,
                    r.equation
                );
            }
        }
    }
    let _ = writeln!(out, "Caution: {}", e.caution);
    Ok(out)
}
