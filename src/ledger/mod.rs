//! The ledger: one SQLite file, and all the SQL of the project.
//!
//! Invariants: every writing command is one `BEGIN IMMEDIATE` transaction
//! (RELIABILITY.md R1); the journal is a rollback journal with
//! `synchronous=FULL` (R2: WAL can die with SIGBUS when the disk fills);
//! foreign keys are on; a file that is not ours is refused (R3); input rows
//! are only ever inserted.

mod allowances;
mod as_of;
mod blocks;
mod history;
mod hourly;
mod journal;
pub mod migrations;
mod rows;

pub use allowances::{
    AllowanceReads, NewCorrection, NewSettlement, StoredSettlement, StoredTransaction,
};
pub use as_of::{AsOfEntry, AsOfError, AsOfPoint};
pub use blocks::{BlockBuilder, BLOCK_ROWS};
pub use history::{Fields, HistoryReads, Provenance, StoredVersion};
pub use hourly::{HeldHours, HourSource, HourlyReads};
pub use journal::{
    schema_digest, Amendment, Certification, Certified, JournalReads, Problem, Verification,
};

use crate::crashpoint::crashpoint;
use migrations::{latest_version, APPLICATION_ID, MIGRATIONS};
use rusqlite::{config::DbConfig, Connection, ErrorCode, OpenFlags, TransactionBehavior};
use std::path::{Path, PathBuf};
use std::time::Duration;
use thiserror::Error;

pub use rows::{BatchSummary, NewBatch, Reads, SiteVersion};

/// The schema version that added the journal (schema/0004_journal.sql).
const JOURNAL_VERSION: i32 = 4;
/// The schema version that first keeps hourly rows in blocks (schema/0005_hourly_blocks.sql).
const BLOCKS_VERSION: i32 = 5;

/// Page cache of a write transaction, KiB.
const WRITE_CACHE_KIB: u32 = 64 * 1024;

/// How long a command waits for another process's write lock (RELIABILITY.md R2).
pub const BUSY_TIMEOUT: Duration = Duration::from_secs(5);

#[derive(Debug, Error)]
pub enum LedgerError {
    #[error("no ledger at {0} (run `flue init` to create one)")]
    NotFound(PathBuf),
    #[error("a file already exists at {0}; flue init never overwrites")]
    Exists(PathBuf),
    #[error("{0} is not a flue ledger")]
    NotALedger(PathBuf),
    #[error(
        "{path} was written by a newer flue (schema version {found}, this flue knows {known})"
    )]
    Newer {
        path: PathBuf,
        found: i32,
        known: i32,
    },
    #[error(
        "{path} predates this flue's journal (schema version {found}, this flue knows {known}); run any writing command once to upgrade it"
    )]
    Older {
        path: PathBuf,
        found: i32,
        known: i32,
    },
    #[error(
        "{0} holds hourly rows in the per-row layout of a development build of flue; this flue keeps them in blocks and will not drop them: re-import the hourly files into a new ledger"
    )]
    RowLayout(PathBuf),
    #[error("the ledger is locked by another process (waited {}s)", BUSY_TIMEOUT.as_secs())]
    Busy,
    #[error("the ledger is read-only: {0}")]
    ReadOnly(String),
    #[error("could not write the ledger: disk full or file too large")]
    Full,
    #[error(
        "not enough free disk space for this import: {free} bytes free on the filesystem of {dir}, about {needed} needed; nothing was written"
    )]
    NoSpace { dir: String, free: u64, needed: u64 },
    #[error("the ledger file is damaged: {0}")]
    Damaged(String),
    #[error("could not create {path}: {source}")]
    Create {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error(
        "year {year} is certified (by {by} on {at}); a change touching it needs --correct REASON --amend"
    )]
    Certified { year: i32, by: String, at: String },
    #[error("year {year} is already certified (by {by} on {at}); a change to it is an amendment: import with --correct REASON --amend")]
    AlreadyCertified { year: i32, by: String, at: String },
    #[error(transparent)]
    AsOf(#[from] as_of::AsOfError),
    #[error("ledger error: {0}")]
    Sqlite(rusqlite::Error),
}

