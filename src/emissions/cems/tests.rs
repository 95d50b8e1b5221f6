use super::*;
use crate::emissions::constants::f_factors;
use crate::emissions::fuel::Fuel;
use rust_decimal::RoundingStrategy;

/// Compare a computed value, rounded half away from zero to `dp` places,
/// with a check value; `source` names where the check value comes from.
fn check(actual: Decimal, expected: Decimal, dp: u32, source: &str) {
    let rounded = actual.round_dp_with_strategy(dp, RoundingStrategy::MidpointAwayFromZero);
    assert_eq!(rounded, expected, "{source}: computed {actual}");
}

fn unit(kind: UnitKind, fuel: Fuel, diluent: Diluent, bases: Bases) -> CemsUnit {
    CemsUnit {
        kind,
        f: f_factors(fuel),
        heat_input_diluent: diluent,
        nox_diluent: diluent,
        bases,
        co2_from_o2: false,
        rounding: Rounding::Exact,
        computes: Computes {
            heat_input: true,
            so2: true,
            nox: true,
            co2: true,
        },
        gap_bounds: GapBounds {
            h2o_pct_min: dec!(3.0),
            h2o_pct_max: dec!(15.0),
            o2_pct_min: dec!(2.0),
            co2_pct_max: dec!(16.0),
        },
    }
}

const DRY_O2: Bases = Bases {
    so2: Basis::Wet,
    nox: Basis::Dry,
    o2: Basis::Dry,
    co2: Basis::Wet,
};

fn bituminous() -> FFactors {
    f_factors(Fuel::Bituminous)
}

#[test]
fn c1_so2_rate_wet_concentration_wet_flow() {
    // Check value C-1: 40 CFR 75 App. F Eq. F-1 (K verified, form from memory).
    check(
        so2_lb_per_hr_f1(dec!(500), dec!(20000000)).0,
        dec!(1660.0),
        1,
        "C-1, App. F Eq. F-1",
    );
}

#[test]
fn c2_so2_rate_dry_concentration_wet_flow() {
    // Check value C-2: 40 CFR 75 App. F Eq. F-2 (K verified, form from memory).
    check(
        so2_lb_per_hr_f2(dec!(500), dec!(20000000), dec!(10)).0,
        dec!(1494.0),
        1,
        "C-2, App. F Eq. F-2",
    );
}

#[test]
fn c3_quarterly_so2_tons_from_hourly_rates_and_operating_time() {
    // Check value C-3: 40 CFR 75 App. F Eq. F-3 (form from memory), rounded to a tenth (§2.4).
    let hours = [
        (dec!(1660.0), dec!(1.00)),
        (dec!(1494.0), dec!(1.00)),
        (dec!(1200.0), dec!(0.50)),
    ];
    let lb: Lb = hours.iter().map(|&(r, t)| so2_lb(LbPerHr(r), t)).sum();
    check(
        lb.to_tons().0,
        dec!(1.877),
        3,
        "C-3, App. F Eq. F-3 before rounding",
    );
    check(lb.to_tons().0, dec!(1.9), 1, "C-3, App. F Eq. F-3 and §2.4");
}

#[test]
fn c4_nox_rate_o2_dry() {
    // Check value C-4: 40 CFR 75 App. F Eq. F-5 (form from memory), Table 1 F 9780, §3.5 rounding.
    let e = nox_lb_per_mmbtu_f5(dec!(100), dec!(3.0), bituminous().f_dscf_per_mmbtu).0;
    check(e, dec!(0.136344), 6, "C-4, App. F Eq. F-5 unrounded");
    check(e, dec!(0.136), 3, "C-4, App. F Eq. F-5 and §3.5");
}

#[test]
fn c5_nox_rate_co2() {
    // Check value C-5: 40 CFR 75 App. F Eq. F-6 (form from memory), Fc 1800.
    let e = nox_lb_per_mmbtu_f6(dec!(100), dec!(12.0), bituminous().fc_scf_per_mmbtu).0;
    check(e, dec!(0.17910), 5, "C-5, App. F Eq. F-6");
    check(e, dec!(0.179), 3, "C-5, App. F Eq. F-6 and §3.5");
}

#[test]
fn c6_heat_input_co2_wet() {
    // Check value C-6: 40 CFR 75 App. F Eq. F-15 (form from memory).
    let hi = heat_input_mmbtu_per_hr_f15(dec!(30000000), dec!(10.0), dec!(1800)).0;
    check(hi, dec!(1666.7), 1, "C-6, App. F Eq. F-15");
}

