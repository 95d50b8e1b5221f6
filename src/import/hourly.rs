//! `flue import hourly`: continuous monitor data, one row per unit-hour.
//!
//! The file is streamed: memory holds one record, the line numbers of the
//! unit-hours seen (for duplicates, bounded by units × hours, not by file
//! size), each unit's block being filled (at most 512 rows, see
//! src/ledger/blocks.rs) and the first errors. Every row is checked, then
//! written in the same transaction; any error rolls everything back.

use super::pieces::{Piece, Splitter};
use super::{ImportError, Outcome, Stamp};
use crate::csvread::{shown, Columns, FileErrors, Reader, Record, RowError, ERRORS_SHOWN_MAX};
use crate::decimal::{parse_fixed, FixedError};
use crate::emissions::method::Method;
use crate::ledger::{BlockBuilder, HeldHours, HourlyReads, Ledger, NewBatch, Reads};
use crate::records::{
    days_from_civil, days_in_month, hour_label, HourRow, Reading, OP_TIME_SCALE, READING_SCALE,
};
use sha2::{Digest, Sha256};
use std::collections::HashMap;
use std::io::{BufRead, BufReader, Read};
use std::path::Path;

pub const REQUIRED: &[&str] = &["unit", "hour", "op_time"];

/// Hours in a leap year: 366 days × 24.
const HOURS_PER_YEAR_MAX: usize = 8784;

/// A reader that hashes every byte it reads, in the order read, on the
/// thread that reads (the one cutting the file into pieces).
struct Hashing<R> {
    inner: R,
    hasher: Sha256,
}

impl<R: Read> Read for Hashing<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.hasher.update(&buf[..n]);
        Ok(n)
    }
}

