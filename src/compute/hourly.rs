//! A CEMS unit's year from its hourly rows: the 40 CFR 75 App. F equations
//! and the 75.31/75.33 substitution stream, summed by month. Pure: the
//! caller streams the rows in from the ledger.
//!
//! The stream starts at the unit's first stored hour, not at January 1, so
//! that lookbacks and availability see the history before the year. It goes
//! on past December 31 while a missing-data period that began in the year
//! is still open, so that the period's hour after (40 CFR 75.31(b),
//! 75.33) is the stored one, not the end of the year. Only hours inside
//! the year are summed.

use crate::emissions::cems::{Bases, Basis, CemsUnit, Computes, GapBounds, HourInput};
use crate::emissions::constants::f_factors;
use crate::emissions::method::{Diluent, Method, Quantity};
use crate::emissions::periods::{Amounts, Year};
use crate::emissions::substitute::{
    Fill, HourOut, MaximumPotentials, Parameter, StreamConfig, SubstituteError, UnitStream,
};
use crate::exact_sum::ExactSum;
use crate::records::{hour_index, hour_label, HourRow, Reading};
use crate::site::{Rounding, Unit};
use crate::units::LB_PER_TON_U32;
use chrono::NaiveDate;
use rust_decimal::Decimal;
use rust_decimal_macros::dec;

/// Gap bounds used where the site file gives none. Our convention, chosen
/// so that a missing moisture or diluent hour does not lower emissions: no
/// moisture below 0 %, none above 20 %; O2 never below 0 %; CO2 never above
/// 20 %. A plant sets its own values per unit in the site file.
pub const DEFAULT_GAP_BOUNDS: GapBounds = GapBounds {
    h2o_pct_min: dec!(0),
    h2o_pct_max: dec!(20),
    o2_pct_min: dec!(0),
    co2_pct_max: dec!(20),
};

/// Where an hourly quantity's value comes from on a given day.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Source {
    /// Not from hourly data (fuel records, or not tracked).
    None,
    /// The monitor stream.
    Stream,
    /// A default rate × the hour's CEMS heat input (40 CFR 75 App. F Eq. F-23).
    DefaultRate(Decimal),
}

/// Which reading columns a unit's stored hours use (any non-empty value).
pub type Present = [bool; Reading::COUNT];

/// The stream configuration of a unit, from its site entry and the columns
/// its data uses. One moisture basis per concentration per unit.
pub fn stream_config(
    unit: &Unit,
    rounding: Rounding,
    present: &Present,
) -> Result<StreamConfig, String> {
    stream_config_with(unit, rounding, present, f_factors(unit.fuel))
}

/// Site-specific F-factors from a sample's ultimate analysis (40 CFR 75
/// App. F §3.3.6, Eq. F-7a/F-7b): percents by weight and GCV in Btu/lb.
pub fn site_specific_f_factors(
    unit: &Unit,
    sample: &crate::records::Sample,
) -> Result<crate::emissions::constants::FFactors, String> {
    let a = &sample.analysis;
    let need = |v: Option<Decimal>, field: &str| {
        v.ok_or_else(|| {
            format!(
                "unit {}: f_factors_sample {} has no {field}, which Eq. F-7a needs",
                unit.id, sample.sample
            )
        })
    };
    if a.gcv_uom != Some(crate::emissions::fuel::GcvUom::BtuPerLb) {
        return Err(format!(
            "unit {}: f_factors_sample {} needs a GCV in btu/lb for Eq. F-7a",
            unit.id, sample.sample
        ));
    }
    Ok(crate::emissions::cems::site_f_factors(
        &crate::emissions::cems::UltimateAnalysis {
            hydrogen_pct: need(a.hydrogen_pct, "hydrogen_pct")?,
            carbon_pct: need(a.carbon_pct, "carbon_pct")?,
            sulfur_pct: need(a.sulfur_pct, "sulfur_pct")?,
            nitrogen_pct: need(a.nitrogen_pct, "nitrogen_pct")?,
            oxygen_pct: need(a.oxygen_pct, "oxygen_pct")?,
            gcv_btu_per_lb: need(a.gcv, "gcv")?,
        },
    ))
}

