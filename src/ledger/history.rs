//! Every stored version of one record, for `flue history`: read-only queries.
//!
//! A record's versions are the rows that share its key (sample; unit, fuel
//! and period; unit and hour; transaction id), oldest first by rowid, which
//! is the order they were written in. Values come back as stored: decimal
//! TEXT in its canonical form, integers as written, hourly readings as the
//! fixed-point `HourRow`. Nothing here writes.

use super::{LedgerError, Reads, Result};
use crate::records::HourRow;
use rusqlite::types::Value;
use rusqlite::Row;

/// Where one stored version came from and what it supersedes.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Provenance {
    /// The row's id in its table.
    pub row_id: i64,
    pub batch_id: i64,
    pub file: String,
    pub line: i64,
    pub sha256: String,
    pub imported_at: String,
    pub imported_by: String,
    /// The import batch's `--correct` reason, if it had one.
    pub batch_reason: Option<String>,
    /// The row this one supersedes.
    pub corrects_id: Option<i64>,
    /// Why this row supersedes `corrects_id`.
    pub reason: Option<String>,
    /// No later row supersedes this one.
    pub in_force: bool,
}

/// One stored version of a record.
#[derive(Clone, Debug, PartialEq)]
pub struct StoredVersion<T> {
    pub provenance: Provenance,
    pub value: T,
}