/// Where each column of the header sits.
struct Layout {
    unit: usize,
    hour: usize,
    op_time: usize,
    readings: [Option<usize>; Reading::COUNT],
    /// Each reading's upper bound as a fixed-point integer, exclusive or not.
    limits: [Option<(i64, bool, &'static str)>; Reading::COUNT],
    names: Vec<String>,
}

impl Layout {
    fn new(columns: &Columns) -> Layout {
        let idx = |n: &str| columns.index(n);
        let mut readings = [None; Reading::COUNT];
        let mut limits = [None; Reading::COUNT];
        for r in Reading::ALL {
            readings[r.index()] = idx(r.column());
            limits[r.index()] = r.upper_bound().map(|(bound, exclusive, why)| {
                let mut scaled = bound;
                scaled.rescale(READING_SCALE);
                let limit = i64::try_from(scaled.mantissa()).expect("bounds are small");
                (limit, exclusive, why)
            });
        }
        Layout {
            unit: idx("unit").expect("required column"),
            hour: idx("hour").expect("required column"),
            op_time: idx("op_time").expect("required column"),
            readings,
            limits,
            names: columns.names.clone(),
        }
    }
}

/// Errors kept for the message; the rest are only counted.
struct Errors {
    kept: Vec<RowError>,
    omitted: usize,
}

impl Errors {
    fn push(&mut self, e: RowError) {
        // Keep a few past the shown maximum so sorting by line stays honest.
        if self.kept.len() < ERRORS_SHOWN_MAX * 5 {
            self.kept.push(e);
        } else {
            self.omitted += 1;
        }
    }

    fn is_empty(&self) -> bool {
        self.kept.is_empty()
    }
}

/// Parse `YYYY-MM-DDTHH:00` by hand into its year and hour index: chrono's
/// format parser costs more than the rest of the row.
fn parse_hour(text: &str) -> Result<(i32, i64), String> {
    let b = text.as_bytes();
    let shape = "not in the form YYYY-MM-DDTHH:00";
    if b.len() != 16 || b[4] != b'-' || b[7] != b'-' || b[10] != b'T' || &b[13..] != b":00" {
        return Err(shape.into());
    }
    let num = |r: std::ops::Range<usize>| -> Result<u32, String> {
        b[r].iter().try_fold(0u32, |acc, &c| {
            if c.is_ascii_digit() {
                Ok(acc * 10 + u32::from(c - b'0'))
            } else {
                Err(shape.to_string())
            }
        })
    };
    let (y, m, d, h) = (num(0..4)? as i32, num(5..7)?, num(8..10)?, num(11..13)?);
    if d == 0 || d > days_in_month(y, m) || h > 23 {
        return Err("not a real hour".into());
    }
    Ok((y, days_from_civil(y, m, d) * 24 + i64::from(h)))
}

fn fixed_message(e: FixedError) -> String {
    e.to_string()
}

/// Parse one record into a unit name and an hour row, or report its errors.
fn parse_record<'r>(
    layout: &Layout,
    rec: &'r Record,
    errors: &mut Errors,
) -> Option<(&'r str, i32, HourRow)> {
    let line = rec.line;
    let mut ok = true;
    let mut fail = |col: usize, message: String| {
        errors.push(RowError::at(line, col + 1, &layout.names[col], message));
        ok = false;
    };
    let unit = rec.get(layout.unit);
    if unit.is_empty() || unit.trim() != unit {
        fail(
            layout.unit,
            format!("expected a unit id, found {}", shown(unit)),
        );
    }
    let hour = match parse_hour(rec.get(layout.hour)) {
        Ok(t) => Some(t),
        Err(why) => {
            fail(
                layout.hour,
                format!(
                    "expected an hour YYYY-MM-DDTHH:00, found {} ({why})",
                    shown(rec.get(layout.hour))
                ),
            );
            None
        }
    };
    let op_text = rec.get(layout.op_time);
    let op_time_centi = match parse_fixed(op_text, OP_TIME_SCALE) {
        Ok(v) if v <= 100 => Some(v),
        Ok(_) => {
            fail(
                layout.op_time,
                format!(
                    "expected an operating time from 0.00 to 1.00, found {}",
                    shown(op_text)
                ),
            );
            None
        }
        Err(e) => {
            fail(
                layout.op_time,
                format!(
                    "expected an operating time from 0.00 to 1.00, found {} ({})",
                    shown(op_text),
                    fixed_message(e)
                ),
            );
            None
        }
    };
    let mut readings = [None; Reading::COUNT];
    for r in Reading::ALL {
        let Some(col) = layout.readings[r.index()] else {
            continue;
        };
        let text = rec.get(col);
        if text.is_empty() {
            continue;
        }
        match parse_fixed(text, READING_SCALE) {
            Ok(v) => {
                if let Some((limit, exclusive, why)) = layout.limits[r.index()] {
                    if v > limit || (exclusive && v == limit) {
                        fail(col, format!("{why}, found {}", shown(text)));
                        continue;
                    }
                }
                readings[r.index()] = Some(v);
            }
            Err(e) => fail(
                col,
                format!(
                    "expected a decimal of zero or more, found {} ({})",
                    shown(text),
                    fixed_message(e)
                ),
            ),
        }
    }
    for (wet, dry) in [
        (Reading::So2PpmWet, Reading::So2PpmDry),
        (Reading::NoxPpmWet, Reading::NoxPpmDry),
        (Reading::O2PctWet, Reading::O2PctDry),
        (Reading::Co2PctWet, Reading::Co2PctDry),
    ] {
        if readings[wet.index()].is_some() && readings[dry.index()].is_some() {
            let col = layout.readings[dry.index()].expect("present");
            fail(
                col,
                format!(
                    "both {} and {} are given for one hour; give one basis",
                    wet.column(),
                    dry.column()
                ),
            );
        }
    }
    if !ok {
        return None;
    }
    let (year, hour) = hour?;
    Some((
        unit,
        year,
        HourRow {
            hour,
            op_time_centi: op_time_centi?,
            readings,
        },
    ))
}

/// What the import knows of each unit named in the file.
struct UnitState {
    unit_no: i64,
    /// Bit i set: reading i carried a value in this file.
    columns: u32,
    /// The same for the unit's hours already in the ledger.
    held_columns: u32,
    /// Per year of this file: the year, its first hour, and the line of
    /// each of its hours seen in this file (0 = not seen). A unit's rows
    /// span few years, so a search from the latest beats hashing each row.
    lines: Vec<(i32, i64, Vec<u32>)>,
    /// Years in which the ledger already holds hours of this unit, or not.
    held_years: Vec<(i32, bool)>,
    /// The block of this unit's rows being filled.
    block: BlockBuilder,
}

impl UnitState {
    /// The first hour of `year` and the lines seen of its hours.
    fn year_lines(&mut self, year: i32) -> (i64, &mut [u32]) {
        let i = match self.lines.iter().rposition(|e| e.0 == year) {
            Some(i) => i,
            None => {
                let start = days_from_civil(year, 1, 1) * 24;
                self.lines.push((year, start, vec![0; HOURS_PER_YEAR_MAX]));
                self.lines.len() - 1
            }
        };
        let (_, start, slots) = &mut self.lines[i];
        (*start, slots)
    }
}

/// Import an hourly file: all rows or none.
pub fn import(
    ledger: &mut Ledger,
    path: &Path,
    correct: Option<&str>,
    stamp: &Stamp,
) -> Result<Outcome, ImportError> {
    import_named(ledger, path, &path.display().to_string(), correct, stamp)
}

/// A row giving a concentration on the other moisture basis than the
/// unit's hours so far: the equations take one basis per unit.
fn mixed_basis(row: &HourRow, seen: u32) -> Option<String> {
    let pairs = [
        (Reading::So2PpmWet, Reading::So2PpmDry),
        (Reading::NoxPpmWet, Reading::NoxPpmDry),
        (Reading::O2PctWet, Reading::O2PctDry),
        (Reading::Co2PctWet, Reading::Co2PctDry),
    ];
    pairs.into_iter().find_map(|(wet, dry)| {
        let (here, other) = if row.readings[wet.index()].is_some() {
            (wet, dry)
        } else if row.readings[dry.index()].is_some() {
            (dry, wet)
        } else {
            return None;
        };
        (seen & (1 << other.index()) != 0).then(|| {
            format!(
                "{} given, but the unit's other hours use {}; give one moisture basis per unit",
                here.column(),
                other.column()
            )
        })
    })
}

/// Bytes of the file per piece handed to a parsing thread.
const PIECE_BYTES: usize = 256 * 1024;
/// Pieces and parsed chunks in flight per parsing thread: bounds memory
/// whatever the file size.
const IN_FLIGHT: usize = 2;

/// One parsed row: its line, the piece's index of its unit, its year.
struct Parsed {
    line: usize,
    unit: usize,
    year: i32,
    row: HourRow,
}

/// A piece of the file, parsed: its rows, the units they name, and row errors.
#[derive(Default)]
struct Chunk {
    rows: Vec<Parsed>,
    /// The unit names of this chunk's rows, by [`Parsed::unit`].
    units: Vec<String>,
    errors: Vec<RowError>,
    /// The reader stopped here (a broken quote, an oversized record, a
    /// read error): no safe place to resume, so later chunks are not used.
    stopped: bool,
}

/// Parse the records of one piece.
fn parse_piece(layout: &Layout, piece: Piece) -> Chunk {
    let mut chunk = Chunk::default();
    let mut reader = Reader::continuing(&piece.bytes[..], piece.lines_before);
    let mut record = Record::default();
    let mut scratch = Errors {
        kept: Vec::new(),
        omitted: 0,
    };
    loop {
        match reader.next_into(&mut record) {
            Ok(false) => break,
            Ok(true) => {}
            Err(e) => {
                chunk.errors.push(e);
                chunk.stopped = true;
                return chunk;
            }
        }
        if let Some(e) = RowError::field_count(&record, layout.names.len()) {
            chunk.errors.push(e);
            continue;
        }
        let parsed = parse_record(layout, &record, &mut scratch);
        chunk.errors.append(&mut scratch.kept);
        let Some((unit, year, row)) = parsed else {
            continue;
        };
        // Rows come grouped by unit: look back before searching.
        let index = match chunk.units.iter().rposition(|u| u == unit) {
            Some(i) => i,
            None => {
                chunk.units.push(unit.to_string());
                chunk.units.len() - 1
            }
        };
        chunk.rows.push(Parsed {
            line: record.line,
            unit: index,
            year,
            row,
        });
    }
    if let Some(e) = piece.error {
        chunk.errors.push(e);
        chunk.stopped = true;
    }
    chunk
}

/// Cut the file into pieces and deal them out to the parsing threads in
/// turn; runs on its own thread, which so also reads and hashes the file.
fn deal_pieces<R: BufRead>(
    mut splitter: Splitter<R>,
    to_parsers: Vec<std::sync::mpsc::SyncSender<Piece>>,
) {
    for k in 0.. {
        let Some(piece) = splitter.next_piece() else {
            return;
        };
        if to_parsers[k % to_parsers.len()].send(piece).is_err() {
            return; // The writer stopped: nothing more is wanted.
        }
    }
}

/// Parsing threads beside the one that cuts the file and the one that writes.
fn parser_count() -> usize {
    std::thread::available_parallelism().map_or(2, |n| n.get().clamp(1, 4))
}

/// Import an hourly file, naming it `name` in messages and in the ledger.
pub fn import_named(
    ledger: &mut Ledger,
    path: &Path,
    name: &str,
    correct: Option<&str>,
    stamp: &Stamp,
) -> Result<Outcome, ImportError> {
    let name = name.to_string();
    let meta = std::fs::metadata(path)
        .map_err(|e| ImportError::Read(format!("{name}: cannot read: {e}")))?;
    if !meta.is_file() {
        return Err(ImportError::Read(format!("{name}: not a regular file")));
    }
    let file = std::fs::File::open(path)
        .map_err(|e| ImportError::Read(format!("{name}: cannot read: {e}")))?;
    let mut input = BufReader::with_capacity(
        1 << 20,
        Hashing {
            inner: file,
            hasher: Sha256::new(),
        },
    );
    ledger.write(|tx| {
        let sites = tx.sites()?;
        let cems_units: HashMap<&str, bool> = sites
            .iter()
            .flat_map(|s| &s.units)
            .map(|u| (u.id.as_str(), u.methods.iter().any(|m| matches!(m.method, Method::Cems { .. }))))
            .collect();
        let mut reader = Reader::new(&mut input);
        let mut record = Record::default();
        let mut errors = Errors {
            kept: Vec::new(),
            omitted: 0,
        };
        let header_ok = reader.next_into(&mut record).map_err(|e| FileErrors::new(&name, vec![e]))?;
        if !header_ok {
            return Err(FileErrors::new(&name, vec![RowError::line(1, "empty file: expected a header row")]).into());
        }
        let optional: Vec<&str> = Reading::ALL.iter().map(|r| r.column()).collect();
        let columns = Columns::from_header(&record, REQUIRED, &optional).map_err(|e| FileErrors::new(&name, e))?;
        let layout = Layout::new(&columns);
        let batch_id = tx.next_batch_id()?;
        // A first load holds nothing to compare with.
        let first_load = tx.hourly_empty()?;
        let mut held_hours = HeldHours::default();
        // Per unit index of the file: its state, or why its rows are refused.
        let mut units: Vec<Result<UnitState, String>> = Vec::new();
        let mut unit_names: Vec<String> = Vec::new();
        let mut done = Outcome::default();
        let lines_before = reader.lines_read();
        let splitter = Splitter::new(reader.into_inner(), lines_before, PIECE_BYTES);
        // The file's units in order of first appearance, by name.
        let mut file_units: HashMap<String, usize> = HashMap::new();
        let written: Result<(), ImportError> = std::thread::scope(|scope| {
            let layout = &layout;
            let mut to_parsers = Vec::new();
            // Owned here, so an early return drops them and every thread stops.
            let mut from_parsers = Vec::new();
            for _ in 0..parser_count() {
                let (send_piece, pieces) = std::sync::mpsc::sync_channel::<Piece>(IN_FLIGHT);
                let (send_chunk, chunks) = std::sync::mpsc::sync_channel::<Chunk>(IN_FLIGHT);
                scope.spawn(move || {
                    for piece in pieces.iter() {
                        if send_chunk.send(parse_piece(layout, piece)).is_err() {
                            return;
                        }
                    }
                });
                to_parsers.push(send_piece);
                from_parsers.push(chunks);
            }
            scope.spawn(move || deal_pieces(splitter, to_parsers));
            // Chunks come back in the order the pieces were dealt.
            for k in 0.. {
                let Ok(chunk) = from_parsers[k % from_parsers.len()].recv() else {
                    break;
                };
                for e in chunk.errors {
                    errors.push(e);
                }
                let mut here = Vec::with_capacity(chunk.units.len());
                for unit in chunk.units {
                    if let Some(&i) = file_units.get(&unit) {
                        here.push(i);
                        continue;
                    }
                    here.push(units.len());
                    file_units.insert(unit.clone(), units.len());
                    let state = match cems_units.get(unit.as_str()) {
                        None => Err(format!("unknown unit {} (not in any site file)", shown(&unit))),
                        Some(false) => Err(format!(
                            "unit {unit} has no cems method in its site file, so its hourly data would not be used"
                        )),
                        Some(true) => Ok(UnitState {
                            unit_no: tx.hourly_unit_no(&unit)?,
                            columns: 0,
                            held_columns: if first_load { None } else { tx.hourly_present(&unit)? }
                                .map(|p| {
                                    p.iter()
                                        .enumerate()
                                        .filter(|(_, &on)| on)
                                        .fold(0u32, |m, (i, _)| m | 1 << i)
                                })
                                .unwrap_or(0),
                            lines: Vec::new(),
                            held_years: Vec::new(),
                            block: BlockBuilder::default(),
                        }),
                    };
                    units.push(state);
                    unit_names.push(unit);
                }
                for Parsed { line, unit, year, row } in chunk.rows {
                    let index = here[unit];
                    let unit = unit_names[index].as_str();
                    let state = match &mut units[index] {
                        Ok(state) => state,
                        Err(why) => {
                            errors.push(RowError::at(line, layout.unit + 1, "unit", why.clone()));
                            continue;
                        }
                    };
                    let (year_start, slots) = state.year_lines(year);
                    let slot = &mut slots[(row.hour - year_start) as usize];
                    if *slot != 0 {
                        errors.push(RowError::line(
                            line,
                            format!(
                                "unit {unit} hour {} appears twice in this file, on lines {} and {line}",
                                hour_label(row.hour),
                                *slot
                            ),
                        ));
                        continue;
                    }
                    *slot = u32::try_from(line).unwrap_or(u32::MAX);
                    let held_year = if first_load {
                        false
                    } else {
                        match state.held_years.iter().rev().find(|e| e.0 == year) {
                            Some(&(_, h)) => h,
                            None => {
                                let h = tx.holds_hours(state.unit_no, year_start, year_start + HOURS_PER_YEAR_MAX as i64)?;
                                state.held_years.push((year, h));
                                h
                            }
                        }
                    };
                    let held = if held_year { held_hours.current(tx, state.unit_no, row.hour, batch_id)? } else { None };
                    let corrects = match held {
                        None => false,
                        Some(held_row) => match row.first_difference(&held_row) {
                            None => {
                                done.present += 1;
                                continue;
                            }
                            Some(_) if correct.is_some() => true,
                            Some((field, was, now)) => {
                                errors.push(RowError::line(
                                    line,
                                    format!(
                                        "unit {unit} hour {} is already held with other values (field {field}: held {was}, here {now}); \
                                         to supersede it, import with --correct REASON",
                                        hour_label(row.hour)
                                    ),
                                ));
                                continue;
                            }
                        },
                    };
                    if let Some(why) = mixed_basis(&row, state.columns | state.held_columns) {
                        errors.push(RowError::line(line, format!("unit {unit}: {why}")));
                        continue;
                    }
                    if !errors.is_empty() {
                        // Once anything is refused nothing will be written: just keep checking.
                        continue;
                    }
                    for (i, v) in row.readings.iter().enumerate() {
                        if v.is_some() {
                            state.columns |= 1 << i;
                        }
                    }
                    let line = u32::try_from(line).map_err(|_| {
                        ImportError::Read(format!("{name}: line {line}: more lines than a file may hold"))
                    })?;
                    if !state.block.accepts(row.hour) {
                        tx.insert_block(batch_id, state.unit_no, &state.block)?;
                        state.block.clear();
                    }
                    state.block.push(line, &row);
                    if corrects {
                        done.corrected += 1;
                    } else {
                        done.added += 1;
                    }
                }
                if chunk.stopped {
                    break;
                }
            }
            Ok(())
        });
        written?;
        if !errors.is_empty() {
            errors.kept.sort_by_key(|e| e.line);
            let mut fe = FileErrors::new(&name, errors.kept);
            fe.omitted = errors.omitted;
            return Err(fe.into());
        }
        for state in units.iter().flatten() {
            if state.block.rows > 0 {
                tx.insert_block(batch_id, state.unit_no, &state.block)?;
            }
            for r in Reading::ALL {
                if state.columns & (1 << r.index()) != 0 {
                    tx.note_hourly_column(state.unit_no, r)?;
                }
            }
        }
        // Read to the end so the digest covers the whole file.
        while !input.fill_buf().map_err(|e| ImportError::Read(format!("{name}: {e}")))?.is_empty() {
            let n = input.buffer().len();
            input.consume(n);
        }
        if done.added + done.corrected == 0 && done.present == 0 {
            return Err(FileErrors::new(&name, vec![RowError::line(1, "no data rows after the header")]).into());
        }
        if done.added + done.corrected == 0 {
            return Ok(done);
        }
        let sha256 = super::hex(&input.get_ref().hasher.clone().finalize());
        let written = tx.insert_batch(&NewBatch {
            kind: "hourly",
            file_name: &name,
            sha256: &sha256,
            rows_added: done.added,
            rows_corrected: done.corrected,
            rows_present: done.present,
            at: &stamp.at,
            by: &stamp.by,
            reason: correct.filter(|_| done.corrected > 0),
        })?;
        assert_eq!(written, batch_id, "the batch id was reserved inside this transaction");
        Ok(done)
    })
}
