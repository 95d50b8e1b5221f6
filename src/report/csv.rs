//! CSV for machines: one header, stable column names, one row per unit and
//! period, full precision, and text cells made safe for spreadsheets.

use super::model::{AnnualReport, AsOfView, Period};
use rust_decimal::Decimal;
use serde_json::Value;
use std::fmt::Write;

/// The columns of an allowance program's reconciliation, shared by the
/// annual CSV (after its emission columns) and the `allowances reconcile`
/// CSV. A `program` row fills the summary columns; a `program-vintage` row
/// fills `vintage`, `held` and `deduct`.
pub const PROGRAM_COLUMNS: &str =
    "program,account,true_up_date,vintage,held,deduct,emissions_tons,\
tons_to_cover,allowances_required,eligible_held,shortfall,penalty,offset_vintage,offset_next_year,\
carried_forward,settled";

/// Number of [`PROGRAM_COLUMNS`].
const PROGRAM_COLUMN_COUNT: usize = 16;

pub const ANNUAL_COLUMNS: &str = concat!(
    "scope,facility,year,unit,period,heat_input_mmbtu,so2_tons,nox_tons,co2_tons,nox_rate_lb_per_mmbtu,",
    "program,account,true_up_date,vintage,held,deduct,emissions_tons,",
    "tons_to_cover,allowances_required,eligible_held,shortfall,penalty,offset_vintage,offset_next_year,",
    "carried_forward,settled"
);

/// `allowances reconcile --format csv`: the summary row, one row per
/// vintage held, and the caution in `note`.
pub const RECONCILE_COLUMNS: &str = concat!(
    "scope,year,",
    "program,account,true_up_date,vintage,held,deduct,emissions_tons,",
    "tons_to_cover,allowances_required,eligible_held,shortfall,penalty,offset_vintage,offset_next_year,",
    "carried_forward,settled,note"
);

/// A text cell, quoted per RFC 4180 where needed, with a leading `'` on a
/// cell a spreadsheet would run as a formula (OWASP ASVS 1.2.10).
pub fn text_cell(s: &str) -> String {
    let guarded = if s.starts_with(['=', '+', '-', '@', '\t', '\r', '\0']) {
        format!("'{s}")
    } else {
        s.to_string()
    };
    if guarded.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", guarded.replace('"', "\"\""))
    } else {
        guarded
    }
}

fn num(v: Option<Decimal>) -> String {
    v.map(|d| d.normalize().to_string()).unwrap_or_default()
}

/// A scalar of a reconciliation object as a cell: numbers as they are,
/// text made spreadsheet-safe, absent as empty.
fn json_cell(v: &Value) -> String {
    match v {
        Value::Null => String::new(),
        Value::Bool(b) => b.to_string(),
        Value::Number(n) => n.to_string(),
        Value::String(s) => match Decimal::from_str_exact(s) {
            Ok(d) => d.normalize().to_string(),
            Err(_) => text_cell(s),
        },
        other => text_cell(&other.to_string()),
    }
}

/// The [`PROGRAM_COLUMNS`] cells of one reconciliation object (the
/// `allowances reconcile` JSON): its summary row, then a row per vintage.
fn program_rows(p: &Value) -> Vec<(&'static str, String)> {
    let mut rows = Vec::new();
    let c = |k: &str| json_cell(&p[k]);
    let head = [c("program"), c("account"), c("true_up_date")];
    let mut summary = head.to_vec();
    summary.extend([String::new(), String::new(), String::new()]);
    summary.extend(
        [
            "emissions_tons",
            "tons_to_cover",
            "allowances_required",
            "eligible_held",
            "shortfall",
            "penalty",
            "offset_vintage",
            "offset_next_year",
            "carried_forward",
            "settled",
        ]
        .map(c),
    );
    debug_assert_eq!(summary.len(), PROGRAM_COLUMN_COUNT);
    rows.push(("program", summary.join(",")));
    for v in p["by_vintage"].as_array().into_iter().flatten() {
        let mut row = head.to_vec();
        row.extend([
            json_cell(&v["vintage"]),
            json_cell(&v["held"]),
            json_cell(&v["deduct"]),
        ]);
        row.resize(PROGRAM_COLUMN_COUNT, String::new());
        rows.push(("program-vintage", row.join(",")));
    }
    rows
}

/// Empty program cells, after the emission columns of an annual row.
fn no_program() -> String {
    ",".repeat(PROGRAM_COLUMN_COUNT)
}

