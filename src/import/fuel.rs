//! `flue import fuel`: fuel burned per unit and period, keyed by unit, fuel
//! and period. A record lies within one calendar month and names a sample of
//! the same fuel that the ledger already holds.

use super::{
    outcome, parse_rows, plan, Action, Fields, ImportError, InputFile, Keyed, Outcome, Stamp,
};
use crate::compute::record_amounts;
use crate::csvread::{shown, FileErrors, RowError};
use crate::emissions::fuel::{Fuel, FuelAmount, FuelUom};
use crate::ledger::{Ledger, Reads};
use crate::records::FuelUse;
use chrono::{Datelike, NaiveDate};
use std::collections::HashMap;

pub const REQUIRED: &[&str] = &["unit", "start", "end", "fuel", "quantity", "uom", "sample"];

#[derive(Clone, PartialEq, Eq, Hash, Debug)]
pub struct FuelKey(String, Fuel, NaiveDate, NaiveDate);

impl std::fmt::Display for FuelKey {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "unit {} {} from {} to {}",
            self.0, self.1, self.2, self.3
        )
    }
}

impl Keyed for FuelUse {
    type Key = FuelKey;
    fn key(&self) -> FuelKey {
        let (u, f, s, e) = FuelUse::key(self);
        FuelKey(u, f, s, e)
    }

    fn first_difference(&self, held: &FuelUse) -> Option<(&'static str, String, String)> {
        if held.amount.amount != self.amount.amount {
            return Some((
                "quantity",
                held.amount.amount.to_string(),
                self.amount.amount.to_string(),
            ));
        }
        if held.amount.uom != self.amount.uom {
            return Some((
                "uom",
                held.amount.uom.to_string(),
                self.amount.uom.to_string(),
            ));
        }
        if held.sample != self.sample {
            return Some(("sample", held.sample.clone(), self.sample.clone()));
        }
        None
    }
}

/// Parse a fuel file, checking each row on its own.
pub fn parse(file: &InputFile) -> Result<Vec<(usize, FuelUse)>, FileErrors> {
    parse_rows(file, REQUIRED, &[], |columns, record, errors| {
        let mut f = Fields::new(columns, record, errors);
        let unit = f.id("unit");
        let start = f.date("start");
        let end = f.date("end");
        let fuel = f.word::<Fuel>("fuel", true, "a fuel");
        let quantity = f.decimal("quantity", true, false, None);
        let uom = f.word::<FuelUom>("uom", true, "a fuel unit");
        let sample = f.id("sample");
        if let (Some(s), Some(e)) = (start, end) {
            if e < s {
                f.fail("end", format!("{e} is before start {s}"));
            } else if (s.year(), s.month()) != (e.year(), e.month()) {
                f.fail("end", format!("the record runs from {s} to {e}, across two months; a record lies within one calendar month, so split it at the month's end"));
            }
        }
        if !f.ok {
            return None;
        }
        Some(FuelUse {
            unit: unit?,
            start: start?,
            end: end?,
            fuel: fuel?,
            amount: FuelAmount {
                amount: quantity?,
                uom: uom?,
            },
            sample: sample?,
        })
    })
}

/// Import a fuel file: all rows or none.
pub fn import(
    ledger: &mut Ledger,
    file: &InputFile,
    correct: Option<&str>,
    stamp: &Stamp,
) -> Result<Outcome, ImportError> {
    let rows = parse(file)?;
    ledger.write(|tx| {
        let sites = tx.sites()?;
        let samples = tx.samples()?;
        let held = tx.fuel_uses()?;
        let mut errors = Vec::new();
        let actions = plan(&rows, &held, correct, &mut errors);
        let by_sample: HashMap<&str, _> = samples.iter().map(|s| (s.value.sample.as_str(), s)).collect();
        let column = |name: &str| REQUIRED.iter().position(|c| *c == name).map(|i| i + 1).unwrap_or(0);
        for ((line, u), action) in rows.iter().zip(&actions) {
            if *action == Action::Present {
                continue;
            }
            let Some(unit) = sites.iter().find_map(|s| s.unit(&u.unit)) else {
                let known: Vec<&str> = sites.iter().flat_map(|s| s.units.iter().map(|u| u.id.as_str())).collect();
                errors.push(RowError::at(
                    *line,
                    column("unit"),
                    "unit",
                    format!("unknown unit {} (units in the site file: {})", shown(&u.unit), known.join(", ")),
                ));
                continue;
            };
            let Some(sample) = by_sample.get(u.sample.as_str()) else {
                errors.push(RowError::at(
                    *line,
                    column("sample"),
                    "sample",
                    format!("unknown sample {}: import its analysis first", shown(&u.sample)),
                ));
                continue;
            };
            if let Err(why) = record_amounts(unit, u, &sample.value) {
                errors.push(RowError::line(*line, why));
            }
            let replaced = match action {
                Action::Correct(id) => Some(*id),
                _ => None,
            };
            if let Some(other) = overlap(u, replaced, &held, &rows, *line) {
                errors.push(RowError::line(
                    *line,
                    format!(
                        "unit {} {} from {} to {} overlaps the record at {other}; the same fuel would be counted twice",
                        u.unit, u.fuel, u.start, u.end
                    ),
                ));
            }
        }
        if !errors.is_empty() {
            errors.sort_by_key(|e| e.line);
            return Err(FileErrors::new(&file.name, errors)
            .into());
        }
        let done = outcome(&actions);
        if done.added + done.corrected == 0 {
            return Ok(done);
        }
        let batch = super::insert_batch(tx, "fuel", file, &done, stamp, correct)?;
        for ((line, u), action) in rows.iter().zip(&actions) {
            match action {
                Action::Add => tx.insert_fuel_use(batch, *line, u, None)?,
                Action::Correct(id) => tx.insert_fuel_use(batch, *line, u, Some((*id, correct.expect("planned"))))?,
                Action::Present => {}
            }
        }
        Ok(done)
    })
}

/// Another record of the same unit and fuel whose period overlaps this one:
/// held (other than the one this row supersedes) or elsewhere in the file.
fn overlap(
    u: &FuelUse,
    replaced: Option<i64>,
    held: &[crate::records::Stored<FuelUse>],
    rows: &[(usize, FuelUse)],
    line: usize,
) -> Option<String> {
    let clash = |o: &FuelUse| {
        o.unit == u.unit
            && o.fuel == u.fuel
            && o.start <= u.end
            && u.start <= o.end
            && o.key() != u.key()
    };
    if let Some(h) = held
        .iter()
        .find(|h| Some(h.id) != replaced && clash(&h.value))
    {
        return Some(h.source.place());
    }
    rows.iter()
        .find(|(l, o)| *l != line && clash(o))
        .map(|(l, _)| format!("line {l} of this file"))
}
