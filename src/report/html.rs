//! The annual report as one self-contained HTML document, for the
//! compliance manager who signs it and the auditor who checks it.
//!
//! Invariants: the file loads nothing from anywhere (inline CSS and SVG, no
//! scripts, no fonts, no images; a Content-Security-Policy of
//! `default-src 'none'` says so to the browser); every text that comes from
//! a site file or an input file is escaped; every figure is the model's,
//! rounded for reading as the tables round it (tons 0.1, heat input 1 MMBtu,
//! rates 0.001 lb/MMBtu, half away from zero) and carried unrounded in
//! `data-value` beside a `data-figure` key that names its place in the JSON
//! report (`units.K1.Q2.so2_tons`, `totals.nox_tons`,
//! `programs.SO2-ANNUAL.shortfall`). This module formats; it computes no
//! figure.

use super::model::{AnnualReport, AsOfView, Period, QuarterReport, UnitReport};
use super::svg::{self, esc, grouped, Bar, Series, Vintage};
use chrono::{Datelike, NaiveDate};
use rust_decimal::Decimal;
use serde_json::Value;
use std::fmt::Write;

/// Unit colours of the charts, in site-file order; chosen to stay apart in
/// print and for the common colour-vision deficiencies.
const PALETTE: &[&str] = &[
    "#1f4e6b", "#c0792b", "#4f8a5b", "#8a4f7d", "#5c6fa8", "#9a5b3c", "#3f8f8f", "#7a7a2e",
];

/// Shown where a unit does not track a quantity: absent, not zero.
const ABSENT: &str = "—";

const MONTHS: [&str; 12] = [
    "Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec",
];

