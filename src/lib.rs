//! flue: an emissions compliance ledger for fuel-burning units.
//!
//! Modules in reading order: quantities and parsing, the pure emissions
//! engine, the site file, the pure allowance book and reconciliation, input
//! files, the ledger (all SQL), the report model and its renderers, and the
//! command line.

pub mod allowances;
pub mod assemble;
pub mod audit;
pub mod cli;
pub mod compute;
pub mod crashpoint;
pub mod csvread;
pub mod decimal;
pub mod emissions;
pub mod exact_sum;
pub mod import;
pub mod ledger;
pub mod records;
pub mod report;
pub mod site;
pub mod units;
