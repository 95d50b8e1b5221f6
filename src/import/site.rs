//! `flue site load`: store a new version of a facility's site file.
//!
//! Earlier versions stay readable. A version that would leave a stored fuel
//! record without a method, or that moves a unit id to another facility, is
//! refused.

use super::{ImportError, InputFile, Stamp};
use crate::compute::record_amounts;
use crate::csvread::{FileErrors, RowError};
use crate::ledger::{Ledger, Reads};
use crate::site::{self, Site};

/// What loading a site file did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SiteOutcome {
    /// Stored as version `version` of the facility.
    Stored {
        facility: String,
        version: i64,
        units: usize,
    },
    /// Identical to the version held.
    Unchanged { facility: String, version: i64 },
}

pub fn load(
    ledger: &mut Ledger,
    file: &InputFile,
    stamp: &Stamp,
) -> Result<SiteOutcome, ImportError> {
    let fail = |errors: Vec<RowError>| FileErrors::new(&file.name, errors);
    let source = std::str::from_utf8(&file.bytes).map_err(|e| {
        fail(vec![RowError::line(
            site::Lines::new(&file.bytes).at(e.valid_up_to()),
            "invalid UTF-8",
        )])
    })?;
    let site: Site = site::parse(source).map_err(|errs| {
        fail(
            errs.into_iter()
                .map(|e| RowError::line(e.line, e.message))
                .collect(),
        )
    })?;
    ledger.write(|tx| {
        let facility = site.facility.id.clone();
        let versions = tx.site_versions(&facility)?;
        if let Some(last) = versions.last() {
            if last.source == source {
                return Ok(SiteOutcome::Unchanged {
                    facility,
                    version: last.version,
                });
            }
        }
        let mut errors = Vec::new();
        for unit in &site.units {
            if let Some(owner) = tx.unit_owner(&unit.id)? {
                if owner != facility {
                    errors.push(RowError::line(
                        unit.line,
                        format!(
                            "unit {}: the id already belongs to facility {owner}",
                            unit.id
                        ),
                    ));
                }
            }
        }
        let samples = tx.samples()?;
        for u in tx.fuel_uses()? {
            let Some(owner) = tx.unit_owner(&u.value.unit)? else {
                continue;
            };
            if owner != facility {
                continue;
            }
            let Some(unit) = site.unit(&u.value.unit) else {
                errors.push(RowError::line(
                    1,
                    format!(
                        "unit {} has fuel records (first at {}) but is not in this site file",
                        u.value.unit,
                        u.source.place()
                    ),
                ));
                continue;
            };
            let Some(sample) = samples.iter().find(|s| s.value.sample == u.value.sample) else {
                continue;
            };
            if let Err(why) = record_amounts(unit, &u.value, &sample.value) {
                errors.push(RowError::line(
                    unit.line,
                    format!(
                        "this version would break the fuel record at {}: {why}",
                        u.source.place()
                    ),
                ));
            }
        }
        if !errors.is_empty() {
            errors.sort_by_key(|e| e.line);
            errors.dedup();
            return Err(fail(errors).into());
        }
        let version = tx.insert_site_version(
            &facility,
            &file.name,
            &file.sha256,
            source,
            &stamp.at,
            &stamp.by,
        )?;
        for unit in &site.units {
            if tx.unit_owner(&unit.id)?.is_none() {
                tx.insert_unit_owner(&unit.id, &facility)?;
            }
        }
        Ok(SiteOutcome::Stored {
            facility,
            version,
            units: site.units.len(),
        })
    })
}
