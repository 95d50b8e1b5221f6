//! Reconciliation: the emissions of one program's year against the
//! allowances its account held at the true-up deadline.
//!
//! The rules, in order (DESIGN.md, "Rules the numbers follow"):
//! 1. whole tons: emissions rounded half up, a fraction under 0.50 counting
//!    as zero (40 CFR 97.406(b)(2));
//! 2. `tons_to_cover` = whole tons × surrender_ratio, rounded up, and one
//!    allowance covers one ton (40 CFR 72.2);
//! 3. eligible: vintages no later than the year (40 CFR 73.35(a)), held in
//!    the program's account at the end of the true-up day of the next year
//!    (the allowance transfer deadline, 40 CFR 72.2);
//! 4. oldest vintage deducted first;
//! 5. a shortfall is excess emissions: penalty = excess × penalty_per_ton
//!    (40 CFR 77.6), and excess × offset_ratio allowances, rounded up, of the
//!    next year's vintage are owed (40 CFR 77.5(c); 2 × under 97.424(d),
//!    3 × under 96.154(d)).

use super::holdings::{Book, Holder};
use crate::site::Program;
use crate::units::Tons;
use chrono::NaiveDate;
use rust_decimal::prelude::ToPrimitive;
use rust_decimal::{Decimal, RoundingStrategy};
use serde::{Serialize, Serializer};
use std::collections::BTreeMap;
use thiserror::Error;

#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum ReconcileError {
    #[error("program {program}, year {year}: the true-up day {month:02}-{day:02} of {next_year} is not a calendar date")]
    TrueUpDate {
        program: String,
        year: i32,
        next_year: i32,
        month: u32,
        day: u32,
    },
    #[error(
        "program {program}, year {year}: field emissions_tons: expected zero or more, found {tons}"
    )]
    NegativeEmissions {
        program: String,
        year: i32,
        tons: Decimal,
    },
    #[error("program {program}, account {account}, vintage {vintage}: held {held}, below zero")]
    NegativeHolding {
        program: String,
        account: String,
        vintage: i32,
        held: i64,
    },
    #[error("program {program}, year {year}: {what} exceeds the range of a count")]
    Overflow {
        program: String,
        year: i32,
        what: &'static str,
    },
}

/// The end of whose day holdings count for `year`: the program's true-up
/// month and day in the next year. A true-up of 02-29 falls on February 28
/// in a year without a February 29.
pub fn true_up_date(program: &Program, year: i32) -> Result<NaiveDate, ReconcileError> {
    let (month, day) = program.true_up;
    let next_year = year.checked_add(1);
    let date = next_year.and_then(|y| {
        NaiveDate::from_ymd_opt(y, month, day).or_else(|| {
            ((month, day) == (2, 29))
                .then(|| NaiveDate::from_ymd_opt(y, 2, 28))
                .flatten()
        })
    });
    date.ok_or_else(|| ReconcileError::TrueUpDate {
        program: program.id.clone(),
        year,
        next_year: next_year.unwrap_or(year),
        month,
        day,
    })
}

/// Emissions in whole tons: rounded half up, so a fraction below 0.50 counts
/// as zero and 0.50 or more as one (40 CFR 97.406(b)(2)).
pub fn whole_tons(emissions: Tons) -> Decimal {
    emissions.round(0, RoundingStrategy::MidpointAwayFromZero).0
}

/// Allowances a quantity of emissions needs: whole tons × surrender_ratio,
/// rounded up; one allowance covers one ton (40 CFR 72.2). `None` on overflow.
pub fn tons_to_cover(emissions: Tons, surrender_ratio: Decimal) -> Option<u64> {
    whole_tons(emissions)
        .checked_mul(surrender_ratio)?
        .ceil()
        .to_u64()
}

/// One vintage's part of a reconciliation.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct VintageDeduction {
    pub vintage: i32,
    pub held: u64,
    pub deduct: u64,
}

/// The reconciliation of one program and year, shaped as the DESIGN.md
/// `allowances reconcile` JSON, plus the true-up date and offset vintage.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Reconciliation {
    pub program: String,
    pub year: i32,
    pub account: String,
    #[serde(serialize_with = "date_text")]
    pub true_up_date: NaiveDate,
    pub emissions_tons: Tons,
    pub tons_to_cover: u64,
    pub allowances_required: u64,
    pub eligible_held: u64,
    pub by_vintage: Vec<VintageDeduction>,
    pub shortfall: u64,
    #[serde(rename = "penalty")]
    pub penalty_usd: Decimal,
    pub offset_vintage: i32,
    pub offset_next_year: u64,
    pub carried_forward: u64,
}