#[test]
fn c7_heat_input_o2_wet() {
    // Check value C-7: 40 CFR 75 App. F Eq. F-17 (form from memory).
    let hi = heat_input_mmbtu_per_hr_f17(dec!(30000000), dec!(5.0), dec!(8.0), dec!(9780)).0;
    check(hi, dec!(2088.2), 1, "C-7, App. F Eq. F-17");
}

#[test]
fn c8_heat_input_o2_dry() {
    // Check value C-8: 40 CFR 75 App. F Eq. F-18 (form from memory).
    let hi = heat_input_mmbtu_per_hr_f18(dec!(30000000), dec!(5.4), dec!(8.0), dec!(9780)).0;
    check(hi, dec!(2092.9), 1, "C-8, App. F Eq. F-18");
}

#[test]
fn heat_input_co2_dry_matches_the_wet_form_at_the_same_wet_co2() {
    // 40 CFR 75 App. F Eq. F-16 (form from memory): 11.111 % dry at 10 % moisture is 10.0 % wet,
    // so F-16 must give C-6's 1666.7 MMBtu/hr.
    let co2_dry = dec!(10.0) / dec!(0.9);
    let hi = heat_input_mmbtu_per_hr_f16(dec!(30000000), co2_dry, dec!(10.0), dec!(1800)).0;
    check(hi, dec!(1666.7), 1, "App. F Eq. F-16 against C-6");
}

#[test]
fn c9_co2_from_o2_dry_natural_gas() {
    // Check value C-9: 40 CFR 75 App. F Eq. F-14a (form from memory), gas F 8710, Fc 1040.
    let co2 = co2_pct_dry_f14a(dec!(3.0), f_factors(Fuel::NaturalGas));
    check(co2, dec!(10.2264), 4, "C-9, App. F Eq. F-14a");
    check(co2, dec!(10.23), 2, "C-9, App. F Eq. F-14a");
}

#[test]
fn f14_negative_results_record_zero_percent() {
    // 40 CFR 75 App. F §4.1 (verified): a negative F-14a/F-14b result is recorded as 0.0 % CO2.
    let gas = f_factors(Fuel::NaturalGas);
    // F-14b at 8 % moisture reaches zero at O2w = 20.9 × 0.92 = 19.228 %.
    assert_eq!(
        co2_pct_wet_f14b(dec!(19.228), dec!(8.0), gas),
        Decimal::ZERO
    );
    assert_eq!(co2_pct_wet_f14b(dec!(19.5), dec!(8.0), gas), Decimal::ZERO);
    assert!(co2_pct_wet_f14b(dec!(19.2), dec!(8.0), gas) > Decimal::ZERO);
    assert_eq!(co2_pct_dry_f14a(dec!(21.0), gas), Decimal::ZERO);
    assert!(co2_pct_dry_f14a(dec!(20.8), gas) > Decimal::ZERO);
}

#[test]
fn f14b_wet_equals_f14a_on_the_dry_equivalent() {
    // F-14b (form from memory) must agree with F-14a after converting O2 and CO2 by the moisture.
    let gas = f_factors(Fuel::NaturalGas);
    let wet = co2_pct_wet_f14b(dec!(2.7), dec!(10.0), gas);
    let dry = co2_pct_dry_f14a(dec!(3.0), gas);
    check(
        wet,
        (dry * dec!(0.9)).round_dp(12),
        12,
        "App. F Eq. F-14a vs F-14b",
    );
}

#[test]
fn c10_co2_mass_rate_wet() {
    // Check value C-10: 40 CFR 75 App. F Eq. F-11 (K verified, form from memory).
    check(
        co2_tons_per_hr_f11(dec!(10.0), dec!(30000000)).0,
        dec!(171.0),
        1,
        "C-10, App. F Eq. F-11",
    );
    // §4.1 dry form: 10 % wet is 11.111...% dry at 10 % moisture.
    let dry = co2_tons_per_hr_f11_dry(dec!(10.0) / dec!(0.9), dec!(30000000), dec!(10.0)).0;
    check(dry, dec!(171.0), 1, "C-10 by the App. F §4.1 dry form");
}

