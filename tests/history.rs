//! `flue history` through the command line (issue 5 item 3; DESIGN.md: a
//! corrected row "stays readable in the history"): every stored version of
//! a fuel record, unit-hour, sample and allowance transaction, oldest first,
//! with file, line, sha256, who, when and why, and the version in force.
//!
//! Heron Flats Station and all its numbers are made up: H1 is a fuel-based
//! coal boiler; H2 is a CEMS boiler with every quantity by CEMS.

use assert_cmd::Command;
use serde_json::Value;
use sha2::{Digest, Sha256};
use std::path::Path;
use tempfile::TempDir;

const SITE: &str = r#"[facility]
id = "HF1"
name = "Heron Flats Station"
utc_offset = "-06:00"

[[units]]
id = "H1"
kind = "boiler"
fuel = "bituminous"

[[units.methods]]
quantity = "heat_input"
method = "fuel"

[[units]]
id = "H2"
kind = "boiler"
fuel = "bituminous"
max_load_mw = "300"

[[units.methods]]
quantity = "heat_input"
method = "cems"

[[units.methods]]
quantity = "so2"
method = "cems"

[[accounts]]
id = "HF1-COMPLIANCE"
kind = "compliance"

[[programs]]
id = "SO2-ANNUAL"
pollutant = "so2"
season = "annual"
account = "HF1-COMPLIANCE"
penalty_per_ton = "4000.00"
true_up = "03-01"
"#;

const ANALYSES: &str = "\
sample,fuel,sampled_on,sulfur_pct,sulfur_gr_per_100scf,gcv,gcv_uom,carbon_pct,hydrogen_pct,nitrogen_pct,oxygen_pct,density_lb_per_gal
HF-C-01,bituminous,2025-03-02,1.70,,11950,btu/lb,68.9,4.5,1.3,7.0,
";

const FUEL_HEADER: &str = "unit,start,end,fuel,quantity,uom,sample";

const HOURLY_HEADER: &str =
    "unit,hour,op_time,load_mw,so2_ppm_wet,nox_ppm_dry,o2_pct_dry,co2_pct_wet,flow_scfh_wet,h2o_pct";

const ALLOWANCES: &str = "\
id,date,kind,program,vintage,quantity,from,to,price,note
HF-A25,2025-03-10,allocation,SO2-ANNUAL,2025,900,,HF1-COMPLIANCE,,2025 allocation (invented)
";

struct Plant {
    dir: TempDir,
}

impl Plant {
    /// The site, one analysis, two March fuel records of H1, two hours of
    /// H2 and one allocation, each imported once by "alice".
    fn new() -> Plant {
        let plant = Plant {
            dir: tempfile::tempdir().expect("temporary directory"),
        };
        plant.ok(&["init"]);
        plant.write("site.toml", SITE);
        plant.ok(&["site", "load", "site.toml"]);
        plant.write("analyses.csv", ANALYSES);
        plant.ok(&["import", "analyses", "analyses.csv"]);
        plant.write(
            "fuel.csv",
            &format!(
                "{FUEL_HEADER}\n\
                 H1,2025-03-01,2025-03-15,bituminous,20100,ton,HF-C-01\n\
                 H1,2025-03-16,2025-03-31,bituminous,21400,ton,HF-C-01\n"
            ),
        );
        plant.ok(&["import", "fuel", "fuel.csv"]);
        plant.write(
            "hourly.csv",
            &format!(
                "{HOURLY_HEADER}\n\
                 H2,2025-03-01T00:00,1.00,210,250,150,5.5,11.2,20000000,8.0\n\
                 H2,2025-03-01T01:00,1.00,215,260,151,5.4,11.3,20100000,8.0\n"
            ),
        );
        plant.ok(&["import", "hourly", "hourly.csv"]);
        plant.write("allowances.csv", ALLOWANCES);
        plant.ok(&["import", "allowances", "allowances.csv"]);
        plant
    }

    fn path(&self, name: &str) -> std::path::PathBuf {
        self.dir.path().join(name)
    }

    fn write(&self, name: &str, text: &str) {
        std::fs::write(self.path(name), text).expect("write input file");
    }

    fn cmd(&self, user: &str, args: &[&str]) -> assert_cmd::assert::Assert {
        Command::cargo_bin("flue")
            .expect("flue binary")
            .current_dir(self.dir.path())
            .env("FLUE_NOW", "2026-01-15T09:00:00Z")
            .env("FLUE_USER", user)
            .env_remove("FLUE_LEDGER")
            .args(args)
            .assert()
    }

    fn ok(&self, args: &[&str]) -> String {
        self.ok_as("alice", args)
    }

