//! Fuel-based methods: heat input, SO2, NOx and CO2 from a quantity of fuel
//! burned and the analysis of a sample of it.
//!
//! Each function computes a record's total for its period. The App. D
//! equations are written per hour (rates × operating time); summed over a
//! period they reduce to the same product of quantity and analysis, which is
//! what is computed here.

use super::constants::{f_factors, GRAINS_PER_LB, MW_C, MW_CO2, SCF_PER_LB_MOLE, SO2_PER_S};
use super::fuel::{convert, Dimension, Fuel, FuelAmount, FuelUom, GcvUom};
use super::CalcError;
use crate::units::{Lb, LbPerMmbtu, Mmbtu, BTU_PER_MMBTU};
use rust_decimal::Decimal;
use rust_decimal_macros::dec;

/// The analysis of a fuel sample; `None` where the lab left a value empty.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Analysis {
    pub sulfur_pct: Option<Decimal>,
    pub sulfur_gr_per_100scf: Option<Decimal>,
    pub gcv: Option<Decimal>,
    pub gcv_uom: Option<GcvUom>,
    pub carbon_pct: Option<Decimal>,
    pub hydrogen_pct: Option<Decimal>,
    pub nitrogen_pct: Option<Decimal>,
    pub oxygen_pct: Option<Decimal>,
    pub density_lb_per_gal: Option<Decimal>,
}

fn need(
    value: Option<Decimal>,
    method: &'static str,
    field: &'static str,
) -> Result<Decimal, CalcError> {
    value.ok_or(CalcError::MissingInput { method, field })
}

/// Heat input of a quantity of fuel: quantity × GCV / 10^6.
///
/// Source: 40 CFR 75 App. D Eq. D-6 (gas, GCV per 100 scf) and Eq. D-8 (oil,
/// GCV per unit mass); App. F Eq. F-19 to F-21 (coal: tons × Btu/lb / 500 is
/// the same product). A volume measured against a GCV per lb, or a mass
/// against a GCV per gal, converts through the density (App. D Eq. D-3).
pub fn heat_input_mmbtu(burn: FuelAmount, analysis: &Analysis) -> Result<Mmbtu, CalcError> {
    const METHOD: &str = "heat input";
    let gcv = need(analysis.gcv, METHOD, "gcv")?;
    let gcv_uom = analysis.gcv_uom.ok_or(CalcError::MissingInput {
        method: METHOD,
        field: "gcv_uom",
    })?;
    let reachable = burn.uom.dimension() == gcv_uom.dimension()
        || (burn.uom.dimension() != Dimension::GasVolume
            && gcv_uom.dimension() != Dimension::GasVolume);
    if !reachable {
        return Err(CalcError::GcvBasis {
            gcv_uom,
            uom: burn.uom,
        });
    }
    let in_gcv_base = convert(burn, gcv_uom.base_uom(), analysis.density_lb_per_gal)?;
    Ok(Mmbtu(in_gcv_base * gcv / BTU_PER_MMBTU))
}

/// SO2 by fuel-sulfur mass balance, 2.0 lb SO2 per lb of sulfur.
///
/// Oil and solid fuel: lb fuel × (%S / 100) × 2.0 (40 CFR 75 App. D Eq. D-2,
/// with Eq. D-3 for oil measured by volume). Gas: (scf / 100) × (gr S per
/// 100 scf / 7000) × 2.0 (App. D Eq. D-4).
pub fn so2_fuel_sulfur_lb(burn: FuelAmount, analysis: &Analysis) -> Result<Lb, CalcError> {
    const METHOD: &str = "fuel-sulfur";
    if burn.uom.dimension() == Dimension::GasVolume {
        let sulfur_gr = need(
            analysis.sulfur_gr_per_100scf,
            METHOD,
            "sulfur_gr_per_100scf",
        )?;
        let hundreds_scf = convert(burn, FuelUom::Scf, None)? / dec!(100);
        Ok(Lb(hundreds_scf * sulfur_gr / GRAINS_PER_LB * SO2_PER_S))
    } else {
        let sulfur_pct = need(analysis.sulfur_pct, METHOD, "sulfur_pct")?;
        let fuel_lb = convert(burn, FuelUom::Lb, analysis.density_lb_per_gal)?;
        Ok(Lb(fuel_lb * sulfur_pct / dec!(100) * SO2_PER_S))
    }
}

/// Mass by an emission factor: factor (lb per `per` unit of fuel) × quantity
/// in that unit, times the sulfur weight percent where the factor says so.
///
/// Source: AP-42 Ch. 1 convention (AP-42 Tables 1.1-3, 1.3-1, 1.4-1): "S"
/// is the weight percent sulfur as fired, entered as 2.0 for 2.0 %.
pub fn emission_factor_lb(
    burn: FuelAmount,
    analysis: &Analysis,
    factor_lb: Decimal,
    per: FuelUom,
    times_sulfur: bool,
) -> Result<Lb, CalcError> {
    let in_per = convert(burn, per, analysis.density_lb_per_gal)?;
    let sulfur = if times_sulfur {
        need(
            analysis.sulfur_pct,
            "emission-factor with times_sulfur",
            "sulfur_pct",
        )?
    } else {
        Decimal::ONE
    };
    Ok(Lb(factor_lb * sulfur * in_per))
}

/// Mass by a default emission rate: rate × heat input.
///
/// Source: 40 CFR 75 App. D Eq. D-5 (SO2rate = ER × HIrate), and App. F
/// Eq. F-23 for the same product with CEMS heat input.
pub fn default_rate_lb(heat_input: Mmbtu, rate: LbPerMmbtu) -> Lb {
    Lb(rate.0 * heat_input.0)
}

/// CO2 from the carbon in the fuel: lb fuel × (%C / 100) × 44.0 / 12.0.
///
/// Source: 40 CFR 75 App. G §2.1, Eq. G-1 (all carbon burned is emitted as
/// CO2; MW CO2 44.0 and C 12.0). Gas volume needs a mass, which the
/// analysis columns cannot give, so it is refused.
pub fn co2_fuel_carbon_lb(burn: FuelAmount, analysis: &Analysis) -> Result<Lb, CalcError> {
    const METHOD: &str = "fuel-carbon";
    if burn.uom.dimension() == Dimension::GasVolume {
        return Err(CalcError::WrongDimension {
            method: METHOD,
            needs: "a fuel mass or liquid volume",
            uom: burn.uom,
        });
    }
    let carbon_pct = need(analysis.carbon_pct, METHOD, "carbon_pct")?;
    let fuel_lb = convert(burn, FuelUom::Lb, analysis.density_lb_per_gal)?;
    Ok(Lb(fuel_lb * carbon_pct / dec!(100) * MW_CO2 / MW_C))
}

/// CO2 from the carbon F-factor: Fc × heat input / 385 × 44.0, in lb.
///
/// Source: 40 CFR 75 App. G Eq. G-4 (tons = Fc × H × Uf × MW_CO2 / 2000,
/// Uf = 1/385 scf CO2 per lb-mole), Fc from App. F Table 1 by the fuel.
pub fn co2_fc_factor_lb(heat_input: Mmbtu, fuel: Fuel) -> Lb {
    let fc = f_factors(fuel).fc_scf_per_mmbtu;
    Lb(fc * heat_input.0 * MW_CO2 / SCF_PER_LB_MOLE)
}

#[cfg(test)]
#[path = "fuel_based_tests.rs"]
mod tests;
