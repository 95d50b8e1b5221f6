use super::*;
use crate::emissions::cems::{Bases, Basis, Computes, GapBounds};
use crate::emissions::constants::f_factors;
use crate::emissions::fuel::Fuel;
use crate::emissions::method::Diluent;
use crate::site::{Rounding, UnitKind};

/// Compare a substitute with its expected value and rule; `source` cites the rule.
fn check(got: Option<Choice>, value: Decimal, rule: Rule, source: &str) {
    let got = got.unwrap_or_else(|| panic!("{source}: no value"));
    assert_eq!((got.value, got.rule), (value, rule), "{source}");
}

const MPC: Decimal = dec!(1566);
const MPF: Decimal = dec!(50000000);
const MER: Decimal = dec!(1.5);

fn config(computes: Computes) -> StreamConfig {
    StreamConfig {
        unit: CemsUnit {
            kind: UnitKind::Boiler,
            f: f_factors(Fuel::Bituminous),
            heat_input_diluent: Diluent::O2,
            nox_diluent: Diluent::O2,
            bases: Bases {
                so2: Basis::Wet,
                nox: Basis::Dry,
                o2: Basis::Dry,
                co2: Basis::Wet,
            },
            co2_from_o2: false,
            rounding: Rounding::Exact,
            computes,
            gap_bounds: GapBounds {
                h2o_pct_min: dec!(3),
                h2o_pct_max: dec!(15),
                o2_pct_min: dec!(2),
                co2_pct_max: dec!(16),
            },
        },
        max_load_mw: Some(dec!(600)),
        maximum_potentials: MaximumPotentials {
            so2_ppm: Some(MPC),
            flow_scfh: Some(MPF),
            nox_lb_per_mmbtu: Some(MER),
        },
    }
}

fn so2_only() -> StreamConfig {
    config(Computes {
        so2: true,
        ..Computes::default()
    })
}

fn so2_hour(so2: Option<Decimal>) -> HourInput {
    HourInput {
        op_time_hr: dec!(1),
        load_mw: Some(dec!(300)),
        so2_ppm: so2,
        flow_scfh_wet: Some(dec!(20000000)),
        ..HourInput::default()
    }
}

/// Feed SO2 readings (hour i at clock hour i), finish, and collect every hour.
fn run_so2(readings: &[Option<Decimal>]) -> (Vec<HourOut>, StreamSummary) {
    let mut s = UnitStream::new(so2_only()).unwrap();
    let mut out = Vec::new();
    for (i, r) in readings.iter().enumerate() {
        s.push(i as i64, so2_hour(*r)).unwrap();
        out.extend(std::iter::from_fn(|| s.next_ready().copied()));
    }
    s.finish().unwrap();
    out.extend(std::iter::from_fn(|| s.next_ready().copied()));
    (out, s.summary())
}

fn substitutions(out: &[HourOut], p: Parameter) -> Vec<Substitution> {
    out.iter()
        .filter_map(|h| match h.fill(p) {
            Fill::Substituted(s) => Some(s),
            _ => None,
        })
        .collect()
}

fn stats(lookback: &[Decimal]) -> Stats {
    stats_of(&mut lookback.to_vec()).unwrap()
}

#[test]
fn c14_percentiles_by_nearest_rank() {
    // Check value C-14: §72.2 percentile, nearest rank ⌈0.9·20⌉ = 18th smallest of 101..=120 is 118.
    let values: Vec<Decimal> = (101..=120).map(Decimal::from).collect();
    assert_eq!(
        percentile_nearest_rank(&values, 90),
        dec!(118),
        "C-14, §72.2"
    );
    assert_eq!(
        percentile_nearest_rank(&values, 95),
        dec!(119),
        "⌈0.95·20⌉ = 19th"
    );
    let s = stats(&values);
    assert_eq!((s.count, s.mean, s.max), (20, dec!(110.5), dec!(120)));
    assert_eq!(percentile_nearest_rank(&[dec!(7)], 90), dec!(7));
    // n = 21: ⌈18.9⌉ = 19th smallest.
    let values: Vec<Decimal> = (1..=21).map(Decimal::from).collect();
    assert_eq!(percentile_nearest_rank(&values, 90), dec!(19));
}

fn lookback_c15() -> Stats {
    Stats {
        count: 720,
        mean: dec!(230),
        p90: dec!(260),
        p95: dec!(280),
        max: dec!(310),
    }
}

