//! Tests of the allowance core. Reconciliations go through `check`; each
//! rule cites the regulation it follows, and check values cite
//! REFERENCES.md section 8.

use super::*;
use crate::site::{Account, AccountKind, Pollutant, Program, Season};
use crate::units::Tons;
use chrono::NaiveDate;
use rust_decimal::Decimal;
use rust_decimal_macros::dec;
use std::collections::BTreeMap;

const C: &str = "F1-COMPLIANCE";
const G: &str = "F1-GENERAL";
const X: &str = "BROKER";

fn day(text: &str) -> NaiveDate {
    NaiveDate::parse_from_str(text, "%Y-%m-%d").expect("test date")
}

fn accounts() -> Vec<Account> {
    [
        (C, AccountKind::Compliance),
        (G, AccountKind::General),
        (X, AccountKind::External),
    ]
    .into_iter()
    .map(|(id, kind)| Account {
        id: id.to_string(),
        kind,
    })
    .collect()
}

fn program(
    id: &str,
    penalty_per_ton: Decimal,
    offset_ratio: Decimal,
    true_up: (u32, u32),
) -> Program {
    Program {
        id: id.to_string(),
        pollutant: Pollutant::So2,
        season: Season::Annual,
        account: C.to_string(),
        surrender_ratio: Decimal::ONE,
        penalty_per_ton,
        offset_ratio,
        true_up,
    }
}

fn so2() -> Program {
    program("SO2", dec!(4000.00), Decimal::ONE, (3, 1))
}

fn nox_ozone() -> Program {
    Program {
        pollutant: Pollutant::Nox,
        season: Season::Ozone,
        ..program("NOX-OS", dec!(4000), dec!(3), (3, 1))
    }
}

fn book() -> Book {
    Book::new(&accounts(), &[so2(), nox_ozone()])
}

fn acct(id: &str) -> Holder {
    Holder::account(id)
}

/// A transaction of program SO2 without price, note or serials.
fn tx(
    id: &str,
    date: &str,
    kind: TransactionKind,
    vintage: i32,
    quantity: u64,
    from: Holder,
    to: Holder,
) -> Transaction {
    Transaction {
        id: id.to_string(),
        date: day(date),
        kind,
        program: "SO2".to_string(),
        vintage,
        quantity,
        from,
        to,
        price_usd_per_allowance: None,
        note: String::new(),
        serials: None,
    }
}

fn allocate(id: &str, date: &str, vintage: i32, quantity: u64, to: &str) -> Transaction {
    tx(
        id,
        date,
        TransactionKind::Allocation,
        vintage,
        quantity,
        Holder::Issuer,
        acct(to),
    )
}

fn transfer(
    id: &str,
    date: &str,
    vintage: i32,
    quantity: u64,
    from: &str,
    to: &str,
) -> Transaction {
    tx(
        id,
        date,
        TransactionKind::Transfer,
        vintage,
        quantity,
        acct(from),
        acct(to),
    )
}

fn with_serials(mut t: Transaction, serial_from: u64, serial_to: u64) -> Transaction {
    t.serials = SerialBlock::new(serial_from, serial_to);
    t
}

fn held(pairs: &[(i32, i64)]) -> BTreeMap<i32, i64> {
    pairs.iter().copied().collect()
}

/// What a reconciliation must show. `by_vintage` lists (vintage, held, deduct).
#[derive(Clone, Copy)]
struct Expect<'a> {
    tons_to_cover: u64,
    eligible_held: u64,
    by_vintage: &'a [(i32, u64, u64)],
    shortfall: u64,
    penalty_usd: Decimal,
    offset_next_year: u64,
    carried_forward: u64,
}

/// Reconcile and compare every figure with the expected one.
fn check(
    program: &Program,
    year: i32,
    so2_tons: Decimal,
    held_by_vintage: &BTreeMap<i32, i64>,
    expect: Expect,
) -> Reconciliation {
    let rec = reconcile(program, year, Tons(so2_tons), held_by_vintage).expect("reconciles");
    assert_eq!(rec.tons_to_cover, expect.tons_to_cover, "tons_to_cover");
    // One allowance covers one ton (40 CFR 72.2).
    assert_eq!(
        rec.allowances_required, rec.tons_to_cover,
        "allowances_required"
    );
    assert_eq!(rec.eligible_held, expect.eligible_held, "eligible_held");
    let by_vintage: Vec<(i32, u64, u64)> = rec
        .by_vintage
        .iter()
        .map(|v| (v.vintage, v.held, v.deduct))
        .collect();
    assert_eq!(by_vintage, expect.by_vintage, "by_vintage");
    assert_eq!(rec.shortfall, expect.shortfall, "shortfall");
    assert_eq!(rec.penalty_usd, expect.penalty_usd, "penalty");
    assert_eq!(rec.offset_vintage, year + 1, "offset_vintage");
    assert_eq!(
        rec.offset_next_year, expect.offset_next_year,
        "offset_next_year"
    );
    assert_eq!(
        rec.carried_forward, expect.carried_forward,
        "carried_forward"
    );
    assert_eq!(
        rec.deducted() + rec.shortfall,
        rec.allowances_required,
        "deducted plus shortfall"
    );
    rec
}

// ---- reconciliation rules ----

#[test]
fn one_allowance_covers_one_ton() {
    // 40 CFR 72.2: an allowance authorizes one ton of SO2. 100 tons need 100.
    let exact = Expect {
        tons_to_cover: 100,
        eligible_held: 100,
        by_vintage: &[(2024, 100, 100)],
        shortfall: 0,
        penalty_usd: dec!(0),
        offset_next_year: 0,
        carried_forward: 0,
    };
    check(&so2(), 2024, dec!(100), &held(&[(2024, 100)]), exact);
    // One ton more than held is one allowance short.
    let short = Expect {
        tons_to_cover: 101,
        shortfall: 1,
        penalty_usd: dec!(4000.00),
        offset_next_year: 1,
        ..exact
    };
    check(&so2(), 2024, dec!(101), &held(&[(2024, 100)]), short);
}

