//! `flue explain` at every level on the demo plant: year → quarter → month
//! → fuel record (K1, fuel-based) or hour (K2, CEMS), for every quantity.
//! Each level's `amount` (the engine's figure, in MMBtu or lb) must be the
//! sum of the amounts below it, exactly in Decimal, and the journal entry
//! named for an input must be the one whose `journal_rows` range covers the
//! input row.

use assert_cmd::Command;
use rust_decimal::Decimal;
use serde_json::Value;
use std::path::Path;
use std::str::FromStr;

const QUANTITIES: [&str; 4] = ["heat_input", "so2", "nox", "co2"];

fn flue(dir: &Path) -> Command {
    let mut c = Command::cargo_bin("flue").unwrap();
    c.env("FLUE_NOW", "2026-03-05T12:00:00Z")
        .env("FLUE_USER", "tester")
        .env("FLUE_LEDGER", dir.join("flue.db"));
    c
}

fn json(dir: &Path, args: &[&str]) -> Value {
    let out = flue(dir)
        .args(args)
        .args(["--format", "json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    serde_json::from_slice(&out).unwrap()
}

fn dec(v: &Value) -> Decimal {
    Decimal::from_str(v.as_str().unwrap_or_else(|| panic!("a decimal: {v}"))).unwrap()
}

/// Σ of the children's amounts, in the order listed, from zero: the order
/// the engine adds them (src/emissions/periods.rs, src/compute/).
fn sum<'a>(items: impl Iterator<Item = &'a Value>) -> Decimal {
    items.fold(Decimal::ZERO, |acc, v| acc + dec(&v["amount"]))
}

/// Whether `amount` is Σ of the children's amounts rounded once, to within
/// half a unit of its last place, as the engine rounds a month of hours
/// (src/exact_sum.rs). The exact Σ is taken here in i128 units of 10⁻²⁸
/// (a month of hourly amounts fits), apart from the engine's arithmetic.
fn rounded_once_from<'a>(amount: Decimal, items: impl Iterator<Item = &'a Value>) -> bool {
    let units = |d: Decimal| d.mantissa() * 10i128.pow(28 - d.scale());
    let exact: i128 = items.map(|v| units(dec(&v["amount"]))).sum();
    let half_ulp = 10i128.pow(28 - amount.scale()) / 2;
    (units(amount) - exact).abs() <= half_ulp
}

/// The journal entry whose range for `table` covers `rowid`, read straight
/// from the ledger with SQLite's own shell-free API (rusqlite is a
/// dependency of the crate under test, so the test opens the file plainly).
fn covering_entry(db: &Path, table: &str, rowid: i64) -> i64 {
    let conn = rusqlite_conn(db);
    conn.query_row(
        "SELECT seq FROM journal_rows WHERE table_name = ?1 AND ?2 BETWEEN first_rowid AND last_rowid",
        (table, rowid),
        |r| r.get(0),
    )
    .unwrap()
}

fn rusqlite_conn(db: &Path) -> rusqlite::Connection {
    rusqlite::Connection::open_with_flags(db, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY).unwrap()
}

/// The rowid of the row of `table` from `file` at `line`.
fn row_at(db: &Path, table: &str, file: &str, line: i64) -> i64 {
    rusqlite_conn(db)
        .query_row(
            &format!(
                "SELECT t.rowid FROM {table} t JOIN import_batches b ON b.id = t.batch_id
                 WHERE b.file_name = ?1 AND t.line = ?2 ORDER BY t.rowid DESC LIMIT 1"
            ),
            (file, line),
            |r| r.get(0),
        )
        .unwrap()
}