impl From<rusqlite::Error> for LedgerError {
    fn from(e: rusqlite::Error) -> LedgerError {
        if let rusqlite::Error::SqliteFailure(f, msg) = &e {
            let msg = msg.clone().unwrap_or_else(|| f.to_string());
            return match f.code {
                ErrorCode::DatabaseBusy | ErrorCode::DatabaseLocked => LedgerError::Busy,
                ErrorCode::ReadOnly => LedgerError::ReadOnly(msg),
                ErrorCode::DiskFull => LedgerError::Full,
                ErrorCode::SystemIoFailure => LedgerError::Damaged(format!("I/O error: {msg}")),
                ErrorCode::DatabaseCorrupt | ErrorCode::NotADatabase => LedgerError::Damaged(msg),
                _ => LedgerError::Sqlite(e),
            };
        }
        LedgerError::Sqlite(e)
    }
}

pub type Result<T> = std::result::Result<T, LedgerError>;

pub struct Ledger {
    conn: Connection,
    path: PathBuf,
    /// The reason a write may touch a certified year (`--correct R --amend`).
    amend: Option<String>,
    /// The journal entry every read stops at (`--as-of`; src/ledger/as_of.rs).
    as_of: Option<i64>,
}

/// A write transaction. Dropped without `commit`, it rolls back.
pub struct Tx<'a> {
    tx: rusqlite::Transaction<'a>,
}

impl Ledger {
    /// Create a new, empty ledger. Refuses to touch an existing file.
    pub fn create(path: &Path) -> Result<Ledger> {
        create_private_file(path)?;
        let mut ledger = Ledger::connect(path)?;
        ledger.migrate()?;
        Ok(ledger)
    }

    /// Open an existing ledger, upgrading an older schema in one transaction.
    pub fn open(path: &Path) -> Result<Ledger> {
        if !path.is_file() {
            return Err(LedgerError::NotFound(path.to_path_buf()));
        }
        let mut ledger = Ledger::connect(path)?;
        let not_ours = |_| LedgerError::NotALedger(path.to_path_buf());
        let app_id: i32 = ledger
            .conn
            .query_row("PRAGMA application_id", [], |r| r.get(0))
            .map_err(not_ours)?;
        if app_id != APPLICATION_ID {
            return Err(LedgerError::NotALedger(path.to_path_buf()));
        }
        let version = ledger.user_version()?;
        if version > latest_version() {
            return Err(LedgerError::Newer {
                path: path.to_path_buf(),
                found: version,
                known: latest_version(),
            });
        }
        if version < latest_version() {
            ledger.migrate()?;
        }
        Ok(ledger)
    }

    fn connect(path: &Path) -> Result<Ledger> {
        // Never SQLITE_OPEN_CREATE: only `create` makes a file (RELIABILITY.md R3).
        let flags = OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        let conn = Connection::open_with_flags(path, flags)?;
        conn.busy_timeout(BUSY_TIMEOUT)?;
        conn.set_db_config(DbConfig::SQLITE_DBCONFIG_DEFENSIVE, true)?;
        conn.set_db_config(DbConfig::SQLITE_DBCONFIG_TRUSTED_SCHEMA, false)?;
        let journal: String = conn
            .query_row("PRAGMA journal_mode=DELETE", [], |r| r.get(0))
            .map_err(|e| match LedgerError::from(e) {
                LedgerError::Damaged(_) => LedgerError::NotALedger(path.to_path_buf()),
                other => other,
            })?;
        conn.execute_batch("PRAGMA synchronous=FULL; PRAGMA foreign_keys=ON;")?;
        // Test-only (tests/faults.rs): cap the file at N pages to stand in for a full disk.
        if let Some(pages) = std::env::var("FLUE_TEST_MAX_PAGES")
            .ok()
            .and_then(|v| v.parse::<u32>().ok())
        {
            conn.query_row(&format!("PRAGMA max_page_count = {pages}"), [], |_| Ok(()))?;
        }
        let synchronous: i64 = conn.query_row("PRAGMA synchronous", [], |r| r.get(0))?;
        // RELIABILITY.md C8: never run with a weaker durability setting.
        assert_eq!(synchronous, 2, "synchronous must be FULL");
        assert_eq!(journal, "delete", "journal_mode must be DELETE");
        Ok(Ledger {
            conn,
            path: path.to_path_buf(),
            amend: None,
            as_of: None,
        })
    }