#[test]
fn only_vintages_no_later_than_the_year_count_oldest_first() {
    // 40 CFR 73.35(a): an allowance is deductible only if its year is no
    // later than the year of the emissions. 2025 allowances do not cover 2024.
    let holdings = held(&[(2022, 30), (2023, 50), (2024, 40), (2025, 500)]);
    check(
        &so2(),
        2024,
        dec!(60),
        &holdings,
        Expect {
            tons_to_cover: 60,
            eligible_held: 120,
            by_vintage: &[(2022, 30, 30), (2023, 50, 30), (2024, 40, 0)],
            shortfall: 0,
            penalty_usd: dec!(0),
            offset_next_year: 0,
            carried_forward: 60,
        },
    );
    // Needing more than the eligible vintages is a shortfall despite the 2025 holding.
    check(
        &so2(),
        2024,
        dec!(130),
        &holdings,
        Expect {
            tons_to_cover: 130,
            eligible_held: 120,
            by_vintage: &[(2022, 30, 30), (2023, 50, 50), (2024, 40, 40)],
            shortfall: 10,
            penalty_usd: dec!(40000.00),
            offset_next_year: 10,
            carried_forward: 0,
        },
    );
    // The year's own vintage is eligible (no later than the year): 2025 covers 2025.
    check(
        &so2(),
        2025,
        dec!(500),
        &held(&[(2025, 500)]),
        Expect {
            tons_to_cover: 500,
            eligible_held: 500,
            by_vintage: &[(2025, 500, 500)],
            shortfall: 0,
            penalty_usd: dec!(0),
            offset_next_year: 0,
            carried_forward: 0,
        },
    );
}

fn covered(tons_to_cover: u64, held_count: u64) -> Expect<'static> {
    Expect {
        tons_to_cover,
        eligible_held: held_count,
        by_vintage: &[],
        shortfall: 0,
        penalty_usd: dec!(0),
        offset_next_year: 0,
        carried_forward: held_count - tons_to_cover,
    }
}

#[test]
fn tons_round_half_up_a_fraction_below_half_counts_zero() {
    // 40 CFR 97.406(b)(2): rounded to the nearest ton, a fraction below 0.50 counts as zero.
    assert_eq!(whole_tons(Tons(dec!(0.49))), dec!(0));
    assert_eq!(whole_tons(Tons(dec!(0.50))), dec!(1));
    assert_eq!(whole_tons(Tons(dec!(1234.499999))), dec!(1234));
    assert_eq!(whole_tons(Tons(dec!(1234.50))), dec!(1235));
    // The same through a reconciliation with nothing held: 0.49 tons need nothing, 0.50 need one.
    check(&so2(), 2024, dec!(0.49), &held(&[]), covered(0, 0));
    let one_short = Expect {
        tons_to_cover: 1,
        shortfall: 1,
        penalty_usd: dec!(4000.00),
        offset_next_year: 1,
        ..covered(0, 0)
    };
    check(&so2(), 2024, dec!(0.50), &held(&[]), one_short);
}

#[test]
fn surrender_ratio_applies_to_whole_tons_and_rounds_up() {
    // DESIGN.md: whole tons × surrender_ratio, rounded up.
    let p = Program {
        surrender_ratio: dec!(1.5),
        ..so2()
    };
    assert_eq!(tons_to_cover(Tons(dec!(3)), p.surrender_ratio), Some(5)); // 4.5 up to 5
    assert_eq!(tons_to_cover(Tons(dec!(4)), p.surrender_ratio), Some(6)); // exactly 6
                                                                          // 3.49 tons is 3 whole tons first (97.406(b)(2)), then 4.5 allowances, up to 5.
    assert_eq!(tons_to_cover(Tons(dec!(3.49)), p.surrender_ratio), Some(5));
    let mut e = covered(5, 10);
    e.by_vintage = &[(2024, 10, 5)];
    check(&p, 2024, dec!(3), &held(&[(2024, 10)]), e);
}

#[test]
fn penalty_and_offset_for_excess_check_value_c21() {
    // Check value C-21 (REFERENCES.md §8): 100 tons excess in 2018 at $3,941
    // per ton (40 CFR 77.6) = $394,100, and 100 allowances of the 2019
    // allocation offset (40 CFR 77.5(c)).
    let p = program("SO2", dec!(3941), Decimal::ONE, (3, 1));
    let rec = check(
        &p,
        2018,
        dec!(1100),
        &held(&[(2018, 1000)]),
        Expect {
            tons_to_cover: 1100,
            eligible_held: 1000,
            by_vintage: &[(2018, 1000, 1000)],
            shortfall: 100,
            penalty_usd: dec!(394100),
            offset_next_year: 100,
            carried_forward: 0,
        },
    );
    assert_eq!(rec.offset_vintage, 2019);
}

#[test]
fn double_and_triple_excess_deductions_check_value_c22() {
    // Check value C-22 (REFERENCES.md §8): 1,234.50 tons round to 1,235
    // (40 CFR 97.406(b)(2)); 1,200 held are deducted; excess 35 tons.
    let expect = |offset_next_year| Expect {
        tons_to_cover: 1235,
        eligible_held: 1200,
        by_vintage: &[(2024, 1200, 1200)],
        shortfall: 35,
        penalty_usd: dec!(140000),
        offset_next_year,
        carried_forward: 0,
    };
    // 40 CFR 97.424(d): 2 × the excess tons, 70 allowances.
    let tr = program("TR-NOX", dec!(4000), dec!(2), (3, 1));
    check(&tr, 2024, dec!(1234.50), &held(&[(2024, 1200)]), expect(70));
    // 40 CFR 96.154(d): 3 × the excess tons from the next year's allocation, 105.
    let cair = program("CAIR-NOX", dec!(4000), dec!(3), (3, 1));
    check(
        &cair,
        2024,
        dec!(1234.50),
        &held(&[(2024, 1200)]),
        expect(105),
    );
    // One hundredth less rounds down to 1,234: excess 34.
    let below = Expect {
        tons_to_cover: 1234,
        shortfall: 34,
        penalty_usd: dec!(136000),
        ..expect(68)
    };
    check(&tr, 2024, dec!(1234.49), &held(&[(2024, 1200)]), below);
}

#[test]
fn a_fractional_offset_ratio_rounds_the_offset_up() {
    // DESIGN.md: excess × offset_ratio allowances, rounded up. 3 × 0.5 = 1.5 → 2.
    let p = program("HALF", dec!(10), dec!(0.5), (3, 1));
    check(
        &p,
        2024,
        dec!(3),
        &held(&[]),
        Expect {
            tons_to_cover: 3,
            eligible_held: 0,
            by_vintage: &[],
            shortfall: 3,
            penalty_usd: dec!(30),
            offset_next_year: 2,
            carried_forward: 0,
        },
    );
}

