//! Allowance writes: `flue import allowances`, one transfer from the
//! command line, and the settlement of a program's year; and the reads
//! they validate against (a program's reconciliation and position).
//!
//! Every write parses its whole input first, then, inside one `BEGIN
//! IMMEDIATE` transaction, rebuilds the book from every stored transaction,
//! applies the new ones with `Book::apply_all` (all or nothing) and writes
//! only if every one is accepted (RELIABILITY.md R1, R4, R5). An identical
//! re-import writes nothing, not even a batch row.
//!
//! An id held with other content is refused unless the import says
//! `--correct REASON` (DESIGN.md): then the row supersedes the version in
//! force, written to `allowance_corrections`, never over the held row. The
//! book is rebuilt in order of recording with the new version in the old
//! one's place (`Book::supersede`) and must pass every rule. A settlement's
//! own rows are never corrected, and neither is a transaction whose held or
//! new version lies in a settled year's scope (`settled_conflict`): the
//! settlement froze that year's holdings at its true-up day.

use super::{parse_rows, Fields, InputFile, Outcome, Stamp};
use crate::allowances::{
    cost_summary, held_at_true_up, position, reconcile, same_day_previous_year, season_tons,
    settlement, Applied, Book, CostSummary, Holder, OnConflict, Position, PreviousYear,
    Reconciliation, RowError as TxRowError, SerialBlock, Transaction, TransactionKind, TxError,
    QUANTITY_MAX,
};
use crate::csvread::{FileErrors, RowError};
use crate::ledger::{
    AllowanceReads, Ledger, LedgerError, NewBatch, NewCorrection, NewSettlement, Reads,
    StoredSettlement, Tx,
};
use crate::site::{Program, Site};
use crate::units::Tons;
use chrono::{Datelike, NaiveDate};
use sha2::{Digest, Sha256};
use std::collections::HashMap;
use thiserror::Error;

pub const REQUIRED: &[&str] = &[
    "id", "date", "kind", "program", "vintage", "quantity", "from", "to",
];
pub const OPTIONAL: &[&str] = &["price", "note", "serial_from", "serial_to"];

/// Ids of this form are written by settlements only.
pub const SETTLEMENT_ID_PREFIX: &str = "settle/";

/// Vintages are calendar years written with four digits.
const VINTAGE_MIN: i32 = 1000;
const VINTAGE_MAX: i32 = 9999;

/// The ledger stores serial numbers as SQLite integers (signed 64-bit).
const SERIAL_MAX: u64 = i64::MAX as u64;

