//! The input rows the ledger holds, in domain types, with where they came from.

use crate::emissions::fuel::{Fuel, FuelAmount};
use crate::emissions::fuel_based::Analysis;
use chrono::NaiveDate;
use rust_decimal::Decimal;
use rust_decimal_macros::dec;

/// Where a stored row came from: its import batch, file, line and the file's digest.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Source {
    pub batch_id: i64,
    pub file: String,
    pub line: usize,
    pub sha256: String,
}

impl Source {
    /// `file:line`, as error messages and explanations print it.
    pub fn place(&self) -> String {
        format!("{}:{}", self.file, self.line)
    }
}

/// A stored row: its id, its source, and the row it supersedes, if any.
#[derive(Clone, Debug, PartialEq)]
pub struct Stored<T> {
    pub id: i64,
    pub source: Source,
    pub corrects_id: Option<i64>,
    pub reason: Option<String>,
    pub value: T,
}

/// A fuel sample's analysis (key: `sample`).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Sample {
    pub sample: String,
    pub fuel: Fuel,
    pub sampled_on: NaiveDate,
    pub analysis: Analysis,
}

/// A quantity of fuel a unit burned over a period within one month
/// (key: unit, fuel and period).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct FuelUse {
    pub unit: String,
    pub start: NaiveDate,
    pub end: NaiveDate,
    pub fuel: Fuel,
    pub amount: FuelAmount,
    pub sample: String,
}

impl FuelUse {
    pub fn key(&self) -> (String, Fuel, NaiveDate, NaiveDate) {
        (self.unit.clone(), self.fuel, self.start, self.end)
    }
}

/// Scale of stored hourly readings: millionths of the reading's unit.
pub const READING_SCALE: u32 = 6;
/// Scale of operating time: hundredths of an hour (40 CFR 75 App. F Eq. F-3:
/// operating time in increments of 0.01 hour).
pub const OP_TIME_SCALE: u32 = 2;

/// The readings of an hourly file, each a column with its moisture basis.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Reading {
    LoadMw,
    So2PpmWet,
    So2PpmDry,
    NoxPpmWet,
    NoxPpmDry,
    O2PctWet,
    O2PctDry,
    Co2PctWet,
    Co2PctDry,
    FlowScfhWet,
    H2oPct,
}

impl Reading {
    pub const COUNT: usize = 11;
    pub const ALL: [Reading; Reading::COUNT] = [
        Reading::LoadMw,
        Reading::So2PpmWet,
        Reading::So2PpmDry,
        Reading::NoxPpmWet,
        Reading::NoxPpmDry,
        Reading::O2PctWet,
        Reading::O2PctDry,
        Reading::Co2PctWet,
        Reading::Co2PctDry,
        Reading::FlowScfhWet,
        Reading::H2oPct,
    ];

    /// The column name, in files and in the ledger.
    pub fn column(self) -> &'static str {
        match self {
            Reading::LoadMw => "load_mw",
            Reading::So2PpmWet => "so2_ppm_wet",
            Reading::So2PpmDry => "so2_ppm_dry",
            Reading::NoxPpmWet => "nox_ppm_wet",
            Reading::NoxPpmDry => "nox_ppm_dry",
            Reading::O2PctWet => "o2_pct_wet",
            Reading::O2PctDry => "o2_pct_dry",
            Reading::Co2PctWet => "co2_pct_wet",
            Reading::Co2PctDry => "co2_pct_dry",
            Reading::FlowScfhWet => "flow_scfh_wet",
            Reading::H2oPct => "h2o_pct",
        }
    }

    pub fn index(self) -> usize {
        self as usize
    }

    /// The largest value accepted, exclusive or inclusive, with its reason.
    pub fn upper_bound(self) -> Option<(Decimal, bool, &'static str)> {
        match self {
            // O2 at or above ambient 20.9 % leaves no combustion gas (App. F Eq. F-5 divides by 20.9 − O2).
            Reading::O2PctWet | Reading::O2PctDry => {
                Some((dec!(20.9), true, "O2 must be below 20.9 %"))
            }
            // 100 % moisture leaves no dry gas (App. F Eq. F-2 multiplies by 100 − H2O).
            Reading::H2oPct => Some((dec!(100), true, "moisture must be below 100 %")),
            Reading::Co2PctWet | Reading::Co2PctDry => {
                Some((dec!(100), false, "CO2 cannot exceed 100 %"))
            }
            _ => None,
        }
    }
}