#[test]
fn every_level_sums_to_the_one_above_and_names_the_entry_of_its_inputs() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path().join("demo");
    flue(&d).args(["demo", "--dir"]).arg(&d).assert().success();
    let db = d.join("flue.db");
    for q in QUANTITIES {
        for unit in ["K1", "K2"] {
            let y = json(&d, &["explain", q, "--unit", unit, "--year", "2025"]);
            let quarters = y["quarters"].as_array().unwrap();
            let months: Vec<&Value> = quarters
                .iter()
                .flat_map(|qt| qt["months"].as_array().unwrap())
                .collect();
            assert_eq!(months.len(), 12);
            // The year is the sum of its twelve months, as the engine adds them.
            assert_eq!(dec(&y["amount"]), sum(months.iter().copied()), "{q} {unit}");
            for qt in quarters {
                assert_eq!(
                    dec(&qt["amount"]),
                    sum(qt["months"].as_array().unwrap().iter()),
                    "{q} {unit} Q{}",
                    qt["quarter"]
                );
            }
            // The year against its four quarters: exact in Decimal unless a
            // sum needed more than rust_decimal's 28 digits, which only
            // quotients that do not terminate make: the CEMS equations
            // (20.9 / (20.9 − %O2), 40 CFR 75 App. F Eq. F-6, F-17) and
            // K1's CO2 by App. G Eq. G-1 (× 44.0 / 12.0). The year adds the
            // months one by one and the quarters group them, so the two
            // roundings may differ by one unit in the last place per addition.
            let by_quarter = sum(quarters.iter());
            let ulp = Decimal::new(1, dec(&y["amount"]).scale());
            let terminating = unit == "K1" && q != "co2";
            let tolerance = if terminating {
                Decimal::ZERO
            } else {
                ulp * Decimal::from(12)
            };
            assert!(
                (dec(&y["amount"]) - by_quarter).abs() <= tolerance,
                "{q} {unit}: year {} against quarters {by_quarter}",
                y["amount"]
            );
            if unit == "K1" {
                for m in &months {
                    let records = m["fuel_records"].as_array().unwrap();
                    assert_eq!(
                        dec(&m["amount"]),
                        sum(records.iter()),
                        "{q} K1 {}",
                        m["month"]
                    );
                    for r in records {
                        let rowid = row_at(
                            &db,
                            "fuel_records",
                            r["file"].as_str().unwrap(),
                            r["line"].as_i64().unwrap(),
                        );
                        assert_eq!(r["journal_seq"], covering_entry(&db, "fuel_records", rowid));
                        let a = &r["analysis"];
                        let rowid = row_at(
                            &db,
                            "analyses",
                            a["file"].as_str().unwrap(),
                            a["line"].as_i64().unwrap(),
                        );
                        assert_eq!(a["journal_seq"], covering_entry(&db, "analyses", rowid));
                        assert!(!r["constants"].as_array().unwrap().is_empty(), "{r}");
                    }
                }
            } else {
                assert!(months
                    .iter()
                    .all(|m| m["fuel_records"].as_array().unwrap().is_empty()));
            }
        }
    }
    // The month → record level of K1, and the month → hour level of K2,
    // for a month with the demo's 30-hour SO2 gap (2025-06-17/18).
    for q in QUANTITIES {
        let m = json(&d, &["explain", q, "--unit", "K1", "--month", "2025-03"]);
        let records = m["fuel_records"].as_array().unwrap();
        assert!(!records.is_empty());
        assert_eq!(dec(&m["amount"]), sum(records.iter()), "{q} K1 2025-03");
        let m = json(&d, &["explain", q, "--unit", "K2", "--month", "2025-06"]);
        let hours = m["hours"].as_array().unwrap();
        // June has 30 days of 24 hours, all stored for K2.
        assert_eq!(hours.len(), 720);
        assert!(
            rounded_once_from(dec(&m["amount"]), hours.iter()),
            "{q} K2 2025-06: {} against the hours' sum {}",
            m["amount"],
            sum(hours.iter())
        );
        let year = json(&d, &["explain", q, "--unit", "K2", "--year", "2025"]);
        assert_eq!(m["amount"], year["quarters"][1]["months"][2]["amount"]);
        if q == "so2" {
            assert!(hours.iter().any(|h| h["substituted"] == Value::Bool(true)));
        }
    }
    // The journal entry of an hour's row: the entry covering its table's row.
    let m = json(
        &d,
        &["explain", "so2", "--unit", "K2", "--month", "2025-06"],
    );
    let h = &m["hours"][400];
    let src = &h["source"];
    // Hourly rows live in blocks (schema/0005_hourly_blocks.sql): the
    // block of this file that holds the hour is the covered row.
    let table = "hourly_blocks";
    let hour = chrono::NaiveDateTime::parse_from_str(h["hour"].as_str().unwrap(), "%Y-%m-%dT%H:%M")
        .unwrap();
    let epoch = chrono::NaiveDate::from_ymd_opt(1970, 1, 1)
        .unwrap()
        .and_hms_opt(0, 0, 0)
        .unwrap();
    let hour_index = (hour - epoch).num_hours();
    let rowid: i64 = rusqlite_conn(&db)
        .query_row(
            "SELECT b.id FROM hourly_blocks b JOIN import_batches i ON i.id = b.batch_id
             WHERE i.file_name = ?1 AND b.first_hour <= ?2 AND b.last_hour >= ?2
             ORDER BY b.id DESC LIMIT 1",
            (src["file"].as_str().unwrap(), hour_index),
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(src["journal_seq"], covering_entry(&db, table, rowid));
    let e = json(
        &d,
        &[
            "explain",
            "so2",
            "--unit",
            "K2",
            "--hour",
            h["hour"].as_str().unwrap(),
        ],
    );
    assert_eq!(e["value"], h["amount"], "the hour's explanation agrees");
    assert!(e["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|i| i["source"].as_object())
        .all(|s| s["journal_seq"] == src["journal_seq"]));
}
