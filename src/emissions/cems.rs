//! Hourly continuous-monitor (CEMS) calculations of 40 CFR 75 App. F.
//!
//! Each published equation is one small pure function over `Decimal` whose
//! name carries its unit; `compute_hour` applies them to one unit-hour and
//! records, for every value, the equation and the numbers put in (a
//! [`Calc`]), so that an explanation can be printed later through
//! [`Calc::formula`] without a string being built on the per-hour path.
//!
//! Invariants: no I/O, no clock, no allocation per hour; each hourly value
//! is computed once. Equation forms follow docs REFERENCES.md §1 and §4:
//! the constants and variable lists are verified there, but most printed
//! forms are reconstructed ("form from memory"), and every Method 19 form is
//! from memory. Percentages enter as 5.0 for 5.0 % (App. A §2.1.1.1 note).

use super::constants::FFactors;
use super::method::Diluent;
use crate::decimal::{from_magnitude, POW10};
use crate::site::{Rounding, UnitKind};
use crate::units::{Lb, LbPerHr, LbPerMmbtu, Mmbtu, MmbtuPerHr, Tons, TonsPerHr};
use rust_decimal::{Decimal, RoundingStrategy};
use rust_decimal_macros::dec;
use std::fmt;

#[cfg(test)]
mod tests;

/// K of Eq. F-1 and F-2: 1.660 × 10⁻⁷ (lb/scf)/ppm SO2 (40 CFR 75 App. F §2.1).
/// The published value is used, not a re-derived one (REFERENCES.md §6).
pub const K_SO2_LB_PER_SCF_PPM: Decimal = dec!(0.0000001660);
/// K of Eq. F-5 and F-6: 1.194 × 10⁻⁷ (lb/dscf)/ppm NOx (40 CFR 75 App. F §3.1).
pub const K_NOX_LB_PER_SCF_PPM: Decimal = dec!(0.0000001194);
/// K of Eq. F-11: 5.7 × 10⁻⁷ (tons/scf)/% CO2 (40 CFR 75 App. F §4.1).
pub const K_CO2_TONS_PER_SCF_PCT: Decimal = dec!(0.00000057);
/// Percent O2 in ambient air, 20.9 (40 CFR 75 App. F Eq. F-5, F-14a, F-17, F-18).
pub const O2_AMBIENT_PCT: Decimal = dec!(20.9);
/// Heat input recorded when Eq. F-17 gives 0.0 MMBtu/hr or less (40 CFR 75 App. F §5.2).
pub const HEAT_INPUT_FLOOR_MMBTU_PER_HR: Decimal = dec!(1.0);

const HUNDRED: Decimal = dec!(100);

/// The moisture basis a concentration was measured on.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Basis {
    #[default]
    Wet,
    Dry,
}

impl Basis {
    pub fn as_str(self) -> &'static str {
        match self {
            Basis::Wet => "wet",
            Basis::Dry => "dry",
        }
    }
}

/// Moisture fraction Bws of Method 19 from percent moisture.
fn bws(h2o_pct: Decimal) -> Decimal {
    h2o_pct / HUNDRED
}

/// Dry fraction (100 − %H2O)/100 of a wet flue gas.
fn dry_fraction(h2o_pct: Decimal) -> Decimal {
    (HUNDRED - h2o_pct) / HUNDRED
}

// ---------------------------------------------------------------------------
// SO2 (App. F §2)

/// SO2 mass rate from a wet-basis concentration and wet flow.
///
/// Source: 40 CFR 75 App. F Eq. F-1, `Eh = K · Ch · Qh` (K and variables
/// verified, form from memory).
pub fn so2_lb_per_hr_f1(so2_ppm_wet: Decimal, flow_scfh_wet: Decimal) -> LbPerHr {
    LbPerHr(product(
        product(K_SO2_LB_PER_SCF_PPM, so2_ppm_wet),
        flow_scfh_wet,
    ))
}

/// SO2 mass rate from a dry-basis concentration, wet flow and moisture.
///
/// Source: 40 CFR 75 App. F Eq. F-2, `Eh = K · Chp · Qhs · (100 − %H2O)/100`
/// (K and variables verified, form from memory).
pub fn so2_lb_per_hr_f2(so2_ppm_dry: Decimal, flow_scfh_wet: Decimal, h2o_pct: Decimal) -> LbPerHr {
    LbPerHr(product(
        product(product(K_SO2_LB_PER_SCF_PPM, so2_ppm_dry), flow_scfh_wet),
        dry_fraction(h2o_pct),
    ))
}

// ---------------------------------------------------------------------------
// NOx emission rate (App. F §3, Method 19)

/// NOx rate, NOx and O2 both dry.
///
/// Source: 40 CFR 75 App. F Eq. F-5, `E = K · Ch · F · 20.9/(20.9 − %O2)`
/// (K verified, form from memory); Method 19 Eq. 19-1 is the same form.
pub fn nox_lb_per_mmbtu_f5(
    nox_ppm_dry: Decimal,
    o2_pct_dry: Decimal,
    f_dscf_per_mmbtu: Decimal,
) -> LbPerMmbtu {
    LbPerMmbtu(
        product(
            product(product(K_NOX_LB_PER_SCF_PPM, nox_ppm_dry), f_dscf_per_mmbtu),
            O2_AMBIENT_PCT,
        ) / (O2_AMBIENT_PCT - o2_pct_dry),
    )
}

/// NOx rate, NOx and CO2 on the same moisture basis.
///
/// Source: 40 CFR 75 App. F Eq. F-6, `E = K · Ch · Fc · 100/%CO2` (K
/// verified, form from memory); Method 19 Eq. 19-6 (dry) and 19-7 (wet)
/// have the same form.
pub fn nox_lb_per_mmbtu_f6(
    nox_ppm: Decimal,
    co2_pct: Decimal,
    fc_scf_per_mmbtu: Decimal,
) -> LbPerMmbtu {
    LbPerMmbtu(K_NOX_LB_PER_SCF_PPM * nox_ppm * fc_scf_per_mmbtu * HUNDRED / co2_pct)
}

/// NOx rate, NOx and O2 both wet, with stack moisture.
///
/// Source: Method 19 Eq. 19-3 (form from memory),
/// `E = Cws · Fd · 20.9/(20.9 · (1 − Bws) − %O2ws)`, Cws = K · ppm.
pub fn nox_lb_per_mmbtu_m19_3(
    nox_ppm_wet: Decimal,
    o2_pct_wet: Decimal,
    h2o_pct: Decimal,
    f_dscf_per_mmbtu: Decimal,
) -> LbPerMmbtu {
    let denominator = O2_AMBIENT_PCT * (Decimal::ONE - bws(h2o_pct)) - o2_pct_wet;
    LbPerMmbtu(K_NOX_LB_PER_SCF_PPM * nox_ppm_wet * f_dscf_per_mmbtu * O2_AMBIENT_PCT / denominator)
}

/// Eq. 19-3 with the diluent cap: %O2w replaced by `%O2dc · (100 − %H2O)/100`.
///
/// Source: 40 CFR 75 App. F §3.3.4.2 ("Eq. 19-3D", verified text).
pub fn nox_lb_per_mmbtu_m19_3d(
    nox_ppm_wet: Decimal,
    o2_cap_pct_dry: Decimal,
    h2o_pct: Decimal,
    f_dscf_per_mmbtu: Decimal,
) -> LbPerMmbtu {
    nox_lb_per_mmbtu_m19_3(
        nox_ppm_wet,
        o2_cap_pct_dry * dry_fraction(h2o_pct),
        h2o_pct,
        f_dscf_per_mmbtu,
    )
}

