//! A small invented CEMS plant built through the command line only, and
//! each unit's operating hours, heat input, SO2, NOx and CO2 computed again
//! here, independently of src/, from the 40 CFR 75 App. F equations written
//! out plainly, with the initial-period missing-data rules of 40 CFR 75.31.
//! `report annual --format json` must agree within 0.1 % (the brief's
//! bound); with exact decimal arithmetic on both sides the check here is
//! far tighter (one part in 10^9).
//!
//! Tamsin Reach Station and all its numbers are made up:
//! - B7, a coal boiler (bituminous): heat input, SO2 (wet), NOx (dry, with
//!   a dry O2 diluent) and CO2 (wet) all by CEMS;
//! - G3, a gas turbine: heat input and NOx by CEMS with a dry O2 diluent,
//!   SO2 by the pipeline-gas default rate on CEMS heat input, CO2 derived
//!   from O2 (no CO2 monitor).
//!
//! Two further tests check that a year's report streams the unit's hours
//! on both sides of the year: the previous December feeds January's
//! substitutes, and a gap open at December 31 closes at the next year's
//! first hour with data.
//!
//! Equation forms follow ../shared/REFERENCES.md §1, where most forms are
//! marked "form from memory": the K values, variables and Table 1 F-factors
//! are verified there, the printed equation forms are not.

use assert_cmd::Command;
use chrono::{Datelike, Duration, NaiveDate, NaiveDateTime};
use rust_decimal::{Decimal, RoundingStrategy};
use rust_decimal_macros::dec;
use serde_json::Value;
use tempfile::TempDir;

const SITE: &str = r#"[facility]
id = "TR1"
name = "Tamsin Reach Station"
utc_offset = "-06:00"
rounding = "exact"

[[units]]
id = "B7"
kind = "boiler"
fuel = "bituminous"
max_load_mw = "500"

[[units.methods]]
quantity = "heat_input"
method = "cems"
diluent = "o2"

[[units.methods]]
quantity = "so2"
method = "cems"

[[units.methods]]
quantity = "nox"
method = "cems"
diluent = "o2"

[[units.methods]]
quantity = "co2"
method = "cems"

[[units]]
id = "G3"
kind = "combustion-turbine"
fuel = "natural-gas"
max_load_mw = "120"

[[units.methods]]
quantity = "heat_input"
method = "cems"

[[units.methods]]
quantity = "nox"
method = "cems"

[[units.methods]]
quantity = "so2"
method = "default-rate"
rate_lb_per_mmbtu = "0.0006"

[[units.methods]]
quantity = "co2"
method = "cems"
"#;

const HEADER: &str =
    "unit,hour,op_time,load_mw,so2_ppm_wet,nox_ppm_dry,o2_pct_dry,co2_pct_wet,flow_scfh_wet,h2o_pct";

// ---- the published constants, each with its source ----

/// K of Eq. F-1: 1.660 × 10⁻⁷ (lb/scf)/ppm SO2 (40 CFR 75 App. F §2.1).
const K_SO2: Decimal = dec!(0.0000001660);
/// K of Eq. F-5: 1.194 × 10⁻⁷ (lb/dscf)/ppm NOx (40 CFR 75 App. F §3.1).
const K_NOX: Decimal = dec!(0.0000001194);
/// K of Eq. F-11: 5.7 × 10⁻⁷ (tons/scf)/% CO2 (40 CFR 75 App. F §4.1).
const K_CO2: Decimal = dec!(0.00000057);
/// Percent O2 in ambient air (App. F Eq. F-5, F-14a, F-18).
const O2_AIR: Decimal = dec!(20.9);
/// Default SO2 rate for pipeline natural gas, lb/MMBtu (40 CFR 75 App. D §2.3.1.1).
const SO2_DEFAULT_PNG: Decimal = dec!(0.0006);
/// Quality-assured SO2 hours before the standard procedures apply (40 CFR 75.31(a)).
const SO2_INITIAL_QA_HOURS: usize = 720;

