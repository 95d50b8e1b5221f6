//! `flue report annual|quarter --as-of ENTRY|DATETIME`: a report made
//! after later imports, a correction and a certification must reproduce,
//! byte for byte, the report saved when the ledger stood at that entry,
//! apart from the as-of line each format adds.
//!
//! The plant is the invented demo plant's input files, with a copy of its
//! CEMS unit K2 as K3, so that the report runs two CEMS units and reads
//! them on parallel connections (src/assemble.rs), each of which must see
//! the same cut ledger.

use assert_cmd::Command;
use serde_json::Value;
use std::path::{Path, PathBuf};

const FORMATS: [&str; 4] = ["table", "json", "csv", "html"];

struct Plant {
    _tmp: tempfile::TempDir,
    dir: PathBuf,
}

impl Plant {
    fn flue(&self, now: &str) -> Command {
        let mut c = Command::cargo_bin("flue").unwrap();
        c.current_dir(&self.dir)
            .env("FLUE_NOW", now)
            .env("FLUE_USER", "as-of-test")
            .env("FLUE_LEDGER", self.dir.join("flue.db"));
        c
    }

    fn ok(&self, now: &str, args: &[&str]) -> String {
        let out = self.flue(now).args(args).output().unwrap();
        assert!(
            out.status.success(),
            "flue {args:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout).unwrap()
    }

    fn write(&self, name: &str, text: &str) {
        std::fs::write(self.dir.join(name), text).unwrap();
    }

    fn read(&self, name: &str) -> String {
        std::fs::read_to_string(self.dir.join(name)).unwrap()
    }
}

/// The demo's input files in a scratch directory, and an empty ledger.
fn plant() -> Plant {
    let tmp = tempfile::tempdir().unwrap();
    let demo = tmp.path().join("demo");
    let dir = tmp.path().join("plant");
    std::fs::create_dir(&dir).unwrap();
    let p = Plant { _tmp: tmp, dir };
    p.ok(
        "2026-01-01T00:00:00Z",
        &["demo", "--dir", demo.to_str().unwrap()],
    );
    for f in ["site.toml", "analyses.csv", "fuel.csv", "hourly-k2.csv"] {
        std::fs::copy(demo.join(f), p.dir.join(f)).unwrap();
    }
    p.ok("2026-01-01T00:00:00Z", &["init"]);
    p
}

fn lines(text: &str) -> Vec<&str> {
    text.lines().collect()
}

/// The K2 block of the demo site file, copied as K3.
fn with_k3(site: &str) -> String {
    let start = site
        .find("[[units]]\nid = \"K2\"")
        .expect("K2 in the demo site");
    let end = start + site[start..].find("\n# T1").expect("T1 follows K2");
    format!("{site}\n{}\n", site[start..end].replace("\"K2\"", "\"K3\""))
}

/// Remove the as-of line a format adds; it must be there exactly once and
/// name the entry's seq, time and hash.
fn without_as_of(format: &str, text: &str, seq: i64, at: &str, hash: &str) -> String {
    let sentence = format!(
        "As of journal entry {seq} (recorded {at}, hash {hash}): the ledger as it stood right after that entry; later entries are left out."
    );
    let count = |needle: &str| text.matches(needle).count();
    match format {
        "table" => {
            assert_eq!(count(&sentence), 1, "{text}");
            text.replacen(&format!("{sentence}\n\n"), "", 1)
        }
        "csv" => {
            let row: Vec<&str> = text.lines().filter(|l| l.starts_with("as-of,")).collect();
            assert_eq!(row.len(), 1, "{text}");
            assert!(row[0].contains(&sentence), "{}", row[0]);
            text.replacen(&format!("{}\n", row[0]), "", 1)
        }
        "json" => {
            let block = format!(
                "  \"as_of\": {{\n    \"seq\": {seq},\n    \"at\": \"{at}\",\n    \"hash\": \"{hash}\"\n  }},\n"
            );
            assert_eq!(count(&block), 1, "{text}");
            text.replacen(&block, "", 1)
        }
        "html" => {
            let open = format!(
                "<p class=\"status asof\" data-as-of-seq=\"{seq}\" data-as-of-at=\"{at}\" data-as-of-hash=\"{hash}\">"
            );
            assert_eq!(count(&open), 1, "{text}");
            let from = text.find(&open).unwrap();
            let to = from + text[from..].find("</p>").unwrap() + "</p>".len();
            assert!(text[from..to].contains(&format!("As of journal entry {seq}</strong>")));
            format!("{}{}", &text[..from], &text[to..])
        }
        _ => unreachable!(),
    }
}

fn report(p: &Plant, now: &str, extra: &[&str], format: &str) -> String {
    let mut args = vec!["report", "annual", "--year", "2025", "--format", format];
    args.extend_from_slice(extra);
    p.ok(now, &args)
}

fn quarter(p: &Plant, now: &str, extra: &[&str], format: &str) -> String {
    let mut args = vec![
        "report",
        "quarter",
        "--year",
        "2025",
        "--quarter",
        "1",
        "--format",
        format,
    ];
    args.extend_from_slice(extra);
    p.ok(now, &args)
}

fn entry(p: &Plant, seq: i64) -> (String, String) {
    let r: Value = serde_json::from_str(&report(
        p,
        "2026-02-01T00:00:00Z",
        &["--as-of", &seq.to_string()],
        "json",
    ))
    .unwrap();
    assert_eq!(r["as_of"]["seq"], seq);
    (
        r["as_of"]["at"].as_str().unwrap().to_string(),
        r["as_of"]["hash"].as_str().unwrap().to_string(),
    )
}

#[test]
fn an_as_of_report_reproduces_the_report_of_its_time() {
    let p = plant();
    let site = with_k3(&p.read("site.toml"));
    p.write("site.toml", &site);
    let fuel = p.read("fuel.csv");
    let (head, rest) = fuel.split_once('\n').unwrap();
    // January to November first; December's records arrive later.
    let (early, december): (Vec<&str>, Vec<&str>) = lines(rest)
        .into_iter()
        .partition(|l| !l.contains(",2025-12-"));
    assert!(!december.is_empty() && !early.is_empty());
    p.write("fuel-early.csv", &format!("{head}\n{}\n", early.join("\n")));
    p.write(
        "fuel-december.csv",
        &format!("{head}\n{}\n", december.join("\n")),
    );
    // The first 200 hours of K2, and the same readings for K3.
    let hourly = p.read("hourly-k2.csv");
    let hours: Vec<&str> = lines(&hourly).into_iter().take(201).collect();
    let k3: Vec<String> = hours[1..]
        .iter()
        .map(|l| l.replacen("K2,", "K3,", 1))
        .collect();
    p.write(
        "hours.csv",
        &format!("{}\n{}\n", hours.join("\n"), k3.join("\n")),
    );

    p.ok("2026-01-05T08:00:00Z", &["site", "load", "site.toml"]); // entry 1
    p.ok(
        "2026-01-06T08:00:00Z",
        &["import", "analyses", "analyses.csv"],
    ); // 2
    p.ok(
        "2026-01-06T08:00:00Z",
        &["import", "fuel", "fuel-early.csv"],
    ); // 3
    p.ok("2026-01-07T08:00:00Z", &["import", "hourly", "hours.csv"]); // 4
    let then: Vec<String> = FORMATS
        .iter()
        .map(|f| report(&p, "2026-01-07T09:00:00Z", &[], f))
        .collect();
    let then_quarter: Vec<String> = FORMATS
        .iter()
        .map(|f| quarter(&p, "2026-01-07T09:00:00Z", &[], f))
        .collect();

    // A corrected fuel record, a corrected hour, more records, a certification.
    let first = early[0];
    let mut cells: Vec<String> = first.split(',').map(str::to_string).collect();
    cells[4] = format!("{}1", cells[4]);
    p.write("fuel-fix.csv", &format!("{head}\n{}\n", cells.join(",")));
    p.ok(
        "2026-01-08T08:00:00Z",
        &[
            "import",
            "fuel",
            "fuel-fix.csv",
            "--correct",
            "scale re-read",
        ],
    ); // 5
    let mut hour: Vec<String> = hours[10].split(',').map(str::to_string).collect();
    hour[8] = "40000000".to_string();
    p.write(
        "hour-fix.csv",
        &format!("{}\n{}\n", hours[0], hour.join(",")),
    );
    p.ok(
        "2026-01-08T09:00:00Z",
        &[
            "import",
            "hourly",
            "hour-fix.csv",
            "--correct",
            "flow re-derived",
        ],
    ); // 6
    p.ok(
        "2026-01-09T08:00:00Z",
        &["import", "fuel", "fuel-december.csv"],
    ); // 7
    p.ok(
        "2026-01-10T08:00:00Z",
        &["certify", "--year", "2025", "--by", "A. Official"],
    ); // 8
    let now = report(&p, "2026-02-01T00:00:00Z", &[], "table");
    assert!(now.contains("Certified by A. Official"), "{now}");
    assert_ne!(now, then[0], "the later writes change the report");

    let (at, hash) = entry(&p, 4);
    assert_eq!(at, "2026-01-07T08:00:00Z");
    for (format, saved) in FORMATS.iter().zip(&then) {
        let as_of = report(&p, "2026-02-01T00:00:00Z", &["--as-of", "4"], format);
        assert_eq!(
            &without_as_of(format, &as_of, 4, &at, &hash),
            saved,
            "--as-of 4 --format {format}"
        );
        assert!(
            !as_of.contains("A. Official"),
            "a later certification shows"
        );
    }
    for (format, saved) in FORMATS.iter().zip(&then_quarter) {
        let as_of = quarter(&p, "2026-02-01T00:00:00Z", &["--as-of", "4"], format);
        assert_eq!(
            &without_as_of(format, &as_of, 4, &at, &hash),
            saved,
            "quarter --as-of 4 --format {format}"
        );
    }
    // At the head, the as-of report is today's report.
    let (at8, hash8) = entry(&p, 8);
    for format in FORMATS {
        let as_of = report(&p, "2026-02-01T00:00:00Z", &["--as-of", "8"], format);
        assert_eq!(
            without_as_of(format, &as_of, 8, &at8, &hash8),
            report(&p, "2026-02-01T00:00:00Z", &[], format)
        );
    }

    // By time: the last entry recorded at or before it.
    let seq_at = |when: &str| -> i64 {
        let r: Value = serde_json::from_str(&report(
            &p,
            "2026-02-01T00:00:00Z",
            &["--as-of", when],
            "json",
        ))
        .unwrap();
        r["as_of"]["seq"].as_i64().unwrap()
    };
    assert_eq!(seq_at("2026-01-07T08:00"), 4);
    assert_eq!(seq_at("2026-01-07T07:59:59Z"), 3);
    assert_eq!(seq_at("2026-01-06T09:00:00+01:00"), 3);
    assert_eq!(seq_at("2026-01-08T08:30:00"), 5);
    assert_eq!(seq_at("2030-01-01T00:00"), 8);
    let by_time = report(
        &p,
        "2026-02-01T00:00:00Z",
        &["--as-of", "2026-01-07T12:00"],
        "csv",
    );
    assert_eq!(without_as_of("csv", &by_time, 4, &at, &hash), then[2]);
}

#[test]
fn an_as_of_point_outside_the_journal_is_refused_and_nothing_is_written() {
    let p = plant();
    p.ok("2026-01-05T08:00:00Z", &["site", "load", "site.toml"]);
    p.ok(
        "2026-01-06T08:00:00Z",
        &["import", "analyses", "analyses.csv"],
    );
    let refused = |as_of: &str, expect: &str| {
        let out = p
            .flue("2026-02-01T00:00:00Z")
            .args([
                "report", "annual", "--year", "2025", "--out", "r.txt", "--as-of", as_of,
            ])
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        // DESIGN.md: exit 1 for a refused operation, message on stderr.
        assert_eq!(out.status.code(), Some(1), "{stderr}");
        assert!(stderr.contains(expect), "{stderr}");
        assert!(!Path::new(&p.dir.join("r.txt")).exists());
    };
    refused(
        "3",
        "--as-of 3: the journal has 2 entries, so entry 3 is beyond its head",
    );
    refused(
        "2026-01-05T07:59:59Z",
        "before the journal's first entry (entry 1, at 2026-01-05T08:00:00Z)",
    );
    // Not an entry or a time at all: a usage error (exit 2).
    let out = p
        .flue("2026-02-01T00:00:00Z")
        .args([
            "report",
            "quarter",
            "--year",
            "2025",
            "--quarter",
            "1",
            "--as-of",
            "last week",
        ])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("expected a journal entry number"));
    p.ok(
        "2026-02-01T00:00:00Z",
        &[
            "report", "annual", "--year", "2025", "--as-of", "2", "--out", "r.txt",
        ],
    );
    assert!(p.read("r.txt").contains("As of journal entry 2 "));
}
