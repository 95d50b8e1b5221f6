//! The journal, `flue verify` and `flue certify` (issue 5), driven through
//! the binary. Tampering is done with rusqlite directly, as an outsider
//! would with sqlite3: drop the append-only triggers, change the rows, and
//! (for the data cases) put the triggers back exactly as they were, so that
//! only the journal can notice.

use assert_cmd::Command;
use rusqlite::Connection;
use rust_decimal::Decimal;
use serde_json::Value;
use std::cell::Cell;
use std::path::{Path, PathBuf};
use std::str::FromStr;

/// Tamper cases tried and detected by one test.
#[derive(Default)]
struct Tally {
    tried: Cell<usize>,
    detected: Cell<usize>,
}

impl Tally {
    fn tried(&self) {
        self.tried.set(self.tried.get() + 1);
    }
    fn detected(&self) {
        self.detected.set(self.detected.get() + 1);
    }
    fn report(&self, test: &str) {
        eprintln!(
            "audit: {test}: tamper_cases={} detected={}",
            self.tried.get(),
            self.detected.get()
        );
        assert_eq!(self.tried.get(), self.detected.get());
    }
}

fn flue(dir: &Path) -> Command {
    let mut c = Command::cargo_bin("flue").unwrap();
    c.current_dir(dir)
        .env("FLUE_NOW", "2026-01-20T10:00:00Z")
        .env("FLUE_USER", "audit-test")
        .env_remove("FLUE_LEDGER");
    c
}

