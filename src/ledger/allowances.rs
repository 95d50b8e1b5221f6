//! Allowance transactions and settlements: inserts and reads.
//!
//! Stored transactions are read back in order of recording (`seq`), which
//! is the order the book applied them in, so replaying them rebuilds the
//! same book. A transaction reads as its version in force: the original row,
//! or its latest correction (schema/0006_allowance_corrections.sql), at the
//! original's `seq`. Every row read is checked again against the rules the schema
//! states, and a row that breaks them is reported as a damaged ledger.

use super::{LedgerError, Reads, Result, Tx};
use crate::allowances::{Book, Holder, SerialBlock, Transaction, TransactionKind};
use crate::site::Site;
use chrono::NaiveDate;
use rusqlite::{params, Row};
use rust_decimal::Decimal;

/// A transaction's version in force, with where that version came from.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct StoredTransaction {
    pub seq: i64,
    pub batch_id: i64,
    pub file: String,
    pub line: usize,
    /// The `allowance_corrections` row in force; `None` for the original.
    pub correction_id: Option<i64>,
    pub value: Transaction,
}

/// A correction about to be written: the full new values of a transaction.
#[derive(Clone, Debug)]
pub struct NewCorrection<'a> {
    pub batch_id: i64,
    pub line: usize,
    /// The version superseded: a correction's id, or `None` for the original.
    pub corrects_id: Option<i64>,
    pub reason: &'a str,
    pub value: &'a Transaction,
}

/// A settlement as stored.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct StoredSettlement {
    pub program: String,
    pub year: i32,
    pub true_up_date: NaiveDate,
    pub deducted: u64,
    pub offset_owed: u64,
    pub offset_deducted: u64,
    pub offset_outstanding: u64,
    pub settled_at: String,
    pub settled_by: String,
}

/// A settlement about to be written.
#[derive(Clone, Debug)]
pub struct NewSettlement<'a> {
    pub batch_id: i64,
    pub facility_id: &'a str,
    pub program: &'a str,
    pub year: i32,
    pub true_up_date: NaiveDate,
    pub deducted: u64,
    pub offset_owed: u64,
    pub offset_deducted: u64,
    pub offset_outstanding: u64,
    pub at: &'a str,
    pub by: &'a str,
}

fn damaged(what: &str, value: &str) -> LedgerError {
    LedgerError::Damaged(format!("stored allowance {what} {value:?} does not parse"))
}

fn count(what: &str, value: i64) -> Result<u64> {
    u64::try_from(value).map_err(|_| damaged(what, &value.to_string()))
}

fn party(kind: &str, account: Option<String>, settles: bool) -> Result<Holder> {
    match (kind, account) {
        ("issuer", None) => Ok(Holder::Issuer),
        ("retirement", None) if settles => Ok(Holder::Retirement),
        ("account", Some(id)) => Ok(Holder::Account(id)),
        (k, a) => Err(damaged("party", &format!("{k} {a:?}"))),
    }
}

fn party_columns(h: &Holder) -> (&'static str, Option<&str>) {
    match h {
        Holder::Issuer => ("issuer", None),
        Holder::Retirement => ("retirement", None),
        Holder::Account(id) => ("account", Some(id.as_str())),
    }
}

/// A transaction's serial block as the two stored integers.
fn serial_columns(t: &Transaction) -> Result<(Option<i64>, Option<i64>)> {
    let serial = |v: u64| -> Result<i64> {
        i64::try_from(v)
            .map_err(|_| LedgerError::Damaged(format!("serial {v} exceeds what the ledger stores")))
    };
    Ok(match t.serials {
        Some(b) => (Some(serial(b.serial_from)?), Some(serial(b.serial_to)?)),
        None => (None, None),
    })
}

const COLUMNS: &str = "t.seq, t.batch_id, b.file_name, t.line, t.id, t.date, t.kind, t.program, \
     t.vintage, t.quantity, t.from_party, t.from_account, t.to_party, t.to_account, t.price, \
     t.note, t.serial_from, t.serial_to, t.settles_year, t.correction_id";

