//! `flue import hourly` through the command line: every refusal of issue 3
//! item 1 exits 1, names the file and line (and column and field where
//! there is one) with the reason, and leaves the ledger file byte-identical
//! (DESIGN.md: "a refused command writes nothing to the ledger"). Beside
//! each refusal, the value just inside the limit is accepted, so a test
//! cannot pass by refusing everything.
//!
//! Kestrel Bend Station and all its numbers are made up: K2 is a coal boiler
//! with every quantity by CEMS; F6 is a fuel-based gas boiler with no CEMS
//! method, so hourly rows for it are refused.

use assert_cmd::Command;
use rust_decimal::Decimal;
use rust_decimal_macros::dec;
use serde_json::Value;
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};
use tempfile::TempDir;

const SITE: &str = r#"[facility]
id = "KB1"
name = "Kestrel Bend Station"
utc_offset = "-06:00"

[[units]]
id = "K2"
kind = "boiler"
fuel = "bituminous"
max_load_mw = "450"

[[units.methods]]
quantity = "heat_input"
method = "cems"

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
id = "F6"
kind = "boiler"
fuel = "natural-gas"

[[units.methods]]
quantity = "heat_input"
method = "fuel"
"#;

const HEADER: &str =
    "unit,hour,op_time,load_mw,so2_ppm_wet,nox_ppm_dry,o2_pct_dry,co2_pct_wet,flow_scfh_wet,h2o_pct";

/// Column numbers of HEADER, 1-based, as error messages print them.
const COLUMNS: [&str; 10] = [
    "unit",
    "hour",
    "op_time",
    "load_mw",
    "so2_ppm_wet",
    "nox_ppm_dry",
    "o2_pct_dry",
    "co2_pct_wet",
    "flow_scfh_wet",
    "h2o_pct",
];

/// A good K2 hour: fields in HEADER order.
const GOOD: [&str; 10] = [
    "K2",
    "2025-03-01T05:00",
    "1.00",
    "410",
    "250",
    "150",
    "5.5",
    "11.2",
    "20000000",
    "8.0",
];

fn column(name: &str) -> usize {
    COLUMNS
        .iter()
        .position(|c| *c == name)
        .expect("known column")
        + 1
}

/// GOOD at `hour` with the field `name` set to `value`.
fn row_with(hour: &str, name: &str, value: &str) -> String {
    let mut fields = GOOD.map(str::to_string);
    fields[1] = hour.to_string();
    fields[column(name) - 1] = value.to_string();
    fields.join(",")
}

/// GOOD at `hour`.
fn good(hour: &str) -> String {
    row_with(hour, "unit", "K2")
}

fn file(rows: &[String]) -> String {
    let mut s = format!("{HEADER}\n");
    for r in rows {
        s.push_str(r);
        s.push('\n');
    }
    s
}

struct Plant {
    dir: TempDir,
}

impl Plant {
    /// A ledger with the site loaded and two hours of K2 already held, so
    /// that "unchanged" is checked against a ledger with data in it.
    fn new() -> Plant {
        let plant = Plant {
            dir: tempfile::tempdir().expect("temporary directory"),
        };
        plant.ok(&["init"]);
        plant.write("site.toml", SITE);
        plant.ok(&["site", "load", "site.toml"]);
        plant.write(
            "held.csv",
            file(&[good("2025-03-01T00:00"), good("2025-03-01T01:00")]),
        );
        plant.ok(&["import", "hourly", "held.csv"]);
        plant
    }

    fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    fn write(&self, name: &str, text: impl AsRef<[u8]>) {
        std::fs::write(self.path(name), text).expect("write input file");
    }

    fn cmd(&self, args: &[&str]) -> Command {
        let mut cmd = Command::cargo_bin("flue").expect("the flue binary");
        cmd.current_dir(self.dir.path())
            .env("FLUE_NOW", "2026-01-20T09:00:00Z")
            .env("FLUE_USER", "hourly-import-test")
            .env_remove("FLUE_LEDGER")
            .args(args);
        cmd
    }

