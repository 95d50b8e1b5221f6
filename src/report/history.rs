//! `flue history`: every stored version of one record, oldest first, with
//! who stored it, when, why and from which file, line and file digest.
//!
//! The model numbers versions 1, 2, … in the order they were written and
//! names, for a correction, the version it superseded. Exactly one version
//! is in force: the one no later version supersedes. The renderers format
//! only; the model is built from the ledger's stored rows without changing
//! any value (hourly fixed-point readings are shown as the decimals they
//! stand for).

use crate::ledger::{Fields, Provenance, StoredVersion};
use crate::records::{HourRow, Reading};
use serde::ser::{SerializeMap, Serializer};
use serde::Serialize;
use std::fmt::Write as _;

/// Bumped when the JSON layout of a history changes incompatibly.
pub const HISTORY_FORMAT_VERSION: u32 = 1;

/// Named values in a fixed order; JSON renders them as one object in that order.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Named(pub NamedValues);

impl Serialize for Named {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut map = s.serialize_map(Some(self.0.len()))?;
        for (k, v) in &self.0 {
            map.serialize_entry(k, v)?;
        }
        map.end()
    }
}

/// A version's values by name, in file order (`None` for an empty cell).
pub type NamedValues = Vec<(String, Option<String>)>;

/// The file, line and digest a version was read from.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct VersionSource {
    pub file: String,
    pub line: i64,
    pub sha256: String,
}

/// The import batch that stored a version.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct VersionImport {
    pub batch: i64,
    pub imported_at: String,
    pub imported_by: String,
    /// The batch's `--correct` reason, if it had one.
    pub reason: Option<String>,
}

/// What a correction superseded, and why.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Supersedes {
    /// The superseded version's number in this history; `None` if that row
    /// belongs to another key (never written by this flue, kept for safety).
    pub version: Option<usize>,
    pub row_id: i64,
    pub reason: String,
}

/// One stored version.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Version {
    /// 1 for the first stored, counting up in order of writing.
    pub version: usize,
    pub in_force: bool,
    /// The row's id in its ledger table (`seq` for an allowance
    /// transaction's original, the `allowance_corrections` id for each of
    /// its corrections).
    pub row_id: i64,
    pub values: Named,
    pub source: VersionSource,
    pub import: VersionImport,
    /// Set for a correction: the version it superseded and the reason.
    pub supersedes: Option<Supersedes>,
    /// The version that superseded this one, if any.
    pub superseded_by: Option<usize>,
}

/// Every version of one record.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct History {
    pub format_version: u32,
    /// `sample`, `fuel`, `hour` or `transaction`.
    pub record: &'static str,
    /// The record's key, as asked.
    pub key: Named,
    pub versions: Vec<Version>,
}

impl History {
    /// A history from stored versions, oldest first, with their values as named text.
    pub fn new(
        record: &'static str,
        key: Vec<(&str, String)>,
        stored: Vec<(Provenance, NamedValues)>,
    ) -> History {
        // A correction supersedes an earlier version: the latest earlier one
        // with that row id. (An allowance transaction's original is numbered
        // by `seq` and its corrections by their own table's id, so the two
        // may share a number; the latest earlier one is always the right one.)
        let row_ids: Vec<i64> = stored.iter().map(|(p, _)| p.row_id).collect();
        let number = |i: usize, id: i64| row_ids[..i].iter().rposition(|r| *r == id).map(|j| j + 1);
        let mut versions: Vec<Version> = stored
            .into_iter()
            .enumerate()
            .map(|(i, (p, values))| Version {
                version: i + 1,
                in_force: p.in_force,
                row_id: p.row_id,
                values: Named(values),
                source: VersionSource {
                    file: p.file,
                    line: p.line,
                    sha256: p.sha256,
                },
                import: VersionImport {
                    batch: p.batch_id,
                    imported_at: p.imported_at,
                    imported_by: p.imported_by,
                    reason: p.batch_reason,
                },
                supersedes: p.corrects_id.map(|id| Supersedes {
                    version: number(i, id),
                    row_id: id,
                    reason: p.reason.unwrap_or_default(),
                }),
                superseded_by: None,
            })
            .collect();
        let links: Vec<(usize, usize)> = versions
            .iter()
            .filter_map(|v| Some((v.supersedes.as_ref()?.version?, v.version)))
            .collect();
        for (old, new) in links {
            versions[old - 1].superseded_by = Some(new);
        }
        History {
            format_version: HISTORY_FORMAT_VERSION,
            record,
            key: Named(
                key.into_iter()
                    .map(|(k, v)| (k.to_string(), Some(v)))
                    .collect(),
            ),
            versions,
        }
    }