#[test]
fn c19_blended_f_factors() {
    // Check value C-19: 40 CFR 75 App. F §3.3.6.4 (form from memory).
    let blend = blended_f_factors(&[
        (dec!(0.6), bituminous()),
        (dec!(0.4), f_factors(Fuel::NaturalGas)),
    ]);
    check(blend.f_dscf_per_mmbtu, dec!(9352), 0, "C-19 F");
    check(blend.fc_scf_per_mmbtu, dec!(1496), 0, "C-19 Fc");
}

#[test]
fn c20_nox_mass_hour_and_day() {
    // Check value C-20: 40 CFR 75 App. F Eq. F-24 and F-27 (forms from memory).
    let hour = nox_lb_f24(
        LbPerMmbtu(dec!(0.136)),
        MmbtuPerHr(dec!(2088.2)),
        dec!(1.00),
    );
    check(hour.0, dec!(284.0), 1, "C-20 hour, App. F Eq. F-24");
    let day: Lb = (0..24).map(|_| hour).sum();
    check(day.to_tons().0, dec!(3.41), 2, "C-20 day, App. F Eq. F-27");
}

#[test]
fn f7_site_specific_factors_from_an_ultimate_analysis() {
    // 40 CFR 75 App. F Eq. F-7a/F-7b, coefficients from memory; arithmetic by hand:
    // F = 10^6 × (3.64×5 + 1.53×75 + 0.57×2 + 0.14×1.5 − 0.46×6)/13500 = 10^6 × 131.54/13500;
    // Fc = 10^6 × 0.321 × 75/13500.
    let a = UltimateAnalysis {
        hydrogen_pct: dec!(5.0),
        carbon_pct: dec!(75.0),
        sulfur_pct: dec!(2.0),
        nitrogen_pct: dec!(1.5),
        oxygen_pct: dec!(6.0),
        gcv_btu_per_lb: dec!(13500),
    };
    let f = site_f_factors(&a);
    check(
        f.f_dscf_per_mmbtu,
        dec!(9743.7),
        1,
        "App. F Eq. F-7a (coefficients from memory)",
    );
    check(
        f.fc_scf_per_mmbtu,
        dec!(1783.3),
        1,
        "App. F Eq. F-7b (coefficient from memory)",
    );
}

#[test]
fn method_19_forms_agree_with_f5_and_f6_on_dry_equivalents() {
    // Method 19 Eq. 19-3, 19-4, 19-5, 19-8, 19-9 (forms from memory) must equal
    // Eq. F-5/F-6 once wet values are converted to dry: Cd = Cws/(1 − B), O2d = O2w/(1 − B).
    let fd = dec!(9780);
    let fc = dec!(1800);
    let h2o = dec!(10.0);
    let (nox_d, o2_d, co2_d) = (dec!(100), dec!(3.0), dec!(12.0));
    let (nox_w, o2_w, co2_w) = (dec!(90), dec!(2.7), dec!(10.8));
    let f5 = nox_lb_per_mmbtu_f5(nox_d, o2_d, fd).0;
    let f6 = nox_lb_per_mmbtu_f6(nox_d, co2_d, fc).0;
    check(
        nox_lb_per_mmbtu_m19_3(nox_w, o2_w, h2o, fd).0,
        f5.round_dp(12),
        12,
        "Method 19 Eq. 19-3",
    );
    check(
        nox_lb_per_mmbtu_m19_4(nox_w, o2_d, h2o, fd).0,
        f5.round_dp(12),
        12,
        "Method 19 Eq. 19-4",
    );
    check(
        nox_lb_per_mmbtu_m19_5(nox_d, o2_w, h2o, fd).0,
        f5.round_dp(12),
        12,
        "Method 19 Eq. 19-5",
    );
    check(
        nox_lb_per_mmbtu_m19_8(nox_w, co2_d, h2o, fc).0,
        f6.round_dp(12),
        12,
        "Method 19 Eq. 19-8",
    );
    check(
        nox_lb_per_mmbtu_m19_9(nox_d, co2_w, h2o, fc).0,
        f6.round_dp(12),
        12,
        "Method 19 Eq. 19-9",
    );
    // Eq. 19-7 (wet/wet) is the F-6 form: the moisture cancels.
    check(
        nox_lb_per_mmbtu_f6(nox_w, co2_w, fc).0,
        f6.round_dp(12),
        12,
        "Method 19 Eq. 19-7",
    );
}