    /// Open an existing ledger read-only, as `flue verify` does: nothing is
    /// migrated or written (RELIABILITY.md R3).
    pub fn open_read_only(path: &Path) -> Result<Ledger> {
        if !path.is_file() {
            return Err(LedgerError::NotFound(path.to_path_buf()));
        }
        recover_hot_journal(path);
        let not_ours = |e: rusqlite::Error| match LedgerError::from(e) {
            LedgerError::Damaged(why) => LedgerError::Damaged(why),
            _ => LedgerError::NotALedger(path.to_path_buf()),
        };
        let flags = OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        let conn = Connection::open_with_flags(path, flags)?;
        conn.busy_timeout(BUSY_TIMEOUT)?;
        conn.set_db_config(DbConfig::SQLITE_DBCONFIG_DEFENSIVE, true)?;
        conn.set_db_config(DbConfig::SQLITE_DBCONFIG_TRUSTED_SCHEMA, false)?;
        let app_id: i32 = conn
            .query_row("PRAGMA application_id", [], |r| r.get(0))
            .map_err(not_ours)?;
        if app_id != APPLICATION_ID {
            return Err(LedgerError::NotALedger(path.to_path_buf()));
        }
        let ledger = Ledger {
            conn,
            path: path.to_path_buf(),
            amend: None,
            as_of: None,
        };
        let version = ledger
            .user_version()
            .map_err(|_| LedgerError::NotALedger(path.to_path_buf()))?;
        if version > latest_version() {
            return Err(LedgerError::Newer {
                path: path.to_path_buf(),
                found: version,
                known: latest_version(),
            });
        }
        if version < latest_version() {
            return Err(LedgerError::Older {
                path: path.to_path_buf(),
                found: version,
                known: latest_version(),
            });
        }
        Ok(ledger)
    }

    /// Let the next writes touch a certified year, recording an amendment
    /// with this reason (`--correct REASON --amend`).
    pub fn set_amend(&mut self, reason: Option<String>) {
        self.amend = reason;
    }

    fn user_version(&self) -> Result<i32> {
        Ok(self
            .conn
            .query_row("PRAGMA user_version", [], |r| r.get(0))?)
    }

