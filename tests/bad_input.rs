//! Bad input through the command line: every refusal exits 1, names the
//! file and line (and column and field where there is one) with the reason,
//! and leaves the ledger file byte-identical (DESIGN.md: "a refused command
//! writes nothing to the ledger").
//!
//! Each test builds a small invented plant (Wren Hollow Mill) in a temporary
//! directory, hashes the ledger, runs the refused command, and hashes again.

use assert_cmd::Command;
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};
use tempfile::TempDir;

/// Print a `faults: ...` line and, where `FLUE_FAULTS_LOG` names a file,
/// append it there too: .ci/run collects them into one summary.
macro_rules! counts {
    ($($arg:tt)*) => {{
        let line = format!($($arg)*);
        println!("{line}");
        if let Some(log) = std::env::var_os("FLUE_FAULTS_LOG") {
            use std::io::Write;
            if let Ok(mut f) = std::fs::OpenOptions::new().create(true).append(true).open(log) {
                let _ = writeln!(f, "{line}");
            }
        }
    }};
}

const SITE: &str = r#"[facility]
id = "WH1"
name = "Wren Hollow Mill"
utc_offset = "-05:00"

[[units]]
id = "B2"
kind = "boiler"
fuel = "bituminous"

[[units.methods]]
quantity = "heat_input"
method = "fuel"

[[units.methods]]
quantity = "so2"
method = "fuel-sulfur"

[[units.methods]]
quantity = "co2"
method = "fuel-carbon"

[[units]]
id = "G2"
kind = "combustion-turbine"
fuel = "natural-gas"

[[units.methods]]
quantity = "heat_input"
method = "fuel"

[[units.methods]]
quantity = "so2"
method = "default-rate"
rate_lb_per_mmbtu = "0.0006"

[[units]]
id = "R3"
kind = "boiler"
fuel = "residual-oil"

[[units.methods]]
quantity = "heat_input"
method = "fuel"

[[units.methods]]
quantity = "so2"
method = "fuel-sulfur"

[[accounts]]
id = "WH1-MAIN"
kind = "compliance"

[[programs]]
id = "SO2-YEAR"
pollutant = "so2"
season = "annual"
account = "WH1-MAIN"
penalty_per_ton = "3500.00"
true_up = "03-01"
"#;

const ANALYSES_HEADER: &str = "sample,fuel,sampled_on,sulfur_pct,sulfur_gr_per_100scf,gcv,gcv_uom,carbon_pct,hydrogen_pct,nitrogen_pct,oxygen_pct,density_lb_per_gal";

/// Held samples: coal, gas (GCV per scf), and residual oil without sulfur.
const ANALYSES: &str = "\
sample,fuel,sampled_on,sulfur_pct,sulfur_gr_per_100scf,gcv,gcv_uom,carbon_pct,hydrogen_pct,nitrogen_pct,oxygen_pct,density_lb_per_gal
WB-2501,bituminous,2025-01-06,1.64,,12480,btu/lb,71.2,,,,
WG-2501,natural-gas,2025-01-08,,0.18,1028,btu/scf,,,,,
WR-2501,residual-oil,2025-01-09,,,150100,btu/gal,86.9,,,,8.21
";

const FUEL_HEADER: &str = "unit,start,end,fuel,quantity,uom,sample";

/// A ledger with the site file and the analyses loaded.
struct Plant {
    dir: TempDir,
}

impl Plant {
    fn new() -> Plant {
        let plant = Plant::empty();
        plant.write("site.toml", SITE);
        plant.write("analyses.csv", ANALYSES);
        plant.ok(&["site", "load", "site.toml"]);
        plant.ok(&["import", "analyses", "analyses.csv"]);
        plant
    }