#[derive(Debug, Error)]
pub enum AllowanceError {
    // Transparent, not "{0}" with a source: `main` prints the whole error
    // chain, and a source would print every row error a second time.
    #[error(transparent)]
    Rows(#[from] FileErrors),
    #[error(transparent)]
    Ledger(#[from] LedgerError),
    #[error("{0}")]
    Refused(String),
}

fn refused(message: impl Into<String>) -> AllowanceError {
    AllowanceError::Refused(message.into())
}

/// The site file of the facility the allowances belong to: the one named,
/// or the only one the ledger holds.
pub fn site_of(r: &(impl Reads + ?Sized), facility: Option<&str>) -> Result<Site, AllowanceError> {
    let sites = r.sites()?;
    match (facility, sites.as_slice()) {
        (Some(f), all) => all
            .iter()
            .find(|s| s.facility.id == f)
            .cloned()
            .ok_or_else(|| refused(format!("no facility {f} in the ledger"))),
        (None, [only]) => Ok(only.clone()),
        (None, []) => Err(refused(
            "no site file loaded yet (run `flue site load FILE`): accounts and programs come from it",
        )),
        (None, many) => Err(refused(format!(
            "the ledger holds several facilities; pass --facility (one of {})",
            many.iter()
                .map(|s| s.facility.id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ))),
    }
}

/// The site file's program by id.
pub fn program_of<'a>(site: &'a Site, id: &str) -> Result<&'a Program, AllowanceError> {
    site.programs.iter().find(|p| p.id == id).ok_or_else(|| {
        refused(format!(
            "program {id}: not in the site file of {} (programs: {})",
            site.facility.id,
            site.programs
                .iter()
                .map(|p| p.id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ))
    })
}

/// Parsed rows and the 1-based column of each field in the file's header.
pub struct Parsed {
    pub rows: Vec<(usize, Transaction)>,
    columns: HashMap<String, usize>,
}

impl Parsed {
    fn column(&self, field: &str) -> Option<usize> {
        self.columns.get(field).copied()
    }
}

fn account_or_issuer(text: &str) -> Holder {
    if text.is_empty() {
        Holder::Issuer
    } else {
        Holder::account(text)
    }
}

/// Parse an allowances file, or every problem found. An empty `from` (or,
/// for an adjustment, an empty `to`) names the program's issuer.
pub fn parse(file: &InputFile) -> Result<Parsed, FileErrors> {
    let mut columns = HashMap::new();
    let rows = parse_rows(file, REQUIRED, OPTIONAL, |cols, record, errors| {
        if columns.is_empty() {
            for (i, n) in cols.names.iter().enumerate() {
                columns.insert(n.clone(), i + 1);
            }
        }
        let mut f = Fields::new(cols, record, errors);
        let id = f.id("id").and_then(|id| {
            if id.starts_with(SETTLEMENT_ID_PREFIX) {
                f.parse("id", true, "an identifier", |_| -> Result<String, String> {
                    Err(format!(
                        "ids beginning {SETTLEMENT_ID_PREFIX} are kept for settlements"
                    ))
                })
            } else {
                Some(id)
            }
        });
        let date = f.date("date");
        let kind = f.parse("kind", true, "allocation, transfer or adjustment", |t| {
            match TransactionKind::parse_import(t) {
                Ok(k) => Ok(k),
                Err(_) => Err("unknown kind".to_string()),
            }
        });
        let program = f.id("program");
        let vintage = f.parse("vintage", true, "a four-digit year", |t| {
            let v: i32 = t.parse().map_err(|_| "not a whole number".to_string())?;
            if t.len() != 4 || !(VINTAGE_MIN..=VINTAGE_MAX).contains(&v) {
                return Err("not a four-digit year".into());
            }
            Ok(v)
        });
        let quantity = f.parse(
            "quantity",
            true,
            &format!("a whole number of allowances from 1 to {QUANTITY_MAX}"),
            |t| {
                if !t.bytes().all(|b| b.is_ascii_digit()) {
                    return Err("not a whole number".into());
                }
                match t.parse::<u64>() {
                    Ok(q) if (1..=QUANTITY_MAX).contains(&q) => Ok(q),
                    _ => Err("out of range".into()),
                }
            },
        );
        let from = f.text("from");
        let to = f.text("to");
        for (name, text) in [("from", from), ("to", to)] {
            if text.trim() != text {
                f.parse(name, false, "an account id", |_| -> Result<(), String> {
                    Err("surrounding spaces".into())
                });
            }
        }
        let price = f.decimal("price", false, false, None);
        let note = f.text("note").to_string();
        let serial = |f: &mut Fields, name: &str| {
            f.parse(
                name,
                false,
                &format!("a serial number from 0 to {SERIAL_MAX}"),
                |t| {
                    if !t.bytes().all(|b| b.is_ascii_digit()) {
                        return Err("not a whole number".into());
                    }
                    match t.parse::<u64>() {
                        Ok(s) if s <= SERIAL_MAX => Ok(s),
                        _ => Err("out of range".into()),
                    }
                },
            )
        };
        let serial_from = serial(&mut f, "serial_from");
        let serial_to = serial(&mut f, "serial_to");
        let serials = match (serial_from, serial_to) {
            (None, None) => None,
            (Some(a), Some(b)) => match SerialBlock::new(a, b) {
                Some(block) => Some(block),
                None => {
                    f.parse(
                        "serial_to",
                        true,
                        "a serial number",
                        |_| -> Result<(), String> { Err(format!("below serial_from {a}")) },
                    );
                    None
                }
            },
            (Some(_), None) | (None, Some(_)) => {
                let missing = if serial_from.is_none() {
                    "serial_from"
                } else {
                    "serial_to"
                };
                f.parse(
                    missing,
                    true,
                    "a serial number, since the other end of the block is given",
                    |_| -> Result<(), String> { Ok(()) },
                );
                None
            }
        };
        if !f.ok {
            return None;
        }
        Some(Transaction {
            id: id?,
            date: date?,
            kind: kind?,
            program: program?,
            vintage: vintage?,
            quantity: quantity?,
            from: account_or_issuer(from),
            to: account_or_issuer(to),
            price_usd_per_allowance: price,
            note,
            serials,
        })
    })?;
    Ok(Parsed { rows, columns })
}

/// The field of the input row a refusal is about.
fn field_of(e: &TxError) -> &'static str {
    match e {
        TxError::EmptyId => "id",
        TxError::QuantityOutOfRange { .. } | TxError::Overdraft { .. } => "quantity",
        TxError::NegativePrice { .. } => "price",
        TxError::UnknownProgram { .. } => "program",
        TxError::UnknownAccount { field, .. } | TxError::NotAnAccount { field, .. } => field,
        TxError::SameHolder { .. }
        | TxError::SettlementNotToRetirement { .. }
        | TxError::RetirementOutsideSettlement => "to",
        TxError::AllocationNotFromIssuer { .. } | TxError::FromRetirement => "from",
        TxError::SerialCount { .. }
        | TxError::SerialNotHeld { .. }
        | TxError::SerialHeldElsewhere { .. } => "serial_from",
        TxError::BreaksLater { .. } => "date",
        TxError::SettlementRow { .. } => "id",
        TxError::Conflict { field, .. } => field,
    }
}

/// A refusal as a message naming the field, without the core's own
/// `field NAME:` prefix (the file reader adds it with the column).
fn message_of(e: &TxError) -> String {
    match e {
        TxError::Conflict {
            id, held, found, ..
        } => format!(
            "transaction {id} is already held with other values (held {held:?}, here {found:?}); \
             to supersede it, import with --correct REASON"
        ),
        other => {
            let text = other.to_string();
            let prefix = format!("field {}: ", field_of(other));
            text.strip_prefix(&prefix)
                .map(str::to_string)
                .unwrap_or(text)
        }
    }
}

/// Why one new transaction was refused: its index among the new rows, its
/// id, the field the refusal is about and the reason.
struct Refusal {
    index: usize,
    id: String,
    field: &'static str,
    message: String,
}

impl From<TxRowError> for Refusal {
    fn from(e: TxRowError) -> Refusal {
        Refusal {
            index: e.index,
            field: field_of(&e.error),
            message: message_of(&e.error),
            id: e.id,
        }
    }
}

/// A settled year is closed: a transaction of the program's account dated
/// on or before the settlement's true-up day counts in the holdings the
/// settlement deducted from, so writing one would change the
/// reconciliation the settlement froze. A new transaction in that scope is
/// refused, and so is a correction whose held or new version is in it.
fn settled_conflict(
    site: &Site,
    settlements: &[StoredSettlement],
    tx: &Transaction,
) -> Option<String> {
    settlements.iter().find_map(|s| {
        let program = site.programs.iter().find(|p| p.id == s.program)?;
        let account = Holder::account(&program.account);
        (tx.program == s.program
            && tx.date <= s.true_up_date
            && (tx.from == account || tx.to == account))
            .then(|| {
                format!(
                    "program {}, year {} is settled (on {} by {}): a transaction of account {} dated {}, on or before its true-up day {}, would change it",
                    s.program, s.year, s.settled_at, s.settled_by, program.account, tx.date, s.true_up_date
                )
            })
    })
}

/// `settled_conflict` for a correction: its new version, then the version
/// in force it would supersede.
fn settled_correction(
    site: &Site,
    settlements: &[StoredSettlement],
    held: &Transaction,
    new: &Transaction,
) -> Option<String> {
    let frozen = "; a settled year's holdings are frozen, so this correction is refused \
                  (record an adjustment dated after the true-up day instead)";
    if let Some(m) = settled_conflict(site, settlements, new) {
        return Some(format!("{m}{frozen}"));
    }
    settled_conflict(site, settlements, held).map(|m| format!("the version held: {m}{frozen}"))
}

/// Where new transactions come from, for the batch row and errors.
struct Origin<'a> {
    file_name: &'a str,
    sha256: &'a str,
}

