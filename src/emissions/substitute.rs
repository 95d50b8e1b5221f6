//! Missing-data substitution for SO2 concentration, stack flow and NOx
//! emission rate: 40 CFR 75.31 (initial period) and 75.33 (standard
//! procedures), with availability counted as §75.32 counts it.
//!
//! [`UnitStream`] is one streaming pass over one unit's hours in time order.
//! It keeps the lookbacks in ring buffers of fixed capacity (720 or 2,160
//! quality-assured hours, and the 8,760 operating hours of the availability
//! window), so its memory does not grow with the data. A missing-data
//! period needs its length and the reading after it, so the hours of an open
//! gap wait in a queue until the gap closes; memory is bounded by the
//! lookbacks plus the longest gap.
//!
//! Invariants: only quality-assured readings enter a lookback, never a
//! substituted value; every substituted value carries its rule, tier and
//! the values it came from. No I/O, no clock; after construction the
//! per-hour path does not allocate except to grow the gap queue.
//!
//! Conventions we chose, where the rule leaves a choice:
//! - Percentiles by nearest rank: the ⌈p·n⌉-th smallest value (§72.2 admits
//!   more than one value; REFERENCES.md check value C-14).
//! - Load ranges (App. C §2, boundary inclusivity from memory): range k
//!   holds loads above (k−1)·10 % up to and including k·10 % of
//!   `max_load_mw`; range 1 also holds 0; loads above the maximum fall in
//!   range 10.
//! - The load-range lookback is the previous 2,160 quality-assured hours of
//!   the monitor, of which those at the hour's load range are used.
//! - Availability at an hour counts the window of operating hours ending
//!   with that hour, the missing hour itself included (§75.32 Eq. 8 while
//!   the window holds fewer than 8,760 hours, Eq. 9 after). It is compared
//!   unrounded: 94.99 % is below 95.0 %.
//! - Gap length is the count of operating hours in the whole missing-data
//!   period; hours with zero operating time neither break nor lengthen it.
//! - A gap still open when the data end has no hour after: the
//!   before/after average is then the hour before alone, and the
//!   substitution says so (`after` is `None`).
//! - The lookback used for a gap is the one at its first hour (no
//!   quality-assured value can enter during the gap); values older than
//!   26,280 clock hours before that hour are left out (§75.33).

use super::cems::{self, CemsUnit, HourInput, HourResult, Resolved};
use crate::decimal::POW10;
use rust_decimal::prelude::ToPrimitive;
use rust_decimal::Decimal;
use rust_decimal_macros::dec;
use std::collections::VecDeque;
use std::fmt;
use thiserror::Error;

mod lookback;
#[cfg(test)]
mod tests;

/// Quality-assured hours before the standard procedures apply to SO2 (40 CFR 75.31(a), 75.32).
pub const SO2_INITIAL_QA_HOURS: u64 = 720;
/// Quality-assured hours before the standard procedures apply to flow and NOx rate (40 CFR 75.31(a), 75.32).
pub const LOAD_BASED_INITIAL_QA_HOURS: u64 = 2160;
/// SO2 lookback: previous 720 quality-assured monitor operating hours (40 CFR 75.33(b)).
pub const SO2_LOOKBACK_QA_HOURS: usize = 720;
/// Flow and NOx lookback: previous 2,160 quality-assured monitor operating hours (40 CFR 75.33(c)).
pub const LOAD_BASED_LOOKBACK_QA_HOURS: usize = 2160;
/// Availability window after 8,760 unit operating hours (40 CFR 75.32 Eq. 9).
pub const MDA_WINDOW_OP_HOURS: usize = 8760;
/// No lookback reaches further back than 3 years: 3 × 8,760 clock hours (40 CFR 75.32, 75.33).
pub const LOOKBACK_CLOCK_HOURS_MAX: i64 = 26_280;
/// Ten operating load ranges of 10 % of the maximum load (40 CFR 75 App. C §2).
pub const LOAD_RANGES: usize = 10;
/// Longest gap filled by the before/after or load-range average at %MDA ≥ 95.0 (40 CFR 75.33 Tables 1 and 2).
pub const GAP_SHORT_HOURS_MDA95: u32 = 24;
/// Longest gap filled by the before/after or load-range average at 90.0 ≤ %MDA < 95.0 (40 CFR 75.33 Tables 1 and 2).
pub const GAP_SHORT_HOURS_MDA90: u32 = 8;

const MDA_95: Decimal = dec!(95.0);
const MDA_90: Decimal = dec!(90.0);
const MDA_80: Decimal = dec!(80.0);

/// A monitored parameter that missing-data substitution fills.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Parameter {
    So2,
    Flow,
    Nox,
}

impl Parameter {
    pub const ALL: [Parameter; 3] = [Parameter::So2, Parameter::Flow, Parameter::Nox];

