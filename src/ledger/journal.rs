//! The journal: every write's rows, hash-chained, and the checks `flue
//! verify` runs against it.
//!
//! Invariants: `Ledger::write` journals every row its transaction added,
//! inside that transaction, so no committed row lacks an entry. An entry
//! covers, for each table, the rowids above those of every earlier entry:
//! rows are only ever inserted and SQLite gives a new row a rowid above the
//! largest held, so the ranges of successive entries never overlap. The
//! tables are read from the schema, so a table a later migration adds is
//! covered without being named here.

use super::migrations::{latest_version, APPLICATION_ID, MIGRATIONS};
use super::{Ledger, LedgerError, Reads, Result, Tx};
use crate::audit::{entry_hash, Canon, Entry, RowRange, Value, GENESIS_HASH};
use rusqlite::types::ValueRef;
use rusqlite::{params, Connection, OptionalExtension};
use std::collections::BTreeMap;

/// Tables the journal does not cover: itself, and SQLite's own.
pub(super) fn covered(name: &str) -> bool {
    name != "journal" && name != "journal_rows" && !name.starts_with("sqlite_")
}

pub(super) fn quoted(name: &str) -> String {
    format!("\"{}\"", name.replace('"', "\"\""))
}

/// The covered tables and their columns, by table name.
fn tables(conn: &Connection) -> Result<Vec<(String, Vec<String>)>> {
    let mut stmt =
        conn.prepare("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")?;
    let names: Vec<String> = stmt
        .query_map([], |r| r.get(0))?
        .collect::<rusqlite::Result<_>>()?;
    let mut out = Vec::new();
    for name in names.into_iter().filter(|n| covered(n)) {
        let mut info = conn.prepare(&format!("PRAGMA table_info({})", quoted(&name)))?;
        let columns: Vec<String> = info
            .query_map([], |r| r.get(1))?
            .collect::<rusqlite::Result<_>>()?;
        out.push((name, columns));
    }
    Ok(out)
}

/// SHA-256 over the rows of `ranges`: table, columns, count, then every
/// row's rowid and every column value, typed.
fn content_digest(
    conn: &Connection,
    columns_of: &BTreeMap<String, Vec<String>>,
    ranges: &[RowRange],
) -> Result<(String, Vec<i64>)> {
    let mut c = Canon::new("flue journal rows v1");
    let mut counts = Vec::with_capacity(ranges.len());
    for r in ranges {
        let Some(columns) = columns_of.get(&r.table) else {
            // A table the entry names is gone: nothing to read.
            c.text(&r.table);
            counts.push(-1);
            continue;
        };
        c.text(&r.table);
        c.int(columns.len() as i64);
        for col in columns {
            c.text(col);
        }
        let list: Vec<String> = columns.iter().map(|c| quoted(c)).collect();
        let mut stmt = conn.prepare(&format!(
            "SELECT rowid, {} FROM {} WHERE rowid BETWEEN ?1 AND ?2 ORDER BY rowid",
            list.join(", "),
            quoted(&r.table)
        ))?;
        let mut rows = stmt.query(params![r.first_rowid, r.last_rowid])?;
        let mut count = 0i64;
        while let Some(row) = rows.next()? {
            count += 1;
            for i in 0..=columns.len() {
                c.value(match row.get_ref(i)? {
                    ValueRef::Null => Value::Null,
                    ValueRef::Integer(v) => Value::Integer(v),
                    ValueRef::Real(v) => Value::RealBits(v.to_bits()),
                    ValueRef::Text(t) => Value::Text(t),
                    ValueRef::Blob(b) => Value::Blob(b),
                });
            }
        }
        c.int(count);
        counts.push(count);
    }
    Ok((c.finish(), counts))
}

/// One schema object: type, name, table and its SQL text.
type SchemaObject = (String, String, String, String);

