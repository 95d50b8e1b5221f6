//! 2,000 generated malformed inputs (RELIABILITY.md A15; issue 5 item 7):
//! valid input files of every kind, mutated by a seeded generator (byte
//! flips, truncations, swapped fields, duplicated, dropped and joined
//! lines), each imported in-process through `flueledger::cli::run`, the
//! code the binary runs. Every case must end in success or a refusal:
//! a panic is a failure (the binary would exit 101); a refusal must name
//! the file and a line; a refusal must leave the ledger byte-identical.
//!
//! The plant is the one the malformed corpus is refused against
//! (tests/malformed/base). `GENERATED_SEED=N` replays another sequence.

use clap::Parser;
use flueledger::cli::{run, Cli};
use sha2::{Digest, Sha256};
use std::path::Path;

/// Print a `faults: ...` line and, where `FLUE_FAULTS_LOG` names a file,
/// append it there too: .ci/run collects them into one summary.
macro_rules! counts {
    ($($arg:tt)*) => {{
        let line = format!($($arg)*);
        println!("{line}");
        if let Some(log) = std::env::var_os("FLUE_FAULTS_LOG") {
            use std::io::Write;
            if let Ok(mut f) = std::fs::OpenOptions::new().create(true).append(true).open(log) {
                let _ = writeln!(f, "{line}");
            }
        }
    }};
}

/// splitmix64 (Steele, Lea and Flood, "Fast splittable pseudorandom number
/// generators", OOPSLA 2014): small, seedable, and the same everywhere.
struct SplitMix(u64);

impl SplitMix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
}

/// Valid inputs for the base plant: (import kind, file name, bytes).
fn valid_inputs() -> Vec<(&'static str, &'static str, Vec<u8>)> {
    let base = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/malformed/base");
    let site = std::fs::read(base.join("site.toml")).unwrap();
    let mut hourly = String::from(
        "unit,hour,op_time,load_mw,so2_ppm_wet,nox_ppm_dry,o2_pct_dry,co2_pct_wet,flow_scfh_wet,h2o_pct\n",
    );
    for h in 0..24 {
        hourly.push_str(&format!(
            "B4,2025-01-02T{h:02}:00,1.00,{},5{h:02}.5,14{}.0,5.{h:02},11.79,338{h:02}000,8.0\n",
            250 + h,
            h % 10
        ));
    }
    vec![
        (
            "fuel",
            "fuel.csv",
            b"unit,start,end,fuel,quantity,uom,sample\n\
              B2,2025-01-01,2025-01-31,bituminous,8420,ton,WB-2501\n\
              G2,2025-01-01,2025-01-31,natural-gas,41.2,mmscf,WG-2501\n\
              B2,2025-02-01,2025-02-28,bituminous,7915.5,ton,WB-2501\n"
                .to_vec(),
        ),
        (
            "analyses",
            "lab.csv",
            b"sample,fuel,sampled_on,sulfur_pct,sulfur_gr_per_100scf,gcv,gcv_uom,carbon_pct,hydrogen_pct,nitrogen_pct,oxygen_pct,density_lb_per_gal\n\
              WB-2502,bituminous,2025-02-04,1.71,,12350,btu/lb,70.6,,,,\n\
              WG-2502,natural-gas,2025-02-08,,0.19,1030,btu/scf,,,,,\n\
              WR-2502,residual-oil,2025-02-09,2.1,,150300,btu/gal,86.8,,,,8.20\n"
                .to_vec(),
        ),
        ("hourly", "hourly.csv", hourly.into_bytes()),
        (
            "allowances",
            "transfers.csv",
            b"id,date,kind,program,vintage,quantity,from,to,price,note,serial_from,serial_to\n\
              WH-T25-1,2025-04-02,transfer,SO2-YEAR,2025,100,WH1-MAIN,WH1-TRADE,12.50,move to trading,,\n\
              WH-T25-2,2025-05-02,transfer,SO2-YEAR,2025,40,WH1-TRADE,WH1-MAIN,,back,,\n"
                .to_vec(),
        ),
        ("site", "site.toml", site),
    ]
}