    pub fn as_str(self) -> &'static str {
        match self {
            Parameter::So2 => "so2",
            Parameter::Flow => "flow",
            Parameter::Nox => "nox",
        }
    }

    pub fn index(self) -> usize {
        self as usize
    }

    fn initial_qa_hours(self) -> u64 {
        match self {
            Parameter::So2 => SO2_INITIAL_QA_HOURS,
            Parameter::Flow | Parameter::Nox => LOAD_BASED_INITIAL_QA_HOURS,
        }
    }

    fn lookback_qa_hours(self) -> usize {
        match self {
            Parameter::So2 => SO2_LOOKBACK_QA_HOURS,
            Parameter::Flow | Parameter::Nox => LOAD_BASED_LOOKBACK_QA_HOURS,
        }
    }

    /// What the maximum potential value is called for this parameter.
    fn maximum_potential(self) -> &'static str {
        match self {
            Parameter::So2 => "maximum potential concentration, ppm",
            Parameter::Flow => "maximum potential flow, scfh",
            Parameter::Nox => "maximum NOx emission rate, lb/MMBtu",
        }
    }
}

impl fmt::Display for Parameter {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The availability tier a substitution was chosen in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Tier {
    /// Before the standard procedures apply (40 CFR 75.31).
    Initial,
    /// %MDA ≥ 95.0 (40 CFR 75.33).
    Mda95,
    /// 90.0 ≤ %MDA < 95.0.
    Mda90,
    /// 80.0 ≤ %MDA < 90.0.
    Mda80,
    /// %MDA < 80.0.
    MdaBelow80,
}

impl Tier {
    /// The standard tier for an availability (40 CFR 75.33 Tables 1 and 2).
    pub fn for_mda(mda_pct: Decimal) -> Tier {
        if mda_pct >= MDA_95 {
            Tier::Mda95
        } else if mda_pct >= MDA_90 {
            Tier::Mda90
        } else if mda_pct >= MDA_80 {
            Tier::Mda80
        } else {
            Tier::MdaBelow80
        }
    }

    pub fn as_str(self) -> &'static str {
        match self {
            Tier::Initial => "initial period (40 CFR 75.31)",
            Tier::Mda95 => "availability at least 95.0 % (40 CFR 75.33)",
            Tier::Mda90 => "availability 90.0 % to below 95.0 % (40 CFR 75.33)",
            Tier::Mda80 => "availability 80.0 % to below 90.0 % (40 CFR 75.33)",
            Tier::MdaBelow80 => "availability below 80.0 % (40 CFR 75.33)",
        }
    }
}

/// The rule a substitute value came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Rule {
    /// Average of the operating hours before and after the gap.
    BeforeAfterAverage,
    /// No quality-assured value yet: the maximum potential value.
    NoHistoryMaximumPotential,
    /// Average of the prior quality-assured values at the hour's load range.
    LoadRangeAverage,
    /// Initial period, no value at the hour's range: average at the next higher range with data.
    HigherLoadRangeAverage,
    /// Greater of the lookback 90th percentile and the before/after average.
    Percentile90OrBeforeAfter,
    /// Greater of the lookback 95th percentile and the before/after average.
    Percentile95OrBeforeAfter,
    /// Maximum of the lookback.
    LookbackMaximum,
    /// Greater of the load-range 90th percentile and the before/after average.
    LoadRangePercentile90OrBeforeAfter,
    /// Greater of the load-range 95th percentile and the before/after average.
    LoadRangePercentile95OrBeforeAfter,
    /// Maximum at the hour's load range.
    LoadRangeMaximum,
    /// No value at the hour's range: maximum at the next higher range with data.
    HigherLoadRangeMaximum,
    /// The maximum potential value (concentration, flow or NOx rate).
    MaximumPotential,
    /// The hour's load is unknown, so its range cannot be found: maximum potential value.
    LoadUnknownMaximumPotential,
}

