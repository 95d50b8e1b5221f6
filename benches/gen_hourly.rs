//! Invented fleet data for the speed benchmark (benches/fleet.sh).
//!
//! Writes `hourly.csv` (N coal units × every hour of one year) and the
//! matching `site.toml` into a directory. The data are deterministic for a
//! given seed and wholly made up: a daily load cycle with noise, readings
//! that follow the load, unit outages (op_time 0), partial hours at start-up
//! and shut-down, and monitor gaps (blank cells) of 1 to 12 hours and of
//! 25 to 60 hours, about 1 % of the operating readings in all.
//!
//! Run through cargo (a `harness = false` bench target, so `cargo test`
//! never runs it):
//!
//! ```text
//! cargo bench --bench gen_hourly -- --units 100 --out /tmp/fleet100
//! cargo bench --bench gen_hourly -- --units 10 --blank-pct 0 --out /tmp/clean
//! ```
//!
//! Without `--out` it prints its usage and writes nothing (so a bare
//! `cargo bench` does no harm).

use std::fmt::Write as _;
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::PathBuf;
use std::process::ExitCode;

const USAGE: &str = "\
usage: cargo bench --bench gen_hourly -- --units N --out DIR [--year Y] [--seed S] [--blank-pct P]
  writes DIR/hourly.csv and DIR/site.toml: N invented coal units, every hour of year Y (default 2025)
  --blank-pct  share of operating readings left blank as monitor gaps, in percent (default 1; 0 for none)";

/// splitmix64: small, fast and the same on every platform.
struct Rng(u64);

impl Rng {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1).
    fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.unit()
    }

    fn below(&mut self, n: usize) -> usize {
        (self.next_u64() % n as u64) as usize
    }

    /// Roughly normal, mean 0, sd 1 (sum of four uniforms).
    fn noise(&mut self) -> f64 {
        (self.unit() + self.unit() + self.unit() + self.unit() - 2.0) * 1.732
    }
}

struct Args {
    units: usize,
    out: PathBuf,
    year: i32,
    seed: u64,
    blank_pct: f64,
}

fn parse_args() -> Result<Option<Args>, String> {
    let mut units = None;
    let mut out = None;
    let mut year = 2025;
    let mut seed = 2025;
    let mut blank_pct = 1.0;
    let mut it = std::env::args().skip(1);
    while let Some(a) = it.next() {
        let mut value = |name: &str| it.next().ok_or_else(|| format!("{name} needs a value"));
        match a.as_str() {
            "--units" => {
                units = Some(
                    value("--units")?
                        .parse::<usize>()
                        .map_err(|e| format!("--units: {e}"))?,
                )
            }
            "--out" => out = Some(PathBuf::from(value("--out")?)),
            "--year" => {
                year = value("--year")?
                    .parse()
                    .map_err(|e| format!("--year: {e}"))?
            }
            "--seed" => {
                seed = value("--seed")?
                    .parse()
                    .map_err(|e| format!("--seed: {e}"))?
            }
            "--blank-pct" => {
                blank_pct = value("--blank-pct")?
                    .parse()
                    .map_err(|e| format!("--blank-pct: {e}"))?
            }
            // cargo bench passes --bench to harness-less targets.
            "--bench" => {}
            other => return Err(format!("unknown argument {other}")),
        }
    }
    let Some(out) = out else {
        return Ok(None);
    };
    let units = units.ok_or("--units is required")?;
    if units == 0 || units > 99_999 {
        return Err("--units must be 1 to 99999".into());
    }
    if !(0.0..=20.0).contains(&blank_pct) {
        return Err("--blank-pct must be 0 to 20".into());
    }
    Ok(Some(Args {
        units,
        out,
        year,
        seed,
        blank_pct,
    }))
}

fn is_leap(y: i32) -> bool {
    (y % 4 == 0 && y % 100 != 0) || y % 400 == 0
}

