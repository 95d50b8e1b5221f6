//! `flue demo`: the invented Marrow Creek Station, built from the files in
//! samples/ (compiled into the binary, so it runs from any directory).

use crate::import::{allowances, analyses, fuel, hourly, site, InputFile};
use crate::ledger::Ledger;
use crate::report::{self, Format};
use anyhow::{bail, Context};
use clap::Args;
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};

/// The year the demo reports on.
pub const DEMO_YEAR: i32 = 2025;

const FILES: &[(&str, &str)] = &[
    ("site.toml", include_str!("../../samples/site.toml")),
    ("analyses.csv", include_str!("../../samples/analyses.csv")),
    ("fuel.csv", include_str!("../../samples/fuel.csv")),
    (
        "allowances.csv",
        include_str!("../../samples/allowances.csv"),
    ),
];

/// The program the demo settles for `DEMO_YEAR`; the other stays open.
pub const DEMO_SETTLED_PROGRAM: &str = "SO2-ANNUAL";

#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Directory to build the demo in; it must be empty or not exist. A new
    /// temporary directory when omitted.
    #[arg(long)]
    pub dir: Option<PathBuf>,
    #[arg(long, value_enum, default_value = "table")]
    pub format: Format,
}

fn fresh_temp_dir() -> anyhow::Result<PathBuf> {
    let base = std::env::temp_dir();
    for n in 0..1000 {
        let dir = base.join(format!("flue-demo-{}-{n}", std::process::id()));
        match std::fs::create_dir(&dir) {
            Ok(()) => return Ok(dir),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => continue,
            Err(e) => return Err(e).with_context(|| format!("cannot create {}", dir.display())),
        }
    }
    bail!("cannot find a free demo directory under {}", base.display())
}

fn prepare(dir: Option<&Path>) -> anyhow::Result<PathBuf> {
    let Some(dir) = dir else {
        return fresh_temp_dir();
    };
    if dir.exists() {
        let mut entries =
            std::fs::read_dir(dir).with_context(|| format!("{}: cannot read", dir.display()))?;
        if entries.next().is_some() {
            bail!(
                "{}: not empty; the demo builds in an empty or new directory",
                dir.display()
            );
        }
    } else {
        std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
    }
    Ok(dir.to_path_buf())
}

pub fn run(args: &DemoArgs) -> super::Outcome {
    let dir = prepare(args.dir.as_deref())?;
    let k2_hourly = super::demo_hourly::k2_csv(DEMO_YEAR);
    let files = FILES
        .iter()
        .copied()
        .chain([("hourly-k2.csv", k2_hourly.as_str())]);
    for (name, text) in files {
        std::fs::write(dir.join(name), text)
            .with_context(|| format!("cannot write {}", dir.join(name).display()))?;
    }
    let ledger_path = dir.join("flue.db");
    let mut ledger = Ledger::create(&ledger_path)?;
    let stamp = super::stamp();
    // Input files are named relative to the demo directory, as a user there would.
    let input = |name: &str| -> anyhow::Result<InputFile> {
        let bytes = std::fs::read(dir.join(name))?;
        let sha256 = crate::import::hex(&Sha256::digest(&bytes));
        Ok(InputFile {
            name: name.to_string(),
            bytes,
            sha256,
        })
    };
    site::load(&mut ledger, &input("site.toml")?, &stamp)?;
    let a = analyses::import(&mut ledger, &input("analyses.csv")?, None, &stamp)?;
    let f = fuel::import(&mut ledger, &input("fuel.csv")?, None, &stamp)?;
    let h = hourly::import_named(
        &mut ledger,
        &dir.join("hourly-k2.csv"),
        "hourly-k2.csv",
        None,
        &stamp,
    )?;
    let al = allowances::import(&mut ledger, &input("allowances.csv")?, None, None, &stamp)?;
    let (_, settled) =
        allowances::settle(&mut ledger, None, DEMO_SETTLED_PROGRAM, DEMO_YEAR, &stamp)?;
    super::note(format_args!("demo ledger: {}", ledger_path.display()));
    super::note(format_args!(
        "  site.toml loaded; analyses.csv: {a}; fuel.csv: {f}; hourly-k2.csv: {h}; allowances.csv: {al}"
    ));
    super::note(format_args!(
        "  settled {DEMO_SETTLED_PROGRAM} {DEMO_YEAR}: {} allowances deducted",
        settled.deducted
    ));
    super::note(format_args!(
        "  try: flue --ledger {} report annual --year {DEMO_YEAR} --format json\n",
        ledger_path.display()
    ));
    let model = super::report::annual_report(&ledger, None, DEMO_YEAR)?;
    super::emit(None, false, |w| report::render(&model, args.format, w))
}