/// Bytes a flip writes: the ones a parser has to think about.
const INTERESTING: &[u8] = b",\"\n\r\0 -.e+0159x\xff\xc3\t=#[]";

/// One mutation of `bytes`: what was done, and the result.
fn mutate(rng: &mut SplitMix, bytes: &[u8]) -> (&'static str, Vec<u8>) {
    let mut out = bytes.to_vec();
    let lines = |b: &[u8]| -> Vec<Vec<u8>> {
        b.split_inclusive(|&c| c == b'\n')
            .map(<[u8]>::to_vec)
            .collect()
    };
    match rng.below(7) {
        0 => {
            let n = 1 + rng.below(3);
            for _ in 0..n {
                let at = rng.below(out.len());
                out[at] = INTERESTING[rng.below(INTERESTING.len())];
            }
            ("byte flip", out)
        }
        1 => {
            out.truncate(rng.below(out.len()));
            ("truncation", out)
        }
        2 => {
            // Swap two fields of one line.
            let mut ls = lines(&out);
            let i = rng.below(ls.len());
            let text = String::from_utf8_lossy(&ls[i]).into_owned();
            let body = text.trim_end_matches('\n');
            let mut fields: Vec<&str> = body.split(',').collect();
            if fields.len() > 1 {
                let (a, b) = (rng.below(fields.len()), rng.below(fields.len()));
                fields.swap(a, b);
            }
            ls[i] = format!("{}\n", fields.join(",")).into_bytes();
            ("field swap", ls.concat())
        }
        3 => {
            let mut ls = lines(&out);
            let i = rng.below(ls.len());
            let copy = ls[i].clone();
            ls.insert(i, copy);
            ("duplicated line", ls.concat())
        }
        4 => {
            let mut ls = lines(&out);
            ls.remove(rng.below(ls.len()));
            ("dropped line", ls.concat())
        }
        5 => {
            // Two lines joined: a lost line end.
            match out.iter().position(|&c| c == b'\n') {
                Some(_) => {
                    let ends: Vec<usize> = out
                        .iter()
                        .enumerate()
                        .filter(|(_, &c)| c == b'\n')
                        .map(|(i, _)| i)
                        .collect();
                    out.remove(ends[rng.below(ends.len())]);
                }
                None => out.clear(),
            }
            ("joined lines", out)
        }
        _ => {
            // A field deleted (its separator too) or doubled.
            let commas: Vec<usize> = out
                .iter()
                .enumerate()
                .filter(|(_, &c)| c == b',' || c == b'=')
                .map(|(i, _)| i)
                .collect();
            if commas.is_empty() {
                out.insert(0, b',');
            } else if rng.below(2) == 0 {
                out.remove(commas[rng.below(commas.len())]);
            } else {
                out.insert(commas[rng.below(commas.len())], b',');
            }
            ("separator dropped or added", out)
        }
    }
}

fn sha256_of(path: &Path) -> Vec<u8> {
    Sha256::digest(std::fs::read(path).unwrap()).to_vec()
}

/// Run one flue command in-process: Ok, or the message `main` would print.
fn flue(args: &[&str]) -> std::thread::Result<Result<(), String>> {
    let cli = Cli::try_parse_from(std::iter::once("flue").chain(args.iter().copied()))
        .expect("valid arguments");
    std::panic::catch_unwind(|| run(cli).map_err(|e| format!("{e:#}")))
}