    fn ok_as(&self, user: &str, args: &[&str]) -> String {
        let out = self.cmd(user, args).success().get_output().clone();
        String::from_utf8(out.stdout).expect("utf-8 stdout")
    }

    /// A refused command: exit 1, and its stderr.
    fn refused(&self, args: &[&str]) -> String {
        let out = self.cmd("alice", args).code(1).get_output().clone();
        assert!(out.stdout.is_empty(), "a refusal prints nothing on stdout");
        String::from_utf8(out.stderr).expect("utf-8 stderr")
    }

    fn json(&self, args: &[&str]) -> Value {
        let mut all = args.to_vec();
        all.extend(["--format", "json"]);
        serde_json::from_str(&self.ok(&all)).expect("history JSON")
    }

    fn sha256(&self, name: &str) -> String {
        let bytes = std::fs::read(self.path(name)).expect("read input file");
        format!("{:x}", Sha256::digest(bytes))
    }

    fn ledger_bytes(&self) -> Vec<u8> {
        std::fs::read(self.path("flue.db")).expect("read ledger")
    }
}

const MARCH_FIRST_HALF: [&str; 9] = [
    "history",
    "fuel",
    "--unit",
    "H1",
    "--fuel",
    "bituminous",
    "--start",
    "2025-03-01",
    "--end",
];

fn fuel_history_args() -> Vec<&'static str> {
    let mut a = MARCH_FIRST_HALF.to_vec();
    a.push("2025-03-15");
    a
}

fn versions(h: &Value) -> &Vec<Value> {
    h["versions"].as_array().expect("versions array")
}