    /// A ledger with nothing loaded.
    fn empty() -> Plant {
        let plant = Plant {
            dir: tempfile::tempdir().expect("temporary directory"),
        };
        plant.ok(&["init"]);
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
            .env("FLUE_USER", "bad-input-test")
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

    /// Run a command that must be refused: exit 1, nothing on stdout, the
    /// ledger (flue.db) byte-identical. Returns stderr.
    fn refused(&self, args: &[&str]) -> String {
        self.refused_with_ledger("flue.db", args)
    }

    /// As `refused`, for a command on the ledger file `ledger`.
    fn refused_with_ledger(&self, ledger: &str, args: &[&str]) -> String {
        let before = sha256_of(&self.path(ledger));
        let out = self
            .cmd(&[&["--ledger", ledger], args].concat())
            .output()
            .expect("run flue");
        let stderr = String::from_utf8(out.stderr).expect("UTF-8 stderr");
        assert_eq!(out.status.code(), Some(1), "flue {args:?}: {stderr}");
        assert!(out.stdout.is_empty(), "flue {args:?} printed to stdout");
        assert_eq!(
            sha256_of(&self.path(ledger)),
            before,
            "flue {args:?} changed the ledger"
        );
        assert!(
            !self.path(&format!("{ledger}-journal")).exists(),
            "a rollback journal was left behind"
        );
        stderr
    }

    /// Import `text` as `name` with `kind` (analyses or fuel); it must be
    /// refused with every one of `expected` in its message.
    fn refuse_import(&self, kind: &str, name: &str, text: impl AsRef<[u8]>, expected: &[&str]) {
        self.write(name, text);
        let stderr = self.refused(&["import", kind, name]);
        for e in expected {
            assert!(
                stderr.contains(e),
                "expected {e:?} in the refusal of {name}, got:\n{stderr}"
            );
        }
    }

    /// Load `text` as a site file; it must be refused naming `expected`.
    fn refuse_site(&self, text: &str, expected: &[&str]) {
        self.write("bad-site.toml", text);
        let stderr = self.refused(&["site", "load", "bad-site.toml"]);
        for e in expected {
            assert!(
                stderr.contains(e),
                "expected {e:?} in the refusal of the site file, got:\n{stderr}"
            );
        }
    }
}

fn sha256_of(path: &Path) -> String {
    let bytes = std::fs::read(path).expect("read file");
    Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

fn fuel(rows: &[&str]) -> String {
    let mut s = format!("{FUEL_HEADER}\n");
    for r in rows {
        s.push_str(r);
        s.push('\n');
    }
    s
}

fn analyses(rows: &[&str]) -> String {
    let mut s = format!("{ANALYSES_HEADER}\n");
    for r in rows {
        s.push_str(r);
        s.push('\n');
    }
    s
}

const GOOD_COAL: &str = "B2,2025-01-01,2025-01-31,bituminous,8420,ton,WB-2501";

// ---- regressions ----

/// Every refused row was printed twice: `main` prints the error chain, and
/// the row errors were both the message and the source of the import error.
#[test]
fn a_refusal_names_each_bad_row_once() {
    let plant = Plant::new();
    plant.write(
        "fuel.csv",
        fuel(&["B2,2025-01-01,2025-01-31,bituminous,abc,ton,WB-2501"]),
    );
    let stderr = plant.refused(&["import", "fuel", "fuel.csv"]);
    assert_eq!(stderr.matches("fuel.csv:2:5").count(), 1, "{stderr}");
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
}

/// The same, for allowance files: their parse error was a source of the
/// import error as well as its message.
#[test]
fn an_allowance_refusal_names_each_bad_row_once() {
    let plant = Plant::new();
    plant.write(
        "allowances.csv",
        "id,date,kind,program,vintage,quantity,from,to,price,note\n\
         WH-A25,2025-03-14,allocation,SO2-YEAR,2025,-5,,WH1-MAIN,,\n",
    );
    let stderr = plant.refused(&["import", "allowances", "allowances.csv"]);
    assert_eq!(stderr.matches("allowances.csv:2:6").count(), 1, "{stderr}");
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
}

// ---- CSV structure ----

#[test]
fn unknown_column() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        format!("{FUEL_HEADER},moisture_pct\n{GOOD_COAL},7.5\n"),
        &[
            "fuel.csv:1:8: field moisture_pct: unknown column \"moisture_pct\"",
            "expected columns: unit,start,end,fuel,quantity,uom,sample",
        ],
    );
}