/// NOx rate, NOx wet and O2 dry.
///
/// Source: Method 19 Eq. 19-4 (form from memory),
/// `E = Cws · Fd · 20.9/[(1 − Bws) · (20.9 − %O2d)]`.
pub fn nox_lb_per_mmbtu_m19_4(
    nox_ppm_wet: Decimal,
    o2_pct_dry: Decimal,
    h2o_pct: Decimal,
    f_dscf_per_mmbtu: Decimal,
) -> LbPerMmbtu {
    let denominator = (Decimal::ONE - bws(h2o_pct)) * (O2_AMBIENT_PCT - o2_pct_dry);
    LbPerMmbtu(K_NOX_LB_PER_SCF_PPM * nox_ppm_wet * f_dscf_per_mmbtu * O2_AMBIENT_PCT / denominator)
}

/// NOx rate, NOx dry and O2 wet.
///
/// Source: Method 19 Eq. 19-5 (form from memory, consistent with the
/// verified "19-5D" description), `E = Cd · Fd · 20.9/(20.9 − %O2ws/(1 − Bws))`.
pub fn nox_lb_per_mmbtu_m19_5(
    nox_ppm_dry: Decimal,
    o2_pct_wet: Decimal,
    h2o_pct: Decimal,
    f_dscf_per_mmbtu: Decimal,
) -> LbPerMmbtu {
    let denominator = O2_AMBIENT_PCT - o2_pct_wet / (Decimal::ONE - bws(h2o_pct));
    LbPerMmbtu(K_NOX_LB_PER_SCF_PPM * nox_ppm_dry * f_dscf_per_mmbtu * O2_AMBIENT_PCT / denominator)
}

/// Eq. 19-5 with the diluent cap: denominator `20.9 − %O2dc`.
///
/// Source: 40 CFR 75 App. F §3.3.4.2 ("Eq. 19-5D", verified text). It is
/// Eq. F-5 evaluated at the cap.
pub fn nox_lb_per_mmbtu_m19_5d(
    nox_ppm_dry: Decimal,
    o2_cap_pct_dry: Decimal,
    f_dscf_per_mmbtu: Decimal,
) -> LbPerMmbtu {
    nox_lb_per_mmbtu_f5(nox_ppm_dry, o2_cap_pct_dry, f_dscf_per_mmbtu)
}

/// NOx rate, NOx wet and CO2 dry.
///
/// Source: Method 19 Eq. 19-8 (form from memory),
/// `E = Cws · Fc · 100/[%CO2d · (1 − Bws)]`.
pub fn nox_lb_per_mmbtu_m19_8(
    nox_ppm_wet: Decimal,
    co2_pct_dry: Decimal,
    h2o_pct: Decimal,
    fc_scf_per_mmbtu: Decimal,
) -> LbPerMmbtu {
    let denominator = co2_pct_dry * (Decimal::ONE - bws(h2o_pct));
    LbPerMmbtu(K_NOX_LB_PER_SCF_PPM * nox_ppm_wet * fc_scf_per_mmbtu * HUNDRED / denominator)
}

/// NOx rate, NOx dry and CO2 wet.
///
/// Source: Method 19 Eq. 19-9 (form from memory),
/// `E = Cd · Fc · 100 · (1 − Bws)/%CO2w`.
pub fn nox_lb_per_mmbtu_m19_9(
    nox_ppm_dry: Decimal,
    co2_pct_wet: Decimal,
    h2o_pct: Decimal,
    fc_scf_per_mmbtu: Decimal,
) -> LbPerMmbtu {
    LbPerMmbtu(
        K_NOX_LB_PER_SCF_PPM
            * nox_ppm_dry
            * fc_scf_per_mmbtu
            * HUNDRED
            * (Decimal::ONE - bws(h2o_pct))
            / co2_pct_wet,
    )
}

/// The diluent cap values of 40 CFR 75 App. F §3.3.4.1 for a unit kind.
///
/// Boilers: 5.0 % CO2 / 14.0 % O2; stationary combustion turbines: 1.0 % CO2
/// / 19.0 % O2 (verified). The rule names only those two kinds, so a unit of
/// kind `other` has no cap.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct DiluentCap {
    pub co2_pct_min: Decimal,
    pub o2_pct_max: Decimal,
}

pub fn diluent_cap(kind: UnitKind) -> Option<DiluentCap> {
    match kind {
        UnitKind::Boiler => Some(DiluentCap {
            co2_pct_min: dec!(5.0),
            o2_pct_max: dec!(14.0),
        }),
        UnitKind::CombustionTurbine => Some(DiluentCap {
            co2_pct_min: dec!(1.0),
            o2_pct_max: dec!(19.0),
        }),
        UnitKind::Other => None,
    }
}

// ---------------------------------------------------------------------------
// CO2 (App. F §4)

/// CO2 mass rate from a wet CO2 concentration and wet flow.
///
/// Source: 40 CFR 75 App. F Eq. F-11, `Eh = K · Ch · Qh` (K verified, form
/// from memory).
pub fn co2_tons_per_hr_f11(co2_pct_wet: Decimal, flow_scfh_wet: Decimal) -> TonsPerHr {
    TonsPerHr(product(
        product(K_CO2_TONS_PER_SCF_PCT, co2_pct_wet),
        flow_scfh_wet,
    ))
}

/// CO2 mass rate from a dry CO2 concentration, wet flow and moisture.
///
/// Source: 40 CFR 75 App. F §4.1 text: the Eq. F-2 form with K = 5.7 × 10⁻⁷
/// and %CO2 dry (verified text, form from memory).
pub fn co2_tons_per_hr_f11_dry(
    co2_pct_dry: Decimal,
    flow_scfh_wet: Decimal,
    h2o_pct: Decimal,
) -> TonsPerHr {
    TonsPerHr(product(
        product(product(K_CO2_TONS_PER_SCF_PCT, co2_pct_dry), flow_scfh_wet),
        dry_fraction(h2o_pct),
    ))
}

/// CO2 (dry) from O2 (dry); a negative result records 0.0 %.
///
/// Source: 40 CFR 75 App. F Eq. F-14a, `CO2d = 100 · (Fc/F) · (20.9 − O2d)/20.9`
/// (form from memory); negative → 0.0 % (verified).
pub fn co2_pct_dry_f14a(o2_pct_dry: Decimal, f: FFactors) -> Decimal {
    let co2 = HUNDRED * (f.fc_scf_per_mmbtu / f.f_dscf_per_mmbtu) * (O2_AMBIENT_PCT - o2_pct_dry)
        / O2_AMBIENT_PCT;
    co2.max(Decimal::ZERO)
}

/// CO2 (wet) from O2 (wet) and moisture; a negative result records 0.0 %.
///
/// Source: 40 CFR 75 App. F Eq. F-14b,
/// `CO2w = (100/20.9) · (Fc/F) · [20.9 · (100 − %H2O)/100 − O2w]` (form from
/// memory); negative → 0.0 % (verified).
pub fn co2_pct_wet_f14b(o2_pct_wet: Decimal, h2o_pct: Decimal, f: FFactors) -> Decimal {
    let co2 = HUNDRED / O2_AMBIENT_PCT
        * (f.fc_scf_per_mmbtu / f.f_dscf_per_mmbtu)
        * (O2_AMBIENT_PCT * dry_fraction(h2o_pct) - o2_pct_wet);
    co2.max(Decimal::ZERO)
}

