//! Position: where a program's year stands part way through, and what it
//! is likely to need at the end.
//!
//! The projection to the end of the compliance period is, in order of
//! preference:
//! - `previous-year-scaled`: the previous year's whole period, scaled by this
//!   year's emissions to date over the previous year's emissions over the
//!   same days;
//! - `run-rate`: this year's emissions to date over the days elapsed, times
//!   the days of the period, where the previous year gives no basis;
//! - `previous-year`: the previous year's whole period, before this year's
//!   period has begun;
//! - `period-complete`: the emissions to date, once the period has ended;
//! - `none`: nothing to project from (zero).
//!
//! Days count inclusive of both ends. The allowances needed follow the
//! reconciliation rules (whole tons, surrender ratio, vintages ≤ the year).

use super::reconcile::tons_to_cover;
use crate::site::{Program, Season};
use crate::units::Tons;
use chrono::{Datelike, NaiveDate};
use rust_decimal::Decimal;
use serde::{Serialize, Serializer};
use std::collections::BTreeMap;
use thiserror::Error;

#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum PositionError {
    #[error(
        "program {program}, as of {as_of}: field {field}: expected zero or more tons, found {tons}"
    )]
    NegativeEmissions {
        program: String,
        as_of: NaiveDate,
        field: &'static str,
        tons: Decimal,
    },
    #[error("program {program}, as of {as_of}: vintage {vintage}: held {held}, below zero")]
    NegativeHolding {
        program: String,
        as_of: NaiveDate,
        vintage: i32,
        held: i64,
    },
    #[error(
        "program {program}, as of {as_of}: the compliance period of {year} is outside the calendar"
    )]
    Period {
        program: String,
        as_of: NaiveDate,
        year: i32,
    },
    #[error("program {program}, as of {as_of}: {what} exceeds the range of a decimal or a count")]
    Overflow {
        program: String,
        as_of: NaiveDate,
        what: &'static str,
    },
}

/// The first and last day of a season's compliance period in `year`:
/// the calendar year, or May 1 to September 30 (40 CFR 72.2, ozone season).
pub fn period(season: Season, year: i32) -> Option<(NaiveDate, NaiveDate)> {
    let (first, last) = match season {
        Season::Annual => ((1, 1), (12, 31)),
        Season::Ozone => ((5, 1), (9, 30)),
    };
    Some((
        NaiveDate::from_ymd_opt(year, first.0, first.1)?,
        NaiveDate::from_ymd_opt(year, last.0, last.1)?,
    ))
}

/// The same day one year earlier; February 29 falls back to February 28.
pub fn same_day_previous_year(date: NaiveDate) -> Option<NaiveDate> {
    let year = date.year().checked_sub(1)?;
    NaiveDate::from_ymd_opt(year, date.month(), date.day())
        .or_else(|| NaiveDate::from_ymd_opt(year, date.month(), date.day() - 1))
}

/// The previous year's emissions of the program's season.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct PreviousYear {
    /// From the period's first day to [`same_day_previous_year`] of `as_of`, inclusive.
    pub same_days_tons: Tons,
    /// The whole period.
    pub period_tons: Tons,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ProjectionMethod {
    PreviousYearScaled,
    RunRate,
    PreviousYear,
    PeriodComplete,
    None,
}

impl ProjectionMethod {
    pub fn as_str(self) -> &'static str {
        match self {
            ProjectionMethod::PreviousYearScaled => "previous-year-scaled",
            ProjectionMethod::RunRate => "run-rate",
            ProjectionMethod::PreviousYear => "previous-year",
            ProjectionMethod::PeriodComplete => "period-complete",
            ProjectionMethod::None => "none",
        }
    }
}

impl Serialize for ProjectionMethod {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.as_str())
    }
}

/// A program's position as of a date.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Position {
    pub program: String,
    pub year: i32,
    #[serde(serialize_with = "date_text")]
    pub as_of: NaiveDate,
    #[serde(serialize_with = "date_text")]
    pub period_start: NaiveDate,
    #[serde(serialize_with = "date_text")]
    pub period_end: NaiveDate,
    pub days_elapsed: i64,
    pub days_in_period: i64,
    pub emissions_to_date_tons: Tons,
    pub projection_method: ProjectionMethod,
    pub projected_period_tons: Tons,
    pub allowances_required: u64,
    pub eligible_held: u64,
    pub expected_surplus: u64,
    pub expected_shortfall: u64,
    pub to_buy: u64,
}