/// Exit code, stdout, stderr.
fn run(dir: &Path, args: &[&str]) -> (i32, String, String) {
    let out = flue(dir).args(args).output().unwrap();
    (
        out.status.code().expect("exited, not killed by a signal"),
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

fn ok(dir: &Path, args: &[&str]) -> String {
    let (code, out, err) = run(dir, args);
    assert_eq!(code, 0, "flue {args:?} failed: {err}");
    out
}

/// The demo plant's ledger, built in a new directory.
fn demo() -> (tempfile::TempDir, PathBuf) {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("plant");
    ok(tmp.path(), &["demo", "--dir", dir.to_str().unwrap()]);
    (tmp, dir)
}

fn verify(dir: &Path, ledger: &str, receipt: Option<&str>) -> (i32, String, String) {
    let mut args = vec!["--ledger", ledger, "verify"];
    if let Some(r) = receipt {
        args.extend(["--receipt", r]);
    }
    run(dir, &args)
}

/// Copy the ledger, run `sql` on the copy with the append-only triggers of
/// `tables` dropped (put back afterwards unless `keep_dropped`), and expect
/// verify to fail naming `expect`.
fn tamper(tally: &Tally, dir: &Path, name: &str, tables: &[&str], sql: &str, expect: &str) {
    let copy = dir.join(format!("{name}.db"));
    std::fs::copy(dir.join("flue.db"), &copy).unwrap();
    {
        let conn = Connection::open(&copy).unwrap();
        let mut triggers = Vec::new();
        for t in tables {
            let mut stmt = conn
                .prepare(
                    "SELECT name, sql FROM sqlite_master WHERE type = 'trigger' AND tbl_name = ?1",
                )
                .unwrap();
            let found: Vec<(String, String)> = stmt
                .query_map([t], |r| Ok((r.get(0)?, r.get(1)?)))
                .unwrap()
                .collect::<Result<_, _>>()
                .unwrap();
            triggers.extend(found);
        }
        for (n, _) in &triggers {
            conn.execute_batch(&format!("DROP TRIGGER {n}")).unwrap();
        }
        conn.execute_batch(sql).unwrap();
        for (_, s) in &triggers {
            conn.execute_batch(s).unwrap();
        }
    }
    tally.tried();
    let (code, out, err) = verify(dir, copy.to_str().unwrap(), None);
    assert_eq!(code, 1, "{name}: verify passed a tampered ledger: {out}");
    assert!(
        err.contains(expect),
        "{name}: expected {expect:?} in: {err}"
    );
    tally.detected();
}

#[test]
fn verify_passes_on_the_demo_and_a_fresh_ledger_and_catches_every_tamper_case() {
    let tally = Tally::default();
    let (_tmp, dir) = demo();
    let (code, out, err) = verify(&dir, "flue.db", None);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("intact: 6 journal entries, head "), "{out}");

    let fresh = tempfile::tempdir().unwrap();
    ok(fresh.path(), &["init"]);
    let out = ok(fresh.path(), &["verify"]);
    assert!(out.contains("intact: 0 journal entries"), "{out}");

    // Demo entries: 1 site version, 2 analyses, 3 fuel, 4 hourly,
    // 5 allowance transactions, 6 settlement.
    let cases: &[(&str, &[&str], &str, &str)] = &[
        (
            "fuel-quantity",
            &["fuel_records"],
            "UPDATE fuel_records SET quantity = '51241' WHERE id = 1",
            "journal entry 3 (import-batch 2): rows edited",
        ),
        (
            // Hourly rows are packed 512 to a block (schema/0005_hourly_blocks.sql):
            // one byte changed inside block 8 changes a reading of one hour.
            "hourly-reading",
            &["hourly_blocks"],
            "UPDATE hourly_blocks SET rows = CAST(substr(rows, 1, 40) || X'7f' || substr(rows, 42) AS BLOB) WHERE id = 8",
            "journal entry 4 (import-batch 3): rows edited",
        ),
        (
            "allowance-quantity",
            &["allowance_transactions"],
            "UPDATE allowance_transactions SET quantity = quantity + 1 WHERE seq = 2",
            "journal entry 5 (allowance-transactions 4): rows edited",
        ),
        (
            "analysis-type-only",
            &["analyses"],
            "UPDATE analyses SET gcv = CAST(gcv AS REAL) WHERE id = 1",
            "journal entry 2 (import-batch 1): rows edited",
        ),
        (
            "analysis-to-null",
            &["analyses"],
            "UPDATE analyses SET hydrogen_pct = NULL WHERE id = 1",
            "journal entry 2 (import-batch 1): rows edited",
        ),
        (
            "site-source",
            &["site_versions"],
            "UPDATE site_versions SET source = source || ' ' WHERE id = 1",
            "journal entry 1 (site-version 1): rows edited",
        ),
        (
            "batch-sha256",
            &["import_batches"],
            "UPDATE import_batches SET sha256 = printf('%064d', 0) WHERE id = 2",
            "journal entry 3 (import-batch 2): rows edited",
        ),
        (
            "settlement-deducted",
            &["allowance_settlements"],
            "UPDATE allowance_settlements SET deducted = deducted - 1",
            "journal entry 6 (settlement 5): rows edited",
        ),
        (
            "fuel-delete",
            &["fuel_records"],
            "DELETE FROM fuel_records WHERE id = 7",
            "journal entry 3 (import-batch 2): fuel_records: 1 of its 39 rows deleted",
        ),
        (
            "hourly-delete-last",
            &["hourly_blocks"],
            "DELETE FROM hourly_blocks WHERE id = 18",
            "journal entry 4 (import-batch 3): hourly_blocks: 1 of its 18 rows deleted",
        ),
        (
            "fuel-insert",
            &[],
            "INSERT INTO fuel_records (batch_id, line, unit, start_date, end_date, fuel, quantity, uom, sample, corrects_id, reason)
             SELECT batch_id, 99, unit, start_date, end_date, fuel, '1', uom, sample, id, 'sneaky' FROM fuel_records WHERE id = 1",
            "fuel_records: 1 rows inserted behind the tool's back",
        ),
        (
            "unit-owner-insert",
            &[],
            "INSERT INTO unit_owners VALUES ('ZZ', 'MC1')",
            "unit_owners: 1 rows inserted behind the tool's back",
        ),
        (
            "journal-by",
            &["journal"],
            "UPDATE journal SET by = 'someone else' WHERE seq = 2",
            "journal entry 2 (import-batch 1): its hash does not match its columns",
        ),
        (
            "journal-range",
            &["journal_rows"],
            "UPDATE journal_rows SET row_count = 38, last_rowid = 38 WHERE seq = 3 AND table_name = 'fuel_records'",
            "journal entry 3 (import-batch 2): its hash does not match its columns",
        ),
        (
            "journal-last-entry-deleted",
            &["journal", "journal_rows"],
            "DELETE FROM journal_rows WHERE seq = 6; DELETE FROM journal WHERE seq = 6",
            "allowance_settlements: 1 rows inserted behind the tool's back",
        ),
        (
            "journal-middle-entry-deleted",
            &["journal", "journal_rows"],
            "DELETE FROM journal_rows WHERE seq = 3; DELETE FROM journal WHERE seq = 3",
            "journal entry 4 (import-batch 3): sequence number 4 where 3 was expected",
        ),
    ];
    for (name, tables, sql, expect) in cases {
        tamper(&tally, &dir, name, tables, sql, expect);
    }
    // Schema: a dropped trigger, an added one, a view swapped.
    let schema_cases: &[(&str, &str, &str)] = &[
        (
            "trigger-dropped",
            "DROP TRIGGER fuel_records_append_only_u",
            "schema changed: trigger fuel_records_append_only_u is missing",
        ),
        (
            "trigger-added",
            "CREATE TRIGGER quiet AFTER INSERT ON fuel_records BEGIN SELECT 1; END",
            "schema changed: trigger quiet is not ours",
        ),
        (
            "view-changed",
            "DROP VIEW current_fuel_records; CREATE VIEW current_fuel_records AS SELECT * FROM fuel_records",
            "schema changed: view current_fuel_records is changed",
        ),
    ];
    for (name, sql, expect) in schema_cases {
        let copy = dir.join(format!("{name}.db"));
        std::fs::copy(dir.join("flue.db"), &copy).unwrap();
        Connection::open(&copy).unwrap().execute_batch(sql).unwrap();
        tally.tried();
        let (code, _, err) = verify(&dir, copy.to_str().unwrap(), None);
        assert_eq!(code, 1, "{name}");
        assert!(
            err.contains(expect),
            "{name}: expected {expect:?} in: {err}"
        );
        tally.detected();
    }
    // Damaged and foreign files.
    let whole = std::fs::read(dir.join("flue.db")).unwrap();
    std::fs::write(dir.join("half.db"), &whole[..whole.len() / 2]).unwrap();
    std::fs::write(dir.join("tiny.db"), &whole[..50]).unwrap();
    std::fs::write(dir.join("empty.db"), b"").unwrap();
    std::fs::write(
        dir.join("text.db"),
        "unit,start\nK1,2025-01-01\n".repeat(20),
    )
    .unwrap();
    Connection::open(dir.join("foreign.db"))
        .unwrap()
        .execute_batch("CREATE TABLE fuel_records (id INTEGER PRIMARY KEY)")
        .unwrap();
    for (name, expect) in [
        ("half.db", "damaged"),
        ("tiny.db", "is not a flue ledger"),
        ("empty.db", "is not a flue ledger"),
        ("text.db", "damaged"),
        ("foreign.db", "is not a flue ledger"),
    ] {
        tally.tried();
        let (code, _, err) = verify(&dir, name, None);
        assert_eq!(code, 1, "{name}: {err}");
        assert!(
            err.contains(expect),
            "{name}: expected {expect:?} in: {err}"
        );
        tally.detected();
    }
    // The untouched ledger still verifies: the copies changed nothing.
    assert_eq!(verify(&dir, "flue.db", None).0, 0);
    tally.report("tamper");
}

fn report(dir: &Path) -> Value {
    serde_json::from_str(&ok(
        dir,
        &["report", "annual", "--year", "2025", "--format", "json"],
    ))
    .unwrap()
}

fn dec(v: &Value) -> Decimal {
    match v {
        Value::String(s) => Decimal::from_str(s).unwrap(),
        Value::Number(n) => Decimal::from_str(&n.to_string()).unwrap(),
        other => panic!("not a decimal: {other}"),
    }
}

#[test]
fn a_certified_year_refuses_a_correction_without_amend_and_accepts_it_with_amend() {
    let tally = Tally::default();
    let (_tmp, dir) = demo();
    std::fs::copy(dir.join("flue.db"), dir.join("before-certify.db")).unwrap();
    let out = ok(
        &dir,
        &[
            "certify",
            "--year",
            "2025",
            "--by",
            "Ada Official",
            "--statement",
            "true, accurate and complete",
            "--out",
            "receipt.json",
        ],
    );
    assert!(out.contains("year 2025 certified by Ada Official"), "{out}");
    let receipt: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("receipt.json")).unwrap()).unwrap();
    assert_eq!(receipt["entry_count"], 7);
    assert_eq!(receipt["year"], 2025);
    assert_eq!(receipt["format_version"], 1);
    // The receipt is never overwritten without --force, and a year certifies once.
    let (code, _, err) = run(
        &dir,
        &[
            "certify",
            "--year",
            "2025",
            "--by",
            "B",
            "--out",
            "receipt.json",
        ],
    );
    assert_eq!(code, 1);
    assert!(err.contains("already exists"), "{err}");
    let (code, _, err) = run(
        &dir,
        &[
            "certify",
            "--year",
            "2025",
            "--by",
            "B",
            "--out",
            "second.json",
        ],
    );
    assert_eq!(code, 1);
    assert!(err.contains("already certified"), "{err}");
    assert!(!dir.join("second.json").exists());

    let before = report(&dir);
    assert_eq!(before["certification"]["by"], "Ada Official");
    assert_eq!(before["certification"]["amended"], false);
    let table = ok(&dir, &["report", "annual", "--year", "2025"]);
    assert!(
        table.contains("Certified by Ada Official on 2026-01-20T10:00:00Z"),
        "{table}"
    );
    let bytes_before = std::fs::read(dir.join("flue.db")).unwrap();

    // K1's January coal, re-read 100 tons higher (demo fuel.csv holds 51240).
    std::fs::write(
        dir.join("fix.csv"),
        "unit,start,end,fuel,quantity,uom,sample\nK1,2025-01-01,2025-01-31,bituminous,51340,ton,K1-C-2501\n",
    )
    .unwrap();
    let (code, _, err) = run(
        &dir,
        &["import", "fuel", "fix.csv", "--correct", "meter re-read"],
    );
    assert_eq!(code, 1, "{err}");
    assert!(
        err.contains("year 2025 is certified (by Ada Official"),
        "{err}"
    );
    assert!(err.contains("--amend"), "{err}");
    assert_eq!(
        std::fs::read(dir.join("flue.db")).unwrap(),
        bytes_before,
        "a refused import wrote"
    );
    assert_eq!(report(&dir), before);
    // --amend needs --correct: a usage error.
    assert_eq!(run(&dir, &["import", "fuel", "fix.csv", "--amend"]).0, 2);

    let out = ok(
        &dir,
        &[
            "import",
            "fuel",
            "fix.csv",
            "--correct",
            "meter re-read",
            "--amend",
        ],
    );
    assert!(out.contains("1 corrected"), "{out}");
    let after = report(&dir);
    assert_eq!(after["certification"]["amended"], true);
    assert_eq!(
        after["certification"]["amendments"][0]["reason"],
        "meter re-read"
    );
    let table = ok(&dir, &["report", "annual", "--year", "2025"]);
    assert!(
        table.contains("; amended on 2026-01-20T10:00:00Z by audit-test (meter re-read)"),
        "{table}"
    );
    // 100 tons more coal: heat input 100 × 2000 lb × 12,110 Btu/lb ÷ 10^6 =
    // 2,422 MMBtu (quantity × GCV, DESIGN.md heat_input `fuel`); SO2 by mass
    // balance 100 × 2000 × 1.92 % × 2 lb SO2 per lb S ÷ 2000 = 3.84 tons;
    // NOx 100 tons × 12 lb/ton (the site file's factor) ÷ 2000 = 0.6 tons.
    let delta = |field: &str| dec(&after["totals"][field]) - dec(&before["totals"][field]);
    assert_eq!(delta("heat_input_mmbtu"), Decimal::from(2422));
    assert_eq!(delta("so2_tons"), Decimal::from_str("3.84").unwrap());
    assert_eq!(delta("nox_tons"), Decimal::from_str("0.6").unwrap());
    let k1 = |r: &Value| {
        r["units"]
            .as_array()
            .unwrap()
            .iter()
            .find(|u| u["unit"] == "K1")
            .unwrap()["so2_tons"]
            .clone()
    };
    assert_eq!(
        dec(&k1(&after)) - dec(&k1(&before)),
        Decimal::from_str("3.84").unwrap()
    );

    let out = ok(&dir, &["verify", "--receipt", "receipt.json"]);
    assert!(out.contains("intact: 9 journal entries"), "{out}");
    assert!(
        out.contains("receipt: year 2025 certified by Ada Official: entry 7 matches"),
        "{out}"
    );

    // A ledger cut back to before the certification fails against the receipt.
    tally.tried();
    let (code, _, err) = verify(&dir, "before-certify.db", Some("receipt.json"));
    assert_eq!(code, 1);
    assert!(err.contains("the ledger has 6 journal entries, the receipt expects at least 7 (1 missing since the receipt)"), "{err}");
    tally.detected();
    // A ledger with as many entries but another history fails too.
    let (other_tmp, other) = demo();
    ok(
        &other,
        &[
            "import",
            "fuel",
            &dir.join("fix.csv").display().to_string(),
            "--correct",
            "other",
        ],
    );
    tally.tried();
    let receipt_path = dir.join("receipt.json").display().to_string();
    let (code, _, err) = verify(&other, "flue.db", Some(&receipt_path));
    assert_eq!(code, 1);
    assert!(
        err.contains("journal entry 7 has another hash than the receipt's"),
        "{err}"
    );
    tally.detected();
    drop(other_tmp);

    // Another certified year refuses a record dated in it.
    let (code, _, err) = run(
        &dir,
        &[
            "certify",
            "--year",
            "2024",
            "--by",
            "Ada Official",
            "--out",
            "r2024.json",
        ],
    );
    assert_eq!(code, 0, "{err}");
    std::fs::write(
        dir.join("late.csv"),
        "unit,start,end,fuel,quantity,uom,sample\nK1,2024-12-01,2024-12-31,bituminous,10,ton,K1-C-2501\n",
    )
    .unwrap();
    let (code, _, err) = run(&dir, &["import", "fuel", "late.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("year 2024 is certified"), "{err}");
    assert_eq!(verify(&dir, "flue.db", None).0, 0);

    // A site version is no import, so loading one is not refused; one that
    // changes a certified figure (K1's NOx factor) leaves a certification
    // with no amendment to explain it, and verify says so.
    let (third_tmp, third) = demo();
    ok(
        &third,
        &[
            "certify",
            "--year",
            "2025",
            "--by",
            "Ada Official",
            "--out",
            "r.json",
        ],
    );
    let site = std::fs::read_to_string(third.join("site.toml")).unwrap();
    assert!(site.contains("factor = \"12\""));
    std::fs::write(
        third.join("site2.toml"),
        site.replacen("factor = \"12\"", "factor = \"13\"", 1),
    )
    .unwrap();
    ok(&third, &["site", "load", "site2.toml"]);
    tally.tried();
    let (code, _, err) = verify(&third, "flue.db", None);
    assert_eq!(code, 1);
    assert!(err.contains("certified report of 2025 (by Ada Official on 2026-01-20T10:00:00Z) no longer reproduces its digest"), "{err}");
    tally.detected();
    drop(third_tmp);
    tally.report("certified");
}