fn nox_hour(
    nox: Decimal,
    o2: Option<Decimal>,
    co2: Option<Decimal>,
    h2o: Option<Decimal>,
) -> HourInput {
    HourInput {
        op_time_hr: dec!(1),
        nox_ppm: Some(nox),
        o2_pct: o2,
        co2_pct: co2,
        h2o_pct: h2o,
        ..HourInput::default()
    }
}

#[test]
fn boiler_o2_cap_applies_above_14_percent_only() {
    // 40 CFR 75 App. F §3.3.4.1 (verified): boilers may use 14.0 % O2 when O2 > 14.0 %.
    let u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::O2, DRY_O2);
    let at = nox_rate_measured(&nox_hour(dec!(50), Some(dec!(14.0)), None, None), &u).unwrap();
    assert_eq!(at.equation, Equation::F5);
    assert_eq!(at.cap_replaced_pct, None);
    let past = nox_rate_measured(&nox_hour(dec!(50), Some(dec!(14.1)), None, None), &u).unwrap();
    assert_eq!(past.equation, Equation::M19_5D);
    assert_eq!(past.cap_replaced_pct, Some(dec!(14.1)));
    assert_eq!(
        past.value, at.value,
        "the capped rate is the rate at 14.0 %"
    );
}

#[test]
fn turbine_caps_are_19_percent_o2_and_1_percent_co2() {
    // 40 CFR 75 App. F §3.3.4.1 (verified): stationary gas turbines 19.0 % O2 / 1.0 % CO2.
    let u = unit(
        UnitKind::CombustionTurbine,
        Fuel::NaturalGas,
        Diluent::O2,
        DRY_O2,
    );
    let at = nox_rate_measured(&nox_hour(dec!(9), Some(dec!(19.0)), None, None), &u).unwrap();
    assert_eq!(at.cap_replaced_pct, None);
    let past = nox_rate_measured(&nox_hour(dec!(9), Some(dec!(19.05)), None, None), &u).unwrap();
    assert_eq!(past.cap_replaced_pct, Some(dec!(19.05)));
    check(
        past.value,
        nox_lb_per_mmbtu_f5(dec!(9), dec!(19.0), dec!(8710))
            .0
            .round_dp(12),
        12,
        "§3.3.4.1 turbine O2 cap",
    );

    let co2_bases = Bases {
        nox: Basis::Wet,
        co2: Basis::Wet,
        ..DRY_O2
    };
    let u = unit(
        UnitKind::CombustionTurbine,
        Fuel::NaturalGas,
        Diluent::Co2,
        co2_bases,
    );
    let at = nox_rate_measured(&nox_hour(dec!(9), None, Some(dec!(1.0)), None), &u).unwrap();
    assert_eq!((at.equation, at.cap_replaced_pct), (Equation::F6, None));
    let past = nox_rate_measured(&nox_hour(dec!(9), None, Some(dec!(0.9)), None), &u).unwrap();
    assert_eq!(past.cap_replaced_pct, Some(dec!(0.9)));
    check(
        past.value,
        nox_lb_per_mmbtu_f6(dec!(9), dec!(1.0), dec!(1040))
            .0
            .round_dp(12),
        12,
        "§3.3.4.1 turbine CO2 cap",
    );
}

#[test]
fn boiler_co2_cap_applies_below_5_percent_only() {
    // 40 CFR 75 App. F §3.3.4.1 (verified): boilers may use 5.0 % CO2 when CO2 < 5.0 %.
    let bases = Bases {
        nox: Basis::Dry,
        co2: Basis::Dry,
        ..DRY_O2
    };
    let u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::Co2, bases);
    let at = nox_rate_measured(&nox_hour(dec!(100), None, Some(dec!(5.0)), None), &u).unwrap();
    assert_eq!(at.cap_replaced_pct, None);
    let past = nox_rate_measured(&nox_hour(dec!(100), None, Some(dec!(4.9)), None), &u).unwrap();
    assert_eq!(past.cap_replaced_pct, Some(dec!(4.9)));
    assert_eq!(past.value, at.value);
}

#[test]
fn other_units_have_no_diluent_cap() {
    // §3.3.4.1 names boilers and turbines only.
    let u = unit(UnitKind::Other, Fuel::Bituminous, Diluent::O2, DRY_O2);
    let c = nox_rate_measured(&nox_hour(dec!(50), Some(dec!(18.0)), None, None), &u).unwrap();
    assert_eq!((c.equation, c.cap_replaced_pct), (Equation::F5, None));
}

