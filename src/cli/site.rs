use crate::import::site::{load, SiteOutcome};
use crate::import::InputFile;
use crate::ledger::{Ledger, Reads};
use anyhow::bail;
use clap::Subcommand;
use std::path::{Path, PathBuf};

#[derive(Debug, Subcommand)]
pub enum SiteCommand {
    /// Store a new version of a site file (earlier versions stay readable).
    #[command(after_help = "Example:\n  flue site load samples/site.toml")]
    Load { file: PathBuf },
    /// Print a stored version of a facility's site file.
    #[command(
        after_help = "Examples:\n  flue site show\n  flue site show --facility MC1 --version 1"
    )]
    Show {
        #[arg(long)]
        facility: Option<String>,
        /// Version number; the latest when omitted.
        #[arg(long)]
        version: Option<i64>,
    },
    /// List every stored version of every facility's site file.
    #[command(after_help = "Example:\n  flue site versions")]
    Versions,
}

pub fn run(cmd: &SiteCommand, ledger_path: &Path) -> super::Outcome {
    let mut ledger = Ledger::open(ledger_path)?;
    match cmd {
        SiteCommand::Load { file } => {
            let input = InputFile::read(file)?;
            match load(&mut ledger, &input, &super::stamp())? {
                SiteOutcome::Stored {
                    facility,
                    version,
                    units,
                } => println!(
                    "{}: facility {facility}, version {version}, {units} units",
                    input.name
                ),
                SiteOutcome::Unchanged { facility, version } => {
                    println!(
                        "{}: unchanged: facility {facility} version {version} is identical",
                        input.name
                    )
                }
            }
        }
        SiteCommand::Show { facility, version } => {
            let latest = ledger.latest_sites()?;
            let facility = match (facility, latest.as_slice()) {
                (Some(f), _) => f.clone(),
                (None, [only]) => only.facility_id.clone(),
                (None, []) => bail!("no site file loaded yet (run `flue site load FILE`)"),
                (None, many) => bail!(
                    "several facilities; pass --facility (one of {})",
                    many.iter()
                        .map(|v| v.facility_id.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            };
            let versions = ledger.site_versions(&facility)?;
            let chosen = match version {
                Some(n) => versions.iter().find(|v| v.version == *n),
                None => versions.last(),
            };
            let Some(v) = chosen else {
                bail!("facility {facility}: no such site file version");
            };
            print!("{}", v.source);
        }
        SiteCommand::Versions => {
            for v in ledger.latest_sites()? {
                for v in ledger.site_versions(&v.facility_id)? {
                    println!(
                        "{} version {}: {} (sha256 {}) loaded {} by {}",
                        v.facility_id, v.version, v.file_name, v.sha256, v.loaded_at, v.loaded_by
                    );
                }
            }
        }
    }
    Ok(())
}
