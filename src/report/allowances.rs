//! Allowance outputs: reconciliation, position, balances and serial blocks,
//! as JSON models and comfy-table tables. Renderers format; none computes.
//! Tables round for reading (tons to 0.1, money to 0.01, half away from
//! zero); the JSON keeps full precision.

use super::CAUTION;
use crate::allowances::{
    Balance, CostSummary, HeldBlock, Holder, Position, ProjectionMethod, Reconciliation,
};
use chrono::NaiveDate;
use comfy_table::{presets::UTF8_FULL_CONDENSED, CellAlignment, Table};
use rust_decimal::{Decimal, RoundingStrategy};
use serde::{Serialize, Serializer};
use std::fmt::Write;

fn date_text<S: Serializer>(date: &NaiveDate, s: S) -> Result<S::Ok, S::Error> {
    s.collect_str(date)
}

fn holder_text<S: Serializer>(holder: &Holder, s: S) -> Result<S::Ok, S::Error> {
    s.collect_str(holder)
}

/// A settlement as outputs show it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct SettlementView {
    #[serde(serialize_with = "date_text")]
    pub date: NaiveDate,
    pub deducted: u64,
    pub offset_owed: u64,
    pub offset_deducted: u64,
    pub offset_outstanding: u64,
    pub settled_at: String,
    pub settled_by: String,
}

/// The `allowances reconcile` object of DESIGN.md, plus whether the year is
/// settled and the cost of its allowances.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct ReconcileReport {
    #[serde(flatten)]
    pub reconciliation: Reconciliation,
    pub settled: bool,
    pub settlement: Option<SettlementView>,
    pub cost: CostSummary,
}

/// A program's position, the method of its projection in words, and cost.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct PositionReport {
    #[serde(flatten)]
    pub position: Position,
    pub projection: &'static str,
    pub emissions_to_date_basis: &'static str,
    pub cost: CostSummary,
}

/// What each projection method does, as outputs state it.
pub fn projection_text(method: ProjectionMethod) -> &'static str {
    match method {
        ProjectionMethod::PreviousYearScaled => {
            "previous-year-scaled: the previous year's whole period, scaled by this year's emissions to date over the previous year's emissions over the same days"
        }
        ProjectionMethod::RunRate => {
            "run-rate: this year's emissions to date over the days elapsed, times the days of the period (no previous-year history to scale)"
        }
        ProjectionMethod::PreviousYear => {
            "previous-year: the previous year's whole period, since this year's period has not begun"
        }
        ProjectionMethod::PeriodComplete => {
            "period-complete: the period has ended, so the emissions to date are the period's"
        }
        ProjectionMethod::None => {
            "none: no emissions to date and no previous-year history, so nothing is projected"
        }
    }
}

/// How emissions to date are counted.
pub const EMISSIONS_TO_DATE_BASIS: &str =
    "fuel records ending on or before the as-of date; a record still open on that date is not counted";

/// One balance row as outputs show it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct BalanceRow {
    #[serde(serialize_with = "holder_text")]
    pub account: Holder,
    pub program: String,
    pub vintage: i32,
    pub held: i64,
}

#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct BalanceReport {
    pub facility: String,
    /// `None`: after every transaction recorded.
    pub as_of: Option<String>,
    pub balances: Vec<BalanceRow>,
}

impl BalanceReport {
    pub fn new(facility: &str, as_of: Option<NaiveDate>, balances: Vec<Balance>) -> BalanceReport {
        BalanceReport {
            facility: facility.to_string(),
            as_of: as_of.map(|d| d.to_string()),
            balances: balances
                .into_iter()
                .map(|b| BalanceRow {
                    account: b.account,
                    program: b.program,
                    vintage: b.vintage,
                    held: b.count,
                })
                .collect(),
        }
    }
}

#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct SerialsReport {
    pub account: String,
    pub blocks: Vec<HeldBlock>,
}

/// A JSON output with the caution as its last field.
#[derive(Serialize)]
pub struct WithCaution<'a, T: Serialize> {
    #[serde(flatten)]
    pub body: &'a T,
    pub caution: &'static str,
}

pub fn json<T: Serialize>(body: &T, out: &mut dyn std::io::Write) -> std::io::Result<()> {
    serde_json::to_writer_pretty(
        &mut *out,
        &WithCaution {
            body,
            caution: CAUTION,
        },
    )?;
    out.write_all(b"\n")
}

fn fixed(v: Decimal, dp: u32) -> String {
    // Round half away from zero, for reading only.
    format!(
        "{:.*}",
        dp as usize,
        v.round_dp_with_strategy(dp, RoundingStrategy::MidpointAwayFromZero)
    )
}

fn money(v: Option<Decimal>) -> String {
    v.map(|v| fixed(v, 2)).unwrap_or_else(|| "—".to_string())
}

fn table(header: &[&str]) -> Table {
    let mut t = Table::new();
    t.load_preset(UTF8_FULL_CONDENSED);
    t.set_header(header.to_vec());
    t
}

fn right_align(t: &mut Table, from: usize) {
    for i in from..t.column_count() {
        if let Some(c) = t.column_mut(i) {
            c.set_cell_alignment(CellAlignment::Right);
        }
    }
}

fn pairs(rows: &[(&str, String)]) -> Table {
    let mut t = table(&["", ""]);
    for (k, v) in rows {
        t.add_row(vec![k.to_string(), v.clone()]);
    }
    right_align(&mut t, 1);
    t
}