#[test]
fn missing_column() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        "unit,start,end,fuel,quantity,uom\nB2,2025-01-01,2025-01-31,bituminous,8420,ton\n",
        &["fuel.csv:1: missing column sample"],
    );
}

#[test]
fn duplicated_column() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        format!("{FUEL_HEADER},unit\n{GOOD_COAL},B2\n"),
        &["fuel.csv:1:8: field unit: column named twice"],
    );
}

#[test]
fn wrong_field_count() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&[GOOD_COAL, "B2,2025-02-01,2025-02-28,bituminous,7915.5,ton"]),
        &["fuel.csv:3: expected 7 fields, found 6"],
    );
}

#[test]
fn unclosed_quote_names_the_line_it_opens_on() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&[
            GOOD_COAL,
            "B2,2025-02-01,2025-02-28,bituminous,\"7915.5,ton,WB-2501",
            "B2,2025-03-01,2025-03-31,bituminous,8000,ton,WB-2501",
        ]),
        &["fuel.csv:3: unclosed quote"],
    );
}

#[test]
fn empty_file() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        "",
        &["fuel.csv:1: empty file: expected a header row"],
    );
}

#[test]
fn header_only() {
    Plant::new().refuse_import(
        "analyses",
        "analyses-2.csv",
        format!("{ANALYSES_HEADER}\n"),
        &["analyses-2.csv:1: no data rows after the header"],
    );
}

#[test]
fn a_directory_given_as_the_file() {
    let plant = Plant::new();
    std::fs::create_dir(plant.path("fuel.csv")).unwrap();
    let stderr = plant.refused(&["import", "fuel", "fuel.csv"]);
    assert!(stderr.contains("fuel.csv: not a regular file"), "{stderr}");
}

#[test]
fn a_missing_file() {
    let plant = Plant::new();
    let stderr = plant.refused(&["import", "fuel", "no-such.csv"]);
    assert!(stderr.contains("no-such.csv: cannot read"), "{stderr}");
    let stderr = plant.refused(&["site", "load", "no-such.toml"]);
    assert!(stderr.contains("no-such.toml: cannot read"), "{stderr}");
}

#[test]
fn invalid_utf8_names_line_and_column() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        [
            format!("{FUEL_HEADER}\n{GOOD_COAL}\n").as_bytes(),
            b"B\xff2,2025-02-01,2025-02-28,bituminous,7915.5,ton,WB-2501\n",
        ]
        .concat(),
        &["fuel.csv:3:1: field #1: invalid UTF-8"],
    );
}

#[test]
fn crlf_file_names_the_same_line_as_lf() {
    let rows = [
        GOOD_COAL,
        "B2,2025-02-01,2025-02-28,bituminous,7915.5,ton,WB-2501",
        "B2,2025-03-01,2025-03-31,bituminous,80x0,ton,WB-2501",
    ];
    let lf = fuel(&rows);
    let crlf = lf.replace('\n', "\r\n");
    let plant = Plant::new();
    for (name, text) in [("lf.csv", lf), ("crlf.csv", crlf)] {
        plant.refuse_import(
            "fuel",
            name,
            text,
            &[&format!("{name}:4:5: field quantity: ")],
        );
    }
}

#[test]
fn bom_is_not_part_of_the_first_column_name() {
    // The header is read past its byte-order mark, so the refusal is of row
    // 2's quantity, not of an unknown column "\u{feff}unit".
    let text = format!(
        "\u{feff}{}",
        fuel(&["B2,2025-01-01,2025-01-31,bituminous,-3,ton,WB-2501"])
    );
    Plant::new().refuse_import(
        "fuel",
        "bom.csv",
        text,
        &[
            "bom.csv:2:5: field quantity: ",
            "negative values are not accepted",
        ],
    );
}