#[test]
fn reconcile_refuses_negative_inputs() {
    let e = reconcile(&so2(), 2024, Tons(dec!(-0.1)), &held(&[])).unwrap_err();
    assert_eq!(
        e.to_string(),
        "program SO2, year 2024: field emissions_tons: expected zero or more, found -0.1"
    );
    let e = reconcile(&so2(), 2024, Tons(dec!(1)), &held(&[(2023, -4)])).unwrap_err();
    assert_eq!(
        e.to_string(),
        "program SO2, account F1-COMPLIANCE, vintage 2023: held -4, below zero"
    );
    // A negative future vintage is not eligible and not looked at.
    assert!(reconcile(&so2(), 2024, Tons(dec!(1)), &held(&[(2025, -4)])).is_ok());
}

#[test]
fn reconcile_json_has_the_design_fields_with_decimals_as_strings() {
    let rec = reconcile(&so2(), 2024, Tons(dec!(10.5)), &held(&[(2024, 5)])).expect("reconciles");
    let json = serde_json::to_value(&rec).expect("serializes");
    for field in [
        "program",
        "year",
        "account",
        "emissions_tons",
        "tons_to_cover",
        "allowances_required",
        "eligible_held",
        "by_vintage",
        "shortfall",
        "penalty",
        "offset_next_year",
        "carried_forward",
    ] {
        assert!(
            json.get(field).is_some(),
            "field {field} missing from {json}"
        );
    }
    assert_eq!(json["emissions_tons"], "10.5");
    assert_eq!(json["penalty"], "24000.00");
    assert_eq!(json["tons_to_cover"], 11);
    assert_eq!(json["true_up_date"], "2025-03-01");
    assert_eq!(
        json["by_vintage"][0],
        serde_json::json!({"vintage": 2024, "held": 5, "deduct": 5})
    );
}

// ---- the true-up deadline ----

#[test]
fn true_up_day_is_in_the_next_year_and_february_29_clamps() {
    // 40 CFR 72.2 allowance transfer deadline: holdings of the day after the year.
    assert_eq!(true_up_date(&so2(), 2024), Ok(day("2025-03-01")));
    let feb29 = program("P", dec!(1), dec!(1), (2, 29));
    // 2024 is a leap year: the true-up of 2023 is February 29, of 2024 February 28.
    assert_eq!(true_up_date(&feb29, 2023), Ok(day("2024-02-29")));
    assert_eq!(true_up_date(&feb29, 2024), Ok(day("2025-02-28")));
    // Century rule: 2100 is not a leap year, 2000 was.
    assert_eq!(true_up_date(&feb29, 2099), Ok(day("2100-02-28")));
    assert_eq!(true_up_date(&feb29, 1999), Ok(day("2000-02-29")));
}

#[test]
fn transfers_on_the_true_up_day_count_and_the_day_after_do_not() {
    // 40 CFR 72.2: holdings count as of the allowance transfer deadline, the
    // end of the true-up day (here 2025-03-01 for 2024).
    let mut b = book();
    b.apply_all(&[
        allocate("a1", "2024-01-10", 2024, 100, G),
        transfer("in-on-day", "2025-03-01", 2024, 30, G, C),
        transfer("in-day-after", "2025-03-02", 2024, 20, G, C),
        allocate("a2", "2024-01-10", 2023, 50, C),
        transfer("out-on-day", "2025-03-01", 2023, 5, C, X),
        transfer("out-day-after", "2025-03-02", 2023, 7, C, X),
    ])
    .expect("valid");
    let at = held_at_true_up(&b, &so2(), 2024).expect("date");
    assert_eq!(at, held(&[(2023, 45), (2024, 30)]));
    check(
        &so2(),
        2024,
        dec!(80),
        &at,
        Expect {
            tons_to_cover: 80,
            eligible_held: 75,
            by_vintage: &[(2023, 45, 45), (2024, 30, 30)],
            shortfall: 5,
            penalty_usd: dec!(20000.00),
            offset_next_year: 5,
            carried_forward: 0,
        },
    );
    // A day later the holdings differ, so the date matters.
    assert_eq!(
        b.holdings_at_end_of(day("2025-03-02"))
            .by_vintage(&acct(C), "SO2"),
        held(&[(2023, 38), (2024, 50)])
    );
}

#[test]
fn a_february_29_true_up_counts_february_28_in_a_common_year() {
    let feb29 = Program {
        true_up: (2, 29),
        ..so2()
    };
    let mut b = Book::new(&accounts(), std::slice::from_ref(&feb29));
    b.apply_all(&[
        allocate("feb28", "2025-02-28", 2024, 10, C),
        allocate("mar01", "2025-03-01", 2024, 20, C),
        allocate("leap29", "2024-02-29", 2023, 3, C),
        allocate("leap-mar01", "2024-03-01", 2023, 4, C),
    ])
    .expect("valid");
    // 2024's true-up falls on 2025-02-28: the allocation of that day counts, of March 1 not.
    assert_eq!(
        held_at_true_up(&b, &feb29, 2024).expect("date"),
        held(&[(2023, 7), (2024, 10)])
    );
    // 2023's true-up is 2024-02-29, a real day: March 1 is after it.
    assert_eq!(
        held_at_true_up(&b, &feb29, 2023).expect("date"),
        held(&[(2023, 3)])
    );
}

// ---- holdings ----

#[test]
fn an_overdraft_names_account_program_vintage_held_and_asked() {
    let mut b = book();
    b.apply(allocate("a", "2024-01-02", 2024, 10, C))
        .expect("allocation");
    let e = b
        .apply(transfer("t", "2024-02-01", 2024, 11, C, X))
        .unwrap_err();
    assert_eq!(
        e,
        TxError::Overdraft {
            account: acct(C),
            kind: "compliance",
            program: "SO2".into(),
            vintage: 2024,
            held: 10,
            asked: 11,
        }
    );
    assert_eq!(
        e.to_string(),
        "account F1-COMPLIANCE, program SO2, vintage 2024: held 10, asked 11; a compliance account never goes below zero"
    );
    // Exactly the balance is accepted and leaves zero.
    b.apply(transfer("t2", "2024-02-01", 2024, 10, C, X))
        .expect("whole balance");
    assert_eq!(b.holdings().count(&acct(C), "SO2", 2024), 0);
    // A general account is held to zero too; another vintage is another balance.
    b.apply(allocate("g", "2024-01-03", 2023, 5, G))
        .expect("allocation");
    let e = b
        .apply(transfer("t3", "2024-03-01", 2024, 1, G, C))
        .unwrap_err();
    assert!(
        matches!(
            e,
            TxError::Overdraft {
                kind: "general",
                held: 0,
                asked: 1,
                ..
            }
        ),
        "{e}"
    );
}