fn facts(tier: Tier, gap_op_hours: u32) -> GapFacts {
    GapFacts {
        tier,
        gap_op_hours,
        before: Some(dec!(200)),
        after: Some(dec!(240)),
    }
}

#[test]
fn c15_so2_substitution_tiers() {
    // Check value C-15: 40 CFR 75.33(b) Table 1.
    let s = lookback_c15();
    let go = |mda, gap| so2_choice(&facts(Tier::for_mda(mda), gap), Some(&s), Some(MPC));
    check(
        go(dec!(96), 30),
        dec!(260),
        Rule::Percentile90OrBeforeAfter,
        "C-15 %MDA 96, 30 h",
    );
    check(
        go(dec!(92), 10),
        dec!(280),
        Rule::Percentile95OrBeforeAfter,
        "C-15 %MDA 92, 10 h",
    );
    check(
        go(dec!(92), 6),
        dec!(220),
        Rule::BeforeAfterAverage,
        "C-15 %MDA 92, 6 h",
    );
    check(
        go(dec!(85), 6),
        dec!(310),
        Rule::LookbackMaximum,
        "C-15 %MDA 85",
    );
    check(
        go(dec!(75), 6),
        dec!(1566),
        Rule::MaximumPotential,
        "C-15 %MDA 75",
    );
    // "Greater of": a before/after average above the percentile wins (§75.33(b) Table 1).
    let high = GapFacts {
        before: Some(dec!(300)),
        after: Some(dec!(340)),
        ..facts(Tier::Mda95, 30)
    };
    check(
        so2_choice(&high, Some(&s), Some(MPC)),
        dec!(320),
        Rule::Percentile90OrBeforeAfter,
        "§75.33(b) greater of",
    );
}

#[test]
fn so2_gap_length_boundaries() {
    // 40 CFR 75.33(b) Table 1: ≤ 24 h vs > 24 h at ≥ 95.0 %; ≤ 8 h vs > 8 h at 90.0 to < 95.0 %.
    let s = lookback_c15();
    let go = |tier, gap| so2_choice(&facts(tier, gap), Some(&s), Some(MPC));
    check(
        go(Tier::Mda95, 24),
        dec!(220),
        Rule::BeforeAfterAverage,
        "§75.33(b) 24 h",
    );
    check(
        go(Tier::Mda95, 25),
        dec!(260),
        Rule::Percentile90OrBeforeAfter,
        "§75.33(b) 25 h",
    );
    check(
        go(Tier::Mda90, 8),
        dec!(220),
        Rule::BeforeAfterAverage,
        "§75.33(b) 8 h",
    );
    check(
        go(Tier::Mda90, 9),
        dec!(280),
        Rule::Percentile95OrBeforeAfter,
        "§75.33(b) 9 h",
    );
}

#[test]
fn c16_and_availability_tier_boundaries() {
    // Check value C-16: §75.32 Eq. 9, 8,322/8,760 = 95.000 % and 8,321/8,760 = 94.989 %.
    let mda = |qa: u32| Decimal::ONE_HUNDRED * Decimal::from(qa) / Decimal::from(8760);
    assert_eq!(Tier::for_mda(mda(8322)), Tier::Mda95, "C-16");
    assert_eq!(Tier::for_mda(mda(8321)), Tier::Mda90, "C-16");
    // 40 CFR 75.33 Tables 1 and 2: each limit belongs to the tier above it.
    assert_eq!(Tier::for_mda(dec!(95.0)), Tier::Mda95);
    assert_eq!(Tier::for_mda(dec!(94.99)), Tier::Mda90);
    assert_eq!(Tier::for_mda(dec!(90.0)), Tier::Mda90);
    assert_eq!(Tier::for_mda(dec!(89.99)), Tier::Mda80);
    assert_eq!(Tier::for_mda(dec!(80.0)), Tier::Mda80);
    assert_eq!(Tier::for_mda(dec!(79.99)), Tier::MdaBelow80);
}

#[test]
fn so2_initial_period_rules() {
    // 40 CFR 75.31(b): before/after average with prior data, MPC without.
    check(
        so2_choice(&facts(Tier::Initial, 100), None, Some(MPC)),
        dec!(220),
        Rule::BeforeAfterAverage,
        "§75.31(b)",
    );
    let none = GapFacts {
        before: None,
        ..facts(Tier::Initial, 3)
    };
    check(
        so2_choice(&none, None, Some(MPC)),
        MPC,
        Rule::NoHistoryMaximumPotential,
        "§75.31(b)(2)",
    );
    assert_eq!(
        so2_choice(&none, None, None),
        None,
        "MPC required and absent"
    );
}