#[test]
fn wet_o2_cap_uses_eq_19_3d_and_dry_nox_wet_o2_uses_19_5d() {
    // 40 CFR 75 App. F §3.3.4.2 (verified text): 19-3D replaces %O2w by %O2dc·(100 − %H2O)/100;
    // 19-5D makes the denominator 20.9 − %O2dc.
    let wet = Bases {
        nox: Basis::Wet,
        o2: Basis::Wet,
        ..DRY_O2
    };
    let u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::O2, wet);
    // At 10 % moisture the cap is 12.6 % wet.
    let at = nox_rate_measured(
        &nox_hour(dec!(90), Some(dec!(12.6)), None, Some(dec!(10))),
        &u,
    )
    .unwrap();
    assert_eq!(at.equation, Equation::M19_3);
    let past = nox_rate_measured(
        &nox_hour(dec!(90), Some(dec!(12.7)), None, Some(dec!(10))),
        &u,
    )
    .unwrap();
    assert_eq!(past.equation, Equation::M19_3D);
    check(
        past.value,
        nox_lb_per_mmbtu_f5(dec!(100), dec!(14.0), dec!(9780))
            .0
            .round_dp(12),
        12,
        "Eq. 19-3D at the cap",
    );

    let dry_nox = Bases {
        nox: Basis::Dry,
        ..wet
    };
    let u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::O2, dry_nox);
    let past = nox_rate_measured(
        &nox_hour(dec!(100), Some(dec!(12.7)), None, Some(dec!(10))),
        &u,
    )
    .unwrap();
    assert_eq!(past.equation, Equation::M19_5D);
    check(
        past.value,
        nox_lb_per_mmbtu_f5(dec!(100), dec!(14.0), dec!(9780))
            .0
            .round_dp(12),
        12,
        "Eq. 19-5D",
    );
    let at = nox_rate_measured(
        &nox_hour(dec!(100), Some(dec!(12.6)), None, Some(dec!(10))),
        &u,
    )
    .unwrap();
    assert_eq!(at.equation, Equation::M19_5);
}

#[test]
fn nox_rate_is_missing_without_its_diluent() {
    let u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::O2, DRY_O2);
    assert_eq!(
        nox_rate_measured(&nox_hour(dec!(100), None, Some(dec!(12)), None), &u),
        None
    );
}

#[test]
fn f17_floor_at_and_above_zero() {
    // 40 CFR 75 App. F §5.2 (verified): F-17 ≤ 0.0 MMBtu/hr records 1.0 MMBtu/hr.
    // At 8 % moisture F-17 is zero at O2w = 19.228 %.
    let zero = heat_input_mmbtu_per_hr_f17(dec!(30000000), dec!(19.228), dec!(8.0), dec!(9780));
    assert_eq!(zero.0, Decimal::ZERO);
    assert_eq!(heat_input_floor(zero).0, dec!(1.0));
    let negative = heat_input_mmbtu_per_hr_f17(dec!(30000000), dec!(19.3), dec!(8.0), dec!(9780));
    assert_eq!(heat_input_floor(negative).0, dec!(1.0));
    let positive = heat_input_mmbtu_per_hr_f17(dec!(30000000), dec!(19.2), dec!(8.0), dec!(9780));
    check(
        heat_input_floor(positive).0,
        dec!(4.11),
        2,
        "F-17 just above zero is not floored",
    );

    let wet = Bases {
        o2: Basis::Wet,
        ..DRY_O2
    };
    let mut u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::O2, wet);
    u.computes = Computes {
        heat_input: true,
        ..Computes::default()
    };
    let hour = HourInput {
        op_time_hr: dec!(0.5),
        o2_pct: Some(dec!(19.3)),
        h2o_pct: Some(dec!(8.0)),
        flow_scfh_wet: Some(dec!(30000000)),
        ..HourInput::default()
    };
    let r = compute_hour(&hour, &resolve_readings(&hour, &u), &u);
    let hi = r.heat_input_mmbtu_per_hr.unwrap();
    assert!(hi.floored && hi.computed < Decimal::ZERO);
    assert_eq!(hi.value, dec!(1.0));
    assert_eq!(r.heat_input(), Some(Mmbtu(dec!(0.5))));
}