#[test]
fn external_accounts_and_the_issuer_may_go_negative() {
    let mut b = book();
    b.apply(transfer("buy", "2024-01-05", 2024, 40, X, C))
        .expect("outside the plant");
    b.apply(allocate("a", "2024-01-06", 2024, 25, G))
        .expect("allocation");
    let h = b.holdings();
    assert_eq!(h.count(&acct(X), "SO2", 2024), -40);
    assert_eq!(h.count(&Holder::Issuer, "SO2", 2024), -25);
    assert_eq!(h.net_total("SO2", 2024), 0);
}

#[test]
fn the_same_id_with_the_same_content_changes_nothing() {
    let mut b = book();
    let mut buy = transfer("buy-1", "2024-01-05", 2024, 40, X, C);
    buy.price_usd_per_allowance = Some(dec!(4000));
    assert_eq!(b.apply(buy.clone()), Ok(Applied::Recorded));
    let before = b.holdings().clone();
    // The same price written with more decimals is the same content.
    let mut again = buy.clone();
    again.price_usd_per_allowance = Some(dec!(4000.00));
    assert_eq!(b.apply(again), Ok(Applied::AlreadyHeld));
    assert_eq!(
        b.apply_all(&[buy.clone(), buy]),
        Ok(vec![Applied::AlreadyHeld, Applied::AlreadyHeld])
    );
    assert_eq!(b.holdings(), &before);
    assert_eq!(b.transactions().len(), 1);
}

#[test]
fn the_same_id_with_other_content_names_the_first_differing_field() {
    let mut b = book();
    let first = transfer("t-9", "2024-01-05", 2024, 40, X, C);
    b.apply(first.clone()).expect("first");
    let mut other = first.clone();
    other.quantity = 41;
    other.note = "typo".into();
    let e = b.apply(other).unwrap_err();
    assert_eq!(
        e.to_string(),
        "id t-9: already held with other content: field quantity: held \"40\", found \"41\""
    );
    // The date comes before the note in the file's columns.
    let mut other = first.clone();
    other.note = "late".into();
    other.date = day("2024-01-06");
    assert!(matches!(
        b.apply(other).unwrap_err(),
        TxError::Conflict { field: "date", .. }
    ));
    let mut other = first;
    other.serials = SerialBlock::new(1, 40);
    assert!(matches!(
        b.apply(other).unwrap_err(),
        TxError::Conflict {
            field: "serial_from",
            ..
        }
    ));
}

#[test]
fn a_refused_batch_writes_nothing_and_lists_every_refusal() {
    let mut b = book();
    b.apply(allocate("a", "2024-01-02", 2024, 10, C))
        .expect("allocation");
    let before = b.clone();
    let errors = b
        .apply_all(&[
            transfer("ok", "2024-02-01", 2024, 4, C, G),
            transfer("over", "2024-02-02", 2024, 7, C, X),
            transfer("unknown", "2024-02-03", 2024, 1, "NOBODY", C),
        ])
        .unwrap_err();
    let listed: Vec<(usize, &str)> = errors.iter().map(|e| (e.index, e.id.as_str())).collect();
    assert_eq!(listed, [(1, "over"), (2, "unknown")]);
    assert_eq!(
        errors[1].to_string(),
        "transaction unknown: field from: no account \"NOBODY\" in the site file"
    );
    assert_eq!(b.transactions(), before.transactions());
    assert_eq!(b.holdings(), before.holdings());
}

#[test]
fn an_earlier_dated_transaction_may_not_overdraw_a_later_one() {
    let mut b = book();
    b.apply_all(&[
        allocate("a", "2024-01-02", 2024, 10, C),
        transfer("sale", "2024-06-01", 2024, 8, C, X),
    ])
    .expect("valid");
    // Recorded now but dated before the sale, it leaves the sale only 7.
    let e = b
        .apply(transfer("early", "2024-03-01", 2024, 3, C, G))
        .unwrap_err();
    assert_eq!(
        e.to_string(),
        "dated 2024-03-01, it would refuse transaction sale recorded after it: account F1-COMPLIANCE, program SO2, vintage 2024: held 7, asked 8; a compliance account never goes below zero"
    );
    // Two fit, and the balance between the dates shows it.
    b.apply(transfer("early2", "2024-03-01", 2024, 2, C, G))
        .expect("fits");
    assert_eq!(
        b.holdings_at_end_of(day("2024-03-01"))
            .count(&acct(C), "SO2", 2024),
        8
    );
    assert_eq!(b.holdings().count(&acct(C), "SO2", 2024), 0);
    let ids: Vec<&str> = b.transactions().iter().map(|t| t.id.as_str()).collect();
    assert_eq!(ids, ["a", "early2", "sale"]);
}

#[test]
fn a_transaction_goes_after_those_already_held_of_its_own_date() {
    let mut b = book();
    b.apply(allocate("a", "2024-01-02", 2024, 5, C))
        .expect("allocation");
    // Recorded second on the same day, it follows the allocation and may spend it.
    b.apply(transfer("t", "2024-01-02", 2024, 5, C, G))
        .expect("after the allocation");
    let ids: Vec<&str> = b.transactions().iter().map(|t| t.id.as_str()).collect();
    assert_eq!(ids, ["a", "t"]);
}

#[test]
fn balances_are_at_the_end_of_the_day_inclusive() {
    let mut b = book();
    b.apply_all(&[
        allocate("a", "2024-01-02", 2024, 10, C),
        allocate("b", "2024-01-03", 2025, 6, C),
        transfer("t", "2024-01-03", 2024, 4, C, G),
    ])
    .expect("valid");
    let count = |date: &str| b.holdings_at_end_of(day(date)).count(&acct(C), "SO2", 2024);
    assert_eq!(count("2024-01-01"), 0);
    assert_eq!(count("2024-01-02"), 10);
    assert_eq!(count("2024-01-03"), 6);
    let h = b.holdings_at_end_of(day("2024-01-03"));
    let rows: Vec<(String, i32, i64)> = h
        .balances(Some(C), Some("SO2"))
        .into_iter()
        .map(|r| (r.account.to_string(), r.vintage, r.count))
        .collect();
    assert_eq!(rows, [(C.to_string(), 2024, 6), (C.to_string(), 2025, 6)]);
    assert!(h.balances(Some(C), Some("NOX-OS")).is_empty());
    // Without an account the issuer's side shows too.
    assert!(h
        .balances(None, None)
        .iter()
        .any(|r| r.account == Holder::Issuer && r.count == -10));
}

