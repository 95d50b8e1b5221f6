//! Hourly monitor rows: inserts and the streams reports read.

use super::{Ledger, Reads, Result, Tx};
use crate::records::{HourRow, Reading};
use rusqlite::{params, Connection, OptionalExtension, Row};

const READING_COLUMNS: &str =
    "load_mw, so2_ppm_wet, so2_ppm_dry, nox_ppm_wet, nox_ppm_dry, o2_pct_wet, o2_pct_dry, \
     co2_pct_wet, co2_pct_dry, flow_scfh_wet, h2o_pct";

fn hour_row(r: &Row, first: usize) -> rusqlite::Result<HourRow> {
    let mut readings = [None; Reading::COUNT];
    for (i, slot) in readings.iter_mut().enumerate() {
        *slot = r.get(first + 2 + i)?;
    }
    let row = HourRow {
        hour: r.get(first)?,
        op_time_centi: r.get(first + 1)?,
        readings,
    };
    // The schema's CHECKs hold; assert again after reading (STYLE.md).
    assert!(
        (0..=100).contains(&row.op_time_centi),
        "stored op_time out of range"
    );
    Ok(row)
}

impl Tx<'_> {
    /// The id the next import batch will get. Safe inside `BEGIN IMMEDIATE`,
    /// which holds the write lock until commit.
    pub fn next_batch_id(&self) -> Result<i64> {
        Ok(self.tx.query_row(
            "SELECT coalesce(max(id), 0) + 1 FROM import_batches",
            [],
            |r| r.get(0),
        )?)
    }

    /// The number hourly rows of `unit` carry, assigned on first use.
    pub fn hourly_unit_no(&self, unit: &str) -> Result<i64> {
        let found: Option<i64> = self
            .tx
            .query_row(
                "SELECT unit_no FROM hourly_units WHERE unit = ?1",
                [unit],
                |r| r.get(0),
            )
            .optional()?;
        match found {
            Some(n) => Ok(n),
            None => {
                self.tx
                    .execute("INSERT INTO hourly_units (unit) VALUES (?1)", [unit])?;
                Ok(self.tx.last_insert_rowid())
            }
        }
    }

    /// For a first load into an empty hourly table: drop the unit-hour index
    /// and return its exact DDL, to build it once at the end (a sorted build
    /// beats keeping it up row by row). `None` where the table holds rows.
    pub fn suspend_hourly_index(&self) -> Result<Option<String>> {
        let empty: bool =
            self.tx
                .query_row("SELECT NOT EXISTS (SELECT 1 FROM hourly)", [], |r| r.get(0))?;
        if !empty {
            return Ok(None);
        }
        let sql: String = self.tx.query_row(
            "SELECT sql FROM sqlite_master WHERE type = 'index' AND name = 'hourly_by_unit_hour'",
            [],
            |r| r.get(0),
        )?;
        self.tx.execute_batch("DROP INDEX hourly_by_unit_hour")?;
        Ok(Some(sql))
    }

    /// Rebuild the index `suspend_hourly_index` dropped, from its own DDL.
    pub fn restore_hourly_index(&self, sql: &str) -> Result<()> {
        self.tx.execute_batch(sql)?;
        Ok(())
    }

    /// Whether the ledger holds any hour of unit `unit_no` in `[from, to)`.
    pub fn holds_hours(&self, unit_no: i64, from: i64, to: i64) -> Result<bool> {
        let mut stmt = self.tx.prepare_cached(
            "SELECT EXISTS (SELECT 1 FROM hourly WHERE unit_no = ?1 AND hour >= ?2 AND hour < ?3)",
        )?;
        Ok(stmt.query_row(params![unit_no, from, to], |r| r.get(0))?)
    }

    /// The unit-hour in force: the latest row, since a correction always comes later.
    pub fn current_hour(&self, unit_no: i64, hour: i64) -> Result<Option<(i64, HourRow)>> {
        let sql = format!(
            "SELECT id, hour, op_time, {READING_COLUMNS} FROM hourly WHERE unit_no = ?1 AND hour = ?2 ORDER BY id DESC LIMIT 1"
        );
        let mut stmt = self.tx.prepare_cached(&sql)?;
        Ok(stmt
            .query_row(params![unit_no, hour], |r| Ok((r.get(0)?, hour_row(r, 1)?)))
            .optional()?)
    }

    /// A prepared insert for hourly rows, reused for a whole import.
    pub fn hour_inserter(&self) -> Result<HourInserter<'_>> {
        let stmt = self.tx.prepare(&format!(
            "INSERT INTO hourly (batch_id, line, unit_no, hour, op_time, {READING_COLUMNS})
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16)"
        ))?;
        Ok(HourInserter {
            stmt,
            conn: &self.tx,
        })
    }

    /// Record that a unit's hours carry values in `reading`.
    pub fn note_hourly_column(&self, unit_no: i64, reading: Reading) -> Result<()> {
        self.tx.execute(
            "INSERT OR IGNORE INTO hourly_unit_columns (unit_no, reading) VALUES (?1, ?2)",
            params![unit_no, reading.column()],
        )?;
        Ok(())
    }

    pub fn insert_hour_correction(&self, id: i64, corrects_id: i64, reason: &str) -> Result<()> {
        self.tx.execute(
            "INSERT INTO hourly_corrections (id, corrects_id, reason) VALUES (?1, ?2, ?3)",
            params![id, corrects_id, reason],
        )?;
        Ok(())
    }
}