/// One unit-hour of monitor data, as stored: fixed-point integers
/// (operating time ×10^2, readings ×10^6); `None` is an empty cell.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct HourRow {
    /// Hours since 1970-01-01T00:00, local standard time.
    pub hour: i64,
    pub op_time_centi: i64,
    pub readings: [Option<i64>; Reading::COUNT],
}

/// `Decimal::new(v, scale)` for a stored fixed-point value, from its parts
/// (the same number and scale; `new` checks what storage already has).
fn fixed(v: i64, scale: u32) -> Decimal {
    crate::decimal::from_magnitude(u128::from(v.unsigned_abs()), v < 0, scale)
}

impl HourRow {
    pub fn op_time_hr(&self) -> Decimal {
        fixed(self.op_time_centi, OP_TIME_SCALE)
    }

    pub fn reading(&self, r: Reading) -> Option<Decimal> {
        self.readings[r.index()].map(|v| fixed(v, READING_SCALE))
    }

    /// The first field that differs from `held`, for refusal messages.
    pub fn first_difference(&self, held: &HourRow) -> Option<(&'static str, String, String)> {
        let show = |v: Option<Decimal>| {
            v.map(|d| d.normalize().to_string())
                .unwrap_or_else(|| "empty".into())
        };
        if self.op_time_centi != held.op_time_centi {
            return Some((
                "op_time",
                held.op_time_hr().to_string(),
                self.op_time_hr().to_string(),
            ));
        }
        Reading::ALL
            .into_iter()
            .find(|r| self.readings[r.index()] != held.readings[r.index()])
            .map(|r| (r.column(), show(held.reading(r)), show(self.reading(r))))
    }
}

/// Local standard time of an hour index, for messages and reports.
pub fn hour_label(hour: i64) -> String {
    let epoch = NaiveDate::from_ymd_opt(1970, 1, 1)
        .expect("valid date")
        .and_hms_opt(0, 0, 0)
        .expect("valid time");
    (epoch + chrono::Duration::hours(hour))
        .format("%Y-%m-%dT%H:00")
        .to_string()
}

/// Days from 1970-01-01 to `year-month-day` in the proleptic Gregorian
/// calendar, by the usual era arithmetic (400-year eras of 146,097 days,
/// years counted from March so the leap day falls last). The caller checks
/// that the date exists (`days_in_month`); tests compare with chrono.
pub fn days_from_civil(year: i32, month: u32, day: u32) -> i64 {
    let y = i64::from(year) - i64::from(month <= 2);
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let m = i64::from(month);
    let doy = (153 * (if m > 2 { m - 3 } else { m + 9 }) + 2) / 5 + i64::from(day) - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// Days in `month` of `year` (Gregorian leap years); 0 for a month out of range.
pub fn days_in_month(year: i32, month: u32) -> u32 {
    let leap = (year % 4 == 0 && year % 100 != 0) || year % 400 == 0;
    match month {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        2 if leap => 29,
        2 => 28,
        _ => 0,
    }
}

/// The hour index of a local standard time `YYYY-MM-DDTHH:00`.
pub fn hour_index(t: chrono::NaiveDateTime) -> i64 {
    let epoch = NaiveDate::from_ymd_opt(1970, 1, 1)
        .expect("valid date")
        .and_hms_opt(0, 0, 0)
        .expect("valid time");
    (t - epoch).num_hours()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// `fixed` is `Decimal::new` bit for bit, at the stored scales.
    #[test]
    fn fixed_is_decimal_new() {
        for v in [
            0,
            1,
            -1,
            99,
            100,
            i64::MAX,
            i64::MIN + 1,
            4_294_967_296,
            -7_000_000_000_123,
        ] {
            for scale in [OP_TIME_SCALE, READING_SCALE] {
                assert_eq!(
                    fixed(v, scale).serialize(),
                    rust_decimal::Decimal::new(v, scale).serialize()
                );
            }
        }
    }

    proptest! {
        // The calendar arithmetic agrees with chrono's on every date it knows.
        #[test]
        fn days_from_civil_agrees_with_chrono(year in 0i32..=9999, month in 1u32..=12, day in 1u32..=31) {
            let chrono_date = NaiveDate::from_ymd_opt(year, month, day);
            prop_assert_eq!(chrono_date.is_some(), day <= days_in_month(year, month));
            if let Some(date) = chrono_date {
                let epoch = NaiveDate::from_ymd_opt(1970, 1, 1).unwrap();
                prop_assert_eq!(days_from_civil(year, month, day), (date - epoch).num_days());
            }
        }
    }
}
