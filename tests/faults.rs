//! Fault tests (RELIABILITY.md section 4; issue 5 item 7): what the ledger
//! does when a writer is killed, the write lock is held elsewhere, several
//! importers race, the disk fills, the file is immutable, or bits rot. Each
//! test prints its counts as `faults: ...` (run with `--nocapture` to see
//! them). Every exit status seen must be 0, 1 or 2 (DESIGN.md): a panic
//! (101) or a death by signal fails the test.
//!
//! Random choices come from a small xorshift generator; the seed is printed
//! and `FAULTS_SEED=N` replays a run.

use assert_cmd::cargo::cargo_bin;
use rusqlite::{types::ValueRef, Connection, OpenFlags};
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};
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

const NOW: &str = "2040-01-15T10:00:00Z";

struct Rng(u64);

impl Rng {
    fn new(test: &str) -> Rng {
        let seed = std::env::var("FAULTS_SEED")
            .ok()
            .and_then(|s| s.parse().ok())
            // A fixed default keeps CI repeatable and off the real clock;
            // FAULTS_SEED explores other sequences.
            .unwrap_or(2026);
        counts!("faults: {test} seed={seed}");
        Rng(seed | 1)
    }

    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }

    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

fn flue_cmd(ledger: &Path) -> Command {
    let mut c = Command::new(cargo_bin("flue"));
    c.env("FLUE_NOW", NOW)
        .env("FLUE_USER", "fault-tests")
        .env_remove("FLUE_LEDGER")
        .env_remove("FLUE_TEST_MAX_PAGES")
        .arg("--ledger")
        .arg(ledger);
    c
}

/// Run flue to the end; the exit status must be 0, 1 or 2.
fn flue(ledger: &Path, args: &[&str]) -> Output {
    let out = flue_cmd(ledger)
        .args(args)
        .stdin(Stdio::null())
        .output()
        .expect("run flue");
    let code = out.status.code();
    assert!(
        matches!(code, Some(0..=2)),
        "flue {args:?} ended with {:?} (a panic or a signal):\n{}",
        out.status,
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

fn text(out: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    )
}

fn verify_ok(ledger: &Path) {
    let out = flue(ledger, &["verify"]);
    assert_eq!(out.status.code(), Some(0), "verify failed: {}", text(&out));
}

/// The demo plant in a new directory: `dir/demo/flue.db` and its files.
fn demo(dir: &Path) -> PathBuf {
    let d = dir.join("demo");
    let out = flue_cmd(&dir.join("unused.db"))
        .args(["demo", "--dir"])
        .arg(&d)
        .output()
        .expect("run flue demo");
    assert_eq!(out.status.code(), Some(0), "demo: {}", text(&out));
    d
}

fn read_only(ledger: &Path) -> Connection {
    Connection::open_with_flags(
        ledger,
        OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX,
    )
    .expect("open read-only")
}

fn count(ledger: &Path, sql: &str) -> i64 {
    read_only(ledger)
        .query_row(sql, [], |r| r.get(0))
        .expect("count rows")
}

/// The demo's K2 year moved to 2026 onward, one year after another, cut at
/// `rows` rows.
fn shifted_hourly(demo: &Path, rows: usize) -> String {
    let src = std::fs::read_to_string(demo.join("hourly-k2.csv")).expect("demo hourly");
    let mut lines = src.lines();
    let header = lines.next().expect("header");
    let body: Vec<&str> = lines.collect();
    let mut out = String::with_capacity(rows * 70);
    out.push_str(header);
    out.push('\n');
    let mut n = 0;
    'years: for year in 2026.. {
        for line in &body {
            if n == rows {
                break 'years;
            }
            // "K2,2025-..." → "K2,YYYY-..."
            let (unit, rest) = line.split_once(',').expect("unit column");
            out.push_str(&format!("{unit},{year}{}\n", &rest[4..]));
            n += 1;
        }
    }
    out
}