/// Where a stored hour came from, for explanations.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct HourSource {
    pub id: i64,
    pub file: String,
    pub line: usize,
    pub sha256: String,
}

/// Hourly reads, for the ledger and for a write transaction alike.
pub trait HourlyReads: Reads {
    /// Which reading columns a unit's stored hours use; `None` without hours.
    fn hourly_present(&self, unit: &str) -> Result<Option<[bool; Reading::COUNT]>> {
        let mut stmt = self.conn().prepare(
            "SELECT c.reading FROM hourly_unit_columns c JOIN hourly_units u ON u.unit_no = c.unit_no
             WHERE u.unit = ?1",
        )?;
        let has_hours: bool = self.conn().query_row(
            "SELECT EXISTS (SELECT 1 FROM hourly h JOIN hourly_units u ON u.unit_no = h.unit_no WHERE u.unit = ?1)",
            [unit],
            |r| r.get(0),
        )?;
        if !has_hours {
            return Ok(None);
        }
        let mut present = [false; Reading::COUNT];
        let mut rows = stmt.query([unit])?;
        while let Some(r) = rows.next()? {
            let name: String = r.get(0)?;
            let reading = Reading::ALL
                .into_iter()
                .find(|x| x.column() == name)
                .ok_or_else(|| {
                    super::LedgerError::Damaged(format!("unknown hourly column {name:?}"))
                })?;
            present[reading.index()] = true;
        }
        Ok(Some(present))
    }

    /// Stream a unit's hours in force over `[from, to)`, in hour order.
    fn each_hour(&self, unit: &str, from: i64, to: i64, mut f: impl FnMut(&HourRow)) -> Result<()> {
        each_hour(self.conn(), unit, from, to, &mut |row| {
            f(row);
            true
        })
    }

    /// Stream a unit's hours in force from `from` on, in hour order, while
    /// `f` returns true.
    fn each_hour_while(
        &self,
        unit: &str,
        from: i64,
        mut f: impl FnMut(&HourRow) -> bool,
    ) -> Result<()> {
        each_hour(self.conn(), unit, from, i64::MAX, &mut f)
    }
}

impl<T: Reads + ?Sized> HourlyReads for T {}

impl Ledger {
    /// The stored row in force for a unit-hour, with its source.
    pub fn hour_with_source(&self, unit: &str, hour: i64) -> Result<Option<(HourRow, HourSource)>> {
        let sql = format!(
            "SELECT h.hour, h.op_time, {READING_COLUMNS}, h.id, b.file_name, h.line, b.sha256
             FROM hourly h JOIN import_batches b ON b.id = h.batch_id
             JOIN hourly_units u ON u.unit_no = h.unit_no
             WHERE u.unit = ?1 AND h.hour = ?2 ORDER BY h.id DESC LIMIT 1"
        );
        let mut stmt = self.conn.prepare(&sql)?;
        Ok(stmt
            .query_row(params![unit, hour], |r| {
                let row = hour_row(r, 0)?;
                let n = 2 + Reading::COUNT;
                let line: i64 = r.get(n + 2)?;
                Ok((
                    row,
                    HourSource {
                        id: r.get(n)?,
                        file: r.get(n + 1)?,
                        line: line as usize,
                        sha256: r.get(n + 3)?,
                    },
                ))
            })
            .optional()?)
    }
}

fn each_hour(
    conn: &Connection,
    unit: &str,
    from: i64,
    to: i64,
    f: &mut impl FnMut(&HourRow) -> bool,
) -> Result<()> {
    let sql = format!(
        "SELECT hour, op_time, {READING_COLUMNS} FROM hourly
         WHERE unit_no = (SELECT unit_no FROM hourly_units WHERE unit = ?1) AND hour >= ?2 AND hour < ?3
         ORDER BY hour, id"
    );
    let mut stmt = conn.prepare(&sql)?;
    let mut rows = stmt.query(params![unit, from, to])?;
    // Rows of one hour arrive oldest first; the last of them is in force.
    let mut pending: Option<HourRow> = None;
    while let Some(r) = rows.next()? {
        let row = hour_row(r, 0)?;
        if let Some(p) = pending {
            if p.hour != row.hour && !f(&p) {
                return Ok(());
            }
        }
        pending = Some(row);
    }
    if let Some(p) = pending {
        f(&p);
    }
    Ok(())
}

/// Inserts hourly rows through one prepared statement.
pub struct HourInserter<'a> {
    stmt: rusqlite::Statement<'a>,
    conn: &'a Connection,
}

impl HourInserter<'_> {
    /// Insert one row. Binds by position without `dyn ToSql`: this is the
    /// hot path of a fleet-year import.
    pub fn insert(
        &mut self,
        batch_id: i64,
        line: usize,
        unit_no: i64,
        row: &HourRow,
    ) -> Result<i64> {
        let s = &mut self.stmt;
        s.raw_bind_parameter(1, batch_id)?;
        s.raw_bind_parameter(2, line as i64)?;
        s.raw_bind_parameter(3, unit_no)?;
        s.raw_bind_parameter(4, row.hour)?;
        s.raw_bind_parameter(5, row.op_time_centi)?;
        for (i, v) in row.readings.iter().enumerate() {
            s.raw_bind_parameter(6 + i, *v)?;
        }
        s.raw_execute()?;
        Ok(self.conn.last_insert_rowid())
    }
}
