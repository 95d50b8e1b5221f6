//! Statistics of a lookback, once per missing-data period: the count, mean,
//! nearest-rank 90th and 95th percentiles and maximum of 40 CFR 75.33(b)
//! and (c), of the whole lookback (SO2) or by load range (flow, NOx rate).
//!
//! [`stats_of`] is the reference: sort the `Decimal`s, sum them exactly
//! (src/exact_sum.rs, so the order does not matter), divide. The fast path
//! here gives the same `Stats`, bit for bit, by selecting the percentiles
//! and maximum by integer order keys instead of sorting `Decimal`s, and by
//! computing only the load ranges the period's hours can use. It falls back
//! to the reference wherever it cannot show the results equal: a value too
//! large for its key, or two equal values written differently (`5.0` and
//! `5.00`) at a rank it picks, where the reference's pick is left open by
//! `sort_unstable`.

use super::{stats_of, QaValue, Stats, LOAD_RANGES};
use crate::decimal::POW10;
use crate::exact_sum::ExactSum;
use rust_decimal::Decimal;
use std::collections::VecDeque;

/// A value's place in `Decimal`'s order as an integer: the value × 10^28,
/// exact (every `Decimal` has at most 28 decimals), where it fits an i128
/// (magnitudes below about 1.7 × 10^10).
pub(super) fn order_key(v: Decimal) -> Option<i128> {
    v.mantissa()
        .checked_mul(POW10[(Decimal::MAX_SCALE - v.scale()) as usize] as i128)
}

/// The lookback values of clock hours after `oldest`.
fn recent(lookback: &VecDeque<QaValue>, oldest: i64) -> impl Iterator<Item = &QaValue> {
    lookback.iter().filter(move |v| v.clock_hour > oldest)
}

/// [`stats_of`] of keyed values (not empty), or `None` where the result
/// cannot be shown equal to it: the percentiles and maximum are selected
/// by key, and the exact sum is the same in any order.
fn keyed_stats(entries: &mut [(i128, Decimal)]) -> Option<Stats> {
    let mut sum = ExactSum::default();
    sum.extend(entries.iter().map(|e| e.1));
    let n = entries.len();
    let rank = |pct: usize| (pct * n).div_ceil(100) - 1;
    let (r90, r95) = (rank(90), rank(95));
    entries.select_nth_unstable_by_key(r90, |e| e.0);
    let tail = &mut entries[r90..];
    tail.sort_unstable_by_key(|e| e.0);
    let picked = [tail[0], tail[r95 - r90], tail[tail.len() - 1]];
    // The reference's value at each rank is one of those of equal key;
    // they must all be written alike.
    for p in picked {
        if entries
            .iter()
            .any(|e| e.0 == p.0 && e.1.serialize() != p.1.serialize())
        {
            return None;
        }
    }
    let count = u32::try_from(n).expect("lookbacks hold at most 2,160 values");
    Some(Stats {
        count,
        mean: sum.value() / Decimal::from(count),
        p90: picked[0].1,
        p95: picked[1].1,
        max: picked[2].1,
    })
}

/// Reusable buffers for lookback statistics, so a gap allocates nothing once warm.
#[derive(Debug, Default)]
pub(super) struct Scratch {
    /// (order key, value), grouped by load range where ranges apply.
    keyed: Vec<(i128, Decimal)>,
    values: Vec<Decimal>,
    plain: Vec<(u8, Decimal)>,
}

impl Scratch {
    /// Statistics of the whole recent lookback, as [`stats_of`] gives them.
    pub(super) fn whole(&mut self, lookback: &VecDeque<QaValue>, oldest: i64) -> Option<Stats> {
        self.keyed.clear();
        let mut keyed = true;
        for v in recent(lookback, oldest) {
            match v.key {
                Some(k) => self.keyed.push((k, v.value)),
                None => keyed = false,
            }
        }
        if self.keyed.is_empty() && keyed {
            return None;
        }
        if keyed {
            if let Some(s) = keyed_stats(&mut self.keyed) {
                return Some(s);
            }
        }
        whole_plain(lookback, oldest, &mut self.values)
    }

    /// Statistics by load range (`[k − 1]` for range k) of the ranges that
    /// hours at `hour_ranges` can use: each hour's own range, and where that
    /// holds no value, the next higher range that does (40 CFR 75.31(c),
    /// 75.33(c)(5)). Every range they can use is `Some` exactly when it
    /// holds values; ranges they cannot use may be `None` whatever they hold.
    pub(super) fn by_range(
        &mut self,
        lookback: &VecDeque<QaValue>,
        oldest: i64,
        hour_ranges: impl Iterator<Item = u8>,
    ) -> [Option<Stats>; LOAD_RANGES] {
        let mut counts = [0usize; LOAD_RANGES + 1];
        for v in recent(lookback, oldest) {
            counts[usize::from(v.range)] += 1;
        }
        let mut wanted = [false; LOAD_RANGES + 1];
        for r in hour_ranges {
            let r = usize::from(r).clamp(1, LOAD_RANGES);
            if let Some(used) = (r..=LOAD_RANGES).find(|&k| counts[k] > 0) {
                wanted[used] = true;
            }
        }
        // Group the wanted ranges' values by range, in one pass.
        let mut start = [0usize; LOAD_RANGES + 2];
        for k in 1..=LOAD_RANGES {
            start[k + 1] = start[k] + if wanted[k] { counts[k] } else { 0 };
        }
        let mut next = start;
        self.keyed.clear();
        self.keyed
            .resize(start[LOAD_RANGES + 1], (0, Decimal::ZERO));
        for v in recent(lookback, oldest) {
            let k = usize::from(v.range);
            if k == 0 || !wanted[k] {
                continue;
            }
            let Some(key) = v.key else {
                return by_range_plain(lookback, oldest, &mut self.plain, &mut self.values);
            };
            self.keyed[next[k]] = (key, v.value);
            next[k] += 1;
        }
        let mut out = [None; LOAD_RANGES];
        for k in (1..=LOAD_RANGES).filter(|&k| wanted[k]) {
            let group = &mut self.keyed[start[k]..start[k + 1]];
            match keyed_stats(group) {
                Some(s) => out[k - 1] = Some(s),
                None => return by_range_plain(lookback, oldest, &mut self.plain, &mut self.values),
            }
        }
        out
    }
}

/// The reference for [`Scratch::whole`]: [`stats_of`] over the recent lookback.
pub(super) fn whole_plain(
    lookback: &VecDeque<QaValue>,
    oldest: i64,
    values: &mut Vec<Decimal>,
) -> Option<Stats> {
    values.clear();
    values.extend(recent(lookback, oldest).map(|v| v.value));
    stats_of(values)
}

/// The reference for [`Scratch::by_range`]: [`stats_of`] of every range's values.
pub(super) fn by_range_plain(
    lookback: &VecDeque<QaValue>,
    oldest: i64,
    scratch: &mut Vec<(u8, Decimal)>,
    values: &mut Vec<Decimal>,
) -> [Option<Stats>; LOAD_RANGES] {
    scratch.clear();
    scratch.extend(
        recent(lookback, oldest)
            .filter(|v| v.range > 0)
            .map(|v| (v.range, v.value)),
    );
    scratch.sort_unstable_by_key(|&(r, _)| r);
    let mut ranges = [None; LOAD_RANGES];
    for (r, stats) in ranges.iter_mut().enumerate() {
        let range = r as u8 + 1;
        values.clear();
        values.extend(scratch.iter().filter(|(x, _)| *x == range).map(|&(_, v)| v));
        *stats = stats_of(values);
    }
    ranges
}
