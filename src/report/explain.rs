//! Explanations: how one figure was computed, from which rows, constants
//! and equations. Built from the engine's own records of each calculation,
//! so an explanation cannot disagree with the report.

use super::model::CAUTION;
use crate::emissions::cems::Calc;
use crate::emissions::constants::FFactors;
use crate::emissions::method::Quantity;
use crate::emissions::substitute::{Fill, HourOut, Parameter};
use crate::ledger::HourSource;
use crate::records::{hour_label, HourRow, Reading};
use rust_decimal::Decimal;
use serde::Serialize;
use std::fmt::Write;

/// One step of a calculation: its result, equation and the numbers put in.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Step {
    pub name: &'static str,
    pub value: Decimal,
    pub uom: &'static str,
    pub equation: &'static str,
    pub formula: String,
}

fn step(name: &'static str, uom: &'static str, c: &Calc) -> Step {
    Step {
        name,
        value: c.value.normalize(),
        uom,
        equation: c.equation.citation(),
        formula: c.formula().to_string(),
    }
}

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct RowSource {
    pub file: String,
    pub line: usize,
    pub sha256: String,
    /// The journal entry that added the row (`null` where not looked up).
    pub journal_seq: Option<i64>,
}

impl RowSource {
    /// `file:line (sha256 abcdef012345, journal entry N)`, as text explanations print it.
    pub fn place(&self) -> String {
        format!(
            "{}:{} (sha256 {}{})",
            self.file,
            self.line,
            &self.sha256[..12.min(self.sha256.len())],
            self.journal_seq
                .map(|n| format!(", journal entry {n}"))
                .unwrap_or_default()
        )
    }
}

/// How a substituted value was chosen.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct SubstitutionNote {
    pub rule: &'static str,
    pub citation: &'static str,
    pub tier: &'static str,
    pub availability_pct: Option<Decimal>,
    pub gap_operating_hours: u32,
    pub hour_before: Option<Decimal>,
    pub hour_after: Option<Decimal>,
    /// The percentile, average, maximum or maximum potential value used.
    pub statistic: Option<Decimal>,
    pub from_values: u32,
    pub load_range: Option<u8>,
    pub load_range_used: Option<u8>,
}

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Input {
    pub name: String,
    pub value: Option<Decimal>,
    /// The stored row the reading came from (`null` for a value the rules supplied).
    pub source: Option<RowSource>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub substitution: Option<SubstitutionNote>,
}

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Constant {
    pub name: &'static str,
    pub value: Decimal,
    pub source: String,
}

/// `flue explain QUANTITY --unit U --hour TS`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct HourExplanation {
    pub format_version: u32,
    pub unit: String,
    pub hour: String,
    pub quantity: &'static str,
    /// The hour's amount: MMBtu of heat input, lb of SO2 or NOx, tons of CO2.
    pub value: Option<Decimal>,
    pub uom: &'static str,
    pub equation: String,
    pub formula: String,
    pub steps: Vec<Step>,
    pub inputs: Vec<Input>,
    pub constants: Vec<Constant>,
    pub substituted: bool,
    pub caution: &'static str,
}

/// What an hourly quantity depends on, in the order the steps are shown.
fn steps_for(q: Quantity, out: &HourOut, default_rate: Option<Decimal>) -> Vec<Step> {
    let r = &out.result;
    let mut steps = Vec::new();
    let mut push = |name, uom, c: &Option<Calc>| {
        if let Some(c) = c {
            steps.push(step(name, uom, c));
        }
    };
    match q {
        Quantity::HeatInput => {
            push(
                "heat_input_mmbtu_per_hr",
                "MMBtu/hr",
                &r.heat_input_mmbtu_per_hr,
            );
            push("heat_input_mmbtu", "MMBtu", &r.heat_input_mmbtu);
        }
        Quantity::So2 if default_rate.is_some() => {
            push(
                "heat_input_mmbtu_per_hr",
                "MMBtu/hr",
                &r.heat_input_mmbtu_per_hr,
            );
            push("heat_input_mmbtu", "MMBtu", &r.heat_input_mmbtu);
        }
        Quantity::So2 => {
            push("so2_lb_per_hr", "lb/hr", &r.so2_lb_per_hr);
            push("so2_lb", "lb", &r.so2_lb);
        }
        Quantity::Nox if default_rate.is_some() => {
            push(
                "heat_input_mmbtu_per_hr",
                "MMBtu/hr",
                &r.heat_input_mmbtu_per_hr,
            );
            push("heat_input_mmbtu", "MMBtu", &r.heat_input_mmbtu);
        }
        Quantity::Nox => {
            push("nox_lb_per_mmbtu", "lb/MMBtu", &r.nox_lb_per_mmbtu);
            push(
                "heat_input_mmbtu_per_hr",
                "MMBtu/hr",
                &r.heat_input_mmbtu_per_hr,
            );
            push("nox_lb", "lb", &r.nox_lb);
        }
        Quantity::Co2 => {
            push("co2_pct_derived", "%", &r.co2_pct_derived);
            push("co2_tons_per_hr", "tons/hr", &r.co2_tons_per_hr);
            push("co2_tons", "tons", &r.co2_tons);
        }
    }
    if let (Some(rate), Some(hi)) = (default_rate, r.heat_input_mmbtu) {
        let lb = rate * hi.value;
        steps.push(Step {
            name: if q == Quantity::So2 {
                "so2_lb"
            } else {
                "nox_lb"
            },
            value: lb.normalize(),
            uom: "lb",
            equation: "40 CFR 75 App. F Eq. F-23 (default rate × heat input)",
            formula: format!(
                "40 CFR 75 App. F Eq. F-23: E = ER · HI = {} × {} = {}",
                rate.normalize(),
                hi.value.normalize(),
                lb.normalize()
            ),
        });
    }
    steps
}

