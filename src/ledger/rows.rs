//! Row types and the queries that read and write them.

use super::{Ledger, LedgerError, Result, Tx};
use crate::emissions::fuel::{FuelAmount, GcvUom};
use crate::emissions::fuel_based::Analysis;
use crate::records::{FuelUse, Sample, Source, Stored};
use crate::site::Site;
use chrono::NaiveDate;
use rusqlite::{params, Connection, OptionalExtension, Row};
use rust_decimal::Decimal;
use std::str::FromStr;

/// One loaded version of a facility's site file.
#[derive(Clone, Debug)]
pub struct SiteVersion {
    pub facility_id: String,
    pub version: i64,
    pub file_name: String,
    pub sha256: String,
    pub source: String,
    pub loaded_at: String,
    pub loaded_by: String,
}

/// An import batch about to be written.
#[derive(Clone, Debug)]
pub struct NewBatch<'a> {
    pub kind: &'a str,
    pub file_name: &'a str,
    pub sha256: &'a str,
    pub rows_added: usize,
    pub rows_corrected: usize,
    pub rows_present: usize,
    pub at: &'a str,
    pub by: &'a str,
    pub reason: Option<&'a str>,
}

/// An import batch as stored.
#[derive(Clone, Debug)]
pub struct BatchSummary {
    pub id: i64,
    pub kind: String,
    pub file_name: String,
    pub sha256: String,
    pub rows_added: i64,
    pub rows_corrected: i64,
    pub rows_present: i64,
    pub imported_at: String,
    pub imported_by: String,
    pub reason: Option<String>,
}

fn damaged(what: &str, value: &str) -> LedgerError {
    LedgerError::Damaged(format!("stored {what} {value:?} does not parse"))
}

fn decimal(what: &str, text: Option<String>) -> Result<Option<Decimal>> {
    text.map(|t| Decimal::from_str_exact(&t).map_err(|_| damaged(what, &t)))
        .transpose()
}

fn parsed<T: FromStr>(what: &str, text: &str) -> Result<T> {
    T::from_str(text).map_err(|_| damaged(what, text))
}

fn date(what: &str, text: &str) -> Result<NaiveDate> {
    NaiveDate::parse_from_str(text, "%Y-%m-%d").map_err(|_| damaged(what, text))
}

fn text_of(d: Option<Decimal>) -> Option<String> {
    d.map(|d| d.to_string())
}

/// Reads shared by the ledger and a write transaction, so that a write
/// validates against what it sees inside its own transaction.
pub trait Reads {
    fn conn(&self) -> &Connection;

    /// The ledger file, where more connections may read it side by side
    /// (`None` inside a write transaction, whose view must be used alone).
    fn file(&self) -> Option<&std::path::Path> {
        None
    }

    /// The journal entry reads stop at (`--as-of`), for a parallel reader
    /// of `file()` to see the same ledger; `None` for the ledger as it is.
    fn as_of(&self) -> Option<i64> {
        None
    }

