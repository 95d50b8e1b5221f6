//! The allowance commands end to end, on an invented plant whose every
//! figure is computed by hand below. Each rule tested cites its regulation.
//!
//! The plant: one coal boiler B1 with emission factors of 40 lb SO2 and
//! 10 lb NOx per ton of coal (invented), burning in 2025:
//!
//! | month | coal (tons) | SO2 lb    | NOx lb  |
//! |-------|-------------|-----------|---------|
//! | Jan   | 30,000      | 1,200,000 | 300,000 |
//! | Jun   | 20,025      |   801,000 | 200,250 |
//! | Nov   | 10,000      |   400,000 | 100,000 |
//!
//! SO2 over the year: 2,401,000 lb / 2000 = 1,200.5 tons; NOx over the
//! ozone season (May 1 to September 30, 40 CFR 72.2): June only,
//! 200,250 lb / 2000 = 100.125 tons.

use assert_cmd::Command;
use serde_json::Value;
use sha2::Digest;
use std::path::{Path, PathBuf};

const SITE: &str = r#"
[facility]
id = "P1"
name = "Test Plant (invented)"
utc_offset = "-06:00"

[[units]]
id = "B1"
kind = "boiler"
fuel = "bituminous"

[[units.methods]]
quantity = "heat_input"
method = "fuel"

[[units.methods]]
quantity = "so2"
method = "emission-factor"
factor = "40"
per = "ton"

[[units.methods]]
quantity = "nox"
method = "emission-factor"
factor = "10"
per = "ton"

[[accounts]]
id = "P-COMP"
kind = "compliance"

[[accounts]]
id = "P-GEN"
kind = "general"

[[accounts]]
id = "MKT"
kind = "external"

[[programs]]
id = "SO2-ANNUAL"
pollutant = "so2"
season = "annual"
account = "P-COMP"
penalty_per_ton = "3941.00"
true_up = "03-01"

[[programs]]
id = "NOX-OZONE"
pollutant = "nox"
season = "ozone"
account = "P-COMP"
penalty_per_ton = "4000.00"
offset_ratio = "3"
true_up = "03-01"
"#;

const ANALYSES: &str = "sample,fuel,sampled_on,gcv,gcv_uom
S1,bituminous,2025-01-05,12000,btu/lb
";

const FUEL: &str = "unit,start,end,fuel,quantity,uom,sample
B1,2025-01-01,2025-01-31,bituminous,30000,ton,S1
B1,2025-06-01,2025-06-30,bituminous,20025,ton,S1
B1,2025-11-01,2025-11-30,bituminous,10000,ton,S1
";

/// SO2: banked 2024, current 2025 and future 2026 vintages; a purchase
/// through the general account and a sale; transfers to compliance the day
/// before (counts) and the day after (does not) the 2026-03-01 deadline.
/// NOx: 40 + 50 eligible against 100 tons, so short by 10.
const ALLOWANCES: &str = "id,date,kind,program,vintage,quantity,from,to,price,note
A24,2024-02-01,allocation,SO2-ANNUAL,2024,800,,P-COMP,,banked
A25,2025-02-01,allocation,SO2-ANNUAL,2025,350,,P-COMP,,current
A26,2025-12-15,allocation,SO2-ANNUAL,2026,500,,P-COMP,,future
BUY,2025-04-10,transfer,SO2-ANNUAL,2025,150,MKT,P-GEN,400.00,purchase
SALE,2025-08-01,transfer,SO2-ANNUAL,2025,20,P-GEN,MKT,450.00,sale
T-BEFORE,2026-02-28,transfer,SO2-ANNUAL,2025,100,P-GEN,P-COMP,,day before the deadline
T-AFTER,2026-03-02,transfer,SO2-ANNUAL,2025,30,P-GEN,P-COMP,,day after the deadline
N24,2024-02-01,allocation,NOX-OZONE,2024,40,,P-COMP,,
N25,2025-02-01,allocation,NOX-OZONE,2025,50,,P-COMP,,
N26,2025-12-15,allocation,NOX-OZONE,2026,200,,P-COMP,,
";

struct Plant {
    _dir: tempfile::TempDir,
    path: PathBuf,
}