#[test]
fn part75_rounds_so2_to_a_tenth_and_nox_to_a_thousandth() {
    // 40 CFR 75 App. F §2.4 (SO2 to 0.1 lb/hr) and §3.5 (NOx to 0.001 lb/MMBtu), verified.
    assert_eq!(
        part75_round(Rounding::Part75, Rounded::So2LbPerHr, dec!(1494.04)),
        dec!(1494.0)
    );
    assert_eq!(
        part75_round(Rounding::Part75, Rounded::So2LbPerHr, dec!(1494.05)),
        dec!(1494.1)
    );
    assert_eq!(
        part75_round(Rounding::Part75, Rounded::NoxLbPerMmbtu, dec!(0.1365)),
        dec!(0.137)
    );
    assert_eq!(
        part75_round(Rounding::Part75, Rounded::NoxLbPerMmbtu, dec!(0.13649)),
        dec!(0.136)
    );
    assert_eq!(
        part75_round(Rounding::Exact, Rounded::NoxLbPerMmbtu, dec!(0.13649)),
        dec!(0.13649)
    );
}

fn boiler_hour() -> HourInput {
    HourInput {
        op_time_hr: dec!(0.50),
        load_mw: Some(dec!(400)),
        so2_ppm: Some(dec!(500)),
        nox_ppm: Some(dec!(100)),
        o2_pct: Some(dec!(3.0)),
        co2_pct: Some(dec!(10.0)),
        flow_scfh_wet: Some(dec!(30000000)),
        h2o_pct: Some(dec!(8.0)),
    }
}

#[test]
fn one_boiler_hour_exact_and_part75() {
    // C-1 form, C-4 rate, C-8 form and C-10 at half an hour of operation.
    let mut u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::O2, DRY_O2);
    let hour = boiler_hour();
    let r = compute_hour(&hour, &resolve_readings(&hour, &u), &u);
    let so2_rate = r.so2_lb_per_hr.unwrap();
    assert_eq!(so2_rate.equation, Equation::F1);
    check(
        so2_rate.value,
        dec!(2490),
        10,
        "App. F Eq. F-1: 1.660e-7 × 500 × 3e7",
    );
    assert_eq!(r.so2(), Some(Lb(dec!(1245))));
    let nox_rate = r.nox_lb_per_mmbtu.unwrap();
    check(nox_rate.value, dec!(0.136344), 6, "C-4");
    let hi = r.heat_input_mmbtu_per_hr.unwrap();
    assert_eq!(hi.equation, Equation::F18);
    let expected_hi =
        heat_input_mmbtu_per_hr_f18(dec!(30000000), dec!(3.0), dec!(8.0), dec!(9780)).0;
    assert_eq!(hi.value, expected_hi);
    assert_eq!(r.heat_input(), Some(Mmbtu(expected_hi * dec!(0.5))));
    assert_eq!(r.nox(), Some(Lb(nox_rate.value * expected_hi * dec!(0.5))));
    check(r.co2().unwrap().0, dec!(85.5), 10, "C-10 × 0.5 h");
    assert!(!r.moisture_filled && !r.diluent_filled);

    u.rounding = Rounding::Part75;
    let r = compute_hour(&hour, &resolve_readings(&hour, &u), &u);
    assert_eq!(r.nox_lb_per_mmbtu.unwrap().value, dec!(0.136));
    assert_eq!(
        r.nox(),
        Some(Lb(dec!(0.136) * expected_hi * dec!(0.5))),
        "F-24 uses the rounded rate"
    );
    assert_eq!(
        r.heat_input_mmbtu_per_hr.unwrap().value,
        expected_hi,
        "heat input is not rounded"
    );
}

#[test]
fn zero_operating_time_computes_nothing() {
    let u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::O2, DRY_O2);
    let hour = HourInput {
        op_time_hr: Decimal::ZERO,
        ..boiler_hour()
    };
    let r = compute_hour(&hour, &resolve_readings(&hour, &u), &u);
    assert_eq!(r, HourResult::default());
    let running = HourInput {
        op_time_hr: dec!(0.01),
        ..boiler_hour()
    };
    assert!(compute_hour(&running, &resolve_readings(&running, &u), &u)
        .so2()
        .is_some());
}