// ---------------------------------------------------------------------------
// Heat input (App. F §5)
//
// Each form is written as one product over one product of its inputs and
// constants, so that `Decimal` rounds once, in the division, instead of after
// each factor; the value is the same equation's to 28 significant digits.

/// Heat input rate from wet CO2 and wet flow.
///
/// Source: 40 CFR 75 App. F Eq. F-15, `HI = Qw · (1/Fc) · (%CO2w/100)` (form
/// from memory).
pub fn heat_input_mmbtu_per_hr_f15(
    flow_scfh_wet: Decimal,
    co2_pct_wet: Decimal,
    fc_scf_per_mmbtu: Decimal,
) -> MmbtuPerHr {
    MmbtuPerHr(flow_scfh_wet * co2_pct_wet / (fc_scf_per_mmbtu * HUNDRED))
}

/// Heat input rate from dry CO2, wet flow and moisture.
///
/// Source: 40 CFR 75 App. F Eq. F-16,
/// `HI = Qh · [(100 − %H2O)/(100 · Fc)] · (%CO2d/100)` (form from memory).
pub fn heat_input_mmbtu_per_hr_f16(
    flow_scfh_wet: Decimal,
    co2_pct_dry: Decimal,
    h2o_pct: Decimal,
    fc_scf_per_mmbtu: Decimal,
) -> MmbtuPerHr {
    MmbtuPerHr(
        flow_scfh_wet * (HUNDRED - h2o_pct) * co2_pct_dry / (HUNDRED * fc_scf_per_mmbtu * HUNDRED),
    )
}

/// Heat input rate from wet O2, wet flow and moisture, before the floor.
///
/// Source: 40 CFR 75 App. F Eq. F-17,
/// `HI = Qw · (1/F) · [(20.9/100) · (100 − %H2O) − %O2w]/20.9` (form from
/// memory). [`heat_input_floor`] applies the 1.0 MMBtu/hr floor.
pub fn heat_input_mmbtu_per_hr_f17(
    flow_scfh_wet: Decimal,
    o2_pct_wet: Decimal,
    h2o_pct: Decimal,
    f_dscf_per_mmbtu: Decimal,
) -> MmbtuPerHr {
    // (20.9/100)·(100 − %H2O) − %O2w = [20.9·(100 − %H2O) − 100·%O2w]/100.
    MmbtuPerHr(
        flow_scfh_wet * (O2_AMBIENT_PCT * (HUNDRED - h2o_pct) - HUNDRED * o2_pct_wet)
            / (HUNDRED * f_dscf_per_mmbtu * O2_AMBIENT_PCT),
    )
}

/// Heat input rate from dry O2, wet flow and moisture, before the floor.
///
/// Source: 40 CFR 75 App. F Eq. F-18,
/// `HI = Qw · [(100 − %H2O)/(100 · F)] · (20.9 − %O2d)/20.9` (form from memory).
pub fn heat_input_mmbtu_per_hr_f18(
    flow_scfh_wet: Decimal,
    o2_pct_dry: Decimal,
    h2o_pct: Decimal,
    f_dscf_per_mmbtu: Decimal,
) -> MmbtuPerHr {
    MmbtuPerHr(
        product(
            product(flow_scfh_wet, HUNDRED - h2o_pct),
            O2_AMBIENT_PCT - o2_pct_dry,
        ) / product(product(HUNDRED, f_dscf_per_mmbtu), O2_AMBIENT_PCT),
    )
}

/// The recorded heat input rate: 1.0 MMBtu/hr where the equation gives 0.0 or less.
///
/// Source: 40 CFR 75 App. F §5.2, stated for Eq. F-17 (verified). We apply
/// it to both O2 forms (F-17 and F-18), since both reach zero the same way
/// (O2 near ambient at very low load); the CO2 forms F-15/F-16 are not floored.
pub fn heat_input_floor(heat_input: MmbtuPerHr) -> MmbtuPerHr {
    if heat_input.0 <= Decimal::ZERO {
        MmbtuPerHr(HEAT_INPUT_FLOOR_MMBTU_PER_HR)
    } else {
        heat_input
    }
}

// ---------------------------------------------------------------------------
// Hourly masses

/// `a × b`, exactly as `Decimal`'s `*` gives it, without its general
/// multiply where the product is exact: both mantissas' product within 96
/// bits and the scales' sum within 28 is the result `*` gives, digit for
/// digit and scale for scale (`*` rounds only beyond those limits, and
/// gives zero at scale 0, which is left to it). A proptest checks the two
/// agree bit for bit.
#[inline]
pub fn product(a: Decimal, b: Decimal) -> Decimal {
    let scale = a.scale() + b.scale();
    let (ua, ub) = (a.mantissa().unsigned_abs(), b.mantissa().unsigned_abs());
    // Mantissas within 64 bits: one widening multiply, no overflow.
    if scale <= Decimal::MAX_SCALE && ua >> 64 == 0 && ub >> 64 == 0 {
        let u = ua * ub;
        if u != 0 && u < 1u128 << 96 {
            return from_magnitude(u, a.is_sign_negative() != b.is_sign_negative(), scale);
        }
    }
    a * b
}

/// `value × op_time_hr`, exactly as `Decimal`'s `*` gives it, without its
/// general multiply where the hour is a full one written `1.00` (most hours).
///
/// For t = 1.00 (mantissa 100, scale 2) the product m·100 at scale s + 2
/// loses only zeros when `Decimal` brings it within 96 bits and 28 decimals:
/// the result is m·10^k at scale s + k for the largest k ≤ 2 with
/// |m|·10^k < 2^96 and s + k ≤ 28, and zero is zero at scale 0. Any other
/// operating time takes `*`. A proptest checks the two agree bit for bit.
pub fn times_op_time(value: Decimal, op_time_hr: Decimal) -> Decimal {
    if op_time_hr.scale() != 2 || op_time_hr.mantissa() != 100 || value.is_zero() {
        return product(value, op_time_hr);
    }
    let u = value.mantissa().unsigned_abs();
    let s = value.scale();
    let fits = |k: u32| s + k <= Decimal::MAX_SCALE && u * POW10[k as usize] < 1u128 << 96;
    let k = if fits(2) {
        2
    } else if fits(1) {
        1
    } else {
        0
    };
    from_magnitude(u * POW10[k as usize], value.is_sign_negative(), s + k)
}

/// SO2 mass of the hour: rate × operating time (the Eh · th term of 40 CFR 75 App. F Eq. F-3).
pub fn so2_lb(rate: LbPerHr, op_time_hr: Decimal) -> Lb {
    Lb(times_op_time(rate.0, op_time_hr))
}

/// CO2 mass of the hour: rate × operating time (the Eh · th term of 40 CFR 75 App. F Eq. F-12).
pub fn co2_tons(rate: TonsPerHr, op_time_hr: Decimal) -> Tons {
    Tons(times_op_time(rate.0, op_time_hr))
}

/// Heat input of the hour: rate × operating time (the HIi · ti term of 40 CFR 75 App. F §5.2 quarterly sum).
pub fn heat_input_mmbtu(rate: MmbtuPerHr, op_time_hr: Decimal) -> Mmbtu {
    Mmbtu(times_op_time(rate.0, op_time_hr))
}

