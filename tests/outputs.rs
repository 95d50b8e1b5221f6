//! The command line as people expect it, on the demo plant: CSV outputs
//! with one header and cells that agree with the JSON, `--quiet`, shell
//! completions, the manual page, no colour codes, and an example in every
//! command's help.

use assert_cmd::Command;
use chrono::Datelike;
use clap::CommandFactory;
use flueledger::cli::Cli;
use flueledger::report::csv::{ANNUAL_COLUMNS, RECONCILE_COLUMNS};
use rust_decimal::Decimal;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

/// The demo ledger, built once for this test binary.
fn demo() -> &'static Path {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let dir =
            Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("outputs-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        let out = flue_in(&dir, &["--quiet", "demo", "--dir", "plant"]);
        assert!(out.status.success());
        // --quiet: the demo's notes are gone; its report is still printed.
        assert_eq!(String::from_utf8_lossy(&out.stderr), "");
        assert!(String::from_utf8_lossy(&out.stdout).contains("Marrow Creek Station"));
        dir
    })
}

fn flue_in(dir: &Path, args: &[&str]) -> std::process::Output {
    Command::cargo_bin("flue")
        .unwrap()
        .current_dir(dir)
        .env("FLUE_NOW", "2026-03-02T09:00:00Z")
        .env("FLUE_USER", "test")
        .env_remove("FLUE_LEDGER")
        .args(args)
        .output()
        .unwrap()
}

/// `flue --ledger <demo> ARGS`, which must succeed; its stdout.
fn flue(args: &[&str]) -> String {
    let dir = demo();
    let ledger = dir.join("plant/flue.db");
    let mut all = vec!["--ledger", ledger.to_str().unwrap()];
    all.extend_from_slice(args);
    let out = flue_in(dir, &all);
    assert!(
        out.status.success(),
        "flue {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// RFC 4180 fields of one line (no line breaks inside cells here).
fn fields(line: &str) -> Vec<String> {
    let mut out = vec![String::new()];
    let mut quoted = false;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match (c, quoted) {
            ('"', true) if chars.peek() == Some(&'"') => {
                chars.next();
                out.last_mut().unwrap().push('"');
            }
            ('"', _) => quoted = !quoted,
            (',', false) => out.push(String::new()),
            (c, _) => out.last_mut().unwrap().push(c),
        }
    }
    out
}

/// The CSV as rows of (column name → cell), checking every row's width.
fn table(csv: &str, header: &str) -> Vec<Vec<(String, String)>> {
    let mut lines = csv.lines();
    assert_eq!(lines.next(), Some(header));
    let names = fields(header);
    lines
        .map(|l| {
            let cells = fields(l);
            assert_eq!(cells.len(), names.len(), "row width: {l}");
            names.iter().cloned().zip(cells).collect()
        })
        .collect()
}

fn cell<'a>(row: &'a [(String, String)], name: &str) -> &'a str {
    &row.iter().find(|(n, _)| n == name).unwrap().1
}

fn same(csv_cell: &str, json: &Value) {
    match json {
        Value::Null => assert_eq!(csv_cell, ""),
        Value::Bool(b) => assert_eq!(csv_cell, b.to_string()),
        Value::Number(n) => assert_eq!(
            Decimal::from_str_exact(csv_cell).unwrap(),
            Decimal::from_str_exact(&n.to_string()).unwrap()
        ),
        Value::String(s) => match Decimal::from_str_exact(s) {
            Ok(d) => assert_eq!(Decimal::from_str_exact(csv_cell).unwrap(), d),
            Err(_) => assert_eq!(csv_cell, s),
        },
        other => panic!("not a scalar: {other}"),
    }
}

const PROGRAM_FIELDS: &[&str] = &[
    "program",
    "account",
    "true_up_date",
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
];

/// A program row and its vintage rows agree with a reconcile JSON object.
fn program_rows_match(rows: &[&Vec<(String, String)>], p: &Value) {
    let summary: Vec<_> = rows
        .iter()
        .filter(|r| cell(r, "scope") == "program")
        .collect();
    assert_eq!(summary.len(), 1);
    for f in PROGRAM_FIELDS {
        same(cell(summary[0], f), &p[*f]);
    }
    let vintages: Vec<_> = rows
        .iter()
        .filter(|r| cell(r, "scope") == "program-vintage")
        .collect();
    let json = p["by_vintage"].as_array().unwrap();
    assert_eq!(vintages.len(), json.len());
    for (row, v) in vintages.iter().zip(json) {
        for f in ["vintage", "held", "deduct"] {
            same(cell(row, f), &v[f]);
        }
    }
}