    fn migrate(&mut self) -> Result<()> {
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)?;
        let from: i32 = tx.query_row("PRAGMA user_version", [], |r| r.get(0))?;
        if (2..BLOCKS_VERSION).contains(&from) {
            let rows: bool =
                tx.query_row("SELECT EXISTS (SELECT 1 FROM hourly)", [], |r| r.get(0))?;
            if rows {
                return Err(LedgerError::RowLayout(self.path.clone()));
            }
        }
        for (_, sql) in &MIGRATIONS[from as usize..] {
            tx.execute_batch(sql)?;
        }
        tx.execute_batch(&format!(
            "PRAGMA application_id = {APPLICATION_ID}; PRAGMA user_version = {};",
            latest_version()
        ))?;
        let tx = Tx { tx };
        if from > 0 && from < JOURNAL_VERSION {
            // A ledger made before the journal: one entry covers what it holds.
            let at = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
            tx.journal_existing(&at, "flue migration 0004_journal")?;
        }
        tx.tx.commit()?;
        Ok(())
    }

    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Refuse, before anything is written, an import of `input_bytes` that
    /// the ledger's filesystem may not have room for (RELIABILITY.md R14).
    ///
    /// The estimate is deliberately high: the rows may take twice the input
    /// (an hourly file grew the ledger by 1.14 times its size when measured
    /// here), the rollback journal may copy a quarter of the ledger (index
    /// pages rewritten), plus 1 MiB. Passing it is no promise: a write that
    /// still meets a full disk fails cleanly with `LedgerError::Full`.
    pub fn check_free_space(&self, input_bytes: u64) -> Result<()> {
        let ledger_bytes = std::fs::metadata(&self.path).map(|m| m.len()).unwrap_or(0);
        let needed = input_bytes
            .saturating_mul(2)
            .saturating_add(ledger_bytes / 4)
            .saturating_add(1 << 20);
        let dir = match self.path.parent() {
            Some(d) if !d.as_os_str().is_empty() => d,
            _ => Path::new("."),
        };
        match free_bytes(dir) {
            Some(free) if free < needed => Err(LedgerError::NoSpace {
                dir: dir.display().to_string(),
                free,
                needed,
            }),
            // Where the filesystem cannot say, the write itself is the check.
            _ => Ok(()),
        }
    }

    /// Run `f` in one `BEGIN IMMEDIATE` transaction; commit only if it succeeds.
    pub fn write<T, E: From<LedgerError>>(
        &mut self,
        f: impl FnOnce(&Tx) -> std::result::Result<T, E>,
    ) -> std::result::Result<T, E> {
        crashpoint("write-begin");
        // A write gets a 64 MiB page cache, so a large import does not spill
        // dirty pages (and sync the journal) mid-transaction; reads keep
        // SQLite's small default, so parallel report readers stay small.
        self.conn
            .execute_batch(&format!("PRAGMA cache_size=-{WRITE_CACHE_KIB};"))
            .map_err(LedgerError::from)?;
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(LedgerError::from)?;
        let tx = Tx { tx };
        let out = f(&tx)?;
        crashpoint("write-rows");
        // Every row the write added gets its journal entry in the same transaction.
        tx.journal_pending(self.amend.as_deref())?;
        crashpoint("write-journal");
        tx.tx.commit().map_err(LedgerError::from)?;
        crashpoint("write-commit");
        Ok(out)
    }
}

/// Bytes an unprivileged writer may still use on the filesystem holding `dir`.
#[cfg(unix)]
fn free_bytes(dir: &Path) -> Option<u64> {
    let s = rustix::fs::statvfs(dir).ok()?;
    Some(s.f_bavail.saturating_mul(s.f_frsize))
}

#[cfg(not(unix))]
fn free_bytes(_dir: &Path) -> Option<u64> {
    None
}

/// A write killed mid-commit leaves a hot rollback journal, which a
/// read-only connection cannot roll back (SQLite refuses the read). Let a
/// read-write connection do SQLite's own crash recovery first, which puts
/// back the state of the last commit and writes nothing new. Where that
/// cannot be done (read-only media), the read-only open reports the error.
fn recover_hot_journal(path: &Path) {
    let mut journal = path.as_os_str().to_owned();
    journal.push("-journal");
    let hot = std::fs::metadata(&journal).is_ok_and(|m| m.len() > 0);
    if !hot {
        return;
    }
    let flags = OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX;
    if let Ok(conn) = Connection::open_with_flags(path, flags) {
        let _ = conn.busy_timeout(BUSY_TIMEOUT);
        // Any read runs the recovery.
        let _ = conn.query_row("SELECT count(*) FROM sqlite_master", [], |r| {
            r.get::<_, i64>(0)
        });
    }
}