fn row(
    out: &mut String,
    scope: &str,
    r: &AnnualReport,
    unit: &str,
    period: &str,
    p: &Period,
    rate: Option<Decimal>,
) {
    let _ = writeln!(
        out,
        "{scope},{},{},{},{period},{},{},{},{},{}{}",
        text_cell(&r.facility),
        r.year,
        text_cell(unit),
        num(p.heat_input_mmbtu),
        num(p.so2_tons),
        num(p.nox_tons),
        num(p.co2_tons),
        num(rate),
        no_program()
    );
}

/// The as-of row: the entry the report stops at, in words, where the note
/// row carries the caution.
fn as_of_row(out: &mut String, a: &AsOfView, facility: &str, year: i32, tail: &str) {
    let _ = writeln!(
        out,
        "as-of,{},{year},{},,,,,{tail}",
        text_cell(facility),
        text_cell(&a.sentence())
    );
}

pub fn annual(r: &AnnualReport) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{ANNUAL_COLUMNS}");
    if let Some(a) = &r.as_of {
        as_of_row(
            &mut out,
            a,
            &r.facility,
            r.year,
            &format!(",{}", no_program()),
        );
    }
    for u in &r.units {
        let year = u.year_period();
        row(
            &mut out,
            "unit",
            r,
            &u.unit,
            "year",
            &year,
            u.nox_rate_lb_per_mmbtu,
        );
        for q in &u.quarters {
            row(
                &mut out,
                "unit",
                r,
                &u.unit,
                &format!("Q{}", q.quarter.unwrap_or_default()),
                q,
                None,
            );
        }
        row(&mut out, "unit", r, &u.unit, "ozone", &u.ozone_season, None);
        for m in &u.months {
            row(
                &mut out,
                "unit",
                r,
                &u.unit,
                &format!("M{:02}", m.month.unwrap_or_default()),
                m,
                None,
            );
        }
    }
    let t = &r.totals;
    let year = t.year_period();
    row(
        &mut out,
        "facility",
        r,
        "",
        "year",
        &year,
        t.nox_rate_lb_per_mmbtu,
    );
    for q in &t.quarters {
        row(
            &mut out,
            "facility",
            r,
            "",
            &format!("Q{}", q.quarter.unwrap_or_default()),
            q,
            None,
        );
    }
    row(&mut out, "facility", r, "", "ozone", &t.ozone_season, None);
    for p in &r.programs {
        for (scope, cells) in program_rows(p) {
            let _ = writeln!(
                out,
                "{scope},{},{},,,,,,,,{cells}",
                text_cell(&r.facility),
                r.year
            );
        }
    }
    // The caution travels with the data, in the same columns, as a note row.
    let _ = writeln!(
        out,
        "note,{},{},{},,,,,,{}",
        text_cell(&r.facility),
        r.year,
        text_cell(r.caution),
        no_program()
    );
    out
}

/// The fleet roll-up: every facility's rows under one header, then rows
/// of scope `fleet` summing every unit of every facility, then the caution.
pub fn fleet(r: &super::model::FleetReport) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{ANNUAL_COLUMNS}");
    if let Some(a) = &r.as_of {
        as_of_row(&mut out, a, "", r.year, &format!(",{}", no_program()));
    }
    for f in &r.facilities {
        let text = annual(f);
        for line in text
            .lines()
            .skip(1)
            .filter(|l| !l.starts_with("note,") && !l.starts_with("as-of,"))
        {
            out.push_str(line);
            out.push('\n');
        }
    }
    let t = &r.fleet;
    let mut fleet_row = |period: &str, p: &Period, rate: Option<Decimal>| {
        let _ = writeln!(
            out,
            "fleet,,{},,{period},{},{},{},{},{}{}",
            r.year,
            num(p.heat_input_mmbtu),
            num(p.so2_tons),
            num(p.nox_tons),
            num(p.co2_tons),
            num(rate),
            no_program()
        );
    };
    let year = t.year_period();
    fleet_row("year", &year, t.nox_rate_lb_per_mmbtu);
    for q in &t.quarters {
        fleet_row(&format!("Q{}", q.quarter.unwrap_or_default()), q, None);
    }
    fleet_row("ozone", &t.ozone_season, None);
    let _ = writeln!(
        out,
        "note,,{},{},,,,,,{}",
        r.year,
        text_cell(r.caution),
        no_program()
    );
    out
}