#[test]
fn reconcile_csv_has_one_header_and_agrees_with_the_json() {
    for program in ["SO2-ANNUAL", "NOX-OZONE"] {
        let args = [
            "allowances",
            "reconcile",
            "--program",
            program,
            "--year",
            "2025",
        ];
        let json: Value =
            serde_json::from_str(&flue(&[&args[..], &["--format", "json"]].concat())).unwrap();
        let csv = flue(&[&args[..], &["--format", "csv"]].concat());
        let rows = table(&csv, RECONCILE_COLUMNS);
        let refs: Vec<_> = rows.iter().collect();
        program_rows_match(&refs, &json);
        let note = rows.last().unwrap();
        assert_eq!(cell(note, "scope"), "note");
        assert!(cell(note, "note").contains("permit"));
        for r in &rows[..rows.len() - 1] {
            assert_eq!(cell(r, "year"), "2025");
        }
    }
}

#[test]
fn annual_csv_carries_each_programs_reconciliation() {
    let json: Value = serde_json::from_str(&flue(&[
        "report", "annual", "--year", "2025", "--format", "json",
    ]))
    .unwrap();
    let csv = flue(&["report", "annual", "--year", "2025", "--format", "csv"]);
    let rows = table(&csv, ANNUAL_COLUMNS);
    let programs = json["programs"].as_array().unwrap();
    assert_eq!(programs.len(), 2);
    for p in programs {
        let id = p["program"].as_str().unwrap();
        let mine: Vec<_> = rows.iter().filter(|r| cell(r, "program") == id).collect();
        program_rows_match(&mine, p);
        for r in &mine {
            assert_eq!(cell(r, "facility"), "MC1");
            assert_eq!(cell(r, "so2_tons"), "");
        }
    }
    // The emission rows are as before: a unit row leaves the program cells empty.
    let k1 = rows
        .iter()
        .find(|r| cell(r, "unit") == "K1" && cell(r, "period") == "year")
        .unwrap();
    same(cell(k1, "so2_tons"), &json["units"][0]["so2_tons"]);
    assert_eq!(cell(k1, "program"), "");
    assert_eq!(cell(rows.last().unwrap(), "scope"), "note");
}

#[test]
fn quiet_silences_wrote_file_and_not_errors() {
    let dir = demo();
    let ledger = dir.join("plant/flue.db");
    let ledger = ledger.to_str().unwrap();
    let args = |out: &'static str| {
        vec![
            "--ledger", ledger, "report", "annual", "--year", "2025", "--format", "html", "--out",
            out, "--force",
        ]
    };
    let loud = flue_in(dir, &args("loud.html"));
    assert!(loud.status.success());
    assert_eq!(String::from_utf8_lossy(&loud.stderr), "wrote loud.html\n");
    let quiet = flue_in(dir, &[&["--quiet"][..], &args("quiet.html")].concat());
    assert!(quiet.status.success());
    assert_eq!(String::from_utf8_lossy(&quiet.stderr), "");
    assert_eq!(
        std::fs::read(dir.join("loud.html")).unwrap(),
        std::fs::read(dir.join("quiet.html")).unwrap()
    );
    let failed = flue_in(
        dir,
        &[
            "--quiet",
            "--ledger",
            ledger,
            "report",
            "annual",
            "--year",
            "2025",
            "--facility",
            "NOPE",
        ],
    );
    assert_eq!(failed.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&failed.stderr).contains("no facility NOPE"));
}

#[test]
fn no_output_carries_colour_codes() {
    for no_color in [false, true] {
        for args in [
            vec!["report", "annual", "--year", "2025"],
            vec![
                "allowances",
                "reconcile",
                "--program",
                "NOX-OZONE",
                "--year",
                "2025",
            ],
            vec!["allowances", "balance"],
            vec!["--help"],
            vec!["report", "annual", "--help"],
        ] {
            let dir = demo();
            let ledger = dir.join("plant/flue.db");
            let mut cmd = Command::cargo_bin("flue").unwrap();
            cmd.current_dir(dir)
                .arg("--ledger")
                .arg(&ledger)
                .args(&args);
            if no_color {
                cmd.env("NO_COLOR", "1");
            } else {
                cmd.env_remove("NO_COLOR");
            }
            let out = cmd.output().unwrap();
            assert!(out.status.success(), "{args:?}");
            assert!(
                !out.stdout.contains(&0x1b),
                "{args:?}: escape code on stdout"
            );
            assert!(
                !out.stderr.contains(&0x1b),
                "{args:?}: escape code on stderr"
            );
        }
    }
}

