//! A program's emissions: its pollutant over its season, all units of the
//! facility together, from the units' years the engine computed.
//!
//! Pounds are summed over the units first and turned into tons once
//! (40 CFR 75 App. F Eq. F-3: Σ lb / 2000), so no rounding enters before
//! the reconciliation rounds to whole tons.

use crate::compute::UnitYear;
use crate::emissions::method::Quantity;
use crate::site::{Pollutant, Program, Season};
use crate::units::{Lb, Tons};
use thiserror::Error;

#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum EmissionsError {
    #[error("program {program}: no unit of the facility has a {pollutant} method, so its emissions cannot be computed")]
    NotTracked {
        program: String,
        pollutant: &'static str,
    },
}

/// The engine's quantity for a program's pollutant.
pub fn quantity_of(pollutant: Pollutant) -> Quantity {
    match pollutant {
        Pollutant::So2 => Quantity::So2,
        Pollutant::Nox => Quantity::Nox,
    }
}

/// The program's emissions in tons over its season (the calendar year, or
/// May 1 to September 30, 40 CFR 72.2) summed over every unit that tracks
/// its pollutant. `None` when no stored record contributed: no fuel burned
/// that season, which a reconciliation counts as zero tons.
pub fn season_tons(program: &Program, units: &[UnitYear]) -> Result<Option<Tons>, EmissionsError> {
    let quantity = quantity_of(program.pollutant);
    if !units.iter().any(|u| u.unit.tracks(quantity)) {
        return Err(EmissionsError::NotTracked {
            program: program.id.clone(),
            pollutant: match program.pollutant {
                Pollutant::So2 => "so2",
                Pollutant::Nox => "nox",
            },
        });
    }
    let mut lb: Option<Lb> = None;
    for u in units {
        let amounts = match program.season {
            Season::Annual => u.year.annual(),
            Season::Ozone => u.year.ozone_season(),
        };
        if let Some(v) = amounts.get(quantity) {
            lb = Some(lb.unwrap_or(Lb::ZERO) + Lb(v));
        }
    }
    // Normalized as the annual report shows tons: 1200.5, not 1200.50.
    Ok(lb.map(|lb| Tons(lb.to_tons().0.normalize())))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::emissions::periods::{Amounts, Year};
    use rust_decimal_macros::dec;

    fn site() -> crate::site::Site {
        crate::site::parse(include_str!("../../samples/site.toml")).unwrap()
    }

    #[test]
    fn annual_and_ozone_season_sum_the_right_months_over_all_units() {
        let site = site();
        let mut years = Vec::new();
        // The first three units of the demo site file.
        for (i, unit) in site.units.iter().take(3).enumerate() {
            let mut year = Year::default();
            for month in 1..=12 {
                let mut a = Amounts::default();
                // 1000 lb SO2 and 200 lb NOx a month, for the first unit only twice that.
                let k = if i == 0 { 2 } else { 1 };
                a.set(Quantity::So2, dec!(1000) * rust_decimal::Decimal::from(k));
                a.set(Quantity::Nox, dec!(200) * rust_decimal::Decimal::from(k));
                year.add_month(month, a);
            }
            years.push(UnitYear {
                unit,
                year,
                record_ids: vec![],
                hourly: None,
            });
        }
        let so2 = &site.programs[0];
        let nox = &site.programs[1];
        // Three units, 2 + 1 + 1 = 4 shares of 1000 lb over 12 months = 48,000 lb = 24 tons.
        assert_eq!(season_tons(so2, &years).unwrap(), Some(Tons(dec!(24))));
        // Ozone season May to September (40 CFR 72.2): 5 months × 4 × 200 lb = 4,000 lb = 2 tons.
        assert_eq!(season_tons(nox, &years).unwrap(), Some(Tons(dec!(2))));
    }

    #[test]
    fn no_records_is_none_and_no_method_is_refused() {
        let site = site();
        let years: Vec<UnitYear> = site
            .units
            .iter()
            .map(|unit| UnitYear {
                unit,
                year: Year::default(),
                record_ids: vec![],
                hourly: None,
            })
            .collect();
        assert_eq!(season_tons(&site.programs[0], &years).unwrap(), None);
        assert!(matches!(
            season_tons(&site.programs[0], &[]),
            Err(EmissionsError::NotTracked { .. })
        ));
    }
}