fn schema_objects(conn: &Connection) -> Result<Vec<SchemaObject>> {
    let mut stmt = conn.prepare(
        // Every object, automatic indexes included, compared by exact name:
        // LIKE is case-blind, and a flipped bit turned "sqlite_autoindex_…"
        // into "sqliTe_autoindex_…" unseen (tests/faults.rs, seed 31). Only
        // ANALYZE statistics are left out; flue never creates them.
        "SELECT type, name, tbl_name, coalesce(sql, '') FROM sqlite_master
         WHERE name NOT GLOB 'sqlite_stat*' ORDER BY type, name",
    )?;
    let rows = stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// SHA-256 over every table, index, trigger and view definition.
pub fn schema_digest(conn: &Connection) -> Result<String> {
    let objects = schema_objects(conn)?;
    let mut c = Canon::new("flue schema v1");
    c.int(objects.len() as i64);
    for (kind, name, table, sql) in &objects {
        c.text(kind);
        c.text(name);
        c.text(table);
        c.text(sql);
    }
    Ok(c.finish())
}

/// The schema this flue's migrations make, from an empty in-memory database.
fn expected_schema() -> Result<Connection> {
    let conn = Connection::open_in_memory()?;
    for (_, sql) in MIGRATIONS {
        conn.execute_batch(sql)?;
    }
    Ok(conn)
}

/// The highest rowid each table's entries cover.
fn marks(conn: &Connection, tables: &[(String, Vec<String>)]) -> Result<Vec<i64>> {
    let mut stmt = conn.prepare_cached(
        "SELECT coalesce(max(last_rowid), 0) FROM journal_rows WHERE table_name = ?1",
    )?;
    tables
        .iter()
        .map(|(t, _)| Ok(stmt.query_row([t], |r| r.get(0))?))
        .collect()
}

/// Each covered table's columns, by table name.
type Columns = BTreeMap<String, Vec<String>>;

/// Rows no entry covers yet, per table.
fn unjournaled(conn: &Connection) -> Result<(Vec<RowRange>, Columns)> {
    let tables = tables(conn)?;
    let marks = marks(conn, &tables)?;
    let mut ranges = Vec::new();
    for ((t, _), mark) in tables.iter().zip(marks) {
        let (count, first, last): (i64, Option<i64>, Option<i64>) = conn.query_row(
            &format!(
                "SELECT count(*), min(rowid), max(rowid) FROM {} WHERE rowid > ?1",
                quoted(t)
            ),
            [mark],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )?;
        if let (Some(first), Some(last)) = (first, last) {
            ranges.push(RowRange {
                table: t.clone(),
                first_rowid: first,
                last_rowid: last,
                row_count: count,
            });
        }
    }
    Ok((ranges, tables.into_iter().collect()))
}

/// What an entry records: its kind, the row it names, who, when and why.
struct Meta {
    kind: &'static str,
    record_id: Option<i64>,
    at: String,
    by: String,
    reason: Option<String>,
}

fn range<'a>(ranges: &'a [RowRange], table: &str) -> Option<&'a RowRange> {
    ranges.iter().find(|r| r.table == table)
}

