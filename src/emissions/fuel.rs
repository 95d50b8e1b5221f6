//! Fuels, fuel units of measure and the conversions between them.
//!
//! A fuel quantity has one of three dimensions: mass (ton, lb), liquid volume
//! (gal, kgal, bbl) or gas volume (scf, mscf, mmscf). Mass and liquid volume
//! convert through the sample's density; gas volume converts to nothing else,
//! because the analysis columns carry no gas density. A conversion that cannot
//! be reached is an error, never a guess.

use super::CalcError;
use rust_decimal::Decimal;
use rust_decimal_macros::dec;
use std::fmt;
use std::str::FromStr;

/// The fuels a unit or a fuel record may name.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Fuel {
    Anthracite,
    Bituminous,
    Subbituminous,
    Lignite,
    ResidualOil,
    DistillateOil,
    NaturalGas,
    Propane,
    Wood,
}

impl Fuel {
    pub const ALL: [Fuel; 9] = [
        Fuel::Anthracite,
        Fuel::Bituminous,
        Fuel::Subbituminous,
        Fuel::Lignite,
        Fuel::ResidualOil,
        Fuel::DistillateOil,
        Fuel::NaturalGas,
        Fuel::Propane,
        Fuel::Wood,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            Fuel::Anthracite => "anthracite",
            Fuel::Bituminous => "bituminous",
            Fuel::Subbituminous => "subbituminous",
            Fuel::Lignite => "lignite",
            Fuel::ResidualOil => "residual-oil",
            Fuel::DistillateOil => "distillate-oil",
            Fuel::NaturalGas => "natural-gas",
            Fuel::Propane => "propane",
            Fuel::Wood => "wood",
        }
    }

    /// Fuels burned as gas, whose sulfur is given in grains per 100 scf.
    pub fn is_gaseous(self) -> bool {
        matches!(self, Fuel::NaturalGas | Fuel::Propane)
    }

    pub fn expected() -> String {
        Fuel::ALL.map(Fuel::as_str).join(", ")
    }
}

impl FromStr for Fuel {
    type Err = String;
    fn from_str(s: &str) -> Result<Fuel, String> {
        Fuel::ALL
            .into_iter()
            .find(|f| f.as_str() == s)
            .ok_or_else(|| format!("expected one of {}", Fuel::expected()))
    }
}

impl fmt::Display for Fuel {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The dimension of a fuel unit of measure.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Dimension {
    Mass,
    LiquidVolume,
    GasVolume,
}

/// Units of measure for a quantity of fuel burned.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum FuelUom {
    /// Short ton, 2,000 lb.
    Ton,
    Lb,
    Gal,
    /// 1,000 gal.
    Kgal,
    /// Barrel, 42 gal.
    Bbl,
    Scf,
    /// 1,000 scf.
    Mscf,
    /// 10^6 scf.
    Mmscf,
}

impl FuelUom {
    pub const ALL: [FuelUom; 8] = [
        FuelUom::Ton,
        FuelUom::Lb,
        FuelUom::Gal,
        FuelUom::Kgal,
        FuelUom::Bbl,
        FuelUom::Scf,
        FuelUom::Mscf,
        FuelUom::Mmscf,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            FuelUom::Ton => "ton",
            FuelUom::Lb => "lb",
            FuelUom::Gal => "gal",
            FuelUom::Kgal => "kgal",
            FuelUom::Bbl => "bbl",
            FuelUom::Scf => "scf",
            FuelUom::Mscf => "mscf",
            FuelUom::Mmscf => "mmscf",
        }
    }

    pub fn dimension(self) -> Dimension {
        match self {
            FuelUom::Ton | FuelUom::Lb => Dimension::Mass,
            FuelUom::Gal | FuelUom::Kgal | FuelUom::Bbl => Dimension::LiquidVolume,
            FuelUom::Scf | FuelUom::Mscf | FuelUom::Mmscf => Dimension::GasVolume,
        }
    }

    /// How many of the dimension's base unit (lb, gal or scf) one of this unit holds.
    ///
    /// Sources: short ton = 2,000 lb (common practice); barrel = 42 gal
    /// (40 CFR 72 App. B Table B-1 note); kgal, mscf and mmscf are the
    /// trade's 10^3 and 10^6 multiples (common practice).
    pub fn base_units(self) -> Decimal {
        match self {
            FuelUom::Ton => dec!(2000),
            FuelUom::Lb | FuelUom::Gal | FuelUom::Scf => Decimal::ONE,
            FuelUom::Kgal | FuelUom::Mscf => dec!(1000),
            FuelUom::Bbl => dec!(42),
            FuelUom::Mmscf => dec!(1000000),
        }
    }

    pub fn expected() -> String {
        FuelUom::ALL.map(FuelUom::as_str).join(", ")
    }
}