/// Create the ledger file with mode 0600, failing if anything is there.
fn create_private_file(path: &Path) -> Result<()> {
    let mut options = std::fs::OpenOptions::new();
    options.write(true).create_new(true);
    #[cfg(unix)]
    std::os::unix::fs::OpenOptionsExt::mode(&mut options, 0o600);
    match options.open(path) {
        Ok(_) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
            Err(LedgerError::Exists(path.to_path_buf()))
        }
        Err(source) => Err(LedgerError::Create {
            path: path.to_path_buf(),
            source,
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_migration_applies_to_an_empty_database() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("l.db");
        let ledger = Ledger::create(&path).unwrap();
        assert_eq!(ledger.user_version().unwrap(), latest_version());
        drop(ledger);
        Ledger::open(&path).unwrap();
    }

    #[test]
    fn foreign_and_empty_files_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let empty = dir.path().join("empty.db");
        std::fs::write(&empty, b"").unwrap();
        assert!(matches!(
            Ledger::open(&empty),
            Err(LedgerError::NotALedger(_))
        ));
        let foreign = dir.path().join("foreign.db");
        Connection::open(&foreign)
            .unwrap()
            .execute_batch("CREATE TABLE t(x)")
            .unwrap();
        assert!(matches!(
            Ledger::open(&foreign),
            Err(LedgerError::NotALedger(_))
        ));
        let text = dir.path().join("text.db");
        std::fs::write(
            &text,
            b"this is not a database at all, just some text padding it out",
        )
        .unwrap();
        assert!(matches!(
            Ledger::open(&text),
            Err(LedgerError::NotALedger(_))
        ));
        assert!(matches!(
            Ledger::open(&dir.path().join("missing.db")),
            Err(LedgerError::NotFound(_))
        ));
        assert!(!dir.path().join("missing.db").exists());
    }

    /// Child half of the test below: spill a big write into the ledger
    /// file with its rollback journal on disk, then die without rolling back.
    #[test]
    fn hot_journal_child() {
        let Ok(path) = std::env::var("FLUE_TEST_HOT_JOURNAL") else {
            return;
        };
        let conn = Connection::open(&path).unwrap();
        conn.execute_batch(
            "PRAGMA journal_mode=DELETE; PRAGMA cache_size=2; BEGIN;
             WITH RECURSIVE n(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM n WHERE i < 5000)
             INSERT INTO import_batches (id, kind, file_name, sha256, rows_added, rows_corrected, rows_present, imported_at, imported_by)
             SELECT i, 'fuel', 'f' || i || '.csv', printf('%064d', i), 0, 0, 0, 't', 'u' FROM n;",
        )
        .unwrap();
        std::process::abort();
    }

    #[test]
    fn a_hot_journal_left_by_a_killed_write_is_rolled_back_before_a_read_only_open() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("l.db");
        drop(Ledger::create(&path).unwrap());
        let before = std::fs::read(&path).unwrap();
        let status = std::process::Command::new(std::env::current_exe().unwrap())
            .args(["--exact", "ledger::tests::hot_journal_child", "--nocapture"])
            .env("FLUE_TEST_HOT_JOURNAL", &path)
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .status()
            .unwrap();
        assert!(!status.success(), "the child must die mid-write");
        let journal = dir.path().join("l.db-journal");
        assert!(
            std::fs::metadata(&journal).unwrap().len() > 0,
            "the child left a hot journal"
        );
        assert_ne!(
            std::fs::read(&path).unwrap(),
            before,
            "pages were spilled into the file"
        );
        let ledger = Ledger::open_read_only(&path).unwrap();
        let v = ledger.verify().unwrap();
        assert!(v.problems.is_empty(), "{:?}", v.problems);
        assert_eq!(v.entry_count, 0);
        drop(ledger);
        assert!(!journal.exists() || std::fs::metadata(&journal).unwrap().len() == 0);
    }

    /// A schema-4 ledger: the migrations before hourly blocks.
    fn version_4_ledger(path: &Path, hourly_row: bool) {
        let conn = Connection::open(path).unwrap();
        for (_, sql) in &MIGRATIONS[..4] {
            conn.execute_batch(sql).unwrap();
        }
        if hourly_row {
            conn.execute_batch(
                "INSERT INTO hourly (batch_id, line, unit_no, hour, op_time) VALUES (1, 2, 1, 480000, 100)",
            )
            .unwrap();
        }
        conn.execute_batch(&format!(
            "PRAGMA application_id = {APPLICATION_ID}; PRAGMA user_version = 4;"
        ))
        .unwrap();
    }

    #[test]
    fn per_row_hourly_tables_migrate_to_blocks_only_when_empty() {
        let dir = tempfile::tempdir().unwrap();
        let empty = dir.path().join("empty.db");
        version_4_ledger(&empty, false);
        let ledger = Ledger::open(&empty).unwrap();
        assert_eq!(ledger.user_version().unwrap(), latest_version());
        let tables: i64 = ledger
            .conn
            .query_row(
                "SELECT count(*) FROM sqlite_master WHERE name IN ('hourly', 'hourly_corrections')",
                [],
                |r| r.get(0),
            )
            .unwrap();
        assert_eq!(tables, 0);
        let v = ledger.verify().unwrap();
        assert!(v.problems.is_empty(), "{:?}", v.problems);

        let held = dir.path().join("held.db");
        version_4_ledger(&held, true);
        let before = std::fs::read(&held).unwrap();
        assert!(matches!(
            Ledger::open(&held),
            Err(LedgerError::RowLayout(_))
        ));
        assert_eq!(
            std::fs::read(&held).unwrap(),
            before,
            "a refused upgrade wrote"
        );
    }

    #[test]
    fn a_ledger_from_before_the_journal_upgrades_with_its_rows_journaled() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("old.db");
        {
            let conn = Connection::open(&path).unwrap();
            for (_, sql) in &MIGRATIONS[..3] {
                conn.execute_batch(sql).unwrap();
            }
            conn.execute_batch(&format!(
                "PRAGMA application_id = {APPLICATION_ID}; PRAGMA user_version = 3;
                 INSERT INTO import_batches VALUES (1,'fuel','f.csv',printf('%064d',0),0,0,0,'t','u',NULL);"
            ))
            .unwrap();
        }
        assert!(matches!(
            Ledger::open_read_only(&path),
            Err(LedgerError::Older { found: 3, .. })
        ));
        drop(Ledger::open(&path).unwrap());
        let ledger = Ledger::open_read_only(&path).unwrap();
        let v = ledger.verify().unwrap();
        assert_eq!(v.problems, vec![]);
        assert_eq!(v.entry_count, 1);
    }

    #[test]
    fn create_never_overwrites() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("l.db");
        std::fs::write(&path, b"keep me").unwrap();
        assert!(matches!(Ledger::create(&path), Err(LedgerError::Exists(_))));
        assert_eq!(std::fs::read(&path).unwrap(), b"keep me");
    }

    #[cfg(unix)]
    #[test]
    fn ledger_file_is_private() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("l.db");
        Ledger::create(&path).unwrap();
        assert_eq!(
            std::fs::metadata(&path).unwrap().permissions().mode() & 0o777,
            0o600
        );
    }

    #[test]
    fn input_tables_refuse_update_and_delete() {
        let dir = tempfile::tempdir().unwrap();
        let ledger = Ledger::create(&dir.path().join("l.db")).unwrap();
        ledger
            .conn
            .execute_batch(
                "INSERT INTO import_batches VALUES (1,'fuel','f.csv',printf('%064d',0),0,0,0,'t','u',NULL);",
            )
            .unwrap();
        let err = ledger
            .conn
            .execute("UPDATE import_batches SET file_name = 'x'", [])
            .unwrap_err();
        assert!(err.to_string().contains("append-only"));
        let err = ledger
            .conn
            .execute("DELETE FROM import_batches", [])
            .unwrap_err();
        assert!(err.to_string().contains("append-only"));
    }
}