impl Rule {
    /// The provision the rule follows.
    pub fn citation(self) -> &'static str {
        match self {
            Rule::BeforeAfterAverage => "40 CFR 75.31(b) / 75.33(b) Table 1",
            Rule::NoHistoryMaximumPotential => "40 CFR 75.31(b)(2) / 75.31(c)(3)",
            Rule::LoadRangeAverage => "40 CFR 75.31(c) / 75.33(c) Table 2",
            Rule::HigherLoadRangeAverage => "40 CFR 75.31(c)",
            Rule::Percentile90OrBeforeAfter
            | Rule::Percentile95OrBeforeAfter
            | Rule::LookbackMaximum => "40 CFR 75.33(b) Table 1",
            Rule::LoadRangePercentile90OrBeforeAfter
            | Rule::LoadRangePercentile95OrBeforeAfter
            | Rule::LoadRangeMaximum => "40 CFR 75.33(c) Table 2",
            Rule::HigherLoadRangeMaximum => "40 CFR 75.33(c)(5)",
            Rule::MaximumPotential => "40 CFR 75.33(b)/(c) Tables 1 and 2, (c)(6)",
            Rule::LoadUnknownMaximumPotential => {
                "40 CFR 75.33(c) Table 2 (operational bin cannot be determined)"
            }
        }
    }

    pub fn as_str(self) -> &'static str {
        match self {
            Rule::BeforeAfterAverage => "average of the hours before and after the gap",
            Rule::NoHistoryMaximumPotential => {
                "no prior quality-assured data: maximum potential value"
            }
            Rule::LoadRangeAverage => "average at the load range",
            Rule::HigherLoadRangeAverage => "average at the next higher load range with data",
            Rule::Percentile90OrBeforeAfter => {
                "greater of the 90th percentile and the before/after average"
            }
            Rule::Percentile95OrBeforeAfter => {
                "greater of the 95th percentile and the before/after average"
            }
            Rule::LookbackMaximum => "maximum of the lookback",
            Rule::LoadRangePercentile90OrBeforeAfter => {
                "greater of the load-range 90th percentile and the before/after average"
            }
            Rule::LoadRangePercentile95OrBeforeAfter => {
                "greater of the load-range 95th percentile and the before/after average"
            }
            Rule::LoadRangeMaximum => "maximum at the load range",
            Rule::HigherLoadRangeMaximum => "maximum at the next higher load range with data",
            Rule::MaximumPotential => "maximum potential value",
            Rule::LoadUnknownMaximumPotential => "load unknown: maximum potential value",
        }
    }
}

/// Summary statistics of a set of quality-assured values.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Stats {
    pub count: u32,
    pub mean: Decimal,
    pub p90: Decimal,
    pub p95: Decimal,
    pub max: Decimal,
}

/// The nearest-rank percentile of sorted values: the ⌈p·n/100⌉-th smallest.
///
/// Satisfies the §72.2 definition (at least p % of values ≤ it, at least
/// 100 − p % ≥ it); REFERENCES.md C-14 picks 118 of 101..=120 for p = 90.
pub fn percentile_nearest_rank(sorted: &[Decimal], pct: usize) -> Decimal {
    assert!(
        !sorted.is_empty() && (1..=100).contains(&pct),
        "percentile of an empty set"
    );
    let rank = (pct * sorted.len()).div_ceil(100);
    sorted[rank - 1]
}

/// Statistics of values, sorting them in place; `None` if there are none.
pub fn stats_of(values: &mut [Decimal]) -> Option<Stats> {
    if values.is_empty() {
        return None;
    }
    values.sort_unstable();
    // The mean's sum is exact (src/exact_sum.rs): the order of equal values does not matter.
    let mut sum = crate::exact_sum::ExactSum::default();
    sum.extend(values.iter().copied());
    let count = u32::try_from(values.len()).expect("lookbacks hold at most 2,160 values");
    Some(Stats {
        count,
        mean: sum.value() / Decimal::from(count),
        p90: percentile_nearest_rank(values, 90),
        p95: percentile_nearest_rank(values, 95),
        max: *values.last().expect("not empty"),
    })
}

/// [`load_range`] in integers where that provably gives the same range,
/// else by [`load_range`] itself: once per operating hour, so it matters.
///
/// load·10/max = N/D with N = a·10^(sb+1), D = b·10^sa (a, b the mantissas,
/// sa, sb the scales). `Decimal` rounds the quotient q to 28 significant
/// digits and at most 28 decimals: an error below max(q·10⁻²⁷, 10⁻²⁸). A q
/// that is not an integer lies at least 1/D from every integer, and with N
/// and D below 10²⁶ the error is smaller than that, so the rounded quotient
/// has the same ceiling ⌈N/D⌉. Negative loads take the `Decimal` path.
pub fn load_range_fast(load_mw: Decimal, max_load_mw: Decimal) -> u8 {
    const LIMIT: i128 = POW10[26] as i128;
    let scaled = |m: i128, s: u32| {
        POW10
            .get(s as usize)
            .and_then(|&p| m.checked_mul(p as i128))
    };
    let n = scaled(load_mw.mantissa(), max_load_mw.scale() + 1);
    let d = scaled(max_load_mw.mantissa(), load_mw.scale());
    match (n, d) {
        (Some(n), Some(d)) if !load_mw.is_sign_negative() && n < LIMIT && d > 0 && d < LIMIT => {
            ((n + d - 1) / d).clamp(1, LOAD_RANGES as i128) as u8
        }
        _ => load_range(load_mw, max_load_mw),
    }
}