#[test]
fn twenty_five_bad_rows_show_twenty_and_five_more() {
    let rows: Vec<String> = (1..=25)
        .map(|d| format!("B2,2025-01-{d:02},2025-01-{d:02},bituminous,x{d},ton,WB-2501"))
        .collect();
    let rows: Vec<&str> = rows.iter().map(String::as_str).collect();
    let plant = Plant::new();
    plant.write("fuel.csv", fuel(&rows));
    let stderr = plant.refused(&["import", "fuel", "fuel.csv"]);
    assert!(stderr.contains("fuel.csv:2:5: field quantity"), "{stderr}");
    assert!(stderr.contains("fuel.csv:21:5: field quantity"), "{stderr}");
    assert!(!stderr.contains("fuel.csv:22:"), "{stderr}");
    assert!(stderr.contains("and 5 more errors"), "{stderr}");
}

// ---- field values ----

/// A fuel file whose one row has `quantity` = `value`.
fn quantity_row(value: &str) -> String {
    fuel(&[&format!(
        "B2,2025-01-01,2025-01-31,bituminous,{value},ton,WB-2501"
    )])
}

#[test]
fn bad_numbers_are_refused_each_with_its_reason() {
    let plant = Plant::new();
    for (value, reason) in [
        ("\"12,5\"", "thousands separators are not accepted"),
        ("1e3", "exponents are not accepted"),
        ("abc", "not a number"),
        ("NaN", "not a number"),
        ("inf", "not a number"),
        ("-inf", "not a number"),
        ("-12", "negative values are not accepted"),
    ] {
        plant.refuse_import(
            "fuel",
            "fuel.csv",
            quantity_row(value),
            &["fuel.csv:2:5: field quantity: ", reason],
        );
    }
}

#[test]
fn nan_and_negative_in_an_analysis() {
    let plant = Plant::new();
    plant.refuse_import(
        "analyses",
        "lab.csv",
        analyses(&["WB-2502,bituminous,2025-02-04,NaN,,12350,btu/lb,70.6,,,,"]),
        &["lab.csv:2:4: field sulfur_pct: ", "not a number"],
    );
    plant.refuse_import(
        "analyses",
        "lab.csv",
        analyses(&["WB-2502,bituminous,2025-02-04,1.7,,-12350,btu/lb,70.6,,,,"]),
        &[
            "lab.csv:2:6: field gcv: ",
            "negative values are not accepted",
        ],
    );
    plant.refuse_import(
        "analyses",
        "lab.csv",
        analyses(&["WB-2502,bituminous,2025-02-04,170,,12350,btu/lb,70.6,,,,"]),
        &["lab.csv:2:4: field sulfur_pct: expected a decimal from 0 to 100"],
    );
}

#[test]
fn unknown_unit_of_measure() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["B2,2025-01-01,2025-01-31,bituminous,8420,tonne,WB-2501"]),
        &["fuel.csv:2:6: field uom: expected a fuel unit, found \"tonne\""],
    );
}

#[test]
fn unknown_fuel() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["B2,2025-01-01,2025-01-31,peat,8420,ton,WB-2501"]),
        &["fuel.csv:2:4: field fuel: expected a fuel, found \"peat\""],
    );
}

#[test]
fn unknown_unit() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["B9,2025-01-01,2025-01-31,bituminous,8420,ton,WB-2501"]),
        &["fuel.csv:2:1: field unit: unknown unit \"B9\""],
    );
}

#[test]
fn unknown_sample() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["B2,2025-01-01,2025-01-31,bituminous,8420,ton,WB-2599"]),
        &["fuel.csv:2:7: field sample: unknown sample \"WB-2599\""],
    );
}

#[test]
fn sample_of_another_fuel() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["B2,2025-01-01,2025-01-31,bituminous,8420,ton,WG-2501"]),
        &["fuel.csv:2: sample WG-2501 is an analysis of natural-gas, not of bituminous"],
    );
}