fn parameter_of(r: Reading) -> Option<Parameter> {
    match r {
        Reading::So2PpmWet | Reading::So2PpmDry => Some(Parameter::So2),
        Reading::FlowScfhWet => Some(Parameter::Flow),
        _ => None,
    }
}

fn note(fill: Fill) -> Option<SubstitutionNote> {
    let Fill::Substituted(s) = fill else {
        return None;
    };
    Some(SubstitutionNote {
        rule: s.rule.as_str(),
        citation: s.rule.citation(),
        tier: s.tier.as_str(),
        availability_pct: s.mda_pct.map(|d| d.round_dp(3).normalize()),
        gap_operating_hours: s.gap_op_hours,
        hour_before: s.before.map(|d| d.normalize()),
        hour_after: s.after.map(|d| d.normalize()),
        statistic: s.statistic.map(|d| d.normalize()),
        from_values: s.sample_count,
        load_range: s.load_range,
        load_range_used: s.range_used,
    })
}

/// Build the explanation of one unit-hour.
#[allow(clippy::too_many_arguments)]
pub fn hour(
    unit: &str,
    q: Quantity,
    out: &HourOut,
    row: &HourRow,
    source: &HourSource,
    f: FFactors,
    f_source: &str,
    default_rate: Option<Decimal>,
    present: &[bool; Reading::COUNT],
) -> HourExplanation {
    let steps = steps_for(q, out, default_rate);
    let src = RowSource {
        file: source.file.clone(),
        line: source.line,
        sha256: source.sha256.clone(),
        journal_seq: None,
    };
    let mut inputs = vec![Input {
        name: "op_time".into(),
        value: Some(row.op_time_hr().normalize()),
        source: Some(src.clone()),
        substitution: None,
    }];
    let mut substituted = false;
    for r in Reading::ALL {
        let value = row.reading(r);
        let fill = parameter_of(r)
            .map(|p| out.fill(p))
            .unwrap_or(Fill::NotUsed);
        let sub = note(fill);
        // A missing reading is shown on the basis the unit's data uses.
        if value.is_none() && (sub.is_none() || !present[r.index()]) {
            continue;
        }
        let sub_value = match fill {
            Fill::Substituted(s) => Some(s.value.normalize()),
            _ => None,
        };
        substituted |= sub.is_some();
        inputs.push(Input {
            name: r.column().to_string(),
            value: value.map(|d| d.normalize()).or(sub_value),
            source: value.map(|_| src.clone()),
            substitution: sub,
        });
    }
    if let Some(s) = note(out.fill(Parameter::Nox)) {
        if matches!(q, Quantity::Nox) && default_rate.is_none() {
            substituted = true;
            inputs.push(Input {
                name: "nox_lb_per_mmbtu".into(),
                value: out.result.nox_lb_per_mmbtu.map(|c| c.value.normalize()),
                source: None,
                substitution: Some(s),
            });
        }
    }
    let (value, uom) = match steps.last() {
        Some(s) => (Some(s.value), s.uom),
        None => (None, ""),
    };
    let main = steps
        .iter()
        .find(|s| s.uom.contains('/'))
        .or(steps.last())
        .cloned();
    HourExplanation {
        format_version: super::FORMAT_VERSION,
        unit: unit.to_string(),
        hour: hour_label(row.hour),
        quantity: q.as_str(),
        value,
        uom,
        equation: main
            .as_ref()
            .map(|s| s.equation.to_string())
            .unwrap_or_default(),
        formula: steps
            .iter()
            .map(|s| s.formula.clone())
            .collect::<Vec<_>>()
            .join("; then "),
        steps,
        inputs,
        constants: vec![
            Constant {
                name: "F (dscf/MMBtu)",
                value: f.f_dscf_per_mmbtu,
                source: f_source.to_string(),
            },
            Constant {
                name: "Fc (scf CO2/MMBtu)",
                value: f.fc_scf_per_mmbtu,
                source: f_source.to_string(),
            },
        ],
        substituted,
        caution: CAUTION,
    }
}