/// NOx mass of the hour.
///
/// Source: 40 CFR 75 App. F Eq. F-24, `M = ER · HI · t` (form from memory).
pub fn nox_lb_f24(rate: LbPerMmbtu, heat_input: MmbtuPerHr, op_time_hr: Decimal) -> Lb {
    Lb(times_op_time(rate.0 * heat_input.0, op_time_hr))
}

// ---------------------------------------------------------------------------
// Site-specific and blended F-factors (App. F §3.3.6)

/// Weight percents of an ultimate analysis, on the same basis as the GCV.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct UltimateAnalysis {
    pub hydrogen_pct: Decimal,
    pub carbon_pct: Decimal,
    pub sulfur_pct: Decimal,
    pub nitrogen_pct: Decimal,
    pub oxygen_pct: Decimal,
    pub gcv_btu_per_lb: Decimal,
}

/// Site-specific dry F-factor from an ultimate analysis.
///
/// Source: 40 CFR 75 App. F §3.3.6, Eq. F-7a,
/// `F = 10⁶ · [3.64 %H + 1.53 %C + 0.57 %S + 0.14 %N − 0.46 %O]/GCV`. The
/// coefficients are from memory (the equation is an image in every stored
/// copy; they match Method 19 Eq. 19-13, also from memory).
pub fn f_dscf_per_mmbtu_f7a(a: &UltimateAnalysis) -> Decimal {
    let sum = dec!(3.64) * a.hydrogen_pct
        + dec!(1.53) * a.carbon_pct
        + dec!(0.57) * a.sulfur_pct
        + dec!(0.14) * a.nitrogen_pct
        - dec!(0.46) * a.oxygen_pct;
    dec!(1000000) * sum / a.gcv_btu_per_lb
}

/// Site-specific carbon F-factor from an ultimate analysis.
///
/// Source: 40 CFR 75 App. F §3.3.6, Eq. F-7b, `Fc = 10⁶ · 0.321 %C/GCV`
/// (coefficient from memory).
pub fn fc_scf_per_mmbtu_f7b(a: &UltimateAnalysis) -> Decimal {
    dec!(1000000) * dec!(0.321) * a.carbon_pct / a.gcv_btu_per_lb
}

/// Site-specific F and Fc from an ultimate analysis (Eq. F-7a and F-7b).
pub fn site_f_factors(a: &UltimateAnalysis) -> FFactors {
    FFactors {
        f_dscf_per_mmbtu: f_dscf_per_mmbtu_f7a(a),
        fc_scf_per_mmbtu: fc_scf_per_mmbtu_f7b(a),
    }
}

/// F-factors of a blend, weighted by each fuel's fraction of heat input.
///
/// Source: 40 CFR 75 App. F §3.3.6.4, `F = Σ Xi · Fi`, `Fc = Σ Xi · Fci`
/// (variables verified, form and the number "F-8" from memory). The
/// fractions should sum to 1; the caller checks its own data.
pub fn blended_f_factors(parts: &[(Decimal, FFactors)]) -> FFactors {
    let mut out = FFactors {
        f_dscf_per_mmbtu: Decimal::ZERO,
        fc_scf_per_mmbtu: Decimal::ZERO,
    };
    for (x, f) in parts {
        out.f_dscf_per_mmbtu += *x * f.f_dscf_per_mmbtu;
        out.fc_scf_per_mmbtu += *x * f.fc_scf_per_mmbtu;
    }
    out
}

// ---------------------------------------------------------------------------
// Rounding profiles

/// Decimal places of the `part75` profile, in one place with their rules.
///
/// SO2 mass rate: nearest 0.1 lb/hr ("round all SO2 mass emission rates and
/// totals to the nearest tenth", 40 CFR 75 App. F §2.4). NOx rate: nearest
/// 0.001 lb/MMBtu (App. F §3.5). No rounding rule for heat input or CO2 was
/// found in App. F (REFERENCES.md open item 5), so our convention is to
/// round only what App. F states: heat input, CO2 and the masses derived
/// from rates stay exact under `part75` too. "Nearest" rounds a midpoint
/// away from zero.
pub const PART75_SO2_LB_PER_HR_DP: u32 = 1;
pub const PART75_NOX_LB_PER_MMBTU_DP: u32 = 3;

/// Which hourly value a rounding applies to.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Rounded {
    So2LbPerHr,
    NoxLbPerMmbtu,
}

/// Decimal places a profile rounds a value to; `None` leaves it exact.
pub fn rounding_dp(rounding: Rounding, what: Rounded) -> Option<u32> {
    match (rounding, what) {
        (Rounding::Exact, _) => None,
        (Rounding::Part75, Rounded::So2LbPerHr) => Some(PART75_SO2_LB_PER_HR_DP),
        (Rounding::Part75, Rounded::NoxLbPerMmbtu) => Some(PART75_NOX_LB_PER_MMBTU_DP),
    }
}

/// Apply a profile to an hourly value (40 CFR 75 App. F §2.4, §3.5 under `part75`).
pub fn part75_round(rounding: Rounding, what: Rounded, value: Decimal) -> Decimal {
    match rounding_dp(rounding, what) {
        Some(dp) => value.round_dp_with_strategy(dp, RoundingStrategy::MidpointAwayFromZero),
        None => value,
    }
}

// ---------------------------------------------------------------------------
// Explanations

/// The equation that produced a value, with its citation and printed form.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Equation {
    F1,
    F2,
    F5,
    F6,
    M19_3,
    M19_3D,
    M19_4,
    M19_5,
    M19_5D,
    M19_8,
    M19_9,
    F11,
    F11Dry,
    F14a,
    F14b,
    F15,
    F16,
    F17,
    F18,
    So2Mass,
    Co2Mass,
    HeatInputAmount,
    F24,
    /// A value put in place of a missing reading (see `substitute`).
    Substituted,
}

