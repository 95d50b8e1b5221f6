//! Tamper evidence: the canonical encoding the journal hashes, the digest
//! of a certified report, and the receipt an auditor keeps outside the
//! ledger.
//!
//! Invariants: the encoding is typed and length-prefixed, so no two
//! different sequences of values encode to the same bytes, and it covers
//! every column (RELIABILITY.md P15: a column left out of the hash is a
//! column that can change unseen). Nothing here touches SQLite, files or the
//! clock.

use crate::report::AnnualReport;
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

/// The hash before the first journal entry.
pub const GENESIS_HASH: &str = "0000000000000000000000000000000000000000000000000000000000000000";

/// Receipt layout version; a receipt only ever gains fields.
pub const RECEIPT_FORMAT_VERSION: u32 = 1;

/// One stored value, as SQLite typed it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Value<'a> {
    Null,
    Integer(i64),
    /// The IEEE-754 bits of a REAL. No column of ours holds one; a REAL in
    /// the ledger is itself a sign of tampering, and is hashed exactly.
    RealBits(u64),
    Text(&'a [u8]),
    Blob(&'a [u8]),
}

/// A streaming SHA-256 over typed, length-prefixed values.
pub struct Canon {
    hasher: Sha256,
}

impl Canon {
    /// Start a digest; `domain` keeps digests of different things apart.
    pub fn new(domain: &str) -> Canon {
        let mut c = Canon {
            hasher: Sha256::new(),
        };
        c.text(domain);
        c
    }

    pub fn value(&mut self, v: Value) {
        match v {
            Value::Null => self.hasher.update([0u8]),
            Value::Integer(i) => {
                self.hasher.update([1u8]);
                self.hasher.update(i.to_be_bytes());
            }
            Value::RealBits(b) => {
                self.hasher.update([2u8]);
                self.hasher.update(b.to_be_bytes());
            }
            Value::Text(t) => self.bytes(3, t),
            Value::Blob(b) => self.bytes(4, b),
        }
    }

    fn bytes(&mut self, tag: u8, b: &[u8]) {
        self.hasher.update([tag]);
        self.hasher.update((b.len() as u64).to_be_bytes());
        self.hasher.update(b);
    }

    pub fn int(&mut self, i: i64) {
        self.value(Value::Integer(i));
    }

    pub fn text(&mut self, t: &str) {
        self.value(Value::Text(t.as_bytes()));
    }

    pub fn opt_text(&mut self, t: Option<&str>) {
        match t {
            Some(t) => self.text(t),
            None => self.value(Value::Null),
        }
    }

    pub fn opt_int(&mut self, i: Option<i64>) {
        match i {
            Some(i) => self.int(i),
            None => self.value(Value::Null),
        }
    }

    pub fn finish(self) -> String {
        crate::import::hex(&self.hasher.finalize())
    }
}

/// The rows one journal entry covers in one table.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RowRange {
    pub table: String,
    pub first_rowid: i64,
    pub last_rowid: i64,
    pub row_count: i64,
}

/// Every column of a journal entry.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Entry {
    pub seq: i64,
    pub kind: String,
    pub record_id: Option<i64>,
    pub at: String,
    pub by: String,
    pub reason: Option<String>,
    pub content_digest: String,
    pub schema_digest: String,
    pub prev_hash: String,
    pub hash: String,
    pub rows: Vec<RowRange>,
}

/// Entry n's hash: SHA-256 over the previous hash and every column of the
/// entry and of its row ranges, in the order the ranges are stored (by table).
pub fn entry_hash(e: &Entry) -> String {
    let mut c = Canon::new("flue journal entry v1");
    c.text(&e.prev_hash);
    c.int(e.seq);
    c.text(&e.kind);
    c.opt_int(e.record_id);
    c.text(&e.at);
    c.text(&e.by);
    c.opt_text(e.reason.as_deref());
    c.text(&e.content_digest);
    c.text(&e.schema_digest);
    c.int(e.rows.len() as i64);
    for r in &e.rows {
        c.text(&r.table);
        c.int(r.first_rowid);
        c.int(r.last_rowid);
        c.int(r.row_count);
    }
    c.finish()
}