/// Refuse an id that appears twice in one file with other values, or at all
/// in a correcting file (`any`): which row would supersede which is not for
/// the order of lines to decide.
fn twice(rows: &[(usize, Transaction)], any: bool) -> Vec<Refusal> {
    let mut first: HashMap<&str, (usize, &Transaction)> = HashMap::new();
    let mut out = Vec::new();
    for (index, (line, t)) in rows.iter().enumerate() {
        let Some((earlier, held)) = first.get(t.id.as_str()).copied() else {
            first.insert(&t.id, (*line, t));
            continue;
        };
        if any || held != t {
            out.push(Refusal {
                index,
                id: t.id.clone(),
                field: "id",
                message: format!(
                    "transaction {} appears twice in this file, on lines {earlier} and {line}; name each id once",
                    t.id
                ),
            });
        }
    }
    out
}

/// Apply `rows` to the stored book and write the new ones and, with
/// `correct` (the reason), the corrections; all or nothing. `refuse` turns
/// the refused rows into the command's error.
fn record(
    tx: &Tx,
    site: &Site,
    origin: &Origin,
    stamp: &Stamp,
    rows: &[(usize, Transaction)],
    correct: Option<&str>,
    refuse: impl Fn(Vec<Refusal>) -> AllowanceError,
) -> Result<Outcome, AllowanceError> {
    let dup = twice(rows, correct.is_some());
    if !dup.is_empty() {
        return Err(refuse(dup));
    }
    let held = tx.allowance_book(site)?;
    let mut book = held.clone();
    let news: Vec<Transaction> = rows.iter().map(|(_, t)| t.clone()).collect();
    let on_conflict = match correct {
        Some(_) => OnConflict::Supersede,
        None => OnConflict::Refuse,
    };
    let applied = book
        .apply_batch(&news, on_conflict)
        .map_err(|rows| refuse(rows.into_iter().map(Refusal::from).collect()))?;
    let settlements = tx.allowance_settlements(&site.facility.id)?;
    let closed: Vec<Refusal> = rows
        .iter()
        .zip(&applied)
        .enumerate()
        .filter_map(|(index, ((_, t), a))| {
            let message = match a {
                Applied::Recorded => settled_conflict(site, &settlements, t),
                Applied::Corrected => {
                    let was = held
                        .transaction(&t.id)
                        .expect("a correction supersedes a held id");
                    settled_correction(site, &settlements, was, t)
                }
                Applied::AlreadyHeld => None,
            }?;
            Some(Refusal {
                index,
                id: t.id.clone(),
                field: "date",
                message,
            })
        })
        .collect();
    if !closed.is_empty() {
        return Err(refuse(closed));
    }
    let count = |which: Applied| applied.iter().filter(|a| **a == which).count();
    let done = Outcome {
        added: count(Applied::Recorded),
        corrected: count(Applied::Corrected),
        present: count(Applied::AlreadyHeld),
    };
    if done.added == 0 && done.corrected == 0 {
        return Ok(done);
    }
    let reason = correct.filter(|_| done.corrected > 0);
    let batch = tx.insert_batch(&NewBatch {
        kind: "allowances",
        file_name: origin.file_name,
        sha256: origin.sha256,
        rows_added: done.added,
        rows_corrected: done.corrected,
        rows_present: done.present,
        at: &stamp.at,
        by: &stamp.by,
        reason,
    })?;
    // The version each correction supersedes: the latest correction in force, or the original.
    let in_force: HashMap<String, Option<i64>> = tx
        .allowance_transactions(&site.facility.id)?
        .into_iter()
        .map(|s| (s.value.id, s.correction_id))
        .collect();
    let mut seq = tx.next_allowance_seq()?;
    for ((line, t), a) in rows.iter().zip(&applied) {
        match a {
            Applied::Recorded => {
                tx.insert_allowance_transaction(seq, batch, *line, &site.facility.id, t)?;
                seq += 1;
            }
            Applied::Corrected => tx.insert_allowance_correction(&NewCorrection {
                batch_id: batch,
                line: *line,
                corrects_id: *in_force
                    .get(&t.id)
                    .expect("a correction supersedes a held id"),
                reason: reason.expect("a correction has a reason"),
                value: t,
            })?,
            Applied::AlreadyHeld => {}
        }
    }
    // Second line of defence (RELIABILITY.md R5): what was written replays
    // to the holdings the book accepted. A difference is a bug.
    let reread = tx.allowance_book(site)?;
    assert_eq!(
        reread.holdings(),
        book.holdings(),
        "allowance holdings read back differ from those written"
    );
    Ok(done)
}