impl Equation {
    /// The citation, as reports and `explain` print it.
    pub fn citation(self) -> &'static str {
        match self {
            Equation::F1 => "40 CFR 75 App. F Eq. F-1",
            Equation::F2 => "40 CFR 75 App. F Eq. F-2",
            Equation::F5 => "40 CFR 75 App. F Eq. F-5",
            Equation::F6 => "40 CFR 75 App. F Eq. F-6",
            Equation::M19_3 => "Method 19 Eq. 19-3 (40 CFR 75 App. F §3.3)",
            Equation::M19_3D => "Method 19 Eq. 19-3D (40 CFR 75 App. F §3.3.4.2)",
            Equation::M19_4 => "Method 19 Eq. 19-4 (40 CFR 75 App. F §3.3)",
            Equation::M19_5 => "Method 19 Eq. 19-5 (40 CFR 75 App. F §3.3)",
            Equation::M19_5D => "Method 19 Eq. 19-5D (40 CFR 75 App. F §3.3.4.2)",
            Equation::M19_8 => "Method 19 Eq. 19-8 (40 CFR 75 App. F §3.3)",
            Equation::M19_9 => "Method 19 Eq. 19-9 (40 CFR 75 App. F §3.3)",
            Equation::F11 => "40 CFR 75 App. F Eq. F-11",
            Equation::F11Dry => "40 CFR 75 App. F §4.1 (Eq. F-2 form with the CO2 K)",
            Equation::F14a => "40 CFR 75 App. F Eq. F-14a",
            Equation::F14b => "40 CFR 75 App. F Eq. F-14b",
            Equation::F15 => "40 CFR 75 App. F Eq. F-15",
            Equation::F16 => "40 CFR 75 App. F Eq. F-16",
            Equation::F17 => "40 CFR 75 App. F Eq. F-17",
            Equation::F18 => "40 CFR 75 App. F Eq. F-18",
            Equation::So2Mass => "40 CFR 75 App. F Eq. F-3 (Eh × th)",
            Equation::Co2Mass => "40 CFR 75 App. F Eq. F-12 (Eh × th)",
            Equation::HeatInputAmount => "40 CFR 75 App. F §5.2 (HIi × ti)",
            Equation::F24 => "40 CFR 75 App. F Eq. F-24",
            Equation::Substituted => "40 CFR 75.31 / 75.33 substitute value",
        }
    }

    /// The equation in symbols, then its numeric template (`{}` per argument).
    fn forms(self) -> (&'static str, &'static str) {
        match self {
            Equation::F1 => ("Eh = K · Ch · Qh", "{} × {} × {}"),
            Equation::F2 => (
                "Eh = K · Chp · Qhs · (100 − %H2O)/100",
                "{} × {} × {} × (100 − {})/100",
            ),
            Equation::F5 => (
                "E = K · Ch · F · 20.9/(20.9 − %O2)",
                "{} × {} × {} × 20.9/(20.9 − {})",
            ),
            Equation::F6 => ("E = K · Ch · Fc · 100/%CO2", "{} × {} × {} × 100/{}"),
            Equation::M19_3 => (
                "E = K · Cws · Fd · 20.9/(20.9 · (1 − %H2O/100) − %O2w)",
                "{} × {} × {} × 20.9/(20.9 × (1 − {}/100) − {})",
            ),
            Equation::M19_3D => (
                "E = K · Cws · Fd · 20.9/(20.9 · (1 − %H2O/100) − %O2dc · (100 − %H2O)/100)",
                "{} × {} × {} × 20.9/(20.9 × (1 − {}/100) − {} × (100 − {})/100)",
            ),
            Equation::M19_4 => (
                "E = K · Cws · Fd · 20.9/((1 − %H2O/100) · (20.9 − %O2d))",
                "{} × {} × {} × 20.9/((1 − {}/100) × (20.9 − {}))",
            ),
            Equation::M19_5 => (
                "E = K · Cd · Fd · 20.9/(20.9 − %O2w/(1 − %H2O/100))",
                "{} × {} × {} × 20.9/(20.9 − {}/(1 − {}/100))",
            ),
            Equation::M19_5D => (
                "E = K · Cd · Fd · 20.9/(20.9 − %O2dc)",
                "{} × {} × {} × 20.9/(20.9 − {})",
            ),
            Equation::M19_8 => (
                "E = K · Cws · Fc · 100/(%CO2d · (1 − %H2O/100))",
                "{} × {} × {} × 100/({} × (1 − {}/100))",
            ),
            Equation::M19_9 => (
                "E = K · Cd · Fc · 100 · (1 − %H2O/100)/%CO2w",
                "{} × {} × {} × 100 × (1 − {}/100)/{}",
            ),
            Equation::F11 => ("Eh = K · Ch · Qh", "{} × {} × {}"),
            Equation::F11Dry => (
                "Eh = K · Chp · Qh · (100 − %H2O)/100",
                "{} × {} × {} × (100 − {})/100",
            ),
            Equation::F14a => (
                "CO2d = 100 · (Fc/F) · (20.9 − O2d)/20.9",
                "100 × ({}/{}) × (20.9 − {})/20.9",
            ),
            Equation::F14b => (
                "CO2w = (100/20.9) · (Fc/F) · (20.9 · (100 − %H2O)/100 − O2w)",
                "(100/20.9) × ({}/{}) × (20.9 × (100 − {})/100 − {})",
            ),
            Equation::F15 => ("HI = Qw · (1/Fc) · (%CO2w/100)", "{} × (1/{}) × ({}/100)"),
            Equation::F16 => (
                "HI = Qh · ((100 − %H2O)/(100 · Fc)) · (%CO2d/100)",
                "{} × ((100 − {})/(100 × {})) × ({}/100)",
            ),
            Equation::F17 => (
                "HI = Qw · (1/F) · ((20.9/100) · (100 − %H2O) − %O2w)/20.9",
                "{} × (1/{}) × ((20.9/100) × (100 − {}) − {})/20.9",
            ),
            Equation::F18 => (
                "HI = Qw · ((100 − %H2O)/(100 · F)) · (20.9 − %O2d)/20.9",
                "{} × ((100 − {})/(100 × {})) × (20.9 − {})/20.9",
            ),
            Equation::So2Mass | Equation::Co2Mass | Equation::HeatInputAmount => {
                ("M = E · t", "{} × {}")
            }
            Equation::F24 => ("M = ER · HI · t", "{} × {} × {}"),
            Equation::Substituted => ("substitute value", "{}"),
        }
    }

    /// How many numbers the numeric template takes.
    pub fn arity(self) -> usize {
        self.forms().1.matches("{}").count()
    }
}

/// The most numbers any equation takes (Eq. 19-3D: six).
pub const ARGS_MAX: usize = 6;

/// One computed hourly value: the value recorded, the equation and the
/// numbers put in, and what was done to the equation's result.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Calc {
    /// The value recorded for the hour, after floor and rounding.
    pub value: Decimal,
    /// The equation's result before floor and rounding.
    pub computed: Decimal,
    pub equation: Equation,
    /// The numbers in the order of the equation's template; unused slots are zero.
    pub args: [Decimal; ARGS_MAX],
    /// The measured diluent where a §3.3.4.1 cap replaced it.
    pub cap_replaced_pct: Option<Decimal>,
    /// Decimal places the rounding profile applied, if any.
    pub rounded_dp: Option<u32>,
    /// The 1.0 MMBtu/hr floor of App. F §5.2 was applied.
    pub floored: bool,
    /// An F-14 result was negative and 0.0 % was recorded (App. F §4.1).
    pub clamped_to_zero: bool,
    /// A moisture or diluent input came from the gap rule of [`GapBounds`].
    pub filled_input: bool,
}

impl Calc {
    fn new(equation: Equation, args: &[Decimal], computed: Decimal) -> Calc {
        debug_assert_eq!(args.len(), equation.arity(), "{equation:?}");
        let mut a = [Decimal::ZERO; ARGS_MAX];
        a[..args.len()].copy_from_slice(args);
        Calc {
            value: computed,
            computed,
            equation,
            args: a,
            cap_replaced_pct: None,
            rounded_dp: None,
            floored: false,
            clamped_to_zero: false,
            filled_input: false,
        }
    }

    fn rounded(mut self, rounding: Rounding, what: Rounded) -> Calc {
        if let Some(dp) = rounding_dp(rounding, what) {
            self.value = part75_round(rounding, what, self.value);
            self.rounded_dp = Some(dp);
        }
        self
    }

    /// The formula with the numbers put in, printed on demand.
    pub fn formula(&self) -> Formula<'_> {
        Formula(self)
    }
}

/// Display of a [`Calc`]: equation, numbers, result and adjustments.
pub struct Formula<'a>(&'a Calc);

