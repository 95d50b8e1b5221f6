use crate::ledger::Ledger;
use std::path::Path;

pub fn run(path: &Path) -> super::Outcome {
    Ledger::create(path)?;
    println!("created an empty ledger at {}", path.display());
    Ok(())
}