/// `flue import allowances FILE.csv [--correct REASON]`: every row or none.
pub fn import(
    ledger: &mut Ledger,
    file: &InputFile,
    facility: Option<&str>,
    correct: Option<&str>,
    stamp: &Stamp,
) -> Result<Outcome, AllowanceError> {
    let parsed = parse(file)?;
    ledger.write(|tx| {
        let site = site_of(tx, facility)?;
        // Unknown programs and accounts, at their column, before the book's checks.
        let mut errors = Vec::new();
        for (line, t) in &parsed.rows {
            let at = |field: &str, message: String| match parsed.column(field) {
                Some(c) => RowError::at(*line, c, field, message),
                None => RowError::line(*line, format!("field {field}: {message}")),
            };
            if !site.programs.iter().any(|p| p.id == t.program) {
                errors.push(at(
                    "program",
                    format!(
                        "no program {:?} in the site file of {}",
                        t.program, site.facility.id
                    ),
                ));
            }
            for (field, holder) in [("from", &t.from), ("to", &t.to)] {
                if let Holder::Account(id) = holder {
                    if !site.accounts.iter().any(|a| &a.id == id) {
                        errors.push(at(
                            field,
                            format!("no account {id:?} in the site file of {}", site.facility.id),
                        ));
                    }
                }
            }
        }
        if !errors.is_empty() {
            return Err(FileErrors::new(&file.name, errors).into());
        }
        let refuse = |rows: Vec<Refusal>| -> AllowanceError {
            let errors = rows
                .into_iter()
                .map(|e| {
                    let line = parsed.rows[e.index].0;
                    match parsed.column(e.field) {
                        Some(c) => RowError::at(line, c, e.field, e.message),
                        None => RowError::line(line, format!("field {}: {}", e.field, e.message)),
                    }
                })
                .collect();
            FileErrors::new(&file.name, errors).into()
        };
        record(
            tx,
            &site,
            &Origin {
                file_name: &file.name,
                sha256: &file.sha256,
            },
            stamp,
            &parsed.rows,
            correct,
            refuse,
        )
    })
}