/// [`stream_config`] with the F-factors given.
pub fn stream_config_with(
    unit: &Unit,
    rounding: Rounding,
    present: &Present,
    f: crate::emissions::constants::FFactors,
) -> Result<StreamConfig, String> {
    let basis = |wet: Reading, dry: Reading, what: &str| -> Result<Basis, String> {
        match (present[wet.index()], present[dry.index()]) {
            (true, true) => Err(format!(
                "unit {}: {what} is stored on both a wet and a dry basis; flue needs one basis per unit",
                unit.id
            )),
            (false, true) => Ok(Basis::Dry),
            _ => Ok(Basis::Wet),
        }
    };
    let bases = Bases {
        so2: basis(Reading::So2PpmWet, Reading::So2PpmDry, "SO2")?,
        nox: basis(Reading::NoxPpmWet, Reading::NoxPpmDry, "NOx")?,
        o2: basis(Reading::O2PctWet, Reading::O2PctDry, "O2")?,
        co2: basis(Reading::Co2PctWet, Reading::Co2PctDry, "CO2")?,
    };
    let cems = |q: Quantity| {
        unit.methods.iter().find_map(|m| match m.method {
            Method::Cems { diluent } if m.quantity == q => Some(diluent),
            _ => None,
        })
    };
    let computes = Computes {
        heat_input: cems(Quantity::HeatInput).is_some(),
        so2: cems(Quantity::So2).is_some(),
        nox: cems(Quantity::Nox).is_some(),
        co2: cems(Quantity::Co2).is_some(),
    };
    let l = &unit.limits;
    let has_co2 = present[Reading::Co2PctWet.index()] || present[Reading::Co2PctDry.index()];
    Ok(StreamConfig {
        unit: CemsUnit {
            kind: unit.kind,
            f,
            heat_input_diluent: cems(Quantity::HeatInput).unwrap_or(Diluent::O2),
            nox_diluent: cems(Quantity::Nox).unwrap_or(Diluent::O2),
            bases,
            co2_from_o2: computes.co2 && !has_co2,
            rounding,
            computes,
            gap_bounds: GapBounds {
                h2o_pct_min: l.min_h2o_pct.unwrap_or(DEFAULT_GAP_BOUNDS.h2o_pct_min),
                h2o_pct_max: l.max_h2o_pct.unwrap_or(DEFAULT_GAP_BOUNDS.h2o_pct_max),
                o2_pct_min: l.min_o2_pct.unwrap_or(DEFAULT_GAP_BOUNDS.o2_pct_min),
                co2_pct_max: l.max_co2_pct.unwrap_or(DEFAULT_GAP_BOUNDS.co2_pct_max),
            },
        },
        max_load_mw: unit.max_load_mw,
        maximum_potentials: MaximumPotentials {
            so2_ppm: l.max_so2_ppm,
            flow_scfh: l.max_flow_scfh,
            nox_lb_per_mmbtu: l.max_nox_lb_per_mmbtu,
        },
    })
}

/// The readings of a stored hour, on the bases of the unit's columns.
pub fn hour_input(row: &HourRow) -> HourInput {
    let either = |a: Reading, b: Reading| row.reading(a).or_else(|| row.reading(b));
    HourInput {
        op_time_hr: row.op_time_hr(),
        load_mw: row.reading(Reading::LoadMw),
        so2_ppm: either(Reading::So2PpmWet, Reading::So2PpmDry),
        nox_ppm: either(Reading::NoxPpmWet, Reading::NoxPpmDry),
        o2_pct: either(Reading::O2PctWet, Reading::O2PctDry),
        co2_pct: either(Reading::Co2PctWet, Reading::Co2PctDry),
        flow_scfh_wet: row.reading(Reading::FlowScfhWet),
        h2o_pct: row.reading(Reading::H2oPct),
    }
}

/// What the hourly data of one unit gave for one year.
#[derive(Clone, Debug, PartialEq)]
pub struct HourlyResult {
    /// Hourly quantities by month; quantities from fuel records are absent here.
    pub year: Year,
    /// Σ operating time over the year's hours.
    pub operating_hours: Decimal,
    /// Hours of the year with a substituted SO2, flow and NOx rate value.
    pub substituted_hours: [u32; 3],
    /// Percent monitor data availability at the last operating hour of the data (§75.32).
    pub availability_pct: [Option<Decimal>; 3],
    /// Hours of the year streamed.
    pub hours: u64,
    /// One entry per day of the year, January 1 first: the day's SO2 mass
    /// and heat input from the hourly data, and its substituted hours. A
    /// compact series for the report's daily profile.
    pub daily: Vec<DayAmounts>,
}

/// One day of a CEMS unit's hourly data, summed over the day's hours.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct DayAmounts {
    /// Σ SO2 mass of the day's hours, lb; `None` where SO2 is not from hourly data.
    pub so2_lb: Option<Decimal>,
    /// Σ heat input of the day's hours, MMBtu.
    pub heat_input_mmbtu: Decimal,
    /// Hours of the day in which SO2, flow or NOx was substituted.
    pub substituted_hours: u32,
}

