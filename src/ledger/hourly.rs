//! Hourly monitor rows: blocks written by imports, and the streams reports
//! read. A unit-hour may be held more than once (corrections); the version
//! in the block with the highest id is in force (schema/0005_hourly_blocks.sql).

use super::blocks::{decode, decode_all, BlockBuilder, BlockHead, BlockRow};
use super::{Ledger, LedgerError, Reads, Result, Tx};
use crate::records::{HourRow, Reading};
use rusqlite::{params, Connection, OptionalExtension, Row};
use std::collections::HashMap;

/// A stored block's columns: id, batch, and what its bytes must hold.
struct StoredBlock {
    id: i64,
    batch_id: i64,
    head: BlockHead,
    bytes: Vec<u8>,
}

const BLOCK_COLUMNS: &str = "b.id, b.batch_id, b.first_hour, b.last_hour, b.row_count, b.rows";

fn stored_block(r: &Row) -> rusqlite::Result<StoredBlock> {
    Ok(StoredBlock {
        id: r.get(0)?,
        batch_id: r.get(1)?,
        head: BlockHead {
            first_hour: r.get(2)?,
            last_hour: r.get(3)?,
            row_count: r.get(4)?,
        },
        bytes: r.get(5)?,
    })
}

fn damaged(block: i64, why: String) -> LedgerError {
    LedgerError::Damaged(format!("hourly block {block}: {why}"))
}

impl StoredBlock {
    fn each(&self, f: impl FnMut(BlockRow)) -> Result<()> {
        decode(self.head, &self.bytes, f).map_err(|why| damaged(self.id, why))
    }

    fn rows(&self) -> Result<Vec<BlockRow>> {
        decode_all(self.head, &self.bytes).map_err(|why| damaged(self.id, why))
    }

    /// The row of `hour`, if the block holds it.
    fn find(&self, hour: i64) -> Result<Option<BlockRow>> {
        let rows = self.rows()?;
        Ok(rows
            .binary_search_by_key(&hour, |r| r.row.hour)
            .ok()
            .map(|i| rows[i]))
    }
}

/// Blocks of unit `unit` (by name) holding any hour in `[from, to)`, in
/// order of first hour, then id.
fn blocks_over(conn: &Connection, unit: &str, from: i64, to: i64) -> Result<Vec<StoredBlock>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {BLOCK_COLUMNS} FROM hourly_blocks b
         WHERE b.unit_no = (SELECT unit_no FROM hourly_units WHERE unit = ?1)
           AND b.last_hour >= ?2 AND b.first_hour < ?3
         ORDER BY b.first_hour, b.id"
    ))?;
    let rows = stmt.query_map(params![unit, from, to], stored_block)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// Blocks of unit `unit` (by name) holding `hour`'s range, newest first.
fn blocks_at(conn: &Connection, unit: &str, hour: i64) -> Result<Vec<StoredBlock>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {BLOCK_COLUMNS} FROM hourly_blocks b
         WHERE b.unit_no = (SELECT unit_no FROM hourly_units WHERE unit = ?1)
           AND b.last_hour >= ?2 AND b.first_hour <= ?2
         ORDER BY b.id DESC"
    ))?;
    let rows = stmt.query_map(params![unit, hour], stored_block)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
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

    /// Whether the ledger holds no hourly rows at all (a first load has
    /// nothing to compare with).
    pub fn hourly_empty(&self) -> Result<bool> {
        Ok(self
            .tx
            .query_row("SELECT NOT EXISTS (SELECT 1 FROM hourly_blocks)", [], |r| {
                r.get(0)
            })?)
    }

    /// Whether the ledger holds any hour of unit `unit_no` in `[from, to)`.
    pub fn holds_hours(&self, unit_no: i64, from: i64, to: i64) -> Result<bool> {
        let mut stmt = self.tx.prepare_cached(
            "SELECT EXISTS (SELECT 1 FROM hourly_blocks
                            WHERE unit_no = ?1 AND last_hour >= ?2 AND first_hour < ?3)",
        )?;
        Ok(stmt.query_row(params![unit_no, from, to], |r| r.get(0))?)
    }

    /// Write one filled block of unit `unit_no` for import batch `batch_id`.
    pub fn insert_block(&self, batch_id: i64, unit_no: i64, block: &BlockBuilder) -> Result<()> {
        let mut stmt = self.tx.prepare_cached(
            "INSERT INTO hourly_blocks (batch_id, unit_no, first_hour, last_hour, row_count, rows)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
        )?;
        stmt.execute(params![
            batch_id,
            unit_no,
            block.first_hour,
            block.last_hour,
            block.rows as i64,
            block.bytes
        ])?;
        Ok(())
    }

    /// Record that a unit's hours carry values in `reading`.
    pub fn note_hourly_column(&self, unit_no: i64, reading: Reading) -> Result<()> {
        self.tx.execute(
            "INSERT OR IGNORE INTO hourly_unit_columns (unit_no, reading) VALUES (?1, ?2)",
            params![unit_no, reading.column()],
        )?;
        Ok(())
    }
}