/// `flue allowances transfer`: one transaction from the command line.
pub fn transfer(
    ledger: &mut Ledger,
    t: &Transaction,
    facility: Option<&str>,
    stamp: &Stamp,
) -> Result<Outcome, AllowanceError> {
    if t.id.starts_with(SETTLEMENT_ID_PREFIX) {
        return Err(refused(format!(
            "field id: ids beginning {SETTLEMENT_ID_PREFIX} are kept for settlements"
        )));
    }
    // The digest covers every field, so the batch row identifies what was typed.
    let canonical = format!("{t:?}");
    let sha256 = super::hex(&Sha256::digest(canonical.as_bytes()));
    ledger.write(|tx| {
        let site = site_of(tx, facility)?;
        let refuse = |rows: Vec<Refusal>| -> AllowanceError {
            let e = &rows[0];
            refused(format!(
                "transaction {}: field {}: {}",
                e.id, e.field, e.message
            ))
        };
        record(
            tx,
            &site,
            &Origin {
                file_name: "command line: flue allowances transfer",
                sha256: &sha256,
            },
            stamp,
            &[(1, t.clone())],
            None,
            refuse,
        )
    })
}

/// A program's reconciliation for one year, its cost, and its settlement if any.
#[derive(Clone, Debug)]
pub struct ProgramYear {
    pub reconciliation: Reconciliation,
    pub cost: CostSummary,
    pub settlement: Option<StoredSettlement>,
}

fn season_emissions(
    site: &Site,
    program: &Program,
    r: &(impl Reads + ?Sized),
    year: i32,
    through: Option<NaiveDate>,
) -> Result<Option<Tons>, AllowanceError> {
    let years = crate::assemble::facility_years(r, site, year, through).map_err(|e| match e {
        crate::assemble::AssembleError::Ledger(l) => AllowanceError::from(l),
        other => refused(other.to_string()),
    })?;
    season_tons(program, &years).map_err(|e| refused(e.to_string()))
}

/// Reconcile one program's year from the ledger: emissions from the
/// facility's units, holdings at the true-up deadline.
pub fn program_year(
    r: &(impl Reads + ?Sized),
    site: &Site,
    book: &Book,
    program: &Program,
    year: i32,
) -> Result<ProgramYear, AllowanceError> {
    let tons = season_emissions(site, program, r, year, None)?.unwrap_or(Tons::ZERO);
    let held = held_at_true_up(book, program, year).map_err(|e| refused(e.to_string()))?;
    let reconciliation =
        reconcile(program, year, tons, &held).map_err(|e| refused(e.to_string()))?;
    let cost = cost_summary(
        book,
        &program.id,
        reconciliation.true_up_date,
        reconciliation.deducted(),
        reconciliation.carried_forward,
    )
    .map_err(|e| refused(e.to_string()))?;
    let settlement = r.allowance_settlement(&site.facility.id, &program.id, year)?;
    Ok(ProgramYear {
        reconciliation,
        cost,
        settlement,
    })
}

