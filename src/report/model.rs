//! The annual report model: every figure of the report, at full precision.

use crate::compute::hourly::HourlyResult;
use crate::compute::UnitYear;
use crate::emissions::method::Quantity;
use crate::emissions::periods::Amounts;
use crate::site::Site;
use crate::units::{rate_lb_per_mmbtu, Lb, Mmbtu};
use rust_decimal::{Decimal, RoundingStrategy};
use serde::Serialize;

/// JSON layout version; the JSON only ever gains fields.
pub const FORMAT_VERSION: u32 = 1;

/// The caution every report ends with.
pub const CAUTION: &str =
    "Results support, and never replace, the judgement of the responsible official \
and the monitoring and reporting rules of the plant's own permit and jurisdiction (local rules).";

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct AnnualReport {
    pub format_version: u32,
    pub facility: String,
    pub facility_name: String,
    pub year: i32,
    pub site_version: i64,
    pub rounding: &'static str,
    pub units: Vec<UnitReport>,
    pub totals: Totals,
    /// Each program's reconciliation (filled once allowances are tracked).
    pub programs: Vec<serde_json::Value>,
    /// Who certified the year, and its amendments; absent when not certified.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub certification: Option<CertificationView>,
    /// The audit journal's head when the report was made, so that a printed
    /// copy names the ledger state it came from; absent where not read.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub journal: Option<JournalView>,
    /// The journal entry an as-of report stops at; absent for the ledger as it is.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub as_of: Option<AsOfView>,
    pub caution: &'static str,
}

/// `--as-of`: the report shows the ledger as it stood right after this
/// journal entry, and leaves every later entry out.
#[derive(Debug, Clone, Serialize, PartialEq, Eq)]
pub struct AsOfView {
    pub seq: i64,
    pub at: String,
    pub hash: String,
}

impl AsOfView {
    /// The sentence every format carries, in words.
    pub fn sentence(&self) -> String {
        format!(
            "As of journal entry {} (recorded {}, hash {}): the ledger as it stood right after that entry; later entries are left out.",
            self.seq, self.at, self.hash
        )
    }
}

/// The audit journal's head: entries so far and the last entry's hash.
#[derive(Debug, Clone, Serialize, PartialEq, Eq)]
pub struct JournalView {
    pub entries: i64,
    pub head_sha256: String,
}

/// A year's certification as a report shows it.
#[derive(Debug, Clone, Serialize, PartialEq, Eq)]
pub struct CertificationView {
    pub by: String,
    pub at: String,
    pub statement: Option<String>,
    pub report_sha256: String,
    pub amended: bool,
    pub amendments: Vec<AmendmentView>,
}

#[derive(Debug, Clone, Serialize, PartialEq, Eq)]
pub struct AmendmentView {
    pub at: String,
    pub by: String,
    pub reason: String,
}

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct UnitReport {
    pub unit: String,
    pub kind: &'static str,
    pub fuel: &'static str,
    /// `quantity: method` for each method of the unit, in site-file order.
    pub methods: Vec<String>,
    /// Sum of operating time; fuel records carry none, so `null` for fuel-based units.
    pub operating_hours: Option<Decimal>,
    pub heat_input_mmbtu: Option<Decimal>,
    pub so2_tons: Option<Decimal>,
    pub nox_tons: Option<Decimal>,
    pub co2_tons: Option<Decimal>,
    pub nox_rate_lb_per_mmbtu: Option<Decimal>,
    pub substituted_hours: SubstitutedHours,
    /// Percent monitor data availability (40 CFR 75.32) at the end of the
    /// data, per parameter; `null` for fuel-based units.
    pub monitor_data_availability_pct: Option<Availability>,
    pub fuel_records: usize,
    pub quarters: Vec<Period>,
    pub ozone_season: Period,
    pub months: Vec<Period>,
    /// A CEMS unit's day-by-day profile, for the report's chart; absent
    /// for a unit without hourly data.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub daily_profile: Option<DailyProfile>,
}

/// Day by day from January 1: the SO2 emission rate and the hours with a
/// substituted value. A series to plot, not figures of record.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct DailyProfile {
    pub first_day: String,
    /// Σ SO2 lb / Σ heat input of the day's hours, to 0.0001 lb/MMBtu;
    /// `null` on a day without heat input or without hourly SO2.
    pub so2_lb_per_mmbtu: Vec<Option<Decimal>>,
    /// Hours of the day in which SO2, flow or NOx was substituted.
    pub substituted_hours: Vec<u32>,
}

#[derive(Debug, Clone, Copy, Serialize, PartialEq, Eq, Default)]
pub struct SubstitutedHours {
    pub so2: u32,
    pub flow: u32,
    pub nox: u32,
}

#[derive(Debug, Clone, Copy, Serialize, PartialEq, Eq, Default)]
pub struct Availability {
    pub so2: Option<Decimal>,
    pub flow: Option<Decimal>,
    pub nox: Option<Decimal>,
}