/// The one row that says what a write was: a site version, an import
/// batch, a certification or an amendment.
fn meta(conn: &Connection, ranges: &[RowRange]) -> Result<Meta> {
    let anchors: usize = [
        "site_versions",
        "import_batches",
        "certifications",
        "amendments",
    ]
    .iter()
    .filter_map(|t| range(ranges, t))
    .map(|r| r.row_count as usize)
    .sum();
    // Every writing command adds exactly one of these; anything else is a bug.
    assert_eq!(
        anchors, 1,
        "a write must add exactly one site version, import batch, certification or amendment row, added {ranges:?}"
    );
    if let Some(r) = range(ranges, "site_versions") {
        return Ok(conn.query_row(
            "SELECT id, loaded_at, loaded_by FROM site_versions WHERE rowid = ?1",
            [r.first_rowid],
            |row| {
                Ok(Meta {
                    kind: "site-version",
                    record_id: Some(row.get(0)?),
                    at: row.get(1)?,
                    by: row.get(2)?,
                    reason: None,
                })
            },
        )?);
    }
    if let Some(r) = range(ranges, "import_batches") {
        let settles = range(ranges, "allowance_settlements").is_some();
        return Ok(conn.query_row(
            "SELECT id, kind, imported_at, imported_by, reason FROM import_batches WHERE rowid = ?1",
            [r.first_rowid],
            |row| {
                let kind: String = row.get(1)?;
                Ok(Meta {
                    kind: match (kind.as_str(), settles) {
                        ("allowances", true) => "settlement",
                        ("allowances", false) => "allowance-transactions",
                        _ => "import-batch",
                    },
                    record_id: Some(row.get(0)?),
                    at: row.get(2)?,
                    by: row.get(3)?,
                    reason: row.get(4)?,
                })
            },
        )?);
    }
    if let Some(r) = range(ranges, "certifications") {
        return Ok(conn.query_row(
            "SELECT id, certified_at, certified_by, statement FROM certifications WHERE rowid = ?1",
            [r.first_rowid],
            |row| {
                Ok(Meta {
                    kind: "certification",
                    record_id: Some(row.get(0)?),
                    at: row.get(1)?,
                    by: row.get(2)?,
                    reason: row.get(3)?,
                })
            },
        )?);
    }
    let r = range(ranges, "amendments").expect("counted above");
    Ok(conn.query_row(
        "SELECT id, amended_at, amended_by, reason FROM amendments WHERE rowid = ?1",
        [r.first_rowid],
        |row| {
            Ok(Meta {
                kind: "amendment",
                record_id: Some(row.get(0)?),
                at: row.get(1)?,
                by: row.get(2)?,
                reason: row.get(3)?,
            })
        },
    )?)
}

/// The last entry's sequence number and hash.
fn head(conn: &Connection) -> Result<(i64, String)> {
    Ok(conn
        .query_row(
            "SELECT seq, hash FROM journal ORDER BY seq DESC LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .optional()?
        .unwrap_or_else(|| (0, GENESIS_HASH.to_string())))
}

/// Append one entry covering `ranges`; returns it.
fn append(
    conn: &Connection,
    columns_of: &BTreeMap<String, Vec<String>>,
    ranges: Vec<RowRange>,
    meta: Meta,
) -> Result<Entry> {
    let (prev_seq, prev_hash) = head(conn)?;
    let (content_digest, _) = content_digest(conn, columns_of, &ranges)?;
    let mut e = Entry {
        seq: prev_seq + 1,
        kind: meta.kind.to_string(),
        record_id: meta.record_id,
        at: meta.at,
        by: meta.by,
        reason: meta.reason,
        content_digest,
        schema_digest: schema_digest(conn)?,
        prev_hash,
        hash: String::new(),
        rows: ranges,
    };
    e.hash = entry_hash(&e);
    conn.execute(
        "INSERT INTO journal (seq, kind, record_id, at, by, reason, content_digest, schema_digest, prev_hash, hash)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)",
        params![e.seq, e.kind, e.record_id, e.at, e.by, e.reason, e.content_digest, e.schema_digest, e.prev_hash, e.hash],
    )?;
    for r in &e.rows {
        conn.execute(
            "INSERT INTO journal_rows (seq, table_name, first_rowid, last_rowid, row_count) VALUES (?1, ?2, ?3, ?4, ?5)",
            params![e.seq, r.table, r.first_rowid, r.last_rowid, r.row_count],
        )?;
    }
    Ok(e)
}

/// A certified year, as stored, with its amendments.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Certification {
    pub id: i64,
    pub year: i32,
    pub at: String,
    pub by: String,
    pub statement: Option<String>,
    pub report_sha256: String,
    pub amendments: Vec<Amendment>,
}

#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Amendment {
    pub journal_seq: i64,
    pub at: String,
    pub by: String,
    pub reason: String,
}

/// What `Ledger::certify` recorded.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Certified {
    pub entry_count: i64,
    pub head_hash: String,
    pub schema_digest: String,
}

/// The hour index (hours since 1970-01-01T00:00 local standard time, as
/// schema/0005_hourly_blocks.sql stores it) at which `year` begins.
fn year_start_hour(year: i32) -> i64 {
    let epoch = chrono::NaiveDate::from_ymd_opt(1970, 1, 1).expect("valid date");
    let start = chrono::NaiveDate::from_ymd_opt(year, 1, 1).expect("year in range");
    (start - epoch).num_days() * 24
}