/// The load range (1 to 10) of a load, by the convention in the module doc.
pub fn load_range(load_mw: Decimal, max_load_mw: Decimal) -> u8 {
    assert!(
        max_load_mw > Decimal::ZERO,
        "max_load_mw checked positive at construction"
    );
    let tenths = (load_mw * Decimal::TEN / max_load_mw).ceil();
    tenths
        .to_u8()
        .unwrap_or(u8::MAX)
        .clamp(1, LOAD_RANGES as u8)
}

/// What a gap hour knows when its rule is applied.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct GapFacts {
    pub tier: Tier,
    /// Operating hours in the whole missing-data period.
    pub gap_op_hours: u32,
    /// The quality-assured value of the operating hour before the gap.
    pub before: Option<Decimal>,
    /// The quality-assured value of the operating hour after the gap; `None` if the data end first.
    pub after: Option<Decimal>,
}

impl GapFacts {
    /// Average of the hours before and after; the hour before alone if the gap is still open.
    pub fn before_after_average(&self) -> Option<Decimal> {
        match (self.before, self.after) {
            (Some(b), Some(a)) => Some((b + a) / Decimal::TWO),
            (Some(b), None) => Some(b),
            (None, Some(a)) => Some(a),
            (None, None) => None,
        }
    }
}

/// The value a rule chose and the statistic it came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Choice {
    pub value: Decimal,
    pub rule: Rule,
    /// The percentile, average or maximum used (or the maximum potential value).
    pub statistic: Option<Decimal>,
    /// How many quality-assured values the statistic came from.
    pub sample_count: u32,
    /// The load range whose values were used, where load ranges apply.
    pub range_used: Option<u8>,
}

fn choice(
    value: Decimal,
    rule: Rule,
    statistic: Option<Decimal>,
    stats: Option<&Stats>,
    range_used: Option<u8>,
) -> Choice {
    Choice {
        value,
        rule,
        statistic,
        sample_count: stats.map_or(0, |s| s.count),
        range_used,
    }
}

fn greater(a: Decimal, b: Option<Decimal>) -> Decimal {
    b.map_or(a, |b| a.max(b))
}

/// SO2 concentration substitute (40 CFR 75.31(b) and 75.33(b) Table 1).
///
/// `lookback` summarises the previous 720 quality-assured hours.
/// `None` means the rule needs the maximum potential concentration and
/// `mpc_ppm` is absent.
pub fn so2_choice(
    facts: &GapFacts,
    lookback: Option<&Stats>,
    mpc_ppm: Option<Decimal>,
) -> Option<Choice> {
    let avg = facts.before_after_average();
    let mpc = |rule| mpc_ppm.map(|m| choice(m, rule, Some(m), None, None));
    match facts.tier {
        Tier::Initial => match (facts.before, avg) {
            (Some(_), Some(a)) => Some(choice(a, Rule::BeforeAfterAverage, None, None, None)),
            _ => mpc(Rule::NoHistoryMaximumPotential),
        },
        Tier::MdaBelow80 => mpc(Rule::MaximumPotential),
        tier => {
            // The standard period starts after 720 quality-assured hours, so a
            // lookback and an hour before exist; without them, fall back to MPC.
            let (Some(s), Some(a)) = (lookback, avg) else {
                return mpc(Rule::NoHistoryMaximumPotential);
            };
            Some(match tier {
                Tier::Mda95 if facts.gap_op_hours <= GAP_SHORT_HOURS_MDA95 => {
                    choice(a, Rule::BeforeAfterAverage, None, None, None)
                }
                Tier::Mda95 => choice(
                    s.p90.max(a),
                    Rule::Percentile90OrBeforeAfter,
                    Some(s.p90),
                    Some(s),
                    None,
                ),
                Tier::Mda90 if facts.gap_op_hours <= GAP_SHORT_HOURS_MDA90 => {
                    choice(a, Rule::BeforeAfterAverage, None, None, None)
                }
                Tier::Mda90 => choice(
                    s.p95.max(a),
                    Rule::Percentile95OrBeforeAfter,
                    Some(s.p95),
                    Some(s),
                    None,
                ),
                _ => choice(s.max, Rule::LookbackMaximum, Some(s.max), Some(s), None),
            })
        }
    }
}

