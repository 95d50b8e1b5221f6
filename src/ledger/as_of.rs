//! As-of reads: the ledger as it stood right after one journal entry.
//!
//! On a read-only connection, every table the journal covers gets a TEMP
//! VIEW of the same name that holds only the rows of entries up to that
//! one: rowids up to the highest `last_rowid` that `journal_rows` records
//! for the table among those entries. The journal itself is cut at the
//! entry, and every view of the schema is made again in TEMP so that it
//! reads the cut tables (a view of the main schema stays bound to the main
//! schema's tables). SQLite resolves an unqualified name to a TEMP object
//! before a main one (sqlite.org/lang_naming.html, "Database object name
//! resolution"), so every read path sees the earlier ledger without being
//! rewritten.
//!
//! Invariants: nothing here writes the ledger file; the tables are read from
//! the schema, so a table a later migration adds is cut without being named
//! here. Rows are only ever inserted with rowids above those held
//! (journal.rs), so the rows of entries up to n are exactly those at or
//! below each table's mark.

use super::journal::{covered, quoted};
use super::{Ledger, LedgerError, Result};
use chrono::{DateTime, FixedOffset, NaiveDateTime, TimeZone, Utc};
use rusqlite::{Connection, OptionalExtension};
use thiserror::Error;

/// Where `--as-of` points: a journal entry, or a moment (the last entry
/// recorded at or before it).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum AsOfPoint {
    Entry(i64),
    At(DateTime<FixedOffset>),
}

/// Naive date-times are read as UTC, as the journal stamps its entries.
const NAIVE_FORMATS: [&str; 2] = ["%Y-%m-%dT%H:%M:%S", "%Y-%m-%dT%H:%M"];

/// A moment as `--as-of` and the journal write it: RFC 3339, or
/// `YYYY-MM-DDTHH:MM[:SS]` in UTC.
pub fn parse_moment(s: &str) -> Option<DateTime<FixedOffset>> {
    if let Ok(t) = DateTime::parse_from_rfc3339(s) {
        return Some(t);
    }
    NAIVE_FORMATS.iter().find_map(|f| {
        NaiveDateTime::parse_from_str(s, f)
            .ok()
            .map(|t| Utc.from_utc_datetime(&t).fixed_offset())
    })
}

impl std::str::FromStr for AsOfPoint {
    type Err = String;

    fn from_str(s: &str) -> std::result::Result<AsOfPoint, String> {
        if !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit()) {
            return match s.parse::<i64>() {
                Ok(n) if n >= 1 => Ok(AsOfPoint::Entry(n)),
                _ => Err(format!(
                    "{s:?}: journal entries are numbered from 1 (see `flue verify`)"
                )),
            };
        }
        parse_moment(s).map(AsOfPoint::At).ok_or_else(|| {
            format!(
                "{s:?}: expected a journal entry number, an RFC 3339 time or YYYY-MM-DDTHH:MM[:SS] (UTC)"
            )
        })
    }
}

/// The entry an as-of report stops at.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct AsOfEntry {
    pub seq: i64,
    pub at: String,
    pub hash: String,
}

#[derive(Debug, Error, PartialEq, Eq)]
pub enum AsOfError {
    #[error("--as-of {seq}: the journal has {head} entries, so entry {seq} is beyond its head")]
    BeyondHead { seq: i64, head: i64 },
    #[error("--as-of {asked}: the journal holds no entry yet")]
    Empty { asked: String },
    #[error("--as-of {asked}: before the journal's first entry (entry 1, at {first})")]
    BeforeFirst { asked: String, first: String },
    #[error("journal entry {seq}: its time {at:?} is not an RFC 3339 time, so --as-of cannot compare it; pass --as-of ENTRY")]
    EntryTime { seq: i64, at: String },
    #[error("--as-of {asked}: journal times go backward (entry {later} at {later_at} comes after entry {earlier} at {earlier_at}), so the time names no single ledger state; pass --as-of ENTRY")]
    OutOfOrder {
        asked: String,
        earlier: i64,
        earlier_at: String,
        later: i64,
        later_at: String,
    },
}