/// Looks up the unit-hours in force before an import, decoding each block
/// once while a file's rows walk through it.
#[derive(Default)]
pub struct HeldHours {
    decoded: HashMap<i64, Vec<BlockRow>>,
}

/// Decoded blocks kept at most: bounds memory whatever the file's order.
const HELD_BLOCKS_CACHED: usize = 256;

impl HeldHours {
    /// The row in force for unit `unit_no` at `hour`, from batches other
    /// than `batch_id` (the import running).
    pub fn current(
        &mut self,
        tx: &Tx,
        unit_no: i64,
        hour: i64,
        batch_id: i64,
    ) -> Result<Option<HourRow>> {
        let mut stmt = tx.tx.prepare_cached(
            "SELECT id FROM hourly_blocks
             WHERE unit_no = ?1 AND last_hour >= ?2 AND first_hour <= ?2 AND batch_id <> ?3
             ORDER BY id DESC",
        )?;
        let ids: Vec<i64> = stmt
            .query_map(params![unit_no, hour, batch_id], |r| r.get(0))?
            .collect::<rusqlite::Result<_>>()?;
        for id in ids {
            if !self.decoded.contains_key(&id) {
                if self.decoded.len() >= HELD_BLOCKS_CACHED {
                    self.decoded.clear();
                }
                let block = tx.tx.query_row(
                    &format!("SELECT {BLOCK_COLUMNS} FROM hourly_blocks b WHERE b.id = ?1"),
                    [id],
                    stored_block,
                )?;
                self.decoded.insert(id, block.rows()?);
            }
            let rows = &self.decoded[&id];
            if let Ok(i) = rows.binary_search_by_key(&hour, |r| r.row.hour) {
                return Ok(Some(rows[i].row));
            }
        }
        Ok(None)
    }
}

/// Where a stored hour came from, for explanations.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct HourSource {
    /// The id of the block that holds the hour (table `hourly_blocks`).
    pub id: i64,
    pub file: String,
    pub line: usize,
    pub sha256: String,
}

/// One stored version of a unit-hour: its block, batch, line and row.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct HourVersion {
    pub block_id: i64,
    pub batch_id: i64,
    pub line: u32,
    pub row: HourRow,
}

/// Every stored version of a unit-hour, oldest first.
pub(super) fn hour_versions(conn: &Connection, unit: &str, hour: i64) -> Result<Vec<HourVersion>> {
    let mut blocks = blocks_at(conn, unit, hour)?;
    blocks.reverse();
    let mut out = Vec::new();
    for b in &blocks {
        if let Some(r) = b.find(hour)? {
            out.push(HourVersion {
                block_id: b.id,
                batch_id: b.batch_id,
                line: r.line,
                row: r.row,
            });
        }
    }
    Ok(out)
}

