//! The demo's hourly monitor data for unit K2 of the invented Marrow Creek
//! Station: a year of hours made by our own deterministic generator (fixed
//! seed), with a planned outage, start-up and shut-down hours, and monitor
//! outages of each kind so that every part of the missing-data procedure
//! has something to do. Every number here is invented.

use chrono::{Datelike, NaiveDate, Timelike};
use std::fmt::Write;

pub const HEADER: &str = "unit,hour,op_time,load_mw,so2_ppm_wet,nox_ppm_dry,o2_pct_dry,co2_pct_wet,flow_scfh_wet,h2o_pct";

/// A small xorshift generator: the same sequence on every machine.
struct Noise(u64);

impl Noise {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }

    /// A whole number in `[-spread, spread]`.
    fn around(&mut self, spread: i64) -> i64 {
        (self.next() % (2 * spread as u64 + 1)) as i64 - spread
    }
}

/// Daily load shape, percent of the day's peak, by hour of day.
const SHAPE_PCT: [i64; 24] = [
    62, 58, 55, 54, 55, 60, 70, 82, 90, 94, 96, 97, 98, 98, 99, 100, 100, 99, 96, 92, 86, 78, 70,
    65,
];

/// Monitor outages: (reading, first hour, last hour), local standard time.
const OUTAGES: &[(&str, &str, &str)] = &[
    // SO2 analyzer, initial period (40 CFR 75.31): a short gap.
    ("so2", "2025-01-12T06:00", "2025-01-12T09:00"),
    // SO2 analyzer, standard procedures, short gap (75.33(b)).
    ("so2", "2025-02-03T10:00", "2025-02-03T14:00"),
    // SO2 analyzer, a gap longer than 24 hours (75.33(b)).
    ("so2", "2025-06-17T00:00", "2025-06-18T05:00"),
    // Flow monitor, a 10-hour gap (75.33(c), load ranges).
    ("flow", "2025-08-08T13:00", "2025-08-08T22:00"),
    // O2 analyzer: the NOx rate and the heat input lose their diluent.
    ("o2", "2025-10-02T01:00", "2025-10-02T04:00"),
    // Moisture monitor.
    ("h2o", "2025-11-20T08:00", "2025-11-20T13:00"),
    // Flow monitor, a gap longer than 24 hours.
    ("flow", "2025-12-05T00:00", "2025-12-06T11:00"),
];

/// Planned outage: no operation from the first to the last hour.
const PLANNED_OUTAGE: (&str, &str) = ("2025-03-10T00:00", "2025-03-23T23:00");

fn in_range(t: &str, from: &str, to: &str) -> bool {
    // Same fixed-width format, so text order is time order.
    from <= t && t <= to
}

/// The CSV text of a year of K2 hours.
pub fn k2_csv(year: i32) -> String {
    let mut out = String::with_capacity(8784 * 80);
    out.push_str(HEADER);
    out.push('\n');
    let mut noise = Noise(0x2025_0b0e_f1ce_0001);
    let start = NaiveDate::from_ymd_opt(year, 1, 1)
        .expect("valid year")
        .and_hms_opt(0, 0, 0)
        .expect("midnight");
    let end = NaiveDate::from_ymd_opt(year + 1, 1, 1)
        .expect("valid year")
        .and_hms_opt(0, 0, 0)
        .expect("midnight");
    let mut t = start;
    while t < end {
        let label = t.format("%Y-%m-%dT%H:00").to_string();
        let (off_from, off_to) = PLANNED_OUTAGE;
        let op_time = if in_range(&label, off_from, off_to) {
            "0.00"
        } else if label == "2025-03-24T00:00" {
            "0.40" // start-up
        } else if label == "2025-03-09T23:00" {
            "0.60" // shut-down
        } else {
            "1.00"
        };
        if op_time == "0.00" {
            let _ = writeln!(out, "K2,{label},0.00,0,,,,,,");
            t += chrono::Duration::hours(1);
            continue;
        }
        // Lighter load on weekends and in spring and autumn.
        let season_pct = match t.month() {
            12 | 1 | 2 | 6 | 7 | 8 => 100,
            _ => 88,
        };
        let weekend = matches!(t.weekday(), chrono::Weekday::Sat | chrono::Weekday::Sun);
        let peak_mw = 410 * season_pct / 100 - if weekend { 60 } else { 0 };
        let load_mw = (peak_mw * SHAPE_PCT[t.hour() as usize] / 100 + noise.around(6)).max(120);
        let so2_dppm = 5200 + noise.around(600); // tenths of ppm
        let nox_dppm = 1600 + noise.around(200);
        let o2_cpct = 520 + noise.around(60) - (load_mw - 300) / 4; // hundredths of %
        let co2_cpct = 1210 + noise.around(50) + (load_mw - 300) / 5;
        let flow_scfh = load_mw * 132_000 + noise.around(400) * 1000;
        let h2o_dpct = 85 + noise.around(8); // tenths of %
        let out_of = |what: &str| {
            OUTAGES
                .iter()
                .any(|(w, a, b)| *w == what && in_range(&label, a, b))
        };
        let cell = |missing: bool, text: String| if missing { String::new() } else { text };
        let _ = writeln!(
            out,
            "K2,{label},{op_time},{load_mw},{},{},{},{},{},{}",
            cell(
                out_of("so2"),
                format!("{}.{}", so2_dppm / 10, so2_dppm % 10)
            ),
            cell(
                out_of("nox"),
                format!("{}.{}", nox_dppm / 10, nox_dppm % 10)
            ),
            cell(
                out_of("o2"),
                format!("{}.{:02}", o2_cpct / 100, o2_cpct % 100)
            ),
            cell(
                out_of("co2"),
                format!("{}.{:02}", co2_cpct / 100, co2_cpct % 100)
            ),
            cell(out_of("flow"), flow_scfh.to_string()),
            cell(
                out_of("h2o"),
                format!("{}.{}", h2o_dpct / 10, h2o_dpct % 10)
            ),
        );
        t += chrono::Duration::hours(1);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_full_year_of_hours_with_every_outage_kind() {
        let csv = k2_csv(2025);
        let rows: Vec<&str> = csv.lines().skip(1).collect();
        assert_eq!(rows.len(), 8760, "365 days × 24 hours");
        assert_eq!(
            rows.iter().filter(|r| r.contains(",0.00,")).count(),
            14 * 24,
            "two weeks planned outage"
        );
        // SO2 is the first reading column after load: an empty 5th field.
        let so2_missing = rows
            .iter()
            .filter(|r| r.split(',').nth(4) == Some(""))
            .count();
        assert_eq!(so2_missing, 4 + 5 + 30 + 14 * 24);
        assert_eq!(csv, k2_csv(2025), "deterministic");
    }
}
