//! Imports of input files: parse and validate every row first, then write
//! everything in one transaction, or nothing.
//!
//! A row whose key is new is added. A row identical to the one held is
//! already present and changes nothing. A row whose key is held with other
//! values is refused, naming the first differing field, unless the import
//! says `--correct REASON`: then it supersedes the held row, which stays
//! readable.

pub mod allowances;
pub mod analyses;
pub mod fuel;
pub mod hourly;
mod pieces;
pub mod site;

use crate::csvread::{Columns, FileErrors, Reader, Record, RowError};
use crate::records::Stored;
use sha2::{Digest, Sha256};
use std::collections::HashMap;
use std::fmt;
use std::hash::Hash;
use std::path::Path;

/// What an import did.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Outcome {
    pub added: usize,
    pub corrected: usize,
    pub present: usize,
}

impl fmt::Display for Outcome {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.added == 0 && self.corrected == 0 {
            write!(f, "nothing new: all {} rows already present", self.present)
        } else {
            write!(
                f,
                "{} new, {} corrected, {} already present",
                self.added, self.corrected, self.present
            )
        }
    }
}

/// Who and when, for the import batch.
#[derive(Debug, Clone)]
pub struct Stamp {
    pub at: String,
    pub by: String,
}

/// The bytes of an input file and their digest.
pub struct InputFile {
    pub name: String,
    pub bytes: Vec<u8>,
    pub sha256: String,
}

/// Largest input file read whole (RELIABILITY.md R11 caps files at 2 GiB;
/// fuel and analysis files are far smaller, so the cap here is tighter).
pub const FILE_BYTES_MAX: u64 = 256 * 1024 * 1024;

/// Why an import wrote nothing.
#[derive(Debug, thiserror::Error)]
pub enum ImportError {
    #[error("{0}")]
    Read(String),
    // Transparent, not "{0}" with a source: `main` prints the whole error
    // chain, and a source would print every row error a second time.
    #[error(transparent)]
    Rows(#[from] FileErrors),
    #[error(transparent)]
    Ledger(#[from] crate::ledger::LedgerError),
}

impl InputFile {
    pub fn read(path: &Path) -> Result<InputFile, ImportError> {
        let name = path.display().to_string();
        let cannot = |e: std::io::Error| ImportError::Read(format!("{name}: cannot read: {e}"));
        let meta = std::fs::metadata(path).map_err(cannot)?;
        if !meta.is_file() {
            return Err(ImportError::Read(format!("{name}: not a regular file")));
        }
        if meta.len() > FILE_BYTES_MAX {
            return Err(ImportError::Read(format!(
                "{name}: larger than {FILE_BYTES_MAX} bytes"
            )));
        }
        let bytes = std::fs::read(path).map_err(cannot)?;
        let sha256 = hex(&Sha256::digest(&bytes));
        Ok(InputFile {
            name,
            bytes,
            sha256,
        })
    }
}

pub fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// Parse every data row of a CSV file with `parse_row`, collecting errors.
/// The header must name the required columns and no unknown ones.
pub fn parse_rows<T>(
    file: &InputFile,
    required: &[&str],
    optional: &[&str],
    mut parse_row: impl FnMut(&Columns, &Record, &mut Vec<RowError>) -> Option<T>,
) -> Result<Vec<(usize, T)>, FileErrors> {
    let fail = |errors| FileErrors::new(&file.name, errors);
    let mut reader = Reader::new(file.bytes.as_slice());
    let mut record = Record::default();
    let mut errors = Vec::new();
    if !reader.next_into(&mut record).map_err(|e| fail(vec![e]))? {
        return Err(fail(vec![RowError::line(
            1,
            "empty file: expected a header row",
        )]));
    }
    let columns = Columns::from_header(&record, required, optional).map_err(fail)?;
    let mut rows = Vec::new();
    loop {
        match reader.next_into(&mut record) {
            Ok(false) => break,
            Ok(true) => {
                if let Some(e) = RowError::field_count(&record, columns.names.len()) {
                    errors.push(e);
                    continue;
                }
                if let Some(row) = parse_row(&columns, &record, &mut errors) {
                    rows.push((record.line, row));
                }
            }
            Err(e) => {
                errors.push(e);
                // A broken quote or an oversized record leaves no safe place to resume.
                break;
            }
        }
    }
    if rows.is_empty() && errors.is_empty() {
        errors.push(RowError::line(
            record.line.max(1),
            "no data rows after the header",
        ));
    }
    if errors.is_empty() {
        Ok(rows)
    } else {
        Err(fail(errors))
    }
}

/// Field access for one record, reporting problems at their column.
pub struct Fields<'a> {
    pub columns: &'a Columns,
    pub record: &'a Record,
    pub errors: &'a mut Vec<RowError>,
    pub ok: bool,
}

impl<'a> Fields<'a> {
    pub fn new(
        columns: &'a Columns,
        record: &'a Record,
        errors: &'a mut Vec<RowError>,
    ) -> Fields<'a> {
        Fields {
            columns,
            record,
            errors,
            ok: true,
        }
    }

