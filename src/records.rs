//! The input rows the ledger holds, in domain types, with where they came from.

use crate::emissions::fuel::{Fuel, FuelAmount};
use crate::emissions::fuel_based::Analysis;
use chrono::NaiveDate;

/// Where a stored row came from: its import batch, file, line and the file's digest.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Source {
    pub batch_id: i64,
    pub file: String,
    pub line: usize,
    pub sha256: String,
}

impl Source {
    /// `file:line`, as error messages and explanations print it.
    pub fn place(&self) -> String {
        format!("{}:{}", self.file, self.line)
    }
}

/// A stored row: its id, its source, and the row it supersedes, if any.
#[derive(Clone, Debug, PartialEq)]
pub struct Stored<T> {
    pub id: i64,
    pub source: Source,
    pub corrects_id: Option<i64>,
    pub reason: Option<String>,
    pub value: T,
}

/// A fuel sample's analysis (key: `sample`).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Sample {
    pub sample: String,
    pub fuel: Fuel,
    pub sampled_on: NaiveDate,
    pub analysis: Analysis,
}

/// A quantity of fuel a unit burned over a period within one month
/// (key: unit, fuel and period).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct FuelUse {
    pub unit: String,
    pub start: NaiveDate,
    pub end: NaiveDate,
    pub fuel: Fuel,
    pub amount: FuelAmount,
    pub sample: String,
}

impl FuelUse {
    pub fn key(&self) -> (String, Fuel, NaiveDate, NaiveDate) {
        (self.unit.clone(), self.fuel, self.start, self.end)
    }
}
