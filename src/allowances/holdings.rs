//! Allowance transactions and the holdings they produce.
//!
//! Double entry: every transaction moves a count of one program's allowances
//! of one vintage from one holder to another, so the holdings of each program
//! and vintage sum to zero over all holders. The program's issuer is where
//! allocations come from and the program's retirement is where settlements
//! send deductions; both stand outside the plant, like `external` accounts.
//!
//! Invariants, checked before a transaction is accepted:
//! - `compliance` and `general` accounts and the retirement never hold fewer
//!   than zero allowances, at any point of the (date, order of recording)
//!   sequence; `external` accounts and the issuer may go negative;
//! - a serial number is held by at most one holder;
//! - an id names one transaction: the same id with the same content is a
//!   no-op, with other content it is refused, unless the batch supersedes
//!   (`OnConflict::Supersede`, from `--correct REASON`): then the book is
//!   rebuilt in order of recording with the new version in the old one's
//!   place, and every rule above must still hold. A settlement's rows are
//!   never superseded.

use super::serials::{Blocks, SerialBlock};
use crate::site::{Account, AccountKind, Program};
use chrono::NaiveDate;
use rust_decimal::Decimal;
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::fmt;
use thiserror::Error;

/// Most allowances one transaction may move. It lies far above any program's
/// yearly budget and keeps every running balance well inside `i64`.
pub const QUANTITY_MAX: u64 = 1_000_000_000_000;

/// Who holds allowances: the program's issuer, the program's retirement, or
/// an account of the site file.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Holder {
    /// Source of allocations; stands outside the plant and may go negative.
    Issuer,
    /// Where settlement deductions go. Retired allowances never move again.
    Retirement,
    /// An account of the site file, by id.
    Account(String),
}

impl Holder {
    pub fn account(id: &str) -> Holder {
        Holder::Account(id.to_string())
    }
}

impl fmt::Display for Holder {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Holder::Issuer => f.write_str("(issuer)"),
            Holder::Retirement => f.write_str("(retirement)"),
            Holder::Account(id) => f.write_str(id),
        }
    }
}

/// What a transaction is. Imports write the first three; a settlement writes
/// the last two, naming the compliance year they settle.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum TransactionKind {
    /// From the issuer to an account.
    Allocation,
    /// Between two accounts.
    Transfer,
    /// A correction by the issuer or between accounts; either side may be the issuer.
    Adjustment,
    /// Allowances surrendered for the emissions of `year`.
    Deduction { year: i32 },
    /// Allowances surrendered to offset the excess emissions of `year`.
    Offset { year: i32 },
}

impl TransactionKind {
    pub fn as_str(&self) -> &'static str {
        match self {
            TransactionKind::Allocation => "allocation",
            TransactionKind::Transfer => "transfer",
            TransactionKind::Adjustment => "adjustment",
            TransactionKind::Deduction { .. } => "deduction",
            TransactionKind::Offset { .. } => "offset",
        }
    }

    /// The kinds an import file may name. Settlement kinds are refused:
    /// only a settlement writes them.
    pub fn parse_import(text: &str) -> Result<TransactionKind, String> {
        match text {
            "allocation" => Ok(TransactionKind::Allocation),
            "transfer" => Ok(TransactionKind::Transfer),
            "adjustment" => Ok(TransactionKind::Adjustment),
            other => Err(format!(
                "expected allocation, transfer or adjustment, found {other:?}"
            )),
        }
    }

    /// The compliance year a settlement kind settles.
    pub fn settles_year(&self) -> Option<i32> {
        match self {
            TransactionKind::Deduction { year } | TransactionKind::Offset { year } => Some(*year),
            _ => None,
        }
    }
}

impl fmt::Display for TransactionKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.settles_year() {
            Some(year) => write!(f, "{} for {year}", self.as_str()),
            None => f.write_str(self.as_str()),
        }
    }
}