impl FromStr for FuelUom {
    type Err = String;
    fn from_str(s: &str) -> Result<FuelUom, String> {
        FuelUom::ALL
            .into_iter()
            .find(|u| u.as_str() == s)
            .ok_or_else(|| format!("expected one of {}", FuelUom::expected()))
    }
}

impl fmt::Display for FuelUom {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The basis of a gross calorific value.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum GcvUom {
    BtuPerLb,
    BtuPerGal,
    BtuPerScf,
}

impl GcvUom {
    pub const ALL: [GcvUom; 3] = [GcvUom::BtuPerLb, GcvUom::BtuPerGal, GcvUom::BtuPerScf];

    pub fn as_str(self) -> &'static str {
        match self {
            GcvUom::BtuPerLb => "btu/lb",
            GcvUom::BtuPerGal => "btu/gal",
            GcvUom::BtuPerScf => "btu/scf",
        }
    }

    /// The dimension of fuel quantity this GCV is per.
    pub fn dimension(self) -> Dimension {
        match self {
            GcvUom::BtuPerLb => Dimension::Mass,
            GcvUom::BtuPerGal => Dimension::LiquidVolume,
            GcvUom::BtuPerScf => Dimension::GasVolume,
        }
    }

    /// The base fuel unit the GCV is per.
    pub fn base_uom(self) -> FuelUom {
        match self {
            GcvUom::BtuPerLb => FuelUom::Lb,
            GcvUom::BtuPerGal => FuelUom::Gal,
            GcvUom::BtuPerScf => FuelUom::Scf,
        }
    }
}

impl FromStr for GcvUom {
    type Err = String;
    fn from_str(s: &str) -> Result<GcvUom, String> {
        GcvUom::ALL
            .into_iter()
            .find(|u| u.as_str() == s)
            .ok_or_else(|| "expected one of btu/lb, btu/gal, btu/scf".to_string())
    }
}

impl fmt::Display for GcvUom {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// A quantity of fuel in a stated unit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FuelAmount {
    pub amount: Decimal,
    pub uom: FuelUom,
}

impl fmt::Display for FuelAmount {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} {}", self.amount.normalize(), self.uom)
    }
}

/// Convert a fuel quantity to another unit, through the density where the
/// conversion crosses between mass and liquid volume.
///
/// Oil mass from volume and density: 40 CFR 75 App. D Eq. D-3
/// (OILrate = Voil × Doil). Gas volume converts only to gas volume.
pub fn convert(
    amount: FuelAmount,
    to: FuelUom,
    density_lb_per_gal: Option<Decimal>,
) -> Result<Decimal, CalcError> {
    let from_dim = amount.uom.dimension();
    let to_dim = to.dimension();
    let in_base = amount.amount * amount.uom.base_units();
    let target_base = match (from_dim, to_dim) {
        (a, b) if a == b => in_base,
        (Dimension::LiquidVolume, Dimension::Mass) => {
            in_base * density(amount, to, density_lb_per_gal)?
        }
        (Dimension::Mass, Dimension::LiquidVolume) => {
            in_base / density(amount, to, density_lb_per_gal)?
        }
        _ => {
            return Err(CalcError::Unreachable {
                from: amount.uom,
                to,
            })
        }
    };
    Ok(target_base / to.base_units())
}

fn density(
    amount: FuelAmount,
    to: FuelUom,
    density_lb_per_gal: Option<Decimal>,
) -> Result<Decimal, CalcError> {
    match density_lb_per_gal {
        Some(d) if d > Decimal::ZERO => Ok(d),
        _ => Err(CalcError::NeedsDensity {
            from: amount.uom,
            to,
        }),
    }
}
