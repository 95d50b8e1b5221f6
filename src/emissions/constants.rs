//! Published constants, each with its source.

use super::fuel::Fuel;
use rust_decimal::Decimal;
use rust_decimal_macros::dec;

/// lb SO2 per lb of sulfur burned: 64 / 32 (40 CFR 75 App. D Eq. D-2 and D-4;
/// 40 CFR 72 App. B Table B-1 note).
pub const SO2_PER_S: Decimal = dec!(2.0);
/// Grains per pound (40 CFR 75 App. D Eq. D-1h and D-4).
pub const GRAINS_PER_LB: Decimal = dec!(7000);
/// Molecular weight of CO2 as used in 40 CFR 75 App. G (Eq. G-1 and G-4): 44.0.
pub const MW_CO2: Decimal = dec!(44.0);
/// Atomic weight of carbon as used in 40 CFR 75 App. G Eq. G-1: 12.0.
pub const MW_C: Decimal = dec!(12.0);
/// scf of CO2 per lb-mole at 14.7 psia and 68 °F (40 CFR 75 App. G Eq. G-4).
pub const SCF_PER_LB_MOLE: Decimal = dec!(385);

/// F-factors of 40 CFR 75 App. F Table 1 (§3.3.5), at 68 °F and 29.92 in Hg.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FFactors {
    /// Dry-basis F-factor, dscf of flue gas per MMBtu.
    pub f_dscf_per_mmbtu: Decimal,
    /// Carbon F-factor, scf of CO2 per MMBtu.
    pub fc_scf_per_mmbtu: Decimal,
}

/// The Table 1 row for a fuel (40 CFR 75 App. F §3.3.5, Table 1).
///
/// Both oils take the "Oil" row. `wood` takes the "Wood residue" row
/// (9,240 / 1,830); a plant burning bark needs a site-specific factor.
pub fn f_factors(fuel: Fuel) -> FFactors {
    let (f, fc) = match fuel {
        Fuel::Anthracite => (dec!(10100), dec!(1970)),
        Fuel::Bituminous => (dec!(9780), dec!(1800)),
        Fuel::Subbituminous => (dec!(9820), dec!(1840)),
        Fuel::Lignite => (dec!(9860), dec!(1910)),
        Fuel::ResidualOil | Fuel::DistillateOil => (dec!(9190), dec!(1420)),
        Fuel::NaturalGas => (dec!(8710), dec!(1040)),
        Fuel::Propane => (dec!(8710), dec!(1190)),
        Fuel::Wood => (dec!(9240), dec!(1830)),
    };
    FFactors {
        f_dscf_per_mmbtu: f,
        fc_scf_per_mmbtu: fc,
    }
}