/// Every entry's number, time and hash, in order.
fn entries(conn: &Connection) -> Result<Vec<AsOfEntry>> {
    let mut stmt = conn.prepare("SELECT seq, at, hash FROM main.journal ORDER BY seq")?;
    let rows = stmt.query_map([], |r| {
        Ok(AsOfEntry {
            seq: r.get(0)?,
            at: r.get(1)?,
            hash: r.get(2)?,
        })
    })?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// The entry `point` names, from the journal's entries in order.
pub fn resolve(
    entries: &[AsOfEntry],
    point: &AsOfPoint,
) -> std::result::Result<AsOfEntry, AsOfError> {
    let at =
        match point {
            AsOfPoint::Entry(seq) => {
                return entries.iter().find(|e| e.seq == *seq).cloned().ok_or(
                    AsOfError::BeyondHead {
                        seq: *seq,
                        head: entries.last().map_or(0, |e| e.seq),
                    },
                );
            }
            AsOfPoint::At(at) => at,
        };
    let asked = at.to_rfc3339();
    let mut times = Vec::with_capacity(entries.len());
    for e in entries {
        let t = parse_moment(&e.at).ok_or_else(|| AsOfError::EntryTime {
            seq: e.seq,
            at: e.at.clone(),
        })?;
        times.push(t);
    }
    let Some(first) = entries.first() else {
        return Err(AsOfError::Empty { asked });
    };
    // The last entry stamped at or before the moment, and the last of the
    // unbroken run from entry 1 stamped so: with times in order they are
    // the same entry; where a clock went backward they differ, and the
    // moment names no single state.
    let last = times.iter().rposition(|t| t <= at);
    let run = times.iter().position(|t| t > at).map_or(times.len(), |i| i);
    match last {
        None => Err(AsOfError::BeforeFirst {
            asked,
            first: first.at.clone(),
        }),
        Some(i) if i + 1 != run => Err(AsOfError::OutOfOrder {
            asked,
            earlier: entries[run].seq,
            earlier_at: entries[run].at.clone(),
            later: entries[i].seq,
            later_at: entries[i].at.clone(),
        }),
        Some(i) => Ok(entries[i].clone()),
    }
}

/// Shadow every covered table, the journal and every view with its state
/// after entry `seq`.
fn install(conn: &Connection, seq: i64) -> Result<()> {
    let mut stmt = conn.prepare(
        "SELECT type, name, coalesce(sql, '') FROM main.sqlite_master
         WHERE type IN ('table', 'view') ORDER BY type, name",
    )?;
    let objects: Vec<(String, String, String)> = stmt
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))?
        .collect::<rusqlite::Result<_>>()?;
    let mut mark = conn.prepare(
        "SELECT coalesce(max(last_rowid), 0) FROM main.journal_rows
         WHERE table_name = ?1 AND seq <= ?2",
    )?;
    // Tables first (ORDER BY type puts 'table' before 'view'), so that the
    // views made again below find them.
    for (kind, name, sql) in &objects {
        let q = quoted(name);
        let cut = match (kind.as_str(), name.as_str()) {
            ("table", "journal" | "journal_rows") => format!("seq <= {seq}"),
            ("table", _) if covered(name) => {
                let last: i64 = mark.query_row(rusqlite::params![name, seq], |r| r.get(0))?;
                format!("rowid <= {last}")
            }
            ("table", _) => continue,
            _ => {
                // A view is made again in TEMP from its own definition.
                let body = sql
                    .get(..11)
                    .filter(|head| head.eq_ignore_ascii_case("CREATE VIEW"))
                    .map(|_| &sql[11..])
                    .ok_or_else(|| {
                        LedgerError::Damaged(format!("view {name} has an unexpected definition"))
                    })?;
                conn.execute_batch(&format!("CREATE TEMP VIEW{body}"))?;
                continue;
            }
        };
        conn.execute_batch(&format!(
            "CREATE TEMP VIEW {q} AS SELECT * FROM main.{q} WHERE {cut}"
        ))?;
    }
    Ok(())
}

impl Ledger {
    /// Open the ledger read-only as it stood right after the entry `point`
    /// names: every read sees only the rows of entries up to it. Refuses an
    /// entry beyond the head and a moment before the first entry.
    pub fn open_as_of(path: &std::path::Path, point: &AsOfPoint) -> Result<(Ledger, AsOfEntry)> {
        let mut ledger = Ledger::open_read_only(path)?;
        let entry = resolve(&entries(&ledger.conn)?, point)?;
        install(&ledger.conn, entry.seq)?;
        ledger.as_of = Some(entry.seq);
        Ok((ledger, entry))
    }

