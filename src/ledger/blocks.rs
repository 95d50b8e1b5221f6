//! The byte layout of an hourly block (schema/0005_hourly_blocks.sql): up
//! to `BLOCK_ROWS` unit-hours of one unit from one import, in strictly
//! ascending hour and line order. Pure encoding and decoding, no SQL.
//!
//! Layout, every integer an unsigned LEB128 varint:
//!   per row: hour − previous hour (the first row: hour − `first_hour`, so 0),
//!            line − previous line (the first row: the line itself),
//!            op_time in hundredths (one varint, 0..=100),
//!            a mask of the readings present (bit i: `Reading::ALL[i]`),
//!            then each present reading, in `Reading::ALL` order.
//! Decoding checks everything the old per-column CHECKs did (op_time 0–1,
//! readings non-negative and within their bounds) and that the bytes end
//! exactly after `row_count` rows, so a damaged blob is an error, never a
//! wrong row.

use crate::records::{HourRow, Reading, READING_SCALE};

/// Rows per block at most: bounds what an import buffers per unit and what
/// one lookup decodes.
pub const BLOCK_ROWS: usize = 512;

/// One stored unit-hour: the row and the line of its file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct BlockRow {
    pub line: u32,
    pub row: HourRow,
}

/// A block being filled by an import.
#[derive(Debug, Default)]
pub struct BlockBuilder {
    pub first_hour: i64,
    pub last_hour: i64,
    pub rows: usize,
    last_line: u32,
    pub bytes: Vec<u8>,
}

fn put(out: &mut Vec<u8>, mut v: u64) {
    while v >= 0x80 {
        out.push((v as u8) | 0x80);
        v >>= 7;
    }
    out.push(v as u8);
}

/// Upper bounds of the readings as stored integers: (limit, exclusive).
fn limits() -> [Option<(i64, bool)>; Reading::COUNT] {
    let mut out = [None; Reading::COUNT];
    for r in Reading::ALL {
        out[r.index()] = r.upper_bound().map(|(bound, exclusive, _)| {
            let mut scaled = bound;
            scaled.rescale(READING_SCALE);
            (
                i64::try_from(scaled.mantissa()).expect("bounds are small"),
                exclusive,
            )
        });
    }
    out
}

impl BlockBuilder {
    /// Whether `hour` can follow the rows held (blocks are hour-ascending).
    pub fn accepts(&self, hour: i64) -> bool {
        self.rows == 0 || (self.rows < BLOCK_ROWS && hour > self.last_hour)
    }

    /// Append a row; the caller checked `accepts` and the row's ranges.
    pub fn push(&mut self, line: u32, row: &HourRow) {
        assert!(self.accepts(row.hour), "block rows must ascend by hour");
        assert!(
            (0..=100).contains(&row.op_time_centi),
            "op_time checked by the parser"
        );
        if self.rows == 0 {
            self.first_hour = row.hour;
            put(&mut self.bytes, 0);
            put(&mut self.bytes, u64::from(line));
        } else {
            assert!(line > self.last_line, "block rows must ascend by line");
            put(&mut self.bytes, (row.hour - self.last_hour) as u64);
            put(&mut self.bytes, u64::from(line - self.last_line));
        }
        put(&mut self.bytes, row.op_time_centi as u64);
        let mask = row
            .readings
            .iter()
            .enumerate()
            .filter(|(_, v)| v.is_some())
            .fold(0u64, |m, (i, _)| m | 1 << i);
        put(&mut self.bytes, mask);
        for v in row.readings.iter().flatten() {
            assert!(*v >= 0, "readings checked by the parser");
            put(&mut self.bytes, *v as u64);
        }
        self.last_hour = row.hour;
        self.last_line = line;
        self.rows += 1;
    }

    /// Empty the builder for the next block, keeping its buffer.
    pub fn clear(&mut self) {
        self.rows = 0;
        self.bytes.clear();
    }
}

/// What a stored block's columns say about its bytes.
#[derive(Clone, Copy, Debug)]
pub struct BlockHead {
    pub first_hour: i64,
    pub last_hour: i64,
    pub row_count: i64,
}

struct Bytes<'a> {
    b: &'a [u8],
    at: usize,
}

impl Bytes<'_> {
    fn varint(&mut self) -> Result<u64, String> {
        let mut v = 0u64;
        for shift in (0..64).step_by(7) {
            let Some(&byte) = self.b.get(self.at) else {
                return Err("ends inside a row".into());
            };
            self.at += 1;
            let part = u64::from(byte & 0x7f);
            if shift == 63 && part > 1 {
                return Err("a number overflows".into());
            }
            v |= part << shift;
            if byte & 0x80 == 0 {
                return Ok(v);
            }
        }
        Err("a number overflows".into())
    }

    fn int(&mut self) -> Result<i64, String> {
        i64::try_from(self.varint()?).map_err(|_| "a number overflows".to_string())
    }
}