#[test]
fn record_across_two_months() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["B2,2025-01-20,2025-02-05,bituminous,8420,ton,WB-2501"]),
        &["fuel.csv:2:3: field end: ", "across two months"],
    );
}

#[test]
fn end_before_start() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["B2,2025-01-20,2025-01-05,bituminous,8420,ton,WB-2501"]),
        &["fuel.csv:2:3: field end: 2025-01-05 is before start 2025-01-20"],
    );
}

#[test]
fn impossible_date() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["B2,2025-02-01,2025-02-29,bituminous,8420,ton,WB-2501"]),
        &["fuel.csv:2:3: field end: expected a date YYYY-MM-DD, found \"2025-02-29\" (not a calendar date)"],
    );
}

#[test]
fn duplicate_key_within_a_file_names_both_lines() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&[
            GOOD_COAL,
            "G2,2025-01-01,2025-01-31,natural-gas,41.2,mmscf,WG-2501",
            "B2,2025-01-01,2025-01-31,bituminous,8421,ton,WB-2501",
        ]),
        &["fuel.csv:4: unit B2 bituminous from 2025-01-01 to 2025-01-31 appears twice in this file, on lines 2 and 4"],
    );
}

#[test]
fn duplicate_sample_within_an_analyses_file() {
    Plant::new().refuse_import(
        "analyses",
        "lab.csv",
        analyses(&[
            "WB-2502,bituminous,2025-02-04,1.71,,12350,btu/lb,70.6,,,,",
            "WB-2502,bituminous,2025-02-04,1.72,,12350,btu/lb,70.6,,,,",
        ]),
        &["lab.csv:3: sample WB-2502 appears twice in this file, on lines 2 and 3"],
    );
}

#[test]
fn gcv_per_scf_for_a_record_in_gallons() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["G2,2025-01-01,2025-01-31,natural-gas,5000,gal,WG-2501"]),
        &[
            "fuel.csv:2: ",
            "a GCV in btu/scf cannot be applied to fuel measured in gal",
        ],
    );
}

#[test]
fn missing_sulfur_for_fuel_sulfur() {
    Plant::new().refuse_import(
        "fuel",
        "fuel.csv",
        fuel(&["R3,2025-01-01,2025-01-31,residual-oil,212000,gal,WR-2501"]),
        &[
            "fuel.csv:2: ",
            "fuel-sulfur needs the sample's sulfur_pct, which is empty",
        ],
    );
}

#[test]
fn gcv_without_its_basis() {
    Plant::new().refuse_import(
        "analyses",
        "lab.csv",
        analyses(&["WB-2502,bituminous,2025-02-04,1.71,,12350,,70.6,,,,"]),
        &["lab.csv:2:7: field gcv_uom: expected a value, since gcv is given"],
    );
}

// ---- site files ----

/// Line numbers of SITE, for the expectations below.
fn site_line(needle: &str) -> usize {
    SITE.lines()
        .position(|l| l == needle)
        .unwrap_or_else(|| panic!("{needle:?} not in SITE"))
        + 1
}

#[test]
fn site_unknown_key() {
    let text = SITE.replace(
        "kind = \"boiler\"\nfuel = \"bituminous\"",
        "kind = \"boiler\"\ncolour = \"red\"\nfuel = \"bituminous\"",
    );
    let line = site_line("kind = \"boiler\"") + 1;
    Plant::empty().refuse_site(
        &text,
        &[&format!("bad-site.toml:{line}: "), "unknown field `colour`"],
    );
}

#[test]
fn site_bad_value() {
    let text = SITE.replacen("kind = \"boiler\"", "kind = \"furnace\"", 1);
    let line = site_line("kind = \"boiler\"");
    Plant::empty().refuse_site(
        &text,
        &[&format!(
            "bad-site.toml:{line}: unit B2: key `kind`: unknown unit kind, found \"furnace\""
        )],
    );
}

