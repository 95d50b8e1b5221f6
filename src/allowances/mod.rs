//! Allowances: holdings, obligations and reconciliation, as pure functions.
//!
//! One allowance authorizes one ton (40 CFR 72.2). The book applies
//! transactions to holdings by (holder, program, vintage); reconciliation
//! sets a year's emissions against the holdings at the true-up deadline;
//! settlement turns a reconciliation into the rows that surrender
//! allowances; position projects the year part way through; cost values
//! allowances at their weighted-average cost.
//!
//! Invariants: nothing here touches SQLite, files, the clock or stdout, and
//! no binary floating point holds a figure. Counts are integers under
//! checked arithmetic; tons and money are `Decimal`.
#![deny(clippy::float_arithmetic)]

pub mod cost;
pub mod emissions;
pub mod holdings;
pub mod position;
pub mod reconcile;
pub mod serials;
pub mod settle;

pub use cost::{cost_summary, CostError, CostSummary};
pub use emissions::{season_tons, EmissionsError};
pub use holdings::{
    Applied, Balance, Book, HeldBlock, Holder, HoldingKey, Holdings, OnConflict, RowError,
    Transaction, TransactionKind, TxError, QUANTITY_MAX,
};
pub use position::{
    period, position, same_day_previous_year, Position, PositionError, PreviousYear,
    ProjectionMethod,
};
pub use reconcile::{
    held_at_true_up, reconcile, tons_to_cover, true_up_date, whole_tons, ReconcileError,
    Reconciliation, VintageDeduction,
};
pub use serials::SerialBlock;
pub use settle::{settlement, SettleError, Settlement};

#[cfg(test)]
mod tests;