/// Sums a unit's hours for one year.
pub struct HourlyYear<'a> {
    unit: &'a Unit,
    stream: UnitStream,
    sums: YearSums,
    last_pushed: Option<i64>,
    /// Availability as at the year's last hour, taken before any later hour is pushed.
    availability_at_year_end: Option<[Option<Decimal>; 3]>,
}

/// The year's results being summed, apart from the stream that feeds them.
struct YearSums {
    year_start: i64,
    year_end: i64,
    month_starts: [i64; 13],
    /// Per day of the year, where each quantity comes from.
    sources: Vec<[Source; 4]>,
    result: HourlyResult,
    /// Exact sums of the hours so far (src/exact_sum.rs), rounded once
    /// when the month, the day or the year is done.
    operating_hours: ExactSum,
    month: Option<MonthSums>,
    day: Option<DaySums>,
}

/// The exact sums of the month being added, by quantity. CO2 from the
/// monitors is summed in tons and turned into lb once, at the month's end.
struct MonthSums {
    month: u32,
    lb: [Option<ExactSum>; 4],
    co2_tons: Option<ExactSum>,
}

/// The exact sums of the day being added.
struct DaySums {
    day: usize,
    heat_input_mmbtu: ExactSum,
    so2_lb: Option<ExactSum>,
}

fn stream_error(unit: &Unit, e: SubstituteError) -> String {
    format!("unit {}: {e}", unit.id)
}

impl<'a> HourlyYear<'a> {
    pub fn new(unit: &'a Unit, config: StreamConfig, year: i32) -> Result<HourlyYear<'a>, String> {
        let stream = UnitStream::new(config).map_err(|e| stream_error(unit, e))?;
        let start = |y: i32, m: u32| {
            hour_index(
                NaiveDate::from_ymd_opt(y, m, 1)
                    .expect("valid month")
                    .and_hms_opt(0, 0, 0)
                    .expect("midnight"),
            )
        };
        let mut month_starts = [0i64; 13];
        for m in 1..=12u32 {
            month_starts[m as usize - 1] = start(year, m);
        }
        month_starts[12] = start(year + 1, 1);
        let first = NaiveDate::from_ymd_opt(year, 1, 1).expect("valid year");
        let days =
            (NaiveDate::from_ymd_opt(year + 1, 1, 1).expect("valid year") - first).num_days();
        let sources = (0..days)
            .map(|d| {
                let day = first + chrono::Duration::days(d);
                Quantity::ALL.map(|q| {
                    match unit.method_for(q, unit.fuel, day, day).map(|m| &m.method) {
                        Some(Method::Cems { .. }) => Source::Stream,
                        Some(Method::DefaultRate { rate_lb_per_mmbtu })
                            if unit.heat_input_by_cems() =>
                        {
                            Source::DefaultRate(*rate_lb_per_mmbtu)
                        }
                        _ => Source::None,
                    }
                })
            })
            .collect();
        let mut zeros = Amounts::default();
        for q in Quantity::ALL {
            if unit.tracks(q)
                && unit
                    .methods
                    .iter()
                    .any(|m| m.quantity == q && unit.from_hourly(&m.method))
            {
                zeros.set(q, Decimal::ZERO);
            }
        }
        let mut months = Year::default();
        for m in 1..=12 {
            months.add_month(m, zeros);
        }
        Ok(HourlyYear {
            unit,
            stream,
            sums: YearSums {
                year_start: month_starts[0],
                year_end: month_starts[12],
                month_starts,
                sources,
                result: HourlyResult {
                    year: months,
                    operating_hours: Decimal::ZERO,
                    substituted_hours: [0; 3],
                    availability_pct: [None; 3],
                    hours: 0,
                    daily: vec![DayAmounts::default(); days as usize],
                },
                operating_hours: ExactSum::default(),
                month: None,
                day: None,
            },
            last_pushed: None,
            availability_at_year_end: None,
        })
    }

    /// The first hour after the year: the caller streams every hour before
    /// it, then later hours while [`waits_past_year_end`](Self::waits_past_year_end).
    pub fn end_hour(&self) -> i64 {
        self.sums.year_end
    }

    /// Whether an hour of the year waits for a missing-data period that is
    /// still open, so the hours after the year must be streamed to close it.
    pub fn waits_past_year_end(&self) -> bool {
        self.stream
            .first_waiting_hour()
            .is_some_and(|h| h < self.sums.year_end)
    }

    /// Feed the next stored hour, in hour order.
    pub fn push(&mut self, row: &HourRow) -> Result<(), String> {
        if row.hour >= self.sums.year_end && self.availability_at_year_end.is_none() {
            self.availability_at_year_end = Some(self.availability());
        }
        self.last_pushed = Some(row.hour);
        self.stream
            .push(row.hour, hour_input(row))
            .map_err(|e| format!("{} at {}", stream_error(self.unit, e), hour_label(row.hour)))?;
        while let Some(out) = self.stream.next_ready() {
            self.sums.add(out);
        }
        Ok(())
    }

    fn availability(&self) -> [Option<Decimal>; 3] {
        self.stream
            .summary()
            .parameters
            .map(|p| p.and_then(|p| p.mda_pct))
    }

    /// Close the stream and return the year's sums.
    pub fn finish(mut self) -> Result<HourlyResult, String> {
        self.stream
            .finish()
            .map_err(|e| stream_error(self.unit, e))?;
        while let Some(out) = self.stream.next_ready() {
            self.sums.add(out);
        }
        self.sums.close_month();
        self.sums.close_day();
        self.sums.result.operating_hours = self.sums.operating_hours.value();
        self.sums.result.availability_pct = self
            .availability_at_year_end
            .unwrap_or_else(|| self.availability());
        Ok(self.sums.result)
    }
}

impl YearSums {
    fn add(&mut self, out: &HourOut) {
        if out.clock_hour < self.year_start || out.clock_hour >= self.year_end {
            return;
        }
        let r = &mut self.result;
        r.hours += 1;
        self.operating_hours.add(out.input.op_time_hr);
        let month = self.month_starts.partition_point(|&s| s <= out.clock_hour) as u32;
        let day = ((out.clock_hour - self.year_start) / 24) as usize;
        let mut substituted = false;
        for p in Parameter::ALL {
            if matches!(out.fill(p), Fill::Substituted(_)) {
                r.substituted_hours[p.index()] += 1;
                substituted = true;
            }
        }
        if substituted {
            r.daily[day].substituted_hours += 1;
        }
        let heat_input = out.result.heat_input().map(|h| h.0).unwrap_or_default();
        if self.month.as_ref().is_some_and(|m| m.month != month) {
            self.close_month();
        }
        if self.day.as_ref().is_some_and(|d| d.day != day) {
            self.close_day();
        }
        let sums = self.month.get_or_insert(MonthSums {
            month,
            lb: [None; 4],
            co2_tons: None,
        });
        let today = self.day.get_or_insert_with(|| DaySums {
            day,
            heat_input_mmbtu: ExactSum::default(),
            so2_lb: None,
        });
        today.heat_input_mmbtu.add(heat_input);
        for q in Quantity::ALL {
            let value = match self.sources[day][q.index()] {
                Source::None => continue,
                Source::DefaultRate(rate) => rate * heat_input,
                Source::Stream => match q {
                    Quantity::HeatInput => heat_input,
                    Quantity::So2 => out.result.so2().map(|m| m.0).unwrap_or_default(),
                    Quantity::Nox => out.result.nox().map(|m| m.0).unwrap_or_default(),
                    Quantity::Co2 => {
                        let tons = out.result.co2().map(|t| t.0).unwrap_or_default();
                        sums.co2_tons
                            .get_or_insert_with(ExactSum::default)
                            .add(tons);
                        continue;
                    }
                },
            };
            sums.lb[q.index()]
                .get_or_insert_with(ExactSum::default)
                .add(value);
            if q == Quantity::So2 {
                today
                    .so2_lb
                    .get_or_insert_with(ExactSum::default)
                    .add(value);
            }
        }
    }