    /// The latest site version of every facility.
    fn latest_sites(&self) -> Result<Vec<SiteVersion>> {
        let mut stmt = self.conn().prepare(
            "SELECT facility_id, version, file_name, sha256, source, loaded_at, loaded_by FROM site_versions s
             WHERE version = (SELECT max(version) FROM site_versions t WHERE t.facility_id = s.facility_id)
             ORDER BY facility_id",
        )?;
        let rows = stmt.query_map([], site_version)?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Every version of one facility's site file, oldest first.
    fn site_versions(&self, facility_id: &str) -> Result<Vec<SiteVersion>> {
        let mut stmt = self.conn().prepare(
            "SELECT facility_id, version, file_name, sha256, source, loaded_at, loaded_by FROM site_versions
             WHERE facility_id = ?1 ORDER BY version",
        )?;
        let rows = stmt.query_map([facility_id], site_version)?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// The facility a unit id belongs to.
    fn unit_owner(&self, unit: &str) -> Result<Option<String>> {
        Ok(self
            .conn()
            .query_row(
                "SELECT facility_id FROM unit_owners WHERE unit = ?1",
                [unit],
                |r| r.get(0),
            )
            .optional()?)
    }

    fn batches(&self) -> Result<Vec<BatchSummary>> {
        let mut stmt = self.conn().prepare(
            "SELECT id, kind, file_name, sha256, rows_added, rows_corrected, rows_present, imported_at, imported_by, reason
             FROM import_batches ORDER BY id",
        )?;
        let rows = stmt.query_map([], |r| {
            Ok(BatchSummary {
                id: r.get(0)?,
                kind: r.get(1)?,
                file_name: r.get(2)?,
                sha256: r.get(3)?,
                rows_added: r.get(4)?,
                rows_corrected: r.get(5)?,
                rows_present: r.get(6)?,
                imported_at: r.get(7)?,
                imported_by: r.get(8)?,
                reason: r.get(9)?,
            })
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// The samples in force (none superseded), by sample id.
    fn samples(&self) -> Result<Vec<Stored<Sample>>> {
        let mut stmt = self.conn().prepare(
            "SELECT a.id, a.batch_id, b.file_name, a.line, b.sha256, a.corrects_id, a.reason,
                    a.sample, a.fuel, a.sampled_on, a.sulfur_pct, a.sulfur_gr_per_100scf, a.gcv, a.gcv_uom,
                    a.carbon_pct, a.hydrogen_pct, a.nitrogen_pct, a.oxygen_pct, a.density_lb_per_gal
             FROM current_analyses a JOIN import_batches b ON b.id = a.batch_id ORDER BY a.sample",
        )?;
        let mut rows = stmt.query([])?;
        let mut out = Vec::new();
        while let Some(r) = rows.next()? {
            let gcv_uom: Option<String> = r.get(13)?;
            let value = Sample {
                sample: r.get(7)?,
                fuel: parsed("fuel", &r.get::<_, String>(8)?)?,
                sampled_on: date("sampled_on", &r.get::<_, String>(9)?)?,
                analysis: Analysis {
                    sulfur_pct: decimal("sulfur_pct", r.get(10)?)?,
                    sulfur_gr_per_100scf: decimal("sulfur_gr_per_100scf", r.get(11)?)?,
                    gcv: decimal("gcv", r.get(12)?)?,
                    gcv_uom: gcv_uom
                        .map(|u| parsed::<GcvUom>("gcv_uom", &u))
                        .transpose()?,
                    carbon_pct: decimal("carbon_pct", r.get(14)?)?,
                    hydrogen_pct: decimal("hydrogen_pct", r.get(15)?)?,
                    nitrogen_pct: decimal("nitrogen_pct", r.get(16)?)?,
                    oxygen_pct: decimal("oxygen_pct", r.get(17)?)?,
                    density_lb_per_gal: decimal("density_lb_per_gal", r.get(18)?)?,
                },
            };
            out.push(stored(r, value)?);
        }
        Ok(out)
    }

    /// The fuel records in force (none superseded), in unit and date order.
    fn fuel_uses(&self) -> Result<Vec<Stored<FuelUse>>> {
        let mut stmt = self.conn().prepare(
            "SELECT f.id, f.batch_id, b.file_name, f.line, b.sha256, f.corrects_id, f.reason,
                    f.unit, f.start_date, f.end_date, f.fuel, f.quantity, f.uom, f.sample
             FROM current_fuel_records f JOIN import_batches b ON b.id = f.batch_id
             ORDER BY f.unit, f.start_date, f.fuel, f.id",
        )?;
        let mut rows = stmt.query([])?;
        let mut out = Vec::new();
        while let Some(r) = rows.next()? {
            let quantity: String = r.get(11)?;
            let value = FuelUse {
                unit: r.get(7)?,
                start: date("start", &r.get::<_, String>(8)?)?,
                end: date("end", &r.get::<_, String>(9)?)?,
                fuel: parsed("fuel", &r.get::<_, String>(10)?)?,
                amount: FuelAmount {
                    amount: Decimal::from_str_exact(&quantity)
                        .map_err(|_| damaged("quantity", &quantity))?,
                    uom: parsed("uom", &r.get::<_, String>(12)?)?,
                },
                sample: r.get(13)?,
            };
            out.push(stored(r, value)?);
        }
        Ok(out)
    }

    /// The latest site file of every facility, parsed.
    fn sites(&self) -> Result<Vec<Site>> {
        self.latest_sites()?
            .iter()
            .map(|v| {
                crate::site::parse(&v.source).map_err(|e| {
                    LedgerError::Damaged(format!(
                        "stored site file of {} no longer parses: {}",
                        v.facility_id, e[0]
                    ))
                })
            })
            .collect()
    }
}

fn site_version(r: &Row) -> rusqlite::Result<SiteVersion> {
    Ok(SiteVersion {
        facility_id: r.get(0)?,
        version: r.get(1)?,
        file_name: r.get(2)?,
        sha256: r.get(3)?,
        source: r.get(4)?,
        loaded_at: r.get(5)?,
        loaded_by: r.get(6)?,
    })
}

fn stored<T>(r: &Row, value: T) -> Result<Stored<T>> {
    let line: i64 = r.get(3)?;
    Ok(Stored {
        id: r.get(0)?,
        source: Source {
            batch_id: r.get(1)?,
            file: r.get(2)?,
            line: usize::try_from(line).map_err(|_| damaged("line", &line.to_string()))?,
            sha256: r.get(4)?,
        },
        corrects_id: r.get(5)?,
        reason: r.get(6)?,
        value,
    })
}

impl Reads for Ledger {
    fn conn(&self) -> &Connection {
        &self.conn
    }

    fn file(&self) -> Option<&std::path::Path> {
        Some(&self.path)
    }

    fn as_of(&self) -> Option<i64> {
        self.as_of
    }
}

impl Reads for Tx<'_> {
    fn conn(&self) -> &Connection {
        &self.tx
    }
}

impl Tx<'_> {
    /// Store a new version of a facility's site file; returns its version number.
    pub fn insert_site_version(
        &self,
        facility_id: &str,
        file_name: &str,
        sha256: &str,
        source: &str,
        at: &str,
        by: &str,
    ) -> Result<i64> {
        let version: i64 = self.tx.query_row(
            "SELECT coalesce(max(version), 0) + 1 FROM site_versions WHERE facility_id = ?1",
            [facility_id],
            |r| r.get(0),
        )?;
        self.tx.execute(
            "INSERT INTO site_versions (facility_id, version, file_name, sha256, source, loaded_at, loaded_by)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            params![facility_id, version, file_name, sha256, source, at, by],
        )?;
        Ok(version)
    }

    pub fn insert_unit_owner(&self, unit: &str, facility_id: &str) -> Result<()> {
        self.tx.execute(
            "INSERT INTO unit_owners (unit, facility_id) VALUES (?1, ?2)",
            params![unit, facility_id],
        )?;
        Ok(())
    }

    pub fn insert_batch(&self, b: &NewBatch) -> Result<i64> {
        assert!(
            b.rows_corrected == 0 || b.reason.is_some(),
            "a correction needs a reason"
        );
        self.tx.execute(
            "INSERT INTO import_batches (kind, file_name, sha256, rows_added, rows_corrected, rows_present, imported_at, imported_by, reason)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
            params![
                b.kind,
                b.file_name,
                b.sha256,
                b.rows_added as i64,
                b.rows_corrected as i64,
                b.rows_present as i64,
                b.at,
                b.by,
                b.reason
            ],
        )?;
        Ok(self.tx.last_insert_rowid())
    }

    /// Insert a sample; `corrects` names the row it supersedes and why.
    pub fn insert_sample(
        &self,
        batch_id: i64,
        line: usize,
        s: &Sample,
        corrects: Option<(i64, &str)>,
    ) -> Result<()> {
        let a = &s.analysis;
        let mut stmt = self.tx.prepare_cached(
            "INSERT INTO analyses (batch_id, line, sample, fuel, sampled_on, sulfur_pct, sulfur_gr_per_100scf, gcv, gcv_uom,
                                   carbon_pct, hydrogen_pct, nitrogen_pct, oxygen_pct, density_lb_per_gal, corrects_id, reason)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16)",
        )?;
        stmt.execute(params![
            batch_id,
            line as i64,
            s.sample,
            s.fuel.as_str(),
            s.sampled_on.to_string(),
            text_of(a.sulfur_pct),
            text_of(a.sulfur_gr_per_100scf),
            text_of(a.gcv),
            a.gcv_uom.map(|u| u.as_str()),
            text_of(a.carbon_pct),
            text_of(a.hydrogen_pct),
            text_of(a.nitrogen_pct),
            text_of(a.oxygen_pct),
            text_of(a.density_lb_per_gal),
            corrects.map(|c| c.0),
            corrects.map(|c| c.1),
        ])?;
        Ok(())
    }

    /// Insert a fuel record; `corrects` names the row it supersedes and why.
    pub fn insert_fuel_use(
        &self,
        batch_id: i64,
        line: usize,
        f: &FuelUse,
        corrects: Option<(i64, &str)>,
    ) -> Result<()> {
        assert!(f.start <= f.end, "a fuel record's period runs forward");
        let mut stmt = self.tx.prepare_cached(
            "INSERT INTO fuel_records (batch_id, line, unit, start_date, end_date, fuel, quantity, uom, sample, corrects_id, reason)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
        )?;
        stmt.execute(params![
            batch_id,
            line as i64,
            f.unit,
            f.start.to_string(),
            f.end.to_string(),
            f.fuel.as_str(),
            f.amount.amount.to_string(),
            f.amount.uom.as_str(),
            f.sample,
            corrects.map(|c| c.0),
            corrects.map(|c| c.1),
        ])?;
        Ok(())
    }
}