/// App. F Table 1 (§3.3.5) F-factors: (F dscf/MMBtu, Fc scf CO2/MMBtu).
const BITUMINOUS: (Decimal, Decimal) = (dec!(9780), dec!(1800));
const NATURAL_GAS: (Decimal, Decimal) = (dec!(8710), dec!(1040));

/// One unit-hour as written to the CSV; `None` is an empty cell.
#[derive(Clone, Copy, Debug)]
struct Hour {
    at: NaiveDateTime,
    op_time: Decimal,
    load: Option<Decimal>,
    so2_ppm_wet: Option<Decimal>,
    nox_ppm_dry: Option<Decimal>,
    o2_pct_dry: Option<Decimal>,
    co2_pct_wet: Option<Decimal>,
    flow_scfh_wet: Option<Decimal>,
    h2o_pct: Option<Decimal>,
}

impl Hour {
    fn csv(&self, unit: &str) -> String {
        let cell = |v: Option<Decimal>| v.map(|d| d.to_string()).unwrap_or_default();
        [
            unit.to_string(),
            self.at.format("%Y-%m-%dT%H:00").to_string(),
            format!("{:.2}", self.op_time),
            cell(self.load),
            cell(self.so2_ppm_wet),
            cell(self.nox_ppm_dry),
            cell(self.o2_pct_dry),
            cell(self.co2_pct_wet),
            cell(self.flow_scfh_wet),
            cell(self.h2o_pct),
        ]
        .join(",")
    }

    /// An hour with zero operating time: every cell empty, which is not
    /// missing data (DESIGN.md).
    fn idle(at: NaiveDateTime) -> Hour {
        Hour {
            at,
            op_time: Decimal::ZERO,
            load: None,
            so2_ppm_wet: None,
            nox_ppm_dry: None,
            o2_pct_dry: None,
            co2_pct_wet: None,
            flow_scfh_wet: None,
            h2o_pct: None,
        }
    }
}

fn d(i: i64) -> Decimal {
    Decimal::from(i)
}

fn start() -> NaiveDateTime {
    NaiveDate::from_ymd_opt(2025, 1, 6)
        .unwrap()
        .and_hms_opt(0, 0, 0)
        .unwrap()
}

/// B7's readings, every hour operating and every reading present.
fn b7_plain(first: NaiveDateTime, count: i64) -> Vec<Hour> {
    (0..count)
        .map(|i| {
            let load = d(300 + (i * 37) % 150);
            Hour {
                at: first + Duration::hours(i),
                op_time: Decimal::ONE,
                load: Some(load),
                so2_ppm_wet: Some(d(180 + (i * 13) % 70) + dec!(0.37)),
                nox_ppm_dry: Some(d(160 + (i * 7) % 40) + dec!(0.5)),
                o2_pct_dry: Some(dec!(4.8) + d(i % 9) * dec!(0.15)),
                co2_pct_wet: Some(dec!(11.0) + d(i % 5) * dec!(0.12)),
                flow_scfh_wet: Some(load * d(140_000) + d((i * 7919) % 100_000)),
                h2o_pct: Some(dec!(7.5) + d(i % 4) * dec!(0.25)),
            }
        })
        .collect()
}

/// B7's hours: three days with two idle hours, fractional operating time,
/// a three-hour SO2 gap and a two-hour flow gap, all in the initial period.
fn b7_hours() -> Vec<Hour> {
    let mut hours = b7_plain(start(), 72);
    for (i, h) in hours.iter_mut().enumerate() {
        match i {
            10 | 11 => *h = Hour::idle(h.at),
            20 => h.op_time = dec!(0.25),
            21 => h.op_time = dec!(0.50),
            50 => h.op_time = dec!(0.75),
            30..=32 => h.so2_ppm_wet = None,
            45 | 46 => h.flow_scfh_wet = None,
            _ => {}
        }
    }
    hours
}