/// Whether the rows of `ranges` hold any row dated in `year`: a sample,
/// a fuel record, a monitor hour, or a correction of an allowance
/// transaction whose new or superseded version is dated in it (a
/// correction never settles a year: settlement rows are not corrected).
/// New allowance transactions are left out: the year's settlement freezes
/// them (see `audit::report_digest`).
fn touches(conn: &Connection, ranges: &[RowRange], year: i32) -> Result<bool> {
    let y = format!("{year:04}");
    let checks: [(&str, &str); 4] = [
        ("analyses", "substr(sampled_on, 1, 4) = ?2"),
        (
            "fuel_records",
            "(substr(start_date, 1, 4) = ?2 OR substr(end_date, 1, 4) = ?2)",
        ),
        ("hourly_blocks", "last_hour >= ?3 AND first_hour < ?4"),
        (
            "allowance_corrections",
            "(substr(date, 1, 4) = ?2 OR substr(CASE WHEN corrects_id IS NULL
                 THEN (SELECT o.date FROM allowance_transactions o
                       WHERE o.id = allowance_corrections.transaction_id)
                 ELSE (SELECT p.date FROM allowance_corrections p
                       WHERE p.id = allowance_corrections.corrects_id) END, 1, 4) = ?2)",
        ),
    ];
    for (table, test) in checks {
        let Some(r) = range(ranges, table) else {
            continue;
        };
        let mut stmt = conn.prepare(&format!(
            "SELECT EXISTS (SELECT 1 FROM {table} WHERE rowid BETWEEN ?1 AND ?5 AND {test})"
        ))?;
        let hit: bool = stmt.query_row(
            params![
                r.first_rowid,
                y,
                year_start_hour(year),
                year_start_hour(year + 1),
                r.last_rowid
            ],
            |row| row.get(0),
        )?;
        if hit {
            return Ok(true);
        }
    }
    Ok(false)
}

fn certifications(conn: &Connection) -> Result<Vec<Certification>> {
    let mut stmt = conn.prepare(
        "SELECT id, year, certified_at, certified_by, statement, report_sha256 FROM certifications ORDER BY id",
    )?;
    let mut out: Vec<Certification> = stmt
        .query_map([], |r| {
            Ok(Certification {
                id: r.get(0)?,
                year: r.get(1)?,
                at: r.get(2)?,
                by: r.get(3)?,
                statement: r.get(4)?,
                report_sha256: r.get(5)?,
                amendments: Vec::new(),
            })
        })?
        .collect::<rusqlite::Result<_>>()?;
    let mut stmt = conn.prepare(
        "SELECT certification_id, journal_seq, amended_at, amended_by, reason FROM amendments ORDER BY id",
    )?;
    let mut rows = stmt.query([])?;
    while let Some(r) = rows.next()? {
        let id: i64 = r.get(0)?;
        let a = Amendment {
            journal_seq: r.get(1)?,
            at: r.get(2)?,
            by: r.get(3)?,
            reason: r.get(4)?,
        };
        if let Some(c) = out.iter_mut().find(|c| c.id == id) {
            c.amendments.push(a);
        }
    }
    Ok(out)
}

/// Journal reads, for the ledger and a write transaction alike.
pub trait JournalReads: Reads {
    /// Every certification, oldest first, with its amendments.
    fn certifications(&self) -> Result<Vec<Certification>> {
        certifications(self.conn())
    }

    /// The certification of `year`, if any.
    fn certification(&self, year: i32) -> Result<Option<Certification>> {
        Ok(self.certifications()?.into_iter().find(|c| c.year == year))
    }

    /// The number of journal entries and the last one's hash.
    fn journal_head(&self) -> Result<(i64, String)> {
        head(self.conn())
    }

    /// The hash of entry `seq`, if the ledger holds it.
    fn journal_hash(&self, seq: i64) -> Result<Option<String>> {
        Ok(self
            .conn()
            .query_row("SELECT hash FROM journal WHERE seq = ?1", [seq], |r| {
                r.get(0)
            })
            .optional()?)
    }
}