#[test]
fn load_range_boundaries() {
    // App. C §2 ten ranges of 10 % (boundary convention in the module doc).
    let max = dec!(600);
    for (load, range) in [
        (dec!(0), 1),
        (dec!(60), 1),
        (dec!(60.01), 2),
        (dec!(300), 5),
        (dec!(300.1), 6),
        (dec!(540), 9),
        (dec!(540.1), 10),
        (dec!(600), 10),
        (dec!(700), 10),
    ] {
        assert_eq!(load_range(load, max), range, "load {load}");
        assert_eq!(
            load_range_fast(load, max),
            range,
            "load {load}, integer path"
        );
    }
}

fn range_table() -> [Option<Stats>; LOAD_RANGES] {
    let mut t = [None; LOAD_RANGES];
    t[4] = Some(Stats {
        count: 100,
        mean: dec!(1000),
        p90: dec!(1100),
        p95: dec!(1150),
        max: dec!(1200),
    });
    t[7] = Some(Stats {
        count: 50,
        mean: dec!(2000),
        p90: dec!(2100),
        p95: dec!(2150),
        max: dec!(2200),
    });
    t
}

#[test]
fn load_based_tiers_and_gap_boundaries() {
    // 40 CFR 75.33(c) Table 2, with the before/after average 220 below every range statistic.
    let t = range_table();
    let go = |tier, gap, range| load_based_choice(&facts(tier, gap), range, &t, Some(MPF));
    check(
        go(Tier::Mda95, 24, Some(5)),
        dec!(1000),
        Rule::LoadRangeAverage,
        "§75.33(c) ≥95, 24 h",
    );
    check(
        go(Tier::Mda95, 25, Some(5)),
        dec!(1100),
        Rule::LoadRangePercentile90OrBeforeAfter,
        "§75.33(c) ≥95, 25 h",
    );
    check(
        go(Tier::Mda90, 8, Some(5)),
        dec!(1000),
        Rule::LoadRangeAverage,
        "§75.33(c) 90-95, 8 h",
    );
    check(
        go(Tier::Mda90, 9, Some(5)),
        dec!(1150),
        Rule::LoadRangePercentile95OrBeforeAfter,
        "§75.33(c) 90-95, 9 h",
    );
    check(
        go(Tier::Mda80, 1, Some(5)),
        dec!(1200),
        Rule::LoadRangeMaximum,
        "§75.33(c) 80-90",
    );
    check(
        go(Tier::MdaBelow80, 1, Some(5)),
        MPF,
        Rule::MaximumPotential,
        "§75.33(c) < 80",
    );
    // §75.33(c)(5): no data at range 6, next higher with data is range 8; (c)(6): none above range 9.
    let c5 = go(Tier::Mda95, 2, Some(6)).unwrap();
    assert_eq!(
        (c5.value, c5.rule, c5.range_used),
        (dec!(2200), Rule::HigherLoadRangeMaximum, Some(8))
    );
    check(
        go(Tier::Mda95, 2, Some(9)),
        MPF,
        Rule::MaximumPotential,
        "§75.33(c)(6)",
    );
    check(
        go(Tier::Mda95, 2, None),
        MPF,
        Rule::LoadUnknownMaximumPotential,
        "§75.33(c) bin unknown",
    );
    // 40 CFR 75.31(c): initial period averages.
    check(
        go(Tier::Initial, 300, Some(5)),
        dec!(1000),
        Rule::LoadRangeAverage,
        "§75.31(c)",
    );
    check(
        go(Tier::Initial, 3, Some(6)),
        dec!(2000),
        Rule::HigherLoadRangeAverage,
        "§75.31(c)",
    );
    check(
        go(Tier::Initial, 3, Some(9)),
        MPF,
        Rule::NoHistoryMaximumPotential,
        "§75.31(c)(3)",
    );
}

/// 720 quality-assured values cycling through 100..=149 ppm.
fn history_720() -> Vec<Option<Decimal>> {
    (0..720)
        .map(|i| Some(Decimal::from(100 + i % 50)))
        .collect()
}