impl Plant {
    fn new() -> Plant {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().to_path_buf();
        for (name, text) in [
            ("site.toml", SITE),
            ("analyses.csv", ANALYSES),
            ("fuel.csv", FUEL),
            ("allowances.csv", ALLOWANCES),
        ] {
            std::fs::write(path.join(name), text).unwrap();
        }
        let plant = Plant { _dir: dir, path };
        plant.ok(&["init"]);
        plant.ok(&["site", "load", "site.toml"]);
        plant.ok(&["import", "analyses", "analyses.csv"]);
        plant.ok(&["import", "fuel", "fuel.csv"]);
        plant.ok(&["import", "allowances", "allowances.csv"]);
        plant
    }

    fn flue(&self) -> Command {
        let mut c = Command::cargo_bin("flue").unwrap();
        c.current_dir(&self.path)
            .env("FLUE_LEDGER", self.path.join("flue.db"))
            .env("FLUE_NOW", "2026-03-10T09:00:00Z")
            .env("FLUE_USER", "tester");
        c
    }

    fn run(&self, args: &[&str]) -> (i32, String, String) {
        let out = self.flue().args(args).output().unwrap();
        (
            out.status.code().unwrap_or(-1),
            String::from_utf8(out.stdout).unwrap(),
            String::from_utf8(out.stderr).unwrap(),
        )
    }

    fn ok(&self, args: &[&str]) -> String {
        let (code, out, err) = self.run(args);
        assert_eq!(code, 0, "flue {args:?} failed: {err}");
        out
    }

    fn json(&self, args: &[&str]) -> Value {
        serde_json::from_str(&self.ok(args)).unwrap()
    }

    fn ledger_bytes(&self) -> Vec<u8> {
        std::fs::read(self.path.join("flue.db")).unwrap()
    }

    fn write(&self, name: &str, text: &str) -> &Path {
        std::fs::write(self.path.join(name), text).unwrap();
        &self.path
    }
}

fn reconcile(plant: &Plant, program: &str, year: &str) -> Value {
    plant.json(&[
        "allowances",
        "reconcile",
        "--program",
        program,
        "--year",
        year,
        "--format",
        "json",
    ])
}

#[test]
fn so2_reconciles_long_as_computed_by_hand() {
    let plant = Plant::new();
    let r = reconcile(&plant, "SO2-ANNUAL", "2025");
    assert_eq!(r["program"], "SO2-ANNUAL");
    assert_eq!(r["year"], 2025);
    assert_eq!(r["account"], "P-COMP");
    // 2,401,000 lb / 2000 = 1200.5 tons, exact (40 CFR 75 App. F Eq. F-3 divides by 2000).
    assert_eq!(r["emissions_tons"], "1200.5");
    // Whole tons, 0.50 rounds up (40 CFR 97.406(b)(2)): 1201; surrender ratio 1.
    assert_eq!(r["tons_to_cover"], 1201);
    // One allowance covers one ton (40 CFR 72.2).
    assert_eq!(r["allowances_required"], 1201);
    // Holdings at the end of the deadline day, 2026-03-01 (40 CFR 72.2):
    // 2024: 800; 2025: 350 allocated + 100 moved on 2026-02-28; the 30 moved
    // on 2026-03-02 do not count. Vintage 2026 is later than the year and is
    // not eligible (40 CFR 73.35(a)).
    assert_eq!(r["eligible_held"], 1250);
    assert_eq!(
        r["by_vintage"],
        serde_json::json!([
            {"vintage": 2024, "held": 800, "deduct": 800},
            {"vintage": 2025, "held": 450, "deduct": 401}
        ]),
        "oldest vintage deducted first"
    );
    assert_eq!(r["shortfall"], 0);
    assert_eq!(r["offset_next_year"], 0);
    assert_eq!(r["carried_forward"], 49);
    assert_eq!(r["settled"], false);
    let penalty: rust_decimal::Decimal = r["penalty"].as_str().unwrap().parse().unwrap();
    assert!(penalty.is_zero());
    // Cost: the only priced purchase is 150 at 400.00.
    assert_eq!(r["cost"]["acquired_priced_count"], 150);
    assert_eq!(r["cost"]["acquired_cost_usd"], "60000.00");
    assert_eq!(r["cost"]["acquired_average_usd_per_allowance"], "400.00");
    assert_eq!(r["cost"]["deducted_count"], 1201);
    assert_eq!(r["cost"]["bank_count"], 49);
    assert!(r["caution"]
        .as_str()
        .unwrap()
        .contains("responsible official"));
}