/// One program's reconciliation (the `allowances reconcile` JSON object)
/// as CSV under [`RECONCILE_COLUMNS`].
pub fn reconcile(p: &Value, caution: &str) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{RECONCILE_COLUMNS}");
    let year = json_cell(&p["year"]);
    for (scope, cells) in program_rows(p) {
        let _ = writeln!(out, "{scope},{year},{cells},");
    }
    let _ = writeln!(
        out,
        "note,{year},{}{}",
        ",".repeat(PROGRAM_COLUMN_COUNT),
        text_cell(caution)
    );
    out
}

/// The quarterly report as CSV: one row per unit and period (quarter, ytd).
pub fn quarter(r: &super::model::QuarterReport) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "scope,facility,year,unit,period,heat_input_mmbtu,so2_tons,nox_tons,co2_tons"
    );
    if let Some(a) = &r.as_of {
        as_of_row(&mut out, a, &r.facility, r.year, "");
    }
    for (scope, u) in r
        .units
        .iter()
        .map(|u| ("unit", u))
        .chain(std::iter::once(("facility", &r.totals)))
    {
        let unit = if scope == "facility" {
            ""
        } else {
            u.unit.as_str()
        };
        for (period, p) in [
            (format!("Q{}", r.quarter), &u.quarter),
            ("ytd".to_string(), &u.year_to_date),
        ] {
            let _ = writeln!(
                out,
                "{scope},{},{},{},{period},{},{},{},{}",
                text_cell(&r.facility),
                r.year,
                text_cell(unit),
                num(p.heat_input_mmbtu),
                num(p.so2_tons),
                num(p.nox_tons),
                num(p.co2_tons)
            );
        }
    }
    let _ = writeln!(
        out,
        "note,{},{},{},,,,,",
        text_cell(&r.facility),
        r.year,
        text_cell(r.caution)
    );
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn columns(line: &str) -> usize {
        // Test rows hold no quoted commas except where a test says so.
        line.split(',').count()
    }

    #[test]
    fn column_lists_agree() {
        assert_eq!(columns(PROGRAM_COLUMNS), PROGRAM_COLUMN_COUNT);
        assert!(ANNUAL_COLUMNS.ends_with(PROGRAM_COLUMNS));
        assert!(RECONCILE_COLUMNS.contains(PROGRAM_COLUMNS));
    }

    #[test]
    fn reconcile_rows_have_the_header_width_and_safe_text() {
        let p = serde_json::json!({
            "program": "=SO2", "year": 2025, "account": "A,1", "true_up_date": "2026-03-01",
            "emissions_tons": "12.50", "tons_to_cover": 13, "allowances_required": 13,
            "eligible_held": 10, "by_vintage": [{"vintage": 2024, "held": 10, "deduct": 10}],
            "shortfall": 3, "penalty": "12000.00", "offset_vintage": 2026,
            "offset_next_year": 3, "carried_forward": 0, "settled": false
        });
        let csv = reconcile(&p, "check, the permit");
        let lines: Vec<&str> = csv.lines().collect();
        assert_eq!(lines[0], RECONCILE_COLUMNS);
        assert_eq!(
            lines[1],
            "program,2025,'=SO2,\"A,1\",2026-03-01,,,,12.5,13,13,10,3,12000,2026,3,0,false,"
        );
        assert_eq!(
            lines[2],
            "program-vintage,2025,'=SO2,\"A,1\",2026-03-01,2024,10,10,,,,,,,,,,,"
        );
        assert_eq!(
            lines[3],
            format!("note,2025,{}\"check, the permit\"", ",".repeat(16))
        );
        // Each row has the header's width once the quoted comma is discounted.
        let width = columns(RECONCILE_COLUMNS);
        assert_eq!(columns(lines[1]) - 1, width);
        assert_eq!(columns(lines[2]) - 1, width);
        assert_eq!(columns(lines[3]) - 1, width);
    }

    #[test]
    fn formula_looking_cells_are_defused() {
        // OWASP ASVS 1.2.10: prefix cells starting with = + - @ TAB CR NUL.
        assert_eq!(text_cell("=1+1"), "'=1+1");
        assert_eq!(text_cell("@SUM(A1)"), "'@SUM(A1)");
        assert_eq!(text_cell("-x"), "'-x");
        assert_eq!(text_cell("K1"), "K1");
        assert_eq!(text_cell("a,\"b\""), "\"a,\"\"b\"\"\"");
    }
}