/// "YYYY-MM-DDTHH:00" for every hour of the year, in order.
fn hour_labels(year: i32) -> Vec<String> {
    let days = [
        31,
        if is_leap(year) { 29 } else { 28 },
        31,
        30,
        31,
        30,
        31,
        31,
        30,
        31,
        30,
        31,
    ];
    let mut out = Vec::with_capacity(8784);
    for (m, &d) in days.iter().enumerate() {
        for day in 1..=d {
            for h in 0..24 {
                out.push(format!("{year:04}-{:02}-{day:02}T{h:02}:00", m + 1));
            }
        }
    }
    out
}

/// The monitored columns, in CSV order after `load_mw`.
const READINGS: usize = 6; // so2, nox, o2, co2, flow, h2o

/// One invented unit's fixed character.
struct UnitSpec {
    id: String,
    max_load: f64,
    so2_base: f64,
    nox_base: f64,
    max_so2_ppm: u32,
}

fn unit_spec(i: usize, width: usize, rng: &mut Rng) -> UnitSpec {
    let so2_base = rng.range(300.0, 700.0);
    UnitSpec {
        id: format!("U{:0width$}", i + 1),
        max_load: (rng.range(400.0, 600.0) / 10.0).round() * 10.0,
        so2_base,
        nox_base: rng.range(110.0, 200.0),
        // Above any generated reading (readings are clamped to 900 ppm).
        max_so2_ppm: 1000,
    }
}

/// Which hours the unit is offline (op_time 0) and which are partial.
fn operating_times(hours: usize, rng: &mut Rng) -> Vec<f64> {
    let mut op = vec![1.0; hours];
    // One to three outages: a long planned one and short forced ones.
    let outages = 1 + rng.below(3);
    for k in 0..outages {
        let len = if k == 0 {
            168 + rng.below(336)
        } else {
            12 + rng.below(96)
        };
        let start = rng.below(hours - len);
        for t in op.iter_mut().skip(start).take(len) {
            *t = 0.0;
        }
        // Partial hours at shut-down and start-up.
        if start > 0 {
            op[start - 1] = (rng.range(0.25, 0.95) * 100.0).round() / 100.0;
        }
        if start + len < hours {
            op[start + len] = (rng.range(0.10, 0.90) * 100.0).round() / 100.0;
        }
    }
    op
}

/// Blank-cell masks per reading: gaps of 1–12 hours and some of 25–60,
/// placed until about `pct` % of the operating hours are blank.
fn gap_masks(op: &[f64], pct: f64, rng: &mut Rng) -> Vec<Vec<bool>> {
    let hours = op.len();
    let operating = op.iter().filter(|&&t| t > 0.0).count();
    let target = (operating as f64 * pct / 100.0).round() as usize;
    let mut masks = vec![vec![false; hours]; READINGS];
    for mask in masks.iter_mut() {
        let mut blank = 0;
        let mut tries = 0;
        while blank < target && tries < 10_000 {
            tries += 1;
            let len = if rng.unit() < 0.15 {
                25 + rng.below(36)
            } else {
                1 + rng.below(12)
            };
            let len = len.min(target - blank).max(1);
            let start = rng.below(hours - len);
            for h in start..start + len {
                if !mask[h] && op[h] > 0.0 {
                    mask[h] = true;
                    blank += 1;
                }
            }
        }
    }
    masks
}

fn write_site(args: &Args, specs: &[UnitSpec]) -> std::io::Result<()> {
    let mut s = String::new();
    s.push_str(
        "# Invented fleet for the flue speed benchmark (benches/gen_hourly.rs).\n\
         [facility]\n\
         id = \"BENCH\"\n\
         name = \"Invented benchmark fleet\"\n\
         utc_offset = \"-06:00\"\n\
         rounding = \"exact\"\n",
    );
    for u in specs {
        let _ = write!(
            s,
            "\n[[units]]\n\
             id = \"{}\"\n\
             kind = \"boiler\"\n\
             fuel = \"bituminous\"\n\
             max_load_mw = \"{}\"\n\
             max_so2_ppm = \"{}\"\n\
             max_flow_scfh = \"38000000\"\n\
             max_nox_lb_per_mmbtu = \"0.95\"\n",
            u.id, u.max_load, u.max_so2_ppm
        );
        for q in ["heat_input", "so2", "nox", "co2"] {
            let _ = write!(
                s,
                "\n[[units.methods]]\nquantity = \"{q}\"\nmethod = \"cems\"\n"
            );
        }
    }
    std::fs::write(args.out.join("site.toml"), s)
}