fn stored_transaction(r: &Row) -> Result<StoredTransaction> {
    let date_text: String = r.get(5)?;
    let kind_text: String = r.get(6)?;
    let settles_year: Option<i32> = r.get(18)?;
    let kind = match (kind_text.as_str(), settles_year) {
        ("deduction", Some(year)) => TransactionKind::Deduction { year },
        ("offset", Some(year)) => TransactionKind::Offset { year },
        (other, None) => {
            TransactionKind::parse_import(other).map_err(|_| damaged("kind", &kind_text))?
        }
        _ => return Err(damaged("kind", &kind_text)),
    };
    let settles = kind.settles_year().is_some();
    let price: Option<String> = r.get(14)?;
    let serial_from: Option<i64> = r.get(16)?;
    let serial_to: Option<i64> = r.get(17)?;
    let serials = match (serial_from, serial_to) {
        (None, None) => None,
        (Some(a), Some(b)) => Some(
            SerialBlock::new(count("serial_from", a)?, count("serial_to", b)?)
                .ok_or_else(|| damaged("serial block", &format!("{a}-{b}")))?,
        ),
        _ => return Err(damaged("serial block", "one end missing")),
    };
    let line: i64 = r.get(3)?;
    let tx = Transaction {
        id: r.get(4)?,
        date: NaiveDate::parse_from_str(&date_text, "%Y-%m-%d")
            .map_err(|_| damaged("date", &date_text))?,
        kind,
        program: r.get(7)?,
        vintage: r.get(8)?,
        quantity: count("quantity", r.get(9)?)?,
        from: party(&r.get::<_, String>(10)?, r.get(11)?, false)?,
        to: party(&r.get::<_, String>(12)?, r.get(13)?, settles)?,
        price_usd_per_allowance: price
            .map(|p| Decimal::from_str_exact(&p).map_err(|_| damaged("price", &p)))
            .transpose()?,
        note: r.get(15)?,
        serials,
    };
    // The schema's CHECKs hold; assert again after reading (STYLE.md).
    assert!(tx.quantity >= 1, "stored allowance quantity below one");
    Ok(StoredTransaction {
        seq: r.get(0)?,
        batch_id: r.get(1)?,
        file: r.get(2)?,
        line: usize::try_from(line).map_err(|_| damaged("line", &line.to_string()))?,
        correction_id: r.get(19)?,
        value: tx,
    })
}

/// Allowance reads, for the ledger and a write transaction alike.
pub trait AllowanceReads: Reads {
    /// A facility's transactions, in order of recording.
    fn allowance_transactions(&self, facility_id: &str) -> Result<Vec<StoredTransaction>> {
        let mut stmt = self.conn().prepare(&format!(
            "SELECT {COLUMNS} FROM current_allowance_transactions t JOIN import_batches b ON b.id = t.batch_id
             WHERE t.facility_id = ?1 ORDER BY t.seq"
        ))?;
        let mut rows = stmt.query([facility_id])?;
        let mut out = Vec::new();
        while let Some(r) = rows.next()? {
            out.push(stored_transaction(r)?);
        }
        Ok(out)
    }

    /// One transaction's version in force by id, in any facility.
    fn allowance_transaction(&self, id: &str) -> Result<Option<(String, StoredTransaction)>> {
        let mut stmt = self.conn().prepare(&format!(
            "SELECT {COLUMNS}, t.facility_id FROM current_allowance_transactions t
             JOIN import_batches b ON b.id = t.batch_id WHERE t.id = ?1"
        ))?;
        let mut rows = stmt.query([id])?;
        match rows.next()? {
            Some(r) => Ok(Some((r.get(20)?, stored_transaction(r)?))),
            None => Ok(None),
        }
    }

    /// A facility's settlements, by program and year.
    fn allowance_settlements(&self, facility_id: &str) -> Result<Vec<StoredSettlement>> {
        let mut stmt = self.conn().prepare(
            "SELECT program, year, true_up_date, deducted, offset_owed, offset_deducted, offset_outstanding,
                    settled_at, settled_by
             FROM allowance_settlements WHERE facility_id = ?1 ORDER BY program, year",
        )?;
        let mut rows = stmt.query([facility_id])?;
        let mut out = Vec::new();
        while let Some(r) = rows.next()? {
            let date_text: String = r.get(2)?;
            out.push(StoredSettlement {
                program: r.get(0)?,
                year: r.get(1)?,
                true_up_date: NaiveDate::parse_from_str(&date_text, "%Y-%m-%d")
                    .map_err(|_| damaged("true_up_date", &date_text))?,
                deducted: count("deducted", r.get(3)?)?,
                offset_owed: count("offset_owed", r.get(4)?)?,
                offset_deducted: count("offset_deducted", r.get(5)?)?,
                offset_outstanding: count("offset_outstanding", r.get(6)?)?,
                settled_at: r.get(7)?,
                settled_by: r.get(8)?,
            });
        }
        Ok(out)
    }