#[test]
fn nox_reconciles_short_with_penalty_and_offset() {
    let plant = Plant::new();
    let r = reconcile(&plant, "NOX-OZONE", "2025");
    // Ozone season May 1 to September 30 (40 CFR 72.2): June only.
    assert_eq!(r["emissions_tons"], "100.125");
    // 100.125 rounds to 100 whole tons (40 CFR 97.406(b)(2)).
    assert_eq!(r["tons_to_cover"], 100);
    // Vintages 2024 and 2025 count, 2026 does not (40 CFR 73.35(a)).
    assert_eq!(r["eligible_held"], 90);
    assert_eq!(r["shortfall"], 10);
    // Penalty = excess tons × the program's amount per ton (40 CFR 77.6(b)): 10 × 4000.00.
    assert_eq!(r["penalty"], "40000.00");
    // Offset = excess × offset_ratio 3 from vintage 2026 (40 CFR 77.5(c);
    // 3 × as in 40 CFR 96.154(d)).
    assert_eq!(r["offset_next_year"], 30);
    assert_eq!(r["offset_vintage"], 2026);
    assert_eq!(r["carried_forward"], 0);
}

#[test]
fn the_deadline_day_counts_and_the_day_after_does_not() {
    // Allowance transfer deadline: holdings at midnight of March 1 (40 CFR 72.2).
    let plant = Plant::new();
    let balance = |date: &str| {
        plant.json(&[
            "allowances",
            "balance",
            "--account",
            "P-COMP",
            "--program",
            "SO2-ANNUAL",
            "--as-of",
            date,
            "--format",
            "json",
        ])
    };
    let held_2025 = |v: &Value| {
        v["balances"]
            .as_array()
            .unwrap()
            .iter()
            .find(|b| b["vintage"] == 2025)
            .map(|b| b["held"].as_i64().unwrap())
    };
    assert_eq!(held_2025(&balance("2026-02-27")), Some(350));
    assert_eq!(held_2025(&balance("2026-03-01")), Some(450));
    assert_eq!(held_2025(&balance("2026-03-02")), Some(480));
}

#[test]
fn an_overdrawing_transfer_is_refused_and_writes_nothing() {
    let plant = Plant::new();
    let before = plant.ledger_bytes();
    // P-GEN holds 150 - 20 = 130 of vintage 2025 on 2025-09-01.
    let (code, _, err) = plant.run(&[
        "allowances",
        "transfer",
        "--id",
        "BIG",
        "--date",
        "2025-09-01",
        "--program",
        "SO2-ANNUAL",
        "--vintage",
        "2025",
        "--quantity",
        "131",
        "--from",
        "P-GEN",
        "--to",
        "P-COMP",
    ]);
    assert_eq!(code, 1, "{err}");
    for part in [
        "account P-GEN",
        "program SO2-ANNUAL",
        "vintage 2025",
        "held 130",
        "asked 131",
    ] {
        assert!(err.contains(part), "{part:?} missing from {err}");
    }
    assert_eq!(plant.ledger_bytes(), before, "the ledger file changed");

    // Even 1 out of P-GEN on 2025-12-31 leaves too few for the 100 and 30 it moves in 2026.
    let (code, _, err) = plant.run(&[
        "allowances",
        "transfer",
        "--id",
        "BIG",
        "--date",
        "2025-12-31",
        "--program",
        "SO2-ANNUAL",
        "--vintage",
        "2025",
        "--quantity",
        "1",
        "--from",
        "P-GEN",
        "--to",
        "MKT",
    ]);
    assert_eq!(code, 1);
    assert!(err.contains("T-AFTER"), "{err}");
    assert_eq!(plant.ledger_bytes(), before);

    // The same overdraft in a file is refused at its line and column.
    plant.write(
        "over.csv",
        "id,date,kind,program,vintage,quantity,from,to,price,note\n\
         OK1,2025-09-02,transfer,SO2-ANNUAL,2025,1,MKT,P-GEN,,\n\
         OVER,2025-09-03,transfer,SO2-ANNUAL,2024,801,P-COMP,MKT,,\n",
    );
    let (code, _, err) = plant.run(&["import", "allowances", "over.csv"]);
    assert_eq!(code, 1);
    assert!(
        err.contains("over.csv:3:6: field quantity: account P-COMP, program SO2-ANNUAL, vintage 2024: held 800, asked 801"),
        "{err}"
    );
    assert_eq!(plant.ledger_bytes(), before, "the good row was written");
}