/// The figures of one period: a quarter, a month or the ozone season.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Period {
    #[serde(skip_serializing_if = "Option::is_none")]
    pub quarter: Option<u32>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub month: Option<u32>,
    pub heat_input_mmbtu: Option<Decimal>,
    pub so2_tons: Option<Decimal>,
    pub nox_tons: Option<Decimal>,
    pub co2_tons: Option<Decimal>,
}

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Totals {
    pub heat_input_mmbtu: Option<Decimal>,
    pub so2_tons: Option<Decimal>,
    pub nox_tons: Option<Decimal>,
    pub co2_tons: Option<Decimal>,
    pub nox_rate_lb_per_mmbtu: Option<Decimal>,
    pub quarters: Vec<Period>,
    pub ozone_season: Period,
}

/// A year's figures as a period without quarter or month.
fn year_period(
    heat_input_mmbtu: Option<Decimal>,
    so2_tons: Option<Decimal>,
    nox_tons: Option<Decimal>,
    co2_tons: Option<Decimal>,
) -> Period {
    Period {
        quarter: None,
        month: None,
        heat_input_mmbtu,
        so2_tons,
        nox_tons,
        co2_tons,
    }
}

impl UnitReport {
    /// The unit's year as a period, for renderers that print periods.
    pub fn year_period(&self) -> Period {
        year_period(
            self.heat_input_mmbtu,
            self.so2_tons,
            self.nox_tons,
            self.co2_tons,
        )
    }
}

impl Totals {
    /// The year's totals as a period, for renderers that print periods.
    pub fn year_period(&self) -> Period {
        year_period(
            self.heat_input_mmbtu,
            self.so2_tons,
            self.nox_tons,
            self.co2_tons,
        )
    }
}

fn tons(lb: Option<Lb>) -> Option<Decimal> {
    lb.map(|lb| lb.to_tons().0.normalize())
}

fn period(a: Amounts, quarter: Option<u32>, month: Option<u32>) -> Period {
    Period {
        quarter,
        month,
        heat_input_mmbtu: a.heat_input().map(|h| h.0.normalize()),
        so2_tons: tons(a.so2()),
        nox_tons: tons(a.nox()),
        co2_tons: tons(a.co2()),
    }
}

/// Heat-input-weighted NOx rate: Σ NOx lb / Σ heat input.
fn nox_rate(a: Amounts) -> Option<Decimal> {
    rate_lb_per_mmbtu(a.nox()?, a.heat_input()?).map(|r| r.0.normalize())
}

/// Decimal places of the daily profile's rate: enough to plot, short enough
/// to keep the JSON compact.
const DAILY_RATE_DP: u32 = 4;

fn daily_profile(year: i32, h: &HourlyResult) -> DailyProfile {
    DailyProfile {
        first_day: format!("{year:04}-01-01"),
        so2_lb_per_mmbtu: h
            .daily
            .iter()
            .map(|d| {
                let rate = rate_lb_per_mmbtu(Lb(d.so2_lb?), Mmbtu(d.heat_input_mmbtu))?;
                // Rounded for the chart only (half away from zero); the
                // report's figures keep full precision.
                Some(
                    rate.round(DAILY_RATE_DP, RoundingStrategy::MidpointAwayFromZero)
                        .0
                        .normalize(),
                )
            })
            .collect(),
        substituted_hours: h.daily.iter().map(|d| d.substituted_hours).collect(),
    }
}

/// The totals of a year of amounts: the year, its quarters and ozone season.
pub fn totals(year: &crate::emissions::periods::Year) -> Totals {
    let a = year.annual();
    Totals {
        heat_input_mmbtu: a.get(Quantity::HeatInput).map(|h| h.normalize()),
        so2_tons: tons(a.so2()),
        nox_tons: tons(a.nox()),
        co2_tons: tons(a.co2()),
        nox_rate_lb_per_mmbtu: nox_rate(a),
        quarters: (1..=4)
            .map(|q| period(year.quarter(q), Some(q), None))
            .collect(),
        ozone_season: period(year.ozone_season(), None, None),
    }
}

/// Every facility of the ledger for one year, and the fleet's totals.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct FleetReport {
    pub format_version: u32,
    pub year: i32,
    pub facilities: Vec<AnnualReport>,
    /// Sums over every unit of every facility.
    pub fleet: Totals,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub as_of: Option<AsOfView>,
    pub caution: &'static str,
}