const STYLE: &str = r#"
:root { --ink:#1d2530; --muted:#5b6573; --rule:#c9ced6; --band:#f3f1ec; --accent:#1f4e6b; --warn:#a33b2b; }
* { box-sizing: border-box; }
html { background:#e9e7e2; }
body { margin:0; color:var(--ink); font:10.5pt/1.45 "Helvetica Neue", Helvetica, Arial, "Liberation Sans", "DejaVu Sans", sans-serif; }
.sheet { max-width:190mm; margin:12px auto; background:#fff; padding:14mm 14mm 12mm; box-shadow:0 1px 4px rgba(0,0,0,.18); }
h1, h2, h3 { font-family: Georgia, "Times New Roman", "Liberation Serif", "DejaVu Serif", serif; font-weight:normal; margin:0; }
header.title { border-bottom:3px double var(--ink); padding-bottom:8px; margin-bottom:10px; display:flex; justify-content:space-between; align-items:flex-end; gap:12px; }
header.title .kicker { text-transform:uppercase; letter-spacing:.14em; font-size:8.5pt; color:var(--muted); }
header.title h1 { font-size:21pt; line-height:1.15; }
header.title .year { font-family: Georgia, "Liberation Serif", serif; font-size:26pt; color:var(--accent); }
dl.meta { display:grid; grid-template-columns:repeat(3, 1fr); gap:4px 18px; margin:8px 0 6px; font-size:9pt; }
dl.meta div { border-top:1px solid var(--rule); padding-top:3px; }
dl.meta dt { color:var(--muted); font-size:7.5pt; text-transform:uppercase; letter-spacing:.08em; }
dl.meta dd { margin:0; }
.status { margin:8px 0 0; padding:5px 9px; font-size:9pt; border-left:4px solid var(--muted); background:var(--band); }
.status.journal { border-left-color:var(--rule); color:var(--muted); margin-top:4px; }
.status.certified { border-left-color:#2f6b45; background:#eef5ef; }
.status.amended { border-left-color:#b7791f; background:#fbf3e4; }
.status.asof { border-left-color:#7a3e9d; background:#f4eef8; }
code.hash { font-size:7.5pt; word-break:break-all; }
section { margin-top:16px; }
section > h2 { font-size:13pt; border-bottom:1px solid var(--ink); padding-bottom:2px; margin-bottom:6px; }
section > h2 .no { color:var(--accent); margin-right:.35em; }
h3 { font-size:11pt; margin:10px 0 4px; }
p.note { font-size:8.5pt; color:var(--muted); margin:4px 0; }
.totals { display:grid; grid-template-columns:repeat(5, 1fr); gap:8px; margin:6px 0; }
.totals div { background:var(--band); padding:6px 8px; border-top:2px solid var(--accent); }
.totals .label { display:block; font-size:7.5pt; text-transform:uppercase; letter-spacing:.08em; color:var(--muted); }
.totals .value { display:block; font-size:13pt; font-variant-numeric:tabular-nums; }
.totals .uom { font-size:8pt; color:var(--muted); }
table { border-collapse:collapse; width:100%; font-size:8.5pt; font-variant-numeric:tabular-nums; }
th, td { padding:3px 5px; border-bottom:1px solid var(--rule); vertical-align:top; text-align:left; }
thead th { border-bottom:1.5px solid var(--ink); font-weight:600; font-size:7.8pt; color:#333; vertical-align:bottom; }
td.num, th.num { text-align:right; white-space:nowrap; }
tr.total td { border-top:1.5px solid var(--ink); font-weight:600; background:var(--band); }
tbody.block th.block { background:var(--band); font-weight:600; text-align:left; border-bottom:1px solid var(--ink); }
.small { font-size:7.5pt; color:var(--muted); }
table.units tbody.unit tr:first-child td { border-bottom:none; }
table.units tr.methods td { font-size:7.5pt; color:#333; padding-top:0; }
table.units tbody.unit { break-inside:avoid; page-break-inside:avoid; }
.unit-id { font-weight:600; }
figure { margin:8px 0 12px; }
figcaption { font-size:8.5pt; color:var(--muted); margin-top:2px; }
svg.chart { width:100%; height:auto; display:block; }
svg .grid { stroke:#e1e4e8; stroke-width:1; }
svg .axis { stroke:#39424e; stroke-width:1; }
svg .tick, svg .legend, svg .row-label { fill:#39424e; }
svg .axis-title { fill:var(--muted); }
svg .in-bar { fill:#fff; font-weight:600; }
svg .sub-day { fill:#f3d3cb; }
svg .sub-bar { fill:#a33b2b; }
.program { border:1px solid var(--rule); padding:6px 10px 8px; margin:10px 0; }
.program h3 { margin-top:2px; }
.badge { display:inline-block; font-size:8pt; padding:1px 7px; border-radius:2px; margin-left:6px; vertical-align:2px; font-family: "Helvetica Neue", Arial, sans-serif; }
.badge.ok { background:#dfeee2; color:#24573a; }
.badge.short { background:#f6dcd6; color:var(--warn); }
.badge.open { background:#e7e9ee; color:#39424e; }
.cols { display:grid; grid-template-columns:1.2fr 1fr; gap:14px; align-items:start; }
table.kv td:first-child { color:#333; }
td.warn { color:var(--warn); font-weight:600; }
.caution { border:1.5px solid var(--ink); padding:8px 12px; background:#fbfaf7; font-size:9.5pt; }
.caution strong { text-transform:uppercase; letter-spacing:.1em; font-size:8pt; display:block; margin-bottom:2px; }
.signoff { display:grid; grid-template-columns:repeat(4, 1fr); gap:18px; margin-top:26px; }
.signoff div { border-top:1px solid var(--ink); padding-top:3px; font-size:8pt; color:var(--muted); min-height:34px; }
footer { margin-top:14px; font-size:7.5pt; color:var(--muted); border-top:1px solid var(--rule); padding-top:4px; display:flex; justify-content:space-between; gap:10px; }
@page { margin:14mm 12mm; }
@media print {
  html, body { background:#fff; }
  .sheet { max-width:none; margin:0; padding:0; box-shadow:none; }
  body { font-size:9.5pt; }
  section.break { break-before:page; page-break-before:always; }
  table, figure, .program, .caution, .signoff, .totals, tr { break-inside:avoid; page-break-inside:avoid; }
  thead { display:table-header-group; }
  h2, h3 { break-after:avoid; page-break-after:avoid; }
  * { -webkit-print-color-adjust:exact; print-color-adjust:exact; }
}
"#;

/// A figure as text rounded for reading, with its key and unrounded value.
fn figure_cell(key: &str, value: Option<Decimal>, dp: u32) -> String {
    match value {
        Some(v) => format!(
            "<td class=\"num\" data-figure=\"{}\" data-value=\"{}\">{}</td>",
            esc(key),
            v.normalize(),
            grouped(v, dp)
        ),
        None => format!(
            "<td class=\"num\" data-figure=\"{}\" data-value=\"\" title=\"not tracked\">{ABSENT}</td>",
            esc(key)
        ),
    }
}

fn count_cell(key: &str, value: u64) -> String {
    format!(
        "<td class=\"num\" data-figure=\"{}\" data-value=\"{value}\">{}</td>",
        esc(key),
        grouped(Decimal::from(value), 0)
    )
}

fn figure_span(key: &str, value: Option<Decimal>, dp: u32) -> String {
    match value {
        Some(v) => format!(
            "<span data-figure=\"{}\" data-value=\"{}\">{}</span>",
            esc(key),
            v.normalize(),
            grouped(v, dp)
        ),
        None => format!(
            "<span data-figure=\"{}\" data-value=\"\">{ABSENT}</span>",
            esc(key)
        ),
    }
}

/// The five period figures of a row: heat input, SO2, NOx, CO2 tons.
fn period_cells(prefix: &str, p: &Period) -> String {
    [
        figure_cell(&format!("{prefix}.heat_input_mmbtu"), p.heat_input_mmbtu, 0),
        figure_cell(&format!("{prefix}.so2_tons"), p.so2_tons, 1),
        figure_cell(&format!("{prefix}.nox_tons"), p.nox_tons, 1),
        figure_cell(&format!("{prefix}.co2_tons"), p.co2_tons, 1),
    ]
    .concat()
}

fn unit_key(u: &UnitReport) -> String {
    format!("units.{}", u.unit)
}

/// The certification line of the header: who certified the year, when,
/// the digest of the report certified, and every amendment since.
fn certification(r: &AnnualReport) -> String {
    let Some(c) = &r.certification else {
        return format!(
            "<p class=\"status\" data-certification=\"none\"><strong>Not certified.</strong> \
The ledger holds no certification of {}: these figures may still change \
(<code>flue certify --year {} --by NAME</code> freezes the year).</p>",
            r.year, r.year
        );
    };
    let statement = c
        .statement
        .as_deref()
        .map(|s| format!(" Statement: “{}”.", esc(s)))
        .unwrap_or_default();
    let mut out = format!(
        "<p class=\"status certified{}\" data-certification=\"{}\"><strong>Certified</strong> by {} on {}.{statement} \
Digest of the report certified (SHA-256): <code class=\"hash\">{}</code>.",
        if c.amended { " amended" } else { "" },
        if c.amended { "amended" } else { "certified" },
        esc(&c.by),
        esc(&c.at),
        esc(&c.report_sha256),
    );
    for a in &c.amendments {
        let _ = write!(
            out,
            "<br><strong>Amended</strong> on {} by {}: {}.",
            esc(&a.at),
            esc(&a.by),
            esc(&a.reason)
        );
    }
    out.push_str("</p>");
    out
}

/// The journal line of the header: the ledger state the report came from.
fn journal(r: &AnnualReport) -> String {
    match &r.journal {
        Some(j) => format!(
            "<p class=\"status journal\" data-journal=\"{}\">Ledger journal at this report: {} entries, head <code class=\"hash\">{}</code> (<code>flue verify</code> rechecks it).</p>",
            esc(&j.head_sha256),
            j.entries,
            esc(&j.head_sha256)
        ),
        None => String::new(),
    }
}

/// The as-of line of the header: the journal entry the report stops at.
fn as_of(a: Option<&AsOfView>) -> String {
    match a {
        Some(a) => format!(
            "<p class=\"status asof\" data-as-of-seq=\"{}\" data-as-of-at=\"{}\" data-as-of-hash=\"{}\">\
<strong>As of journal entry {}</strong> (recorded {}, hash <code class=\"hash\">{}</code>): the ledger as it stood \
right after that entry; later entries are left out.</p>",
            a.seq,
            esc(&a.at),
            esc(&a.hash),
            a.seq,
            esc(&a.at),
            esc(&a.hash)
        ),
        None => String::new(),
    }
}

fn header(r: &AnnualReport, out: &mut String) {
    let _ = write!(
        out,
        "<header class=\"title\"><div><div class=\"kicker\">Annual emissions statement</div>\
<h1>{}</h1></div><div class=\"year\">{}</div></header>",
        esc(&r.facility_name),
        r.year
    );
    let _ = write!(
        out,
        "<dl class=\"meta\">\
<div><dt>Facility</dt><dd data-facility=\"{id}\">{id}</dd></div>\
<div><dt>Reporting year</dt><dd>January 1 to December 31, {year}</dd></div>\
<div><dt>Site file</dt><dd>version {version}</dd></div>\
<div><dt>Hourly rounding</dt><dd>{rounding}</dd></div>\
<div><dt>Units</dt><dd>{units}</dd></div>\
<div><dt>Allowance programs</dt><dd>{programs}</dd></div>\
</dl>",
        id = esc(&r.facility),
        year = r.year,
        version = r.site_version,
        rounding = match r.rounding {
            "part75" => "part75 (hourly values rounded as 40 CFR 75 App. F states)",
            _ => "exact (nothing rounded before this report)",
        },
        units = esc(&r
            .units
            .iter()
            .map(|u| u.unit.as_str())
            .collect::<Vec<_>>()
            .join(", ")),
        programs = if r.programs.is_empty() {
            "none in the site file".to_string()
        } else {
            esc(&r
                .programs
                .iter()
                .map(|p| text(p, "program"))
                .collect::<Vec<_>>()
                .join(", "))
        },
    );
    out.push_str(&certification(r));
    out.push_str(&journal(r));
    out.push_str(&as_of(r.as_of.as_ref()));
}

fn totals(r: &AnnualReport, out: &mut String) {
    let t = &r.totals;
    let _ = write!(
        out,
        "<section id=\"totals\"><h2><span class=\"no\">1</span>Facility totals</h2><div class=\"totals\">"
    );
    for (label, key, value, dp, uom) in [
        (
            "Heat input",
            "heat_input_mmbtu",
            t.heat_input_mmbtu,
            0,
            "MMBtu",
        ),
        ("SO2", "so2_tons", t.so2_tons, 1, "tons"),
        ("NOx", "nox_tons", t.nox_tons, 1, "tons"),
        ("CO2", "co2_tons", t.co2_tons, 1, "tons"),
        (
            "NOx rate",
            "nox_rate_lb_per_mmbtu",
            t.nox_rate_lb_per_mmbtu,
            3,
            "lb/MMBtu",
        ),
    ] {
        let _ = write!(
            out,
            "<div><span class=\"label\">{label}</span><span class=\"value\">{}</span><span class=\"uom\">{uom}</span></div>",
            figure_span(&format!("totals.{key}"), value, dp)
        );
    }
    out.push_str(
        "</div><p class=\"note\">Figures are rounded for reading: tons to 0.1, heat input to 1 MMBtu, \
rates to 0.001 lb/MMBtu, half away from zero. The JSON report keeps full precision. \
The NOx rate is weighted by heat input.</p></section>",
    );
}

/// Per-parameter monitor figures, one line each: SO2, flow, NOx.
fn monitor_lines(values: [(&str, String); 3]) -> String {
    let lines: Vec<String> = values
        .into_iter()
        .map(|(p, span)| format!("<span class=\"small\">{p}</span> {span}"))
        .collect();
    format!("<td class=\"num\">{}</td>", lines.join("<br>"))
}

fn availability_cell(u: &UnitReport) -> String {
    match &u.monitor_data_availability_pct {
        None => format!("<td class=\"num small\">{ABSENT}</td>"),
        Some(a) => {
            let k = unit_key(u);
            let span = |p: &str, v: Option<Decimal>| {
                figure_span(&format!("{k}.monitor_data_availability_pct.{p}"), v, 1)
            };
            monitor_lines([
                ("SO2", span("so2", a.so2)),
                ("flow", span("flow", a.flow)),
                ("NOx", span("nox", a.nox)),
            ])
        }
    }
}

fn substituted_cell(u: &UnitReport) -> String {
    if u.monitor_data_availability_pct.is_none() {
        return format!("<td class=\"num small\">{ABSENT}</td>");
    }
    let k = unit_key(u);
    let s = &u.substituted_hours;
    let span = |p: &str, v: u32| {
        format!(
            "<span data-figure=\"{}.substituted_hours.{p}\" data-value=\"{v}\">{}</span>",
            esc(&k),
            grouped(Decimal::from(v), 0)
        )
    };
    monitor_lines([
        ("SO2", span("so2", s.so2)),
        ("flow", span("flow", s.flow)),
        ("NOx", span("nox", s.nox)),
    ])
}

fn units_table(r: &AnnualReport, out: &mut String) {
    out.push_str(
        "<section id=\"units\"><h2><span class=\"no\">2</span>Units</h2><table class=\"units\"><thead><tr>\
<th>Unit</th><th class=\"num\">Operating<br>hours</th><th class=\"num\">Heat input<br>MMBtu</th>\
<th class=\"num\">SO2<br>tons</th><th class=\"num\">NOx<br>tons</th><th class=\"num\">CO2<br>tons</th>\
<th class=\"num\">NOx rate<br>lb/MMBtu</th><th class=\"num\">Data<br>availability %</th>\
<th class=\"num\">Substituted<br>hours</th></tr></thead>",
    );
    for u in &r.units {
        let k = unit_key(u);
        let methods: Vec<String> = u.methods.iter().map(|m| esc(m)).collect();
        let _ = write!(
            out,
            "<tbody class=\"unit\" data-unit=\"{id}\"><tr><td><span class=\"unit-id\">{id}</span><br><span class=\"small\">{kind}, {fuel}</span></td>\
{hours}{heat}{so2}{nox}{co2}{rate}{avail}{subst}</tr>\
<tr class=\"methods\"><td></td><td colspan=\"8\"><span class=\"small\">Methods:</span> {methods}{records}</td></tr></tbody>",
            id = esc(&u.unit),
            kind = esc(u.kind),
            fuel = esc(u.fuel),
            methods = methods.join("; "),
            records = if u.fuel_records > 0 {
                format!(
                    " <span class=\"small\">(from <span data-figure=\"{}.fuel_records\" data-value=\"{}\">{}</span> fuel records)</span>",
                    esc(&k),
                    u.fuel_records,
                    u.fuel_records
                )
            } else {
                " <span class=\"small\">(from hourly monitor data)</span>".to_string()
            },
            hours = figure_cell(&format!("{k}.operating_hours"), u.operating_hours, 0),
            heat = figure_cell(&format!("{k}.heat_input_mmbtu"), u.heat_input_mmbtu, 0),
            so2 = figure_cell(&format!("{k}.so2_tons"), u.so2_tons, 1),
            nox = figure_cell(&format!("{k}.nox_tons"), u.nox_tons, 1),
            co2 = figure_cell(&format!("{k}.co2_tons"), u.co2_tons, 1),
            rate = figure_cell(
                &format!("{k}.nox_rate_lb_per_mmbtu"),
                u.nox_rate_lb_per_mmbtu,
                3
            ),
            avail = availability_cell(u),
            subst = substituted_cell(u),
        );
    }
    let t = &r.totals;
    let _ = write!(
        out,
        "<tbody><tr class=\"total\"><td>Facility</td><td></td>{}{}{}{}{}<td></td><td></td></tr></tbody></table>",
        figure_cell("totals.heat_input_mmbtu", t.heat_input_mmbtu, 0),
        figure_cell("totals.so2_tons", t.so2_tons, 1),
        figure_cell("totals.nox_tons", t.nox_tons, 1),
        figure_cell("totals.co2_tons", t.co2_tons, 1),
        figure_cell("totals.nox_rate_lb_per_mmbtu", t.nox_rate_lb_per_mmbtu, 3),
    );
    let _ = write!(
        out,
        "<p class=\"note\">{ABSENT} = not tracked for the unit (no method in the site file), never zero. \
Operating hours, data availability and substituted hours come from hourly monitor data; fuel-based units have none. \
Missing monitor hours are filled by 40 CFR 75.31 and 75.33; availability is per 40 CFR 75.32 at the end of the data.</p></section>"
    );
}

fn quarters_table(r: &AnnualReport, out: &mut String) {
    out.push_str(
        "<section class=\"break\" id=\"quarters\"><h2><span class=\"no\">4</span>Quarters and ozone season</h2>\
<table><thead><tr><th>Unit</th><th class=\"num\">Q1</th><th class=\"num\">Q2</th><th class=\"num\">Q3</th>\
<th class=\"num\">Q4</th><th class=\"num\">Year</th></tr></thead>",
    );
    type Pick = fn(&Period) -> Option<Decimal>;
    let quantities: [(&str, &str, u32, Pick); 4] = [
        ("Heat input (MMBtu)", "heat_input_mmbtu", 0, |p| {
            p.heat_input_mmbtu
        }),
        ("SO2 (tons)", "so2_tons", 1, |p| p.so2_tons),
        ("NOx (tons)", "nox_tons", 1, |p| p.nox_tons),
        ("CO2 (tons)", "co2_tons", 1, |p| p.co2_tons),
    ];
    let t = &r.totals;
    for (label, key, dp, pick) in quantities {
        let _ = write!(
            out,
            "<tbody class=\"block\"><tr><th class=\"block\" colspan=\"6\">{label}</th></tr>"
        );
        let rows = r
            .units
            .iter()
            .map(|u| {
                (
                    esc(&u.unit),
                    unit_key(u),
                    &u.quarters,
                    u.year_period(),
                    false,
                )
            })
            .chain(std::iter::once((
                "Facility".to_string(),
                "totals".to_string(),
                &t.quarters,
                t.year_period(),
                true,
            )));
        for (name, prefix, quarters, year, total) in rows {
            let _ = write!(
                out,
                "<tr{}><td>{name}</td>",
                if total { " class=\"total\"" } else { "" }
            );
            for q in quarters {
                out.push_str(&figure_cell(
                    &format!("{prefix}.Q{}.{key}", q.quarter.unwrap_or_default()),
                    pick(q),
                    dp,
                ));
            }
            out.push_str(&figure_cell(&format!("{prefix}.{key}"), pick(&year), dp));
            out.push_str("</tr>");
        }
        out.push_str("</tbody>");
    }
    out.push_str("</table>");
    out.push_str(
        "<h3>Ozone season, May 1 to September 30</h3><table><thead><tr><th>Unit</th>\
<th class=\"num\">Heat input<br>MMBtu</th><th class=\"num\">SO2<br>tons</th><th class=\"num\">NOx<br>tons</th>\
<th class=\"num\">CO2<br>tons</th></tr></thead><tbody>",
    );
    for u in &r.units {
        let _ = write!(
            out,
            "<tr><td>{}</td>{}</tr>",
            esc(&u.unit),
            period_cells(&format!("{}.ozone_season", unit_key(u)), &u.ozone_season)
        );
    }
    let _ = write!(
        out,
        "<tr class=\"total\"><td>Facility</td>{}</tr></tbody></table></section>",
        period_cells("totals.ozone_season", &t.ozone_season)
    );
}

fn monthly_chart(
    r: &AnnualReport,
    quantity: &str,
    label: &str,
    pick: fn(&Period) -> Option<Decimal>,
) -> String {
    let categories: Vec<String> = MONTHS.iter().map(|m| m.to_string()).collect();
    let series: Vec<Series> = r
        .units
        .iter()
        .enumerate()
        .map(|(i, u)| Series {
            name: u.unit.clone(),
            color: PALETTE[i % PALETTE.len()],
            bars: u
                .months
                .iter()
                .map(|m| {
                    let month = m.month.unwrap_or_default();
                    let value = pick(m);
                    Bar {
                        value,
                        figure: format!("{}.M{month:02}.{quantity}", unit_key(u)),
                        label: format!(
                            "{} {}: {}",
                            u.unit,
                            MONTHS.get(month as usize - 1).copied().unwrap_or(""),
                            value
                                .map(|v| format!("{} tons", grouped(v, 1)))
                                .unwrap_or_else(|| "not tracked".to_string())
                        ),
                    }
                })
                .collect(),
        })
        .collect();
    svg::grouped_bars(
        &format!("Monthly {label} by unit, {} (tons)", r.year),
        &format!("{label} tons"),
        &categories,
        &series,
    )
}

fn monthly_charts(r: &AnnualReport, out: &mut String) {
    out.push_str(
        "<section class=\"break\" id=\"months\"><h2><span class=\"no\">3</span>Month by month</h2>",
    );
    let _ = write!(
        out,
        "<figure>{}<figcaption>Figure 3.1. SO2 tons per month and unit. A unit that does not track SO2 has no bar.</figcaption></figure>",
        monthly_chart(r, "so2_tons", "SO2", |p| p.so2_tons)
    );
    let _ = write!(
        out,
        "<figure>{}<figcaption>Figure 3.2. NOx tons per month and unit.</figcaption></figure></section>",
        monthly_chart(r, "nox_tons", "NOx", |p| p.nox_tons)
    );
}

fn profile_charts(r: &AnnualReport, out: &mut String) {
    let profiled: Vec<_> = r
        .units
        .iter()
        .filter_map(|u| u.daily_profile.as_ref().map(|p| (u, p)))
        .collect();
    if profiled.is_empty() {
        return;
    }
    out.push_str(
        "<section class=\"break\" id=\"monitor\"><h2><span class=\"no\">5</span>Monitor data, day by day</h2>",
    );
    for (n, (u, p)) in profiled.into_iter().enumerate() {
        let first = NaiveDate::parse_from_str(&p.first_day, "%Y-%m-%d").ok();
        let month_starts: Vec<(usize, String)> = first
            .map(|first| {
                (0..p.so2_lb_per_mmbtu.len())
                    .filter_map(|d| {
                        let day = first + chrono::Duration::days(d as i64);
                        (day.day() == 1).then(|| (d, MONTHS[day.month0() as usize].to_string()))
                    })
                    .collect()
            })
            .unwrap_or_default();
        let _ = write!(
            out,
            "<figure>{}<figcaption>Figure 5.{}. Unit {}: daily SO2 emission rate (Σ SO2 lb ÷ Σ heat input of the day's hours) from {}; \
shaded days and the strip below mark hours in which SO2, flow or NOx was substituted (40 CFR 75.31, 75.33). \
Substituted hours in the year: SO2 {}, flow {}, NOx {}.</figcaption></figure>",
            svg::daily_profile(
                &format!("Unit {}: daily SO2 rate and substituted hours, {}", u.unit, r.year),
                &format!("{}.daily_profile", unit_key(u)),
                &p.so2_lb_per_mmbtu,
                &p.substituted_hours,
                &month_starts,
            ),
            n + 1,
            esc(&u.unit),
            esc(&p.first_day),
            u.substituted_hours.so2,
            u.substituted_hours.flow,
            u.substituted_hours.nox,
        );
    }
    out.push_str("</section>");
}

fn text(v: &Value, k: &str) -> String {
    match &v[k] {
        Value::String(s) => s.clone(),
        Value::Null => ABSENT.to_string(),
        other => other.to_string(),
    }
}

fn decimal(v: &Value, k: &str) -> Option<Decimal> {
    match &v[k] {
        Value::String(s) => Decimal::from_str_exact(s).ok(),
        Value::Number(n) => Decimal::from_str_exact(&n.to_string()).ok(),
        _ => None,
    }
}

fn count(v: &Value, k: &str) -> u64 {
    v[k].as_u64().unwrap_or_default()
}

fn program_section(index: usize, p: &Value, out: &mut String) {
    let id = text(p, "program");
    let key = format!("programs.{id}");
    let shortfall = count(p, "shortfall");
    let settled = p["settled"].as_bool().unwrap_or(false);
    let badge = if shortfall > 0 {
        "<span class=\"badge short\">short of allowances</span>"
    } else {
        "<span class=\"badge ok\">covered</span>"
    };
    let state = if settled {
        "<span class=\"badge ok\">settled</span>"
    } else {
        "<span class=\"badge open\">not settled</span>"
    };
    let _ = write!(
        out,
        "<div class=\"program\" data-program=\"{}\"><h3>{} {}{badge}{state}</h3>\
<p class=\"note\">Account {}; holdings counted at the end of {} (true-up). Eligible: vintages up to {}, oldest deducted first.</p>",
        esc(&id),
        esc(&id),
        esc(&text(p, "year")),
        esc(&text(p, "account")),
        esc(&text(p, "true_up_date")),
        esc(&text(p, "year")),
    );
    let vintages: Vec<Vintage> = p["by_vintage"]
        .as_array()
        .map(|a| {
            a.iter()
                .map(|v| {
                    let vintage = v["vintage"].as_i64().unwrap_or_default() as i32;
                    Vintage {
                        vintage,
                        held: count(v, "held"),
                        deduct: count(v, "deduct"),
                        figure_prefix: format!("{key}.by_vintage.{vintage}"),
                    }
                })
                .collect()
        })
        .unwrap_or_default();
    let _ = write!(
        out,
        "<figure>{}<figcaption>Allowances held at the true-up day by vintage (solid: deducted for the year; pale: held and not deducted) against the allowances the year requires.</figcaption></figure>",
        svg::holdings_chart(
            &format!("program-{index}"),
            &format!("{id}: holdings against the obligation"),
            count(p, "allowances_required"),
            shortfall,
            &key,
            &vintages,
            &PALETTE[1..],
        )
    );
    let c = |k: &str| count_cell(&format!("{key}.{k}"), count(p, k));
    let shortfall_cell = if shortfall > 0 {
        c("shortfall").replacen("class=\"num\"", "class=\"num warn\"", 1)
    } else {
        c("shortfall")
    };
    let _ = write!(
        out,
        "<div class=\"cols\"><table class=\"kv\"><tbody>\
<tr><td>Emissions in the period (tons)</td>{}</tr>\
<tr><td>Tons to cover</td>{}</tr>\
<tr><td>Allowances required</td>{}</tr>\
<tr><td>Eligible allowances held</td>{}</tr>\
<tr><td>Shortfall (excess emissions)</td>{shortfall_cell}</tr>\
<tr><td>Penalty</td>{}</tr>\
<tr><td>Offset owed from vintage {}</td>{}</tr>\
<tr><td>Carried forward</td>{}</tr>\
</tbody></table>",
        figure_cell(
            &format!("{key}.emissions_tons"),
            decimal(p, "emissions_tons"),
            1
        ),
        c("tons_to_cover"),
        c("allowances_required"),
        c("eligible_held"),
        figure_cell(&format!("{key}.penalty"), decimal(p, "penalty"), 2),
        esc(&text(p, "offset_vintage")),
        c("offset_next_year"),
        c("carried_forward"),
    );
    out.push_str(
        "<table><thead><tr><th>Vintage</th><th class=\"num\">Held</th><th class=\"num\">Deducted</th></tr></thead><tbody>",
    );
    for v in &vintages {
        let _ = write!(
            out,
            "<tr><td>{}</td>{}{}</tr>",
            v.vintage,
            count_cell(&format!("{}.held", v.figure_prefix), v.held),
            count_cell(&format!("{}.deduct", v.figure_prefix), v.deduct),
        );
    }
    if vintages.is_empty() {
        out.push_str(
            "<tr><td colspan=\"3\" class=\"small\">No eligible allowances held.</td></tr>",
        );
    }
    out.push_str("</tbody></table></div>");
    let s = &p["settlement"];
    if s.is_object() {
        let _ = write!(
            out,
            "<p class=\"note\">Settled on {} by {}, deductions dated {}: {} allowances deducted; offset {} of {} owed ({} outstanding).</p>",
            esc(&text(s, "settled_at")),
            esc(&text(s, "settled_by")),
            esc(&text(s, "date")),
            grouped(Decimal::from(count(s, "deducted")), 0),
            grouped(Decimal::from(count(s, "offset_deducted")), 0),
            grouped(Decimal::from(count(s, "offset_owed")), 0),
            grouped(Decimal::from(count(s, "offset_outstanding")), 0),
        );
    } else {
        out.push_str("<p class=\"note\">Not settled: no deductions have been written for this year (flue allowances settle).</p>");
    }
    let cost = &p["cost"];
    if cost.is_object() {
        let money = |k: &str| {
            decimal(cost, k)
                .map(|d| grouped(d, 2))
                .unwrap_or_else(|| ABSENT.to_string())
        };
        let _ = write!(
            out,
            "<p class=\"note\">Cost by weighted average through {}: {} allowances bought for {}; deducted allowances {} at cost {}; bank of {} at book value {}.</p>",
            esc(&text(cost, "through")),
            grouped(Decimal::from(count(cost, "acquired_priced_count")), 0),
            money("acquired_cost_usd"),
            grouped(Decimal::from(count(cost, "deducted_count")), 0),
            money("deducted_cost_usd"),
            grouped(Decimal::from(count(cost, "bank_count")), 0),
            money("bank_book_value_usd"),
        );
    }
    out.push_str("</div>");
}

fn programs(r: &AnnualReport, out: &mut String) {
    out.push_str("<section class=\"break\" id=\"programs\"><h2><span class=\"no\">6</span>Allowance programs</h2>");
    if r.programs.is_empty() {
        out.push_str("<p class=\"note\">The site file names no allowance program.</p>");
    }
    for (index, p) in r.programs.iter().enumerate() {
        program_section(index, p, out);
    }
    out.push_str("</section>");
}

fn closing(r: &AnnualReport, out: &mut String) {
    let _ = write!(
        out,
        "<section id=\"caution\"><h2><span class=\"no\">7</span>Caution and review</h2>\
<div class=\"caution\" data-caution=\"\"><strong>Caution</strong>{}</div>\
<p class=\"note\">Every figure can be traced with <code>flue explain QUANTITY --unit U --year {}</code>, which lists the input rows, equations and constants behind it.</p>\
<div class=\"signoff\"><div>Reviewed by (name)</div><div>Title</div><div>Signature</div><div>Date</div></div></section>",
        esc(r.caution),
        r.year
    );
    let _ = write!(
        out,
        "<footer><span>{} ({}) · {} · site file version {}</span><span>Prepared with flue {}</span></footer>",
        esc(&r.facility_name),
        esc(&r.facility),
        r.year,
        r.site_version,
        env!("CARGO_PKG_VERSION")
    );
}

/// The document's head: no resource may load (CSP), the styles inline.
fn open_document(title: &str) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'\">\
<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
<meta name=\"generator\" content=\"flue {}\">\
<title>{}</title><style>{STYLE}</style></head>\
<body><main class=\"sheet\">",
        env!("CARGO_PKG_VERSION"),
        esc(title)
    )
}

/// One calendar quarter and the year to its end, as a short document.
pub fn quarter(r: &QuarterReport) -> String {
    let mut out = open_document(&format!(
        "Quarterly emissions statement: {} ({}), Q{} {}",
        r.facility_name, r.facility, r.quarter, r.year
    ));
    let _ = write!(
        out,
        "<header class=\"title\"><div><div class=\"kicker\">Quarterly emissions statement</div>\
<h1>{}</h1></div><div class=\"year\">Q{} {}</div></header>\
<dl class=\"meta\"><div><dt>Facility</dt><dd data-facility=\"{id}\">{id}</dd></div>\
<div><dt>Quarter</dt><dd>{}</dd></div><div><dt>Year to date</dt><dd>January 1 to the end of Q{}</dd></div></dl>",
        esc(&r.facility_name),
        r.quarter,
        r.year,
        QUARTER_SPANS.get(r.quarter as usize - 1).copied().unwrap_or(""),
        r.quarter,
        id = esc(&r.facility),
    );
    out.push_str(&as_of(r.as_of.as_ref()));
    out.push_str(
        "<section id=\"quarter\"><h2><span class=\"no\">1</span>Units</h2><table><thead><tr><th>Unit</th><th>Period</th>\
<th class=\"num\">Heat input<br>MMBtu</th><th class=\"num\">SO2<br>tons</th><th class=\"num\">NOx<br>tons</th>\
<th class=\"num\">CO2<br>tons</th></tr></thead><tbody>",
    );
    let rows = r
        .units
        .iter()
        .map(|u| (u, format!("units.{}", u.unit), false))
        .chain(std::iter::once((&r.totals, "totals".to_string(), true)));
    for (u, key, total) in rows {
        let class = if total { " class=\"total\"" } else { "" };
        let name = if total {
            "Facility".to_string()
        } else {
            esc(&u.unit)
        };
        let _ = write!(
            out,
            "<tr{class}><td>{name}</td><td>Q{}</td>{}</tr><tr{class}><td></td><td>Jan 1 to end of Q{}</td>{}</tr>",
            r.quarter,
            period_cells(&format!("{key}.quarter"), &u.quarter),
            r.quarter,
            period_cells(&format!("{key}.year_to_date"), &u.year_to_date),
        );
    }
    let _ = write!(
        out,
        "</tbody></table><p class=\"note\">{ABSENT} = not tracked for the unit (no method in the site file), never zero. \
Figures are rounded for reading; the JSON report keeps full precision.</p></section>\
<section id=\"caution\"><h2><span class=\"no\">2</span>Caution</h2>\
<div class=\"caution\" data-caution=\"\"><strong>Caution</strong>{}</div></section>\
<footer><span>{} ({}) · Q{} {}</span><span>Prepared with flue {}</span></footer></main></body></html>",
        esc(r.caution),
        esc(&r.facility_name),
        esc(&r.facility),
        r.quarter,
        r.year,
        env!("CARGO_PKG_VERSION")
    );
    out.push('\n');
    out
}

const QUARTER_SPANS: [&str; 4] = [
    "January 1 to March 31",
    "April 1 to June 30",
    "July 1 to September 30",
    "October 1 to December 31",
];

/// The annual report as one HTML document.
pub fn annual(r: &AnnualReport) -> String {
    let mut out = open_document(&format!(
        "Annual emissions statement: {} ({}), {}",
        r.facility_name, r.facility, r.year
    ));
    header(r, &mut out);
    totals(r, &mut out);
    units_table(r, &mut out);
    monthly_charts(r, &mut out);
    quarters_table(r, &mut out);
    profile_charts(r, &mut out);
    programs(r, &mut out);
    closing(r, &mut out);
    out.push_str("</main></body></html>\n");
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::model::{Availability, DailyProfile, SubstitutedHours, Totals};
    use rust_decimal_macros::dec;

    fn period(q: Option<u32>, m: Option<u32>, so2: Decimal) -> Period {
        Period {
            quarter: q,
            month: m,
            heat_input_mmbtu: Some(dec!(1000)),
            so2_tons: Some(so2),
            nox_tons: None,
            co2_tons: Some(dec!(5)),
        }
    }

    fn unit(id: &str, profile: bool) -> UnitReport {
        UnitReport {
            unit: id.to_string(),
            kind: "boiler",
            fuel: "bituminous",
            methods: vec!["so2: cems <x>".to_string()],
            operating_hours: profile.then_some(dec!(10)),
            heat_input_mmbtu: Some(dec!(12000)),
            so2_tons: Some(dec!(1234.56)),
            nox_tons: None,
            co2_tons: Some(dec!(60)),
            nox_rate_lb_per_mmbtu: None,
            substituted_hours: SubstitutedHours::default(),
            monitor_data_availability_pct: profile.then_some(Availability::default()),
            fuel_records: 0,
            quarters: (1..=4).map(|q| period(Some(q), None, dec!(1))).collect(),
            ozone_season: period(None, None, dec!(2)),
            months: (1..=12).map(|m| period(None, Some(m), dec!(0.5))).collect(),
            daily_profile: profile.then(|| DailyProfile {
                first_day: "2025-01-01".to_string(),
                so2_lb_per_mmbtu: vec![Some(dec!(1.2)), None, Some(dec!(1.3))],
                substituted_hours: vec![0, 3, 0],
            }),
        }
    }

    fn report(units: Vec<UnitReport>, programs: Vec<Value>) -> AnnualReport {
        AnnualReport {
            format_version: 1,
            facility: "F&1".to_string(),
            facility_name: "<script>alert('x')</script> Works".to_string(),
            year: 2025,
            site_version: 3,
            rounding: "exact",
            units,
            totals: Totals {
                heat_input_mmbtu: Some(dec!(12000)),
                so2_tons: Some(dec!(1234.56)),
                nox_tons: None,
                co2_tons: Some(dec!(60)),
                nox_rate_lb_per_mmbtu: None,
                quarters: (1..=4).map(|q| period(Some(q), None, dec!(1))).collect(),
                ozone_season: period(None, None, dec!(2)),
            },
            programs,
            certification: None,
            journal: None,
            as_of: None,
            caution: crate::report::CAUTION,
        }
    }

    fn program(id: &str) -> Value {
        serde_json::json!({
            "program": id, "year": 2025, "account": "A\"1", "true_up_date": "2026-03-01",
            "emissions_tons": "12.5", "tons_to_cover": 13, "allowances_required": 13,
            "eligible_held": 10, "by_vintage": [{"vintage": 2024, "held": 10, "deduct": 10}],
            "shortfall": 3, "penalty": "12000", "offset_vintage": 2026,
            "offset_next_year": 3, "carried_forward": 0, "settled": false, "settlement": null
        })
    }

    #[test]
    fn user_strings_are_escaped() {
        let html = annual(&report(vec![unit("U<1>", false)], vec![program("P&<b>")]));
        assert!(!html.contains("<script>"));
        assert!(html.contains("&lt;script&gt;alert('x')&lt;/script&gt; Works"));
        assert!(html.contains("U&lt;1&gt;"));
        assert!(!html.contains("U<1>"));
        assert!(html.contains("P&amp;&lt;b&gt;"));
        assert!(html.contains("so2: cems &lt;x&gt;"));
        assert!(html.contains("A&quot;1"));
        assert!(html.contains("F&amp;1"));
    }

    #[test]
    fn names_every_unit_and_program_with_charts_and_the_caution() {
        let html = annual(&report(
            vec![unit("K1", false), unit("K2", true)],
            vec![program("SO2-A"), program("NOX-O")],
        ));
        for id in ["K1", "K2", "SO2-A", "NOX-O"] {
            assert!(html.contains(&format!(">{id}")), "{id} not named");
        }
        // Two monthly charts, one profile, one holdings chart per program.
        assert_eq!(html.matches("<svg").count(), 5);
        // The caution as written, apostrophe and all.
        assert!(html.contains(crate::report::CAUTION));
        assert!(html.contains(
            "data-figure=\"units.K2.daily_profile.substituted_hours.1\" data-value=\"3\""
        ));
        assert!(html.contains("data-figure=\"programs.SO2-A.shortfall\" data-value=\"3\""));
        // Absent stays absent: a dash, never a zero.
        assert!(html
            .contains("data-figure=\"units.K1.nox_tons\" data-value=\"\" title=\"not tracked\">—"));
        // The tons shown are rounded for reading; the value is the model's.
        assert!(html.contains("data-figure=\"units.K1.so2_tons\" data-value=\"1234.56\">1,234.6<"));
    }

    #[test]
    fn without_hourly_data_there_is_no_profile_and_no_programs_is_said() {
        let html = annual(&report(vec![unit("K1", false)], vec![]));
        assert!(!html.contains("id=\"monitor\""));
        assert_eq!(html.matches("<svg").count(), 2);
        assert!(html.contains("The site file names no allowance program."));
    }

    #[test]
    fn header_states_certification_amendments_and_journal_head() {
        let mut r = report(vec![unit("K1", false)], vec![]);
        let html = annual(&r);
        assert!(html.contains("data-certification=\"none\"><strong>Not certified.</strong>"));
        assert!(!html.contains("data-journal"));
        r.certification = Some(crate::report::model::CertificationView {
            by: "A. <Official>".to_string(),
            at: "2026-03-02T09:00:00Z".to_string(),
            statement: Some("true & complete".to_string()),
            report_sha256: "ab12".to_string(),
            amended: true,
            amendments: vec![crate::report::model::AmendmentView {
                at: "2026-04-01T10:00:00Z".to_string(),
                by: "B".to_string(),
                reason: "meter <K1> re-read".to_string(),
            }],
        });
        r.journal = Some(crate::report::model::JournalView {
            entries: 7,
            head_sha256: "cd34".to_string(),
        });
        let html = annual(&r);
        assert!(html.contains("data-certification=\"amended\"><strong>Certified</strong> by A. &lt;Official&gt; on 2026-03-02T09:00:00Z. Statement: “true &amp; complete”."));
        assert!(html.contains("<code class=\"hash\">ab12</code>"));
        assert!(html.contains(
            "<strong>Amended</strong> on 2026-04-01T10:00:00Z by B: meter &lt;K1&gt; re-read."
        ));
        assert!(html.contains("data-journal=\"cd34\">Ledger journal at this report: 7 entries"));
    }

    #[test]
    fn quarter_document_tags_quarter_and_year_to_date() {
        let p = |so2| Period {
            quarter: None,
            month: None,
            heat_input_mmbtu: Some(dec!(10)),
            so2_tons: Some(so2),
            nox_tons: None,
            co2_tons: None,
        };
        let q = QuarterReport {
            format_version: 1,
            facility: "F1".to_string(),
            facility_name: "Mill <A>".to_string(),
            year: 2025,
            quarter: 2,
            units: vec![crate::report::model::QuarterUnit {
                unit: "B&2".to_string(),
                quarter: p(dec!(1.25)),
                year_to_date: p(dec!(3.75)),
            }],
            totals: crate::report::model::QuarterUnit {
                unit: "facility".to_string(),
                quarter: p(dec!(1.25)),
                year_to_date: p(dec!(3.75)),
            },
            as_of: None,
            caution: crate::report::CAUTION,
        };
        let html = quarter(&q);
        assert!(!html.contains("data-as-of"));
        let mut cut = q.clone();
        cut.as_of = Some(AsOfView {
            seq: 3,
            at: "<soon>".to_string(),
            hash: "ab".repeat(32),
        });
        let as_of = quarter(&cut);
        assert!(as_of.contains(&format!(
            "data-as-of-seq=\"3\" data-as-of-at=\"&lt;soon&gt;\" data-as-of-hash=\"{}\"><strong>As of journal entry 3</strong> (recorded &lt;soon&gt;,",
            "ab".repeat(32)
        )));
        assert!(html.contains("Mill &lt;A&gt;"));
        assert!(html.contains("April 1 to June 30"));
        assert!(html
            .contains("data-figure=\"units.B&amp;2.quarter.so2_tons\" data-value=\"1.25\">1.3<"));
        assert!(
            html.contains("data-figure=\"totals.year_to_date.so2_tons\" data-value=\"3.75\">3.8<")
        );
        assert!(html.contains("data-figure=\"totals.quarter.nox_tons\" data-value=\"\""));
        assert!(html.contains(crate::report::CAUTION));
        assert!(!html.contains("src="));
    }

    #[test]
    fn nothing_is_loaded_from_anywhere() {
        let html = annual(&report(vec![unit("K2", true)], vec![program("P")]));
        for forbidden in [
            "http:", "https:", "src=", "@import", "<script", "<link", "url(http",
        ] {
            assert!(!html.contains(forbidden), "{forbidden}");
        }
        assert!(html.contains("default-src 'none'"));
        assert!(html.contains("@media print"));
    }
}