/// Flow or NOx-rate substitute at a load range (40 CFR 75.31(c) and 75.33(c) Table 2).
///
/// `ranges[k − 1]` summarises the lookback's values at range k; `range` is
/// the hour's range, `None` if its load is unknown. `None` is returned when
/// the rule needs the maximum potential value and `max_potential` is absent.
pub fn load_based_choice(
    facts: &GapFacts,
    range: Option<u8>,
    ranges: &[Option<Stats>; LOAD_RANGES],
    max_potential: Option<Decimal>,
) -> Option<Choice> {
    let mpv = |rule| max_potential.map(|m| choice(m, rule, Some(m), None, None));
    let Some(r) = range else {
        return mpv(Rule::LoadUnknownMaximumPotential);
    };
    let idx = usize::from(r) - 1;
    let higher = || (idx + 1..LOAD_RANGES).find_map(|i| ranges[i].as_ref().map(|s| (i, s)));
    if facts.tier == Tier::Initial {
        return match (&ranges[idx], higher()) {
            (Some(s), _) => Some(choice(
                s.mean,
                Rule::LoadRangeAverage,
                Some(s.mean),
                Some(s),
                Some(r),
            )),
            (None, Some((i, s))) => Some(choice(
                s.mean,
                Rule::HigherLoadRangeAverage,
                Some(s.mean),
                Some(s),
                Some(i as u8 + 1),
            )),
            (None, None) => mpv(Rule::NoHistoryMaximumPotential),
        };
    }
    if facts.tier == Tier::MdaBelow80 {
        return mpv(Rule::MaximumPotential);
    }
    let Some(s) = &ranges[idx] else {
        // §75.33(c)(5): the next higher range with data, its maximum; (c)(6): none, the maximum potential value.
        return match higher() {
            Some((i, s)) => Some(choice(
                s.max,
                Rule::HigherLoadRangeMaximum,
                Some(s.max),
                Some(s),
                Some(i as u8 + 1),
            )),
            None => mpv(Rule::MaximumPotential),
        };
    };
    let avg = facts.before_after_average();
    let n = facts.gap_op_hours;
    Some(match facts.tier {
        Tier::Mda95 if n <= GAP_SHORT_HOURS_MDA95 => choice(
            s.mean,
            Rule::LoadRangeAverage,
            Some(s.mean),
            Some(s),
            Some(r),
        ),
        Tier::Mda95 => choice(
            greater(s.p90, avg),
            Rule::LoadRangePercentile90OrBeforeAfter,
            Some(s.p90),
            Some(s),
            Some(r),
        ),
        Tier::Mda90 if n <= GAP_SHORT_HOURS_MDA90 => choice(
            s.mean,
            Rule::LoadRangeAverage,
            Some(s.mean),
            Some(s),
            Some(r),
        ),
        Tier::Mda90 => choice(
            greater(s.p95, avg),
            Rule::LoadRangePercentile95OrBeforeAfter,
            Some(s.p95),
            Some(s),
            Some(r),
        ),
        _ => choice(s.max, Rule::LoadRangeMaximum, Some(s.max), Some(s), Some(r)),
    })
}

/// One substituted hourly value with where it came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Substitution {
    pub parameter: Parameter,
    pub value: Decimal,
    pub rule: Rule,
    pub tier: Tier,
    /// Availability at this hour (standard period only).
    pub mda_pct: Option<Decimal>,
    pub gap_op_hours: u32,
    pub before: Option<Decimal>,
    pub after: Option<Decimal>,
    pub statistic: Option<Decimal>,
    pub sample_count: u32,
    /// The hour's load range (flow and NOx), `None` if unknown or not used.
    pub load_range: Option<u8>,
    pub range_used: Option<u8>,
}

/// How an hour's value of a parameter was obtained.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Fill {
    /// Not monitored on this unit, or the unit was not operating.
    #[default]
    NotUsed,
    /// A quality-assured reading.
    Measured,
    Substituted(Substitution),
}

/// The maximum potential values of a unit, from its site file.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct MaximumPotentials {
    /// Maximum potential SO2 concentration (App. A §2.1.1.1), ppm on the basis of the unit's SO2 column.
    pub so2_ppm: Option<Decimal>,
    /// Maximum potential flow (App. A §2.1.4.1), scfh wet.
    pub flow_scfh: Option<Decimal>,
    /// Maximum NOx emission rate (MER), lb/MMBtu.
    pub nox_lb_per_mmbtu: Option<Decimal>,
}

impl MaximumPotentials {
    fn get(&self, p: Parameter) -> Option<Decimal> {
        match p {
            Parameter::So2 => self.so2_ppm,
            Parameter::Flow => self.flow_scfh,
            Parameter::Nox => self.nox_lb_per_mmbtu,
        }
    }
}

/// What a unit's stream needs to know.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct StreamConfig {
    pub unit: CemsUnit,
    pub max_load_mw: Option<Decimal>,
    pub maximum_potentials: MaximumPotentials,
}

#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum SubstituteError {
    #[error("hour {clock_hour} does not come after hour {previous}: hours must be in time order")]
    OutOfOrder { clock_hour: i64, previous: i64 },
    #[error("max_load_mw must be positive, found {0}")]
    MaxLoad(Decimal),
    #[error(
        "{parameter} is missing at hour {clock_hour}: its load range needs the unit's max_load_mw"
    )]
    NeedsMaxLoad {
        parameter: Parameter,
        clock_hour: i64,
    },
    #[error("{parameter} is missing at hour {clock_hour}: the rule needs the unit's {what}")]
    NeedsMaximumPotential {
        parameter: Parameter,
        clock_hour: i64,
        what: &'static str,
    },
}