#[test]
fn stream_so2_gap_of_24_vs_25_hours() {
    // 40 CFR 75.33(b) Table 1 at %MDA ≥ 95.0 (720/745 = 96.6 %).
    let lookback: Vec<Decimal> = history_720().into_iter().flatten().collect();
    let p90 = stats(&lookback).p90;
    assert_eq!(p90, dec!(144));
    for (gap, value, rule) in [
        (24, dec!(119.5), Rule::BeforeAfterAverage),
        (25, p90, Rule::Percentile90OrBeforeAfter),
    ] {
        let mut readings = history_720();
        readings.extend(std::iter::repeat_n(None, gap));
        readings.push(Some(dec!(120)));
        let (out, summary) = run_so2(&readings);
        let subs = substitutions(&out, Parameter::So2);
        assert_eq!(subs.len(), gap);
        for s in &subs {
            assert_eq!(
                (s.value, s.rule, s.tier),
                (value, rule, Tier::Mda95),
                "gap {gap}"
            );
            assert_eq!(
                (s.before, s.after, s.gap_op_hours),
                (Some(dec!(119)), Some(dec!(120)), gap as u32)
            );
        }
        assert_eq!(summary.parameters[0].unwrap().substituted_hours, gap as u64);
        // The substitute went into F-1: SO2 lb/hr = K × ppm × flow.
        let h = out[720];
        assert_eq!(
            h.result.so2_lb_per_hr.unwrap().value,
            cems::so2_lb_per_hr_f1(value, dec!(20000000)).0
        );
    }
}

#[test]
fn stream_initial_period_ends_at_the_720th_qa_hour() {
    // 40 CFR 75.31(a): the initial procedures apply before 720 quality-assured hours.
    for (qa, tier) in [(719, Tier::Initial), (720, Tier::Mda95)] {
        let mut readings = history_720();
        readings.truncate(qa);
        readings.push(None);
        readings.push(Some(dec!(100)));
        let (out, _) = run_so2(&readings);
        let s = substitutions(&out, Parameter::So2)[0];
        assert_eq!(s.tier, tier, "after {qa} QA hours");
        assert_eq!(s.mda_pct.is_some(), tier != Tier::Initial);
    }
}

#[test]
fn stream_lookback_holds_720_qa_hours_and_no_substitute() {
    // 40 CFR 75.33(b): the previous 720 QA hours; 100 missing hours at the start make
    // %MDA = 720/821 = 87.7 % at the gap (80 to < 90: lookback maximum).
    for (qa, max) in [(720, dec!(9999)), (721, dec!(100))] {
        let mut readings: Vec<Option<Decimal>> = vec![None; 100];
        readings.push(Some(dec!(9999)));
        readings.extend(std::iter::repeat_n(Some(dec!(100)), qa - 1));
        readings.push(None);
        readings.push(Some(dec!(100)));
        let (out, summary) = run_so2(&readings);
        let subs = substitutions(&out, Parameter::So2);
        // The first 100 hours have no history: MPC, which must never enter the lookback.
        assert!(subs[..100]
            .iter()
            .all(|s| s.value == MPC && s.rule == Rule::NoHistoryMaximumPotential));
        let last = subs[100];
        assert_eq!(last.tier, Tier::Mda80);
        assert_eq!(
            (last.rule, last.value, last.sample_count),
            (Rule::LookbackMaximum, max, 720),
            "{qa} QA hours"
        );
        assert_eq!(summary.parameters[0].unwrap().substituted_hours, 101);
        assert_eq!(summary.parameters[0].unwrap().qa_hours, qa as u64 + 1);
    }
}

#[test]
fn stream_availability_is_recomputed_for_each_hour_of_a_gap() {
    // §75.32 (availability recomputed each hour) and §75.33(b) Table 1: in a 100-hour gap after
    // 720 QA hours, %MDA = 720/(720 + k) passes 95.0 after k = 37 and 90.0 after k = 80.
    let lookback: Vec<Decimal> = history_720().into_iter().flatten().collect();
    let s = stats(&lookback);
    let mut readings = history_720();
    readings.extend(std::iter::repeat_n(None, 100));
    readings.push(Some(dec!(100)));
    let (out, _) = run_so2(&readings);
    let subs = substitutions(&out, Parameter::So2);
    for (k, sub) in (1..).zip(&subs) {
        let (tier, rule, value) = match k {
            1..=37 => (Tier::Mda95, Rule::Percentile90OrBeforeAfter, s.p90),
            38..=80 => (Tier::Mda90, Rule::Percentile95OrBeforeAfter, s.p95),
            _ => (Tier::Mda80, Rule::LookbackMaximum, s.max),
        };
        assert_eq!(
            (sub.tier, sub.rule, sub.value),
            (tier, rule, value),
            "gap hour {k}"
        );
    }
}

