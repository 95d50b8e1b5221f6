//! Applies a unit's methods to its fuel records.
//!
//! For each quantity the unit tracks, the method is the one whose fuel
//! filter and effective dates cover the record. A tracked quantity with no
//! matching method is an error, never a silent zero; an untracked quantity
//! is absent.

use super::fuel::{Fuel, FuelAmount};
use super::fuel_based::{self, Analysis};
use super::method::{Method, Quantity};
use super::periods::Amounts;
use super::CalcError;
use crate::site::Unit;
use crate::units::LbPerMmbtu;
use chrono::NaiveDate;
use thiserror::Error;

/// One fuel record as the engine sees it.
#[derive(Clone, Debug)]
pub struct FuelRecord<'a> {
    pub fuel: Fuel,
    pub start: NaiveDate,
    pub end: NaiveDate,
    pub burn: FuelAmount,
    pub analysis: &'a Analysis,
}

#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum EngineError {
    #[error("unit {unit} tracks {quantity} but no method covers {fuel} from {start} to {end}")]
    NoMethod {
        unit: String,
        quantity: Quantity,
        fuel: Fuel,
        start: NaiveDate,
        end: NaiveDate,
    },
    #[error("{quantity} by {method} (site file line {method_line}): {source}")]
    Calc {
        quantity: Quantity,
        method: &'static str,
        method_line: usize,
        source: CalcError,
    },
}

/// The amounts of one fuel record: heat input in MMBtu, masses in lb.
pub fn fuel_record_amounts(unit: &Unit, record: &FuelRecord) -> Result<Amounts, EngineError> {
    let mut out = Amounts::default();
    for quantity in Quantity::ALL {
        if !unit.tracks(quantity) {
            continue;
        }
        let entry = unit
            .method_for(quantity, record.fuel, record.start, record.end)
            .ok_or_else(|| EngineError::NoMethod {
                unit: unit.id.clone(),
                quantity,
                fuel: record.fuel,
                start: record.start,
                end: record.end,
            })?;
        if unit.from_hourly(&entry.method) {
            continue;
        }
        let value = apply(&entry.method, record).map_err(|source| EngineError::Calc {
            quantity,
            method: entry.method.name(),
            method_line: entry.line,
            source,
        })?;
        out.set(quantity, value);
    }
    Ok(out)
}

fn apply(method: &Method, r: &FuelRecord) -> Result<rust_decimal::Decimal, CalcError> {
    let heat_input = || fuel_based::heat_input_mmbtu(r.burn, r.analysis);
    let value = match method {
        Method::Fuel => heat_input()?.0,
        Method::Cems { .. } => unreachable!("hourly quantities are skipped above"),
        Method::FuelSulfur => fuel_based::so2_fuel_sulfur_lb(r.burn, r.analysis)?.0,
        Method::EmissionFactor {
            factor_lb,
            per,
            times_sulfur,
        } => fuel_based::emission_factor_lb(r.burn, r.analysis, *factor_lb, *per, *times_sulfur)?.0,
        Method::DefaultRate { rate_lb_per_mmbtu } => {
            fuel_based::default_rate_lb(heat_input()?, LbPerMmbtu(*rate_lb_per_mmbtu)).0
        }
        Method::FuelCarbon => fuel_based::co2_fuel_carbon_lb(r.burn, r.analysis)?.0,
        Method::FcFactor => fuel_based::co2_fc_factor_lb(heat_input()?, r.fuel).0,
    };
    Ok(value)
}