impl fmt::Display for Formula<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let c = self.0;
        let (symbols, template) = c.equation.forms();
        write!(f, "{}: {} = ", c.equation.citation(), symbols)?;
        let mut args = c.args.iter();
        let mut pieces = template.split("{}");
        if let Some(first) = pieces.next() {
            f.write_str(first)?;
        }
        for piece in pieces {
            let arg = args.next().expect("template arity within ARGS_MAX");
            write!(f, "{}{}", arg.normalize(), piece)?;
        }
        write!(f, " = {}", c.computed.normalize())?;
        if let Some(measured) = c.cap_replaced_pct {
            write!(
                f,
                "; diluent cap of 40 CFR 75 App. F §3.3.4.1 replaced the measured {}",
                measured.normalize()
            )?;
        }
        if c.clamped_to_zero {
            f.write_str("; negative, recorded as 0.0 % (App. F §4.1)")?;
        }
        if c.floored {
            f.write_str("; at or below zero, recorded as 1.0 MMBtu/hr (App. F §5.2)")?;
        }
        if c.filled_input {
            f.write_str("; a missing moisture or diluent reading took its conservative bound")?;
        }
        if let Some(dp) = c.rounded_dp {
            write!(
                f,
                "; rounded to {dp} decimals (part75) = {}",
                c.value.normalize()
            )?;
        }
        Ok(())
    }
}

// ---------------------------------------------------------------------------
// One unit-hour

/// The readings of one unit-hour; `None` is an empty cell.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct HourInput {
    /// Unit operating time, 0.00 to 1.00 hour.
    pub op_time_hr: Decimal,
    pub load_mw: Option<Decimal>,
    pub so2_ppm: Option<Decimal>,
    pub nox_ppm: Option<Decimal>,
    pub o2_pct: Option<Decimal>,
    pub co2_pct: Option<Decimal>,
    pub flow_scfh_wet: Option<Decimal>,
    pub h2o_pct: Option<Decimal>,
}

/// The moisture basis of each concentration column of a unit's data.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Bases {
    pub so2: Basis,
    pub nox: Basis,
    pub o2: Basis,
    pub co2: Basis,
}

/// Which of a unit's quantities are computed from monitors.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Computes {
    pub heat_input: bool,
    pub so2: bool,
    pub nox: bool,
    pub co2: bool,
}

/// Conservative values for missing moisture and diluent readings.
///
/// Our rule (documented, not a quotation of §75.31 or §75.37): a missing
/// moisture reading takes whichever bound makes the equation it enters
/// larger, the minimum where moisture divides a result down (Eq. F-2, F-11
/// dry, F-14b, F-16, F-17, F-18, 19-9) and the maximum where it raises one
/// (Eq. 19-3, 19-4, 19-5, 19-8, as §75.31 asks for Eq. 19-3/19-4/19-8). A
/// missing diluent reading used for heat input or CO2 takes the minimum
/// potential O2 or the maximum potential CO2, which raise both. Each bound
/// is on the basis of the unit's column. A missing diluent never fills a NOx
/// rate: the NOx rate of that hour is missing and substituted as a whole.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct GapBounds {
    pub h2o_pct_min: Decimal,
    pub h2o_pct_max: Decimal,
    pub o2_pct_min: Decimal,
    pub co2_pct_max: Decimal,
}

/// A unit's fixed parameters for the CEMS equations.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct CemsUnit {
    pub kind: UnitKind,
    /// Table 1 factors of the unit's fuel (`f_factors`), or site-specific ones.
    pub f: FFactors,
    pub heat_input_diluent: Diluent,
    pub nox_diluent: Diluent,
    pub bases: Bases,
    /// The unit has no CO2 monitor: CO2 comes from O2 by Eq. F-14a/F-14b.
    pub co2_from_o2: bool,
    pub rounding: Rounding,
    pub computes: Computes,
    pub gap_bounds: GapBounds,
}

/// The values an hour is computed from, after the missing-data pass.
///
/// `resolve_readings` fills it from the readings alone; the substitution
/// pass then puts its values where readings were missing.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Resolved {
    pub so2_ppm: Option<Decimal>,
    pub flow_scfh_wet: Option<Decimal>,
    /// The NOx rate, measured (an equation) or substituted.
    pub nox_lb_per_mmbtu: Option<Calc>,
}

/// The results of one unit-hour. `None`: not computed (not by CEMS, not
/// operating, or an input missing and not filled).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct HourResult {
    pub heat_input_mmbtu_per_hr: Option<Calc>,
    pub heat_input_mmbtu: Option<Calc>,
    pub so2_lb_per_hr: Option<Calc>,
    pub so2_lb: Option<Calc>,
    pub nox_lb_per_mmbtu: Option<Calc>,
    pub nox_lb: Option<Calc>,
    /// CO2 derived from O2 (Eq. F-14a/F-14b), where it was needed.
    pub co2_pct_derived: Option<Calc>,
    pub co2_tons_per_hr: Option<Calc>,
    pub co2_tons: Option<Calc>,
    /// A moisture reading was missing and its bound was used.
    pub moisture_filled: bool,
    /// A diluent reading was missing and its bound was used (heat input or CO2).
    pub diluent_filled: bool,
}

impl HourResult {
    pub fn heat_input(&self) -> Option<Mmbtu> {
        self.heat_input_mmbtu.map(|c| Mmbtu(c.value))
    }
    pub fn so2(&self) -> Option<Lb> {
        self.so2_lb.map(|c| Lb(c.value))
    }
    pub fn nox(&self) -> Option<Lb> {
        self.nox_lb.map(|c| Lb(c.value))
    }
    pub fn co2(&self) -> Option<Tons> {
        self.co2_tons.map(|c| Tons(c.value))
    }
}

/// Which bound of [`GapBounds`] is conservative for moisture in an equation.
#[derive(Clone, Copy)]
enum MoistureSide {
    Min,
    Max,
}

/// Moisture for an equation: the reading, or the conservative bound.
fn moisture(input: &HourInput, unit: &CemsUnit, side: MoistureSide) -> (Decimal, bool) {
    match input.h2o_pct {
        Some(h) => (h, false),
        None => match side {
            MoistureSide::Min => (unit.gap_bounds.h2o_pct_min, true),
            MoistureSide::Max => (unit.gap_bounds.h2o_pct_max, true),
        },
    }
}