#[test]
fn two_thousand_generated_malformed_inputs_never_panic_or_write() {
    const CASES: usize = 2000;
    let dir = tempfile::tempdir().unwrap();
    let ledger = dir.path().join("flue.db");
    let ledger_s = ledger.to_str().unwrap().to_string();
    let base = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/malformed/base");
    let ok = |args: &[&str]| {
        let full: Vec<&str> = [&["--quiet", "--ledger", &ledger_s][..], args].concat();
        flue(&full).expect("no panic").expect("setup command");
    };
    ok(&["init"]);
    for (kind, name) in [
        ("site", "site.toml"),
        ("analyses", "analyses.csv"),
        ("allowances", "allowances.csv"),
    ] {
        let p = base.join(name);
        let p = p.to_str().unwrap();
        match kind {
            "site" => ok(&["site", "load", p]),
            _ => ok(&["import", kind, p]),
        }
    }
    let pristine = dir.path().join("pristine.db");
    std::fs::copy(&ledger, &pristine).unwrap();
    let pristine_sha = sha256_of(&pristine);

    let seed = std::env::var("GENERATED_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(2026u64);
    counts!("faults: generated seed={seed}");
    let mut rng = SplitMix(seed);
    let inputs = valid_inputs();
    // Each valid input goes through untouched first: the mutations start
    // from files the plant accepts.
    for (kind, name, bytes) in &inputs {
        let p = dir.path().join(name);
        std::fs::write(&p, bytes).unwrap();
        let p = p.to_str().unwrap();
        let args: Vec<&str> = match *kind {
            "site" => vec!["--quiet", "--ledger", &ledger_s, "site", "load", p],
            k => vec!["--quiet", "--ledger", &ledger_s, "import", k, p],
        };
        flue(&args)
            .expect("no panic")
            .unwrap_or_else(|e| panic!("the valid {kind} input is refused: {e}"));
        std::fs::copy(&pristine, &ledger).unwrap();
    }

    let (mut refused, mut accepted, mut panics) = (0, 0, 0);
    let mut unplaced = Vec::new();
    let mut changed = Vec::new();
    let mut by_kind = std::collections::BTreeMap::<&str, usize>::new();
    // Silence the default hook's message for caught panics; they are counted.
    let hook = std::panic::take_hook();
    std::panic::set_hook(Box::new(|_| {}));
    for case in 0..CASES {
        let (kind, name, bytes) = &inputs[case % inputs.len()];
        let (how, mutated) = mutate(&mut rng, bytes);
        *by_kind.entry(how).or_default() += 1;
        let file = dir.path().join(format!("case-{case}-{name}"));
        std::fs::write(&file, &mutated).unwrap();
        let shown = file.display().to_string();
        let args: Vec<&str> = match *kind {
            "site" => vec!["--quiet", "--ledger", &ledger_s, "site", "load", &shown],
            k => vec!["--quiet", "--ledger", &ledger_s, "import", k, &shown],
        };
        match flue(&args) {
            Err(_) => {
                panics += 1;
                eprintln!("panic: case {case} ({how} of {name}), kept at {shown}");
                continue;
            }
            Ok(Ok(())) => {
                accepted += 1;
                std::fs::copy(&pristine, &ledger).unwrap();
            }
            Ok(Err(message)) => {
                refused += 1;
                // "FILE:LINE": the file, then a line number.
                let place = format!("{shown}:");
                let names_line = message.starts_with(&place)
                    && message[place.len()..].starts_with(|c: char| c.is_ascii_digit());
                if !names_line {
                    unplaced.push(format!("case {case} ({how} of {name}): {message}"));
                }
                if sha256_of(&ledger) != pristine_sha {
                    changed.push(format!("case {case} ({how} of {name})"));
                    std::fs::copy(&pristine, &ledger).unwrap();
                }
            }
        }
        std::fs::remove_file(&file).unwrap();
    }
    std::panic::set_hook(hook);
    let kinds: Vec<String> = by_kind.iter().map(|(k, n)| format!("{k}:{n}")).collect();
    counts!(
        "faults: generated_inputs={CASES} refused={refused} accepted={accepted} panics={panics} unplaced={} ledger_changed={} ({})",
        unplaced.len(),
        changed.len(),
        kinds.join(", ")
    );
    assert_eq!(panics, 0, "panics (exit 101 from the binary)");
    assert!(
        unplaced.is_empty(),
        "refusals naming no line:\n{}",
        unplaced.join("\n")
    );
    assert!(changed.is_empty(), "refusals that wrote: {changed:?}");
    assert!(refused > CASES / 2, "most mutations should be refused");
}