impl JournalReads for Ledger {}
impl JournalReads for Tx<'_> {}

impl Tx<'_> {
    /// Journal every row this transaction added. A row dated in a
    /// certified year is refused unless `amend` gives the reason; then an
    /// amendment is recorded for each certification it touches, with its
    /// own entry.
    pub(super) fn journal_pending(&self, amend: Option<&str>) -> Result<()> {
        let conn: &Connection = &self.tx;
        let (ranges, columns_of) = unjournaled(conn)?;
        if ranges.is_empty() {
            return Ok(());
        }
        let mut touched = Vec::new();
        for c in certifications(conn)? {
            if touches(conn, &ranges, c.year)? {
                touched.push(c);
            }
        }
        if let (Some(c), None) = (touched.first(), amend) {
            return Err(LedgerError::Certified {
                year: c.year,
                by: c.by.clone(),
                at: c.at.clone(),
            });
        }
        let meta = meta(conn, &ranges)?;
        let entry = append(conn, &columns_of, ranges, meta)?;
        if touched.is_empty() {
            return Ok(());
        }
        let reason = amend.expect("refused above without a reason");
        for c in &touched {
            conn.execute(
                "INSERT INTO amendments (certification_id, journal_seq, amended_at, amended_by, reason)
                 VALUES (?1, ?2, ?3, ?4, ?5)",
                params![c.id, entry.seq, entry.at, entry.by, reason],
            )?;
        }
        let (ranges, columns_of) = unjournaled(conn)?;
        let meta = Meta {
            kind: "amendment",
            record_id: meta_id(conn, &ranges, "amendments")?,
            at: entry.at.clone(),
            by: entry.by.clone(),
            reason: Some(reason.to_string()),
        };
        append(conn, &columns_of, ranges, meta)?;
        Ok(())
    }

    /// Journal the rows a migration found: those of a ledger made before
    /// the journal existed, in one entry.
    pub(super) fn journal_existing(&self, at: &str, by: &str) -> Result<()> {
        let conn: &Connection = &self.tx;
        let (ranges, columns_of) = unjournaled(conn)?;
        if ranges.is_empty() {
            return Ok(());
        }
        let meta = Meta {
            kind: "existing-rows",
            record_id: None,
            at: at.to_string(),
            by: by.to_string(),
            reason: Some("rows held before the journal began (migration 0004)".to_string()),
        };
        append(conn, &columns_of, ranges, meta)?;
        Ok(())
    }
}

fn meta_id(conn: &Connection, ranges: &[RowRange], table: &str) -> Result<Option<i64>> {
    let Some(r) = range(ranges, table) else {
        return Ok(None);
    };
    Ok(Some(conn.query_row(
        &format!("SELECT rowid FROM {table} WHERE rowid = ?1"),
        [r.first_rowid],
        |row| row.get(0),
    )?))
}

impl Ledger {
    /// Certify `year`: store the report digest and the journal head, and
    /// journal it. Refuses a year already certified.
    pub fn certify(
        &mut self,
        year: i32,
        by: &str,
        at: &str,
        statement: Option<&str>,
        report_sha256: &str,
    ) -> Result<Certified> {
        self.write(|tx| {
            if let Some(c) = tx.certification(year)? {
                return Err(LedgerError::AlreadyCertified {
                    year,
                    by: c.by,
                    at: c.at,
                });
            }
            let (seq, hash) = tx.journal_head()?;
            tx.tx.execute(
                "INSERT INTO certifications (year, certified_at, certified_by, statement, report_sha256, head_seq, head_hash)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
                params![year, at, by, statement, report_sha256, seq, hash],
            )?;
            tx.journal_pending(None)?;
            let (entry_count, head_hash) = tx.journal_head()?;
            Ok(Certified {
                entry_count,
                head_hash,
                schema_digest: schema_digest(&tx.tx)?,
            })
        })
    }