/// Decode a block, calling `f` for each row in order. Errors say what is
/// wrong with the bytes; the caller names the block.
pub fn decode(head: BlockHead, bytes: &[u8], mut f: impl FnMut(BlockRow)) -> Result<(), String> {
    if head.row_count < 1 || head.row_count > BLOCK_ROWS as i64 {
        return Err(format!("row count {} out of range", head.row_count));
    }
    let limits = limits();
    let mut b = Bytes { b: bytes, at: 0 };
    let mut hour = head.first_hour;
    let mut line = 0i64;
    for i in 0..head.row_count {
        let dh = b.int()?;
        let dl = b.int()?;
        if i == 0 {
            if dh != 0 {
                return Err("first row is not at first_hour".into());
            }
        } else if dh < 1 || dl < 1 {
            return Err("rows do not ascend by hour and line".into());
        }
        hour = hour.checked_add(dh).ok_or("an hour overflows")?;
        line = line.checked_add(dl).ok_or("a line overflows")?;
        let line = u32::try_from(line).map_err(|_| "a line overflows".to_string())?;
        if line == 0 {
            return Err("line 0".into());
        }
        let op_time_centi = b.int()?;
        if !(0..=100).contains(&op_time_centi) {
            return Err(format!("op_time {op_time_centi} out of range"));
        }
        let mask = b.varint()?;
        if mask >> Reading::COUNT != 0 {
            return Err("unknown reading in the mask".into());
        }
        let mut readings = [None; Reading::COUNT];
        for (k, slot) in readings.iter_mut().enumerate() {
            if mask & (1 << k) == 0 {
                continue;
            }
            let v = b.int()?;
            if let Some((limit, exclusive)) = limits[k] {
                if v > limit || (exclusive && v == limit) {
                    return Err(format!("{} {v} out of range", Reading::ALL[k].column()));
                }
            }
            *slot = Some(v);
        }
        f(BlockRow {
            line,
            row: HourRow {
                hour,
                op_time_centi,
                readings,
            },
        });
    }
    if hour != head.last_hour {
        return Err("last row is not at last_hour".into());
    }
    if b.at != bytes.len() {
        return Err("bytes left after the last row".into());
    }
    Ok(())
}

/// Decode a whole block into a vector.
pub fn decode_all(head: BlockHead, bytes: &[u8]) -> Result<Vec<BlockRow>, String> {
    let mut out = Vec::with_capacity(head.row_count.clamp(0, BLOCK_ROWS as i64) as usize);
    decode(head, bytes, |r| out.push(r))?;
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn row(hour: i64, op: i64, readings: [Option<i64>; Reading::COUNT]) -> HourRow {
        HourRow {
            hour,
            op_time_centi: op,
            readings,
        }
    }

    fn head(b: &BlockBuilder) -> BlockHead {
        BlockHead {
            first_hour: b.first_hour,
            last_hour: b.last_hour,
            row_count: b.rows as i64,
        }
    }

    fn reading() -> impl Strategy<Value = Option<i64>> {
        prop_oneof![Just(None), (0i64..20_899_999).prop_map(Some)]
    }

    proptest! {
        // Every row written comes back exactly, in order.
        #[test]
        fn round_trip(
            start in 0i64..1_000_000,
            rows in proptest::collection::vec(
                (1i64..50, 1u32..5, 0i64..=100, proptest::array::uniform11(reading())),
                1..BLOCK_ROWS,
            ),
        ) {
            let mut b = BlockBuilder::default();
            let (mut hour, mut line) = (start, 1u32);
            let mut want = Vec::new();
            for (dh, dl, op, readings) in rows {
                let r = row(hour, op, readings);
                b.push(line, &r);
                want.push(BlockRow { line, row: r });
                hour += dh;
                line += dl;
            }
            prop_assert_eq!(decode_all(head(&b), &b.bytes).unwrap(), want);
        }

        // Any single changed byte or cut is either refused or decodes to
        // different rows; it never panics.
        #[test]
        fn damage_never_panics(at in 0usize..200, flip in 1u8..=255, cut in 0usize..200) {
            let mut b = BlockBuilder::default();
            for i in 0..20 {
                b.push(10 + i as u32, &row(1000 + i, 100, [Some(i * 1_000_001); Reading::COUNT].map(|v| v.map(|x| x % 20_000_000))));
            }
            let mut bytes = b.bytes.clone();
            let at = at % bytes.len();
            bytes[at] ^= flip;
            let _ = decode_all(head(&b), &bytes);
            let cut = cut % b.bytes.len();
            prop_assert!(decode_all(head(&b), &b.bytes[..cut]).is_err());
        }
    }

    #[test]
    fn refuses_what_the_old_checks_refused() {
        let mut b = BlockBuilder::default();
        let mut readings = [None; Reading::COUNT];
        readings[Reading::O2PctDry.index()] = Some(5_000_000);
        b.push(2, &row(10, 100, readings));
        let good = b.bytes.clone();
        assert!(decode_all(head(&b), &good).is_ok());
        // O2 at 20.9 % (stored 20_900_000) is out of range, as the schema's CHECK said.
        let mut bad = good[..4].to_vec();
        put(&mut bad, 20_900_000);
        let e = decode_all(head(&b), &bad).unwrap_err();
        assert!(e.contains("o2_pct_dry"), "{e}");
        // op_time 101 hundredths.
        let mut op = good.clone();
        op[2] = 101;
        assert!(decode_all(head(&b), &op).unwrap_err().contains("op_time"));
        // A wrong row count or last hour.
        let wrong = BlockHead {
            row_count: 2,
            ..head(&b)
        };
        assert!(decode_all(wrong, &good).is_err());
        let wrong = BlockHead {
            last_hour: 11,
            ..head(&b)
        };
        assert!(decode_all(wrong, &good).is_err());
    }

    #[test]
    fn a_block_takes_ascending_hours_up_to_its_size() {
        let mut b = BlockBuilder::default();
        assert!(b.accepts(5));
        b.push(1, &row(5, 0, [None; Reading::COUNT]));
        assert!(!b.accepts(5) && !b.accepts(4) && b.accepts(6));
        for i in 1..BLOCK_ROWS as i64 {
            b.push(1 + i as u32, &row(5 + i, 0, [None; Reading::COUNT]));
        }
        assert!(!b.accepts(10_000));
    }
}
