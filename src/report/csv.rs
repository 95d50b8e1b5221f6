//! CSV for machines: one header, stable column names, one row per unit and
//! period, full precision, and text cells made safe for spreadsheets.

use super::model::{AnnualReport, Period};
use rust_decimal::Decimal;
use std::fmt::Write;

pub const ANNUAL_COLUMNS: &str =
    "scope,facility,year,unit,period,heat_input_mmbtu,so2_tons,nox_tons,co2_tons,nox_rate_lb_per_mmbtu";

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
        "{scope},{},{},{},{period},{},{},{},{},{}",
        text_cell(&r.facility),
        r.year,
        text_cell(unit),
        num(p.heat_input_mmbtu),
        num(p.so2_tons),
        num(p.nox_tons),
        num(p.co2_tons),
        num(rate)
    );
}

pub fn annual(r: &AnnualReport) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{ANNUAL_COLUMNS}");
    for u in &r.units {
        let year = Period {
            quarter: None,
            month: None,
            heat_input_mmbtu: u.heat_input_mmbtu,
            so2_tons: u.so2_tons,
            nox_tons: u.nox_tons,
            co2_tons: u.co2_tons,
        };
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
    let year = Period {
        quarter: None,
        month: None,
        heat_input_mmbtu: t.heat_input_mmbtu,
        so2_tons: t.so2_tons,
        nox_tons: t.nox_tons,
        co2_tons: t.co2_tons,
    };
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
    // The caution travels with the data, in the same columns, as a note row.
    let _ = writeln!(
        out,
        "note,{},{},{},,,,,,",
        text_cell(&r.facility),
        r.year,
        text_cell(r.caution)
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
    use super::text_cell;

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