#[test]
fn kinds_and_parties_are_checked() {
    let mut b = book();
    let cases: Vec<(Transaction, &str)> = vec![
        (
            tx("k1", "2024-01-01", TransactionKind::Allocation, 2024, 1, acct(X), acct(C)),
            "field from: an allocation comes from the program's issuer, so from must be empty, found BROKER",
        ),
        (
            tx("k2", "2024-01-01", TransactionKind::Transfer, 2024, 1, Holder::Issuer, acct(C)),
            "field from: a transfer moves allowances between accounts, found (issuer)",
        ),
        (
            tx("k3", "2024-01-01", TransactionKind::Transfer, 2024, 1, acct(C), Holder::Retirement),
            "field to: only a settlement sends allowances to the retirement",
        ),
        (
            tx("k4", "2024-01-01", TransactionKind::Deduction { year: 2024 }, 2024, 1, acct(C), acct(X)),
            "field to: a deduction for 2024 goes to the program's retirement, found BROKER",
        ),
        (
            tx("k5", "2024-01-01", TransactionKind::Adjustment, 2024, 1, Holder::Retirement, acct(C)),
            "field from: retired allowances never move again",
        ),
        (transfer("k6", "2024-01-01", 2024, 0, X, C), "field quantity: expected 1 to 1000000000000 allowances, found 0"),
        (transfer("k7", "2024-01-01", 2024, 1, C, C), "fields from and to: both name F1-COMPLIANCE"),
        (
            Transaction {
                program: "CO2".into(),
                ..transfer("k8", "2024-01-01", 2024, 1, X, C)
            },
            "field program: no program \"CO2\" in the site file",
        ),
        (
            Transaction {
                price_usd_per_allowance: Some(dec!(-1)),
                ..transfer("k9", "2024-01-01", 2024, 1, X, C)
            },
            "field price: expected zero or more, found -1",
        ),
    ];
    for (t, message) in cases {
        assert_eq!(b.apply(t).unwrap_err().to_string(), message);
    }
    assert!(b.transactions().is_empty());
    // An adjustment may take allowances back to the issuer.
    b.apply(allocate("a", "2024-01-01", 2024, 5, C))
        .expect("allocation");
    b.apply(tx(
        "adj",
        "2024-01-02",
        TransactionKind::Adjustment,
        2024,
        2,
        acct(C),
        Holder::Issuer,
    ))
    .expect("adjustment");
    assert_eq!(b.holdings().count(&acct(C), "SO2", 2024), 3);
    assert_eq!(
        TransactionKind::parse_import("transfer"),
        Ok(TransactionKind::Transfer)
    );
    assert!(TransactionKind::parse_import("deduction").is_err());
}

// ---- serial blocks ----

#[test]
fn a_serial_block_must_match_the_quantity() {
    let mut b = book();
    let e = b
        .apply(with_serials(allocate("s", "2024-01-01", 2024, 10, C), 1, 9))
        .unwrap_err();
    assert_eq!(
        e.to_string(),
        "fields serial_from and serial_to: block 1-9 holds 9 serials, but quantity is 10"
    );
    b.apply(with_serials(
        allocate("s", "2024-01-01", 2024, 10, C),
        1,
        10,
    ))
    .expect("ten serials");
}

#[test]
fn a_partial_transfer_splits_the_block() {
    let mut b = book();
    b.apply(with_serials(
        allocate("s", "2024-01-01", 2024, 100, C),
        1001,
        1100,
    ))
    .expect("allocation");
    b.apply(with_serials(
        transfer("t", "2024-02-01", 2024, 20, C, G),
        1041,
        1060,
    ))
    .expect("held serials");
    let blocks = |b: &Book, id: &str| -> Vec<(u64, u64)> {
        b.holdings()
            .blocks(&acct(id))
            .iter()
            .map(|h| (h.block.serial_from, h.block.serial_to))
            .collect()
    };
    assert_eq!(blocks(&b, C), [(1001, 1040), (1061, 1100)]);
    assert_eq!(blocks(&b, G), [(1041, 1060)]);
    // Sending back the middle rejoins the block.
    b.apply(with_serials(
        transfer("back", "2024-03-01", 2024, 20, G, C),
        1041,
        1060,
    ))
    .expect("back");
    assert_eq!(blocks(&b, C), [(1001, 1100)]);
    assert!(blocks(&b, G).is_empty());
}

#[test]
fn the_sender_must_hold_every_serial() {
    let mut b = book();
    b.apply(with_serials(
        allocate("s", "2024-01-01", 2024, 10, C),
        1,
        10,
    ))
    .expect("allocation");
    b.apply(allocate("plain", "2024-01-01", 2024, 5, C))
        .expect("unnumbered");
    // Enough allowances are held (15), but serials 11 and 12 are not.
    let e = b
        .apply(with_serials(
            transfer("t", "2024-02-01", 2024, 4, C, G),
            9,
            12,
        ))
        .unwrap_err();
    assert_eq!(
        e.to_string(),
        "account F1-COMPLIANCE, program SO2, vintage 2024: serial 11 of block 9-12 is not held"
    );
    // An outside party cannot send serials a plant account holds.
    let e = b
        .apply(with_serials(
            transfer("x", "2024-02-01", 2024, 2, X, G),
            5,
            6,
        ))
        .unwrap_err();
    assert_eq!(
        e.to_string(),
        "program SO2, vintage 2024: serial 5 of block 5-6 is already held by F1-COMPLIANCE"
    );
    // Serials of another vintage are other serials.
    b.apply(with_serials(
        transfer("x2", "2024-02-01", 2023, 2, X, G),
        5,
        6,
    ))
    .expect("other vintage");
}

#[test]
fn unnumbered_transfers_use_unnumbered_allowances_first_then_the_lowest_serials() {
    let mut b = book();
    b.apply_all(&[
        with_serials(allocate("s", "2024-01-01", 2024, 10, C), 101, 110),
        allocate("plain", "2024-01-01", 2024, 5, C),
        transfer("t1", "2024-02-01", 2024, 5, C, G),
    ])
    .expect("valid");
    assert_eq!(b.holdings().blocks(&acct(C)).len(), 1);
    assert!(b.holdings().blocks(&acct(G)).is_empty());
    b.apply(transfer("t2", "2024-02-02", 2024, 3, C, G))
        .expect("valid");
    let g: Vec<SerialBlock> = b
        .holdings()
        .blocks(&acct(G))
        .iter()
        .map(|h| h.block)
        .collect();
    assert_eq!(g, [SerialBlock::new(101, 103).expect("block")]);
}

