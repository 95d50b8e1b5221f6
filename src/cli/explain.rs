use crate::assemble::{facility_years, hour_out};
use crate::compute::record_amounts;
use crate::emissions::method::{Method, Quantity};
use crate::ledger::{HistoryReads, HourlyReads, Ledger, Reads};
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
#[command(group(clap::ArgGroup::new("when").required(true).args(["year", "month", "hour"])))]
pub struct ExplainArgs {
    /// heat_input, so2, nox or co2
    pub quantity: String,
    #[arg(long)]
    pub unit: String,
    /// A year: broken down by quarter, month and input record.
    #[arg(long, value_parser = clap::value_parser!(i32).range(1900..=9999))]
    pub year: Option<i32>,
    /// A month, YYYY-MM: broken down by fuel record (with its analysis) or,
    /// for a CEMS unit, by hour.
    #[arg(long, value_name = "YYYY-MM")]
    pub month: Option<String>,
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
    let text = match (args.year, &args.month, &args.hour) {
        (_, _, Some(h)) => {
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
            let mut e = explain::hour(
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
            let seq = hour_entry(&ledger, &unit.id, hour)?;
            for s in e.inputs.iter_mut().filter_map(|i| i.source.as_mut()) {
                s.journal_seq = seq;
            }
            match args.format {
                ExplainFormat::Json => serde_json::to_string_pretty(&e)? + "\n",
                ExplainFormat::Text => explain::hour_text(&e),
            }
        }
        (_, Some(m), None) => {
            let first = chrono::NaiveDate::parse_from_str(&format!("{m}-01"), "%Y-%m-%d")
                .map_err(|_| anyhow!("--month {m:?}: expected YYYY-MM"))?;
            month_explanation(&ledger, &site, unit, quantity, first, args.format)?
        }
        (Some(year), None, None) => {
            year_explanation(&ledger, &site, unit, quantity, year, args.format)?
        }
        (None, None, None) => unreachable!("clap requires --year, --month or --hour"),
    };
    super::emit(None, false, |w| w.write_all(text.as_bytes()))
}

/// The analysis a fuel record names, and where it came from.
#[derive(Serialize)]
struct AnalysisLine {
    sample: String,
    sampled_on: String,
    file: String,
    line: usize,
    sha256: String,
    journal_seq: Option<i64>,
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
    /// The value in `amount_uom`, as the engine sums it.
    amount: Decimal,
    /// The journal entry that added the record.
    journal_seq: Option<i64>,
    analysis: AnalysisLine,
    constants: Vec<explain::Constant>,
}

#[derive(Serialize)]
struct MonthLine {
    month: u32,
    value: Option<Decimal>,
    amount: Option<Decimal>,
    fuel_records: Vec<RecordLine>,
}

#[derive(Serialize)]
struct QuarterLine {
    quarter: u32,
    value: Option<Decimal>,
    amount: Option<Decimal>,
    months: Vec<MonthLine>,
}

/// One hour of a CEMS unit's month.
#[derive(Serialize)]
struct HourLine {
    hour: String,
    value: Option<Decimal>,
    amount: Option<Decimal>,
    equation: String,
    substituted: bool,
    source: Option<explain::RowSource>,
}

/// `flue explain QUANTITY --unit U --month YYYY-MM`.
#[derive(Serialize)]
struct MonthExplanation {
    format_version: u32,
    unit: String,
    year: i32,
    month: u32,
    quantity: &'static str,
    uom: &'static str,
    amount_uom: &'static str,
    value: Option<Decimal>,
    amount: Option<Decimal>,
    methods: Vec<String>,
    fuel_records: Vec<RecordLine>,
    hours: Vec<HourLine>,
    caution: &'static str,
}

#[derive(Serialize)]
struct YearExplanation {
    format_version: u32,
    unit: String,
    year: i32,
    quantity: &'static str,
    uom: &'static str,
    /// The unit of every `amount`: MMBtu, or lb for masses.
    amount_uom: &'static str,
    value: Option<Decimal>,
    /// The value in `amount_uom`, as the engine sums it: each level's
    /// amount is the sum of the amounts below it.
    amount: Option<Decimal>,
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

fn uom(q: Quantity) -> &'static str {
    if q == Quantity::HeatInput {
        "MMBtu"
    } else {
        "tons"
    }
}

fn amount_uom(q: Quantity) -> &'static str {
    if q == Quantity::HeatInput {
        "MMBtu"
    } else {
        "lb"
    }
}