/// Build the annual report of one facility from its units' years.
pub fn annual(site: &Site, site_version: i64, year: i32, units: &[UnitYear]) -> AnnualReport {
    let mut facility = crate::emissions::periods::Year::default();
    let reports = units
        .iter()
        .map(|u| {
            facility = facility + u.year;
            let a = u.year.annual();
            UnitReport {
                unit: u.unit.id.clone(),
                kind: u.unit.kind.as_str(),
                fuel: u.unit.fuel.as_str(),
                methods: u
                    .unit
                    .methods
                    .iter()
                    .map(|m| {
                        let mut s = format!("{}: {}", m.quantity, m.method.name());
                        if let Some(f) = m.fuel {
                            s.push_str(&format!(" ({f})"));
                        }
                        s
                    })
                    .collect(),
                operating_hours: u.hourly.as_ref().map(|h| h.operating_hours.normalize()),
                heat_input_mmbtu: a.heat_input().map(|h| h.0.normalize()),
                so2_tons: tons(a.so2()),
                nox_tons: tons(a.nox()),
                co2_tons: tons(a.co2()),
                nox_rate_lb_per_mmbtu: nox_rate(a),
                substituted_hours: u
                    .hourly
                    .as_ref()
                    .map(|h| SubstitutedHours {
                        so2: h.substituted_hours[0],
                        flow: h.substituted_hours[1],
                        nox: h.substituted_hours[2],
                    })
                    .unwrap_or_default(),
                monitor_data_availability_pct: u.hourly.as_ref().map(|h| Availability {
                    so2: h.availability_pct[0].map(|d| d.round_dp(3).normalize()),
                    flow: h.availability_pct[1].map(|d| d.round_dp(3).normalize()),
                    nox: h.availability_pct[2].map(|d| d.round_dp(3).normalize()),
                }),
                fuel_records: u.record_ids.len(),
                quarters: (1..=4)
                    .map(|q| period(u.year.quarter(q), Some(q), None))
                    .collect(),
                ozone_season: period(u.year.ozone_season(), None, None),
                months: (1..=12)
                    .map(|m| period(u.year.month(m), None, Some(m)))
                    .collect(),
                daily_profile: u.hourly.as_ref().map(|h| daily_profile(year, h)),
            }
        })
        .collect();
    AnnualReport {
        format_version: FORMAT_VERSION,
        facility: site.facility.id.clone(),
        facility_name: site.facility.name.clone(),
        year,
        site_version,
        rounding: site.facility.rounding.as_str(),
        units: reports,
        totals: totals(&facility),
        programs: Vec::new(),
        certification: None,
        journal: None,
        as_of: None,
        caution: CAUTION,
    }
}

/// One quarter and the year to its end: `flue report quarter`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct QuarterReport {
    pub format_version: u32,
    pub facility: String,
    pub facility_name: String,
    pub year: i32,
    pub quarter: u32,
    pub units: Vec<QuarterUnit>,
    pub totals: QuarterUnit,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub as_of: Option<AsOfView>,
    pub caution: &'static str,
}

#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct QuarterUnit {
    pub unit: String,
    pub quarter: Period,
    /// Cumulative from January 1 to the quarter's end (40 CFR 75 App. F Eq. F-4, F-13, F-27).
    pub year_to_date: Period,
}

fn sum_opt(a: Option<Decimal>, b: Option<Decimal>) -> Option<Decimal> {
    match (a, b) {
        (None, None) => None,
        (a, b) => Some((a.unwrap_or_default() + b.unwrap_or_default()).normalize()),
    }
}

fn quarter_unit(unit: &str, quarters: &[Period], q: u32) -> QuarterUnit {
    let mut ytd = Period {
        quarter: None,
        month: None,
        heat_input_mmbtu: None,
        so2_tons: None,
        nox_tons: None,
        co2_tons: None,
    };
    for p in quarters
        .iter()
        .filter(|p| p.quarter.is_some_and(|n| n <= q))
    {
        ytd.heat_input_mmbtu = sum_opt(ytd.heat_input_mmbtu, p.heat_input_mmbtu);
        ytd.so2_tons = sum_opt(ytd.so2_tons, p.so2_tons);
        ytd.nox_tons = sum_opt(ytd.nox_tons, p.nox_tons);
        ytd.co2_tons = sum_opt(ytd.co2_tons, p.co2_tons);
    }
    QuarterUnit {
        unit: unit.to_string(),
        quarter: quarters
            .iter()
            .find(|p| p.quarter == Some(q))
            .cloned()
            .expect("four quarters"),
        year_to_date: ytd,
    }
}

/// The quarter `q` (1 to 4) of an annual report, with year-to-date sums.
pub fn quarter(r: &AnnualReport, q: u32) -> QuarterReport {
    assert!((1..=4).contains(&q), "a quarter is 1 to 4");
    QuarterReport {
        format_version: FORMAT_VERSION,
        facility: r.facility.clone(),
        facility_name: r.facility_name.clone(),
        year: r.year,
        quarter: q,
        units: r
            .units
            .iter()
            .map(|u| quarter_unit(&u.unit, &u.quarters, q))
            .collect(),
        totals: quarter_unit("Facility", &r.totals.quarters, q),
        as_of: r.as_of.clone(),
        caution: CAUTION,
    }
}
