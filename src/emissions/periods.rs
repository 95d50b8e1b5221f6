//! Sums of a unit's quantities by month, quarter, year and ozone season.

use super::method::Quantity;
use crate::units::{Lb, Mmbtu};
use rust_decimal::Decimal;
use std::ops::{Add, AddAssign};

/// One figure per quantity: heat input in MMBtu, SO2, NOx and CO2 in lb.
/// `None` means the quantity is not tracked (absent), never zero.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Amounts([Option<Decimal>; 4]);

impl Amounts {
    pub fn get(&self, q: Quantity) -> Option<Decimal> {
        self.0[q.index()]
    }

    pub fn set(&mut self, q: Quantity, value: Decimal) {
        self.0[q.index()] = Some(value);
    }

    pub fn heat_input(&self) -> Option<Mmbtu> {
        self.get(Quantity::HeatInput).map(Mmbtu)
    }

    pub fn so2(&self) -> Option<Lb> {
        self.get(Quantity::So2).map(Lb)
    }

    pub fn nox(&self) -> Option<Lb> {
        self.get(Quantity::Nox).map(Lb)
    }

    pub fn co2(&self) -> Option<Lb> {
        self.get(Quantity::Co2).map(Lb)
    }
}

impl Add for Amounts {
    type Output = Amounts;
    /// A tracked quantity plus an absent one is the tracked one: absence
    /// only survives a sum where every part is absent.
    fn add(self, rhs: Amounts) -> Amounts {
        let mut out = Amounts::default();
        for i in 0..4 {
            out.0[i] = match (self.0[i], rhs.0[i]) {
                (None, None) => None,
                (a, b) => Some(a.unwrap_or_default() + b.unwrap_or_default()),
            };
        }
        out
    }
}

impl AddAssign for Amounts {
    fn add_assign(&mut self, rhs: Amounts) {
        *self = *self + rhs;
    }
}

/// First and last month of the ozone season, May 1 to September 30 (40 CFR 72.2).
pub const OZONE_MONTHS: std::ops::RangeInclusive<u32> = 5..=9;

/// A year of amounts by calendar month.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Year {
    pub months: [Amounts; 12],
}

impl Year {
    /// Add an amount to month `month` (1 to 12).
    pub fn add_month(&mut self, month: u32, amounts: Amounts) {
        self.months[(month - 1) as usize] += amounts;
    }

    pub fn month(&self, month: u32) -> Amounts {
        self.months[(month - 1) as usize]
    }

    fn sum(&self, months: impl Iterator<Item = u32>) -> Amounts {
        months
            .map(|m| self.month(m))
            .fold(Amounts::default(), Add::add)
    }

    /// Calendar quarter `q` (1 to 4).
    pub fn quarter(&self, q: u32) -> Amounts {
        self.sum(3 * q - 2..=3 * q)
    }

    pub fn annual(&self) -> Amounts {
        self.sum(1..=12)
    }

    pub fn ozone_season(&self) -> Amounts {
        self.sum(OZONE_MONTHS)
    }
}

impl Add for Year {
    type Output = Year;
    fn add(mut self, rhs: Year) -> Year {
        for (a, b) in self.months.iter_mut().zip(rhs.months) {
            *a += b;
        }
        self
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rust_decimal_macros::dec;

    fn so2(v: Decimal) -> Amounts {
        let mut a = Amounts::default();
        a.set(Quantity::So2, v);
        a
    }

    #[test]
    fn quarters_and_ozone_season_cover_the_right_months() {
        let mut y = Year::default();
        for m in 1..=12 {
            y.add_month(m, so2(Decimal::from(m)));
        }
        assert_eq!(y.quarter(1).get(Quantity::So2), Some(dec!(6)));
        assert_eq!(y.quarter(4).get(Quantity::So2), Some(dec!(33)));
        assert_eq!(y.annual().get(Quantity::So2), Some(dec!(78)));
        // Ozone season May 1 to September 30 (40 CFR 72.2): months 5 to 9.
        assert_eq!(y.ozone_season().get(Quantity::So2), Some(dec!(35)));
    }

    #[test]
    fn an_untracked_quantity_stays_absent_not_zero() {
        let mut y = Year::default();
        y.add_month(3, so2(dec!(1)));
        assert_eq!(y.annual().get(Quantity::Nox), None);
        assert_eq!(y.quarter(2).get(Quantity::So2), None);
    }
}