/// The explanation as text for people: a short tree.
pub fn hour_text(e: &HourExplanation) -> String {
    let mut out = String::new();
    let shown = |v: Option<Decimal>| v.map(|d| d.to_string()).unwrap_or_else(|| "none".into());
    let _ = writeln!(
        out,
        "{} of unit {} at {}: {} {}",
        e.quantity,
        e.unit,
        e.hour,
        shown(e.value),
        e.uom
    );
    for s in &e.steps {
        let _ = writeln!(out, "├─ {} = {} {}", s.name, s.value, s.uom);
        let _ = writeln!(out, "│    {}", s.formula);
    }
    let _ = writeln!(out, "├─ inputs");
    for i in &e.inputs {
        let from = match &i.source {
            Some(s) => s.place(),
            None => "supplied by the missing-data rules".into(),
        };
        let _ = writeln!(out, "│    {} = {}  from {}", i.name, shown(i.value), from);
        if let Some(n) = &i.substitution {
            let _ = writeln!(
                out,
                "│      substituted: {} ({}), tier {}, availability {} %, gap {} operating hours, before {}, after {}, statistic {} from {} values, load range {} (used {})",
                n.rule,
                n.citation,
                n.tier,
                shown(n.availability_pct),
                n.gap_operating_hours,
                shown(n.hour_before),
                shown(n.hour_after),
                shown(n.statistic),
                n.from_values,
                n.load_range.map(|r| r.to_string()).unwrap_or_else(|| "none".into()),
                n.load_range_used.map(|r| r.to_string()).unwrap_or_else(|| "none".into()),
            );
        }
    }
    let _ = writeln!(out, "└─ constants");
    for c in &e.constants {
        let _ = writeln!(out, "     {} = {}  ({})", c.name, c.value, c.source);
    }
    let _ = writeln!(out, "Caution: {}", e.caution);
    out
}

/// The constants a fuel record's calculation uses, each with its source
/// (the same constants src/emissions/fuel_based.rs cites), and the site
/// file's own factor or rate where the method takes one.
pub fn record_constants(
    method: &crate::emissions::method::Method,
    fuel: crate::emissions::fuel::Fuel,
    gas_volume: bool,
) -> Vec<Constant> {
    use crate::emissions::constants as c;
    use crate::emissions::method::Method;
    let constant = |name, value, source: &str| Constant {
        name,
        value,
        source: source.to_string(),
    };
    match method {
        Method::Fuel => vec![constant(
            "Btu per MMBtu",
            crate::units::BTU_PER_MMBTU,
            "40 CFR 75 App. D Eq. D-6 / D-8 (÷ 10^6)",
        )],
        Method::FuelSulfur if gas_volume => vec![
            constant(
                "grains per lb",
                c::GRAINS_PER_LB,
                "40 CFR 75 App. D Eq. D-4",
            ),
            constant(
                "lb SO2 per lb S",
                c::SO2_PER_S,
                "40 CFR 75 App. D Eq. D-4 (64/32)",
            ),
        ],
        Method::FuelSulfur => vec![constant(
            "lb SO2 per lb S",
            c::SO2_PER_S,
            "40 CFR 75 App. D Eq. D-2 (64/32)",
        )],
        Method::EmissionFactor { factor_lb, .. } => vec![constant(
            "emission factor (lb per unit of fuel)",
            *factor_lb,
            "site file method (AP-42 Ch. 1 convention)",
        )],
        Method::DefaultRate { rate_lb_per_mmbtu } => vec![constant(
            "default rate (lb/MMBtu)",
            *rate_lb_per_mmbtu,
            "site file method (40 CFR 75 App. D Eq. D-5)",
        )],
        Method::FuelCarbon => vec![
            constant("MW CO2", c::MW_CO2, "40 CFR 75 App. G Eq. G-1"),
            constant("MW C", c::MW_C, "40 CFR 75 App. G Eq. G-1"),
        ],
        Method::FcFactor => vec![
            constant(
                "Fc (scf CO2/MMBtu)",
                c::f_factors(fuel).fc_scf_per_mmbtu,
                &format!("40 CFR 75 App. F Table 1, {fuel}"),
            ),
            constant(
                "scf CO2 per lb-mole",
                c::SCF_PER_LB_MOLE,
                "40 CFR 75 App. G Eq. G-4",
            ),
            constant("MW CO2", c::MW_CO2, "40 CFR 75 App. G Eq. G-4"),
        ],
        Method::Cems { .. } => Vec::new(),
    }
}