/// G3's hours: three days, two idle hours and one fractional hour.
fn g3_hours() -> Vec<Hour> {
    (0..72)
        .map(|i| {
            let at = start() + Duration::hours(i);
            let load = d(70 + (i * 11) % 45);
            let mut h = Hour {
                at,
                op_time: Decimal::ONE,
                load: Some(load),
                so2_ppm_wet: None,
                nox_ppm_dry: Some(d(9 + (i * 3) % 14) + dec!(0.25)),
                o2_pct_dry: Some(dec!(14.2) + d(i % 7) * dec!(0.2)),
                co2_pct_wet: None,
                flow_scfh_wet: Some(load * d(400_000) + d((i * 3331) % 50_000)),
                h2o_pct: Some(dec!(8.0) + d(i % 3) * dec!(0.5)),
            };
            match i {
                15 | 16 => h = Hour::idle(at),
                40 => h.op_time = dec!(0.33),
                _ => {}
            }
            h
        })
        .collect()
}

// ---- the independent computation ----

#[derive(Clone, Copy, PartialEq)]
enum Kind {
    /// B7: everything by CEMS.
    CoalBoiler,
    /// G3: heat input and NOx by CEMS, SO2 by default rate, CO2 from O2.
    GasTurbine,
}

/// What the report should say for one unit and year.
#[derive(Debug, Default)]
struct Expected {
    operating_hours: Decimal,
    heat_input_mmbtu: Decimal,
    so2_lb: Decimal,
    nox_lb: Decimal,
    co2_tons: Decimal,
    substituted_so2: u64,
    substituted_flow: u64,
}

/// The load range of 40 CFR 75 App. C §2: ten ranges of 10 % of the
/// maximum load; range k holds loads above (k − 1)·10 % up to k·10 %
/// (boundary inclusivity from memory; DEVELOPERS.md convention).
fn load_range(load: Decimal, max_load: Decimal) -> u32 {
    let k = (load * dec!(10) / max_load).ceil();
    k.to_string().parse::<u32>().unwrap().clamp(1, 10)
}

fn round_part75(value: Decimal, dp: u32, part75: bool) -> Decimal {
    if part75 {
        value.round_dp_with_strategy(dp, RoundingStrategy::MidpointAwayFromZero)
    } else {
        value
    }
}