fn date_text<S: Serializer>(date: &NaiveDate, s: S) -> Result<S::Ok, S::Error> {
    s.collect_str(date)
}

/// The position of `program` as of the end of `as_of`, for the compliance
/// period of `as_of`'s year. `emissions_to_date` covers the period's first
/// day to `as_of` inclusive; `held_by_vintage` is the program account's
/// holdings at the end of `as_of`.
pub fn position(
    program: &Program,
    as_of: NaiveDate,
    emissions_to_date: Tons,
    previous_year: Option<PreviousYear>,
    held_by_vintage: &BTreeMap<i32, i64>,
) -> Result<Position, PositionError> {
    let year = as_of.year();
    let overflow = |what| PositionError::Overflow {
        program: program.id.clone(),
        as_of,
        what,
    };
    let negative = |field, tons: Tons| {
        (tons.0.is_sign_negative() && !tons.0.is_zero()).then(|| PositionError::NegativeEmissions {
            program: program.id.clone(),
            as_of,
            field,
            tons: tons.0,
        })
    };
    if let Some(e) = negative("emissions_to_date_tons", emissions_to_date) {
        return Err(e);
    }
    if let Some(prev) = previous_year {
        for (field, tons) in [
            ("previous_year.same_days_tons", prev.same_days_tons),
            ("previous_year.period_tons", prev.period_tons),
        ] {
            if let Some(e) = negative(field, tons) {
                return Err(e);
            }
        }
    }
    let (period_start, period_end) =
        period(program.season, year).ok_or_else(|| PositionError::Period {
            program: program.id.clone(),
            as_of,
            year,
        })?;
    let days_in_period = (period_end - period_start).num_days() + 1;
    let days_elapsed = ((as_of.min(period_end) - period_start).num_days() + 1).max(0);

    let scaled = |prev: PreviousYear| -> Option<Result<Decimal, PositionError>> {
        (!prev.same_days_tons.0.is_zero()).then(|| {
            prev.period_tons
                .0
                .checked_mul(emissions_to_date.0)
                .and_then(|d| d.checked_div(prev.same_days_tons.0))
                .ok_or_else(|| overflow("the scaled projection"))
        })
    };
    let (projection_method, projected) = if as_of >= period_end {
        (ProjectionMethod::PeriodComplete, emissions_to_date.0)
    } else if days_elapsed == 0 {
        match previous_year {
            Some(prev) => (ProjectionMethod::PreviousYear, prev.period_tons.0),
            None => (ProjectionMethod::None, Decimal::ZERO),
        }
    } else if let Some(result) = previous_year.and_then(scaled) {
        (ProjectionMethod::PreviousYearScaled, result?)
    } else {
        let run_rate = emissions_to_date
            .0
            .checked_mul(Decimal::from(days_in_period))
            .and_then(|d| d.checked_div(Decimal::from(days_elapsed)))
            .ok_or_else(|| overflow("the run-rate projection"))?;
        (ProjectionMethod::RunRate, run_rate)
    };
    let projected_period_tons = Tons(projected);
    let allowances_required = tons_to_cover(projected_period_tons, program.surrender_ratio)
        .ok_or_else(|| overflow("allowances_required"))?;
    // Vintages no later than the year are eligible (40 CFR 73.35(a)).
    let mut eligible_held: u64 = 0;
    for (&vintage, &held) in held_by_vintage.range(..=year) {
        let held = u64::try_from(held).map_err(|_| PositionError::NegativeHolding {
            program: program.id.clone(),
            as_of,
            vintage,
            held,
        })?;
        eligible_held = eligible_held
            .checked_add(held)
            .ok_or_else(|| overflow("eligible_held"))?;
    }
    let expected_shortfall = allowances_required.saturating_sub(eligible_held);
    Ok(Position {
        program: program.id.clone(),
        year,
        as_of,
        period_start,
        period_end,
        days_elapsed,
        days_in_period,
        emissions_to_date_tons: emissions_to_date,
        projection_method,
        projected_period_tons,
        allowances_required,
        eligible_held,
        expected_surplus: eligible_held.saturating_sub(allowances_required),
        expected_shortfall,
        to_buy: expected_shortfall,
    })
}