// ---- settlement ----

fn settled_book() -> (Book, Reconciliation) {
    let mut b = book();
    b.apply_all(&[
        allocate("a23", "2023-01-02", 2023, 30, C),
        allocate("a24", "2024-01-02", 2024, 50, C),
        allocate("a25", "2025-01-02", 2025, 8, C),
    ])
    .expect("valid");
    let at = held_at_true_up(&b, &so2(), 2024).expect("date");
    let rec = reconcile(&so2(), 2024, Tons(dec!(90)), &at).expect("reconciles");
    (b, rec)
}

#[test]
fn a_settlement_deducts_by_vintage_and_offsets_from_the_next_vintage() {
    let (mut b, rec) = settled_book();
    assert_eq!((rec.shortfall, rec.offset_next_year), (10, 10));
    // 40 CFR 77.5(c): the offset comes from the year after the excess; 8 are held.
    let s = settlement(&rec, 8);
    let rows: Vec<(&str, i32, u64)> = s
        .transactions
        .iter()
        .map(|t| (t.kind.as_str(), t.vintage, t.quantity))
        .collect();
    assert_eq!(
        rows,
        [
            ("deduction", 2023, 30),
            ("deduction", 2024, 50),
            ("offset", 2025, 8)
        ]
    );
    assert!(s
        .transactions
        .iter()
        .all(|t| t.date == day("2025-03-01") && t.to == Holder::Retirement));
    assert_eq!(
        (s.deducted, s.offset_deducted, s.offset_outstanding),
        (80, 8, 2)
    );
    b.record_settlement(&s).expect("first settlement");
    assert!(b.is_settled("SO2", 2024));
    assert_eq!(b.holdings().by_vintage(&acct(C), "SO2"), held(&[]));
    assert_eq!(b.holdings().count(&Holder::Retirement, "SO2", 2023), 30);
    // A second settlement is refused and writes nothing.
    let before = b.transactions().to_vec();
    assert_eq!(
        b.record_settlement(&s).unwrap_err().to_string(),
        "program SO2, year 2024: already settled; a second settlement is refused"
    );
    assert_eq!(b.transactions(), before.as_slice());
    // The settled year reconciles as before.
    let again = reconcile(
        &so2(),
        2024,
        Tons(dec!(90)),
        &held_at_true_up(&b, &so2(), 2024).expect("date"),
    );
    assert_eq!(again, Ok(rec));
}

#[test]
fn a_settlement_that_would_overdraw_a_later_sale_is_refused() {
    let (mut b, rec) = settled_book();
    b.apply(transfer("sale", "2025-03-02", 2024, 50, C, X))
        .expect("the 2024 allowances sold the day after");
    let s = settlement(&rec, 8);
    let e = b.record_settlement(&s).unwrap_err();
    assert!(matches!(e, SettleError::Refused { .. }), "{e}");
    assert!(!b.is_settled("SO2", 2024));
}

// ---- corrections (DESIGN.md: a correction supersedes the held row) ----

#[test]
fn a_correction_replaces_the_held_version_in_its_place_and_moves_holdings_by_the_difference() {
    let mut b = book();
    b.apply_all(&[
        allocate("a", "2025-01-10", 2025, 100, C),
        transfer("t", "2025-01-10", 2025, 30, C, G),
        transfer("u", "2025-01-05", 2025, 5, X, C),
    ])
    .expect("valid");
    let before = b.holdings().count(&acct(C), "SO2", 2025);
    assert_eq!(before, 100 - 30 + 5);
    // Without superseding, other content is a conflict; identical content is a no-op.
    let fixed = allocate("a", "2025-01-10", 2025, 120, C);
    assert!(matches!(
        b.apply(fixed.clone()),
        Err(TxError::Conflict {
            field: "quantity",
            ..
        })
    ));
    assert_eq!(
        b.supersede(allocate("a", "2025-01-10", 2025, 100, C)),
        Ok(Applied::AlreadyHeld)
    );
    assert_eq!(b.supersede(fixed.clone()), Ok(Applied::Corrected));
    // Double entry: the account moves by exactly the 20 corrected, the issuer by -20.
    assert_eq!(b.holdings().count(&acct(C), "SO2", 2025), before + 20);
    assert_eq!(b.holdings().count(&Holder::Issuer, "SO2", 2025), -120);
    assert_eq!(b.transaction("a"), Some(&fixed));
    // The order (date, order of recording) is kept: "a" still precedes "t" on 2025-01-10.
    let ids: Vec<&str> = b.transactions().iter().map(|t| t.id.as_str()).collect();
    assert_eq!(ids, ["u", "a", "t"]);
    assert_eq!(b.supersede(fixed), Ok(Applied::AlreadyHeld));
}

#[test]
fn a_correction_that_would_overdraw_a_later_transaction_is_refused_and_changes_nothing() {
    let mut b = book();
    b.apply_all(&[
        allocate("a", "2025-01-10", 2025, 100, C),
        transfer("t", "2025-02-01", 2025, 80, C, G),
    ])
    .expect("valid");
    let held = b.holdings().clone();
    // 70 allocated cannot cover the 80 moved on 2025-02-01: no negative balance.
    let e = b
        .apply_batch(
            &[allocate("a", "2025-01-10", 2025, 70, C)],
            OnConflict::Supersede,
        )
        .unwrap_err();
    assert_eq!(e.len(), 1);
    assert_eq!(e[0].index, 0);
    match &e[0].error {
        TxError::BreaksLater {
            later_id, source, ..
        } => {
            assert_eq!(later_id, "t");
            assert!(
                matches!(
                    **source,
                    TxError::Overdraft {
                        held: 70,
                        asked: 80,
                        ..
                    }
                ),
                "{source}"
            );
        }
        other => panic!("expected BreaksLater, got {other}"),
    }
    assert_eq!(b.holdings(), &held);
    // The correction itself may overdraw too: 100 held, 120 asked.
    let e = b
        .supersede(transfer("t", "2025-02-01", 2025, 120, C, G))
        .unwrap_err();
    assert!(
        matches!(
            e,
            TxError::Overdraft {
                held: 100,
                asked: 120,
                ..
            }
        ),
        "{e}"
    );
    assert_eq!(b.holdings(), &held);
}