/// One hour out of the stream.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct HourOut {
    pub clock_hour: i64,
    pub input: HourInput,
    pub result: HourResult,
    /// SO2, flow and NOx rate, in the order of [`Parameter::ALL`].
    pub fills: [Fill; 3],
}

impl HourOut {
    pub fn fill(&self, p: Parameter) -> Fill {
        self.fills[p.index()]
    }
}

/// Per-parameter counts at the end of a stream.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ParameterSummary {
    pub parameter: Parameter,
    pub substituted_hours: u64,
    pub qa_hours: u64,
    /// Availability over the window at the last operating hour (§75.32 Eq. 8 or 9).
    pub mda_pct: Option<Decimal>,
}

/// Counts at the end of a stream.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct StreamSummary {
    pub operating_hours: u64,
    /// SO2, flow and NOx rate; `None` where not monitored.
    pub parameters: [Option<ParameterSummary>; 3],
    pub moisture_filled_hours: u64,
    pub diluent_filled_hours: u64,
}

#[derive(Clone, Copy, Debug)]
struct QaValue {
    clock_hour: i64,
    value: Decimal,
    /// Load range 1 to 10; 0 where the load was unknown (never used by a range).
    range: u8,
    /// The value's order key for the lookback statistics, found once.
    key: Option<i128>,
}

#[derive(Clone, Copy, Debug)]
struct Gap {
    first_clock_hour: i64,
    op_hours: u32,
    before: Option<Decimal>,
}

#[derive(Debug)]
struct ParamState {
    parameter: Parameter,
    enabled: bool,
    qa_hours: u64,
    lookback: VecDeque<QaValue>,
    last_qa: Option<Decimal>,
    gap: Option<Gap>,
    substituted_hours: u64,
}

impl ParamState {
    fn new(parameter: Parameter, enabled: bool) -> ParamState {
        ParamState {
            parameter,
            enabled,
            qa_hours: 0,
            lookback: VecDeque::with_capacity(if enabled {
                parameter.lookback_qa_hours()
            } else {
                0
            }),
            last_qa: None,
            gap: None,
            substituted_hours: 0,
        }
    }

    fn record(&mut self, v: QaValue) {
        if self.lookback.len() == self.parameter.lookback_qa_hours() {
            self.lookback.pop_front();
        }
        self.lookback.push_back(v);
        self.qa_hours += 1;
        self.last_qa = Some(v.value);
    }
}

/// The availability window: the last 8,760 operating hours within 26,280 clock hours.
#[derive(Debug)]
struct MdaWindow {
    hours: VecDeque<(i64, u8)>,
    qa: [u32; 3],
}

impl MdaWindow {
    fn push(&mut self, clock_hour: i64, qa_bits: u8) {
        while let Some(&(c, bits)) = self.hours.front() {
            if self.hours.len() < MDA_WINDOW_OP_HOURS && c > clock_hour - LOOKBACK_CLOCK_HOURS_MAX {
                break;
            }
            self.hours.pop_front();
            for (i, n) in self.qa.iter_mut().enumerate() {
                *n -= u32::from(bits >> i & 1);
            }
        }
        self.hours.push_back((clock_hour, qa_bits));
        for (i, n) in self.qa.iter_mut().enumerate() {
            *n += u32::from(qa_bits >> i & 1);
        }
    }

    /// %MDA = 100 × QA hours / operating hours of the window (§75.32 Eq. 8;
    /// Eq. 9 once the window holds 8,760 hours).
    fn pct(&self, p: Parameter) -> Option<Decimal> {
        if self.hours.is_empty() {
            return None;
        }
        Some(
            Decimal::ONE_HUNDRED * Decimal::from(self.qa[p.index()])
                / Decimal::from(self.hours.len() as u64),
        )
    }
}

#[derive(Clone, Copy, Debug)]
struct Waiting {
    tier: Tier,
    mda_pct: Option<Decimal>,
    load_range: Option<u8>,
}

#[derive(Clone, Copy, Debug)]
enum Slot {
    Ready(Fill),
    Waiting(Waiting),
}

#[derive(Debug)]
struct Pending {
    clock_hour: i64,
    input: HourInput,
    resolved: Resolved,
    slots: [Slot; 3],
}

/// A streaming pass over one unit's hours; see the module doc.
#[derive(Debug)]
pub struct UnitStream {
    config: StreamConfig,
    params: [ParamState; 3],
    window: MdaWindow,
    queue: VecDeque<Pending>,
    /// The hour [`next_ready`](UnitStream::next_ready) gave last, kept here
    /// so that it is not copied out.
    ready: HourOut,
    first_clock_hour: Option<i64>,
    last_clock_hour: Option<i64>,
    scratch: lookback::Scratch,
    operating_hours: u64,
    moisture_filled_hours: u64,
    diluent_filled_hours: u64,
}

