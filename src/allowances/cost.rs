//! Cost of allowances by the weighted-average method, per program, over the
//! plant's `compliance` and `general` accounts together.
//!
//! Allowances entering the plant from outside (the issuer or an `external`
//! account) join the pool at their price per allowance; an allocation
//! without a price joins at zero cost. Allowances leaving the plant (a sale,
//! a deduction, an offset) leave at the pool's average cost, which therefore
//! changes only when allowances enter. Moves between the plant's own
//! accounts change nothing.

use super::holdings::Book;
use chrono::NaiveDate;
use rust_decimal::Decimal;
use serde::{Serialize, Serializer};
use thiserror::Error;

#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum CostError {
    #[error("program {program}, through {through}: {what} exceeds the range of a decimal")]
    Overflow {
        program: String,
        through: NaiveDate,
        what: &'static str,
    },
}

/// Costs in the currency units of the site file (US dollars for the
/// programs of 40 CFR 72-78 and 96-97). Averages are exact decimals;
/// reports round them for reading.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct CostSummary {
    pub program: String,
    #[serde(serialize_with = "date_text")]
    pub through: NaiveDate,
    /// Allowances bought: entered the plant with a price.
    pub acquired_priced_count: u64,
    pub acquired_cost_usd: Decimal,
    /// Weighted-average price of the allowances bought; `None` if none was.
    pub acquired_average_usd_per_allowance: Option<Decimal>,
    /// Allowances in the plant's accounts and their average cost, free
    /// allocations counting at zero.
    pub held_count: u64,
    pub held_average_usd_per_allowance: Option<Decimal>,
    pub deducted_count: u64,
    pub deducted_cost_usd: Decimal,
    pub bank_count: u64,
    pub bank_book_value_usd: Decimal,
}

fn date_text<S: Serializer>(date: &NaiveDate, s: S) -> Result<S::Ok, S::Error> {
    s.collect_str(date)
}

/// The cost of `program`'s allowances through the end of `through`, with
/// `deducted_count` deducted and `bank_count` carried forward (both from a
/// reconciliation), each valued at the pool's average cost.
pub fn cost_summary(
    book: &Book,
    program: &str,
    through: NaiveDate,
    deducted_count: u64,
    bank_count: u64,
) -> Result<CostSummary, CostError> {
    let overflow = |what| CostError::Overflow {
        program: program.to_string(),
        through,
        what,
    };
    let mut acquired_priced_count: u64 = 0;
    let mut acquired_cost_usd = Decimal::ZERO;
    let mut held_count: u64 = 0;
    let mut average: Option<Decimal> = None;
    for tx in book.transactions() {
        if tx.program != program || tx.date > through {
            continue;
        }
        let (into, out_of) = (book.is_plant(&tx.to), book.is_plant(&tx.from));
        let quantity = Decimal::from(tx.quantity);
        if into && !out_of {
            let price = tx.price_usd_per_allowance.unwrap_or(Decimal::ZERO);
            let cost = quantity
                .checked_mul(price)
                .ok_or_else(|| overflow("a transaction's cost"))?;
            if tx.price_usd_per_allowance.is_some() {
                acquired_priced_count = acquired_priced_count
                    .checked_add(tx.quantity)
                    .ok_or_else(|| overflow("acquired_priced_count"))?;
                acquired_cost_usd = acquired_cost_usd
                    .checked_add(cost)
                    .ok_or_else(|| overflow("acquired_cost_usd"))?;
            }
            let held_value = Decimal::from(held_count)
                .checked_mul(average.unwrap_or(Decimal::ZERO))
                .and_then(|v| v.checked_add(cost))
                .ok_or_else(|| overflow("the pool's value"))?;
            held_count = held_count
                .checked_add(tx.quantity)
                .ok_or_else(|| overflow("held_count"))?;
            average = Some(
                held_value
                    .checked_div(Decimal::from(held_count))
                    .ok_or_else(|| overflow("the average cost"))?,
            );
        } else if out_of && !into {
            // The plant's accounts never go below zero, so the pool holds them.
            held_count = held_count
                .checked_sub(tx.quantity)
                .expect("plant accounts never go below zero");
        }
    }
    let valued = |count: u64, what| {
        Decimal::from(count)
            .checked_mul(average.unwrap_or(Decimal::ZERO))
            .ok_or_else(|| overflow(what))
    };
    let acquired_average_usd_per_allowance = if acquired_priced_count == 0 {
        None
    } else {
        Some(
            acquired_cost_usd
                .checked_div(Decimal::from(acquired_priced_count))
                .ok_or_else(|| overflow("the acquired average"))?,
        )
    };
    Ok(CostSummary {
        program: program.to_string(),
        through,
        acquired_priced_count,
        acquired_cost_usd,
        acquired_average_usd_per_allowance,
        held_count,
        held_average_usd_per_allowance: average,
        deducted_count,
        deducted_cost_usd: valued(deducted_count, "deducted_cost_usd")?,
        bank_count,
        bank_book_value_usd: valued(bank_count, "bank_book_value_usd")?,
    })
}