#[test]
fn a_settlement_row_is_never_superseded() {
    let (mut b, rec) = settled_book();
    let s = settlement(&rec, 8);
    b.record_settlement(&s).expect("first settlement");
    let mut changed = s.transactions[0].clone();
    changed.quantity -= 1;
    let e = b.supersede(changed).unwrap_err();
    assert!(matches!(e, TxError::SettlementRow { .. }), "{e}");
}

// ---- position ----

fn position_of(
    p: &Program,
    as_of: &str,
    to_date: Decimal,
    previous: Option<(Decimal, Decimal)>,
) -> Position {
    let previous = previous.map(|(same_days, period)| PreviousYear {
        same_days_tons: Tons(same_days),
        period_tons: Tons(period),
    });
    position(
        p,
        day(as_of),
        Tons(to_date),
        previous,
        &held(&[(2024, 100), (2025, 300), (2026, 999)]),
    )
    .expect("position")
}

#[test]
fn the_run_rate_projects_where_no_history_exists() {
    // 2025-03-31 is day 90 of 365: 90 tons project to 365.
    let pos = position_of(&so2(), "2025-03-31", dec!(90), None);
    assert_eq!(pos.projection_method, ProjectionMethod::RunRate);
    assert_eq!((pos.days_elapsed, pos.days_in_period), (90, 365));
    assert_eq!(pos.projected_period_tons, Tons(dec!(365)));
    // Vintages 2024 and 2025 are eligible for 2025 (40 CFR 73.35(a)); 2026 is not.
    assert_eq!(pos.eligible_held, 400);
    assert_eq!(
        (pos.expected_surplus, pos.expected_shortfall, pos.to_buy),
        (35, 0, 0)
    );
    // A leap year has 366 days: day 91 is 2024-03-31.
    let pos = position_of(&so2(), "2024-03-31", dec!(91), None);
    assert_eq!((pos.days_elapsed, pos.days_in_period), (91, 366));
    assert_eq!(pos.projected_period_tons, Tons(dec!(366)));
    assert_eq!((pos.eligible_held, pos.to_buy), (100, 266));
}

#[test]
fn the_previous_year_scaled_by_this_years_pace_projects_where_history_exists() {
    // Last year 100 tons over the same days and 400 in all; this year 110 so far: 440.
    let pos = position_of(
        &so2(),
        "2025-03-31",
        dec!(110),
        Some((dec!(100), dec!(400))),
    );
    assert_eq!(pos.projection_method, ProjectionMethod::PreviousYearScaled);
    assert_eq!(pos.projected_period_tons, Tons(dec!(440)));
    assert_eq!(
        (pos.allowances_required, pos.expected_shortfall, pos.to_buy),
        (440, 40, 40)
    );
    // No emissions last year over the same days give no scale: the run rate is used.
    let pos = position_of(&so2(), "2025-03-31", dec!(90), Some((dec!(0), dec!(400))));
    assert_eq!(pos.projection_method, ProjectionMethod::RunRate);
    let json = serde_json::to_value(&pos).expect("serializes");
    assert_eq!(json["projection_method"], "run-rate");
}

#[test]
fn the_ozone_season_projection_before_during_and_after_the_season() {
    let p = nox_ozone();
    // April 30 is before the season (May 1 to September 30, 40 CFR 72.2).
    let before = position_of(&p, "2025-04-30", dec!(0), Some((dec!(0), dec!(120))));
    assert_eq!(
        (before.projection_method, before.days_elapsed),
        (ProjectionMethod::PreviousYear, 0)
    );
    assert_eq!(before.projected_period_tons, Tons(dec!(120)));
    let nothing = position_of(&p, "2025-04-30", dec!(0), None);
    assert_eq!(nothing.projection_method, ProjectionMethod::None);
    // May 1 is day 1 of 153.
    let first = position_of(&p, "2025-05-01", dec!(2), None);
    assert_eq!((first.days_elapsed, first.days_in_period), (1, 153));
    assert_eq!(first.projected_period_tons, Tons(dec!(306)));
    // September 29 still projects; September 30 is the whole season.
    let last_but_one = position_of(&p, "2025-09-29", dec!(152), None);
    assert_eq!(last_but_one.projection_method, ProjectionMethod::RunRate);
    assert_eq!(last_but_one.projected_period_tons, Tons(dec!(153)));
    let done = position_of(&p, "2025-09-30", dec!(152.4), None);
    assert_eq!(done.projection_method, ProjectionMethod::PeriodComplete);
    // 152.4 tons are 152 whole tons (97.406(b)(2)).
    assert_eq!(done.allowances_required, 152);
}

#[test]
fn the_same_day_of_the_previous_year_falls_back_from_february_29() {
    assert_eq!(
        same_day_previous_year(day("2024-02-29")),
        Some(day("2023-02-28"))
    );
    assert_eq!(
        same_day_previous_year(day("2025-03-01")),
        Some(day("2024-03-01"))
    );
}

// ---- cost ----

#[test]
fn weighted_average_cost_of_purchases_deductions_and_the_bank() {
    let mut b = book();
    let priced = |mut t: Transaction, price: Decimal| {
        t.price_usd_per_allowance = Some(price);
        t
    };
    b.apply_all(&[
        allocate("free", "2024-01-02", 2024, 100, C),
        priced(transfer("buy1", "2024-02-01", 2024, 60, X, G), dec!(10)),
        priced(transfer("buy2", "2024-03-01", 2024, 40, X, G), dec!(15)),
        transfer("move", "2024-04-01", 2024, 100, G, C),
        priced(transfer("sale", "2024-05-01", 2024, 50, C, X), dec!(30)),
    ])
    .expect("valid");
    let cost = cost_summary(&b, "SO2", day("2025-03-01"), 120, 30).expect("cost");
    // Bought: 60 × 10 + 40 × 15 = 1,200 for 100, 12 each.
    assert_eq!(
        (cost.acquired_priced_count, cost.acquired_cost_usd),
        (100, dec!(1200))
    );
    assert_eq!(cost.acquired_average_usd_per_allowance, Some(dec!(12)));
    // Pool: 200 allowances worth 1,200, 6 each; the sale leaves at 6, the move changes nothing.
    assert_eq!(
        (cost.held_count, cost.held_average_usd_per_allowance),
        (150, Some(dec!(6)))
    );
    assert_eq!(cost.deducted_cost_usd, dec!(720));
    assert_eq!(cost.bank_book_value_usd, dec!(180));
    // Before the purchases only free allowances are held: no average bought, zero cost.
    let early = cost_summary(&b, "SO2", day("2024-01-31"), 10, 90).expect("cost");
    assert_eq!(early.acquired_average_usd_per_allowance, None);
    assert_eq!(
        (early.deducted_cost_usd, early.bank_book_value_usd),
        (dec!(0), dec!(0))
    );
}