impl UnitStream {
    pub fn new(config: StreamConfig) -> Result<UnitStream, SubstituteError> {
        if let Some(m) = config.max_load_mw {
            if m <= Decimal::ZERO {
                return Err(SubstituteError::MaxLoad(m));
            }
        }
        let c = config.unit.computes;
        // Flow enters every CEMS quantity: heat input, and through it NOx mass, SO2 and CO2 rates.
        let enabled = [c.so2, c.so2 || c.co2 || c.heat_input || c.nox, c.nox];
        Ok(UnitStream {
            config,
            params: Parameter::ALL.map(|p| ParamState::new(p, enabled[p.index()])),
            window: MdaWindow {
                hours: VecDeque::with_capacity(MDA_WINDOW_OP_HOURS),
                qa: [0; 3],
            },
            queue: VecDeque::new(),
            ready: HourOut::default(),
            first_clock_hour: None,
            last_clock_hour: None,
            scratch: lookback::Scratch::default(),
            operating_hours: 0,
            moisture_filled_hours: 0,
            diluent_filled_hours: 0,
        })
    }

    /// Take in the next hour. `clock_hour` counts hours from any fixed
    /// origin and must increase. Finished hours come out of [`next_ready`].
    /// After an error the stream must not be used further.
    ///
    /// [`next_ready`]: UnitStream::next_ready
    pub fn push(&mut self, clock_hour: i64, input: HourInput) -> Result<(), SubstituteError> {
        if let Some(previous) = self.last_clock_hour {
            if clock_hour <= previous {
                return Err(SubstituteError::OutOfOrder {
                    clock_hour,
                    previous,
                });
            }
        }
        self.last_clock_hour = Some(clock_hour);
        let first = *self.first_clock_hour.get_or_insert(clock_hour);
        let unit = self.config.unit;
        let not_used = [Slot::Ready(Fill::NotUsed); 3];
        if input.op_time_hr <= Decimal::ZERO {
            // Not an operating hour: nothing is missing (DESIGN.md), nothing counts.
            self.queue.push_back(Pending {
                clock_hour,
                input,
                resolved: Resolved::default(),
                slots: not_used,
            });
            return Ok(());
        }
        self.operating_hours += 1;
        let resolved = cems::resolve_readings(&input, &unit);
        let readings = [
            resolved.so2_ppm,
            resolved.flow_scfh_wet,
            resolved.nox_lb_per_mmbtu.map(|c| c.value),
        ];
        let range = match (self.config.max_load_mw, input.load_mw) {
            (Some(max), Some(load)) => Some(load_range_fast(load, max)),
            _ => None,
        };
        for p in [Parameter::Flow, Parameter::Nox] {
            if self.params[p.index()].enabled
                && readings[p.index()].is_none()
                && self.config.max_load_mw.is_none()
            {
                return Err(SubstituteError::NeedsMaxLoad {
                    parameter: p,
                    clock_hour,
                });
            }
        }
        let mut bits = 0u8;
        for p in Parameter::ALL {
            if self.params[p.index()].enabled && readings[p.index()].is_some() {
                bits |= 1 << p.index();
            }
        }
        self.window.push(clock_hour, bits);

        let mut slots = not_used;
        for p in Parameter::ALL {
            let i = p.index();
            if !self.params[i].enabled {
                continue;
            }
            match readings[i] {
                Some(value) => {
                    if self.params[i].gap.is_some() {
                        self.close_gap(p, Some(value), clock_hour)?;
                    }
                    self.params[i].record(QaValue {
                        clock_hour,
                        value,
                        range: range.unwrap_or(0),
                        key: lookback::order_key(value),
                    });
                    slots[i] = Slot::Ready(Fill::Measured);
                }
                None => {
                    let state = &mut self.params[i];
                    let gap = state.gap.get_or_insert(Gap {
                        first_clock_hour: clock_hour,
                        op_hours: 0,
                        before: state.last_qa,
                    });
                    gap.op_hours += 1;
                    let initial = state.qa_hours < p.initial_qa_hours()
                        && clock_hour - first < LOOKBACK_CLOCK_HOURS_MAX;
                    let mda_pct = if initial { None } else { self.window.pct(p) };
                    slots[i] = Slot::Waiting(Waiting {
                        tier: mda_pct.map_or(Tier::Initial, Tier::for_mda),
                        mda_pct,
                        load_range: if p == Parameter::So2 { None } else { range },
                    });
                }
            }
        }
        self.queue.push_back(Pending {
            clock_hour,
            input,
            resolved,
            slots,
        });
        Ok(())
    }

    /// Close every open gap at the end of the data (no hour after).
    pub fn finish(&mut self) -> Result<(), SubstituteError> {
        let at = self.last_clock_hour.unwrap_or(0);
        for p in Parameter::ALL {
            if self.params[p.index()].gap.is_some() {
                self.close_gap(p, None, at)?;
            }
        }
        Ok(())
    }