    /// Round the month's sums and add them to the year.
    fn close_month(&mut self) {
        if let Some(mut sums) = self.month.take() {
            if let Some(tons) = sums.co2_tons {
                let lb = tons.times(LB_PER_TON_U32);
                match &mut sums.lb[Quantity::Co2.index()] {
                    Some(sum) => sum.merge(lb),
                    none => *none = Some(lb),
                }
            }
            let mut amounts = Amounts::default();
            for q in Quantity::ALL {
                if let Some(sum) = sums.lb[q.index()] {
                    amounts.set(q, sum.value());
                }
            }
            self.result.year.add_month(sums.month, amounts);
        }
    }

    /// Round the day's sums and add them to its entry.
    fn close_day(&mut self) {
        if let Some(d) = self.day.take() {
            let entry = &mut self.result.daily[d.day];
            entry.heat_input_mmbtu += d.heat_input_mmbtu.value();
            if let Some(so2) = d.so2_lb {
                *entry.so2_lb.get_or_insert(Decimal::ZERO) += so2.value();
            }
        }
    }
}

/// The first hour of January 1 of `year`.
pub fn year_start_hour(year: i32) -> i64 {
    hour_index(
        NaiveDate::from_ymd_opt(year, 1, 1)
            .expect("valid year")
            .and_hms_opt(0, 0, 0)
            .expect("midnight"),
    )
}