fn date_text<S: Serializer>(date: &NaiveDate, s: S) -> Result<S::Ok, S::Error> {
    s.collect_str(date)
}

impl Reconciliation {
    /// Allowances deducted for the year's emissions, all vintages together.
    pub fn deducted(&self) -> u64 {
        self.by_vintage.iter().map(|v| v.deduct).sum()
    }
}

/// Reconcile `year` of `program` from the season's emissions and the
/// program account's holdings by vintage at the end of the true-up day
/// (see [`held_at_true_up`]).
pub fn reconcile(
    program: &Program,
    year: i32,
    emissions: Tons,
    held_by_vintage: &BTreeMap<i32, i64>,
) -> Result<Reconciliation, ReconcileError> {
    let overflow = |what| ReconcileError::Overflow {
        program: program.id.clone(),
        year,
        what,
    };
    let true_up_date = true_up_date(program, year)?;
    let offset_vintage = year
        .checked_add(1)
        .ok_or_else(|| overflow("the offset vintage"))?;
    if emissions.0.is_sign_negative() && !emissions.0.is_zero() {
        return Err(ReconcileError::NegativeEmissions {
            program: program.id.clone(),
            year,
            tons: emissions.0,
        });
    }
    let tons_to_cover = tons_to_cover(emissions, program.surrender_ratio)
        .ok_or_else(|| overflow("tons_to_cover"))?;
    // One allowance covers one ton (40 CFR 72.2).
    let allowances_required = tons_to_cover;

    // Vintages no later than the year are eligible (40 CFR 73.35(a)); the
    // map is ordered, so the oldest vintage is deducted first.
    let mut by_vintage = Vec::new();
    let mut eligible_held: u64 = 0;
    let mut left = allowances_required;
    for (&vintage, &held) in held_by_vintage.range(..=year) {
        let held = u64::try_from(held).map_err(|_| ReconcileError::NegativeHolding {
            program: program.id.clone(),
            account: program.account.clone(),
            vintage,
            held,
        })?;
        if held == 0 {
            continue;
        }
        let deduct = held.min(left);
        left -= deduct;
        eligible_held = eligible_held
            .checked_add(held)
            .ok_or_else(|| overflow("eligible_held"))?;
        by_vintage.push(VintageDeduction {
            vintage,
            held,
            deduct,
        });
    }
    let shortfall = left;
    let deducted = allowances_required - shortfall;
    let excess = Decimal::from(shortfall);
    // Penalty per excess ton (40 CFR 77.6(b)); the program's amount is the site's.
    let penalty_usd = excess
        .checked_mul(program.penalty_per_ton)
        .ok_or_else(|| overflow("penalty"))?;
    // Offset from the next year's vintage (40 CFR 77.5(c)), rounded up to whole allowances.
    let offset_next_year = excess
        .checked_mul(program.offset_ratio)
        .and_then(|d| d.ceil().to_u64())
        .ok_or_else(|| overflow("offset_next_year"))?;
    Ok(Reconciliation {
        program: program.id.clone(),
        year,
        account: program.account.clone(),
        true_up_date,
        emissions_tons: emissions,
        tons_to_cover,
        allowances_required,
        eligible_held,
        by_vintage,
        shortfall,
        penalty_usd,
        offset_vintage,
        offset_next_year,
        carried_forward: eligible_held - deducted,
    })
}

/// The program account's holdings by vintage at the end of the true-up day
/// of `year`, as `reconcile` takes them. The year's own settlement rows,
/// dated that day, are added back, so a settled year reconciles as it did
/// before it was settled.
pub fn held_at_true_up(
    book: &Book,
    program: &Program,
    year: i32,
) -> Result<BTreeMap<i32, i64>, ReconcileError> {
    let date = true_up_date(program, year)?;
    let account = Holder::account(&program.account);
    let mut held = book
        .holdings_at_end_of(date)
        .by_vintage(&account, &program.id);
    for tx in book.transactions() {
        if tx.date <= date
            && tx.program == program.id
            && tx.from == account
            && tx.kind.settles_year() == Some(year)
        {
            let count = held.entry(tx.vintage).or_insert(0);
            *count = count
                .checked_add(
                    i64::try_from(tx.quantity).expect("quantity checked against QUANTITY_MAX"),
                )
                .expect("balance fits in i64");
        }
    }
    held.retain(|_, count| *count != 0);
    Ok(held)
}