/// The fields a certification covers: the year's figures and how they were
/// computed, and nothing else, so that the report may gain fields (the JSON
/// only ever gains fields) without breaking a digest already certified.
/// Left out on purpose: the certification itself, the site-file version
/// number (a new version that changes no figure changes nothing
/// certified; one that does changes the units' numbers or methods), the
/// programs' reconciliation (the year's settlement records and freezes it,
/// at the true-up date, after certification), the journal head (it moves
/// with every write) and presentation-only series such as the daily profile.
const CERTIFIED_FIELDS: &[&str] = &[
    "facility",
    "facility_name",
    "year",
    "rounding",
    "units",
    "totals",
];
const CERTIFIED_UNIT_FIELDS: &[&str] = &[
    "unit",
    "kind",
    "fuel",
    "methods",
    "operating_hours",
    "heat_input_mmbtu",
    "so2_tons",
    "nox_tons",
    "co2_tons",
    "nox_rate_lb_per_mmbtu",
    "substituted_hours",
    "fuel_records",
    "quarters",
    "ozone_season",
    "months",
];

fn keep_only(v: &mut serde_json::Value, fields: &[&str]) {
    if let Some(map) = v.as_object_mut() {
        map.retain(|k, _| fields.contains(&k.as_str()));
    }
}

/// SHA-256 of the canonical JSON (sorted keys, no spaces) of the certified
/// fields of the annual reports of one year, one per facility, in order.
pub fn report_digest(reports: &[AnnualReport]) -> Result<String, serde_json::Error> {
    let mut values = Vec::with_capacity(reports.len());
    for r in reports {
        let mut v = serde_json::to_value(r)?;
        keep_only(&mut v, CERTIFIED_FIELDS);
        if let Some(units) = v.get_mut("units").and_then(|u| u.as_array_mut()) {
            for u in units {
                keep_only(u, CERTIFIED_UNIT_FIELDS);
            }
        }
        values.push(v);
    }
    // serde_json's map is ordered by key, so this is canonical.
    let bytes = serde_json::to_vec(&serde_json::Value::Array(values))?;
    Ok(crate::import::hex(&Sha256::digest(&bytes)))
}

/// What `flue certify` hands the auditor, to keep outside the ledger.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq, Eq)]
pub struct Receipt {
    pub format_version: u32,
    pub year: i32,
    pub by: String,
    pub at: String,
    pub statement: Option<String>,
    pub report_sha256: String,
    pub entry_count: i64,
    pub head_hash: String,
    pub schema_digest: String,
}

#[cfg(test)]
mod tests {
    use super::*;

    fn digest(values: &[Value]) -> String {
        let mut c = Canon::new("t");
        for v in values {
            c.value(*v);
        }
        c.finish()
    }

    #[test]
    fn the_encoding_tells_types_and_boundaries_apart() {
        let distinct = [
            digest(&[Value::Null]),
            digest(&[Value::Integer(0)]),
            digest(&[Value::Text(b"0")]),
            digest(&[Value::Blob(b"0")]),
            digest(&[Value::RealBits(0)]),
            digest(&[Value::Text(b"ab"), Value::Text(b"c")]),
            digest(&[Value::Text(b"a"), Value::Text(b"bc")]),
            digest(&[Value::Text(b"")]),
            digest(&[]),
        ];
        for (i, a) in distinct.iter().enumerate() {
            for b in &distinct[i + 1..] {
                assert_ne!(a, b);
            }
        }
        assert_eq!(digest(&[Value::Integer(7)]), digest(&[Value::Integer(7)]));
    }

    #[test]
    fn every_entry_column_moves_the_hash() {
        let base = Entry {
            seq: 1,
            kind: "import-batch".into(),
            record_id: Some(1),
            at: "2026-01-01T00:00:00Z".into(),
            by: "a".into(),
            reason: None,
            content_digest: "1".repeat(64),
            schema_digest: "2".repeat(64),
            prev_hash: GENESIS_HASH.into(),
            hash: String::new(),
            rows: vec![RowRange {
                table: "fuel_records".into(),
                first_rowid: 1,
                last_rowid: 3,
                row_count: 3,
            }],
        };
        let h = entry_hash(&base);
        let changes: Vec<fn(&mut Entry)> = vec![
            |e| e.seq = 2,
            |e| e.kind = "settlement".into(),
            |e| e.record_id = None,
            |e| e.at.push('x'),
            |e| e.by.push('x'),
            |e| e.reason = Some(String::new()),
            |e| e.content_digest = "3".repeat(64),
            |e| e.schema_digest = "3".repeat(64),
            |e| e.prev_hash = "3".repeat(64),
            |e| e.rows[0].table.push('x'),
            |e| e.rows[0].first_rowid = 2,
            |e| e.rows[0].last_rowid = 4,
            |e| e.rows[0].row_count = 2,
            |e| e.rows.clear(),
        ];
        for change in changes {
            let mut e = base.clone();
            change(&mut e);
            assert_ne!(entry_hash(&e), h);
        }
        // The stored hash itself is not an input.
        let mut e = base.clone();
        e.hash = "9".repeat(64);
        assert_eq!(entry_hash(&e), h);
    }
}