#[test]
fn a_fuel_record_corrected_twice_shows_three_versions_with_both_reasons_and_the_last_in_force() {
    let plant = Plant::new();
    plant.write(
        "fix1.csv",
        &format!("{FUEL_HEADER}\nH1,2025-03-01,2025-03-15,bituminous,20150,ton,HF-C-01\n"),
    );
    plant.ok_as(
        "bob",
        &[
            "import",
            "fuel",
            "fix1.csv",
            "--correct",
            "belt scale re-read",
        ],
    );
    plant.write(
        "fix2.csv",
        &format!(
            "{FUEL_HEADER}\n\
             H1,2025-03-16,2025-03-31,bituminous,21400,ton,HF-C-01\n\
             H1,2025-03-01,2025-03-15,bituminous,20175.5,ton,HF-C-01\n"
        ),
    );
    plant.ok_as(
        "carol",
        &[
            "import",
            "fuel",
            "fix2.csv",
            "--correct",
            "supplier invoice reconciled",
        ],
    );

    let h = plant.json(&fuel_history_args());
    assert_eq!(h["format_version"], 1);
    assert_eq!(h["record"], "fuel");
    assert_eq!(h["key"]["unit"], "H1");
    assert_eq!(h["key"]["end"], "2025-03-15");
    let v = versions(&h);
    assert_eq!(v.len(), 3, "{h:#}");

    let quantities: Vec<_> = v.iter().map(|x| x["values"]["quantity"].clone()).collect();
    assert_eq!(quantities, ["20100", "20150", "20175.5"]);
    let numbers: Vec<_> = v.iter().map(|x| x["version"].as_u64().unwrap()).collect();
    assert_eq!(numbers, [1, 2, 3]);
    let in_force: Vec<_> = v.iter().map(|x| x["in_force"].as_bool().unwrap()).collect();
    assert_eq!(in_force, [false, false, true]);

    // Who, from where, and why.
    let who: Vec<_> = v
        .iter()
        .map(|x| x["import"]["imported_by"].clone())
        .collect();
    assert_eq!(who, ["alice", "bob", "carol"]);
    assert_eq!(v[0]["import"]["imported_at"], "2026-01-15T09:00:00Z");
    let files: Vec<_> = v
        .iter()
        .map(|x| {
            (
                x["source"]["file"].as_str().unwrap().to_string(),
                x["source"]["line"].as_u64().unwrap(),
                x["source"]["sha256"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    assert_eq!(
        files,
        [
            ("fuel.csv".to_string(), 2, plant.sha256("fuel.csv")),
            ("fix1.csv".to_string(), 2, plant.sha256("fix1.csv")),
            ("fix2.csv".to_string(), 3, plant.sha256("fix2.csv")),
        ]
    );
    assert_eq!(v[0]["supersedes"], Value::Null);
    assert_eq!(v[0]["superseded_by"], 2);
    assert_eq!(v[1]["supersedes"]["version"], 1);
    assert_eq!(v[1]["supersedes"]["reason"], "belt scale re-read");
    assert_eq!(v[1]["superseded_by"], 3);
    assert_eq!(v[2]["supersedes"]["version"], 2);
    assert_eq!(v[2]["supersedes"]["reason"], "supplier invoice reconciled");
    assert_eq!(v[2]["superseded_by"], Value::Null);

    // The other record of the period, re-imported unchanged in fix2.csv, still has one version.
    let mut other = MARCH_FIRST_HALF.to_vec();
    other[7] = "2025-03-16";
    other.push("2025-03-31");
    let h_other = plant.json(&other);
    assert_eq!(versions(&h_other).len(), 1, "{h_other:#}");
    assert_eq!(versions(&h_other)[0]["source"]["file"], "fuel.csv");

    // The text form says the same for a reader.
    let text = plant.ok(&fuel_history_args());
    assert!(
        text.starts_with("history of fuel record unit H1, fuel bituminous, start 2025-03-01, end 2025-03-15: 3 versions, version 3 in force\n"),
        "{text}"
    );
    assert!(
        text.contains("version 1 (row 1): superseded by version 2\n"),
        "{text}"
    );
    assert!(text.contains(": IN FORCE\n"), "{text}");
    assert!(
        text.contains("corrects    version 1: belt scale re-read\n"),
        "{text}"
    );
    assert!(
        text.contains("corrects    version 2: supplier invoice reconciled\n"),
        "{text}"
    );
    assert!(text.contains("2026-01-15T09:00:00Z by carol"), "{text}");
    assert!(
        text.contains(&format!("fix2.csv:3 (sha256 {})", plant.sha256("fix2.csv"))),
        "{text}"
    );
}

#[test]
fn a_corrected_unit_hour_shows_two_versions() {
    let plant = Plant::new();
    plant.write(
        "hourfix.csv",
        &format!("{HOURLY_HEADER}\nH2,2025-03-01T01:00,1.00,215,262.5,151,5.4,11.3,20100000,8.0\n"),
    );
    plant.ok_as(
        "bob",
        &[
            "import",
            "hourly",
            "hourfix.csv",
            "--correct",
            "SO2 analyzer drift fixed",
        ],
    );
    let args = [
        "history",
        "hour",
        "--unit",
        "H2",
        "--hour",
        "2025-03-01T01:00",
    ];
    let h = plant.json(&args);
    assert_eq!(h["record"], "hour");
    assert_eq!(h["key"]["hour"], "2025-03-01T01:00");
    let v = versions(&h);
    assert_eq!(v.len(), 2, "{h:#}");
    assert_eq!(v[0]["values"]["so2_ppm_wet"], "260");
    assert_eq!(v[1]["values"]["so2_ppm_wet"], "262.5");
    assert_eq!(v[1]["values"]["op_time"], "1.00");
    assert_eq!(v[1]["values"]["hour"], "2025-03-01T01:00");
    // A column the file did not carry is an empty cell, not zero.
    assert_eq!(v[1]["values"]["so2_ppm_dry"], Value::Null);
    assert_eq!(v[0]["in_force"], false);
    assert_eq!(v[1]["in_force"], true);
    assert_eq!(v[0]["superseded_by"], 2);
    assert_eq!(v[1]["supersedes"]["version"], 1);
    assert_eq!(v[1]["supersedes"]["reason"], "SO2 analyzer drift fixed");
    assert_eq!(v[0]["source"]["file"], "hourly.csv");
    assert_eq!(v[0]["source"]["line"], 3);
    assert_eq!(v[1]["source"]["sha256"], plant.sha256("hourfix.csv"));
    assert_eq!(v[1]["import"]["imported_by"], "bob");

    // The hour beside it was never corrected.
    let h0 = plant.json(&[
        "history",
        "hour",
        "--unit",
        "H2",
        "--hour",
        "2025-03-01T00:00",
    ]);
    assert_eq!(versions(&h0).len(), 1);
    assert_eq!(versions(&h0)[0]["in_force"], true);

    let text = plant.ok(&args);
    assert!(
        text.contains("unit-hour unit H2, hour 2025-03-01T01:00: 2 versions, version 2 in force"),
        "{text}"
    );
    assert!(text.contains("so2_ppm_dry    —\n"), "{text}");
}

#[test]
fn an_identical_re_import_adds_no_version() {
    let plant = Plant::new();
    let before_fuel = plant.json(&fuel_history_args());
    let hour_args = [
        "history",
        "hour",
        "--unit",
        "H2",
        "--hour",
        "2025-03-01T00:00",
    ];
    let before_hour = plant.json(&hour_args);
    let before_sample = plant.json(&["history", "sample", "HF-C-01"]);
    let before_tx = plant.json(&["history", "transaction", "HF-A25"]);
    let ledger = plant.ledger_bytes();

    plant.ok_as("bob", &["import", "fuel", "fuel.csv"]);
    plant.ok_as("bob", &["import", "hourly", "hourly.csv"]);
    plant.ok_as("bob", &["import", "analyses", "analyses.csv"]);
    plant.ok_as("bob", &["import", "allowances", "allowances.csv"]);
    // The same rows under --correct are still identical: nothing supersedes.
    plant.ok_as(
        "bob",
        &["import", "fuel", "fuel.csv", "--correct", "no change"],
    );

    assert_eq!(plant.json(&fuel_history_args()), before_fuel);
    assert_eq!(plant.json(&hour_args), before_hour);
    assert_eq!(plant.json(&["history", "sample", "HF-C-01"]), before_sample);
    assert_eq!(plant.json(&["history", "transaction", "HF-A25"]), before_tx);
    assert_eq!(versions(&before_fuel).len(), 1);
    assert_eq!(versions(&before_sample).len(), 1);
    assert_eq!(versions(&before_sample)[0]["values"]["gcv"], "11950");
    assert_eq!(
        versions(&before_sample)[0]["values"]["density_lb_per_gal"],
        Value::Null
    );
    assert_eq!(versions(&before_tx).len(), 1);
    assert_eq!(versions(&before_tx)[0]["values"]["quantity"], "900");
    assert_eq!(
        versions(&before_tx)[0]["values"]["to_account"],
        "HF1-COMPLIANCE"
    );
    assert_eq!(versions(&before_tx)[0]["in_force"], true);
    assert_eq!(
        plant.ledger_bytes(),
        ledger,
        "identical re-imports write nothing"
    );
}

#[test]
fn a_corrected_sample_shows_both_analyses() {
    let plant = Plant::new();
    plant.write("lab.csv", &ANALYSES.replace("11950", "11985"));
    plant.ok(&[
        "import",
        "analyses",
        "lab.csv",
        "--correct",
        "lab reissued HF-C-01",
    ]);
    let h = plant.json(&["history", "sample", "HF-C-01"]);
    let v = versions(&h);
    assert_eq!(v.len(), 2);
    assert_eq!(v[0]["values"]["gcv"], "11950");
    assert_eq!(v[1]["values"]["gcv"], "11985");
    assert_eq!(v[1]["supersedes"]["reason"], "lab reissued HF-C-01");
    assert_eq!(v[1]["in_force"], true);
}

#[test]
fn unknown_keys_exit_1_naming_what_was_asked() {
    let plant = Plant::new();
    let ledger = plant.ledger_bytes();
    let err = plant.refused(&["history", "sample", "HF-C-99"]);
    assert!(
        err.contains("no fuel sample analysis \"HF-C-99\" in the ledger"),
        "{err}"
    );

    let mut wrong_end = MARCH_FIRST_HALF.to_vec();
    wrong_end.push("2025-03-14");
    let err = plant.refused(&wrong_end);
    assert!(
        err.contains(
            "no fuel record for unit H1, fuel bituminous, 2025-03-01 to 2025-03-14 in the ledger"
        ),
        "{err}"
    );

    let err = plant.refused(&[
        "history",
        "hour",
        "--unit",
        "H2",
        "--hour",
        "2025-03-01T02:00",
    ]);
    assert!(
        err.contains("no stored hour 2025-03-01T02:00 for unit H2 in the ledger"),
        "{err}"
    );
    let err = plant.refused(&[
        "history",
        "hour",
        "--unit",
        "H9",
        "--hour",
        "2025-03-01T00:00",
    ]);
    assert!(
        err.contains("no stored hour 2025-03-01T00:00 for unit H9"),
        "{err}"
    );

    let err = plant.refused(&["history", "transaction", "HF-A99", "--format", "json"]);
    assert!(
        err.contains("no allowance transaction \"HF-A99\" in the ledger"),
        "{err}"
    );

    // A malformed hour is a usage error, not a missing record.
    plant
        .cmd(
            "alice",
            &[
                "history",
                "hour",
                "--unit",
                "H2",
                "--hour",
                "2025-03-01T00:30",
            ],
        )
        .code(2);
    // A missing ledger is refused and not created.
    Command::cargo_bin("flue")
        .unwrap()
        .current_dir(plant.dir.path())
        .args(["--ledger", "absent.db", "history", "sample", "HF-C-01"])
        .assert()
        .code(1);
    assert!(!Path::new(&plant.path("absent.db")).exists());
    assert_eq!(plant.ledger_bytes(), ledger, "history writes nothing");
}