    /// The settlement of one program's year, if it has been settled.
    fn allowance_settlement(
        &self,
        facility_id: &str,
        program: &str,
        year: i32,
    ) -> Result<Option<StoredSettlement>> {
        Ok(self
            .allowance_settlements(facility_id)?
            .into_iter()
            .find(|s| s.program == program && s.year == year))
    }

    /// The facility's book: every stored transaction replayed, in order of
    /// recording, under the site file's accounts and programs. Stored rows
    /// were accepted by the same rules, so a refusal means the site file
    /// has changed under them (or the file is damaged); it is reported,
    /// never ignored.
    fn allowance_book(&self, site: &Site) -> Result<Book> {
        let stored = self.allowance_transactions(&site.facility.id)?;
        let mut book = Book::new(&site.accounts, &site.programs);
        let txs: Vec<Transaction> = stored.iter().map(|s| s.value.clone()).collect();
        book.apply_all(&txs).map_err(|errors| {
            let first = &errors[0];
            let place = &stored[first.index];
            LedgerError::Damaged(format!(
                "stored allowance transaction from {}:{} no longer replays under the site file of {}: {}",
                place.file, place.line, site.facility.id, first
            ))
        })?;
        Ok(book)
    }
}

impl<T: Reads + ?Sized> AllowanceReads for T {}