#[test]
fn missing_moisture_and_diluent_take_the_conservative_bounds() {
    let dry = Bases {
        so2: Basis::Dry,
        ..DRY_O2
    };
    let u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::O2, dry);
    let hour = HourInput {
        h2o_pct: None,
        o2_pct: None,
        ..boiler_hour()
    };
    let r = compute_hour(&hour, &resolve_readings(&hour, &u), &u);
    assert!(r.moisture_filled && r.diluent_filled);
    // SO2 by F-2 at the minimum moisture (3 %), heat input by F-18 at minimum O2 (2 %) and moisture.
    assert_eq!(
        r.so2_lb_per_hr.unwrap().value,
        so2_lb_per_hr_f2(dec!(500), dec!(30000000), dec!(3.0)).0
    );
    assert_eq!(
        r.heat_input_mmbtu_per_hr.unwrap().value,
        heat_input_mmbtu_per_hr_f18(dec!(30000000), dec!(2.0), dec!(3.0), dec!(9780)).0
    );
    // Without O2 the NOx-diluent rate is missing, never filled from a bound.
    assert_eq!(r.nox_lb_per_mmbtu, None);
    assert_eq!(r.nox_lb, None);
    // Each bound raises the result above the value at the reading it replaced.
    let measured = compute_hour(&boiler_hour(), &resolve_readings(&boiler_hour(), &u), &u);
    assert!(r.so2_lb_per_hr.unwrap().value > measured.so2_lb_per_hr.unwrap().value);
    assert!(
        r.heat_input_mmbtu_per_hr.unwrap().value > measured.heat_input_mmbtu_per_hr.unwrap().value
    );
}

#[test]
fn co2_from_o2_feeds_heat_input_and_co2_mass_once() {
    // A turbine with no CO2 monitor and a CO2 diluent: CO2 from O2 by Eq. F-14a, then F-16 and F-11 dry.
    let bases = Bases {
        o2: Basis::Dry,
        ..DRY_O2
    };
    let mut u = unit(
        UnitKind::CombustionTurbine,
        Fuel::NaturalGas,
        Diluent::Co2,
        bases,
    );
    u.co2_from_o2 = true;
    u.computes.so2 = false;
    let hour = HourInput {
        op_time_hr: dec!(1),
        load_mw: Some(dec!(80)),
        nox_ppm: Some(dec!(9)),
        o2_pct: Some(dec!(3.0)),
        flow_scfh_wet: Some(dec!(30000000)),
        h2o_pct: Some(dec!(10.0)),
        ..HourInput::default()
    };
    let r = compute_hour(&hour, &resolve_readings(&hour, &u), &u);
    let co2 = r.co2_pct_derived.unwrap();
    assert_eq!(co2.equation, Equation::F14a);
    check(co2.value, dec!(10.23), 2, "C-9 via compute_hour");
    assert_eq!(r.heat_input_mmbtu_per_hr.unwrap().equation, Equation::F16);
    assert_eq!(
        r.heat_input_mmbtu_per_hr.unwrap().value,
        heat_input_mmbtu_per_hr_f16(dec!(30000000), co2.value, dec!(10.0), dec!(1040)).0
    );
    assert_eq!(r.co2_tons_per_hr.unwrap().equation, Equation::F11Dry);
    // NOx dry and CO2 derived dry: the same-basis form F-6 (Method 19 Eq. 19-6).
    assert_eq!(r.nox_lb_per_mmbtu.unwrap().equation, Equation::F6);
    assert_eq!(r.so2_lb, None);
}

#[test]
fn formula_prints_the_equation_and_the_numbers() {
    let c = Calc::new(
        Equation::F1,
        &[K_SO2_LB_PER_SCF_PPM, dec!(500), dec!(20000000)],
        dec!(1660.0),
    );
    assert_eq!(
        c.formula().to_string(),
        "40 CFR 75 App. F Eq. F-1: Eh = K · Ch · Qh = 0.000000166 × 500 × 20000000 = 1660"
    );
    let u = unit(UnitKind::Boiler, Fuel::Bituminous, Diluent::O2, DRY_O2);
    let mut u75 = u;
    u75.rounding = Rounding::Part75;
    let n = nox_rate_measured(&nox_hour(dec!(100), Some(dec!(3.0)), None, None), &u75).unwrap();
    assert_eq!(
        n.formula().to_string(),
        format!(
            "40 CFR 75 App. F Eq. F-5: E = K · Ch · F · 20.9/(20.9 − %O2) = 0.0000001194 × 100 × 9780 × 20.9/(20.9 − 3) = {}; rounded to 3 decimals (part75) = 0.136",
            n.computed.normalize()
        )
    );
    for eq in [
        Equation::M19_3D,
        Equation::F17,
        Equation::F24,
        Equation::Substituted,
    ] {
        assert!(eq.arity() <= ARGS_MAX && eq.arity() > 0);
    }
}

