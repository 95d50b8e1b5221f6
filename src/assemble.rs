//! A facility's year from the ledger: fuel records and hourly monitor data
//! through the pure engine, per unit. Every report, reconciliation and
//! position reads its emissions through here, so they cannot disagree.

use crate::compute::hourly::{
    site_specific_f_factors, stream_config_with, HourlyResult, HourlyYear,
};
use crate::compute::{facility_year, UnitYear};
use crate::ledger::{HourlyReads, LedgerError, Reads};
use crate::records::{hour_index, FuelUse, Stored};
use crate::site::{Rounding, Site, Unit};
use chrono::NaiveDate;
use thiserror::Error;

#[derive(Debug, Error)]
pub enum AssembleError {
    #[error(transparent)]
    Ledger(#[from] LedgerError),
    #[error("cannot compute {year} for facility {facility}:\n{problems}")]
    Compute {
        year: i32,
        facility: String,
        problems: String,
    },
}

/// Every unit's year. With `through`, only fuel records ending by that day
/// and hours before its end count (emissions to date).
pub fn facility_years<'a>(
    r: &(impl Reads + ?Sized),
    site: &'a Site,
    year: i32,
    through: Option<NaiveDate>,
) -> Result<Vec<UnitYear<'a>>, AssembleError> {
    let fail = |problems: String| AssembleError::Compute {
        year,
        facility: site.facility.id.clone(),
        problems,
    };
    let samples = r.samples()?;
    let uses: Vec<Stored<FuelUse>> = r
        .fuel_uses()?
        .into_iter()
        .filter(|u| through.is_none_or(|t| u.value.end <= t))
        .collect();
    let mut years = facility_year(site, &samples, &uses, year).map_err(|e| fail(e.join("\n")))?;
    let hour_limit = through.map(|t| {
        hour_index(
            t.succ_opt()
                .unwrap_or(t)
                .and_hms_opt(0, 0, 0)
                .expect("midnight"),
        )
    });
    let units: Vec<&Unit> = years.iter().map(|y| y.unit).collect();
    let results = hourly_years(r, &units, site.facility.rounding, year, hour_limit)?;
    for (unit_year, result) in years.iter_mut().zip(results) {
        if let Some(result) = result.map_err(fail)? {
            unit_year.add_hourly(result);
        }
    }
    Ok(years)
}

/// Most threads a report uses for CEMS units; each reads with its own connection.
const REPORT_THREADS_MAX: usize = 4;

/// Every unit's hourly year, in the order given. Units are independent, so
/// where the ledger file can be opened again they run side by side, one
/// connection per thread; inside a write transaction they run in turn.
fn hourly_years(
    r: &(impl Reads + ?Sized),
    units: &[&Unit],
    rounding: Rounding,
    year: i32,
    hour_limit: Option<i64>,
) -> Result<Vec<Result<Option<HourlyResult>, String>>, LedgerError> {
    let hourly: Vec<usize> = (0..units.len())
        .filter(|&i| {
            units[i]
                .methods
                .iter()
                .any(|m| units[i].from_hourly(&m.method))
        })
        .collect();
    let threads = std::thread::available_parallelism()
        .map_or(1, |n| n.get())
        .min(REPORT_THREADS_MAX)
        .min(hourly.len());
    let mut out: Vec<Result<Option<HourlyResult>, String>> =
        (0..units.len()).map(|_| Ok(None)).collect();
    let (Some(path), true) = (r.file(), threads > 1) else {
        for &i in &hourly {
            out[i] = hourly_year(r, units[i], rounding, year, hour_limit);
        }
        return Ok(out);
    };
    let as_of = r.as_of();
    let next = std::sync::atomic::AtomicUsize::new(0);
    let done = std::sync::Mutex::new(Vec::new());
    std::thread::scope(|scope| -> Result<(), LedgerError> {
        let workers: Vec<_> = (0..threads)
            .map(|_| {
                scope.spawn(|| -> Result<(), LedgerError> {
                    let ledger = crate::ledger::Ledger::open_reader(path, as_of)?;
                    loop {
                        let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                        let Some(&i) = hourly.get(k) else {
                            return Ok(());
                        };
                        let result = hourly_year(&ledger, units[i], rounding, year, hour_limit);
                        done.lock()
                            .expect("no worker panics while holding the lock")
                            .push((i, result));
                    }
                })
            })
            .collect();
        for w in workers {
            w.join().expect("a report worker panicked")?;
        }
        Ok(())
    })?;
    for (i, result) in done.into_inner().expect("workers finished") {
        out[i] = result;
    }
    Ok(out)
}