/// Compute a unit's `year` from all its hours (the history before the year
/// included), as the rules read.
fn expected(kind: Kind, max_load: Decimal, hours: &[Hour], year: i32, part75: bool) -> Expected {
    let (f, fc) = match kind {
        Kind::CoalBoiler => BITUMINOUS,
        Kind::GasTurbine => NATURAL_GAS,
    };
    let operating: Vec<&Hour> = hours.iter().filter(|h| h.op_time > Decimal::ZERO).collect();
    let qa_so2 = operating.iter().filter(|h| h.so2_ppm_wet.is_some()).count();
    assert!(
        qa_so2 < SO2_INITIAL_QA_HOURS,
        "these data stay in the initial period of 40 CFR 75.31"
    );
    let mut e = Expected::default();
    for (n, h) in operating.iter().enumerate() {
        let in_year = h.at.year() == year;
        if in_year {
            e.operating_hours += h.op_time;
        }
        // Flow: 40 CFR 75.31(c), initial period: the arithmetic average of
        // all prior quality-assured flow values at the hour's load range.
        let flow = match h.flow_scfh_wet {
            Some(q) => q,
            None => {
                let range = load_range(h.load.unwrap(), max_load);
                let prior: Vec<Decimal> = operating[..n]
                    .iter()
                    .filter(|p| load_range(p.load.unwrap(), max_load) == range)
                    .filter_map(|p| p.flow_scfh_wet)
                    .collect();
                assert!(!prior.is_empty(), "a prior flow at range {range}");
                if in_year {
                    e.substituted_flow += 1;
                }
                prior.iter().sum::<Decimal>() / Decimal::from(prior.len())
            }
        };
        let t = h.op_time;
        let o2 = h.o2_pct_dry.unwrap();
        let h2o = h.h2o_pct.unwrap();

        // Heat input rate, O2 dry: 40 CFR 75 App. F Eq. F-18,
        // HI = Qw · (100 − %H2O)/(100 · F) · (20.9 − %O2d)/20.9.
        let hi_rate = flow * (dec!(100) - h2o) / (dec!(100) * f) * (O2_AIR - o2) / O2_AIR;
        assert!(
            hi_rate > dec!(1.0),
            "the 1.0 MMBtu/hr floor of App. F §5.2 is not reached"
        );
        // Heat input of the hour: HIi · ti (App. F §5.2).
        let hi = hi_rate * t;

        let so2_lb = match kind {
            Kind::CoalBoiler => {
                // SO2: 40 CFR 75.31(b), initial period: the average of the
                // operating hours immediately before and after the gap.
                let ppm = match h.so2_ppm_wet {
                    Some(c) => c,
                    None => {
                        let before = operating[..n]
                            .iter()
                            .rev()
                            .find_map(|p| p.so2_ppm_wet)
                            .expect("an hour before the gap");
                        let after = operating[n + 1..]
                            .iter()
                            .find_map(|p| p.so2_ppm_wet)
                            .expect("an hour after the gap");
                        if in_year {
                            e.substituted_so2 += 1;
                        }
                        (before + after) / dec!(2)
                    }
                };
                // 40 CFR 75 App. F Eq. F-1, Eh = K · Ch · Qh (both wet);
                // part75 rounds Eh to 0.1 lb/hr (App. F §2.4). Mass = Eh · th (Eq. F-3).
                round_part75(K_SO2 * ppm * flow, 1, part75) * t
            }
            // 40 CFR 75 App. F Eq. F-23 (§7), Eh = ER · HI, with the pipeline
            // gas default rate of App. D §2.3.1.1; mass = Eh · th. App. F
            // §2.4 is stated for the §2 equations; flue does not round F-23.
            Kind::GasTurbine => SO2_DEFAULT_PNG * hi_rate * t,
        };

        // NOx rate, NOx and O2 both dry: 40 CFR 75 App. F Eq. F-5,
        // E = K · Ch · F · 20.9/(20.9 − %O2); part75 rounds E to
        // 0.001 lb/MMBtu (App. F §3.5). The §3.3.4.1 caps (14.0 % O2 for a
        // boiler, 19.0 % for a turbine) are not reached by these data.
        assert!(o2 < dec!(14.0) || (kind == Kind::GasTurbine && o2 < dec!(19.0)));
        let nox_ppm = h.nox_ppm_dry.unwrap();
        let nox_rate = round_part75(K_NOX * nox_ppm * f * O2_AIR / (O2_AIR - o2), 3, part75);
        // NOx mass: 40 CFR 75 App. F Eq. F-24, M = ER · HI · t.
        let nox_lb = nox_rate * hi_rate * t;

        let co2_tons = match kind {
            // 40 CFR 75 App. F Eq. F-11, Eh = K · Ch · Qh (wet), tons/hr; × th (Eq. F-12).
            Kind::CoalBoiler => K_CO2 * h.co2_pct_wet.unwrap() * flow * t,
            Kind::GasTurbine => {
                // CO2 from O2: 40 CFR 75 App. F Eq. F-14a,
                // CO2d = 100 · (Fc/F) · (20.9 − O2d)/20.9 (never below 0.0 %) ...
                let co2_dry = (dec!(100) * (fc / f) * (O2_AIR - o2) / O2_AIR).max(Decimal::ZERO);
                // ... on a dry basis, so the F-2 form with the CO2 K
                // (App. F §4.1): K · CO2d · Qh · (100 − %H2O)/100.
                K_CO2 * co2_dry * flow * (dec!(100) - h2o) / dec!(100) * t
            }
        };

        if in_year {
            e.heat_input_mmbtu += hi;
            e.so2_lb += so2_lb;
            e.nox_lb += nox_lb;
            e.co2_tons += co2_tons;
        }
    }
    e
}