// ---------------------------------------------------------------------------
// The full-hour fast path of the hourly masses against the plain `Decimal` formula

/// A stored reading: a fixed-point integer ×10^6 as the ledger holds it.
fn reading(lo: i64, hi: i64) -> impl proptest::strategy::Strategy<Value = Decimal> {
    use proptest::prelude::*;
    (lo..hi).prop_map(|v| Decimal::new(v, crate::records::READING_SCALE))
}

/// Operating time ×10^2, mostly full hours (1.00) as in the data.
fn op_time() -> impl proptest::strategy::Strategy<Value = Decimal> {
    use proptest::prelude::*;
    prop_oneof![
        3 => Just(Decimal::new(100, crate::records::OP_TIME_SCALE)),
        1 => (0i64..=100).prop_map(|c| Decimal::new(c, crate::records::OP_TIME_SCALE)),
        1 => Just(Decimal::ONE),
    ]
}

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig::with_cases(400))]

    /// `times_op_time` equals `Decimal`'s `value × t` bit for bit, for any value.
    #[test]
    fn times_op_time_equals_decimal_multiplication(
        m in -(1i128 << 96) + 1..(1i128 << 96),
        s in 0u32..=28,
        t in op_time(),
    ) {
        let v = Decimal::from_i128_with_scale(m, s);
        proptest::prop_assert_eq!(times_op_time(v, t).serialize(), (v * t).serialize(), "{} × {}", v, t);
    }

    /// Hourly masses from readings as stored: each equals its plain formula bit for bit.
    /// Heat input rate by 40 CFR 75 App. F Eq. F-18 (form from memory), times t (App. F §5.2);
    /// SO2 by Eq. F-1 times t (Eq. F-3); NOx by Eq. F-5 and Eq. F-24 `M = ER · HI · t`;
    /// CO2 by Eq. F-11 times t (Eq. F-12).
    #[test]
    fn hourly_masses_equal_the_plain_formulas(
        flow in reading(1_000_000_000_000, 40_000_000_000_000),
        so2 in reading(0, 1_000_000_000),
        nox in reading(0, 400_000_000),
        o2 in reading(0, 20_899_999),
        co2 in reading(0, 20_000_000),
        h2o in reading(0, 30_000_000),
        t in op_time(),
    ) {
        let f = bituminous();
        let hi = heat_input_mmbtu_per_hr_f18(flow, o2, h2o, f.f_dscf_per_mmbtu);
        let so2_rate = so2_lb_per_hr_f1(so2, flow);
        let nox_rate = nox_lb_per_mmbtu_f5(nox, o2, f.f_dscf_per_mmbtu);
        let co2_rate = co2_tons_per_hr_f11(co2, flow);
        let bits = |d: Decimal| d.serialize();
        proptest::prop_assert_eq!(bits(heat_input_mmbtu(hi, t).0), bits(hi.0 * t));
        proptest::prop_assert_eq!(bits(so2_lb(so2_rate, t).0), bits(so2_rate.0 * t));
        proptest::prop_assert_eq!(bits(nox_lb_f24(nox_rate, hi, t).0), bits(nox_rate.0 * hi.0 * t));
        proptest::prop_assert_eq!(bits(co2_tons(co2_rate, t).0), bits(co2_rate.0 * t));
    }

    /// `product` is `*` bit for bit, for mantissas of every size and any
    /// scales, zero and signs included.
    #[test]
    fn product_is_decimal_multiplication(
        (am, bm) in (proptest::prelude::any::<i128>(), proptest::prelude::any::<i128>()),
        (abits, bbits) in (0u32..=96, 0u32..=96),
        (ascale, bscale) in (0u32..=28, 0u32..=28),
    ) {
        let cut = |m: i128, bits: u32| if bits == 0 { 0 } else { m % (1i128 << bits).min((1i128 << 96) - 1) };
        let a = Decimal::from_i128_with_scale(cut(am, abits), ascale);
        let b = Decimal::from_i128_with_scale(cut(bm, bbits), bscale);
        // Beyond Decimal's range both panic alike (`product` falls back to `*`).
        if let Some(expected) = a.checked_mul(b) {
            proptest::prop_assert_eq!(product(a, b).serialize(), expected.serialize(), "{} × {}", a, b);
        }
    }

}