#[test]
fn a_transfer_within_the_balance_is_recorded_once() {
    let plant = Plant::new();
    let args = [
        "allowances",
        "transfer",
        "--id",
        "T9",
        "--date",
        "2025-09-01",
        "--program",
        "SO2-ANNUAL",
        "--vintage",
        "2025",
        "--quantity",
        "130",
        "--from",
        "P-GEN",
        "--to",
        "MKT",
        "--price",
        "460",
    ];
    // 130 leave P-GEN now, so the 100 and 30 moved out in 2026 would overdraw.
    let (code, _, err) = plant.run(&args);
    assert_eq!(code, 1);
    assert!(err.contains("would refuse transaction T-BEFORE"), "{err}");
    // Bought in instead, 5 at 460 are recorded, once.
    let mut args = args.to_vec();
    args[11] = "5";
    args[13] = "MKT";
    args[15] = "P-GEN";
    assert!(plant.ok(&args).contains("recorded"));
    let before = plant.ledger_bytes();
    assert!(plant.ok(&args).contains("nothing new"));
    assert_eq!(plant.ledger_bytes(), before);
    args[17] = "461";
    let (code, _, err) = plant.run(&args);
    assert_eq!(code, 1);
    assert!(err.contains("field price"), "{err}");
}

#[test]
fn re_importing_the_same_file_changes_nothing() {
    // Idempotency by transaction id (RELIABILITY.md R4).
    let plant = Plant::new();
    let before = plant.ledger_bytes();
    let out = plant.ok(&["import", "allowances", "allowances.csv"]);
    assert!(
        out.contains("nothing new: all 10 rows already present"),
        "{out}"
    );
    assert_eq!(plant.ledger_bytes(), before);
}