/// Hourly reads, for the ledger and for a write transaction alike.
pub trait HourlyReads: Reads {
    /// Which reading columns a unit's stored hours use; `None` without hours.
    fn hourly_present(&self, unit: &str) -> Result<Option<[bool; Reading::COUNT]>> {
        let has_hours: bool = self.conn().query_row(
            "SELECT EXISTS (SELECT 1 FROM hourly_blocks h JOIN hourly_units u ON u.unit_no = h.unit_no WHERE u.unit = ?1)",
            [unit],
            |r| r.get(0),
        )?;
        if !has_hours {
            return Ok(None);
        }
        let mut stmt = self.conn().prepare(
            "SELECT c.reading FROM hourly_unit_columns c JOIN hourly_units u ON u.unit_no = c.unit_no
             WHERE u.unit = ?1",
        )?;
        let mut present = [false; Reading::COUNT];
        let mut rows = stmt.query([unit])?;
        while let Some(r) = rows.next()? {
            let name: String = r.get(0)?;
            let reading = Reading::ALL
                .into_iter()
                .find(|x| x.column() == name)
                .ok_or_else(|| LedgerError::Damaged(format!("unknown hourly column {name:?}")))?;
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
        for b in blocks_at(&self.conn, unit, hour)? {
            let Some(r) = b.find(hour)? else {
                continue;
            };
            let (file, sha256): (String, String) = self.conn.query_row(
                "SELECT file_name, sha256 FROM import_batches WHERE id = ?1",
                [b.batch_id],
                |x| Ok((x.get(0)?, x.get(1)?)),
            )?;
            return Ok(Some((
                r.row,
                HourSource {
                    id: b.id,
                    file,
                    line: r.line as usize,
                    sha256,
                },
            )));
        }
        Ok(None)
    }
}

/// Stream the hours in force of `unit` over `[from, to)` in hour order
/// while `f` returns true. A block whose hours overlap no other streams
/// straight through; blocks whose hours overlap (corrections, or a file out
/// of hour order) are merged: of the rows of one hour, the one from the
/// block with the highest id is in force.
fn each_hour(
    conn: &Connection,
    unit: &str,
    from: i64,
    to: i64,
    f: &mut impl FnMut(&HourRow) -> bool,
) -> Result<()> {
    let blocks = blocks_over(conn, unit, from, to)?;
    let mut pending: Vec<(i64, HourRow)> = Vec::new();
    let mut start = 0;
    while start < blocks.len() {
        // The run of blocks whose hour ranges chain into one another.
        let mut end = start + 1;
        let mut reach = blocks[start].head.last_hour;
        while end < blocks.len() && blocks[end].head.first_hour <= reach {
            reach = reach.max(blocks[end].head.last_hour);
            end += 1;
        }
        let mut going = true;
        if end == start + 1 {
            blocks[start].each(|r| {
                if going && r.row.hour >= from && r.row.hour < to {
                    going = f(&r.row);
                }
            })?;
        } else {
            for block in &blocks[start..end] {
                block.each(|r| {
                    if r.row.hour >= from && r.row.hour < to {
                        pending.push((block.id, r.row));
                    }
                })?;
            }
            going = emit(&mut pending, f);
        }
        if !going {
            return Ok(());
        }
        start = end;
    }
    Ok(())
}

/// Hand on the rows in force of `pending` in hour order; false once `f` is done.
fn emit(pending: &mut Vec<(i64, HourRow)>, f: &mut impl FnMut(&HourRow) -> bool) -> bool {
    // Stable, and each block's rows already ascend: cheap for sorted runs.
    pending.sort_by_key(|(block, row)| (row.hour, *block));
    let mut going = true;
    for (i, (_, row)) in pending.iter().enumerate() {
        let superseded = pending
            .get(i + 1)
            .is_some_and(|(_, next)| next.hour == row.hour);
        if !superseded && !f(row) {
            going = false;
            break;
        }
    }
    pending.clear();
    going
}
