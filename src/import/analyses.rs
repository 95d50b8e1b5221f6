//! `flue import analyses`: fuel sample analyses, keyed by sample id.

use super::{
    outcome, parse_rows, plan, show_opt, Action, Fields, ImportError, InputFile, Keyed, Outcome,
    Stamp,
};
use crate::compute::record_amounts;
use crate::csvread::{FileErrors, RowError};
use crate::emissions::fuel::GcvUom;
use crate::emissions::fuel_based::Analysis;
use crate::ledger::{Ledger, Reads};
use crate::records::Sample;
use rust_decimal_macros::dec;

pub const REQUIRED: &[&str] = &["sample", "fuel", "sampled_on"];
pub const OPTIONAL: &[&str] = &[
    "sulfur_pct",
    "sulfur_gr_per_100scf",
    "gcv",
    "gcv_uom",
    "carbon_pct",
    "hydrogen_pct",
    "nitrogen_pct",
    "oxygen_pct",
    "density_lb_per_gal",
];

impl Keyed for Sample {
    type Key = SampleKey;
    fn key(&self) -> SampleKey {
        SampleKey(self.sample.clone())
    }

    fn first_difference(&self, held: &Sample) -> Option<(&'static str, String, String)> {
        let (a, b) = (&held.analysis, &self.analysis);
        let pairs = [
            ("sulfur_pct", a.sulfur_pct, b.sulfur_pct),
            (
                "sulfur_gr_per_100scf",
                a.sulfur_gr_per_100scf,
                b.sulfur_gr_per_100scf,
            ),
            ("gcv", a.gcv, b.gcv),
            ("carbon_pct", a.carbon_pct, b.carbon_pct),
            ("hydrogen_pct", a.hydrogen_pct, b.hydrogen_pct),
            ("nitrogen_pct", a.nitrogen_pct, b.nitrogen_pct),
            ("oxygen_pct", a.oxygen_pct, b.oxygen_pct),
            (
                "density_lb_per_gal",
                a.density_lb_per_gal,
                b.density_lb_per_gal,
            ),
        ];
        if held.fuel != self.fuel {
            return Some(("fuel", held.fuel.to_string(), self.fuel.to_string()));
        }
        if held.sampled_on != self.sampled_on {
            return Some((
                "sampled_on",
                held.sampled_on.to_string(),
                self.sampled_on.to_string(),
            ));
        }
        if a.gcv_uom != b.gcv_uom {
            return Some(("gcv_uom", show_opt(&a.gcv_uom), show_opt(&b.gcv_uom)));
        }
        pairs
            .into_iter()
            .find(|(_, x, y)| x != y)
            .map(|(f, x, y)| (f, show_opt(&x), show_opt(&y)))
    }
}

#[derive(Clone, PartialEq, Eq, Hash, Debug)]
pub struct SampleKey(pub String);

impl std::fmt::Display for SampleKey {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "sample {}", self.0)
    }
}

/// Parse an analyses file into samples, or every problem found.
pub fn parse(file: &InputFile) -> Result<Vec<(usize, Sample)>, FileErrors> {
    let hundred = Some(dec!(100));
    parse_rows(file, REQUIRED, OPTIONAL, |columns, record, errors| {
        let mut f = Fields::new(columns, record, errors);
        let sample = f.id("sample");
        let fuel = f.word("fuel", true, "a fuel");
        let sampled_on = f.date("sampled_on");
        let analysis = Analysis {
            sulfur_pct: f.decimal("sulfur_pct", false, false, hundred),
            sulfur_gr_per_100scf: f.decimal("sulfur_gr_per_100scf", false, false, None),
            gcv: f.decimal("gcv", false, true, None),
            gcv_uom: f.word::<GcvUom>("gcv_uom", false, "btu/lb, btu/gal or btu/scf"),
            carbon_pct: f.decimal("carbon_pct", false, false, hundred),
            hydrogen_pct: f.decimal("hydrogen_pct", false, false, hundred),
            nitrogen_pct: f.decimal("nitrogen_pct", false, false, hundred),
            oxygen_pct: f.decimal("oxygen_pct", false, false, hundred),
            density_lb_per_gal: f.decimal("density_lb_per_gal", false, true, None),
        };
        if f.ok && analysis.gcv.is_some() != analysis.gcv_uom.is_some() {
            let (missing, other) = if analysis.gcv.is_some() {
                ("gcv_uom", "gcv")
            } else {
                ("gcv", "gcv_uom")
            };
            f.fail(missing, format!("expected a value, since {other} is given"));
        }
        if !f.ok {
            return None;
        }
        Some(Sample {
            sample: sample?,
            fuel: fuel?,
            sampled_on: sampled_on?,
            analysis,
        })
    })
}

/// Import an analyses file: all rows or none.
pub fn import(
    ledger: &mut Ledger,
    file: &InputFile,
    correct: Option<&str>,
    stamp: &Stamp,
) -> Result<Outcome, ImportError> {
    let rows = parse(file)?;
    ledger.write(|tx| {
        let held = tx.samples()?;
        let mut errors = Vec::new();
        let actions = plan(&rows, &held, correct, &mut errors);
        check_dependent_records(tx, &rows, &actions, &mut errors)?;
        if !errors.is_empty() {
            return Err(FileErrors::new(&file.name, errors).into());
        }
        let done = outcome(&actions);
        if done.added + done.corrected == 0 {
            return Ok(done);
        }
        let batch = super::insert_batch(tx, "analyses", file, &done, stamp, correct)?;
        for ((line, sample), action) in rows.iter().zip(&actions) {
            match action {
                Action::Add => tx.insert_sample(batch, *line, sample, None)?,
                Action::Correct(id) => {
                    tx.insert_sample(batch, *line, sample, Some((*id, correct.expect("planned"))))?
                }
                Action::Present => {}
            }
        }
        Ok(done)
    })
}

/// A corrected sample must still serve every fuel record that names it.
fn check_dependent_records(
    tx: &crate::ledger::Tx,
    rows: &[(usize, Sample)],
    actions: &[Action],
    errors: &mut Vec<RowError>,
) -> Result<(), ImportError> {
    if !actions.iter().any(|a| matches!(a, Action::Correct(_))) {
        return Ok(());
    }
    let sites = tx.sites()?;
    let uses = tx.fuel_uses()?;
    for ((line, sample), action) in rows.iter().zip(actions) {
        if !matches!(action, Action::Correct(_)) {
            continue;
        }
        for u in uses.iter().filter(|u| u.value.sample == sample.sample) {
            let Some(unit) = sites.iter().find_map(|s| s.unit(&u.value.unit)) else {
                continue;
            };
            if let Err(why) = record_amounts(unit, &u.value, sample) {
                errors.push(RowError::line(
                    *line,
                    format!(
                        "the corrected sample would break the fuel record at {}: {why}",
                        u.source.place()
                    ),
                ));
            }
        }
    }
    Ok(())
}
