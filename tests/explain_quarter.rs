//! `flue explain` and `flue report quarter` on the demo plant: an
//! explanation must agree with the report it explains, and a quarter with
//! the annual report it is cut from.

use assert_cmd::Command;
use rust_decimal::Decimal;
use serde_json::Value;
use std::path::Path;
use std::str::FromStr;

fn flue(dir: &Path) -> Command {
    let mut c = Command::cargo_bin("flue").unwrap();
    c.env("FLUE_NOW", "2026-03-05T12:00:00Z")
        .env("FLUE_USER", "tester")
        .env("FLUE_LEDGER", dir.join("flue.db"));
    c
}

fn demo() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path().join("demo");
    flue(&d).args(["demo", "--dir"]).arg(&d).assert().success();
    dir
}

fn json(cmd: &mut Command) -> Value {
    let out = cmd.assert().success().get_output().stdout.clone();
    serde_json::from_slice(&out).unwrap()
}

fn dec(v: &Value) -> Decimal {
    Decimal::from_str(v.as_str().unwrap()).unwrap()
}

#[test]
fn an_hour_in_a_long_so2_gap_is_explained_with_its_rule_and_sources() {
    let dir = demo();
    let d = dir.path().join("demo");
    // The demo's SO2 analyzer is out 2025-06-17T00:00 to 2025-06-18T05:00 (30 hours).
    let e = json(flue(&d).args([
        "explain",
        "so2",
        "--unit",
        "K2",
        "--hour",
        "2025-06-17T05:00",
        "--format",
        "json",
    ]));
    assert_eq!(e["substituted"], Value::Bool(true));
    // 40 CFR 75 App. F Eq. F-1 gives the rate, Eq. F-3's Eh × th the mass.
    assert_eq!(e["equation"], "40 CFR 75 App. F Eq. F-1");
    let so2 = e["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .find(|i| i["name"] == "so2_ppm_wet")
        .expect("the SO2 input is listed");
    // A gap longer than 24 hours with availability of at least 95 %:
    // the greater of the 90th percentile and the before/after average (40 CFR 75.33(b) Table 1).
    assert_eq!(so2["substitution"]["citation"], "40 CFR 75.33(b) Table 1");
    assert_eq!(so2["substitution"]["gap_operating_hours"], 30);
    assert!(
        so2["source"].is_null(),
        "a substituted value has no input row"
    );
    let flow = e["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .find(|i| i["name"] == "flow_scfh_wet")
        .unwrap();
    assert_eq!(flow["source"]["file"], "hourly-k2.csv");
    // Header is line 1 and the file starts at 2025-01-01T00:00, so hour h is on line h + 2.
    assert_eq!(flow["source"]["line"], 24 * 167 + 5 + 2);
    // F-1: 1.660e-7 × ppm × scfh, then × op_time (1.00 here).
    let ppm = dec(&so2["value"]);
    let scfh = dec(&flow["value"]);
    let expected = Decimal::from_str("0.000000166").unwrap() * ppm * scfh;
    assert_eq!(dec(&e["value"]), expected.normalize());
}

#[test]
fn a_quarter_and_its_year_to_date_agree_with_the_annual_report() {
    let dir = demo();
    let d = dir.path().join("demo");
    let annual = json(flue(&d).args(["report", "annual", "--year", "2025", "--format", "json"]));
    let q = json(flue(&d).args([
        "report",
        "quarter",
        "--year",
        "2025",
        "--quarter",
        "3",
        "--format",
        "json",
    ]));
    for (u, qu) in annual["units"]
        .as_array()
        .unwrap()
        .iter()
        .zip(q["units"].as_array().unwrap())
    {
        assert_eq!(u["unit"], qu["unit"]);
        for field in ["heat_input_mmbtu", "so2_tons", "nox_tons", "co2_tons"] {
            let quarters = u["quarters"].as_array().unwrap();
            assert_eq!(
                dec(&qu["quarter"][field]),
                dec(&quarters[2][field]),
                "{} {field}",
                u["unit"]
            );
            // Year to date = Q1 + Q2 + Q3 (40 CFR 75 App. F Eq. F-4 sums quarters).
            let ytd: Decimal = quarters[..3].iter().map(|p| dec(&p[field])).sum();
            assert_eq!(
                dec(&qu["year_to_date"][field]),
                ytd,
                "{} {field}",
                u["unit"]
            );
        }
    }
}

#[test]
fn a_year_explanation_sums_to_the_annual_figure() {
    let dir = demo();
    let d = dir.path().join("demo");
    let annual = json(flue(&d).args(["report", "annual", "--year", "2025", "--format", "json"]));
    let e = json(flue(&d).args([
        "explain", "so2", "--unit", "K1", "--year", "2025", "--format", "json",
    ]));
    let k1 = annual["units"]
        .as_array()
        .unwrap()
        .iter()
        .find(|u| u["unit"] == "K1")
        .unwrap();
    assert_eq!(dec(&e["value"]), dec(&k1["so2_tons"]));
    let records: Decimal = e["quarters"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|q| q["months"].as_array().unwrap())
        .flat_map(|m| m["fuel_records"].as_array().unwrap())
        .map(|r| {
            // Each record cites 40 CFR 75 App. D Eq. D-2 (fuel-sulfur).
            assert!(r["equation"].as_str().unwrap().contains("Eq. D-2"));
            dec(&r["value"])
        })
        .sum();
    assert_eq!(records, dec(&k1["so2_tons"]));
}