impl Tx<'_> {
    /// The `seq` the next transaction will get. Safe inside `BEGIN
    /// IMMEDIATE`, which holds the write lock until commit.
    pub fn next_allowance_seq(&self) -> Result<i64> {
        Ok(self.tx.query_row(
            "SELECT coalesce(max(seq), 0) + 1 FROM allowance_transactions",
            [],
            |r| r.get(0),
        )?)
    }

    /// Insert one accepted transaction of a facility.
    pub fn insert_allowance_transaction(
        &self,
        seq: i64,
        batch_id: i64,
        line: usize,
        facility_id: &str,
        t: &Transaction,
    ) -> Result<()> {
        // The book accepted it; assert what the schema also checks (STYLE.md).
        assert!(
            t.quantity >= 1,
            "an allowance transaction moves at least one"
        );
        assert!(
            t.from != t.to,
            "an allowance transaction moves between two holders"
        );
        let (from_party, from_account) = party_columns(&t.from);
        let (to_party, to_account) = party_columns(&t.to);
        let (serial_from, serial_to) = serial_columns(t)?;
        let mut stmt = self.tx.prepare_cached(
            "INSERT INTO allowance_transactions (id, seq, batch_id, line, facility_id, date, kind, program, vintage,
                 quantity, from_party, from_account, to_party, to_account, price, note, serial_from, serial_to, settles_year)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18, ?19)",
        )?;
        stmt.execute(params![
            t.id,
            seq,
            batch_id,
            line as i64,
            facility_id,
            t.date.to_string(),
            t.kind.as_str(),
            t.program,
            t.vintage,
            i64::try_from(t.quantity).expect("quantity checked against QUANTITY_MAX"),
            from_party,
            from_account,
            to_party,
            to_account,
            t.price_usd_per_allowance.map(|p| p.to_string()),
            t.note,
            serial_from,
            serial_to,
            t.kind.settles_year(),
        ])?;
        Ok(())
    }

    /// Insert a correction superseding a held transaction's version in force.
    pub fn insert_allowance_correction(&self, c: &NewCorrection) -> Result<()> {
        let t = c.value;
        // The book accepted it; assert what the schema also checks (STYLE.md).
        assert!(
            t.kind.settles_year().is_none(),
            "a settlement's transaction is never corrected"
        );
        assert!(t.quantity >= 1 && t.from != t.to, "the book accepted it");
        let (from_party, from_account) = party_columns(&t.from);
        let (to_party, to_account) = party_columns(&t.to);
        let (serial_from, serial_to) = serial_columns(t)?;
        self.tx.prepare_cached(
            "INSERT INTO allowance_corrections (transaction_id, corrects_id, batch_id, line, date, kind, program,
                 vintage, quantity, from_party, from_account, to_party, to_account, price, note, serial_from,
                 serial_to, reason)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18)",
        )?
        .execute(params![
            t.id,
            c.corrects_id,
            c.batch_id,
            c.line as i64,
            t.date.to_string(),
            t.kind.as_str(),
            t.program,
            t.vintage,
            i64::try_from(t.quantity).expect("quantity checked against QUANTITY_MAX"),
            from_party,
            from_account,
            to_party,
            to_account,
            t.price_usd_per_allowance.map(|p| p.to_string()),
            t.note,
            serial_from,
            serial_to,
            c.reason,
        ])?;
        Ok(())
    }

    pub fn insert_allowance_settlement(&self, s: &NewSettlement) -> Result<()> {
        assert_eq!(
            s.offset_outstanding + s.offset_deducted,
            s.offset_owed,
            "offset deducted and outstanding make up the offset owed"
        );
        let int = |v: u64| i64::try_from(v).expect("settlement counts fit in i64");
        self.tx.execute(
            "INSERT INTO allowance_settlements (batch_id, facility_id, program, year, true_up_date, deducted,
                 offset_owed, offset_deducted, offset_outstanding, settled_at, settled_by)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
            params![
                s.batch_id,
                s.facility_id,
                s.program,
                s.year,
                s.true_up_date.to_string(),
                int(s.deducted),
                int(s.offset_owed),
                int(s.offset_deducted),
                int(s.offset_outstanding),
                s.at,
                s.by,
            ],
        )?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ledger::{Ledger, NewBatch};

    fn site() -> Site {
        crate::site::parse(include_str!("../../samples/site.toml")).unwrap()
    }

    fn tx(id: &str, kind: TransactionKind, from: Holder, to: Holder) -> Transaction {
        Transaction {
            id: id.to_string(),
            date: NaiveDate::from_ymd_opt(2025, 3, 1).unwrap(),
            kind,
            program: "SO2-ANNUAL".to_string(),
            vintage: 2025,
            quantity: 10,
            from,
            to,
            price_usd_per_allowance: Some(Decimal::new(41050, 2)),
            note: "n".to_string(),
            serials: SerialBlock::new(101, 110),
        }
    }

    #[test]
    fn transactions_read_back_as_written_and_refuse_update_and_delete() {
        let dir = tempfile::tempdir().unwrap();
        let mut ledger = Ledger::create(&dir.path().join("l.db")).unwrap();
        let a = tx(
            "a",
            TransactionKind::Allocation,
            Holder::Issuer,
            Holder::account("MC1-COMPLIANCE"),
        );
        let mut d = tx(
            "d",
            TransactionKind::Deduction { year: 2025 },
            Holder::account("MC1-COMPLIANCE"),
            Holder::Retirement,
        );
        d.price_usd_per_allowance = None;
        d.serials = None;
        ledger
            .write(|t| -> Result<()> {
                let batch = t.insert_batch(&NewBatch {
                    kind: "allowances",
                    file_name: "a.csv",
                    sha256: &"0".repeat(64),
                    rows_added: 2,
                    rows_corrected: 0,
                    rows_present: 0,
                    at: "t",
                    by: "u",
                    reason: None,
                })?;
                t.insert_allowance_transaction(1, batch, 2, "MC1", &a)?;
                t.insert_allowance_transaction(2, batch, 3, "MC1", &d)?;
                Ok(())
            })
            .unwrap();
        let stored = ledger.allowance_transactions("MC1").unwrap();
        assert_eq!(stored.len(), 2);
        assert_eq!(stored[0].value, a);
        assert_eq!(stored[1].value, d);
        assert_eq!((stored[1].file.as_str(), stored[1].line), ("a.csv", 3));
        assert!(ledger.allowance_transactions("OTHER").unwrap().is_empty());
        let book = ledger.allowance_book(&site()).unwrap();
        assert_eq!(
            book.holdings()
                .count(&Holder::account("MC1-COMPLIANCE"), "SO2-ANNUAL", 2025),
            0
        );
        for sql in [
            "UPDATE allowance_transactions SET quantity = 11",
            "DELETE FROM allowance_transactions",
        ] {
            let err = ledger.conn.execute(sql, []).unwrap_err();
            assert!(err.to_string().contains("append-only"), "{err}");
        }
    }

    fn batch(t: &Tx) -> Result<i64> {
        t.insert_batch(&NewBatch {
            kind: "allowances",
            file_name: "a.csv",
            sha256: &"0".repeat(64),
            rows_added: 1,
            rows_corrected: 0,
            rows_present: 0,
            at: "t",
            by: "u",
            reason: None,
        })
    }

    #[test]
    fn a_schema_5_ledger_upgrades_and_its_transactions_take_corrections_that_supersede() {
        use crate::ledger::migrations::{APPLICATION_ID, MIGRATIONS};
        use crate::ledger::HistoryReads;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("l.db");
        {
            let conn = rusqlite::Connection::open(&path).unwrap();
            for (_, sql) in &MIGRATIONS[..5] {
                conn.execute_batch(sql).unwrap();
            }
            conn.execute_batch(&format!(
                "PRAGMA application_id = {APPLICATION_ID}; PRAGMA user_version = 5;"
            ))
            .unwrap();
        }
        let a = tx(
            "a",
            TransactionKind::Allocation,
            Holder::Issuer,
            Holder::account("MC1-COMPLIANCE"),
        );
        // Written and journaled under schema 5, before allowance_corrections existed.
        let mut old = Ledger::connect(&path).unwrap();
        old.write(|t| -> Result<()> {
            let b = batch(t)?;
            t.insert_allowance_transaction(1, b, 2, "MC1", &a)
        })
        .unwrap();
        drop(old);
        let mut ledger = Ledger::open(&path).unwrap();
        let v = ledger.verify().unwrap();
        assert_eq!(v.problems, vec![], "the old entries' digests still hold");
        let mut fixed = a.clone();
        fixed.quantity = 12;
        fixed.serials = SerialBlock::new(101, 112);
        let mut again = fixed.clone();
        again.note = "n2".to_string();
        ledger
            .write(|t| -> Result<()> {
                let b = batch(t)?;
                t.insert_allowance_correction(&NewCorrection {
                    batch_id: b,
                    line: 5,
                    corrects_id: None,
                    reason: "r1",
                    value: &fixed,
                })?;
                t.insert_allowance_correction(&NewCorrection {
                    batch_id: b,
                    line: 6,
                    corrects_id: Some(1),
                    reason: "r2",
                    value: &again,
                })
            })
            .unwrap();
        assert_eq!(ledger.verify().unwrap().problems, vec![]);
        let stored = ledger.allowance_transactions("MC1").unwrap();
        assert_eq!(stored.len(), 1);
        assert_eq!(stored[0].value, again);
        assert_eq!((stored[0].seq, stored[0].line), (1, 6));
        assert_eq!(stored[0].correction_id, Some(2));
        let versions = ledger.transaction_versions("a").unwrap();
        let shown: Vec<(i64, Option<i64>, bool)> = versions
            .iter()
            .map(|v| {
                let p = &v.provenance;
                (p.row_id, p.corrects_id, p.in_force)
            })
            .collect();
        assert_eq!(
            shown,
            [(1, None, false), (1, Some(1), false), (2, Some(1), true)]
        );
        // The chain never forks, never crosses transactions, and never changes.
        for sql in [
            "INSERT INTO allowance_corrections (transaction_id, corrects_id, batch_id, line, date, kind, program,
                 vintage, quantity, from_party, to_party, to_account, note, reason)
             VALUES ('a', NULL, 1, 2, '2025-03-01', 'allocation', 'SO2-ANNUAL', 2025, 1, 'issuer', 'account', 'X', '', 'r')",
            "INSERT INTO allowance_corrections (transaction_id, corrects_id, batch_id, line, date, kind, program,
                 vintage, quantity, from_party, to_party, to_account, note, reason)
             VALUES ('a', 1, 1, 2, '2025-03-01', 'allocation', 'SO2-ANNUAL', 2025, 1, 'issuer', 'account', 'X', '', 'r')",
            "UPDATE allowance_corrections SET quantity = 13",
            "DELETE FROM allowance_corrections",
        ] {
            assert!(ledger.conn.execute(sql, []).is_err(), "{sql}");
        }
    }

    #[test]
    fn a_second_settlement_of_the_same_year_is_refused_by_the_schema() {
        let dir = tempfile::tempdir().unwrap();
        let mut ledger = Ledger::create(&dir.path().join("l.db")).unwrap();
        let settle = |t: &Tx| -> Result<()> {
            let batch = t.insert_batch(&NewBatch {
                kind: "allowances",
                file_name: "settle",
                sha256: &"0".repeat(64),
                rows_added: 0,
                rows_corrected: 0,
                rows_present: 0,
                at: "t",
                by: "u",
                reason: None,
            })?;
            t.insert_allowance_settlement(&NewSettlement {
                batch_id: batch,
                facility_id: "MC1",
                program: "SO2-ANNUAL",
                year: 2025,
                true_up_date: NaiveDate::from_ymd_opt(2026, 3, 1).unwrap(),
                deducted: 0,
                offset_owed: 0,
                offset_deducted: 0,
                offset_outstanding: 0,
                at: "t",
                by: "u",
            })
        };
        ledger.write(settle).unwrap();
        assert!(ledger.write(settle).is_err());
        let held = ledger.allowance_settlements("MC1").unwrap();
        assert_eq!(held.len(), 1);
        assert!(ledger
            .allowance_settlement("MC1", "SO2-ANNUAL", 2025)
            .unwrap()
            .is_some());
    }
}
