//! Tables for people: tons to 1 decimal, heat input to whole MMBtu, NOx rate
//! to 0.001 lb/MMBtu. Rounding here is for reading only (common practice);
//! the JSON keeps full precision.

use super::model::{AnnualReport, Period};
use comfy_table::{presets::UTF8_FULL_CONDENSED, CellAlignment, Table};
use rust_decimal::{Decimal, RoundingStrategy};
use std::fmt::Write;

/// Shown where a unit does not track a quantity: absent, not zero.
const ABSENT: &str = "—";

fn fixed(value: Option<Decimal>, dp: u32) -> String {
    match value {
        // Round half away from zero, at the report boundary only.
        Some(v) => format!(
            "{:.*}",
            dp as usize,
            v.round_dp_with_strategy(dp, RoundingStrategy::MidpointAwayFromZero)
        ),
        None => ABSENT.to_string(),
    }
}

fn table(header: &[&str]) -> Table {
    let mut t = Table::new();
    t.load_preset(UTF8_FULL_CONDENSED);
    t.set_header(header.to_vec());
    t
}

fn right_align(t: &mut Table, from: usize) {
    let n = t.column_count();
    for i in from..n {
        if let Some(c) = t.column_mut(i) {
            c.set_cell_alignment(CellAlignment::Right);
        }
    }
}

fn period_cells(p: &Period) -> [String; 4] {
    [
        fixed(p.heat_input_mmbtu, 0),
        fixed(p.so2_tons, 1),
        fixed(p.nox_tons, 1),
        fixed(p.co2_tons, 1),
    ]
}

pub fn annual(r: &AnnualReport) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{} ({}): annual emissions {} (site file version {}, rounding {})\n",
        r.facility_name, r.facility, r.year, r.site_version, r.rounding
    );
    if let Some(a) = &r.as_of {
        let _ = writeln!(out, "{}\n", a.sentence());
    }
    if let Some(c) = &r.certification {
        let _ = writeln!(out, "{}\n", certification_line(c));
    }
    let mut units = table(&[
        "Unit",
        "Kind",
        "Fuel",
        "Records",
        "Heat input (MMBtu)",
        "SO2 (tons)",
        "NOx (tons)",
        "CO2 (tons)",
        "NOx (lb/MMBtu)",
    ]);
    for u in &r.units {
        let mut row = vec![
            u.unit.clone(),
            u.kind.to_string(),
            u.fuel.to_string(),
            u.fuel_records.to_string(),
        ];
        row.extend(period_cells(&u.year_period()));
        row.push(fixed(u.nox_rate_lb_per_mmbtu, 3));
        units.add_row(row);
    }
    let t = &r.totals;
    let mut total = vec![
        "Facility".to_string(),
        String::new(),
        String::new(),
        String::new(),
    ];
    total.extend([
        fixed(t.heat_input_mmbtu, 0),
        fixed(t.so2_tons, 1),
        fixed(t.nox_tons, 1),
        fixed(t.co2_tons, 1),
        fixed(t.nox_rate_lb_per_mmbtu, 3),
    ]);
    units.add_row(total);
    right_align(&mut units, 3);
    let _ = writeln!(out, "{units}\n");

    let monitored: Vec<_> = r
        .units
        .iter()
        .filter(|u| u.operating_hours.is_some())
        .collect();
    if !monitored.is_empty() {
        let mut cems = table(&[
            "Unit",
            "Operating hours",
            "Substituted SO2 h",
            "Substituted flow h",
            "Substituted NOx h",
            "Availability SO2 / flow / NOx (%)",
        ]);
        for u in monitored {
            let a = u.monitor_data_availability_pct.unwrap_or_default();
            cems.add_row(vec![
                u.unit.clone(),
                fixed(u.operating_hours, 2),
                u.substituted_hours.so2.to_string(),
                u.substituted_hours.flow.to_string(),
                u.substituted_hours.nox.to_string(),
                format!(
                    "{} / {} / {}",
                    fixed(a.so2, 1),
                    fixed(a.flow, 1),
                    fixed(a.nox, 1)
                ),
            ]);
        }
        right_align(&mut cems, 1);
        let _ = writeln!(
            out,
            "Monitor data (missing hours filled by 40 CFR 75.31 and 75.33)\n{cems}\n"
        );
    }

    let mut periods = table(&[
        "Unit",
        "Period",
        "Heat input (MMBtu)",
        "SO2 (tons)",
        "NOx (tons)",
        "CO2 (tons)",
    ]);
    let rows = r
        .units
        .iter()
        .map(|u| (u.unit.as_str(), &u.quarters, &u.ozone_season))
        .chain(std::iter::once(("Facility", &t.quarters, &t.ozone_season)));
    for (name, quarters, ozone) in rows {
        for q in quarters {
            let mut row = vec![
                name.to_string(),
                format!("Q{}", q.quarter.unwrap_or_default()),
            ];
            row.extend(period_cells(q));
            periods.add_row(row);
        }
        let mut row = vec![name.to_string(), "Ozone season (May–Sep)".to_string()];
        row.extend(period_cells(ozone));
        periods.add_row(row);
    }
    right_align(&mut periods, 2);
    let _ = writeln!(out, "Quarters and ozone season\n{periods}\n");
    if !r.programs.is_empty() {
        let _ = writeln!(out, "Allowance programs\n{}\n", programs(&r.programs));
    }
    let _ = writeln!(
        out,
        "{ABSENT} = quantity not tracked for the unit (no method in the site file)."
    );
    let _ = writeln!(out, "Caution: {}", r.caution);
    out
}

