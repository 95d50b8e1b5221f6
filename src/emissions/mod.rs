//! The emissions engine: pure calculations over `Decimal`.
//!
//! Invariants: nothing here touches SQLite, files, the clock or stdout, and
//! no binary floating point holds a quantity. Every equation cites its source
//! beside the code; every error names what was missing.
#![deny(clippy::float_arithmetic)]

pub mod cems;
pub mod constants;
pub mod engine;
pub mod fuel;
pub mod fuel_based;
pub mod method;
pub mod periods;
pub mod substitute;

use fuel::{FuelUom, GcvUom};
use thiserror::Error;

/// Why a calculation could not be done. The caller adds the record's place.
#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum CalcError {
    #[error("{method} needs the sample's {field}, which is empty")]
    MissingInput {
        method: &'static str,
        field: &'static str,
    },
    #[error("converting {from} to {to} needs the sample's density_lb_per_gal")]
    NeedsDensity { from: FuelUom, to: FuelUom },
    #[error("a quantity in {from} cannot be converted to {to}")]
    Unreachable { from: FuelUom, to: FuelUom },
    #[error("a GCV in {gcv_uom} cannot be applied to fuel measured in {uom}")]
    GcvBasis { gcv_uom: GcvUom, uom: FuelUom },
    #[error("{method} needs {needs}, but the fuel is measured in {uom}")]
    WrongDimension {
        method: &'static str,
        needs: &'static str,
        uom: FuelUom,
    },
}