#[test]
fn completions_and_manpage_describe_the_commands() {
    let dir = demo();
    for (shell, mark) in [
        ("bash", "complete"),
        ("zsh", "#compdef flue"),
        ("fish", "complete -c flue"),
    ] {
        let out = flue_in(dir, &["completions", shell]);
        assert!(out.status.success());
        let script = String::from_utf8(out.stdout).unwrap();
        assert!(script.contains(mark), "{shell}");
        for sub in ["report", "allowances", "reconcile", "completions"] {
            assert!(script.contains(sub), "{shell}: {sub}");
        }
    }
    let bad = flue_in(dir, &["completions", "cmd.exe"]);
    assert_eq!(bad.status.code(), Some(2));
    let man = flue_in(dir, &["manpage"]);
    assert!(man.status.success());
    let page = String::from_utf8(man.stdout).unwrap();
    assert!(
        page.starts_with(".ie") || page.contains(".TH flue"),
        "{}",
        &page[..200]
    );
    assert!(page.contains(".TH flue"));
    assert!(page.contains("report"));
    assert!(page.contains("\\-\\-quiet") || page.contains("--quiet"));
}

#[test]
fn every_command_help_shows_an_example() {
    fn walk(cmd: &clap::Command, path: &str, missing: &mut Vec<String>) {
        let here = format!("{path} {}", cmd.get_name());
        let help = cmd
            .get_after_help()
            .or(cmd.get_after_long_help())
            .map(|h| h.to_string())
            .unwrap_or_default();
        if !help.contains("\n  flue ") {
            missing.push(here.clone());
        }
        for sub in cmd.get_subcommands() {
            walk(sub, &here, missing);
        }
    }
    let mut missing = Vec::new();
    let cli = Cli::command();
    walk(&cli, "", &mut missing);
    assert!(
        missing.is_empty(),
        "no example in the help of: {missing:#?}"
    );
}

#[test]
fn daily_profile_marks_the_demo_outages_on_their_days() {
    let json: Value = serde_json::from_str(&flue(&[
        "report", "annual", "--year", "2025", "--format", "json",
    ]))
    .unwrap();
    let k2 = json["units"]
        .as_array()
        .unwrap()
        .iter()
        .find(|u| u["unit"] == "K2")
        .unwrap();
    let p = &k2["daily_profile"];
    assert_eq!(p["first_day"], "2025-01-01");
    let counts: Vec<u64> = p["substituted_hours"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_u64().unwrap())
        .collect();
    let rates = p["so2_lb_per_mmbtu"].as_array().unwrap();
    assert_eq!((counts.len(), rates.len()), (365, 365));
    let day = |md: &str| {
        let d = chrono::NaiveDate::parse_from_str(&format!("2025-{md}"), "%Y-%m-%d").unwrap();
        d.ordinal0() as usize
    };
    // The monitor outages of src/cli/demo_hourly.rs, hours per day: SO2
    // Jan 12 06-09, Feb 3 10-14, Jun 17 00 to Jun 18 05; flow Aug 8 13-22,
    // Dec 5 00 to Dec 6 11; O2 Oct 2 01-04 (the NOx rate is substituted).
    // The moisture gap of Nov 20 substitutes none of SO2, flow and NOx.
    let expected = [
        ("01-12", 4),
        ("02-03", 5),
        ("06-17", 24),
        ("06-18", 6),
        ("08-08", 10),
        ("10-02", 4),
        ("12-05", 24),
        ("12-06", 12),
    ];
    for (d, c) in counts.iter().enumerate() {
        let want = expected
            .iter()
            .find(|(md, _)| day(md) == d)
            .map_or(0, |(_, c)| *c);
        assert_eq!(*c, want, "day {d}");
    }
    // The demo's outages do not overlap, so the days add up to the year's counts.
    let s = &k2["substituted_hours"];
    let year: u64 = ["so2", "flow", "nox"]
        .iter()
        .map(|p| s[*p].as_u64().unwrap())
        .sum();
    assert_eq!(counts.iter().sum::<u64>(), year);
    // No heat input during the planned outage (Mar 10 to 23): no rate.
    for (d, r) in rates.iter().enumerate() {
        assert_eq!(
            r.is_null(),
            (day("03-10")..=day("03-23")).contains(&d),
            "day {d}"
        );
    }
    // Each day's rate lies near the year's heat-input-weighted SO2 rate.
    let annual = Decimal::from_str_exact(k2["so2_tons"].as_str().unwrap()).unwrap()
        * Decimal::from(2000)
        / Decimal::from_str_exact(k2["heat_input_mmbtu"].as_str().unwrap()).unwrap();
    for r in rates.iter().filter_map(|r| r.as_str()) {
        let r = Decimal::from_str_exact(r).unwrap();
        assert!(
            r > annual / Decimal::TWO && r < annual * Decimal::TWO,
            "{r} vs {annual}"
        );
    }
}