#[test]
fn site_bad_decimal() {
    let text = SITE.replace(
        "rate_lb_per_mmbtu = \"0.0006\"",
        "rate_lb_per_mmbtu = \"6e-4\"",
    );
    let line = site_line("rate_lb_per_mmbtu = \"0.0006\"");
    Plant::empty().refuse_site(
        &text,
        &[
            &format!("bad-site.toml:{line}: "),
            "key `rate_lb_per_mmbtu`",
            "exponents are not accepted",
        ],
    );
}

#[test]
fn site_missing_required_key() {
    let text = SITE.replacen("fuel = \"natural-gas\"\n", "", 1);
    let line = site_line("id = \"G2\"") - 1;
    Plant::empty().refuse_site(
        &text,
        &[&format!(
            "bad-site.toml:{line}: unit G2: key `fuel` is required"
        )],
    );
}

#[test]
fn site_overlapping_methods() {
    let extra = "[[units.methods]]\nquantity = \"so2\"\nmethod = \"default-rate\"\nrate_lb_per_mmbtu = \"1.2\"\nfrom = \"2025-06-01\"\n\n";
    let at = SITE.find("[[units]]\nid = \"G2\"").unwrap();
    let text = format!("{}{extra}{}", &SITE[..at], &SITE[at..]);
    let first = site_line("method = \"fuel-sulfur\"") - 2;
    let second = site_line("id = \"G2\"") - 1;
    Plant::empty().refuse_site(
        &text,
        &[&format!(
            "bad-site.toml:{second}: unit B2 method: a second so2 method in force on the same days as the one at line {first}"
        )],
    );
}

#[test]
fn site_program_naming_an_unknown_account() {
    let text = SITE.replace("account = \"WH1-MAIN\"", "account = \"WH1-SPARE\"");
    let line = site_line("[[programs]]");
    Plant::empty().refuse_site(
        &text,
        &[&format!("bad-site.toml:{line}: program SO2-YEAR: key `account`: no account \"WH1-SPARE\" in this site file")],
    );
}

#[test]
fn site_file_not_utf8() {
    let mut text = SITE.as_bytes().to_vec();
    let at = SITE.find("Wren").unwrap();
    text[at] = 0xff;
    let plant = Plant::empty();
    plant.write("bad-site.toml", text);
    let stderr = plant.refused(&["site", "load", "bad-site.toml"]);
    let line = site_line("name = \"Wren Hollow Mill\"");
    assert!(
        stderr.contains(&format!("bad-site.toml:{line}: invalid UTF-8")),
        "{stderr}"
    );
}

// ---- the ledger file itself ----

#[test]
fn a_ledger_that_does_not_exist_is_refused_and_not_created() {
    let plant = Plant::new();
    plant.write("fuel.csv", fuel(&[GOOD_COAL]));
    for args in [
        &["--ledger", "nowhere.db", "import", "fuel", "fuel.csv"][..],
        &["--ledger", "nowhere.db", "site", "load", "site.toml"],
        &[
            "--ledger",
            "nowhere.db",
            "report",
            "annual",
            "--year",
            "2025",
        ],
    ] {
        let out = plant.cmd(args).output().unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{args:?}: {stderr}");
        assert!(
            stderr.contains("no ledger at nowhere.db (run `flue init` to create one)"),
            "{stderr}"
        );
        assert!(
            !plant.path("nowhere.db").exists(),
            "{args:?} created a ledger"
        );
    }
}

#[test]
fn a_sqlite_file_that_is_not_a_ledger_is_refused() {
    let plant = Plant::new();
    rusqlite::Connection::open(plant.path("other.db"))
        .unwrap()
        .execute_batch(
            "CREATE TABLE stock(item TEXT, count INTEGER); INSERT INTO stock VALUES ('bolts', 40);",
        )
        .unwrap();
    let stderr = plant.refused_with_ledger("other.db", &["site", "load", "site.toml"]);
    assert!(stderr.contains("other.db is not a flue ledger"), "{stderr}");
}