fn run(args: &Args) -> std::io::Result<u64> {
    std::fs::create_dir_all(&args.out)?;
    let labels = hour_labels(args.year);
    let hours = labels.len();
    let width = args.units.to_string().len().max(3);
    let mut rng = Rng(args.seed);
    let specs: Vec<UnitSpec> = (0..args.units)
        .map(|i| unit_spec(i, width, &mut rng))
        .collect();
    write_site(args, &specs)?;

    let file = File::create(args.out.join("hourly.csv"))?;
    let mut w = BufWriter::with_capacity(1 << 20, file);
    w.write_all(
        b"unit,hour,op_time,load_mw,so2_ppm_wet,nox_ppm_dry,o2_pct_dry,co2_pct_wet,flow_scfh_wet,h2o_pct\n",
    )?;
    let mut rows = 0u64;
    let mut line = String::with_capacity(128);
    for (i, u) in specs.iter().enumerate() {
        let mut rng = Rng(args.seed ^ ((i as u64 + 1) << 20));
        let op = operating_times(hours, &mut rng);
        let gaps = gap_masks(&op, args.blank_pct, &mut rng);
        let phase = rng.range(0.0, 24.0);
        let mut drift = 0.0f64;
        for h in 0..hours {
            line.clear();
            let t = op[h];
            let _ = write!(line, "{},{},{:.2},", u.id, labels[h], t);
            if t == 0.0 {
                // Offline: no load, no readings (not missing data).
                line.push_str("0,,,,,,\n");
            } else {
                let hour_of_day = (h % 24) as f64;
                let daily = ((hour_of_day - phase) / 24.0 * std::f64::consts::TAU).sin();
                drift = (drift * 0.97 + rng.noise() * 0.02).clamp(-0.2, 0.2);
                let frac = (0.62 + 0.25 * daily + drift + rng.noise() * 0.03).clamp(0.2, 1.0);
                let load = (u.max_load * frac).clamp(100.0, 600.0);
                let lf = (load - 100.0) / 500.0; // 0..1 across 100–600 MW
                let so2 = (u.so2_base * (1.0 + rng.noise() * 0.08)).clamp(200.0, 900.0);
                let nox =
                    (u.nox_base * (0.9 + 0.2 * lf) * (1.0 + rng.noise() * 0.06)).clamp(80.0, 250.0);
                let o2 = (6.5 - 3.0 * lf + rng.noise() * 0.2).clamp(3.0, 7.0);
                let co2 = (10.5 + 3.0 * lf + rng.noise() * 0.2).clamp(10.0, 14.0);
                let flow = (1.5e7 + 2.0e7 * lf * (1.0 + rng.noise() * 0.03)).clamp(1.5e7, 3.5e7);
                let h2o = (9.0 + rng.noise() * 1.0).clamp(6.0, 12.0);
                let _ = write!(line, "{load:.1},");
                let cells: [(f64, usize); READINGS] =
                    [(so2, 1), (nox, 1), (o2, 2), (co2, 2), (flow, 0), (h2o, 2)];
                for (k, &(v, decimals)) in cells.iter().enumerate() {
                    if !gaps[k][h] {
                        let _ = write!(line, "{v:.decimals$}");
                    }
                    line.push(if k + 1 == READINGS { '\n' } else { ',' });
                }
            }
            w.write_all(line.as_bytes())?;
            rows += 1;
        }
    }
    w.flush()?;
    Ok(rows)
}

fn main() -> ExitCode {
    match parse_args() {
        Ok(None) => {
            println!("{USAGE}");
            ExitCode::SUCCESS
        }
        Ok(Some(args)) => match run(&args) {
            Ok(rows) => {
                println!(
                    "wrote {} rows for {} units to {}",
                    rows,
                    args.units,
                    args.out.join("hourly.csv").display()
                );
                ExitCode::SUCCESS
            }
            Err(e) => {
                eprintln!("gen_hourly: {e}");
                ExitCode::FAILURE
            }
        },
        Err(e) => {
            eprintln!("gen_hourly: {e}\n{USAGE}");
            ExitCode::from(2)
        }
    }
}