    fn ok(&self, args: &[&str]) -> String {
        let out = self.cmd(args).output().expect("run flue");
        assert!(
            out.status.success(),
            "flue {args:?} failed: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout).expect("UTF-8 stdout")
    }

    fn ledger_sha256(&self) -> String {
        sha256_of(&self.path("flue.db"))
    }

    /// Import `text` as `name`; it must exit 1, print nothing on stdout,
    /// leave the ledger byte-identical and name every one of `expected`.
    /// Returns stderr.
    fn refuse(&self, name: &str, text: impl AsRef<[u8]>, expected: &[&str]) -> String {
        self.write(name, text);
        let before = self.ledger_sha256();
        let args = ["import", "hourly", name];
        let out = self.cmd(&args).output().expect("run flue");
        let stderr = String::from_utf8(out.stderr).expect("UTF-8 stderr");
        assert_eq!(out.status.code(), Some(1), "flue {args:?}: {stderr}");
        assert!(out.stdout.is_empty(), "flue {args:?} printed to stdout");
        assert_eq!(self.ledger_sha256(), before, "{name} changed the ledger");
        assert!(
            !self.path("flue.db-journal").exists(),
            "a rollback journal was left behind"
        );
        for e in expected {
            assert!(
                stderr.contains(e),
                "expected {e:?} in the refusal of {name}, got:\n{stderr}"
            );
        }
        stderr
    }

    /// Import `text` as `name`; it must be accepted. Returns stdout.
    fn accept(&self, name: &str, text: impl AsRef<[u8]>) -> String {
        self.write(name, text);
        self.ok(&["import", "hourly", name])
    }

    /// K2's line of the 2025 annual report.
    fn k2_report(&self) -> Value {
        let out = self.ok(&["report", "annual", "--year", "2025", "--format", "json"]);
        let report: Value = serde_json::from_str(&out).expect("JSON report");
        report["units"]
            .as_array()
            .expect("units")
            .iter()
            .find(|u| u["unit"] == "K2")
            .expect("K2 in the report")
            .clone()
    }
}

fn sha256_of(path: &Path) -> String {
    Sha256::digest(std::fs::read(path).expect("read file"))
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

fn decimal(v: &Value) -> Decimal {
    match v {
        Value::String(s) => s.parse().expect("decimal string"),
        Value::Number(n) => n.to_string().parse().expect("decimal number"),
        other => panic!("expected a decimal, found {other}"),
    }
}

/// Refuse a file whose line 3 sets `name` to `bad`, naming
/// `h.csv:3:COLUMN: field NAME:` and `reason`; then accept the same file
/// with `inside` (a value just inside the limit) in that field.
fn refuse_field(name: &str, bad: &str, reason: &str, inside: Option<&str>) {
    let plant = Plant::new();
    let place = format!("h.csv:3:{}: field {name}: ", column(name));
    let text = file(&[
        good("2025-03-02T00:00"),
        row_with("2025-03-02T01:00", name, bad),
    ]);
    let stderr = plant.refuse("h.csv", text, &[&place, reason]);
    assert_eq!(stderr.lines().count(), 1, "one error only:\n{stderr}");
    if let Some(inside) = inside {
        let text = file(&[
            good("2025-03-02T00:00"),
            row_with("2025-03-02T01:00", name, inside),
        ]);
        let out = plant.accept("ok.csv", text);
        assert!(out.contains("2 new"), "{out}");
    }
}

// ---- units ----

#[test]
fn unknown_unit() {
    refuse_field("unit", "Z9", "unknown unit \"Z9\"", Some("K2"));
}

#[test]
fn unit_without_a_cems_method() {
    refuse_field("unit", "F6", "unit F6 has no cems method", None);
}

// ---- hours ----

#[test]
fn february_29_of_a_common_year() {
    // 2025 is not a leap year; 2024 is, so its February 29 is accepted.
    refuse_field(
        "hour",
        "2025-02-29T05:00",
        "not a real hour",
        Some("2024-02-29T05:00"),
    );
}

#[test]
fn hour_24() {
    refuse_field(
        "hour",
        "2025-01-01T24:00",
        "not a real hour",
        Some("2025-01-01T23:00"),
    );
}

#[test]
fn hour_not_on_the_hour() {
    refuse_field(
        "hour",
        "2025-01-01T05:30",
        "not in the form YYYY-MM-DDTHH:00",
        Some("2025-01-01T05:00"),
    );
}

#[test]
fn hour_without_t() {
    refuse_field(
        "hour",
        "2025-01-01 05:00",
        "not in the form YYYY-MM-DDTHH:00",
        None,
    );
}

// ---- operating time ----

#[test]
fn op_time_above_one_hour() {
    refuse_field(
        "op_time",
        "1.01",
        "expected an operating time from 0.00 to 1.00, found \"1.01\"",
        Some("1.00"),
    );
}

#[test]
fn op_time_negative() {
    refuse_field(
        "op_time",
        "-0.01",
        "negative values are not accepted",
        Some("0.00"),
    );
}

#[test]
fn op_time_with_three_decimals() {
    // 40 CFR 75 App. F Eq. F-3: operating time in increments of 0.01 hour.
    // A trailing zero is still exact and is accepted.
    refuse_field(
        "op_time",
        "0.255",
        "more than 2 decimal places",
        Some("0.250"),
    );
}

// ---- readings ----

#[test]
fn o2_at_20_9() {
    // App. F Eq. F-5 and F-18 divide by or multiply with 20.9 − %O2.
    refuse_field(
        "o2_pct_dry",
        "20.9",
        "O2 must be below 20.9 %",
        Some("20.89"),
    );
}

#[test]
fn o2_above_20_9() {
    refuse_field("o2_pct_dry", "21.5", "O2 must be below 20.9 %", None);
}

#[test]
fn moisture_at_100() {
    refuse_field(
        "h2o_pct",
        "100",
        "moisture must be below 100 %",
        Some("99.99"),
    );
}

#[test]
fn moisture_over_100() {
    refuse_field("h2o_pct", "100.5", "moisture must be below 100 %", None);
}

#[test]
fn moisture_negative() {
    refuse_field(
        "h2o_pct",
        "-0.5",
        "negative values are not accepted",
        Some("0"),
    );
}

#[test]
fn negative_concentration() {
    refuse_field(
        "so2_ppm_wet",
        "-5",
        "negative values are not accepted",
        Some("0"),
    );
}

#[test]
fn negative_load() {
    refuse_field(
        "load_mw",
        "-1",
        "negative values are not accepted",
        Some("0"),
    );
}

#[test]
fn negative_flow() {
    refuse_field(
        "flow_scfh_wet",
        "-20000000",
        "negative values are not accepted",
        None,
    );
}

#[test]
fn nan() {
    refuse_field("nox_ppm_dry", "NaN", "not a number", None);
}

#[test]
fn infinity() {
    refuse_field("flow_scfh_wet", "inf", "not a number", None);
}

#[test]
fn exponent() {
    refuse_field("so2_ppm_wet", "1e3", "exponents are not accepted", None);
}

#[test]
fn decimal_comma() {
    // Quoted, so it is one field, not two.
    refuse_field(
        "co2_pct_wet",
        "\"12,5\"",
        "thousands separators are not accepted",
        Some("12.5"),
    );
}

#[test]
fn both_wet_and_dry_for_one_hour() {
    let header = format!("{HEADER},so2_ppm_dry");
    let text = format!(
        "{header}\n{},\n{},240\n",
        good("2025-03-02T00:00"),
        good("2025-03-02T01:00")
    );
    Plant::new().refuse(
        "h.csv",
        text,
        &[
            "h.csv:3:11: field so2_ppm_dry: ",
            "both so2_ppm_wet and so2_ppm_dry are given for one hour",
        ],
    );
}

// ---- file shape ----

#[test]
fn wrong_field_count() {
    let short = GOOD[..9]
        .join(",")
        .replace("2025-03-01T05:00", "2025-03-02T01:00");
    Plant::new().refuse(
        "h.csv",
        file(&[good("2025-03-02T00:00"), short]),
        &["h.csv:3: expected 10 fields, found 9"],
    );
}

#[test]
fn invalid_utf8() {
    let text = [
        file(&[good("2025-03-02T00:00")]).as_bytes(),
        b"K\xff2,2025-03-02T01:00,1.00,410,250,150,5.5,11.2,20000000,8.0\n",
    ]
    .concat();
    Plant::new().refuse("h.csv", text, &["h.csv:3:1: field #1: invalid UTF-8"]);
}

#[test]
fn unknown_column() {
    let text = format!("{HEADER},so2_lb_per_hr\n{},12\n", good("2025-03-02T00:00"));
    Plant::new().refuse(
        "h.csv",
        text,
        &["h.csv:1:11: field so2_lb_per_hr: unknown column \"so2_lb_per_hr\""],
    );
}

#[test]
fn missing_required_column() {
    let header = HEADER.replace("op_time,", "");
    let row = good("2025-03-02T00:00").replace(",1.00,", ",");
    Plant::new().refuse(
        "h.csv",
        format!("{header}\n{row}\n"),
        &["h.csv:1: missing column op_time"],
    );
}

#[test]
fn a_unit_hour_twice_in_a_file_names_both_lines() {
    let text = file(&[
        good("2025-03-02T00:00"),
        good("2025-03-02T01:00"),
        row_with("2025-03-02T00:00", "so2_ppm_wet", "251"),
    ]);
    Plant::new().refuse(
        "h.csv",
        text,
        &["h.csv:4: unit K2 hour 2025-03-02T00:00 appears twice in this file, on lines 2 and 4"],
    );
}

#[test]
fn crlf_file_names_the_same_line_as_lf() {
    let lf = file(&[
        good("2025-03-02T00:00"),
        good("2025-03-02T01:00"),
        row_with("2025-03-02T02:00", "nox_ppm_dry", "15x"),
    ]);
    let crlf = lf.replace('\n', "\r\n");
    let plant = Plant::new();
    for (name, text) in [("lf.csv", lf), ("crlf.csv", crlf)] {
        plant.refuse(name, text, &[&format!("{name}:4:6: field nox_ppm_dry: ")]);
    }
}

#[test]
fn twenty_five_bad_rows_show_twenty_and_five_more() {
    let rows: Vec<String> = (0..25)
        .map(|h| row_with(&format!("2025-03-02T{h:02}:00"), "op_time", "2"))
        .map(|r| r.replace("2025-03-02T24:00", "2025-03-03T00:00"))
        .collect();
    let plant = Plant::new();
    let stderr = plant.refuse(
        "h.csv",
        file(&rows),
        &[
            "h.csv:2:3: field op_time",
            "h.csv:21:3: field op_time",
            "and 5 more errors",
        ],
    );
    assert!(!stderr.contains("h.csv:22:"), "{stderr}");
}

/// The count of errors not shown includes those past what the import keeps
/// in memory.
#[test]
fn many_bad_rows_count_every_error_not_shown() {
    let rows: Vec<String> = (0..130)
        .map(|i| {
            let hour = format!("2025-03-{:02}T{:02}:00", 2 + i / 24, i % 24);
            row_with(&hour, "op_time", "2")
        })
        .collect();
    Plant::new().refuse("h.csv", file(&rows), &["and 110 more errors"]);
}

// ---- rows already held ----

#[test]
fn identical_reimport_is_a_no_op() {
    let plant = Plant::new();
    let before = plant.ledger_sha256();
    let text = file(&[good("2025-03-01T00:00"), good("2025-03-01T01:00")]);
    let out = plant.accept("again.csv", text);
    assert!(out.contains("nothing new"), "{out}");
    assert_eq!(plant.ledger_sha256(), before, "a no-op changed the ledger");
}

#[test]
fn a_held_hour_with_other_values_needs_correct_and_the_report_uses_the_correction() {
    let plant = Plant::new();
    // SO2 by 40 CFR 75 App. F Eq. F-1, Eh = K · Ch · Qh with
    // K = 1.660e-7 (lb/scf)/ppm, times the operating time (the Eh · th of Eq. F-3).
    let k = dec!(0.0000001660);
    let so2_tons = |ppm_hour_2: Decimal| {
        (k * dec!(250) * dec!(20000000) + k * ppm_hour_2 * dec!(20000000)) / dec!(2000)
    };
    let held = decimal(&plant.k2_report()["so2_tons"]);
    assert_eq!(held, so2_tons(dec!(250)));

    let fix = file(&[row_with("2025-03-01T01:00", "so2_ppm_wet", "262.5")]);
    plant.refuse(
        "fix.csv",
        &fix,
        &[
            "fix.csv:2: unit K2 hour 2025-03-01T01:00 is already held with other values",
            "field so2_ppm_wet: held 250, here 262.5",
            "--correct REASON",
        ],
    );

    plant.write("fix.csv", &fix);
    let out = plant.ok(&[
        "import",
        "hourly",
        "fix.csv",
        "--correct",
        "SO2 analyzer drift found at the daily calibration",
    ]);
    assert!(out.contains("1 corrected"), "{out}");
    let corrected = decimal(&plant.k2_report()["so2_tons"]);
    assert_eq!(corrected, so2_tons(dec!(262.5)));
    assert_ne!(corrected, held);

    // The correction is held now: importing it again is a no-op.
    let out = plant.ok(&["import", "hourly", "fix.csv"]);
    assert!(out.contains("nothing new"), "{out}");
}

// ---- storage in blocks (schema/0005_hourly_blocks.sql) ----

/// `n` K2 hours from 2025-04-01T00:00 with SO2 varying by hour, as rows.
fn varied_hours(n: usize) -> Vec<String> {
    let start = chrono::NaiveDate::from_ymd_opt(2025, 4, 1)
        .unwrap()
        .and_hms_opt(0, 0, 0)
        .unwrap();
    (0..n)
        .map(|i| {
            let hour = (start + chrono::Duration::hours(i as i64))
                .format("%Y-%m-%dT%H:00")
                .to_string();
            row_with(
                &hour,
                "so2_ppm_wet",
                &format!("{}.5", 200 + (i * 7919) % 300),
            )
        })
        .collect()
}

#[test]
fn rows_in_any_order_give_the_totals_of_sorted_rows() {
    // 1,300 hours fill three blocks of 512. Reversed, and interleaved in a
    // stride, every block's hours overlap others; the hours in force must
    // still be each hour once, so the report is the same.
    let rows = varied_hours(1300);
    let sorted = Plant::new();
    sorted.accept("sorted.csv", file(&rows));
    let want = sorted.k2_report();
    assert!(decimal(&want["so2_tons"]) > dec!(0));

    let reversed: Vec<String> = rows.iter().rev().cloned().collect();
    let plant = Plant::new();
    plant.accept("reversed.csv", file(&reversed));
    assert_eq!(plant.k2_report(), want, "reversed file");

    let strided: Vec<String> = (0..7)
        .flat_map(|k| rows.iter().skip(k).step_by(7).cloned())
        .collect();
    assert_eq!(strided.len(), rows.len());
    let plant = Plant::new();
    let out = plant.accept("strided.csv", file(&strided));
    assert!(out.contains("1300 new"), "{out}");
    assert_eq!(plant.k2_report(), want, "strided file");

    // The same rows again in yet another order are all held already.
    let out = plant.accept("again.csv", file(&reversed));
    assert!(out.contains("nothing new"), "{out}");
}

#[test]
fn a_correction_inside_a_block_supersedes_one_hour_and_history_keeps_both() {
    let rows = varied_hours(1300);
    let plant = Plant::new();
    plant.accept("year.csv", file(&rows));
    let before = decimal(&plant.k2_report()["so2_tons"]);
    // Hour 700 sits in the second block; its SO2 was 200 + (700·7919 mod 300) + 0.5.
    let old_ppm = Decimal::from(200 + (700 * 7919) % 300) + dec!(0.5);
    let hour = "2025-04-30T04:00"; // 2025-04-01T00:00 + 700 h
    let fix = file(&[row_with(hour, "so2_ppm_wet", "999")]);
    plant.write("fix.csv", &fix);
    let out = plant.ok(&["import", "hourly", "fix.csv", "--correct", "analyzer fault"]);
    assert!(out.contains("1 corrected"), "{out}");
    // Eq. F-1 with op_time 1 and GOOD's flow of 20,000,000 scfh: the total moves
    // by K · Δppm · Q / 2000 tons exactly.
    let k = dec!(0.0000001660);
    let after = decimal(&plant.k2_report()["so2_tons"]);
    assert_eq!(
        after - before,
        k * (dec!(999) - old_ppm) * dec!(20000000) / dec!(2000)
    );

    let history = plant.ok(&[
        "history", "hour", "--unit", "K2", "--hour", hour, "--format", "json",
    ]);
    let h: Value = serde_json::from_str(&history).expect("JSON history");
    let versions = h["versions"].as_array().expect("versions");
    assert_eq!(versions.len(), 2, "{history}");
    assert_eq!(versions[0]["in_force"], false, "{history}");
    assert_eq!(versions[1]["in_force"], true, "{history}");
    assert_eq!(versions[1]["supersedes"]["version"], 1, "{history}");
    assert_eq!(
        versions[1]["supersedes"]["reason"], "analyzer fault",
        "{history}"
    );
    assert_eq!(versions[0]["superseded_by"], 2, "{history}");
    assert_eq!(versions[0]["source"]["line"], 702, "{history}");
    assert_eq!(versions[0]["source"]["file"], "year.csv", "{history}");
    assert_eq!(versions[1]["source"]["line"], 2, "{history}");
}