fn methods(unit: &crate::site::Unit, q: Quantity) -> Vec<String> {
    unit.methods
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
        .collect()
}

/// The journal entry that added an import batch's rows: every input row is
/// written in the same transaction as its batch, so that entry added it.
fn batch_entry(ledger: &Ledger, batch_id: i64) -> anyhow::Result<Option<i64>> {
    Ok(ledger.entry_adding("import_batches", batch_id)?)
}

/// The journal entry of the stored row in force for a unit-hour.
fn hour_entry(ledger: &Ledger, unit: &str, hour: i64) -> anyhow::Result<Option<i64>> {
    let versions = ledger.hour_versions(unit, hour)?;
    match versions.iter().rev().find(|v| v.provenance.in_force) {
        Some(v) => batch_entry(ledger, v.provenance.batch_id),
        None => Ok(None),
    }
}

/// The fuel records of `unit` whose start falls on a day `keep` accepts,
/// in the order the engine sums them (src/compute/mod.rs `facility_year`),
/// each with its value, analysis, constants and journal entry.
fn record_lines(
    ledger: &Ledger,
    unit: &crate::site::Unit,
    q: Quantity,
    keep: impl Fn(chrono::NaiveDate) -> bool,
) -> anyhow::Result<Vec<(u32, RecordLine)>> {
    let samples = ledger.samples()?;
    let mut out = Vec::new();
    for u in ledger
        .fuel_uses()?
        .iter()
        .filter(|u| u.value.unit == unit.id && keep(u.value.start))
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
        let gas = u.value.amount.uom.dimension() == crate::emissions::fuel::Dimension::GasVolume;
        out.push((
            u.value.start.month(),
            RecordLine {
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
                amount: value.normalize(),
                journal_seq: batch_entry(ledger, u.source.batch_id)?,
                analysis: AnalysisLine {
                    sample: sample.value.sample.clone(),
                    sampled_on: sample.value.sampled_on.to_string(),
                    file: sample.source.file.clone(),
                    line: sample.source.line,
                    sha256: sample.source.sha256.clone(),
                    journal_seq: batch_entry(ledger, sample.source.batch_id)?,
                },
                constants: explain::record_constants(&method.method, u.value.fuel, gas),
            },
        ));
    }
    Ok(out)
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
    let mut months: Vec<MonthLine> = (1..=12)
        .map(|m| MonthLine {
            month: m,
            value: shown(q, uy.year.month(m).get(q)),
            amount: uy.year.month(m).get(q).map(|d| d.normalize()),
            fuel_records: Vec::new(),
        })
        .collect();
    for (month, line) in record_lines(ledger, unit, q, |d| d.year() == year)? {
        months[month as usize - 1].fuel_records.push(line);
    }
    let mut quarters = Vec::new();
    let mut it = months.into_iter();
    for quarter in 1..=4 {
        quarters.push(QuarterLine {
            quarter,
            value: shown(q, uy.year.quarter(quarter).get(q)),
            amount: uy.year.quarter(quarter).get(q).map(|d| d.normalize()),
            months: it.by_ref().take(3).collect(),
        });
    }
    let e = YearExplanation {
        format_version: crate::report::FORMAT_VERSION,
        unit: unit.id.clone(),
        year,
        quantity: q.as_str(),
        uom: uom(q),
        amount_uom: amount_uom(q),
        value: shown(q, uy.year.annual().get(q)),
        amount: uy.year.annual().get(q).map(|d| d.normalize()),
        methods: methods(unit, q),
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
        let _ = writeln!(out, "  hourly monitor data: {h} hours of the year; explain a month's hours with --month YYYY-MM, one with --hour YYYY-MM-DDTHH:00");
    }
    for qt in &e.quarters {
        let _ = writeln!(out, "├─ Q{}: {}", qt.quarter, v(qt.value));
        for m in &qt.months {
            let _ = writeln!(out, "│  ├─ month {:02}: {}", m.month, v(m.value));
            for r in &m.fuel_records {
                let _ = writeln!(out, "│  │  └─ {}", record_text(r));
            }
        }
    }
    let _ = writeln!(out, "Caution: {}", e.caution);
    Ok(out)
}