#[test]
fn stream_c16_availability_over_8760_operating_hours() {
    // Check value C-16 through the stream (§75.32 Eq. 9): the window of 8,760 operating hours
    // ending with a missing hour holds 8,322 QA hours (95.000 %) or 8,321 (94.989 %).
    for (earlier_missing, tier) in [(437, Tier::Mda95), (438, Tier::Mda90)] {
        let mut readings = history_720();
        readings.extend(std::iter::repeat_n(None, earlier_missing));
        let qa_after = 8759 - readings.len();
        readings.extend(std::iter::repeat_n(Some(dec!(120)), qa_after));
        readings.push(None);
        assert_eq!(readings.len(), 8760);
        let (out, _) = run_so2(&readings);
        let last = substitutions(&out, Parameter::So2).pop().unwrap();
        let qa = 8760 - earlier_missing as u32 - 1;
        assert_eq!(
            last.mda_pct,
            Some(Decimal::ONE_HUNDRED * Decimal::from(qa) / Decimal::from(8760))
        );
        assert_eq!(last.tier, tier, "C-16 with {qa} QA hours");
        // The gap is open at the end of the data: the hour before stands alone.
        assert_eq!((last.after, last.value), (None, dec!(120)));
    }
}

#[test]
fn zero_operating_time_neither_breaks_nor_lengthens_a_gap() {
    let mut s = UnitStream::new(so2_only()).unwrap();
    let idle = HourInput {
        op_time_hr: Decimal::ZERO,
        ..so2_hour(None)
    };
    s.push(0, so2_hour(Some(dec!(100)))).unwrap();
    s.push(1, so2_hour(None)).unwrap();
    s.push(2, idle).unwrap();
    s.push(3, so2_hour(None)).unwrap();
    let first = s.next_ready().expect("the QA hour is ready");
    assert_eq!(first.fill(Parameter::So2), Fill::Measured);
    assert!(
        s.next_ready().is_none(),
        "gap hours wait for the gap to close"
    );
    s.push(4, so2_hour(Some(dec!(200)))).unwrap();
    let out: Vec<HourOut> = std::iter::from_fn(|| s.next_ready().copied()).collect();
    assert_eq!(
        out.iter().map(|h| h.clock_hour).collect::<Vec<_>>(),
        [1, 2, 3, 4]
    );
    assert_eq!(out[0].fill(Parameter::Flow), Fill::Measured);
    assert_eq!(
        out[0].fill(Parameter::So2),
        Fill::Substituted(substitutions(&out, Parameter::So2)[0])
    );
    assert_eq!(out[1].fills, [Fill::NotUsed; 3]);
    assert_eq!(out[1].result, HourResult::default());
    let subs = substitutions(&out, Parameter::So2);
    assert_eq!(subs.len(), 2);
    assert!(subs
        .iter()
        .all(|s| s.gap_op_hours == 2 && s.value == dec!(150) && s.tier == Tier::Initial));
    assert_eq!(s.summary().operating_hours, 4);
}

fn flow_config() -> StreamConfig {
    config(Computes {
        heat_input: true,
        nox: true,
        ..Computes::default()
    })
}

fn flow_hour(load: Option<Decimal>, flow: Option<Decimal>, nox_ppm: Option<Decimal>) -> HourInput {
    HourInput {
        op_time_hr: dec!(1),
        load_mw: load,
        nox_ppm,
        o2_pct: Some(dec!(3.0)),
        flow_scfh_wet: flow,
        h2o_pct: Some(dec!(8.0)),
        ..HourInput::default()
    }
}

fn run(config: StreamConfig, hours: &[HourInput]) -> Result<Vec<HourOut>, SubstituteError> {
    let mut s = UnitStream::new(config)?;
    let mut out = Vec::new();
    for (i, h) in hours.iter().enumerate() {
        s.push(i as i64, *h)?;
        out.extend(std::iter::from_fn(|| s.next_ready().copied()));
    }
    s.finish()?;
    out.extend(std::iter::from_fn(|| s.next_ready().copied()));
    Ok(out)
}