/// The reconciliation objects of `report annual` (DESIGN.md `allowances
/// reconcile` fields), one row per program.
fn programs(programs: &[serde_json::Value]) -> Table {
    let mut t = table(&[
        "Program",
        "Account",
        "Emissions (tons)",
        "Required",
        "Eligible held",
        "Shortfall",
        "Penalty",
        "Offset owed",
        "Carried forward",
        "Settled",
    ]);
    let text = |v: &serde_json::Value, k: &str| match &v[k] {
        serde_json::Value::String(s) => s.clone(),
        serde_json::Value::Null => ABSENT.to_string(),
        other => other.to_string(),
    };
    let decimal = |v: &serde_json::Value, k: &str, dp: u32| {
        let parsed = v[k].as_str().and_then(|s| Decimal::from_str_exact(s).ok());
        fixed(parsed, dp)
    };
    for p in programs {
        t.add_row(vec![
            text(p, "program"),
            text(p, "account"),
            decimal(p, "emissions_tons", 1),
            text(p, "allowances_required"),
            text(p, "eligible_held"),
            text(p, "shortfall"),
            decimal(p, "penalty", 2),
            text(p, "offset_next_year"),
            text(p, "carried_forward"),
            if p["settled"] == serde_json::Value::Bool(true) {
                "settled".to_string()
            } else {
                "not settled".to_string()
            },
        ]);
    }
    right_align(&mut t, 2);
    t
}

/// The quarterly report: each unit's quarter and year to date.
pub fn quarter(r: &super::model::QuarterReport) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{} ({}): quarter {} of {}, and the year to its end\n",
        r.facility_name, r.facility, r.quarter, r.year
    );
    if let Some(a) = &r.as_of {
        let _ = writeln!(out, "{}\n", a.sentence());
    }
    let mut t = table(&[
        "Unit",
        "Period",
        "Heat input (MMBtu)",
        "SO2 (tons)",
        "NOx (tons)",
        "CO2 (tons)",
    ]);
    for u in r.units.iter().chain(std::iter::once(&r.totals)) {
        let mut row = vec![u.unit.clone(), format!("Q{}", r.quarter)];
        row.extend(period_cells(&u.quarter));
        t.add_row(row);
        let mut row = vec![u.unit.clone(), format!("Jan 1 to end of Q{}", r.quarter)];
        row.extend(period_cells(&u.year_to_date));
        t.add_row(row);
    }
    right_align(&mut t, 2);
    let _ = writeln!(out, "{t}\n");
    let _ = writeln!(
        out,
        "{ABSENT} = quantity not tracked for the unit (no method in the site file)."
    );
    let _ = writeln!(out, "Caution: {}", r.caution);
    out
}

/// The fleet: each facility's report, then the fleet's totals.
pub fn fleet(r: &super::model::FleetReport) -> String {
    let mut out = String::new();
    for f in &r.facilities {
        out.push_str(&annual(f));
        out.push('\n');
    }
    let t = &r.fleet;
    let mut fleet = table(&[
        "Period",
        "Heat input (MMBtu)",
        "SO2 (tons)",
        "NOx (tons)",
        "CO2 (tons)",
    ]);
    let year = t.year_period();
    let mut row = vec![format!("{}", r.year)];
    row.extend(period_cells(&year));
    fleet.add_row(row);
    for q in &t.quarters {
        let mut row = vec![format!("Q{}", q.quarter.unwrap_or_default())];
        row.extend(period_cells(q));
        fleet.add_row(row);
    }
    let mut row = vec!["Ozone season (May–Sep)".to_string()];
    row.extend(period_cells(&t.ozone_season));
    fleet.add_row(row);
    right_align(&mut fleet, 1);
    let _ = writeln!(
        out,
        "Fleet: {} facilities, {}\n{fleet}\n",
        r.facilities.len(),
        r.year
    );
    let _ = writeln!(out, "Caution: {}", r.caution);
    out
}

/// "certified by NAME on DATE", and "amended" with each amendment.
pub fn certification_line(c: &crate::report::model::CertificationView) -> String {
    let mut line = format!("Certified by {} on {}", c.by, c.at);
    if c.amended {
        line.push_str("; amended");
        for a in &c.amendments {
            line.push_str(&format!(" on {} by {} ({})", a.at, a.by, a.reason));
        }
    }
    line
}