/// A row's columns by name, in the order of its input file, as stored text
/// (`None` for an empty cell).
pub type Fields = Vec<(&'static str, Option<String>)>;

const PROVENANCE: &str =
    "b.id, b.file_name, x.line, b.sha256, b.imported_at, b.imported_by, b.reason";

fn provenance(r: &Row, row_id: i64, corrects: usize, in_force: bool) -> Result<Provenance> {
    Ok(Provenance {
        row_id,
        batch_id: r.get(1)?,
        file: r.get(2)?,
        line: r.get(3)?,
        sha256: r.get(4)?,
        imported_at: r.get(5)?,
        imported_by: r.get(6)?,
        batch_reason: r.get(7)?,
        corrects_id: r.get(corrects)?,
        reason: r.get(corrects + 1)?,
        in_force,
    })
}

/// A stored cell as text: TEXT as is, INTEGER in decimal, NULL as `None`.
fn cell(r: &Row, i: usize, column: &str) -> Result<Option<String>> {
    match r.get::<_, Value>(i)? {
        Value::Null => Ok(None),
        Value::Integer(n) => Ok(Some(n.to_string())),
        Value::Text(t) => Ok(Some(t)),
        // Decimals are stored as TEXT, never REAL (schema/0001_init.sql).
        Value::Real(_) | Value::Blob(_) => Err(LedgerError::Damaged(format!(
            "stored {column} is neither text nor an integer"
        ))),
    }
}

/// Rows of `table` (aliased `x`) matching `filter`, with the named columns,
/// oldest first. The table keeps `corrects_id` and `reason` on the row.
fn text_versions(
    conn: &rusqlite::Connection,
    table: &str,
    columns: &[&'static str],
    filter: &str,
    args: &[&dyn rusqlite::ToSql],
) -> Result<Vec<StoredVersion<Fields>>> {
    let list = columns
        .iter()
        .map(|c| format!("x.{c}"))
        .collect::<Vec<_>>()
        .join(", ");
    let sql = format!(
        "SELECT x.id, {PROVENANCE}, x.corrects_id, x.reason,
                NOT EXISTS (SELECT 1 FROM {table} y WHERE y.corrects_id = x.id), {list}
         FROM {table} x JOIN import_batches b ON b.id = x.batch_id
         WHERE {filter} ORDER BY x.id"
    );
    let mut stmt = conn.prepare(&sql)?;
    let mut rows = stmt.query(args)?;
    let mut out = Vec::new();
    while let Some(r) = rows.next()? {
        let mut value = Fields::with_capacity(columns.len());
        for (i, c) in columns.iter().enumerate() {
            value.push((*c, cell(r, 11 + i, c)?));
        }
        out.push(StoredVersion {
            provenance: provenance(r, r.get(0)?, 8, r.get(10)?)?,
            value,
        });
    }
    Ok(out)
}

const ANALYSIS_COLUMNS: &[&str] = &[
    "sample",
    "fuel",
    "sampled_on",
    "sulfur_pct",
    "sulfur_gr_per_100scf",
    "gcv",
    "gcv_uom",
    "carbon_pct",
    "hydrogen_pct",
    "nitrogen_pct",
    "oxygen_pct",
    "density_lb_per_gal",
];

const FUEL_COLUMNS: &[&str] = &[
    "unit",
    "start_date",
    "end_date",
    "fuel",
    "quantity",
    "uom",
    "sample",
];

const TRANSACTION_COLUMNS: &[&str] = &[
    "id",
    "facility_id",
    "seq",
    "date",
    "kind",
    "program",
    "vintage",
    "quantity",
    "from_party",
    "from_account",
    "to_party",
    "to_account",
    "price",
    "note",
    "serial_from",
    "serial_to",
    "settles_year",
];

/// History reads, for the ledger and a write transaction alike.
pub trait HistoryReads: Reads {
    /// Every stored analysis of a sample, oldest first.
    fn sample_versions(&self, sample: &str) -> Result<Vec<StoredVersion<Fields>>> {
        text_versions(
            self.conn(),
            "analyses",
            ANALYSIS_COLUMNS,
            "x.sample = ?1",
            &[&sample],
        )
    }

    /// Every stored fuel record of one unit, fuel and period, oldest first.
    fn fuel_versions(
        &self,
        unit: &str,
        fuel: &str,
        start: &str,
        end: &str,
    ) -> Result<Vec<StoredVersion<Fields>>> {
        text_versions(
            self.conn(),
            "fuel_records",
            FUEL_COLUMNS,
            "x.unit = ?1 AND x.fuel = ?2 AND x.start_date = ?3 AND x.end_date = ?4",
            &[&unit, &fuel, &start, &end],
        )
    }

    /// Every stored row of one unit-hour, oldest first. Each version lives
    /// in its own block (`row_id` is the block's id); every version after
    /// the first supersedes the one before it with its batch's reason.
    fn hour_versions(&self, unit: &str, hour: i64) -> Result<Vec<StoredVersion<HourRow>>> {
        let versions = super::hourly::hour_versions(self.conn(), unit, hour)?;
        let mut stmt = self.conn().prepare_cached(
            "SELECT file_name, sha256, imported_at, imported_by, reason FROM import_batches WHERE id = ?1",
        )?;
        let mut out: Vec<StoredVersion<HourRow>> = Vec::with_capacity(versions.len());
        for (i, v) in versions.iter().enumerate() {
            let (file, sha256, imported_at, imported_by, batch_reason): (
                String,
                String,
                String,
                String,
                Option<String>,
            ) = stmt.query_row([v.batch_id], |r| {
                Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?))
            })?;
            let corrects_id = i.checked_sub(1).map(|p| versions[p].block_id);
            out.push(StoredVersion {
                provenance: Provenance {
                    row_id: v.block_id,
                    batch_id: v.batch_id,
                    file,
                    line: i64::from(v.line),
                    sha256,
                    imported_at,
                    imported_by,
                    reason: corrects_id.and(batch_reason.clone()),
                    batch_reason,
                    corrects_id,
                    in_force: i + 1 == versions.len(),
                },
                value: v.row,
            });
        }
        Ok(out)
    }

    /// Every stored version of an allowance transaction, oldest first: the
    /// original row (`row_id` its `seq`), then its corrections from
    /// `allowance_corrections` (`row_id` the correction's id), each
    /// superseding the one before (schema/0006_allowance_corrections.sql).
    /// A correction keeps the original's `facility_id`, `seq` and, having
    /// no settlement kind, an empty `settles_year`.
    fn transaction_versions(&self, id: &str) -> Result<Vec<StoredVersion<Fields>>> {
        let list = TRANSACTION_COLUMNS
            .iter()
            .map(|c| match *c {
                "id" | "facility_id" | "seq" => format!("t.{c}"),
                "settles_year" => "NULL".to_string(),
                _ => format!("x.{c}"),
            })
            .collect::<Vec<_>>()
            .join(", ");
        let original = TRANSACTION_COLUMNS
            .iter()
            .map(|c| format!("t.{c}"))
            .collect::<Vec<_>>()
            .join(", ");
        // One row per version: 0 for the original, then each correction by id.
        let sql = format!(
            "SELECT t.seq, b.id, b.file_name, t.line, b.sha256, b.imported_at, b.imported_by, b.reason,
                    NULL, NULL, NOT EXISTS (SELECT 1 FROM allowance_corrections c WHERE c.transaction_id = t.id),
                    {original}, 0 AS version_order
             FROM allowance_transactions t JOIN import_batches b ON b.id = t.batch_id
             WHERE t.id = ?1
             UNION ALL
             SELECT x.id, {PROVENANCE}, coalesce(x.corrects_id, t.seq), x.reason,
                    NOT EXISTS (SELECT 1 FROM allowance_corrections y WHERE y.corrects_id = x.id),
                    {list}, x.id
             FROM allowance_corrections x JOIN allowance_transactions t ON t.id = x.transaction_id
             JOIN import_batches b ON b.id = x.batch_id
             WHERE x.transaction_id = ?1
             ORDER BY version_order"
        );
        let mut stmt = self.conn().prepare(&sql)?;
        let mut rows = stmt.query([id])?;
        let mut out = Vec::new();
        while let Some(r) = rows.next()? {
            let mut value = Fields::with_capacity(TRANSACTION_COLUMNS.len());
            for (i, c) in TRANSACTION_COLUMNS.iter().enumerate() {
                value.push((*c, cell(r, 11 + i, c)?));
            }
            out.push(StoredVersion {
                provenance: provenance(r, r.get(0)?, 8, r.get(10)?)?,
                value,
            });
        }
        Ok(out)
    }
}

impl<T: Reads + ?Sized> HistoryReads for T {}