/// One allowance transaction.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Transaction {
    pub id: String,
    pub date: NaiveDate,
    pub kind: TransactionKind,
    pub program: String,
    pub vintage: i32,
    /// Allowances moved; 1 allowance authorizes 1 ton (40 CFR 72.2).
    pub quantity: u64,
    pub from: Holder,
    pub to: Holder,
    /// Price paid per allowance, in the currency units of the site file
    /// (US dollars for the programs of 40 CFR 72-78 and 96-97).
    pub price_usd_per_allowance: Option<Decimal>,
    pub note: String,
    /// The serial numbers moved, when the transaction names them.
    pub serials: Option<SerialBlock>,
}

impl Transaction {
    /// The first field, in the order of the import file's columns, where two
    /// transactions differ: its name, this one's value and the other's.
    pub fn first_difference(&self, other: &Transaction) -> Option<(&'static str, String, String)> {
        let price = |t: &Transaction| {
            t.price_usd_per_allowance
                .map(|p| p.to_string())
                .unwrap_or_default()
        };
        let serial_from = |t: &Transaction| {
            t.serials
                .map(|b| b.serial_from.to_string())
                .unwrap_or_default()
        };
        let serial_to = |t: &Transaction| {
            t.serials
                .map(|b| b.serial_to.to_string())
                .unwrap_or_default()
        };
        let fields: [(&'static str, String, String); 11] = [
            ("date", self.date.to_string(), other.date.to_string()),
            ("kind", self.kind.to_string(), other.kind.to_string()),
            ("program", self.program.clone(), other.program.clone()),
            (
                "vintage",
                self.vintage.to_string(),
                other.vintage.to_string(),
            ),
            (
                "quantity",
                self.quantity.to_string(),
                other.quantity.to_string(),
            ),
            ("from", self.from.to_string(), other.from.to_string()),
            ("to", self.to.to_string(), other.to.to_string()),
            ("price", price(self), price(other)),
            ("note", self.note.clone(), other.note.clone()),
            ("serial_from", serial_from(self), serial_from(other)),
            ("serial_to", serial_to(self), serial_to(other)),
        ];
        // Prices compare as numbers, so "4000" and "4000.00" are the same price.
        fields.into_iter().find(|(name, a, b)| {
            if *name == "price" {
                self.price_usd_per_allowance != other.price_usd_per_allowance
            } else {
                a != b
            }
        })
    }
}

/// Why a transaction was refused. The caller adds the row's place.
#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum TxError {
    #[error("field id: empty")]
    EmptyId,
    #[error("field quantity: expected 1 to {QUANTITY_MAX} allowances, found {quantity}")]
    QuantityOutOfRange { quantity: u64 },
    #[error("field price: expected zero or more, found {price}")]
    NegativePrice { price: Decimal },
    #[error("field program: no program {program:?} in the site file")]
    UnknownProgram { program: String },
    #[error("field {field}: no account {account:?} in the site file")]
    UnknownAccount {
        field: &'static str,
        account: String,
    },
    #[error("fields from and to: both name {holder}")]
    SameHolder { holder: Holder },
    #[error("field from: an allocation comes from the program's issuer, so from must be empty, found {from}")]
    AllocationNotFromIssuer { from: Holder },
    #[error("field {field}: a {kind} moves allowances between accounts, found {holder}")]
    NotAnAccount {
        field: &'static str,
        kind: TransactionKind,
        holder: Holder,
    },
    #[error("field to: a {kind} goes to the program's retirement, found {to}")]
    SettlementNotToRetirement { kind: TransactionKind, to: Holder },
    #[error("field to: only a settlement sends allowances to the retirement")]
    RetirementOutsideSettlement,
    #[error("field from: retired allowances never move again")]
    FromRetirement,
    #[error("fields serial_from and serial_to: block {block} holds {serial_count} serials, but quantity is {quantity}")]
    SerialCount {
        block: SerialBlock,
        serial_count: u64,
        quantity: u64,
    },
    #[error("account {account}, program {program}, vintage {vintage}: held {held}, asked {asked}; a {kind} account never goes below zero")]
    Overdraft {
        account: Holder,
        kind: &'static str,
        program: String,
        vintage: i32,
        held: i64,
        asked: u64,
    },
    #[error("account {account}, program {program}, vintage {vintage}: serial {serial} of block {block} is not held")]
    SerialNotHeld {
        account: Holder,
        program: String,
        vintage: i32,
        block: SerialBlock,
        serial: u64,
    },
    #[error("program {program}, vintage {vintage}: serial {serial} of block {block} is already held by {holder}")]
    SerialHeldElsewhere {
        program: String,
        vintage: i32,
        block: SerialBlock,
        serial: u64,
        holder: Holder,
    },
    #[error("dated {date}, it would refuse transaction {later_id} recorded after it: {source}")]
    BreaksLater {
        date: NaiveDate,
        later_id: String,
        source: Box<TxError>,
    },
    #[error("id {id}: written by a settlement ({kind}); a settlement's transactions never change")]
    SettlementRow { id: String, kind: TransactionKind },
    #[error(
        "id {id}: already held with other content: field {field}: held {held:?}, found {found:?}"
    )]
    Conflict {
        id: String,
        field: &'static str,
        held: String,
        found: String,
    },
}