#[test]
fn stream_flow_initial_period_by_load_range() {
    // 40 CFR 75.31(c): average of prior QA values at the range, else the next higher range, else MPF.
    let q = |load, flow| flow_hour(Some(load), Some(flow), Some(dec!(100)));
    let gap = |load| flow_hour(load, None, Some(dec!(100)));
    let hours = [
        q(dec!(300), dec!(10000000)),
        q(dec!(300), dec!(12000000)),
        q(dec!(480), dec!(20000000)),
        gap(Some(dec!(290))),
        gap(Some(dec!(350))),
        gap(Some(dec!(550))),
        gap(None),
        q(dec!(300), dec!(11000000)),
    ];
    let out = run(flow_config(), &hours).unwrap();
    let subs = substitutions(&out, Parameter::Flow);
    let got: Vec<(Decimal, Rule, Option<u8>)> = subs
        .iter()
        .map(|s| (s.value, s.rule, s.range_used))
        .collect();
    assert_eq!(
        got,
        [
            (dec!(11000000), Rule::LoadRangeAverage, Some(5)),
            (dec!(20000000), Rule::HigherLoadRangeAverage, Some(8)),
            (MPF, Rule::NoHistoryMaximumPotential, None),
            (MPF, Rule::LoadUnknownMaximumPotential, None),
        ]
    );
    assert!(subs
        .iter()
        .all(|s| s.tier == Tier::Initial && s.gap_op_hours == 4));
    // The substituted flow went into heat input (F-18) and NOx mass (F-24).
    let h = out[3].result;
    let hi = cems::heat_input_mmbtu_per_hr_f18(dec!(11000000), dec!(3.0), dec!(8.0), dec!(9780)).0;
    assert_eq!(h.heat_input_mmbtu_per_hr.unwrap().value, hi);
    assert_eq!(
        h.nox_lb.unwrap().value,
        h.nox_lb_per_mmbtu.unwrap().value * hi
    );
}

#[test]
fn stream_late_flow_gap_uses_the_load_range_of_the_last_2160_qa_hours() {
    // 40 CFR 75.33(c) Table 2 after 2,160 QA hours: short gap at ≥ 95.0 % → load-range average
    // over the previous 2,160 QA hours; an older value at the range drops out.
    let mut hours = vec![flow_hour(
        Some(dec!(300)),
        Some(dec!(90000000)),
        Some(dec!(100)),
    )];
    for i in 0..2160 {
        let (load, flow) = if i % 2 == 0 {
            (dec!(300), Decimal::from(10_000_000 + (i % 10) * 100_000))
        } else {
            (dec!(480), dec!(20000000))
        };
        hours.push(flow_hour(Some(load), Some(flow), Some(dec!(100))));
    }
    hours.push(flow_hour(Some(dec!(310)), None, Some(dec!(100))));
    hours.push(flow_hour(
        Some(dec!(300)),
        Some(dec!(10000000)),
        Some(dec!(100)),
    ));
    let out = run(flow_config(), &hours).unwrap();
    let s = substitutions(&out, Parameter::Flow)[0];
    let at_range: Vec<Decimal> = (0..2160)
        .filter(|i| i % 2 == 0)
        .map(|i| Decimal::from(10_000_000 + (i % 10) * 100_000))
        .collect();
    let expected = stats(&at_range);
    // Load 310 MW is range 6, which has no data: §75.33(c)(5) takes the maximum at the next
    // higher range with data (8).
    assert_eq!(
        (s.tier, s.rule, s.load_range),
        (Tier::Mda95, Rule::HigherLoadRangeMaximum, Some(6))
    );
    assert_eq!((s.range_used, s.value), (Some(8), dec!(20000000)));

    // At range 5 the average covers only the last 2,160 QA hours (1,080 at the range).
    let n = hours.len();
    hours[n - 2] = flow_hour(Some(dec!(300)), None, Some(dec!(100)));
    let out = run(flow_config(), &hours).unwrap();
    let s = substitutions(&out, Parameter::Flow)[0];
    assert_eq!(
        (s.rule, s.range_used, s.sample_count),
        (Rule::LoadRangeAverage, Some(5), 1080)
    );
    assert_eq!(s.value, expected.mean);
}

#[test]
fn stream_nox_rate_gap_is_substituted_and_used_in_f24() {
    // 40 CFR 75.31(c) for the NOx-diluent rate: a missing O2 makes the rate missing.
    let good = flow_hour(Some(dec!(300)), Some(dec!(20000000)), Some(dec!(100)));
    let no_o2 = HourInput {
        o2_pct: None,
        ..good
    };
    let out = run(flow_config(), &[good, no_o2, good]).unwrap();
    let s = substitutions(&out, Parameter::Nox)[0];
    let measured = out[0].result.nox_lb_per_mmbtu.unwrap().value;
    assert_eq!((s.rule, s.value), (Rule::LoadRangeAverage, measured));
    let h = out[1].result;
    assert_eq!(
        h.nox_lb_per_mmbtu.unwrap().equation,
        cems::Equation::Substituted
    );
    assert!(h.diluent_filled, "heat input took the minimum O2 bound");
    assert_eq!(
        h.nox_lb.unwrap().value,
        measured * h.heat_input_mmbtu_per_hr.unwrap().value
    );
}