    /// A history of rows whose values are stored as text.
    pub fn of_fields(
        record: &'static str,
        key: Vec<(&str, String)>,
        stored: Vec<StoredVersion<Fields>>,
    ) -> History {
        let stored = stored
            .into_iter()
            .map(|v| {
                let values = v
                    .value
                    .into_iter()
                    .map(|(k, x)| (k.to_string(), x))
                    .collect();
                (v.provenance, values)
            })
            .collect();
        History::new(record, key, stored)
    }

    /// A history of one unit-hour: operating time and every reading column,
    /// as the decimals the fixed-point integers stand for.
    pub fn of_hours(key: Vec<(&str, String)>, stored: Vec<StoredVersion<HourRow>>) -> History {
        let stored = stored
            .into_iter()
            .map(|v| {
                let row = v.value;
                let mut values = vec![
                    (
                        "hour".to_string(),
                        Some(crate::records::hour_label(row.hour)),
                    ),
                    ("op_time".to_string(), Some(row.op_time_hr().to_string())),
                ];
                values.extend(Reading::ALL.iter().map(|r| {
                    (
                        r.column().to_string(),
                        row.reading(*r).map(|d| d.normalize().to_string()),
                    )
                }));
                (v.provenance, values)
            })
            .collect();
        History::new("hour", key, stored)
    }

    /// The version in force, if any.
    pub fn in_force(&self) -> Option<&Version> {
        self.versions.iter().find(|v| v.in_force)
    }
}

/// What a record kind is called in text.
fn record_name(record: &str) -> &str {
    match record {
        "sample" => "fuel sample analysis",
        "fuel" => "fuel record",
        "hour" => "unit-hour",
        "transaction" => "allowance transaction",
        other => other,
    }
}

/// The history as text: a heading, then each version with its values and
/// where it came from.
pub fn text(h: &History) -> String {
    let mut out = String::new();
    let key = h
        .key
        .0
        .iter()
        .map(|(k, v)| format!("{k} {}", v.as_deref().unwrap_or("")))
        .collect::<Vec<_>>()
        .join(", ");
    let count = h.versions.len();
    let _ = writeln!(
        out,
        "history of {} {key}: {count} version{}{}",
        record_name(h.record),
        if count == 1 { "" } else { "s" },
        match h.in_force() {
            Some(v) => format!(", version {} in force", v.version),
            None => String::new(),
        }
    );
    let width = h
        .versions
        .iter()
        .flat_map(|v| v.values.0.iter().map(|(k, _)| k.len()))
        .chain(["superseded".len()])
        .max()
        .unwrap_or(0);
    for v in &h.versions {
        let mut state = Vec::new();
        if v.in_force {
            state.push("IN FORCE".to_string());
        }
        if let Some(n) = v.superseded_by {
            state.push(format!("superseded by version {n}"));
        }
        let _ = writeln!(
            out,
            "\nversion {} (row {}){}",
            v.version,
            v.row_id,
            if state.is_empty() {
                String::new()
            } else {
                format!(": {}", state.join(", "))
            }
        );
        for (k, value) in &v.values.0 {
            let _ = writeln!(out, "  {k:<width$}  {}", value.as_deref().unwrap_or("—"));
        }
        let _ = writeln!(
            out,
            "  {:<width$}  {}:{} (sha256 {})",
            "source", v.source.file, v.source.line, v.source.sha256
        );
        let _ = writeln!(
            out,
            "  {:<width$}  {} by {} (batch {})",
            "imported", v.import.imported_at, v.import.imported_by, v.import.batch
        );
        if let Some(s) = &v.supersedes {
            let which = match s.version {
                Some(n) => format!("version {n}"),
                None => format!("row {}", s.row_id),
            };
            let _ = writeln!(out, "  {:<width$}  {which}: {}", "corrects", s.reason);
        }
    }
    out
}