/// One fuel record as a line of the text tree.
fn record_text(r: &RecordLine) -> String {
    let mut s = format!(
        "{}:{} {} to {} {} {} sample {}: {} by {} ({})",
        r.file, r.line, r.start, r.end, r.fuel, r.quantity, r.sample, r.value, r.method, r.equation
    );
    if let Some(n) = r.journal_seq {
        let _ = write!(s, ", journal entry {n}");
    }
    let a = &r.analysis;
    let _ = write!(
        s,
        "; analysis {} of {} from {}:{} (sha256 {}",
        a.sample,
        a.sampled_on,
        a.file,
        a.line,
        &a.sha256[..12.min(a.sha256.len())]
    );
    if let Some(n) = a.journal_seq {
        let _ = write!(s, ", journal entry {n}");
    }
    s.push(')');
    for c in &r.constants {
        let _ = write!(s, "; {} = {} ({})", c.name, c.value, c.source);
    }
    s
}

/// An hour's amount as the year sums it (src/compute/hourly.rs
/// `HourlyYear::add`): the stream's value for a `cems` quantity, the
/// default rate × the hour's CEMS heat input for a `default-rate` one
/// (40 CFR 75 App. F Eq. F-23), and nothing where the quantity comes from
/// fuel records that day.
fn hour_amount(
    unit: &crate::site::Unit,
    q: Quantity,
    out: &crate::emissions::substitute::HourOut,
) -> Option<Decimal> {
    let day = hour_day(out.clock_hour);
    let heat_input = out.result.heat_input().map(|h| h.0).unwrap_or_default();
    match unit.method_for(q, unit.fuel, day, day).map(|m| &m.method) {
        Some(Method::Cems { .. }) => Some(match q {
            Quantity::HeatInput => heat_input,
            Quantity::So2 => out.result.so2().map(|m| m.0).unwrap_or_default(),
            Quantity::Nox => out.result.nox().map(|m| m.0).unwrap_or_default(),
            Quantity::Co2 => out
                .result
                .co2()
                .map(|t| t.0 * crate::units::LB_PER_TON)
                .unwrap_or_default(),
        }),
        Some(Method::DefaultRate { rate_lb_per_mmbtu }) if unit.heat_input_by_cems() => {
            Some(rate_lb_per_mmbtu * heat_input)
        }
        _ => None,
    }
}