    /// The journal entry that added row `rowid` of `table`: the entry whose
    /// `journal_rows` range for the table covers it.
    pub fn entry_adding(&self, table: &str, rowid: i64) -> Result<Option<i64>> {
        Ok(self
            .conn
            .query_row(
                "SELECT seq FROM journal_rows WHERE table_name = ?1 AND ?2 BETWEEN first_rowid AND last_rowid",
                rusqlite::params![table, rowid],
                |r| r.get(0),
            )
            .optional()?)
    }

    /// Another connection that reads what this one reads: for a parallel
    /// reader of the same file (src/assemble.rs).
    pub fn open_reader(path: &std::path::Path, as_of: Option<i64>) -> Result<Ledger> {
        match as_of {
            None => Ledger::open(path),
            Some(seq) => Ok(Ledger::open_as_of(path, &AsOfPoint::Entry(seq))?.0),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn entry(seq: i64, at: &str) -> AsOfEntry {
        AsOfEntry {
            seq,
            at: at.to_string(),
            hash: format!("{seq:064}"),
        }
    }

    fn at(s: &str) -> AsOfPoint {
        s.parse().unwrap()
    }

    #[test]
    fn points_parse_as_entries_or_moments() {
        assert_eq!("7".parse::<AsOfPoint>(), Ok(AsOfPoint::Entry(7)));
        assert!("0".parse::<AsOfPoint>().unwrap_err().contains("from 1"));
        let utc = Utc
            .with_ymd_and_hms(2026, 1, 10, 9, 30, 0)
            .unwrap()
            .fixed_offset();
        assert_eq!(at("2026-01-10T09:30"), AsOfPoint::At(utc));
        assert_eq!(at("2026-01-10T09:30:00"), AsOfPoint::At(utc));
        assert_eq!(at("2026-01-10T09:30:00Z"), AsOfPoint::At(utc));
        assert_eq!(at("2026-01-10T03:30:00-06:00"), AsOfPoint::At(utc));
        assert!("2026-01-10".parse::<AsOfPoint>().is_err());
        assert!("yesterday".parse::<AsOfPoint>().is_err());
    }

    #[test]
    fn a_moment_picks_the_last_entry_at_or_before_it() {
        let es = [
            entry(1, "2026-01-10T09:00:00Z"),
            entry(2, "2026-01-10T10:00:00Z"),
            entry(3, "2026-01-11T08:00:00Z"),
        ];
        assert_eq!(resolve(&es, &at("2026-01-10T10:00")).unwrap().seq, 2);
        assert_eq!(resolve(&es, &at("2026-01-10T09:59:59Z")).unwrap().seq, 1);
        assert_eq!(resolve(&es, &at("2026-01-10T09:00:00Z")).unwrap().seq, 1);
        assert_eq!(resolve(&es, &at("2027-01-01T00:00")).unwrap().seq, 3);
        assert!(matches!(
            resolve(&es, &at("2026-01-10T08:59:59Z")),
            Err(AsOfError::BeforeFirst { .. })
        ));
        assert_eq!(resolve(&es, &AsOfPoint::Entry(3)).unwrap().seq, 3);
        assert_eq!(
            resolve(&es, &AsOfPoint::Entry(4)),
            Err(AsOfError::BeyondHead { seq: 4, head: 3 })
        );
        assert!(matches!(
            resolve(&[], &at("2026-01-10T10:00")),
            Err(AsOfError::Empty { .. })
        ));
    }

    #[test]
    fn a_clock_that_went_backward_is_refused_where_it_matters() {
        let es = [
            entry(1, "2026-01-10T09:00:00Z"),
            entry(2, "2026-01-10T12:00:00Z"),
            entry(3, "2026-01-10T11:00:00Z"),
        ];
        assert!(matches!(
            resolve(&es, &at("2026-01-10T11:30")),
            Err(AsOfError::OutOfOrder {
                earlier: 2,
                later: 3,
                ..
            })
        ));
        // Before the step back and after it, the moment is unambiguous.
        assert_eq!(resolve(&es, &at("2026-01-10T10:00")).unwrap().seq, 1);
        assert_eq!(resolve(&es, &at("2026-01-10T12:00")).unwrap().seq, 3);
        let bad = [entry(1, "last tuesday")];
        assert!(matches!(
            resolve(&bad, &at("2026-01-10T10:00")),
            Err(AsOfError::EntryTime { seq: 1, .. })
        ));
    }
}
