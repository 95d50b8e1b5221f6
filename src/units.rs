//! Quantity newtypes over `Decimal`, one per unit of measure.
//!
//! Every stored or computed quantity is a `Decimal`: no binary floating point
//! ever holds a figure, so NaN and infinity cannot enter. Conversions go only
//! through the named functions here or in `emissions/`.

use rust_decimal::{Decimal, RoundingStrategy};
use serde::Serialize;
use std::fmt;
use std::iter::Sum;
use std::ops::{Add, AddAssign};

/// Pounds per short ton (common practice; 40 CFR 75 App. F Eq. F-3 divides by 2000).
pub const LB_PER_TON: Decimal = Decimal::from_parts(LB_PER_TON_U32, 0, 0, false, 0);
/// [`LB_PER_TON`] as an integer, for exact sums (src/exact_sum.rs).
pub const LB_PER_TON_U32: u32 = 2000;
/// Btu per MMBtu (40 CFR 75 App. D Eq. D-6 and D-8 divide by 10^6).
pub const BTU_PER_MMBTU: Decimal = Decimal::from_parts(1_000_000, 0, 0, false, 0);

macro_rules! quantity {
    ($(#[$doc:meta])* $name:ident, $uom:literal) => {
        $(#[$doc])*
        #[derive(Clone, Copy, Debug, Default, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
        #[serde(transparent)]
        pub struct $name(pub Decimal);

        impl $name {
            pub const ZERO: $name = $name(Decimal::ZERO);
            /// The unit of measure, as printed in reports and explanations.
            pub const UOM: &'static str = $uom;

            /// Round for reading, with an explicit strategy. Callers cite their rule.
            pub fn round(self, dp: u32, strategy: RoundingStrategy) -> $name {
                $name(self.0.round_dp_with_strategy(dp, strategy))
            }
        }

        impl Add for $name {
            type Output = $name;
            fn add(self, rhs: $name) -> $name {
                $name(self.0 + rhs.0)
            }
        }

        impl AddAssign for $name {
            fn add_assign(&mut self, rhs: $name) {
                self.0 += rhs.0;
            }
        }

        impl Sum for $name {
            fn sum<I: Iterator<Item = $name>>(iter: I) -> $name {
                iter.fold($name::ZERO, Add::add)
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                write!(f, "{} {}", self.0.normalize(), $uom)
            }
        }
    };
}

quantity!(
    /// Heat input, million British thermal units.
    Mmbtu,
    "MMBtu"
);
quantity!(
    /// Mass, pounds.
    Lb,
    "lb"
);
quantity!(
    /// Mass, short tons (2,000 lb).
    Tons,
    "tons"
);
quantity!(
    /// Emission rate, pounds per MMBtu of heat input.
    LbPerMmbtu,
    "lb/MMBtu"
);

quantity!(
    /// Mass rate, pounds per hour (40 CFR 75 App. F Eq. F-1, F-2).
    LbPerHr,
    "lb/hr"
);
quantity!(
    /// Heat input rate, MMBtu per hour (40 CFR 75 App. F Eq. F-15 to F-18).
    MmbtuPerHr,
    "MMBtu/hr"
);
quantity!(
    /// Mass rate, short tons per hour (40 CFR 75 App. F Eq. F-11).
    TonsPerHr,
    "tons/hr"
);

impl Lb {
    /// Pounds to short tons (40 CFR 75 App. F Eq. F-3: Σ lb / 2000).
    pub fn to_tons(self) -> Tons {
        Tons(self.0 / LB_PER_TON)
    }
}

impl Tons {
    /// Short tons to pounds (× 2000, common practice).
    pub fn to_lb(self) -> Lb {
        Lb(self.0 * LB_PER_TON)
    }
}

/// Heat-input-weighted emission rate: mass over heat input. `None` without heat input.
pub fn rate_lb_per_mmbtu(mass: Lb, heat_input: Mmbtu) -> Option<LbPerMmbtu> {
    if heat_input.0.is_zero() {
        None
    } else {
        Some(LbPerMmbtu(mass.0 / heat_input.0))
    }
}