/// A refused row of a batch: its 0-based index in the batch, its id and why.
#[derive(Debug, Error, Clone, PartialEq, Eq)]
#[error("transaction {id}: {error}")]
pub struct RowError {
    pub index: usize,
    pub id: String,
    pub error: TxError,
}

/// What applying an accepted transaction did.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Applied {
    /// A new transaction, now part of the book.
    Recorded,
    /// The same id with the same content was already held: nothing changed.
    AlreadyHeld,
    /// The same id with other content superseded the version held.
    Corrected,
}

/// What a batch does with an id already held with other content.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OnConflict {
    /// Refuse the row (`TxError::Conflict`).
    Refuse,
    /// Supersede the held version (`--correct REASON`).
    Supersede,
}

/// Where one holder's allowances of one program and vintage are kept.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct HoldingKey {
    pub holder: Holder,
    pub program: String,
    pub vintage: i32,
}

#[derive(Clone, Debug, Default, PartialEq, Eq)]
struct Slot {
    count: i64,
    blocks: Blocks,
}

/// One row of a balance: a holder's count of one program and vintage.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Balance {
    pub account: Holder,
    pub program: String,
    pub vintage: i32,
    pub count: i64,
}

/// One serial block a holder holds.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct HeldBlock {
    pub program: String,
    pub vintage: i32,
    #[serde(flatten)]
    pub block: SerialBlock,
}

/// Holdings after some transactions, keyed by (holder, program, vintage).
/// Zero counts with no serial blocks are not stored.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Holdings {
    slots: BTreeMap<HoldingKey, Slot>,
}

impl Holdings {
    fn key(holder: &Holder, program: &str, vintage: i32) -> HoldingKey {
        HoldingKey {
            holder: holder.clone(),
            program: program.to_string(),
            vintage,
        }
    }

    /// The count a holder holds of one program and vintage.
    pub fn count(&self, holder: &Holder, program: &str, vintage: i32) -> i64 {
        self.slots
            .get(&Self::key(holder, program, vintage))
            .map_or(0, |s| s.count)
    }

    /// A holder's counts of one program, by vintage, leaving out zeros.
    pub fn by_vintage(&self, holder: &Holder, program: &str) -> BTreeMap<i32, i64> {
        self.slots
            .iter()
            .filter(|(k, s)| &k.holder == holder && k.program == program && s.count != 0)
            .map(|(k, s)| (k.vintage, s.count))
            .collect()
    }