    /// The next hour whose values are all known, in time order.
    pub fn next_ready(&mut self) -> Option<&HourOut> {
        let front = self.queue.front()?;
        if front.slots.iter().any(|s| matches!(s, Slot::Waiting(_))) {
            return None;
        }
        let p = self.queue.pop_front().expect("front exists");
        let mut resolved = p.resolved;
        let mut fills = [Fill::NotUsed; 3];
        for (i, slot) in p.slots.iter().enumerate() {
            let Slot::Ready(fill) = *slot else {
                unreachable!("checked above")
            };
            fills[i] = fill;
            if let Fill::Substituted(s) = fill {
                match s.parameter {
                    Parameter::So2 => resolved.so2_ppm = Some(s.value),
                    Parameter::Flow => resolved.flow_scfh_wet = Some(s.value),
                    Parameter::Nox => {
                        resolved.nox_lb_per_mmbtu =
                            Some(cems::substituted_nox(s.value, self.config.unit.rounding))
                    }
                }
            }
        }
        let out = &mut self.ready;
        cems::compute_hour_into(&p.input, &resolved, &self.config.unit, &mut out.result);
        out.clock_hour = p.clock_hour;
        out.input = p.input;
        out.fills = fills;
        self.moisture_filled_hours += u64::from(out.result.moisture_filled);
        self.diluent_filled_hours += u64::from(out.result.diluent_filled);
        Some(&self.ready)
    }

    /// The first hour still waiting for a missing-data period to close, if any.
    pub fn first_waiting_hour(&self) -> Option<i64> {
        self.queue.front().map(|p| p.clock_hour)
    }

    /// Counts so far; complete after [`finish`](UnitStream::finish) and draining.
    pub fn summary(&self) -> StreamSummary {
        let parameters = Parameter::ALL.map(|p| {
            let s = &self.params[p.index()];
            s.enabled.then(|| ParameterSummary {
                parameter: p,
                substituted_hours: s.substituted_hours,
                qa_hours: s.qa_hours,
                mda_pct: self.window.pct(p),
            })
        });
        StreamSummary {
            operating_hours: self.operating_hours,
            parameters,
            moisture_filled_hours: self.moisture_filled_hours,
            diluent_filled_hours: self.diluent_filled_hours,
        }
    }

    /// Apply the rule to every waiting hour of a parameter's gap.
    fn close_gap(
        &mut self,
        p: Parameter,
        after: Option<Decimal>,
        clock_hour: i64,
    ) -> Result<(), SubstituteError> {
        let i = p.index();
        let gap = self.params[i].gap.take().expect("an open gap");
        let oldest = gap.first_clock_hour - LOOKBACK_CLOCK_HOURS_MAX;
        let lookback = &self.params[i].lookback;
        // Statistics of the lookback as at the gap's first hour, once per gap:
        // for flow and NOx, of the load ranges the gap's hours can use.
        let mut so2_stats = None;
        let mut ranges: [Option<Stats>; LOAD_RANGES] = [None; LOAD_RANGES];
        if p == Parameter::So2 {
            so2_stats = self.scratch.whole(lookback, oldest);
        } else {
            let hour_ranges = self.queue.iter().filter_map(|q| match q.slots[i] {
                Slot::Waiting(w) => w.load_range,
                Slot::Ready(_) => None,
            });
            ranges = self.scratch.by_range(lookback, oldest, hour_ranges);
        }
        let potential = self.config.maximum_potentials.get(p);
        let mut substituted = 0u64;
        for pending in self.queue.iter_mut() {
            let Slot::Waiting(w) = pending.slots[i] else {
                continue;
            };
            let facts = GapFacts {
                tier: w.tier,
                gap_op_hours: gap.op_hours,
                before: gap.before,
                after,
            };
            let chosen = match p {
                Parameter::So2 => so2_choice(&facts, so2_stats.as_ref(), potential),
                _ => load_based_choice(&facts, w.load_range, &ranges, potential),
            };
            let c = chosen.ok_or(SubstituteError::NeedsMaximumPotential {
                parameter: p,
                clock_hour,
                what: p.maximum_potential(),
            })?;
            pending.slots[i] = Slot::Ready(Fill::Substituted(Substitution {
                parameter: p,
                value: c.value,
                rule: c.rule,
                tier: w.tier,
                mda_pct: w.mda_pct,
                gap_op_hours: gap.op_hours,
                before: gap.before,
                after,
                statistic: c.statistic,
                sample_count: c.sample_count,
                load_range: w.load_range,
                range_used: c.range_used,
            }));
            substituted += 1;
        }
        debug_assert_eq!(substituted, u64::from(gap.op_hours));
        self.params[i].substituted_hours += substituted;
        Ok(())
    }
}