/// The NOx rate from the readings, or `None` if the NOx or diluent reading
/// is missing. A missing moisture reading takes its bound (see [`GapBounds`]).
/// The §3.3.4.1 cap applies where the diluent is past it; on a wet O2 basis
/// the cap is compared and applied in its wet form, as Eq. 19-3D writes it;
/// on a CO2 basis the cap value is applied as is.
pub fn nox_rate_measured(input: &HourInput, unit: &CemsUnit) -> Option<Calc> {
    let nox = input.nox_ppm?;
    let k = K_NOX_LB_PER_SCF_PPM;
    let cap = diluent_cap(unit.kind);
    let b = unit.bases;
    let calc = match unit.nox_diluent {
        Diluent::O2 => {
            let o2 = input.o2_pct?;
            let fd = unit.f.f_dscf_per_mmbtu;
            let cap_o2 = cap.map(|c| c.o2_pct_max);
            match (b.nox, b.o2) {
                (Basis::Dry, Basis::Dry) => {
                    let (o2_used, replaced) = match cap_o2 {
                        Some(c) if o2 > c => (c, Some(o2)),
                        _ => (o2, None),
                    };
                    let eq = if replaced.is_some() {
                        Equation::M19_5D
                    } else {
                        Equation::F5
                    };
                    let mut c = Calc::new(
                        eq,
                        &[k, nox, fd, o2_used],
                        nox_lb_per_mmbtu_f5(nox, o2_used, fd).0,
                    );
                    c.cap_replaced_pct = replaced;
                    c
                }
                (Basis::Wet, Basis::Wet) => {
                    let (h2o, filled) = moisture(input, unit, MoistureSide::Max);
                    let mut c = match cap_o2 {
                        Some(cap) if o2 > cap * dry_fraction(h2o) => {
                            let mut c = Calc::new(
                                Equation::M19_3D,
                                &[k, nox, fd, h2o, cap, h2o],
                                nox_lb_per_mmbtu_m19_3d(nox, cap, h2o, fd).0,
                            );
                            c.cap_replaced_pct = Some(o2);
                            c
                        }
                        _ => Calc::new(
                            Equation::M19_3,
                            &[k, nox, fd, h2o, o2],
                            nox_lb_per_mmbtu_m19_3(nox, o2, h2o, fd).0,
                        ),
                    };
                    c.filled_input = filled;
                    c
                }
                (Basis::Wet, Basis::Dry) => {
                    let (h2o, filled) = moisture(input, unit, MoistureSide::Max);
                    let (o2_used, replaced) = match cap_o2 {
                        Some(c) if o2 > c => (c, Some(o2)),
                        _ => (o2, None),
                    };
                    let mut c = Calc::new(
                        Equation::M19_4,
                        &[k, nox, fd, h2o, o2_used],
                        nox_lb_per_mmbtu_m19_4(nox, o2_used, h2o, fd).0,
                    );
                    c.cap_replaced_pct = replaced;
                    c.filled_input = filled;
                    c
                }
                (Basis::Dry, Basis::Wet) => {
                    let (h2o, filled) = moisture(input, unit, MoistureSide::Max);
                    let mut c = match cap_o2 {
                        Some(cap) if o2 / (Decimal::ONE - bws(h2o)) > cap => {
                            let mut c = Calc::new(
                                Equation::M19_5D,
                                &[k, nox, fd, cap],
                                nox_lb_per_mmbtu_m19_5d(nox, cap, fd).0,
                            );
                            c.cap_replaced_pct = Some(o2);
                            c
                        }
                        _ => Calc::new(
                            Equation::M19_5,
                            &[k, nox, fd, o2, h2o],
                            nox_lb_per_mmbtu_m19_5(nox, o2, h2o, fd).0,
                        ),
                    };
                    c.filled_input = filled;
                    c
                }
            }
        }
        Diluent::Co2 => {
            let co2_measured = co2_for(input, unit)?;
            let fc = unit.f.fc_scf_per_mmbtu;
            let (co2, replaced) = match cap.map(|c| c.co2_pct_min) {
                Some(c) if co2_measured.value < c => (c, Some(co2_measured.value)),
                _ => (co2_measured.value, None),
            };
            let co2_basis = co2_measured.basis;
            let mut c = match (b.nox, co2_basis) {
                (Basis::Dry, Basis::Dry) | (Basis::Wet, Basis::Wet) => Calc::new(
                    Equation::F6,
                    &[k, nox, fc, co2],
                    nox_lb_per_mmbtu_f6(nox, co2, fc).0,
                ),
                (Basis::Wet, Basis::Dry) => {
                    let (h2o, filled) = moisture(input, unit, MoistureSide::Max);
                    let mut c = Calc::new(
                        Equation::M19_8,
                        &[k, nox, fc, co2, h2o],
                        nox_lb_per_mmbtu_m19_8(nox, co2, h2o, fc).0,
                    );
                    c.filled_input = filled;
                    c
                }
                (Basis::Dry, Basis::Wet) => {
                    let (h2o, filled) = moisture(input, unit, MoistureSide::Min);
                    let mut c = Calc::new(
                        Equation::M19_9,
                        &[k, nox, fc, h2o, co2],
                        nox_lb_per_mmbtu_m19_9(nox, co2, h2o, fc).0,
                    );
                    c.filled_input = filled;
                    c
                }
            };
            c.cap_replaced_pct = replaced;
            c
        }
    };
    Some(calc.rounded(unit.rounding, Rounded::NoxLbPerMmbtu))
}

/// A CO2 concentration with its basis, measured or derived from O2 (no gap fill).
#[derive(Clone, Copy)]
struct Co2 {
    value: Decimal,
    basis: Basis,
    derived: Option<Calc>,
    /// Moisture in Eq. F-14b took its bound.
    moisture_filled: bool,
}

/// CO2 from the CO2 column, or from O2 by Eq. F-14a/F-14b where the unit
/// has no CO2 monitor. `None` if the reading it needs is missing; a missing
/// moisture reading in F-14b takes its minimum bound.
fn co2_for(input: &HourInput, unit: &CemsUnit) -> Option<Co2> {
    if !unit.co2_from_o2 {
        return input.co2_pct.map(|value| Co2 {
            value,
            basis: unit.bases.co2,
            derived: None,
            moisture_filled: false,
        });
    }
    let o2 = input.o2_pct?;
    Some(derive_co2(input, unit, o2, false))
}

fn derive_co2(input: &HourInput, unit: &CemsUnit, o2: Decimal, o2_filled: bool) -> Co2 {
    let f = unit.f;
    let (calc, basis, filled) = match unit.bases.o2 {
        Basis::Dry => {
            let raw = HUNDRED * (f.fc_scf_per_mmbtu / f.f_dscf_per_mmbtu) * (O2_AMBIENT_PCT - o2)
                / O2_AMBIENT_PCT;
            let mut c = Calc::new(
                Equation::F14a,
                &[f.fc_scf_per_mmbtu, f.f_dscf_per_mmbtu, o2],
                raw,
            );
            c.value = co2_pct_dry_f14a(o2, f);
            (c, Basis::Dry, false)
        }
        Basis::Wet => {
            let (h2o, filled) = moisture(input, unit, MoistureSide::Min);
            let raw = HUNDRED / O2_AMBIENT_PCT
                * (f.fc_scf_per_mmbtu / f.f_dscf_per_mmbtu)
                * (O2_AMBIENT_PCT * dry_fraction(h2o) - o2);
            let mut c = Calc::new(
                Equation::F14b,
                &[f.fc_scf_per_mmbtu, f.f_dscf_per_mmbtu, h2o, o2],
                raw,
            );
            c.value = co2_pct_wet_f14b(o2, h2o, f);
            (c, Basis::Wet, filled)
        }
    };
    let mut calc = calc;
    calc.clamped_to_zero = calc.computed < Decimal::ZERO;
    calc.filled_input = filled || o2_filled;
    Co2 {
        value: calc.value,
        basis,
        derived: Some(calc),
        moisture_filled: filled,
    }
}

/// CO2 for heat input or CO2 mass, with a missing diluent filled by its bound.
fn co2_filled(input: &HourInput, unit: &CemsUnit) -> (Co2, bool) {
    if let Some(c) = co2_for(input, unit) {
        return (c, false);
    }
    if unit.co2_from_o2 {
        (
            derive_co2(input, unit, unit.gap_bounds.o2_pct_min, true),
            true,
        )
    } else {
        let c = Co2 {
            value: unit.gap_bounds.co2_pct_max,
            basis: unit.bases.co2,
            derived: None,
            moisture_filled: false,
        };
        (c, true)
    }
}

/// The readings of an hour with nothing substituted; the NOx rate computed.
pub fn resolve_readings(input: &HourInput, unit: &CemsUnit) -> Resolved {
    Resolved {
        so2_ppm: input.so2_ppm,
        flow_scfh_wet: input.flow_scfh_wet,
        nox_lb_per_mmbtu: if unit.computes.nox {
            nox_rate_measured(input, unit)
        } else {
            None
        },
    }
}