    /// Recheck the whole ledger: the file, its identity, the schema, every
    /// entry's rows and hash, and that every row has an entry.
    pub fn verify(&self) -> Result<Verification> {
        let conn = &self.conn;
        let mut problems = Vec::new();
        let mut stmt = conn.prepare("PRAGMA integrity_check")?;
        let integrity: Vec<String> = stmt
            .query_map([], |r| r.get(0))?
            .collect::<rusqlite::Result<_>>()?;
        if integrity != ["ok"] {
            problems.push(Problem::File(integrity.join("; ")));
        }
        let app_id: i32 = conn.query_row("PRAGMA application_id", [], |r| r.get(0))?;
        let version: i32 = conn.query_row("PRAGMA user_version", [], |r| r.get(0))?;
        if app_id != APPLICATION_ID || version != latest_version() {
            problems.push(Problem::Identity {
                application_id: app_id,
                user_version: version,
            });
            return Ok(Verification {
                entry_count: 0,
                head_hash: GENESIS_HASH.to_string(),
                schema_digest: schema_digest(conn)?,
                problems,
            });
        }
        // Schema: every object this flue's migrations make, and nothing else.
        // Reported after the entries, which name what changed in the data.
        let mut schema_problems = Vec::new();
        let expected = schema_objects(&expected_schema()?)?;
        let actual = schema_objects(conn)?;
        for e in &expected {
            match actual.iter().find(|a| a.0 == e.0 && a.1 == e.1) {
                None => {
                    schema_problems.push(Problem::Schema(format!("{} {} is missing", e.0, e.1)))
                }
                Some(a) if a != e => {
                    schema_problems.push(Problem::Schema(format!("{} {} is changed", e.0, e.1)))
                }
                Some(_) => {}
            }
        }
        for a in &actual {
            if !expected.iter().any(|e| e.0 == a.0 && e.1 == a.1) {
                schema_problems.push(Problem::Schema(format!("{} {} is not ours", a.0, a.1)));
            }
        }
        // The chain, entry by entry.
        let tables = tables(conn)?;
        let columns_of: BTreeMap<String, Vec<String>> = tables.iter().cloned().collect();
        let entries = entries(conn)?;
        let mut prev = GENESIS_HASH.to_string();
        let mut covered: BTreeMap<&str, (i64, i64)> = BTreeMap::new();
        for (i, e) in entries.iter().enumerate() {
            let seq_expected = i as i64 + 1;
            let mut what = Vec::new();
            if e.seq != seq_expected {
                what.push(format!(
                    "sequence number {} where {seq_expected} was expected (an entry is missing)",
                    e.seq
                ));
            }
            if e.prev_hash != prev {
                what.push("its previous hash is not the hash of the entry before".to_string());
            }
            if entry_hash(e) != e.hash {
                what.push("its hash does not match its columns (the entry was edited)".to_string());
            }
            let (digest, counts) = content_digest(conn, &columns_of, &e.rows)?;
            for (r, n) in e.rows.iter().zip(&counts) {
                let c = covered.entry(r.table.as_str()).or_insert((0, 0));
                c.0 += r.row_count;
                c.1 = c.1.max(r.last_rowid);
                if *n < 0 {
                    what.push(format!("table {} is gone", r.table));
                } else if *n < r.row_count {
                    what.push(format!(
                        "{}: {} of its {} rows deleted",
                        r.table,
                        r.row_count - n,
                        r.row_count
                    ));
                } else if *n > r.row_count {
                    what.push(format!(
                        "{}: {} rows inserted among its {}",
                        r.table,
                        n - r.row_count,
                        r.row_count
                    ));
                }
            }
            if digest != e.content_digest && what.is_empty() {
                what.push("rows edited: the stored rows no longer match its content digest".into());
            }
            if !what.is_empty() {
                problems.push(Problem::Entry {
                    seq: e.seq,
                    kind: e.kind.clone(),
                    record_id: e.record_id,
                    what,
                });
            }
            prev = e.hash.clone();
        }
        // Rows no entry accounts for.
        for (t, _) in &tables {
            let (count, max): (i64, Option<i64>) = conn.query_row(
                &format!("SELECT count(*), max(rowid) FROM {}", quoted(t)),
                [],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )?;
            let (journaled, mark) = covered.get(t.as_str()).copied().unwrap_or((0, 0));
            let beyond: i64 = conn.query_row(
                &format!("SELECT count(*) FROM {} WHERE rowid > ?1", quoted(t)),
                [mark],
                |r| r.get(0),
            )?;
            if beyond > 0 {
                problems.push(Problem::Unjournaled {
                    table: t.clone(),
                    rows: beyond,
                    first_rowid: max.unwrap_or(0) - beyond + 1,
                });
            } else if count > journaled
                && !problems.iter().any(|p| matches!(p, Problem::Entry { .. }))
            {
                problems.push(Problem::Unjournaled {
                    table: t.clone(),
                    rows: count - journaled,
                    first_rowid: 0,
                });
            }
        }
        problems.extend(schema_problems);
        Ok(Verification {
            entry_count: entries.len() as i64,
            head_hash: prev,
            schema_digest: schema_digest(conn)?,
            problems,
        })
    }
}