    /// Balances by holder, program and vintage, optionally for one account
    /// and one program, leaving out zeros. The issuer and retirement are
    /// included unless an account is named.
    pub fn balances(&self, account: Option<&str>, program: Option<&str>) -> Vec<Balance> {
        self.slots
            .iter()
            .filter(|(k, s)| {
                s.count != 0
                    && account.is_none_or(|a| k.holder == Holder::account(a))
                    && program.is_none_or(|p| k.program == p)
            })
            .map(|(k, s)| Balance {
                account: k.holder.clone(),
                program: k.program.clone(),
                vintage: k.vintage,
                count: s.count,
            })
            .collect()
    }

    /// The serial blocks a holder holds, by program, vintage and serial.
    pub fn blocks(&self, holder: &Holder) -> Vec<HeldBlock> {
        self.slots
            .iter()
            .filter(|(k, _)| &k.holder == holder)
            .flat_map(|(k, s)| {
                s.blocks.as_slice().iter().map(|b| HeldBlock {
                    program: k.program.clone(),
                    vintage: k.vintage,
                    block: *b,
                })
            })
            .collect()
    }

    /// The sum over all holders of one program and vintage. Double entry
    /// makes it zero; `flue verify` can check it.
    pub fn net_total(&self, program: &str, vintage: i32) -> i128 {
        self.slots
            .iter()
            .filter(|(k, _)| k.program == program && k.vintage == vintage)
            .map(|(_, s)| i128::from(s.count))
            .sum()
    }

    /// Every (program, vintage) that has ever been held.
    pub fn programs_and_vintages(&self) -> BTreeSet<(String, i32)> {
        self.slots
            .keys()
            .map(|k| (k.program.clone(), k.vintage))
            .collect()
    }

    fn put(&mut self, key: HoldingKey, slot: Slot) {
        if slot.count == 0 && slot.blocks.is_empty() {
            self.slots.remove(&key);
        } else {
            self.slots.insert(key, slot);
        }
    }

    /// Apply one validated transaction: check every rule first, then change
    /// both sides, so a refusal leaves the holdings as they were.
    fn step(
        &mut self,
        tx: &Transaction,
        bounded: impl Fn(&Holder) -> Option<&'static str>,
    ) -> Result<(), TxError> {
        let quantity = i64::try_from(tx.quantity).expect("quantity checked against QUANTITY_MAX");
        let from_key = Self::key(&tx.from, &tx.program, tx.vintage);
        let to_key = Self::key(&tx.to, &tx.program, tx.vintage);
        let mut from = self.slots.get(&from_key).cloned().unwrap_or_default();
        let mut to = self.slots.get(&to_key).cloned().unwrap_or_default();
        let bound = bounded(&tx.from);
        if let Some(kind) = bound {
            if from.count < quantity {
                return Err(TxError::Overdraft {
                    account: tx.from.clone(),
                    kind,
                    program: tx.program.clone(),
                    vintage: tx.vintage,
                    held: from.count,
                    asked: tx.quantity,
                });
            }
        }
        let moved = match tx.serials {
            Some(block) => {
                if bound.is_some() {
                    if let Some(serial) = from.blocks.first_missing(&block) {
                        return Err(TxError::SerialNotHeld {
                            account: tx.from.clone(),
                            program: tx.program.clone(),
                            vintage: tx.vintage,
                            block,
                            serial,
                        });
                    }
                } else {
                    // An outside party may send serials the book never saw it
                    // receive, but never serials someone else holds.
                    let elsewhere = self.slots.iter().find_map(|(k, s)| {
                        (k.program == tx.program && k.vintage == tx.vintage && k.holder != tx.from)
                            .then(|| {
                                s.blocks
                                    .first_held(&block)
                                    .map(|serial| (serial, k.holder.clone()))
                            })
                            .flatten()
                    });
                    if let Some((serial, holder)) = elsewhere {
                        return Err(TxError::SerialHeldElsewhere {
                            program: tx.program.clone(),
                            vintage: tx.vintage,
                            block,
                            serial,
                            holder,
                        });
                    }
                }
                from.blocks.remove(&block);
                vec![block]
            }
            None => {
                // Unnumbered allowances leave first; when they run out, the
                // lowest serials go, so serials held never exceed the count.
                let serialized =
                    i64::try_from(from.blocks.serial_count()).expect("serials held fit in i64");
                let unnumbered = from.count.saturating_sub(serialized).max(0);
                let from_blocks = quantity.saturating_sub(unnumbered).max(0);
                from.blocks
                    .take_lowest(u64::try_from(from_blocks).expect("not negative"))
            }
        };
        // Balances stay within ±(transactions × QUANTITY_MAX); an overflow here is a bug.
        from.count = from
            .count
            .checked_sub(quantity)
            .expect("balance fits in i64");
        to.count = to.count.checked_add(quantity).expect("balance fits in i64");
        for block in moved {
            to.blocks.insert(block);
        }
        self.put(from_key, from);
        self.put(to_key, to);
        Ok(())
    }
}

