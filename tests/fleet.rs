//! Several facilities in one ledger: `report annual --facility F`, or every
//! facility with a fleet roll-up whose totals are the sums of the facilities'.

use assert_cmd::Command;
use rust_decimal::Decimal;
use serde_json::Value;
use std::path::Path;
use std::str::FromStr;

fn flue(ledger: &Path) -> Command {
    let mut c = Command::cargo_bin("flue").unwrap();
    c.env("FLUE_NOW", "2026-03-05T12:00:00Z")
        .env("FLUE_USER", "tester")
        .env("FLUE_LEDGER", ledger);
    c
}

fn dec(v: &Value) -> Decimal {
    Decimal::from_str(v.as_str().expect("a decimal string")).unwrap()
}

/// The demo plant plus a second invented facility with one gas boiler.
fn two_facilities() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let demo = dir.path().join("demo");
    let ledger = demo.join("flue.db");
    flue(&ledger)
        .args(["demo", "--dir"])
        .arg(&demo)
        .assert()
        .success();
    std::fs::write(
        dir.path().join("site2.toml"),
        r#"[facility]
id = "HB2"
name = "Heron Bluff Works"
utc_offset = "-07:00"

[[units]]
id = "HB-G1"
kind = "boiler"
fuel = "natural-gas"

[[units.methods]]
quantity = "heat_input"
method = "fuel"

[[units.methods]]
quantity = "nox"
method = "emission-factor"
factor = "100"
per = "mmscf"
"#,
    )
    .unwrap();
    std::fs::write(
        dir.path().join("a2.csv"),
        "sample,fuel,sampled_on,gcv,gcv_uom\nHB-S1,natural-gas,2025-03-02,1025,btu/scf\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("f2.csv"),
        "unit,start,end,fuel,quantity,uom,sample\nHB-G1,2025-03-01,2025-03-31,natural-gas,42.5,mmscf,HB-S1\nHB-G1,2025-07-01,2025-07-31,natural-gas,30,mmscf,HB-S1\n",
    )
    .unwrap();
    flue(&ledger)
        .args(["site", "load"])
        .arg(dir.path().join("site2.toml"))
        .assert()
        .success();
    flue(&ledger)
        .args(["import", "analyses"])
        .arg(dir.path().join("a2.csv"))
        .assert()
        .success();
    flue(&ledger)
        .args(["import", "fuel"])
        .arg(dir.path().join("f2.csv"))
        .assert()
        .success();
    dir
}

#[test]
fn the_fleet_totals_are_the_sums_of_the_facilities() {
    let dir = two_facilities();
    let ledger = dir.path().join("demo/flue.db");
    let out = flue(&ledger)
        .args(["report", "annual", "--year", "2025", "--format", "json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let r: Value = serde_json::from_slice(&out).unwrap();
    let facilities = r["facilities"].as_array().unwrap();
    assert_eq!(facilities.len(), 2);
    for field in ["heat_input_mmbtu", "nox_tons"] {
        let sum: Decimal = facilities.iter().map(|f| dec(&f["totals"][field])).sum();
        assert_eq!(dec(&r["fleet"][field]), sum, "{field}");
    }
    // HB-G1: 72.5 mmscf × 1025 Btu/scf = 74,312.5 MMBtu (40 CFR 75 App. D Eq. D-6 form);
    // NOx 100 lb/mmscf × 72.5 = 7,250 lb = 3.625 tons (AP-42 factor convention).
    let hb = facilities.iter().find(|f| f["facility"] == "HB2").unwrap();
    assert_eq!(
        dec(&hb["totals"]["heat_input_mmbtu"]),
        Decimal::from_str("74312.5").unwrap()
    );
    assert_eq!(
        dec(&hb["totals"]["nox_tons"]),
        Decimal::from_str("3.625").unwrap()
    );
    // SO2 is tracked only at the demo plant: the fleet's SO2 is the demo's.
    let mc = facilities.iter().find(|f| f["facility"] == "MC1").unwrap();
    assert_eq!(dec(&r["fleet"]["so2_tons"]), dec(&mc["totals"]["so2_tons"]));
    assert!(r["caution"].as_str().unwrap().contains("permit"));
}

#[test]
fn one_facility_is_chosen_with_facility_and_html_needs_one() {
    let dir = two_facilities();
    let ledger = dir.path().join("demo/flue.db");
    let out = flue(&ledger)
        .args([
            "report",
            "annual",
            "--year",
            "2025",
            "--format",
            "json",
            "--facility",
            "HB2",
        ])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let r: Value = serde_json::from_slice(&out).unwrap();
    assert_eq!(r["facility"], "HB2");
    let err = flue(&ledger)
        .args([
            "report", "annual", "--year", "2025", "--format", "html", "--out",
        ])
        .arg(dir.path().join("x.html"))
        .assert()
        .code(1)
        .get_output()
        .stderr
        .clone();
    assert!(String::from_utf8_lossy(&err).contains("pass --facility"));
    assert!(!dir.path().join("x.html").exists());
    let csv = flue(&ledger)
        .args(["report", "annual", "--year", "2025", "--format", "csv"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let csv = String::from_utf8(csv).unwrap();
    assert_eq!(
        csv.lines().filter(|l| l.starts_with("scope,")).count(),
        1,
        "one header"
    );
    assert!(csv.lines().any(|l| l.starts_with("fleet,,2025,,year,")));
    let width = csv.lines().next().unwrap().split(',').count();
    assert!(
        csv.lines().all(|l| l.split(',').count() >= width),
        "every row has every column"
    );
}