// ---- the command line ----

struct Plant {
    dir: TempDir,
}

impl Plant {
    fn new(site: &str, hourly_csv: &str) -> Plant {
        let plant = Plant {
            dir: tempfile::tempdir().expect("temporary directory"),
        };
        plant.ok(&["init"]);
        std::fs::write(plant.dir.path().join("site.toml"), site).unwrap();
        plant.ok(&["site", "load", "site.toml"]);
        std::fs::write(plant.dir.path().join("hours.csv"), hourly_csv).unwrap();
        let out = plant.ok(&["import", "hourly", "hours.csv"]);
        assert!(out.contains(" new"), "{out}");
        plant
    }

    fn ok(&self, args: &[&str]) -> String {
        let out = Command::cargo_bin("flue")
            .expect("the flue binary")
            .current_dir(self.dir.path())
            .env("FLUE_NOW", "2026-01-20T09:00:00Z")
            .env("FLUE_USER", "hourly-report-test")
            .env_remove("FLUE_LEDGER")
            .args(args)
            .output()
            .expect("run flue");
        assert!(
            out.status.success(),
            "flue {args:?} failed: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout).expect("UTF-8 stdout")
    }

    fn report(&self, year: i32) -> Value {
        let out = self.ok(&[
            "report",
            "annual",
            "--year",
            &year.to_string(),
            "--format",
            "json",
        ]);
        serde_json::from_str(&out).expect("JSON report")
    }
}

fn csv(units: &[(&str, &[Hour])]) -> String {
    let mut s = format!("{HEADER}\n");
    for (unit, hours) in units {
        for h in *hours {
            s.push_str(&h.csv(unit));
            s.push('\n');
        }
    }
    s
}

fn decimal(v: &Value) -> Decimal {
    match v {
        Value::String(s) => s.parse().expect("decimal string"),
        Value::Number(n) => n.to_string().parse().expect("decimal number"),
        other => panic!("expected a decimal, found {other}"),
    }
}

fn unit<'a>(report: &'a Value, id: &str) -> &'a Value {
    report["units"]
        .as_array()
        .expect("units")
        .iter()
        .find(|u| u["unit"] == id)
        .unwrap_or_else(|| panic!("{id} in the report"))
}

/// Agreement to one part in 10^9 (far inside the 0.1 % asked for).
fn close(what: &str, got: Decimal, want: Decimal) {
    let tolerance = want.abs() * dec!(0.000000001) + dec!(0.000000000001);
    assert!(
        (got - want).abs() <= tolerance,
        "{what}: report {got}, independent {want}"
    );
}