/// The allowance book: the accepted transactions in (date, order of
/// recording) and the holdings after all of them.
#[derive(Clone, Debug)]
pub struct Book {
    accounts: BTreeMap<String, AccountKind>,
    programs: BTreeSet<String>,
    transactions: Vec<Transaction>,
    by_id: HashMap<String, Transaction>,
    /// Ids in order of recording: a corrected transaction keeps its place.
    recorded: Vec<String>,
    holdings: Holdings,
}

impl Book {
    /// An empty book for the accounts and programs of a site file.
    pub fn new(accounts: &[Account], programs: &[Program]) -> Book {
        Book {
            accounts: accounts.iter().map(|a| (a.id.clone(), a.kind)).collect(),
            programs: programs.iter().map(|p| p.id.clone()).collect(),
            transactions: Vec::new(),
            by_id: HashMap::new(),
            recorded: Vec::new(),
            holdings: Holdings::default(),
        }
    }

    /// The version held of transaction `id`.
    pub fn transaction(&self, id: &str) -> Option<&Transaction> {
        self.by_id.get(id)
    }

    /// The accepted transactions, by date and then order of recording.
    pub fn transactions(&self) -> &[Transaction] {
        &self.transactions
    }

    /// Holdings after every accepted transaction.
    pub fn holdings(&self) -> &Holdings {
        &self.holdings
    }

    /// Whether a holder belongs to the plant: a `compliance` or `general` account.
    pub fn is_plant(&self, holder: &Holder) -> bool {
        self.bound(holder).is_some() && *holder != Holder::Retirement
    }