    /// The raw text of a column; empty for an optional column not in the header.
    pub fn text(&self, name: &str) -> &'a str {
        match self.columns.index(name) {
            Some(i) => self.record.get(i),
            None => "",
        }
    }

    /// Refuse the row at a column, by name.
    pub fn fail(&mut self, name: &str, message: String) {
        let column = self.columns.index(name).map(|i| i + 1).unwrap_or(0);
        self.errors
            .push(RowError::at(self.record.line, column, name, message));
        self.ok = false;
    }

    /// Parse a column's text; an empty cell is `None` unless `required`.
    pub fn parse<T>(
        &mut self,
        name: &str,
        required: bool,
        expected: &str,
        f: impl Fn(&str) -> Result<T, String>,
    ) -> Option<T> {
        let text = self.text(name);
        if text.is_empty() {
            if required {
                self.fail(name, format!("expected {expected}, found an empty cell"));
            }
            return None;
        }
        match f(text) {
            Ok(v) => Some(v),
            Err(why) => {
                self.fail(
                    name,
                    format!(
                        "expected {expected}, found {} ({why})",
                        crate::csvread::shown(text)
                    ),
                );
                None
            }
        }
    }

    /// A required identifier: non-empty, no surrounding spaces.
    pub fn id(&mut self, name: &str) -> Option<String> {
        self.parse(name, true, "an identifier", |t| {
            if t.trim() != t {
                Err("surrounding spaces".into())
            } else {
                Ok(t.to_string())
            }
        })
    }

    /// A decimal within `[min, max]` (either bound optional).
    pub fn decimal(
        &mut self,
        name: &str,
        required: bool,
        min_exclusive: bool,
        max: Option<rust_decimal::Decimal>,
    ) -> Option<rust_decimal::Decimal> {
        let expected = match (min_exclusive, max) {
            (true, None) => "a positive decimal".to_string(),
            (false, None) => "a decimal of zero or more".to_string(),
            (_, Some(m)) => format!("a decimal from 0 to {m}"),
        };
        self.parse(name, required, &expected, |t| {
            let d = crate::decimal::parse_decimal(t, false).map_err(|e| e.to_string())?;
            if min_exclusive && d.is_zero() {
                return Err("zero".into());
            }
            if max.is_some_and(|m| d > m) {
                return Err("out of range".into());
            }
            Ok(d)
        })
    }

    pub fn date(&mut self, name: &str) -> Option<chrono::NaiveDate> {
        self.parse(name, true, "a date YYYY-MM-DD", |t| {
            let b = t.as_bytes();
            let digits = |r: std::ops::Range<usize>| b[r].iter().all(u8::is_ascii_digit);
            if b.len() != 10
                || b[4] != b'-'
                || b[7] != b'-'
                || !digits(0..4)
                || !digits(5..7)
                || !digits(8..10)
            {
                return Err("not in the form YYYY-MM-DD".into());
            }
            chrono::NaiveDate::parse_from_str(t, "%Y-%m-%d")
                .map_err(|_| "not a calendar date".into())
        })
    }

    pub fn word<T: std::str::FromStr<Err = String>>(
        &mut self,
        name: &str,
        required: bool,
        expected: &str,
    ) -> Option<T> {
        self.parse(name, required, expected, T::from_str)
    }
}

/// A value that has a natural key and can say how it differs from another.
pub trait Keyed {
    type Key: Eq + Hash + Clone + fmt::Display;
    fn key(&self) -> Self::Key;
    /// The first field that differs from `held`: (field, held value, this value).
    fn first_difference(&self, held: &Self) -> Option<(&'static str, String, String)>;
}

/// What to do with one parsed row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Action {
    Add,
    /// Supersede the held row with this id.
    Correct(i64),
    Present,
}

/// Decide, for each row, whether it is new, a correction or already present.
pub fn plan<T: Keyed>(
    rows: &[(usize, T)],
    held: &[Stored<T>],
    correct: Option<&str>,
    errors: &mut Vec<RowError>,
) -> Vec<Action> {
    let held: HashMap<T::Key, &Stored<T>> = held.iter().map(|s| (s.value.key(), s)).collect();
    let mut seen: HashMap<T::Key, usize> = HashMap::new();
    let mut actions = Vec::with_capacity(rows.len());
    for (line, row) in rows {
        let key = row.key();
        if let Some(first) = seen.insert(key.clone(), *line) {
            errors.push(RowError::line(
                *line,
                format!("{key} appears twice in this file, on lines {first} and {line}"),
            ));
        }
        let action = match held.get(&key) {
            None => Action::Add,
            Some(h) => match row.first_difference(&h.value) {
                None => Action::Present,
                Some(_) if correct.is_some() => Action::Correct(h.id),
                Some((field, was, now)) => {
                    errors.push(RowError::line(
                        *line,
                        format!(
                            "{key} is already held with other values (field {field}: held {was}, here {now}, from {}); \
                             to supersede it, import with --correct REASON",
                            h.source.place()
                        ),
                    ));
                    Action::Present
                }
            },
        };
        actions.push(action);
    }
    actions
}

/// Count the actions of a plan.
pub fn outcome(actions: &[Action]) -> Outcome {
    let mut o = Outcome::default();
    for a in actions {
        match a {
            Action::Add => o.added += 1,
            Action::Correct(_) => o.corrected += 1,
            Action::Present => o.present += 1,
        }
    }
    o
}

pub(crate) fn show_opt<T: fmt::Display>(v: &Option<T>) -> String {
    match v {
        Some(v) => v.to_string(),
        None => "empty".to_string(),
    }
}

/// Write the batch row of an import that adds or corrects rows.
pub(crate) fn insert_batch(
    tx: &crate::ledger::Tx,
    kind: &str,
    file: &InputFile,
    done: &Outcome,
    stamp: &Stamp,
    correct: Option<&str>,
) -> Result<i64, crate::ledger::LedgerError> {
    tx.insert_batch(&crate::ledger::NewBatch {
        kind,
        file_name: &file.name,
        sha256: &file.sha256,
        rows_added: done.added,
        rows_corrected: done.corrected,
        rows_present: done.present,
        at: &stamp.at,
        by: &stamp.by,
        reason: correct.filter(|_| done.corrected > 0),
    })
}
