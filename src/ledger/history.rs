//! Every stored version of one record, for `flue history`: read-only queries.
//!
//! A record's versions are the rows that share its key (sample; unit, fuel
//! and period; unit and hour; transaction id), oldest first by rowid, which
//! is the order they were written in. Values come back as stored: decimal
//! TEXT in its canonical form, integers as written, hourly readings as the
//! fixed-point `HourRow`. Nothing here writes.

use super::{LedgerError, Reads, Result};
use crate::records::{HourRow, Reading};
use rusqlite::types::Value;
use rusqlite::{params, Row};

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

/// The reading columns of `hourly`, in `Reading::ALL` order.
fn reading_columns() -> String {
    Reading::ALL
        .iter()
        .map(|r| format!("x.{}", r.column()))
        .collect::<Vec<_>>()
        .join(", ")
}

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

    /// Every stored row of one unit-hour, oldest first.
    fn hour_versions(&self, unit: &str, hour: i64) -> Result<Vec<StoredVersion<HourRow>>> {
        let sql = format!(
            "SELECT x.id, {PROVENANCE}, c.corrects_id, c.reason,
                    NOT EXISTS (SELECT 1 FROM hourly_corrections d WHERE d.corrects_id = x.id),
                    x.hour, x.op_time, {}
             FROM hourly x JOIN hourly_units u ON u.unit_no = x.unit_no
             JOIN import_batches b ON b.id = x.batch_id
             LEFT JOIN hourly_corrections c ON c.id = x.id
             WHERE u.unit = ?1 AND x.hour = ?2 ORDER BY x.id",
            reading_columns()
        );
        let mut stmt = self.conn().prepare(&sql)?;
        let mut rows = stmt.query(params![unit, hour])?;
        let mut out = Vec::new();
        while let Some(r) = rows.next()? {
            let mut readings = [None; Reading::COUNT];
            for (i, slot) in readings.iter_mut().enumerate() {
                *slot = r.get(13 + i)?;
            }
            let value = HourRow {
                hour: r.get(11)?,
                op_time_centi: r.get(12)?,
                readings,
            };
            // The schema's CHECKs hold; assert again after reading (STYLE.md).
            assert!(
                (0..=100).contains(&value.op_time_centi),
                "stored op_time out of range"
            );
            out.push(StoredVersion {
                provenance: provenance(r, r.get(0)?, 8, r.get(10)?)?,
                value,
            });
        }
        Ok(out)
    }

    /// The stored allowance transaction of an id. Transaction ids are
    /// idempotent and never superseded (schema/0003_allowances.sql: a
    /// mistaken transaction is undone by a later adjustment), so there is at
    /// most one version, always in force.
    fn transaction_versions(&self, id: &str) -> Result<Vec<StoredVersion<Fields>>> {
        let list = TRANSACTION_COLUMNS
            .iter()
            .map(|c| format!("x.{c}"))
            .collect::<Vec<_>>()
            .join(", ");
        let sql = format!(
            "SELECT x.seq, {PROVENANCE}, NULL, NULL, 1, {list}
             FROM allowance_transactions x JOIN import_batches b ON b.id = x.batch_id
             WHERE x.id = ?1"
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