/// Compare a unit's line of the report with the independent computation.
fn check_unit(report: &Value, id: &str, e: &Expected) {
    let u = unit(report, id);
    let tons = |lb: Decimal| lb / dec!(2000);
    close(
        &format!("{id} operating_hours"),
        decimal(&u["operating_hours"]),
        e.operating_hours,
    );
    close(
        &format!("{id} heat_input_mmbtu"),
        decimal(&u["heat_input_mmbtu"]),
        e.heat_input_mmbtu,
    );
    close(
        &format!("{id} so2_tons"),
        decimal(&u["so2_tons"]),
        tons(e.so2_lb),
    );
    close(
        &format!("{id} nox_tons"),
        decimal(&u["nox_tons"]),
        tons(e.nox_lb),
    );
    close(
        &format!("{id} co2_tons"),
        decimal(&u["co2_tons"]),
        e.co2_tons,
    );
    // Heat-input-weighted NOx rate: Σ NOx lb / Σ heat input.
    close(
        &format!("{id} nox_rate_lb_per_mmbtu"),
        decimal(&u["nox_rate_lb_per_mmbtu"]),
        e.nox_lb / e.heat_input_mmbtu,
    );
    assert_eq!(
        u["substituted_hours"]["so2"], e.substituted_so2,
        "{id} SO2 hours"
    );
    assert_eq!(
        u["substituted_hours"]["flow"], e.substituted_flow,
        "{id} flow hours"
    );
    assert_eq!(u["substituted_hours"]["nox"], 0, "{id} NOx hours");
    // All hours are in January: the first quarter holds the year.
    let q = &u["quarters"];
    close(
        &format!("{id} Q1 heat input"),
        decimal(&q[0]["heat_input_mmbtu"]),
        e.heat_input_mmbtu,
    );
    close(
        &format!("{id} Q1 SO2"),
        decimal(&q[0]["so2_tons"]),
        tons(e.so2_lb),
    );
    for later in 1..4 {
        close(
            &format!("{id} Q{} NOx", later + 1),
            decimal(&q[later]["nox_tons"]),
            Decimal::ZERO,
        );
    }
    close(
        &format!("{id} ozone-season NOx"),
        decimal(&u["ozone_season"]["nox_tons"]),
        Decimal::ZERO,
    );
}

fn plant_csv() -> String {
    csv(&[("B7", &b7_hours()), ("G3", &g3_hours())])
}

#[test]
fn a_cems_coal_boiler_and_gas_turbine_match_the_app_f_equations() {
    let plant = Plant::new(SITE, &plant_csv());
    let report = plant.report(2025);
    let b7 = expected(Kind::CoalBoiler, dec!(500), &b7_hours(), 2025, false);
    let g3 = expected(Kind::GasTurbine, dec!(120), &g3_hours(), 2025, false);
    // The gaps: three SO2 hours (30–32) and two flow hours (45–46) of B7.
    assert_eq!((b7.substituted_so2, b7.substituted_flow), (3, 2));
    // B7: 72 hours, two idle, three fractional (0.25 + 0.50 + 0.75);
    // G3: 72 hours, two idle, one at 0.33.
    assert_eq!(b7.operating_hours, dec!(68.5));
    assert_eq!(g3.operating_hours, dec!(69.33));
    check_unit(&report, "B7", &b7);
    check_unit(&report, "G3", &g3);
    let totals = &report["totals"];
    close(
        "facility SO2",
        decimal(&totals["so2_tons"]),
        (b7.so2_lb + g3.so2_lb) / dec!(2000),
    );
    close(
        "facility CO2",
        decimal(&totals["co2_tons"]),
        b7.co2_tons + g3.co2_tons,
    );
}

#[test]
fn part75_rounds_hourly_so2_and_nox_rates_before_summing() {
    let part75_site = SITE.replace("rounding = \"exact\"", "rounding = \"part75\"");
    assert_ne!(part75_site, SITE);
    let exact = Plant::new(SITE, &plant_csv()).report(2025);
    let part75 = Plant::new(&part75_site, &plant_csv()).report(2025);
    assert_eq!(part75["rounding"], "part75");
    let b7 = expected(Kind::CoalBoiler, dec!(500), &b7_hours(), 2025, true);
    let g3 = expected(Kind::GasTurbine, dec!(120), &g3_hours(), 2025, true);
    check_unit(&part75, "B7", &b7);
    check_unit(&part75, "G3", &g3);
    // Rounding the rates changes SO2 and NOx but not heat input or CO2,
    // for which App. F states no rounding (REFERENCES.md open item 5).
    for (id, field, changes) in [
        ("B7", "so2_tons", true),
        ("B7", "nox_tons", true),
        ("G3", "nox_tons", true),
        ("B7", "heat_input_mmbtu", false),
        ("B7", "co2_tons", false),
        ("G3", "so2_tons", false),
    ] {
        let a = decimal(&unit(&exact, id)[field]);
        let b = decimal(&unit(&part75, id)[field]);
        assert_eq!(a != b, changes, "{id} {field}: exact {a}, part75 {b}");
    }
}