fn cost_rows(c: &CostSummary) -> Vec<(&'static str, String)> {
    vec![
        (
            "Bought (with a price)",
            format!(
                "{} for {} (average {})",
                c.acquired_priced_count,
                fixed(c.acquired_cost_usd, 2),
                money(c.acquired_average_usd_per_allowance)
            ),
        ),
        ("Average cost held", money(c.held_average_usd_per_allowance)),
        (
            "Cost of allowances deducted",
            format!(
                "{} × average = {}",
                c.deducted_count,
                fixed(c.deducted_cost_usd, 2)
            ),
        ),
        (
            "Book value of the bank",
            format!(
                "{} × average = {}",
                c.bank_count,
                fixed(c.bank_book_value_usd, 2)
            ),
        ),
    ]
}

/// The reconciliation figures, as `reconcile` and `report annual` print them.
pub fn reconcile_table(r: &ReconcileReport) -> String {
    let rec = &r.reconciliation;
    let mut out = String::new();
    let status = match &r.settlement {
        Some(s) => format!(
            "settled on {} by {}: {} deducted, offset {} of {} owed ({} outstanding)",
            s.settled_at,
            s.settled_by,
            s.deducted,
            s.offset_deducted,
            s.offset_owed,
            s.offset_outstanding
        ),
        None => "not settled".to_string(),
    };
    let _ = writeln!(
        out,
        "Program {} {}: account {}, holdings at the end of {} ({status})",
        rec.program, rec.year, rec.account, rec.true_up_date
    );
    let mut summary = pairs(&[
        ("Emissions (tons)", fixed(rec.emissions_tons.0, 1)),
        ("Tons to cover", rec.tons_to_cover.to_string()),
        ("Allowances required", rec.allowances_required.to_string()),
        ("Eligible held", rec.eligible_held.to_string()),
        ("Shortfall", rec.shortfall.to_string()),
        ("Penalty", fixed(rec.penalty_usd, 2)),
        (
            "Offset owed",
            format!("{} of vintage {}", rec.offset_next_year, rec.offset_vintage),
        ),
        ("Carried forward", rec.carried_forward.to_string()),
    ]);
    summary.set_header(vec!["Reconciliation", ""]);
    let _ = writeln!(out, "{summary}");
    let mut vintages = table(&["Vintage", "Held", "Deduct"]);
    for v in &rec.by_vintage {
        vintages.add_row(vec![
            v.vintage.to_string(),
            v.held.to_string(),
            v.deduct.to_string(),
        ]);
    }
    right_align(&mut vintages, 0);
    let _ = writeln!(out, "{vintages}");
    let mut cost = pairs(&cost_rows(&r.cost));
    cost.set_header(vec!["Cost (weighted average)", ""]);
    let _ = writeln!(out, "{cost}");
    out
}

pub fn reconcile(r: &ReconcileReport) -> String {
    let mut out = reconcile_table(r);
    let _ = writeln!(out, "Caution: {CAUTION}");
    out
}

pub fn position(p: &PositionReport) -> String {
    let pos = &p.position;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "Program {} position as of {} (period {} to {}, day {} of {})",
        pos.program,
        pos.as_of,
        pos.period_start,
        pos.period_end,
        pos.days_elapsed,
        pos.days_in_period
    );
    let mut t = pairs(&[
        (
            "Emissions to date (tons)",
            fixed(pos.emissions_to_date_tons.0, 1),
        ),
        (
            "Projected period (tons)",
            fixed(pos.projected_period_tons.0, 1),
        ),
        ("Allowances required", pos.allowances_required.to_string()),
        ("Eligible held", pos.eligible_held.to_string()),
        ("Expected surplus", pos.expected_surplus.to_string()),
        ("Expected shortfall", pos.expected_shortfall.to_string()),
        ("To buy", pos.to_buy.to_string()),
    ]);
    t.set_header(vec!["Position", ""]);
    let _ = writeln!(out, "{t}");
    let _ = writeln!(out, "Projection: {}", p.projection);
    let _ = writeln!(out, "Emissions to date: {}", p.emissions_to_date_basis);
    let mut cost = pairs(&cost_rows(&p.cost));
    cost.set_header(vec!["Cost (weighted average)", ""]);
    let _ = writeln!(out, "{cost}");
    let _ = writeln!(out, "Caution: {CAUTION}");
    out
}

pub fn balances(b: &BalanceReport) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "Allowance holdings of {}, {}",
        b.facility,
        match &b.as_of {
            Some(d) => format!("at the end of {d}"),
            None => "after every transaction".to_string(),
        }
    );
    let mut t = table(&["Account", "Program", "Vintage", "Held"]);
    for r in &b.balances {
        t.add_row(vec![
            r.account.to_string(),
            r.program.clone(),
            r.vintage.to_string(),
            r.held.to_string(),
        ]);
    }
    right_align(&mut t, 2);
    let _ = writeln!(out, "{t}");
    let _ = writeln!(
        out,
        "(issuer) is where allocations come from and (retirement) where settlements send deductions; both stand outside the plant."
    );
    let _ = writeln!(out, "Caution: {CAUTION}");
    out
}

pub fn serials(s: &SerialsReport) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "Serial blocks held by {}", s.account);
    let mut t = table(&["Program", "Vintage", "From", "To", "Count"]);
    for b in &s.blocks {
        t.add_row(vec![
            b.program.clone(),
            b.vintage.to_string(),
            b.block.serial_from.to_string(),
            b.block.serial_to.to_string(),
            b.block
                .serial_count()
                .map(|n| n.to_string())
                .unwrap_or_default(),
        ]);
    }
    right_align(&mut t, 1);
    let _ = writeln!(out, "{t}");
    let _ = writeln!(out, "Caution: {CAUTION}");
    out
}