/// A substituted NOx rate as an hourly value, rounded by the profile.
pub fn substituted_nox(value: Decimal, rounding: Rounding) -> Calc {
    Calc::new(Equation::Substituted, &[value], value).rounded(rounding, Rounded::NoxLbPerMmbtu)
}

/// One unit-hour's rates and masses from resolved values.
///
/// An hour with zero operating time emits nothing and computes nothing. The
/// NOx rate is taken from `resolved` (measured or substituted), never
/// recomputed. Rounding by `unit.rounding` happens on the rates before
/// they are multiplied into masses.
pub fn compute_hour(input: &HourInput, resolved: &Resolved, unit: &CemsUnit) -> HourResult {
    let mut out = HourResult::default();
    compute_hour_into(input, resolved, unit, &mut out);
    out
}

/// [`compute_hour`] into a result the caller holds, so the stream's hot
/// loop does not copy the result about.
pub fn compute_hour_into(
    input: &HourInput,
    resolved: &Resolved,
    unit: &CemsUnit,
    out: &mut HourResult,
) {
    *out = HourResult::default();
    let t = input.op_time_hr;
    if t <= Decimal::ZERO {
        return;
    }
    let c = unit.computes;
    let flow = resolved.flow_scfh_wet;

    // Heat input (App. F §5): needed for itself and for NOx mass (F-24).
    // CO2 is found once, for heat input by a CO2 diluent and for CO2 mass.
    let needs_co2 = c.co2 || ((c.heat_input || c.nox) && unit.heat_input_diluent == Diluent::Co2);
    let co2 = if needs_co2 && flow.is_some() {
        let (co2, dil_filled) = co2_filled(input, unit);
        out.diluent_filled |= dil_filled;
        out.moisture_filled |= co2.moisture_filled;
        out.co2_pct_derived = co2.derived;
        Some((co2, dil_filled))
    } else {
        None
    };

    if c.heat_input || c.nox {
        if let Some(q) = flow {
            let rate = heat_input_rate(input, unit, q, co2, out);
            out.heat_input_mmbtu = Some(Calc::new(
                Equation::HeatInputAmount,
                &[rate.value, t],
                heat_input_mmbtu(MmbtuPerHr(rate.value), t).0,
            ));
            out.heat_input_mmbtu_per_hr = Some(rate);
        }
    }

    if c.so2 {
        if let (Some(ppm), Some(q)) = (resolved.so2_ppm, flow) {
            let k = K_SO2_LB_PER_SCF_PPM;
            let rate = match unit.bases.so2 {
                Basis::Wet => Calc::new(Equation::F1, &[k, ppm, q], so2_lb_per_hr_f1(ppm, q).0),
                Basis::Dry => {
                    let (h2o, filled) = moisture(input, unit, MoistureSide::Min);
                    out.moisture_filled |= filled;
                    let mut r = Calc::new(
                        Equation::F2,
                        &[k, ppm, q, h2o],
                        so2_lb_per_hr_f2(ppm, q, h2o).0,
                    );
                    r.filled_input = filled;
                    r
                }
            }
            .rounded(unit.rounding, Rounded::So2LbPerHr);
            out.so2_lb = Some(Calc::new(
                Equation::So2Mass,
                &[rate.value, t],
                so2_lb(LbPerHr(rate.value), t).0,
            ));
            out.so2_lb_per_hr = Some(rate);
        }
    }

    if c.nox {
        if let Some(rate) = resolved.nox_lb_per_mmbtu {
            out.moisture_filled |= rate.filled_input;
            if let Some(hi) = out.heat_input_mmbtu_per_hr {
                out.nox_lb = Some(Calc::new(
                    Equation::F24,
                    &[rate.value, hi.value, t],
                    nox_lb_f24(LbPerMmbtu(rate.value), MmbtuPerHr(hi.value), t).0,
                ));
            }
            out.nox_lb_per_mmbtu = Some(rate);
        }
    }

    if c.co2 {
        if let (Some(q), Some((co2, dil_filled))) = (flow, co2) {
            let k = K_CO2_TONS_PER_SCF_PCT;
            let mut rate = match co2.basis {
                Basis::Wet => Calc::new(
                    Equation::F11,
                    &[k, co2.value, q],
                    co2_tons_per_hr_f11(co2.value, q).0,
                ),
                Basis::Dry => {
                    let (h2o, filled) = moisture(input, unit, MoistureSide::Min);
                    out.moisture_filled |= filled;
                    let mut r = Calc::new(
                        Equation::F11Dry,
                        &[k, co2.value, q, h2o],
                        co2_tons_per_hr_f11_dry(co2.value, q, h2o).0,
                    );
                    r.filled_input = filled;
                    r
                }
            };
            rate.filled_input |= co2.moisture_filled || dil_filled;
            out.co2_tons = Some(Calc::new(
                Equation::Co2Mass,
                &[rate.value, t],
                co2_tons(TonsPerHr(rate.value), t).0,
            ));
            out.co2_tons_per_hr = Some(rate);
        }
    }
}

/// Heat input rate by the unit's diluent and bases (Eq. F-15 to F-18).
fn heat_input_rate(
    input: &HourInput,
    unit: &CemsUnit,
    q: Decimal,
    co2: Option<(Co2, bool)>,
    out: &mut HourResult,
) -> Calc {
    match unit.heat_input_diluent {
        Diluent::Co2 => {
            let (co2, dil_filled) = co2.expect("CO2 found for a CO2-diluent heat input");
            let fc = unit.f.fc_scf_per_mmbtu;
            let mut c = match co2.basis {
                Basis::Wet => Calc::new(
                    Equation::F15,
                    &[q, fc, co2.value],
                    heat_input_mmbtu_per_hr_f15(q, co2.value, fc).0,
                ),
                Basis::Dry => {
                    let (h2o, filled) = moisture(input, unit, MoistureSide::Min);
                    out.moisture_filled |= filled;
                    let mut c = Calc::new(
                        Equation::F16,
                        &[q, h2o, fc, co2.value],
                        heat_input_mmbtu_per_hr_f16(q, co2.value, h2o, fc).0,
                    );
                    c.filled_input = filled;
                    c
                }
            };
            c.filled_input |= co2.moisture_filled || dil_filled;
            c
        }
        Diluent::O2 => {
            let (o2, dil_filled) = match input.o2_pct {
                Some(o2) => (o2, false),
                None => (unit.gap_bounds.o2_pct_min, true),
            };
            out.diluent_filled |= dil_filled;
            let (h2o, filled) = moisture(input, unit, MoistureSide::Min);
            out.moisture_filled |= filled;
            let fd = unit.f.f_dscf_per_mmbtu;
            let mut c = match unit.bases.o2 {
                Basis::Wet => Calc::new(
                    Equation::F17,
                    &[q, fd, h2o, o2],
                    heat_input_mmbtu_per_hr_f17(q, o2, h2o, fd).0,
                ),
                Basis::Dry => Calc::new(
                    Equation::F18,
                    &[q, h2o, fd, o2],
                    heat_input_mmbtu_per_hr_f18(q, o2, h2o, fd).0,
                ),
            };
            c.value = heat_input_floor(MmbtuPerHr(c.computed)).0;
            c.floored = c.value != c.computed;
            c.filled_input = filled || dil_filled;
            c
        }
    }
}