/// The report of a year streams the unit's earlier hours too: a flow gap on
/// January 1 at a load range seen only in the previous December is filled
/// from December's flows (40 CFR 75.31(c)), and an SO2 gap that opens on
/// December 31 takes December's last hour as its hour before (75.31(b)).
/// The year's sums hold only the year's hours.
#[test]
fn a_years_report_sees_the_previous_december() {
    let first = NaiveDate::from_ymd_opt(2024, 12, 31)
        .unwrap()
        .and_hms_opt(12, 0, 0)
        .unwrap();
    let mut hours = b7_plain(first, 24);
    for (i, h) in hours.iter_mut().enumerate() {
        // December at range 9, January at range 7 (max load 500 MW) ...
        h.load = Some(if i < 12 { dec!(440) } else { dec!(330) });
        // ... except January 1 00:00–01:00, back at range 9 with no flow.
        if i == 12 || i == 13 {
            h.load = Some(dec!(445));
            h.flow_scfh_wet = None;
        }
        // SO2 missing from December 31 22:00 to January 1 00:00.
        if (10..=12).contains(&i) {
            h.so2_ppm_wet = None;
        }
    }
    let plant = Plant::new(SITE, &csv(&[("B7", &hours)]));

    let e2025 = expected(Kind::CoalBoiler, dec!(500), &hours, 2025, false);
    assert_eq!((e2025.substituted_so2, e2025.substituted_flow), (1, 2));
    let report = plant.report(2025);
    let u = unit(&report, "B7");
    close(
        "B7 2025 operating hours",
        decimal(&u["operating_hours"]),
        e2025.operating_hours,
    );
    close(
        "B7 2025 heat input",
        decimal(&u["heat_input_mmbtu"]),
        e2025.heat_input_mmbtu,
    );
    close(
        "B7 2025 SO2",
        decimal(&u["so2_tons"]),
        e2025.so2_lb / dec!(2000),
    );
    close("B7 2025 CO2", decimal(&u["co2_tons"]), e2025.co2_tons);
    assert_eq!(u["substituted_hours"]["so2"], 1);
    assert_eq!(u["substituted_hours"]["flow"], 2);
}

/// The report of a year also streams the hours after it while a gap is
/// open at the year's end: the hour after an SO2 gap that spans the new
/// year is in the ledger, so December's gap hours take the average of the
/// hours before and after (40 CFR 75.31(b)), not the hour before alone.
#[test]
fn a_gap_open_at_the_years_end_uses_the_hour_after_it() {
    let first = NaiveDate::from_ymd_opt(2024, 12, 31)
        .unwrap()
        .and_hms_opt(12, 0, 0)
        .unwrap();
    let mut hours = b7_plain(first, 24);
    for h in &mut hours[10..=12] {
        // December 31 22:00 to January 1 00:00.
        h.so2_ppm_wet = None;
    }
    let plant = Plant::new(SITE, &csv(&[("B7", &hours)]));
    let e2024 = expected(Kind::CoalBoiler, dec!(500), &hours, 2024, false);
    assert_eq!(e2024.substituted_so2, 2);
    let report = plant.report(2024);
    let u = unit(&report, "B7");
    assert_eq!(u["substituted_hours"]["so2"], 2);
    close(
        "B7 2024 operating hours",
        decimal(&u["operating_hours"]),
        e2024.operating_hours,
    );
    close(
        "B7 2024 SO2",
        decimal(&u["so2_tons"]),
        e2024.so2_lb / dec!(2000),
    );
    close(
        "B7 2024 heat input",
        decimal(&u["heat_input_mmbtu"]),
        e2024.heat_input_mmbtu,
    );
}
