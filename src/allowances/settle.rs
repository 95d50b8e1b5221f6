//! Settlement: the transactions that surrender a reconciled year's
//! allowances, as data for the ledger to write.
//!
//! A settlement moves, from the program's account to the program's
//! retirement, each vintage's deduction and then the offset owed for any
//! excess, from the next year's vintage (40 CFR 77.5(c)). Its rows are dated
//! the true-up day, the day whose end the reconciliation counted, and carry
//! the year they settle, so a settled year reconciles unchanged and is
//! never settled twice.

use super::holdings::{Book, Holder, RowError, Transaction, TransactionKind};
use super::reconcile::Reconciliation;
use chrono::NaiveDate;
use serde::Serialize;
use thiserror::Error;

#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum SettleError {
    #[error("program {program}, year {year}: already settled; a second settlement is refused")]
    AlreadySettled { program: String, year: i32 },
    #[error("program {program}, year {year}: settlement refused: {}", rows.iter().map(ToString::to_string).collect::<Vec<_>>().join("; "))]
    Refused {
        program: String,
        year: i32,
        rows: Vec<RowError>,
    },
}

/// What a settlement writes and what it leaves owed.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Settlement {
    pub program: String,
    pub year: i32,
    pub account: String,
    #[serde(skip)]
    pub date: NaiveDate,
    #[serde(skip)]
    pub transactions: Vec<Transaction>,
    pub deducted: u64,
    pub offset_owed: u64,
    pub offset_deducted: u64,
    /// Offset allowances the account did not hold: still owed, to be
    /// surrendered when acquired.
    pub offset_outstanding: u64,
}

/// The settlement of a reconciliation. `offset_vintage_held` is what the
/// account holds of the offset vintage at the end of the true-up day; the
/// offset deducted is the smaller of that and the offset owed.
pub fn settlement(rec: &Reconciliation, offset_vintage_held: u64) -> Settlement {
    let row = |suffix: String, kind: TransactionKind, vintage: i32, quantity: u64, note: String| {
        Transaction {
            id: format!("settle/{}/{}/{suffix}", rec.program, rec.year),
            date: rec.true_up_date,
            kind,
            program: rec.program.clone(),
            vintage,
            quantity,
            from: Holder::account(&rec.account),
            to: Holder::Retirement,
            price_usd_per_allowance: None,
            note,
            serials: None,
        }
    };
    let mut transactions: Vec<Transaction> = rec
        .by_vintage
        .iter()
        .filter(|v| v.deduct > 0)
        .map(|v| {
            row(
                format!("deduct-{}", v.vintage),
                TransactionKind::Deduction { year: rec.year },
                v.vintage,
                v.deduct,
                format!("deduction for {} emissions, oldest vintage first", rec.year),
            )
        })
        .collect();
    let offset_deducted = rec.offset_next_year.min(offset_vintage_held);
    if offset_deducted > 0 {
        transactions.push(row(
            "offset".to_string(),
            TransactionKind::Offset { year: rec.year },
            rec.offset_vintage,
            offset_deducted,
            format!(
                "offset for {} tons of excess emissions in {}, 40 CFR 77.5(c)",
                rec.shortfall, rec.year
            ),
        ));
    }
    Settlement {
        program: rec.program.clone(),
        year: rec.year,
        account: rec.account.clone(),
        date: rec.true_up_date,
        transactions,
        deducted: rec.deducted(),
        offset_owed: rec.offset_next_year,
        offset_deducted,
        offset_outstanding: rec.offset_next_year - offset_deducted,
    }
}

impl Book {
    /// Record a settlement, all or nothing. Refused when the year already
    /// has settlement rows, or when a row would overdraw, now or for a
    /// transaction dated later.
    pub fn record_settlement(&mut self, settlement: &Settlement) -> Result<(), SettleError> {
        if self.is_settled(&settlement.program, settlement.year) {
            return Err(SettleError::AlreadySettled {
                program: settlement.program.clone(),
                year: settlement.year,
            });
        }
        self.apply_all(&settlement.transactions)
            .map(|_| ())
            .map_err(|rows| SettleError::Refused {
                program: settlement.program.clone(),
                year: settlement.year,
                rows,
            })
    }
}