/// (a) kill -9 of a large hourly import at random moments.
#[test]
fn kill9_during_a_large_hourly_import() {
    let tmp = TempDir::new().unwrap();
    let d = demo(tmp.path());
    let base = d.join("flue.db");
    let big = tmp.path().join("k2-2026-100k.csv");
    std::fs::write(&big, shifted_hourly(&d, 100_000)).unwrap();
    let before = count(
        &base,
        "SELECT coalesce(sum(row_count), 0) FROM hourly_blocks",
    );
    let big_s = big.to_str().unwrap().to_string();

    // How long one import takes here, to spread the kills over it.
    let probe = tmp.path().join("probe.db");
    std::fs::copy(&base, &probe).unwrap();
    let t = Instant::now();
    let out = flue(&probe, &["import", "hourly", &big_s]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let span = t.elapsed();
    assert_eq!(
        count(
            &probe,
            "SELECT coalesce(sum(row_count), 0) FROM hourly_blocks"
        ),
        before + 100_000
    );

    // At least KILLS kills inside the import (a run whose import ended
    // before the kill counts as a run, not a kill), at most MAX_RUNS runs.
    // Re-running to completion and then to "nothing new" costs two more
    // imports, so it is done on every RERUN_EVERY-th run (and on every run
    // whose import was already present); FAULTS_RERUN_EVERY=1 does it always.
    const KILLS: usize = 50;
    const MAX_RUNS: usize = 80;
    let rerun_every: usize = std::env::var("FAULTS_RERUN_EVERY")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(5)
        .max(1);
    let rng = Arc::new(std::sync::Mutex::new(Rng::new("kill9")));
    let window = span.as_micros() as u64 * 9 / 10 + 1;
    let next_run = Arc::new(AtomicUsize::new(0));
    let counters: Arc<[AtomicUsize; 5]> = Arc::new(Default::default());
    const KILLED: usize = 0;
    const PRESENT: usize = 1;
    const ABSENT: usize = 2;
    const RERUNS: usize = 3;
    const RUNS: usize = 4;
    let workers: Vec<_> = (0..2)
        .map(|_| {
            let (base, big_s, dir) = (base.clone(), big_s.clone(), tmp.path().to_path_buf());
            let (rng, next_run, c) = (rng.clone(), next_run.clone(), counters.clone());
            std::thread::spawn(move || loop {
                if c[KILLED].load(Ordering::SeqCst) >= KILLS {
                    break;
                }
                let run = next_run.fetch_add(1, Ordering::SeqCst);
                assert!(
                    run < MAX_RUNS,
                    "fewer than {KILLS} kills in {MAX_RUNS} runs"
                );
                let delay = Duration::from_micros(rng.lock().unwrap().below(window));
                let ledger = dir.join(format!("kill-{run}.db"));
                std::fs::copy(&base, &ledger).unwrap();
                let mut child = flue_cmd(&ledger)
                    .args(["--quiet", "import", "hourly", &big_s])
                    .stdin(Stdio::null())
                    .stdout(Stdio::null())
                    .stderr(Stdio::null())
                    .spawn()
                    .expect("spawn import");
                std::thread::sleep(delay);
                let _ = child.kill(); // SIGKILL; fails only if it has already ended
                let status = child.wait().unwrap();
                use std::os::unix::process::ExitStatusExt;
                match (status.code(), status.signal()) {
                    (None, Some(9)) => {
                        c[KILLED].fetch_add(1, Ordering::SeqCst);
                    }
                    (Some(0), _) => {}
                    other => panic!("import ended with {other:?} before the kill"),
                }
                c[RUNS].fetch_add(1, Ordering::SeqCst);
                verify_ok(&ledger);
                let rows = count(
                    &ledger,
                    "SELECT coalesce(sum(row_count), 0) FROM hourly_blocks",
                );
                let present = if rows == before + 100_000 {
                    c[PRESENT].fetch_add(1, Ordering::SeqCst);
                    true
                } else if rows == before {
                    c[ABSENT].fetch_add(1, Ordering::SeqCst);
                    false
                } else {
                    panic!(
                        "partial import after a kill at {delay:?}: {} of 100000 rows",
                        rows - before
                    );
                };
                if present || run % rerun_every == 0 {
                    c[RERUNS].fetch_add(1, Ordering::SeqCst);
                    if !present {
                        let out = flue(&ledger, &["import", "hourly", &big_s]);
                        assert_eq!(out.status.code(), Some(0), "re-run: {}", text(&out));
                        assert!(text(&out).contains("100000 new"), "{}", text(&out));
                    }
                    let out = flue(&ledger, &["import", "hourly", &big_s]);
                    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
                    assert!(
                        text(&out).contains("nothing new"),
                        "re-run after the complete import: {}",
                        text(&out)
                    );
                    assert_eq!(
                        count(
                            &ledger,
                            "SELECT coalesce(sum(row_count), 0) FROM hourly_blocks"
                        ),
                        before + 100_000
                    );
                }
                std::fs::remove_file(&ledger).unwrap();
            })
        })
        .collect();
    for w in workers {
        w.join().expect("a kill worker failed");
    }
    let get = |i: usize| counters[i].load(Ordering::SeqCst);
    assert!(get(KILLED) >= KILLS);
    assert_eq!(get(PRESENT) + get(ABSENT), get(RUNS));
    counts!(
        "faults: kill9 runs={} lost=0 partial=0 killed={} present={} absent={} reruns={} (one import {span:?})",
        get(RUNS),
        get(KILLED),
        get(PRESENT),
        get(ABSENT),
        get(RERUNS)
    );
}

/// A small fuel file of new records (April 2026) for the demo's units.
fn fuel_2026(d: &Path) -> PathBuf {
    let src = std::fs::read_to_string(d.join("fuel.csv")).unwrap();
    let mut out = String::new();
    for (i, line) in src.lines().enumerate() {
        if i == 0 {
            out.push_str(line);
            out.push('\n');
        } else if line.contains(",2025-01-01,2025-01-31,") {
            out.push_str(&line.replace(",2025-01-01,2025-01-31,", ",2026-01-01,2026-01-31,"));
            out.push('\n');
        }
    }
    let p = d.join("fuel-extra.csv");
    std::fs::write(&p, out).unwrap();
    p
}

/// (b) Another process holds the write lock past the busy timeout.
#[test]
fn a_held_write_lock_refuses_the_import_after_the_timeout() {
    let tmp = TempDir::new().unwrap();
    let d = demo(tmp.path());
    let ledger = d.join("flue.db");
    let csv = tmp.path().join("k2-2026.csv");
    std::fs::write(&csv, shifted_hourly(&d, 8760)).unwrap();
    let bytes = std::fs::read(&ledger).unwrap();

    let holder = Connection::open(&ledger).unwrap();
    holder.execute_batch("BEGIN IMMEDIATE").unwrap();
    let t = Instant::now();
    let out = flue(&ledger, &["import", "hourly", csv.to_str().unwrap()]);
    let waited = t.elapsed();
    holder.execute_batch("ROLLBACK").unwrap();
    drop(holder);

    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    assert!(
        text(&out).contains("locked"),
        "no lock message: {}",
        text(&out)
    );
    assert!(
        waited >= Duration::from_secs(5) && waited <= Duration::from_secs(8),
        "waited {waited:?}"
    );
    assert_eq!(std::fs::read(&ledger).unwrap(), bytes, "ledger changed");
    verify_ok(&ledger);
    counts!(
        "faults: busy waited={:.2}s exit=1 unchanged=1",
        waited.as_secs_f64()
    );
}

/// (c) 8 importers of 8 distinct analyses files at once, plus one file twice.
#[test]
fn concurrent_importers_lose_and_duplicate_nothing() {
    let tmp = TempDir::new().unwrap();
    let d = demo(tmp.path());
    let ledger = d.join("flue.db");
    let src = std::fs::read_to_string(d.join("analyses.csv")).unwrap();
    let rows_per_file = src.lines().count() - 1;
    let files: Vec<PathBuf> = (0..8)
        .map(|i| {
            let mut out = String::new();
            for (n, line) in src.lines().enumerate() {
                if n > 0 {
                    out.push_str(&format!("C{i}-"));
                }
                out.push_str(line);
                out.push('\n');
            }
            let p = tmp.path().join(format!("analyses-{i}.csv"));
            std::fs::write(&p, out).unwrap();
            p
        })
        .collect();
    let before = count(&ledger, "SELECT count(*) FROM analyses");
    // File 0 is imported twice, by two processes at once.
    let jobs: Vec<usize> = (0..8).chain(std::iter::once(0)).collect();
    let children: Vec<_> = jobs
        .iter()
        .map(|&i| {
            flue_cmd(&ledger)
                .args(["import", "analyses"])
                .arg(&files[i])
                .stdin(Stdio::null())
                .stdout(Stdio::piped())
                .stderr(Stdio::piped())
                .spawn()
                .expect("spawn importer")
        })
        .collect();
    let mut ok_files = [false; 8];
    let (mut ok, mut refused, mut nothing_new) = (0, 0, 0);
    for (child, &i) in children.into_iter().zip(&jobs) {
        let out = child.wait_with_output().unwrap();
        let code = out.status.code();
        assert!(
            matches!(code, Some(0..=2)),
            "importer ended {:?}",
            out.status
        );
        match code {
            Some(0) => {
                ok += 1;
                ok_files[i] = true;
                if text(&out).contains("nothing new") {
                    nothing_new += 1;
                }
            }
            _ => {
                assert!(
                    text(&out).contains("locked"),
                    "refused, but not for the lock: {}",
                    text(&out)
                );
                refused += 1;
            }
        }
    }
    verify_ok(&ledger);
    let conn = read_only(&ledger);
    let mut lost = 0;
    let mut stray = 0;
    for (i, done) in ok_files.iter().enumerate() {
        let n: i64 = conn
            .query_row(
                "SELECT count(*) FROM analyses WHERE sample LIKE ?1",
                [format!("C{i}-%")],
                |r| r.get(0),
            )
            .unwrap();
        if *done && n != rows_per_file as i64 {
            lost += 1;
        }
        if !*done && n != 0 {
            stray += 1;
        }
    }
    let duplicated: i64 = conn
        .query_row(
            "SELECT count(*) FROM (SELECT sample FROM analyses GROUP BY sample HAVING count(*) > 1)",
            [],
            |r| r.get(0),
        )
        .unwrap();
    let total: i64 = conn
        .query_row("SELECT count(*) FROM analyses", [], |r| r.get(0))
        .unwrap();
    let expected = before + ok_files.iter().filter(|d| **d).count() as i64 * rows_per_file as i64;
    counts!(
        "faults: concurrent importers=9 ok={ok} refused={refused} nothing_new={nothing_new} lost={lost} duplicated={duplicated} stray={stray}"
    );
    assert_eq!((lost, duplicated, stray), (0, 0, 0));
    assert_eq!(total, expected);
    assert!(ok >= 1, "no importer succeeded");
}

/// (d) A full disk, through the test-only `FLUE_TEST_MAX_PAGES` hook.
#[test]
fn a_full_disk_refuses_the_import_and_changes_nothing() {
    let tmp = TempDir::new().unwrap();
    let d = demo(tmp.path());
    let ledger = d.join("flue.db");
    let csv = tmp.path().join("k2-2026.csv");
    std::fs::write(&csv, shifted_hourly(&d, 8760)).unwrap();
    let pages: i64 = count(&ledger, "PRAGMA page_count");
    let bytes = std::fs::read(&ledger).unwrap();
    let out = flue_cmd(&ledger)
        .env("FLUE_TEST_MAX_PAGES", (pages + 8).to_string())
        .args(["import", "hourly"])
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    assert!(text(&out).contains("disk full"), "{}", text(&out));
    assert_eq!(std::fs::read(&ledger).unwrap(), bytes, "ledger changed");
    assert!(!d.join("flue.db-journal").exists(), "a journal was left");
    verify_ok(&ledger);
    // The same import goes through once there is room.
    let out = flue(&ledger, &["import", "hourly", csv.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    counts!(
        "faults: diskfull max_pages={} exit=1 unchanged=1",
        pages + 8
    );
}

/// Removes the immutable flag however the test ends.
struct Mutable(PathBuf);

impl Drop for Mutable {
    fn drop(&mut self) {
        let _ = Command::new("chattr").arg("-i").arg(&self.0).status();
    }
}

/// (e) An immutable ledger (`chattr +i`; root ignores file modes).
#[test]
fn an_immutable_ledger_refuses_writes_and_still_reads() {
    let tmp = TempDir::new().unwrap();
    let d = demo(tmp.path());
    let ledger = d.join("flue.db");
    let fuel = fuel_2026(&d);
    let made = Command::new("chattr").arg("+i").arg(&ledger).output();
    let _guard = Mutable(ledger.clone());
    match made {
        Ok(o) if o.status.success() => {}
        Ok(o) => {
            counts!(
                "faults: readonly skipped: chattr +i failed: {}",
                String::from_utf8_lossy(&o.stderr).trim()
            );
            return;
        }
        Err(e) => {
            counts!("faults: readonly skipped: no chattr: {e}");
            return;
        }
    }
    let bytes = std::fs::read(&ledger).unwrap();
    let out = flue(&ledger, &["import", "fuel", fuel.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    assert!(text(&out).contains("read-only"), "{}", text(&out));
    let report = flue(&ledger, &["report", "annual", "--year", "2025"]);
    assert_eq!(report.status.code(), Some(0), "{}", text(&report));
    verify_ok(&ledger);
    assert_eq!(std::fs::read(&ledger).unwrap(), bytes);
    drop(_guard);
    let out = flue(&ledger, &["import", "fuel", fuel.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    counts!("faults: readonly write=refused report=ok verify=ok");
}

/// Every table's rows, with their types, plus the schema and the header
/// fields a reader sees; `None` when the file cannot be read at all.
fn canonical_dump(path: &Path) -> Option<String> {
    let conn = Connection::open_with_flags(
        path,
        OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX,
    )
    .ok()?;
    let mut out = String::new();
    for pragma in ["application_id", "user_version"] {
        let v: i64 = conn
            .query_row(&format!("PRAGMA {pragma}"), [], |r| r.get(0))
            .ok()?;
        out.push_str(&format!("{pragma}={v}\n"));
    }
    let mut schema: Vec<(String, String, Option<String>)> = Vec::new();
    {
        let mut st = conn
            .prepare("SELECT type, name, sql FROM sqlite_master ORDER BY type, name")
            .ok()?;
        let rows = st
            .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
            .ok()?;
        for r in rows {
            schema.push(r.ok()?);
        }
    }
    for (kind, name, sql) in &schema {
        out.push_str(&format!("{kind} {name} {sql:?}\n"));
    }
    for (kind, name, _) in &schema {
        if kind != "table" || name.starts_with("sqlite_") {
            continue;
        }
        let mut st = conn
            .prepare(&format!("SELECT * FROM \"{name}\" ORDER BY rowid"))
            .ok()?;
        let n = st.column_count();
        let mut rows = st.query([]).ok()?;
        out.push_str(&format!("table {name}\n"));
        loop {
            let row = match rows.next() {
                Ok(Some(row)) => row,
                Ok(None) => break,
                Err(_) => return None,
            };
            for i in 0..n {
                match row.get_ref(i).ok()? {
                    ValueRef::Null => out.push_str("N|"),
                    ValueRef::Integer(v) => out.push_str(&format!("I{v}|")),
                    ValueRef::Real(v) => out.push_str(&format!("R{v:?}|")),
                    ValueRef::Text(t) => out.push_str(&format!("T{:?}|", t)),
                    ValueRef::Blob(b) => out.push_str(&format!("B{b:?}|")),
                }
            }
            out.push('\n');
        }
    }
    Some(out)
}

/// (f) Single-bit flips in a copy of a small ledger.
#[test]
fn bit_flips_never_pass_verify_unnoticed() {
    let tmp = TempDir::new().unwrap();
    let d = demo(tmp.path());
    // A small ledger: the demo's site, analyses and fuel records, no hourly data.
    let small = tmp.path().join("small.db");
    for args in [
        vec!["init".to_string()],
        vec![
            "site".into(),
            "load".into(),
            d.join("site.toml").display().to_string(),
        ],
        vec![
            "import".into(),
            "analyses".into(),
            d.join("analyses.csv").display().to_string(),
        ],
        vec![
            "import".into(),
            "fuel".into(),
            d.join("fuel.csv").display().to_string(),
        ],
    ] {
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let out = flue(&small, &args);
        assert_eq!(out.status.code(), Some(0), "{args:?}: {}", text(&out));
    }
    verify_ok(&small);
    let original = std::fs::read(&small).unwrap();
    let reference = canonical_dump(&small).expect("the original reads");
    let mut rng = Rng::new("bitflips");
    const FLIPS: usize = 300;
    let (mut detected, mut no_effect, mut undetected) = (0, 0, 0);
    let copy = tmp.path().join("flipped.db");
    for _ in 0..FLIPS {
        let mut bytes = original.clone();
        let at = rng.below(bytes.len() as u64) as usize;
        let bit = rng.below(8) as u8;
        bytes[at] ^= 1 << bit;
        std::fs::write(&copy, &bytes).unwrap();
        let changed = canonical_dump(&copy).as_ref() != Some(&reference);
        let out = flue(&copy, &["verify"]); // asserts exit 0, 1 or 2
        let passed = out.status.code() == Some(0);
        match (changed, passed) {
            (false, _) => no_effect += 1,
            (true, false) => detected += 1,
            (true, true) => {
                undetected += 1;
                eprintln!("undetected: byte {at} bit {bit}");
                if let Ok(dir) = std::env::var("FAULTS_KEEP") {
                    std::fs::write(Path::new(&dir).join("original.db"), &original).unwrap();
                    std::fs::write(Path::new(&dir).join("undetected.db"), &bytes).unwrap();
                }
            }
        }
        assert_eq!(
            std::fs::read(&copy).unwrap(),
            bytes,
            "verify wrote to the ledger"
        );
    }
    counts!(
        "faults: bitflips={FLIPS} detected={detected} no_effect={no_effect} undetected={undetected} (ledger {} bytes)",
        original.len()
    );
    assert_eq!(undetected, 0);
}

/// One writing command of each kind, with input that adds to the demo
/// ledger: (kind, arguments).
fn writing_commands(d: &Path, receipt: &Path) -> Vec<(&'static str, Vec<String>)> {
    let s = |p: &Path| p.display().to_string();
    let analyses = {
        let src = std::fs::read_to_string(d.join("analyses.csv")).unwrap();
        let mut out = String::new();
        for (n, line) in src.lines().enumerate() {
            if n > 0 {
                out.push_str("CP-");
            }
            out.push_str(line);
            out.push('\n');
        }
        let p = d.join("analyses-extra.csv");
        std::fs::write(&p, out).unwrap();
        p
    };
    let hourly = d.join("hourly-extra.csv");
    std::fs::write(&hourly, shifted_hourly(d, 2000)).unwrap();
    let allowances = d.join("allowances-extra.csv");
    std::fs::write(
        &allowances,
        "id,date,kind,program,vintage,quantity,from,to,price,note,serial_from,serial_to\n\
         MC-A26-SO2,2026-03-13,allocation,SO2-ANNUAL,2026,17000,,MC1-COMPLIANCE,,2026 allocation (invented),260000001,260017000\n",
    )
    .unwrap();
    let site = d.join("site-renamed.toml");
    let text = std::fs::read_to_string(d.join("site.toml")).unwrap();
    std::fs::write(
        &site,
        text.replace(
            "name = \"Marrow Creek Station\"",
            "name = \"Marrow Creek Generating Station\"",
        ),
    )
    .unwrap();
    let fuel = fuel_2026(d);
    let v = |a: &[&str]| a.iter().map(|x| x.to_string()).collect::<Vec<_>>();
    vec![
        ("fuel", v(&["import", "fuel", &s(&fuel)])),
        ("analyses", v(&["import", "analyses", &s(&analyses)])),
        ("hourly", v(&["import", "hourly", &s(&hourly)])),
        ("allowances", v(&["import", "allowances", &s(&allowances)])),
        ("site", v(&["site", "load", &s(&site)])),
        (
            "certify",
            v(&[
                "certify",
                "--year",
                "2025",
                "--by",
                "A. Tester",
                "--out",
                &s(receipt),
            ]),
        ),
    ]
}

fn died_by(status: &std::process::ExitStatus) -> Option<i32> {
    use std::os::unix::process::ExitStatusExt;
    status.signal()
}

/// (g) Every named crash point of a write (src/crashpoint.rs), for every
/// kind of writing command: the process aborts there; afterwards the ledger
/// holds what it held before (or, past COMMIT, all of the write), verifies,
/// and the same command run again completes it exactly once.
#[test]
fn every_crash_point_of_every_write_leaves_all_or_nothing() {
    const POINTS: [&str; 4] = ["write-begin", "write-rows", "write-journal", "write-commit"];
    let tmp = TempDir::new().unwrap();
    let d = demo(tmp.path());
    let base = d.join("flue.db");
    let receipt = tmp.path().join("receipt.json");
    let before = canonical_dump(&base).expect("the demo ledger reads");
    let (mut tried, mut rolled_back, mut committed) = (0, 0, 0);
    for (kind, args) in writing_commands(&d, &receipt) {
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        // The write done in full, for comparison.
        let reference = tmp.path().join(format!("{kind}-reference.db"));
        std::fs::copy(&base, &reference).unwrap();
        let out = flue(&reference, &args);
        assert_eq!(out.status.code(), Some(0), "{kind}: {}", text(&out));
        let after = canonical_dump(&reference).unwrap();
        assert_ne!(after, before, "{kind}: the command wrote nothing");
        let _ = std::fs::remove_file(&receipt);
        for point in POINTS {
            let ledger = tmp.path().join(format!("{kind}-{point}.db"));
            std::fs::copy(&base, &ledger).unwrap();
            let out = flue_cmd(&ledger)
                .env("FLUE_CRASH_AT", point)
                .args(&args)
                .stdin(Stdio::null())
                .output()
                .unwrap();
            tried += 1;
            assert_eq!(
                died_by(&out.status),
                Some(libc::SIGABRT),
                "{kind} at {point} did not abort: {:?} {}",
                out.status,
                text(&out)
            );
            assert!(out.stdout.is_empty(), "{kind} at {point} printed a result");
            assert!(!receipt.exists(), "{kind} at {point} wrote a receipt");
            verify_ok(&ledger);
            let now = canonical_dump(&ledger).unwrap();
            if point == "write-commit" {
                assert!(now == after, "{kind} at {point}: the commit is not whole");
                committed += 1;
            } else {
                assert!(now == before, "{kind} at {point}: the ledger changed");
                rolled_back += 1;
            }
            // Run again: the write lands once, whatever the crash left.
            let out = flue(&ledger, &args);
            if point != "write-commit" {
                assert_eq!(out.status.code(), Some(0), "{kind} re-run: {}", text(&out));
            }
            assert!(
                canonical_dump(&ledger).unwrap() == after,
                "{kind} re-run after {point} differs from one clean run"
            );
            verify_ok(&ledger);
            let _ = std::fs::remove_file(&receipt);
            std::fs::remove_file(&ledger).unwrap();
        }
    }
    counts!(
        "faults: crash_points tried={tried} aborted={tried} rolled_back={rolled_back} committed_whole={committed} partial=0 verify_failures=0"
    );
    assert_eq!(tried, 6 * POINTS.len());
}

/// (h) `--out` is written under a temporary name and renamed into place: a
/// crash before the rename leaves no report (or the old one, with
/// `--force`), never half of one; an existing file is kept without `--force`.
#[test]
fn out_files_appear_whole_or_not_at_all() {
    let tmp = TempDir::new().unwrap();
    let d = demo(tmp.path());
    let ledger = d.join("flue.db");
    let report = tmp.path().join("annual.csv");
    let report_s = report.to_str().unwrap();
    let args = ["report", "annual", "--year", "2025", "--format", "csv"];
    let stray = |dir: &Path| -> Vec<String> {
        std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.ends_with(".tmp"))
            .collect()
    };

    let full = flue(&ledger, &args);
    assert_eq!(full.status.code(), Some(0), "{}", text(&full));
    assert!(!full.stdout.is_empty());

    // A crash after the temporary file is written, before the rename.
    let crash = |force: bool| {
        let mut c = flue_cmd(&ledger);
        c.env("FLUE_CRASH_AT", "out-temp")
            .args(args)
            .args(["--out", report_s]);
        if force {
            c.arg("--force");
        }
        let out = c.stdin(Stdio::null()).output().unwrap();
        assert_eq!(died_by(&out.status), Some(libc::SIGABRT), "{}", text(&out));
    };
    crash(false);
    assert!(!report.exists(), "a crash before the rename left a report");
    // What the crash leaves is the hidden temporary file, whole.
    let left = stray(tmp.path());
    assert_eq!(left.len(), 1, "{left:?}");
    assert_eq!(
        std::fs::read(tmp.path().join(&left[0])).unwrap(),
        full.stdout
    );
    std::fs::remove_file(tmp.path().join(&left[0])).unwrap();

    // Written in full, then kept without --force.
    let out = flue(&ledger, &[&args[..], &["--out", report_s]].concat());
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    assert_eq!(std::fs::read(&report).unwrap(), full.stdout);
    std::fs::write(&report, "an older report\n").unwrap();
    let out = flue(&ledger, &[&args[..], &["--out", report_s]].concat());
    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    assert!(
        text(&out).contains("already exists; pass --force"),
        "{}",
        text(&out)
    );
    assert_eq!(std::fs::read(&report).unwrap(), b"an older report\n");

    // With --force, a crash keeps the old report whole; a run replaces it.
    crash(true);
    assert_eq!(std::fs::read(&report).unwrap(), b"an older report\n");
    for f in stray(tmp.path()) {
        std::fs::remove_file(tmp.path().join(f)).unwrap();
    }
    let out = flue(
        &ledger,
        &[&args[..], &["--out", report_s, "--force"]].concat(),
    );
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    assert_eq!(std::fs::read(&report).unwrap(), full.stdout);
    assert_eq!(
        stray(tmp.path()),
        Vec::<String>::new(),
        "a temporary file was left"
    );

    // A symlink at the name is refused without --force, its target untouched.
    let target = tmp.path().join("elsewhere.txt");
    std::fs::write(&target, "keep\n").unwrap();
    let link = tmp.path().join("link.csv");
    std::os::unix::fs::symlink(&target, &link).unwrap();
    let out = flue(
        &ledger,
        &[&args[..], &["--out", link.to_str().unwrap()]].concat(),
    );
    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    assert_eq!(std::fs::read(&target).unwrap(), b"keep\n");
    counts!("faults: atomic_out crashes=2 half_written=0 overwritten_without_force=0");
}

/// (i) SIGINT and SIGTERM at random moments of a large hourly import: the
/// default action ends the process; SQLite's rollback journal undoes the
/// open transaction at the next open, so the import is wholly absent or
/// wholly present, and the ledger verifies.
#[test]
fn sigint_and_sigterm_during_a_large_import_leave_all_or_nothing() {
    use std::os::unix::process::CommandExt;
    const ROWS: usize = 30_000;
    const RUNS_PER_SIGNAL: usize = 8;
    let tmp = TempDir::new().unwrap();
    let d = demo(tmp.path());
    let base = d.join("flue.db");
    let big = tmp.path().join("k2-2026-30k.csv");
    std::fs::write(&big, shifted_hourly(&d, ROWS)).unwrap();
    let big_s = big.to_str().unwrap();
    let before = count(
        &base,
        "SELECT coalesce(sum(row_count), 0) FROM hourly_blocks",
    );
    let entries = count(&base, "SELECT count(*) FROM journal");

    let probe = tmp.path().join("probe.db");
    std::fs::copy(&base, &probe).unwrap();
    let t = Instant::now();
    let out = flue(&probe, &["import", "hourly", big_s]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let window = t.elapsed().as_micros() as u64 * 9 / 10 + 1;

    let mut rng = Rng::new("signals");
    let mut summary = Vec::new();
    for (signal, name) in [(libc::SIGINT, "sigint"), (libc::SIGTERM, "sigterm")] {
        let (mut signalled, mut completed, mut absent, mut present) = (0, 0, 0, 0);
        for run in 0..RUNS_PER_SIGNAL {
            let ledger = tmp.path().join(format!("{name}-{run}.db"));
            std::fs::copy(&base, &ledger).unwrap();
            let mut cmd = flue_cmd(&ledger);
            cmd.args(["--quiet", "import", "hourly", big_s])
                .stdin(Stdio::null())
                .stdout(Stdio::null())
                .stderr(Stdio::null());
            // A shell that started this test in the background may have
            // left SIGINT ignored, and ignored signals pass through exec.
            // SAFETY: signal(2) is async-signal-safe and touches no memory of
            // the parent.
            unsafe {
                cmd.pre_exec(move || {
                    libc::signal(signal, libc::SIG_DFL);
                    Ok(())
                });
            }
            let mut child = cmd.spawn().expect("spawn import");
            std::thread::sleep(Duration::from_micros(rng.below(window)));
            // SAFETY: kill(2) on the pid of a child not yet waited for.
            unsafe { libc::kill(child.id() as libc::pid_t, signal) };
            let status = child.wait().unwrap();
            match (status.code(), died_by(&status)) {
                (None, Some(s)) if s == signal => signalled += 1,
                (Some(0), _) => completed += 1,
                other => panic!("{name}: import ended with {other:?}"),
            }
            verify_ok(&ledger);
            let rows = count(
                &ledger,
                "SELECT coalesce(sum(row_count), 0) FROM hourly_blocks",
            );
            let journal = count(&ledger, "SELECT count(*) FROM journal");
            if rows == before && journal == entries {
                absent += 1;
            } else if rows == before + ROWS as i64 && journal == entries + 1 {
                present += 1;
            } else {
                panic!(
                    "{name}: half a batch: {} rows, {journal} entries",
                    rows - before
                );
            }
            if run % 4 == 0 {
                let out = flue(&ledger, &["import", "hourly", big_s]);
                assert_eq!(out.status.code(), Some(0), "{}", text(&out));
                assert_eq!(
                    count(
                        &ledger,
                        "SELECT coalesce(sum(row_count), 0) FROM hourly_blocks"
                    ),
                    before + ROWS as i64
                );
            }
            std::fs::remove_file(&ledger).unwrap();
        }
        assert!(signalled > 0, "{name}: no run was interrupted");
        summary.push(format!(
            "{name} runs={RUNS_PER_SIGNAL} interrupted={signalled} completed={completed} absent={absent} present={present}"
        ));
    }
    counts!(
        "faults: signals {} partial=0 verify_failures=0",
        summary.join(" ")
    );
}