#[test]
fn refusals_name_what_is_missing() {
    let mut c = flow_config();
    c.max_load_mw = None;
    let hours = [flow_hour(Some(dec!(300)), None, Some(dec!(100)))];
    assert_eq!(
        run(c, &hours).unwrap_err(),
        SubstituteError::NeedsMaxLoad {
            parameter: Parameter::Flow,
            clock_hour: 0
        }
    );
    // Without a gap, max_load_mw is not needed.
    assert!(run(
        c,
        &[flow_hour(Some(dec!(300)), Some(dec!(1)), Some(dec!(100)))]
    )
    .is_ok());

    let mut c = so2_only();
    c.maximum_potentials.so2_ppm = None;
    let err = run(c, &[so2_hour(None), so2_hour(Some(dec!(100)))]).unwrap_err();
    assert!(matches!(
        err,
        SubstituteError::NeedsMaximumPotential {
            parameter: Parameter::So2,
            ..
        }
    ));

    let mut s = UnitStream::new(so2_only()).unwrap();
    s.push(5, so2_hour(Some(dec!(1)))).unwrap();
    assert_eq!(
        s.push(5, so2_hour(Some(dec!(1)))),
        Err(SubstituteError::OutOfOrder {
            clock_hour: 5,
            previous: 5
        })
    );
    let mut c = so2_only();
    c.max_load_mw = Some(Decimal::ZERO);
    assert!(matches!(
        UnitStream::new(c),
        Err(SubstituteError::MaxLoad(_))
    ));
}

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig::with_cases(24))]

    /// Every SO2 substitute is the MPC or the statistic its rule names, recomputed here from the
    /// QA values before the hour only (so no substitute can have entered), and never below it.
    #[test]
    fn so2_substitutes_come_from_qa_values_only(
        values in proptest::collection::vec(proptest::option::weighted(0.85, 50u32..400), 760..900)
    ) {
        let readings: Vec<Option<Decimal>> = values.iter().map(|v| v.map(Decimal::from)).collect();
        let (out, _) = run_so2(&readings);
        proptest::prop_assert_eq!(out.len(), readings.len());
        let mut qa: Vec<Decimal> = Vec::new();
        for h in &out {
            match h.fill(Parameter::So2) {
                Fill::Measured => qa.push(h.input.so2_ppm.unwrap()),
                Fill::Substituted(s) => {
                    let from = qa.len().saturating_sub(SO2_LOOKBACK_QA_HOURS);
                    let lookback = stats_of(&mut qa[from..].to_vec());
                    let avg = GapFacts { tier: s.tier, gap_op_hours: s.gap_op_hours, before: s.before, after: s.after }
                        .before_after_average();
                    proptest::prop_assert_eq!(s.before, qa.last().copied());
                    match s.rule {
                        Rule::NoHistoryMaximumPotential | Rule::MaximumPotential => proptest::prop_assert_eq!(s.value, MPC),
                        Rule::BeforeAfterAverage => proptest::prop_assert_eq!(Some(s.value), avg),
                        Rule::Percentile90OrBeforeAfter => {
                            let p90 = lookback.unwrap().p90;
                            proptest::prop_assert_eq!(s.value, p90.max(avg.unwrap()));
                        }
                        Rule::Percentile95OrBeforeAfter => {
                            let p95 = lookback.unwrap().p95;
                            proptest::prop_assert_eq!(s.value, p95.max(avg.unwrap()));
                        }
                        Rule::LookbackMaximum => proptest::prop_assert_eq!(s.value, lookback.unwrap().max),
                        other => proptest::prop_assert!(false, "rule {:?} is not an SO2 rule", other),
                    }
                    if s.tier == Tier::Initial {
                        proptest::prop_assert!(qa.len() < 720);
                    } else {
                        proptest::prop_assert!(qa.len() >= 720);
                    }
                }
                Fill::NotUsed => proptest::prop_assert!(false, "every hour operates"),
            }
        }
    }
}