    fn bound(&self, holder: &Holder) -> Option<&'static str> {
        bound_of(&self.accounts, holder)
    }

    /// Holdings at the end of `date`, inclusive of that day's transactions.
    pub fn holdings_at_end_of(&self, date: NaiveDate) -> Holdings {
        let end = self.transactions.partition_point(|t| t.date <= date);
        self.replay(end)
    }

    /// Holdings after the first `end` accepted transactions. A prefix of an
    /// accepted sequence replays without refusal; a refusal here is a bug.
    fn replay(&self, end: usize) -> Holdings {
        let mut holdings = Holdings::default();
        for tx in &self.transactions[..end] {
            holdings
                .step(tx, |h| self.bound(h))
                .unwrap_or_else(|e| panic!("replaying accepted transaction {}: {e}", tx.id));
        }
        holdings
    }

    /// Whether the book holds a settlement row of `program` for `year`.
    pub fn is_settled(&self, program: &str, year: i32) -> bool {
        self.transactions
            .iter()
            .any(|t| t.program == program && t.kind.settles_year() == Some(year))
    }

    fn validate(&self, tx: &Transaction) -> Result<(), TxError> {
        if tx.id.is_empty() {
            return Err(TxError::EmptyId);
        }
        if !self.programs.contains(&tx.program) {
            return Err(TxError::UnknownProgram {
                program: tx.program.clone(),
            });
        }
        if tx.quantity == 0 || tx.quantity > QUANTITY_MAX {
            return Err(TxError::QuantityOutOfRange {
                quantity: tx.quantity,
            });
        }
        if let Some(price) = tx.price_usd_per_allowance {
            if price.is_sign_negative() && !price.is_zero() {
                return Err(TxError::NegativePrice { price });
            }
        }
        for (field, holder) in [("from", &tx.from), ("to", &tx.to)] {
            if let Holder::Account(id) = holder {
                if !self.accounts.contains_key(id) {
                    return Err(TxError::UnknownAccount {
                        field,
                        account: id.clone(),
                    });
                }
            }
        }
        if tx.from == tx.to {
            return Err(TxError::SameHolder {
                holder: tx.from.clone(),
            });
        }
        if tx.from == Holder::Retirement {
            return Err(TxError::FromRetirement);
        }
        let not_account = |field: &'static str, holder: &Holder| TxError::NotAnAccount {
            field,
            kind: tx.kind,
            holder: holder.clone(),
        };
        match tx.kind {
            TransactionKind::Allocation => {
                if tx.from != Holder::Issuer {
                    return Err(TxError::AllocationNotFromIssuer {
                        from: tx.from.clone(),
                    });
                }
                if tx.to == Holder::Retirement {
                    return Err(TxError::RetirementOutsideSettlement);
                }
            }
            TransactionKind::Transfer => {
                if !matches!(tx.from, Holder::Account(_)) {
                    return Err(not_account("from", &tx.from));
                }
                if tx.to == Holder::Retirement {
                    return Err(TxError::RetirementOutsideSettlement);
                }
                if !matches!(tx.to, Holder::Account(_)) {
                    return Err(not_account("to", &tx.to));
                }
            }
            TransactionKind::Adjustment => {
                if tx.to == Holder::Retirement {
                    return Err(TxError::RetirementOutsideSettlement);
                }
            }
            TransactionKind::Deduction { .. } | TransactionKind::Offset { .. } => {
                if !matches!(tx.from, Holder::Account(_)) {
                    return Err(not_account("from", &tx.from));
                }
                if tx.to != Holder::Retirement {
                    return Err(TxError::SettlementNotToRetirement {
                        kind: tx.kind,
                        to: tx.to.clone(),
                    });
                }
            }
        }
        if let Some(block) = tx.serials {
            let serial_count = block.serial_count().unwrap_or(u64::MAX);
            if serial_count != tx.quantity {
                return Err(TxError::SerialCount {
                    block,
                    serial_count,
                    quantity: tx.quantity,
                });
            }
        }
        Ok(())
    }

    /// Apply one transaction. A refusal leaves the book as it was.
    ///
    /// A transaction dated before others already held is placed after the
    /// held ones of its own date, and the whole sequence is replayed: it is
    /// refused if it would make any later transaction overdraw.
    pub fn apply(&mut self, tx: Transaction) -> Result<Applied, TxError> {
        if let Some(held) = self.by_id.get(&tx.id) {
            return match held.first_difference(&tx) {
                None => Ok(Applied::AlreadyHeld),
                Some((field, held, found)) => Err(TxError::Conflict {
                    id: tx.id.clone(),
                    field,
                    held,
                    found,
                }),
            };
        }
        self.validate(&tx)?;
        let at = self.transactions.partition_point(|t| t.date <= tx.date);
        if at == self.transactions.len() {
            let accounts = &self.accounts;
            self.holdings.step(&tx, |h| bound_of(accounts, h))?;
        } else {
            let mut holdings = self.replay(at);
            holdings.step(&tx, |h| self.bound(h))?;
            for later in &self.transactions[at..] {
                holdings
                    .step(later, |h| self.bound(h))
                    .map_err(|e| TxError::BreaksLater {
                        date: tx.date,
                        later_id: later.id.clone(),
                        source: Box::new(e),
                    })?;
            }
            self.holdings = holdings;
        }
        self.by_id.insert(tx.id.clone(), tx.clone());
        self.recorded.push(tx.id.clone());
        self.transactions.insert(at, tx);
        Ok(Applied::Recorded)
    }

    /// Apply one transaction, superseding the version held of its id if
    /// that differs. A refusal leaves the book as it was.
    ///
    /// The book is rebuilt from an empty one, every held transaction in
    /// order of recording with `tx` in its id's place, so the result is the
    /// book the stored versions in force replay to. A refusal of another
    /// transaction is reported as `BreaksLater` naming it.
    pub fn supersede(&mut self, tx: Transaction) -> Result<Applied, TxError> {
        let Some(held) = self.by_id.get(&tx.id) else {
            return self.apply(tx);
        };
        if held.first_difference(&tx).is_none() {
            return Ok(Applied::AlreadyHeld);
        }
        if held.kind.settles_year().is_some() {
            return Err(TxError::SettlementRow {
                id: tx.id.clone(),
                kind: held.kind,
            });
        }
        let mut rebuilt = Book {
            accounts: self.accounts.clone(),
            programs: self.programs.clone(),
            transactions: Vec::with_capacity(self.transactions.len()),
            by_id: HashMap::with_capacity(self.by_id.len()),
            recorded: Vec::with_capacity(self.recorded.len()),
            holdings: Holdings::default(),
        };
        for id in &self.recorded {
            if *id == tx.id {
                rebuilt.apply(tx.clone())?;
            } else {
                rebuilt
                    .apply(self.by_id[id].clone())
                    .map_err(|e| TxError::BreaksLater {
                        date: tx.date,
                        later_id: id.clone(),
                        source: Box::new(e),
                    })?;
            }
        }
        *self = rebuilt;
        Ok(Applied::Corrected)
    }

    /// Apply a batch, all or nothing: every row is tried (a refused row is
    /// skipped so later rows are still checked), and if any is refused the
    /// book is left as it was and every refusal is returned.
    pub fn apply_all(&mut self, txs: &[Transaction]) -> Result<Vec<Applied>, Vec<RowError>> {
        self.apply_batch(txs, OnConflict::Refuse)
    }

    /// `apply_all`, with held ids of other content refused or superseded.
    pub fn apply_batch(
        &mut self,
        txs: &[Transaction],
        on_conflict: OnConflict,
    ) -> Result<Vec<Applied>, Vec<RowError>> {
        let mut work = self.clone();
        let mut applied = Vec::with_capacity(txs.len());
        let mut errors = Vec::new();
        for (index, tx) in txs.iter().enumerate() {
            let result = match on_conflict {
                OnConflict::Refuse => work.apply(tx.clone()),
                OnConflict::Supersede => work.supersede(tx.clone()),
            };
            match result {
                Ok(a) => applied.push(a),
                Err(error) => errors.push(RowError {
                    index,
                    id: tx.id.clone(),
                    error,
                }),
            }
        }
        if errors.is_empty() {
            *self = work;
            Ok(applied)
        } else {
            Err(errors)
        }
    }
}

/// The kind name of holders that may never go below zero: `compliance` and
/// `general` accounts and the retirement. `None` for the issuer and
/// `external` accounts, which stand outside the plant.
fn bound_of(accounts: &BTreeMap<String, AccountKind>, holder: &Holder) -> Option<&'static str> {
    match holder {
        Holder::Issuer => None,
        Holder::Retirement => Some("retirement"),
        Holder::Account(id) => match accounts.get(id) {
            Some(AccountKind::External) | None => None,
            Some(kind) => Some(kind.as_str()),
        },
    }
}
