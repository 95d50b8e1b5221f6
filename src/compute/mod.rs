//! Joins stored rows to the engine: each fuel record with its unit's methods
//! and its sample's analysis. Pure: it reads nothing but its arguments.

pub mod hourly;

use crate::emissions::engine::{fuel_record_amounts, FuelRecord};
use crate::emissions::method::Quantity;
use crate::emissions::periods::{Amounts, Year};
use crate::records::{FuelUse, Sample, Stored};
use crate::site::{Site, Unit};
use chrono::Datelike;
use rust_decimal::Decimal;
use std::collections::HashMap;

/// The amounts of one fuel record, or why they cannot be computed.
pub fn record_amounts(unit: &Unit, fuel_use: &FuelUse, sample: &Sample) -> Result<Amounts, String> {
    if sample.fuel != fuel_use.fuel {
        return Err(format!(
            "sample {} is an analysis of {}, not of {}",
            sample.sample, sample.fuel, fuel_use.fuel
        ));
    }
    let record = FuelRecord {
        fuel: fuel_use.fuel,
        start: fuel_use.start,
        end: fuel_use.end,
        burn: fuel_use.amount,
        analysis: &sample.analysis,
    };
    fuel_record_amounts(unit, &record).map_err(|e| e.to_string())
}

/// A unit's year: its amounts by month and the fuel records behind them.
#[derive(Clone, Debug)]
pub struct UnitYear<'a> {
    pub unit: &'a Unit,
    pub year: Year,
    pub record_ids: Vec<i64>,
    /// What the unit's hourly monitor data gave, for a CEMS unit.
    pub hourly: Option<hourly::HourlyResult>,
}

impl UnitYear<'_> {
    /// Add the year of a unit's hourly data to its fuel-record amounts.
    pub fn add_hourly(&mut self, result: hourly::HourlyResult) {
        self.year = self.year + result.year;
        self.hourly = Some(result);
    }
}

/// A year in which every quantity the unit tracks is zero in every month,
/// so that a period without fuel records reports 0, not "not tracked";
/// untracked quantities stay absent.
fn tracked_zeros(unit: &Unit) -> Year {
    let mut zeros = Amounts::default();
    for quantity in Quantity::ALL.into_iter().filter(|&q| unit.tracks(q)) {
        zeros.set(quantity, Decimal::ZERO);
    }
    let mut year = Year::default();
    for month in 1..=12 {
        year.add_month(month, zeros);
    }
    year
}

/// Every unit of the site for calendar year `year`, in site-file order.
/// Errors name each record that could not be computed, by file and line.
pub fn facility_year<'a>(
    site: &'a Site,
    samples: &[Stored<Sample>],
    uses: &[Stored<FuelUse>],
    year: i32,
) -> Result<Vec<UnitYear<'a>>, Vec<String>> {
    let by_sample: HashMap<&str, &Stored<Sample>> = samples
        .iter()
        .map(|s| (s.value.sample.as_str(), s))
        .collect();
    let mut out: Vec<UnitYear> = site
        .units
        .iter()
        .map(|unit| UnitYear {
            unit,
            year: tracked_zeros(unit),
            record_ids: Vec::new(),
            hourly: None,
        })
        .collect();
    let mut errors = Vec::new();
    for u in uses.iter().filter(|u| u.value.start.year() == year) {
        let Some(slot) = out.iter_mut().find(|y| y.unit.id == u.value.unit) else {
            continue;
        };
        let Some(sample) = by_sample.get(u.value.sample.as_str()) else {
            errors.push(format!(
                "{}: sample {} is not in the ledger",
                u.source.place(),
                u.value.sample
            ));
            continue;
        };
        match record_amounts(slot.unit, &u.value, &sample.value) {
            Ok(amounts) => {
                slot.year.add_month(u.value.start.month(), amounts);
                slot.record_ids.push(u.id);
            }
            Err(e) => errors.push(format!("{}: {e}", u.source.place())),
        }
    }
    if errors.is_empty() {
        Ok(out)
    } else {
        Err(errors)
    }
}