fn entries(conn: &Connection) -> Result<Vec<Entry>> {
    let mut stmt = conn.prepare(
        "SELECT seq, kind, record_id, at, by, reason, content_digest, schema_digest, prev_hash, hash FROM journal ORDER BY seq",
    )?;
    let mut out: Vec<Entry> = stmt
        .query_map([], |r| {
            Ok(Entry {
                seq: r.get(0)?,
                kind: r.get(1)?,
                record_id: r.get(2)?,
                at: r.get(3)?,
                by: r.get(4)?,
                reason: r.get(5)?,
                content_digest: r.get(6)?,
                schema_digest: r.get(7)?,
                prev_hash: r.get(8)?,
                hash: r.get(9)?,
                rows: Vec::new(),
            })
        })?
        .collect::<rusqlite::Result<_>>()?;
    let mut stmt = conn.prepare(
        "SELECT seq, table_name, first_rowid, last_rowid, row_count FROM journal_rows ORDER BY seq, table_name",
    )?;
    let mut rows = stmt.query([])?;
    let mut i = 0;
    while let Some(r) = rows.next()? {
        let seq: i64 = r.get(0)?;
        while i < out.len() && out[i].seq < seq {
            i += 1;
        }
        let range = RowRange {
            table: r.get(1)?,
            first_rowid: r.get(2)?,
            last_rowid: r.get(3)?,
            row_count: r.get(4)?,
        };
        match out.get_mut(i) {
            Some(e) if e.seq == seq => e.rows.push(range),
            // Ranges of an entry that is gone: the chain check names the gap.
            _ => {}
        }
    }
    Ok(out)
}

/// What `Ledger::verify` found.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Verification {
    pub entry_count: i64,
    pub head_hash: String,
    pub schema_digest: String,
    pub problems: Vec<Problem>,
}

/// One thing `verify` found wrong.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Problem {
    File(String),
    Identity {
        application_id: i32,
        user_version: i32,
    },
    Schema(String),
    Entry {
        seq: i64,
        kind: String,
        record_id: Option<i64>,
        what: Vec<String>,
    },
    Unjournaled {
        table: String,
        rows: i64,
        first_rowid: i64,
    },
}

impl std::fmt::Display for Problem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Problem::File(s) => write!(f, "integrity check: {s}"),
            Problem::Identity {
                application_id,
                user_version,
            } => write!(
                f,
                "not a ledger of this flue: application_id {application_id:#x} (expected {APPLICATION_ID:#x}), user_version {user_version} (expected {})",
                latest_version()
            ),
            Problem::Schema(s) => write!(f, "schema changed: {s}"),
            Problem::Entry {
                seq,
                kind,
                record_id,
                what,
            } => {
                write!(f, "journal entry {seq} ({kind}")?;
                if let Some(id) = record_id {
                    write!(f, " {id}")?;
                }
                write!(f, "): {}", what.join("; "))
            }
            Problem::Unjournaled {
                table,
                rows,
                first_rowid,
            } => {
                write!(f, "{table}: {rows} rows inserted behind the tool's back (no journal entry covers them")?;
                if *first_rowid > 0 {
                    write!(f, "; the first at rowid {first_rowid}")?;
                }
                write!(f, ")")
            }
        }
    }
}