#[test]
fn the_same_id_with_other_content_is_refused_naming_the_field() {
    let plant = Plant::new();
    let before = plant.ledger_bytes();
    plant.write(
        "changed.csv",
        "id,date,kind,program,vintage,quantity,from,to,price,note\n\
         BUY,2025-04-10,transfer,SO2-ANNUAL,2025,150,MKT,P-GEN,401.00,purchase\n",
    );
    let (code, _, err) = plant.run(&["import", "allowances", "changed.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("changed.csv:2:9: field price"), "{err}");
    assert!(err.contains("held \"400.00\", here \"401.00\""), "{err}");
    assert!(err.contains("--correct REASON"), "{err}");
    assert_eq!(plant.ledger_bytes(), before);
}

// ---- corrections (DESIGN.md: `--correct REASON` supersedes the held row) ----

impl Plant {
    /// `flue verify` passes: every accepted write keeps the journal whole.
    fn verified(&self) {
        let out = self.ok(&["verify"]);
        assert!(out.contains(": intact: "), "{out}");
    }

    fn refused(&self, args: &[&str]) -> String {
        let before = self.ledger_bytes();
        let (code, _, err) = self.run(args);
        assert_eq!(code, 1, "flue {args:?}: {err}");
        assert_eq!(self.ledger_bytes(), before, "a refused command wrote");
        err
    }
}

const HEADER: &str = "id,date,kind,program,vintage,quantity,from,to,price,note\n";

/// A25 allocated 380, not 350 (an invented registry statement).
const A25_FIXED: &str = "A25,2025-02-01,allocation,SO2-ANNUAL,2025,380,,P-COMP,,current\n";

#[test]
fn a_correction_supersedes_the_held_transaction_and_moves_the_year_by_its_difference() {
    let plant = Plant::new();
    plant.write("fix.csv", &format!("{HEADER}{A25_FIXED}"));
    let err = plant.refused(&["import", "allowances", "fix.csv"]);
    assert!(err.contains("fix.csv:2:6: field quantity"), "{err}");
    assert!(err.contains("held \"350\", here \"380\""), "{err}");
    assert!(err.contains("--correct REASON"), "{err}");

    let before = reconcile(&plant, "SO2-ANNUAL", "2025");
    let out = plant.ok(&[
        "import",
        "allowances",
        "fix.csv",
        "--correct",
        "registry statement shows 380",
    ]);
    assert!(
        out.contains("0 new, 1 corrected, 0 already present"),
        "{out}"
    );
    plant.verified();
    // 30 more of vintage 2025 held at the deadline: eligible 1250 + 30, the
    // required 1201 unchanged (tons do not move), so 30 more carried forward.
    let after = reconcile(&plant, "SO2-ANNUAL", "2025");
    assert_eq!(after["eligible_held"], 1280);
    assert_eq!(after["allowances_required"], before["allowances_required"]);
    assert_eq!(after["carried_forward"], 79);
    assert_eq!(after["by_vintage"][1]["held"], 480);
    // The position on 2025-06-30 (see position_states_its_projection_method): 1150 + 30 held, 868 - 30 to buy.
    let p = plant.json(&[
        "allowances",
        "position",
        "--program",
        "SO2-ANNUAL",
        "--as-of",
        "2025-06-30",
        "--format",
        "json",
    ]);
    assert_eq!(p["eligible_held"], 1180);
    assert_eq!(p["to_buy"], 838);

    // The corrected row again is a no-op, with or without --correct.
    let bytes = plant.ledger_bytes();
    for extra in [&[][..], &["--correct", "again"][..]] {
        let mut args = vec!["import", "allowances", "fix.csv"];
        args.extend_from_slice(extra);
        let out = plant.ok(&args);
        assert!(
            out.contains("nothing new: all 1 rows already present"),
            "{out}"
        );
        assert_eq!(plant.ledger_bytes(), bytes);
    }
    // The original file now differs from the version in force.
    let err = plant.refused(&["import", "allowances", "allowances.csv"]);
    assert!(err.contains("allowances.csv:3:6: field quantity"), "{err}");
    assert!(err.contains("held \"380\", here \"350\""), "{err}");

    // Both versions stay readable; the correction is in force.
    let h = plant.json(&["history", "transaction", "A25", "--format", "json"]);
    let v = h["versions"].as_array().unwrap();
    assert_eq!(v.len(), 2);
    let quantity = |i: usize| v[i]["values"]["quantity"].as_str().unwrap().to_string();
    assert_eq!((quantity(0), quantity(1)), ("350".into(), "380".into()));
    assert_eq!(v[0]["in_force"], false);
    assert_eq!(v[0]["superseded_by"], 2);
    assert_eq!(v[0]["source"]["file"], "allowances.csv");
    assert_eq!(v[0]["source"]["line"], 3);
    assert_eq!(v[1]["in_force"], true);
    assert_eq!(v[1]["source"]["file"], "fix.csv");
    assert_eq!(v[1]["source"]["line"], 2);
    // SHA-256 (FIPS 180-4, by the sha2 crate) of the file as written.
    let sha = sha2::Sha256::digest(format!("{HEADER}{A25_FIXED}").as_bytes());
    let hex: String = sha.iter().map(|b| format!("{b:02x}")).collect();
    assert_eq!(v[1]["source"]["sha256"], hex);
    assert_eq!(v[1]["import"]["imported_by"], "tester");
    assert_eq!(v[1]["supersedes"]["version"], 1);
    assert_eq!(v[1]["supersedes"]["reason"], "registry statement shows 380");
    assert_eq!(
        v[1]["values"]["seq"], v[0]["values"]["seq"],
        "a correction keeps its place"
    );
    let text = plant.ok(&["history", "transaction", "A25"]);
    assert!(text.contains("2 versions, version 2 in force"), "{text}");
    assert!(
        text.contains("IN FORCE") && text.contains("version 1: registry statement shows 380"),
        "{text}"
    );
}

#[test]
fn a_correction_that_would_overdraw_is_refused_naming_its_line() {
    let plant = Plant::new();
    // P-GEN bought 150 and sold 20 on 2025-08-01: buying 10 leaves the sale
    // short; selling 200 of 150 overdraws at once. Line 2 alone is fine, but
    // the import is all or nothing.
    plant.write(
        "over.csv",
        &format!(
            "{HEADER}{A25_FIXED}\
             BUY,2025-04-10,transfer,SO2-ANNUAL,2025,10,MKT,P-GEN,400.00,purchase\n\
             SALE,2025-08-01,transfer,SO2-ANNUAL,2025,200,P-GEN,MKT,450.00,sale\n"
        ),
    );
    let err = plant.refused(&["import", "allowances", "over.csv", "--correct", "typo"]);
    assert!(
        err.contains(
            "over.csv:3:2: field date: dated 2025-04-10, it would refuse transaction SALE"
        ),
        "{err}"
    );
    assert!(err.contains("held 10, asked 20"), "{err}");
    assert!(err.contains("over.csv:4:6: field quantity"), "{err}");
    assert!(err.contains("held 150, asked 200"), "{err}");
    assert!(!err.contains("over.csv:2:"), "{err}");
    // An id twice in a correcting file is refused, naming both lines.
    plant.write("twice.csv", &format!("{HEADER}{A25_FIXED}{A25_FIXED}"));
    let err = plant.refused(&["import", "allowances", "twice.csv", "--correct", "typo"]);
    assert!(err.contains("twice.csv:3:1: field id"), "{err}");
    assert!(err.contains("on lines 2 and 3"), "{err}");
    // A reason is required: an empty one is a usage error.
    assert_eq!(
        plant
            .run(&["import", "allowances", "over.csv", "--correct", " "])
            .0,
        2
    );
}

#[test]
fn settled_and_certified_years_guard_their_transactions() {
    let plant = Plant::new();
    plant.ok(&[
        "allowances",
        "settle",
        "--program",
        "NOX-OZONE",
        "--year",
        "2025",
    ]);
    plant.verified();
    // N25 counts in the NOx year 2025 the settlement froze.
    plant.write(
        "nox.csv",
        &format!("{HEADER}N25,2025-02-01,allocation,NOX-OZONE,2025,60,,P-COMP,,\n"),
    );
    let err = plant.refused(&["import", "allowances", "nox.csv", "--correct", "typo"]);
    assert!(err.contains("nox.csv:2:2: field date"), "{err}");
    assert!(
        err.contains("program NOX-OZONE, year 2025 is settled (on 2026-03-10T09:00:00Z by tester)"),
        "{err}"
    );
    assert!(err.contains("frozen"), "{err}");

    plant.ok(&[
        "certify",
        "--year",
        "2025",
        "--by",
        "A. Official",
        "--out",
        "receipt.json",
    ]);
    let report = || plant.json(&["report", "annual", "--year", "2025", "--format", "json"]);
    assert_eq!(report()["certification"]["amended"], false);
    plant.write("fix.csv", &format!("{HEADER}{A25_FIXED}"));
    let err = plant.refused(&["import", "allowances", "fix.csv", "--correct", "registry"]);
    assert!(
        err.contains("year 2025 is certified (by A. Official"),
        "{err}"
    );
    assert!(err.contains("--amend"), "{err}");
    assert_eq!(
        plant.run(&["import", "allowances", "fix.csv", "--amend"]).0,
        2
    );
    // A correction moving A26 out of 2025 touches 2025 too (its held version).
    plant.write(
        "move.csv",
        &format!("{HEADER}A26,2026-01-05,allocation,SO2-ANNUAL,2026,500,,P-COMP,,future\n"),
    );
    let err = plant.refused(&["import", "allowances", "move.csv", "--correct", "date"]);
    assert!(err.contains("year 2025 is certified"), "{err}");
    // A correction of 2024 alone needs no --amend: only 2025 is certified.
    plant.write(
        "a24.csv",
        &format!("{HEADER}A24,2024-02-01,allocation,SO2-ANNUAL,2024,810,,P-COMP,,banked\n"),
    );
    plant.ok(&[
        "import",
        "allowances",
        "a24.csv",
        "--correct",
        "registry 2024",
    ]);
    plant.verified();
    assert_eq!(report()["certification"]["amended"], false);

    let out = plant.ok(&[
        "import",
        "allowances",
        "fix.csv",
        "--correct",
        "registry",
        "--amend",
    ]);
    assert!(out.contains("1 corrected"), "{out}");
    plant.verified();
    let r = report();
    assert_eq!(r["certification"]["amended"], true);
    assert_eq!(r["certification"]["amendments"][0]["reason"], "registry");
    // 800 + 10 (A24) + 450 + 30 (A25) held at the deadline.
    assert_eq!(
        reconcile(&plant, "SO2-ANNUAL", "2025")["eligible_held"],
        1290
    );
}

#[test]
fn unknown_accounts_and_programs_are_refused_at_their_column() {
    let plant = Plant::new();
    let before = plant.ledger_bytes();
    plant.write(
        "unknown.csv",
        "id,date,kind,program,vintage,quantity,from,to,price,note\n\
         U1,2025-04-10,transfer,SO2-ANNUAL,2025,1,NOBODY,P-GEN,,\n\
         U2,2025-04-10,allocation,CO2-CAP,2025,1,,P-GEN,,\n\
         U3,2025-04-1,allocation,SO2-ANNUAL,2025,-1,,P-GEN,,\n",
    );
    let (code, _, err) = plant.run(&["import", "allowances", "unknown.csv"]);
    assert_eq!(code, 1);
    assert!(
        err.contains("unknown.csv:4:2: field date"),
        "parse errors come first: {err}"
    );
    assert!(err.contains("unknown.csv:4:6: field quantity"), "{err}");
    assert_eq!(plant.ledger_bytes(), before);
    plant.write(
        "unknown.csv",
        "id,date,kind,program,vintage,quantity,from,to,price,note\n\
         U1,2025-04-10,transfer,SO2-ANNUAL,2025,1,NOBODY,P-GEN,,\n\
         U2,2025-04-10,allocation,CO2-CAP,2025,1,,P-GEN,,\n",
    );
    let (code, _, err) = plant.run(&["import", "allowances", "unknown.csv"]);
    assert_eq!(code, 1);
    assert!(
        err.contains("unknown.csv:2:7: field from: no account \"NOBODY\""),
        "{err}"
    );
    assert!(
        err.contains("unknown.csv:3:4: field program: no program \"CO2-CAP\""),
        "{err}"
    );
    assert_eq!(plant.ledger_bytes(), before);
}

#[test]
fn settlement_writes_the_deductions_once() {
    let plant = Plant::new();
    let out = plant.ok(&[
        "allowances",
        "settle",
        "--program",
        "NOX-OZONE",
        "--year",
        "2025",
    ]);
    // 90 deducted for compliance, and the 30 offset allowances of vintage
    // 2026 (40 CFR 77.5(c)), of which 200 are held.
    assert!(
        out.contains("90 allowances deducted, offset 30 of 30 owed (0 outstanding)"),
        "{out}"
    );
    assert!(out.contains("Caution:"), "{out}");
    let r = reconcile(&plant, "NOX-OZONE", "2025");
    assert_eq!(r["settled"], true);
    assert_eq!(r["shortfall"], 10, "a settled year reconciles unchanged");
    assert_eq!(r["settlement"]["offset_deducted"], 30);
    let b = plant.json(&[
        "allowances",
        "balance",
        "--program",
        "NOX-OZONE",
        "--format",
        "json",
    ]);
    let held = |account: &str, vintage: i64| {
        b["balances"]
            .as_array()
            .unwrap()
            .iter()
            .find(|x| x["account"] == account && x["vintage"] == vintage)
            .map(|x| x["held"].as_i64().unwrap())
    };
    assert_eq!(held("P-COMP", 2026), Some(170));
    assert_eq!(held("P-COMP", 2024), None);
    assert_eq!(held("(retirement)", 2024), Some(40));
    assert_eq!(held("(retirement)", 2026), Some(30));

    let before = plant.ledger_bytes();
    let (code, _, err) = plant.run(&[
        "allowances",
        "settle",
        "--program",
        "NOX-OZONE",
        "--year",
        "2025",
    ]);
    assert_eq!(code, 1);
    assert!(err.contains("already settled"), "{err}");
    assert_eq!(plant.ledger_bytes(), before);

    // A settled year is closed: a late transfer into the account before its deadline is refused.
    plant.write(
        "late.csv",
        "id,date,kind,program,vintage,quantity,from,to,price,note\n\
         LATE,2026-02-01,transfer,NOX-OZONE,2025,1,MKT,P-COMP,,\n",
    );
    let (code, _, err) = plant.run(&["import", "allowances", "late.csv"]);
    assert_eq!(code, 1);
    assert!(
        err.contains("late.csv:2:2: field date: program NOX-OZONE, year 2025 is settled"),
        "{err}"
    );
    assert_eq!(plant.ledger_bytes(), before);
}

#[test]
fn a_year_with_nothing_to_deduct_settles_once_too() {
    let plant = Plant::new();
    // No fuel burned in 2024: zero tons, nothing deducted, all 800 banked.
    let r = reconcile(&plant, "SO2-ANNUAL", "2024");
    assert_eq!(r["emissions_tons"], "0");
    assert_eq!(r["carried_forward"], 800);
    let out = plant.ok(&[
        "allowances",
        "settle",
        "--program",
        "SO2-ANNUAL",
        "--year",
        "2024",
    ]);
    assert!(out.contains("0 transactions"), "{out}");
    let (code, _, err) = plant.run(&[
        "allowances",
        "settle",
        "--program",
        "SO2-ANNUAL",
        "--year",
        "2024",
    ]);
    assert_eq!(code, 1);
    assert!(err.contains("already settled"), "{err}");
    assert_eq!(reconcile(&plant, "SO2-ANNUAL", "2024")["settled"], true);
}

#[test]
fn the_annual_report_carries_each_programs_reconciliation() {
    let plant = Plant::new();
    let r = plant.json(&["report", "annual", "--year", "2025", "--format", "json"]);
    let programs = r["programs"].as_array().unwrap();
    assert_eq!(programs.len(), 2);
    assert_eq!(programs[0]["program"], "SO2-ANNUAL");
    assert_eq!(programs[0]["carried_forward"], 49);
    assert_eq!(programs[1]["shortfall"], 10);
    let table = plant.ok(&["report", "annual", "--year", "2025"]);
    assert!(table.contains("Allowance programs"), "{table}");
    assert!(table.contains("40000.00"), "{table}");
}

#[test]
fn position_states_its_projection_method() {
    let plant = Plant::new();
    // Records ending by 2025-06-30: 600 + 400.5 = 1000.5 tons over 181 days;
    // no 2024 history, so the run rate: 1000.5 × 365 / 181 = 2017.597 tons,
    // 2018 allowances; 800 + 350 eligible held then, so 868 to buy.
    let p = plant.json(&[
        "allowances",
        "position",
        "--program",
        "SO2-ANNUAL",
        "--as-of",
        "2025-06-30",
        "--format",
        "json",
    ]);
    assert_eq!(p["emissions_to_date_tons"], "1000.5");
    assert_eq!(p["days_elapsed"], 181);
    assert_eq!(p["projection_method"], "run-rate");
    assert_eq!(p["allowances_required"], 2018);
    assert_eq!(p["eligible_held"], 1150);
    assert_eq!(p["to_buy"], 868);
    let table = plant.ok(&[
        "allowances",
        "position",
        "--program",
        "SO2-ANNUAL",
        "--as-of",
        "2025-06-30",
    ]);
    assert!(table.contains("Projection: run-rate"), "{table}");
    assert!(table
        .trim_end()
        .lines()
        .last()
        .unwrap()
        .starts_with("Caution:"));
}

#[test]
fn serial_blocks_are_listed_by_account() {
    let plant = Plant::new();
    plant.write(
        "serials.csv",
        "id,date,kind,program,vintage,quantity,from,to,price,note,serial_from,serial_to\n\
         S-A,2025-01-10,allocation,SO2-ANNUAL,2025,10,,P-GEN,,,1001,1010\n\
         S-T,2025-01-11,transfer,SO2-ANNUAL,2025,4,P-GEN,P-COMP,,,1003,1006\n",
    );
    plant.ok(&["import", "allowances", "serials.csv"]);
    let s = plant.json(&[
        "allowances",
        "serials",
        "--account",
        "P-GEN",
        "--format",
        "json",
    ]);
    assert_eq!(
        s["blocks"],
        serde_json::json!([
            {"program": "SO2-ANNUAL", "vintage": 2025, "serial_from": 1001, "serial_to": 1002},
            {"program": "SO2-ANNUAL", "vintage": 2025, "serial_from": 1007, "serial_to": 1010}
        ])
    );
    plant.write(
        "serials2.csv",
        "id,date,kind,program,vintage,quantity,from,to,price,note,serial_from,serial_to\n\
         S-X,2025-01-12,transfer,SO2-ANNUAL,2025,2,P-GEN,P-COMP,,,1002,1003\n",
    );
    let (code, _, err) = plant.run(&["import", "allowances", "serials2.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("serial 1003"), "{err}");
}

#[test]
fn demo_settles_so2_and_reports_both_programs() {
    let dir = tempfile::tempdir().unwrap();
    let out = Command::cargo_bin("flue")
        .unwrap()
        .env("FLUE_NOW", "2026-03-10T09:00:00Z")
        .env("FLUE_USER", "tester")
        .args(["demo", "--format", "json", "--dir"])
        .arg(dir.path().join("d"))
        .output()
        .unwrap();
    assert!(out.status.success());
    let r: Value = serde_json::from_slice(&out.stdout).unwrap();
    let programs = r["programs"].as_array().unwrap();
    assert_eq!(programs.len(), 2);
    assert_eq!(programs[0]["program"], "SO2-ANNUAL");
    assert_eq!(programs[0]["settled"], true);
    assert_eq!(programs[1]["settled"], false);
}
