//! The quantities a unit tracks and the methods that compute them.

use super::fuel::FuelUom;
use rust_decimal::Decimal;
use std::fmt;
use std::str::FromStr;

/// A quantity the ledger computes for a unit.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Quantity {
    HeatInput,
    So2,
    Nox,
    Co2,
}

impl Quantity {
    pub const ALL: [Quantity; 4] = [
        Quantity::HeatInput,
        Quantity::So2,
        Quantity::Nox,
        Quantity::Co2,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            Quantity::HeatInput => "heat_input",
            Quantity::So2 => "so2",
            Quantity::Nox => "nox",
            Quantity::Co2 => "co2",
        }
    }

    pub fn index(self) -> usize {
        self as usize
    }
}

impl FromStr for Quantity {
    type Err = String;
    fn from_str(s: &str) -> Result<Quantity, String> {
        Quantity::ALL
            .into_iter()
            .find(|q| q.as_str() == s)
            .ok_or_else(|| "expected one of heat_input, so2, nox, co2".to_string())
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The diluent gas a CEMS heat input or NOx rate is computed with.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Diluent {
    #[default]
    O2,
    Co2,
}

impl Diluent {
    pub fn as_str(self) -> &'static str {
        match self {
            Diluent::O2 => "o2",
            Diluent::Co2 => "co2",
        }
    }
}

impl FromStr for Diluent {
    type Err = String;
    fn from_str(s: &str) -> Result<Diluent, String> {
        match s {
            "o2" => Ok(Diluent::O2),
            "co2" => Ok(Diluent::Co2),
            _ => Err("expected o2 or co2".to_string()),
        }
    }
}

/// A method with the parameters it needs.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Method {
    /// Heat input = quantity × GCV.
    Fuel,
    /// Continuous monitors (hourly data).
    Cems { diluent: Diluent },
    /// SO2 by fuel-sulfur mass balance.
    FuelSulfur,
    /// lb per `per` unit of fuel, optionally × sulfur weight percent.
    EmissionFactor {
        factor_lb: Decimal,
        per: FuelUom,
        times_sulfur: bool,
    },
    /// lb/MMBtu × heat input.
    DefaultRate { rate_lb_per_mmbtu: Decimal },
    /// CO2 from the carbon content of the fuel.
    FuelCarbon,
    /// CO2 from the carbon F-factor and heat input.
    FcFactor,
}

impl Method {
    pub fn name(&self) -> &'static str {
        match self {
            Method::Fuel => "fuel",
            Method::Cems { .. } => "cems",
            Method::FuelSulfur => "fuel-sulfur",
            Method::EmissionFactor { .. } => "emission-factor",
            Method::DefaultRate { .. } => "default-rate",
            Method::FuelCarbon => "fuel-carbon",
            Method::FcFactor => "fc-factor",
        }
    }

    /// The method names allowed for a quantity (DESIGN.md method table).
    pub fn allowed_for(quantity: Quantity) -> &'static [&'static str] {
        match quantity {
            Quantity::HeatInput => &["fuel", "cems"],
            Quantity::So2 => &["fuel-sulfur", "emission-factor", "default-rate", "cems"],
            Quantity::Nox => &["emission-factor", "default-rate", "cems"],
            Quantity::Co2 => &["fuel-carbon", "fc-factor", "cems"],
        }
    }

    /// The published equation a method follows, for explanations and reports.
    pub fn equation(&self, quantity: Quantity) -> &'static str {
        match (self, quantity) {
            (Method::Fuel, _) => "40 CFR 75 App. D Eq. D-6 / D-8 (quantity × GCV / 10^6)",
            (Method::FuelSulfur, _) => "40 CFR 75 App. D Eq. D-2 (oil, solid) / Eq. D-4 (gas)",
            (Method::EmissionFactor { .. }, _) => "AP-42 Ch. 1 emission factor × fuel quantity",
            (Method::DefaultRate { .. }, _) => "40 CFR 75 App. D Eq. D-5 (rate × heat input)",
            (Method::FuelCarbon, _) => "40 CFR 75 App. G Eq. G-1 (carbon burned × 44/12)",
            (Method::FcFactor, _) => "40 CFR 75 App. G Eq. G-4 (Fc × heat input / 385 × 44.0)",
            (Method::Cems { .. }, Quantity::HeatInput) => "40 CFR 75 App. F Eq. F-15 to F-18",
            (Method::Cems { .. }, Quantity::So2) => "40 CFR 75 App. F Eq. F-1 / F-2",
            (Method::Cems { .. }, Quantity::Nox) => "40 CFR 75 App. F Eq. F-5 / F-6 and F-24",
            (Method::Cems { .. }, Quantity::Co2) => "40 CFR 75 App. F Eq. F-11",
        }
    }
}