// ---------------------------------------------------------------------------
// Fast paths against the plain `Decimal` formulas they stand in for

/// A decimal of random mantissa and scale (at most 28 decimals).
fn any_decimal(
    max_mantissa: i128,
    negative_weight: f64,
) -> impl proptest::strategy::Strategy<Value = Decimal> {
    use proptest::prelude::*;
    (
        0..=max_mantissa,
        0u32..=28,
        proptest::bool::weighted(negative_weight),
    )
        .prop_map(|(m, s, neg)| Decimal::from_i128_with_scale(if neg { -m } else { m }, s))
}

/// Lookback values as the stream holds them: readings of scale 6, rates of
/// scale 28, some equal values written two ways (5.0 and 5.00), a few too
/// large for an order key; clock hours increasing.
fn lookback_values() -> impl proptest::strategy::Strategy<Value = VecDeque<QaValue>> {
    use proptest::prelude::*;
    let value = prop_oneof![
        4 => (0i64..3_000).prop_map(|v| Decimal::new(v * 1_000, 6)),
        3 => (1i128..=400_000).prop_map(|v| Decimal::from_i128_with_scale(v * 10i128.pow(22) + 7, 28)),
        2 => (0i64..50).prop_map(|v| Decimal::new(v, 1)),
        2 => (0i64..50).prop_map(|v| Decimal::new(v * 10, 2)),
        1 => any_decimal(1 << 90, 0.2),
    ];
    proptest::collection::vec((value, 0u8..=10, 1i64..30), 0..400).prop_map(|v| {
        let mut clock = 0;
        v.into_iter()
            .map(|(value, range, step)| {
                clock += step;
                QaValue {
                    clock_hour: clock,
                    value,
                    range,
                    key: lookback::order_key(value),
                }
            })
            .collect()
    })
}

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig::with_cases(200))]

    /// The integer load range equals App. C §2's ⌈10·load/max⌉ (clamped to 1..=10) by `Decimal`.
    #[test]
    fn load_range_fast_equals_the_decimal_formula(
        load in any_decimal(1_000_000_000_000, 0.05),
        max_m in 1i64..100_000_000,
        max_s in 0u32..=6,
        k in 0i64..=11,
        nudge in -2i64..=2,
        at_boundary in proptest::bool::ANY,
    ) {
        let max = Decimal::new(max_m, max_s);
        // Loads at a range boundary k·max/10 and a millionth either side of it.
        let load = if at_boundary {
            (max * Decimal::from(k) / Decimal::TEN + Decimal::new(nudge, 6)).max(Decimal::ZERO)
        } else {
            load
        };
        proptest::prop_assert_eq!(load_range_fast(load, max), load_range(load, max), "load {} max {}", load, max);
    }

    /// Lookback statistics by order key (nearest-rank percentiles of §72.2, mean and maximum of
    /// 40 CFR 75.33(b) Table 1 and (c) Table 2) equal `stats_of`'s, bit for bit: the whole lookback,
    /// and by load range every range an hour at a given range can use (its own, or the next
    /// higher one with data, §75.31(c) and §75.33(c)(5)).
    #[test]
    fn lookback_stats_equal_the_sorted_decimal_reference(
        lookback in lookback_values(),
        oldest in 0i64..2_000,
        hour_ranges in proptest::collection::vec(1u8..=10, 1..6),
    ) {
        let bits = |s: Option<Stats>| s.map(|s| [s.mean, s.p90, s.p95, s.max].map(|d| d.serialize()));
        let mut scratch = lookback::Scratch::default();
        let mut values = Vec::new();
        let fast = scratch.whole(&lookback, oldest);
        let plain = lookback::whole_plain(&lookback, oldest, &mut values);
        proptest::prop_assert_eq!(fast.map(|s| s.count), plain.map(|s| s.count));
        proptest::prop_assert_eq!(bits(fast), bits(plain));

        let fast = scratch.by_range(&lookback, oldest, hour_ranges.iter().copied());
        let plain = lookback::by_range_plain(&lookback, oldest, &mut Vec::new(), &mut values);
        let used = |t: &[Option<Stats>; LOAD_RANGES], r: u8| {
            (usize::from(r) - 1..LOAD_RANGES).find_map(|i| t[i].map(|s| (i, s.count, bits(Some(s)))))
        };
        for &r in &hour_ranges {
            proptest::prop_assert_eq!(used(&fast, r), used(&plain, r), "hour at range {}", r);
        }
    }
}