// ---- property tests over random transaction sequences ----

mod properties {
    use super::*;
    use proptest::prelude::*;

    const HOLDERS: [&str; 4] = ["", C, G, X];
    const PROGRAMS: [&str; 2] = ["SO2", "NOX-OS"];

    #[derive(Clone, Debug)]
    struct Op {
        kind: u8,
        from: usize,
        to: usize,
        program: usize,
        vintage: i32,
        quantity: u64,
        day: u32,
        serial_pick: Option<usize>,
    }

    fn op() -> impl Strategy<Value = Op> {
        (
            0u8..3,
            0usize..4,
            0usize..4,
            0usize..2,
            2023i32..2026,
            1u64..40,
            1u32..20,
            proptest::option::of(0usize..8),
        )
            .prop_map(
                |(kind, from, to, program, vintage, quantity, day, serial_pick)| Op {
                    kind,
                    from,
                    to,
                    program,
                    vintage,
                    quantity,
                    day,
                    serial_pick,
                },
            )
    }

    fn holder(i: usize) -> Holder {
        if HOLDERS[i].is_empty() {
            Holder::Issuer
        } else {
            Holder::account(HOLDERS[i])
        }
    }

    /// Turn an op into a transaction against the book as it stands, so
    /// serial blocks name serials the sender may actually hold. New serials
    /// from the issuer are numbered by the op's index, so they never collide.
    fn transaction(index: usize, op: &Op, b: &Book) -> Transaction {
        let kind = match op.kind {
            0 => TransactionKind::Allocation,
            1 => TransactionKind::Transfer,
            _ => TransactionKind::Adjustment,
        };
        let from = if kind == TransactionKind::Allocation {
            Holder::Issuer
        } else {
            holder(op.from)
        };
        let program = PROGRAMS[op.program].to_string();
        let serials = op.serial_pick.and_then(|pick| {
            if from == Holder::Issuer {
                let base = 1_000_000 * (index as u64 + 1);
                return SerialBlock::new(base, base + op.quantity - 1);
            }
            let held: Vec<SerialBlock> = b
                .holdings()
                .blocks(&from)
                .into_iter()
                .filter(|h| h.program == program && h.vintage == op.vintage)
                .map(|h| h.block)
                .collect();
            let block = held.get(pick % held.len().max(1))?;
            let len = block.serial_count()?.min(op.quantity);
            SerialBlock::new(block.serial_from, block.serial_from + len - 1)
        });
        let quantity = serials
            .and_then(|s| s.serial_count())
            .unwrap_or(op.quantity);
        Transaction {
            id: format!("p{index}"),
            date: NaiveDate::from_ymd_opt(2024, 1, op.day).expect("day of January"),
            kind,
            program,
            vintage: op.vintage,
            quantity,
            from,
            to: holder(op.to),
            price_usd_per_allowance: None,
            note: String::new(),
            serials,
        }
    }

    fn run(ops: &[Op]) -> (Book, Vec<Transaction>) {
        let mut b = book();
        let mut tried = Vec::new();
        for (i, op) in ops.iter().enumerate() {
            let t = transaction(i, op, &b);
            let _ = b.apply(t.clone());
            tried.push(t);
        }
        (b, tried)
    }

    proptest! {
        #[test]
        fn allowances_are_conserved_per_program_and_vintage(ops in proptest::collection::vec(op(), 1..40)) {
            let (b, _) = run(&ops);
            for d in 1..20 {
                let h = b.holdings_at_end_of(NaiveDate::from_ymd_opt(2024, 1, d).expect("day"));
                for (program, vintage) in h.programs_and_vintages() {
                    prop_assert_eq!(h.net_total(&program, vintage), 0);
                }
            }
        }

        #[test]
        fn no_plant_balance_ever_goes_below_zero(ops in proptest::collection::vec(op(), 1..40)) {
            let (b, _) = run(&ops);
            for d in 1..20 {
                let h = b.holdings_at_end_of(NaiveDate::from_ymd_opt(2024, 1, d).expect("day"));
                for row in h.balances(None, None) {
                    if row.account == acct(C) || row.account == acct(G) {
                        prop_assert!(row.count >= 0, "{:?}", row);
                    }
                }
                // Serials held never exceed the count, and no serial is held twice.
                let mut all: Vec<(String, i32, SerialBlock)> = Vec::new();
                for who in [acct(C), acct(G)] {
                    for program in PROGRAMS {
                        for vintage in 2023..2026 {
                            let serials: u64 = h
                                .blocks(&who)
                                .iter()
                                .filter(|x| x.program == program && x.vintage == vintage)
                                .map(|x| x.block.serial_count().expect("small"))
                                .sum();
                            prop_assert!(serials as i64 <= h.count(&who, program, vintage));
                        }
                    }
                }
                for who in [Holder::Issuer, acct(C), acct(G), acct(X)] {
                    all.extend(h.blocks(&who).into_iter().map(|x| (x.program, x.vintage, x.block)));
                }
                all.sort();
                for pair in all.windows(2) {
                    if pair[0].0 == pair[1].0 && pair[0].1 == pair[1].1 {
                        prop_assert!(pair[0].2.serial_to < pair[1].2.serial_from, "{:?}", pair);
                    }
                }
            }
        }

        #[test]
        fn replaying_a_sequence_twice_changes_nothing(ops in proptest::collection::vec(op(), 1..40)) {
            let (mut b, tried) = run(&ops);
            let transactions = b.transactions().to_vec();
            let holdings = b.holdings().clone();
            let accepted: Vec<Transaction> = tried.iter().filter(|t| transactions.contains(t)).cloned().collect();
            let again = b.apply_all(&accepted).expect("every accepted row is held");
            prop_assert!(again.iter().all(|a| *a == Applied::AlreadyHeld));
            prop_assert_eq!(b.transactions(), transactions.as_slice());
            prop_assert_eq!(b.holdings(), &holdings);
            // A fresh book fed the accepted rows in the same order ends the same.
            let mut fresh = book();
            fresh.apply_all(&accepted).expect("the accepted rows are accepted again");
            prop_assert_eq!(fresh.holdings(), &holdings);
        }
    }
}