/// `flue allowances settle`: write the year's deductions and offset, once.
pub fn settle(
    ledger: &mut Ledger,
    facility: Option<&str>,
    program_id: &str,
    year: i32,
    stamp: &Stamp,
) -> Result<(ProgramYear, crate::allowances::Settlement), AllowanceError> {
    ledger.write(|tx| {
        let site = site_of(tx, facility)?;
        let program = program_of(&site, program_id)?;
        if let Some(held) = tx.allowance_settlement(&site.facility.id, program_id, year)? {
            return Err(refused(format!(
                "program {program_id}, year {year}: already settled on {} by {}; a second settlement is refused",
                held.settled_at, held.settled_by
            )));
        }
        let mut book = tx.allowance_book(&site)?;
        let py = program_year(tx, &site, &book, program, year)?;
        let rec = &py.reconciliation;
        let offset_held = book
            .holdings_at_end_of(rec.true_up_date)
            .count(&Holder::account(&program.account), &program.id, rec.offset_vintage)
            .max(0);
        let s = settlement(rec, u64::try_from(offset_held).expect("not negative"));
        book.record_settlement(&s).map_err(|e| refused(e.to_string()))?;
        let canonical = format!("{:?}", s.transactions);
        let batch = tx.insert_batch(&NewBatch {
            kind: "allowances",
            file_name: &format!("settlement: flue allowances settle --program {program_id} --year {year}"),
            sha256: &super::hex(&Sha256::digest(canonical.as_bytes())),
            rows_added: s.transactions.len(),
            rows_corrected: 0,
            rows_present: 0,
            at: &stamp.at,
            by: &stamp.by,
            reason: None,
        })?;
        tx.insert_allowance_settlement(&NewSettlement {
            batch_id: batch,
            facility_id: &site.facility.id,
            program: program_id,
            year,
            true_up_date: s.date,
            deducted: s.deducted,
            offset_owed: s.offset_owed,
            offset_deducted: s.offset_deducted,
            offset_outstanding: s.offset_outstanding,
            at: &stamp.at,
            by: &stamp.by,
        })?;
        let first_seq = tx.next_allowance_seq()?;
        for (seq, (line, t)) in (first_seq..).zip((1..).zip(&s.transactions)) {
            tx.insert_allowance_transaction(seq, batch, line, &site.facility.id, t)?;
        }
        let reread = tx.allowance_book(&site)?;
        assert_eq!(
            reread.holdings(),
            book.holdings(),
            "allowance holdings read back differ from those written"
        );
        let after = program_year(tx, &site, &reread, program, year)?;
        // A settled year reconciles as it did before (settle.rs).
        assert_eq!(after.reconciliation, py.reconciliation, "settlement changed the reconciliation");
        Ok((after, s))
    })
}

/// A program's position part way through a year, and its cost.
pub fn program_position(
    r: &(impl Reads + ?Sized),
    site: &Site,
    book: &Book,
    program: &Program,
    as_of: NaiveDate,
) -> Result<(Position, CostSummary), AllowanceError> {
    let year = as_of.year();
    // Emissions to date count the fuel records ending on or before as_of.
    let to_date = season_emissions(site, program, r, year, Some(as_of))?.unwrap_or(Tons::ZERO);
    let previous_year = match (year.checked_sub(1), same_day_previous_year(as_of)) {
        (Some(prev), Some(prev_day)) => match season_emissions(site, program, r, prev, None)? {
            Some(period_tons) => {
                let same_days_tons =
                    season_emissions(site, program, r, prev, Some(prev_day))?.unwrap_or(Tons::ZERO);
                Some(PreviousYear {
                    same_days_tons,
                    period_tons,
                })
            }
            None => None,
        },
        _ => None,
    };
    let held = book
        .holdings_at_end_of(as_of)
        .by_vintage(&Holder::account(&program.account), &program.id);
    let p = position(program, as_of, to_date, previous_year, &held)
        .map_err(|e| refused(e.to_string()))?;
    let cost = cost_summary(
        book,
        &program.id,
        as_of,
        p.allowances_required.min(p.eligible_held),
        p.expected_surplus,
    )
    .map_err(|e| refused(e.to_string()))?;
    Ok((p, cost))
}