fn month_explanation(
    ledger: &Ledger,
    site: &crate::site::Site,
    unit: &crate::site::Unit,
    q: Quantity,
    first: chrono::NaiveDate,
    format: ExplainFormat,
) -> anyhow::Result<String> {
    let (year, month) = (first.year(), first.month());
    let years = facility_years(ledger, site, year, None)?;
    let uy = years
        .iter()
        .find(|y| y.unit.id == unit.id)
        .expect("every unit has a year");
    let fuel_records: Vec<RecordLine> =
        record_lines(ledger, unit, q, |d| d.year() == year && d.month() == month)?
            .into_iter()
            .map(|(_, r)| r)
            .collect();
    let mut hours = Vec::new();
    if uy.hourly.is_some() {
        let next = first
            .checked_add_months(chrono::Months::new(1))
            .expect("a month after");
        let from = hour_index(first.and_hms_opt(0, 0, 0).expect("midnight"));
        let to = hour_index(next.and_hms_opt(0, 0, 0).expect("midnight"));
        let outs = crate::assemble::hours_out(ledger, unit, site.facility.rounding, from, to)
            .map_err(|e| anyhow!(e))?
            .unwrap_or_default();
        for out in &outs {
            let Some(amount) = hour_amount(unit, q, out) else {
                continue;
            };
            let versions = ledger.hour_versions(&unit.id, out.clock_hour)?;
            let source = match versions.iter().rev().find(|v| v.provenance.in_force) {
                Some(v) => Some(explain::RowSource {
                    file: v.provenance.file.clone(),
                    line: usize::try_from(v.provenance.line).unwrap_or_default(),
                    sha256: v.provenance.sha256.clone(),
                    journal_seq: batch_entry(ledger, v.provenance.batch_id)?,
                }),
                None => None,
            };
            hours.push(HourLine {
                hour: crate::records::hour_label(out.clock_hour),
                value: shown(q, Some(amount)),
                amount: Some(amount.normalize()),
                equation: hour_equation(unit, q, out.clock_hour),
                substituted: crate::emissions::substitute::Parameter::ALL
                    .iter()
                    .any(|&p| {
                        matches!(
                            out.fill(p),
                            crate::emissions::substitute::Fill::Substituted(_)
                        )
                    }),
                source,
            });
        }
    }
    let e = MonthExplanation {
        format_version: crate::report::FORMAT_VERSION,
        unit: unit.id.clone(),
        year,
        month,
        quantity: q.as_str(),
        uom: uom(q),
        amount_uom: amount_uom(q),
        value: shown(q, uy.year.month(month).get(q)),
        amount: uy.year.month(month).get(q).map(|d| d.normalize()),
        methods: methods(unit, q),
        fuel_records,
        hours,
        caution: crate::report::CAUTION,
    };
    if format == ExplainFormat::Json {
        return Ok(serde_json::to_string_pretty(&e)? + "\n");
    }
    let v = |d: Option<Decimal>| d.map(|d| d.to_string()).unwrap_or_else(|| "absent".into());
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{} of unit {} in {:04}-{:02}: {} {}",
        e.quantity,
        e.unit,
        e.year,
        e.month,
        v(e.value),
        e.uom
    );
    for m in &e.methods {
        let _ = writeln!(out, "  method {m}");
    }
    for r in &e.fuel_records {
        let _ = writeln!(out, "├─ {}", record_text(r));
    }
    for h in &e.hours {
        let from = match &h.source {
            Some(s) => s.place(),
            None => "no stored row".to_string(),
        };
        let _ = writeln!(
            out,
            "├─ {}: {} by {}{}  from {}",
            h.hour,
            v(h.value),
            h.equation,
            if h.substituted { ", substituted" } else { "" },
            from
        );
    }
    if !e.hours.is_empty() {
        let _ = writeln!(
            out,
            "└─ explain one hour's inputs and steps with --hour YYYY-MM-DDTHH:00"
        );
    }
    let _ = writeln!(out, "Caution: {}", e.caution);
    Ok(out)
}

/// The local standard day an hour index falls on.
fn hour_day(hour: i64) -> chrono::NaiveDate {
    chrono::NaiveDate::from_ymd_opt(1970, 1, 1).expect("valid date")
        + chrono::Duration::days(hour.div_euclid(24))
}

/// The equation of an hour's amount, by the method in force that day.
fn hour_equation(unit: &crate::site::Unit, q: Quantity, hour: i64) -> String {
    let day = hour_day(hour);
    match unit.method_for(q, unit.fuel, day, day).map(|m| &m.method) {
        Some(Method::DefaultRate { .. }) => {
            "40 CFR 75 App. F Eq. F-23 (default rate × heat input)".to_string()
        }
        Some(m) => m.equation(q).to_string(),
        None => String::new(),
    }
}