/// The history as pretty JSON, with a trailing newline.
pub fn json(h: &History) -> serde_json::Result<String> {
    Ok(serde_json::to_string_pretty(h)? + "\n")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn provenance(row_id: i64, corrects_id: Option<i64>, in_force: bool) -> Provenance {
        Provenance {
            row_id,
            batch_id: row_id,
            file: format!("f{row_id}.csv"),
            line: 2,
            sha256: "a".repeat(64),
            imported_at: "2026-01-01T00:00:00Z".into(),
            imported_by: "tester".into(),
            batch_reason: corrects_id.map(|_| "why".to_string()),
            corrects_id,
            reason: corrects_id.map(|_| "why".to_string()),
            in_force,
        }
    }

    fn check(
        stored: Vec<Provenance>,
        superseded_by: &[Option<usize>],
        supersedes: &[Option<usize>],
    ) {
        let h = History::new(
            "fuel",
            vec![("unit", "U".into())],
            stored
                .into_iter()
                .map(|p| (p, vec![("quantity".to_string(), Some("1".to_string()))]))
                .collect(),
        );
        let got_by: Vec<_> = h.versions.iter().map(|v| v.superseded_by).collect();
        let got_sup: Vec<_> = h
            .versions
            .iter()
            .map(|v| v.supersedes.as_ref().and_then(|s| s.version))
            .collect();
        assert_eq!(got_by, superseded_by);
        assert_eq!(got_sup, supersedes);
    }

    #[test]
    fn a_chain_of_corrections_links_each_version_to_the_next() {
        check(
            vec![
                provenance(4, None, false),
                provenance(9, Some(4), false),
                provenance(12, Some(9), true),
            ],
            &[Some(2), Some(3), None],
            &[None, Some(1), Some(2)],
        );
    }

    #[test]
    fn a_correction_links_to_the_latest_earlier_version_of_its_row_id() {
        // An allowance transaction's original is numbered by seq and its
        // corrections by their own ids, so row 1 appears twice here.
        check(
            vec![
                provenance(1, None, false),
                provenance(1, Some(1), false),
                provenance(2, Some(1), true),
            ],
            &[Some(2), Some(3), None],
            &[None, Some(1), Some(2)],
        );
    }

    #[test]
    fn a_single_version_supersedes_nothing() {
        check(vec![provenance(1, None, true)], &[None], &[None]);
    }

    #[test]
    fn json_keeps_the_values_in_file_order() {
        let h = History::new(
            "sample",
            vec![("sample", "S1".into())],
            vec![(
                provenance(1, None, true),
                vec![
                    ("sample".into(), Some("S1".into())),
                    ("fuel".into(), Some("wood".into())),
                    ("gcv".into(), None),
                ],
            )],
        );
        let text = json(&h).unwrap();
        let sample = text.rfind("\"sample\": \"S1\"").unwrap();
        let fuel = text.find("\"fuel\": \"wood\"").unwrap();
        let gcv = text.find("\"gcv\": null").unwrap();
        assert!(sample < fuel && fuel < gcv, "{text}");
        assert!(text.contains("\"format_version\": 1"));
    }
}