/// Stream a CEMS unit's stored hours through the hourly engine for one year.
fn hourly_year(
    r: &(impl Reads + ?Sized),
    unit: &Unit,
    rounding: Rounding,
    year: i32,
    hour_limit: Option<i64>,
) -> Result<Option<HourlyResult>, String> {
    if !unit.methods.iter().any(|m| unit.from_hourly(&m.method)) {
        return Ok(None);
    }
    let Some(present) = r.hourly_present(&unit.id).map_err(|e| e.to_string())? else {
        return Ok(None);
    };
    let config = stream_config_with(unit, rounding, &present, unit_f_factors(r, unit)?)?;
    let mut acc = HourlyYear::new(unit, config, year)?;
    let end = hour_limit.map_or(acc.end_hour(), |l| l.min(acc.end_hour()));
    let mut failed: Option<String> = None;
    r.each_hour(&unit.id, i64::MIN, end, |row| {
        if failed.is_none() {
            if let Err(e) = acc.push(row) {
                failed = Some(e);
            }
        }
    })
    .map_err(|e| e.to_string())?;
    // A missing-data period open at the year's end closes at a later
    // stored hour: stream on until it does (40 CFR 75.31(b), 75.33).
    // Emissions to date (`hour_limit`) stop at the limit instead.
    if failed.is_none() && hour_limit.is_none() && acc.waits_past_year_end() {
        r.each_hour_while(&unit.id, acc.end_hour(), |row| {
            if let Err(e) = acc.push(row) {
                failed = Some(e);
                return false;
            }
            acc.waits_past_year_end()
        })
        .map_err(|e| e.to_string())?;
    }
    if let Some(e) = failed {
        return Err(e);
    }
    acc.finish().map(Some)
}

/// One unit-hour as the hourly engine computed it, with every hour before it
/// streamed so that substitution sees the same history as the report.
pub fn hour_out(
    r: &(impl Reads + ?Sized),
    unit: &Unit,
    rounding: Rounding,
    hour: i64,
) -> Result<Option<crate::emissions::substitute::HourOut>, String> {
    Ok(hours_out(r, unit, rounding, hour, hour + 1)?.and_then(|mut outs| outs.pop()))
}

/// The unit-hours `from..to` as the hourly engine computed them, in hour
/// order, streamed from the unit's first stored hour as a report streams
/// them; `None` for a unit without stored hours.
pub fn hours_out(
    r: &(impl Reads + ?Sized),
    unit: &Unit,
    rounding: Rounding,
    from: i64,
    to: i64,
) -> Result<Option<Vec<crate::emissions::substitute::HourOut>>, String> {
    let Some(present) = r.hourly_present(&unit.id).map_err(|e| e.to_string())? else {
        return Ok(None);
    };
    let config = stream_config_with(unit, rounding, &present, unit_f_factors(r, unit)?)?;
    let mut stream = crate::emissions::substitute::UnitStream::new(config)
        .map_err(|e| format!("unit {}: {e}", unit.id))?;
    let mut found = Vec::new();
    let mut done = false;
    let mut failed: Option<String> = None;
    // Hours after those asked for are streamed too: a gap's substitute
    // needs the hour after the gap.
    r.each_hour(&unit.id, i64::MIN, i64::MAX, |row| {
        if done || failed.is_some() {
            return;
        }
        if let Err(e) = stream.push(row.hour, crate::compute::hourly::hour_input(row)) {
            failed = Some(format!("unit {}: {e}", unit.id));
            return;
        }
        while let Some(out) = stream.next_ready() {
            done |= out.clock_hour >= to - 1;
            if (from..to).contains(&out.clock_hour) {
                found.push(*out);
            }
        }
    })
    .map_err(|e| e.to_string())?;
    if let Some(e) = failed {
        return Err(e);
    }
    if !done {
        stream
            .finish()
            .map_err(|e| format!("unit {}: {e}", unit.id))?;
        while let Some(out) = stream.next_ready() {
            if (from..to).contains(&out.clock_hour) {
                found.push(*out);
            }
        }
    }
    Ok(Some(found))
}

/// A unit's F-factors: from its `f_factors_sample`'s ultimate analysis
/// (40 CFR 75 App. F Eq. F-7a/F-7b) where the site file names one, else
/// App. F Table 1 by its fuel.
pub fn unit_f_factors(
    r: &(impl Reads + ?Sized),
    unit: &Unit,
) -> Result<crate::emissions::constants::FFactors, String> {
    let Some(id) = &unit.f_factors_sample else {
        return Ok(crate::emissions::constants::f_factors(unit.fuel));
    };
    let samples = r.samples().map_err(|e| e.to_string())?;
    let sample = samples
        .iter()
        .find(|s| &s.value.sample == id)
        .ok_or_else(|| {
            format!(
                "unit {}: f_factors_sample {id} is not in the ledger",
                unit.id
            )
        })?;
    site_specific_f_factors(unit, &sample.value)
}