#[test]
fn a_text_file_as_the_ledger_is_refused() {
    let plant = Plant::new();
    plant.write(
        "notes.db",
        "shift notes: B2 tripped at 03:10, back at 04:40\n".repeat(20),
    );
    let stderr = plant.refused_with_ledger("notes.db", &["import", "analyses", "analyses.csv"]);
    assert!(stderr.contains("notes.db is not a flue ledger"), "{stderr}");
}

// ---- the malformed-input corpus (RELIABILITY.md section 4 A) ----

/// The corpus: tests/malformed/<kind>/NAME.csv (NAME.toml for site files),
/// each refused against the plant in tests/malformed/base/, with the exact
/// stderr beside it in NAME.expected. `FLUE_GOLDEN=overwrite` rewrites the
/// expected files from what flue prints now (read the diff before
/// committing).
fn corpus_root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/malformed")
}

/// The cases of one kind, sorted by name.
fn corpus_cases(kind: &str) -> Vec<PathBuf> {
    let mut cases: Vec<PathBuf> = std::fs::read_dir(corpus_root().join(kind))
        .unwrap_or_else(|e| panic!("tests/malformed/{kind}: {e}"))
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "csv" || x == "toml"))
        .collect();
    cases.sort();
    cases
}

#[test]
fn malformed_corpus_is_refused_with_its_golden_messages() {
    let overwrite = std::env::var("FLUE_GOLDEN").as_deref() == Ok("overwrite");
    let plant = Plant::empty();
    let base = corpus_root().join("base");
    for name in ["site.toml", "analyses.csv", "allowances.csv"] {
        plant.write(name, std::fs::read(base.join(name)).unwrap());
    }
    plant.ok(&["site", "load", "site.toml"]);
    plant.ok(&["import", "analyses", "analyses.csv"]);
    plant.ok(&["import", "allowances", "allowances.csv"]);
    let (mut cases, mut mismatched, mut rewritten) = (0, Vec::new(), 0);
    let mut per_kind = Vec::new();
    for kind in ["fuel", "analyses", "hourly", "allowances", "site"] {
        std::fs::create_dir(plant.path(kind)).unwrap();
        let found = corpus_cases(kind);
        for case in &found {
            let file = case.file_name().unwrap().to_str().unwrap();
            let rel = format!("{kind}/{file}");
            plant.write(&rel, std::fs::read(case).unwrap());
            let args: Vec<&str> = match kind {
                "site" => vec!["site", "load", &rel],
                _ => vec!["import", kind, &rel],
            };
            // Exit 1, nothing on stdout, the ledger byte-identical.
            let stderr = plant.refused(&args);
            // Every refusal names the file and a line.
            let place = format!("error: {rel}:");
            assert!(
                stderr.starts_with(&place)
                    && stderr[place.len()..].starts_with(|c: char| c.is_ascii_digit()),
                "{rel}: the refusal names no line:\n{stderr}"
            );
            let expected = case.with_extension("expected");
            if overwrite {
                std::fs::write(&expected, &stderr).unwrap();
                rewritten += 1;
            } else {
                let golden = std::fs::read_to_string(&expected).unwrap_or_else(|e| {
                    panic!(
                        "{}: {e} (FLUE_GOLDEN=overwrite writes it)",
                        expected.display()
                    )
                });
                if golden != stderr {
                    mismatched.push(format!("{rel}:\n  expected: {golden}  found:    {stderr}"));
                }
            }
            cases += 1;
        }
        per_kind.push(format!("{kind}={}", found.len()));
    }
    counts!(
        "faults: malformed_files={cases} ({}) golden_mismatches={} ledger_changed=0 rewritten={rewritten}",
        per_kind.join(" "),
        mismatched.len()
    );
    assert!(
        mismatched.is_empty(),
        "{} refusals differ from their golden (FLUE_GOLDEN=overwrite rewrites them):\n{}",
        mismatched.len(),
        mismatched.join("\n")
    );
    assert!(cases >= 80, "only {cases} corpus files");
}
