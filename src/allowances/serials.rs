//! Serial-number blocks and the set of blocks one holder holds.
//!
//! A block names allowances by an inclusive range of serial numbers. A
//! holder's blocks are kept sorted, disjoint and merged where they touch, so
//! two equal holdings always compare equal.

use serde::Serialize;
use std::fmt;

/// An inclusive range of serial numbers, `serial_from` to `serial_to`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
pub struct SerialBlock {
    pub serial_from: u64,
    pub serial_to: u64,
}

impl SerialBlock {
    /// A block from its two ends, or `None` when `serial_to` is below `serial_from`.
    pub fn new(serial_from: u64, serial_to: u64) -> Option<SerialBlock> {
        (serial_from <= serial_to).then_some(SerialBlock {
            serial_from,
            serial_to,
        })
    }

    /// How many serials the block holds; `None` only for the one block
    /// `0..=u64::MAX`, whose length does not fit in a `u64`.
    pub fn serial_count(&self) -> Option<u64> {
        (self.serial_to - self.serial_from).checked_add(1)
    }

    fn overlaps(&self, other: &SerialBlock) -> bool {
        self.serial_from <= other.serial_to && other.serial_from <= self.serial_to
    }
}

impl fmt::Display for SerialBlock {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}-{}", self.serial_from, self.serial_to)
    }
}

/// The blocks one holder holds of one program and vintage.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Blocks(Vec<SerialBlock>);

impl Blocks {
    pub fn as_slice(&self) -> &[SerialBlock] {
        &self.0
    }

    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    /// Serials held in all blocks together. Every block came through a
    /// transaction whose quantity was checked, so the sum fits.
    pub fn serial_count(&self) -> u64 {
        self.0
            .iter()
            .map(|b| {
                b.serial_count()
                    .expect("held blocks passed the quantity limit")
            })
            .fold(0u64, |sum, n| {
                sum.checked_add(n).expect("held serials fit in u64")
            })
    }

    /// The lowest serial of `block` that is not held, if any.
    pub fn first_missing(&self, block: &SerialBlock) -> Option<u64> {
        let mut cursor = block.serial_from;
        for held in &self.0 {
            if held.serial_to < cursor {
                continue;
            }
            if held.serial_from > cursor {
                return Some(cursor);
            }
            if held.serial_to >= block.serial_to {
                return None;
            }
            cursor = held.serial_to + 1;
        }
        Some(cursor)
    }

    /// The lowest serial of `block` that is held, if any.
    pub fn first_held(&self, block: &SerialBlock) -> Option<u64> {
        self.0
            .iter()
            .find(|held| held.overlaps(block))
            .map(|held| held.serial_from.max(block.serial_from))
    }

    /// Remove every serial of `block` that is held, splitting blocks it cuts.
    pub fn remove(&mut self, block: &SerialBlock) {
        let mut kept = Vec::with_capacity(self.0.len() + 1);
        for held in &self.0 {
            if !held.overlaps(block) {
                kept.push(*held);
                continue;
            }
            if held.serial_from < block.serial_from {
                kept.push(SerialBlock {
                    serial_from: held.serial_from,
                    serial_to: block.serial_from - 1,
                });
            }
            if held.serial_to > block.serial_to {
                kept.push(SerialBlock {
                    serial_from: block.serial_to + 1,
                    serial_to: held.serial_to,
                });
            }
        }
        self.0 = kept;
    }

    /// Add a block none of whose serials is held, merging neighbours.
    pub fn insert(&mut self, block: SerialBlock) {
        assert!(
            self.first_held(&block).is_none(),
            "serials {block} are already held"
        );
        self.0.push(block);
        self.0.sort();
        let mut merged: Vec<SerialBlock> = Vec::with_capacity(self.0.len());
        for b in self.0.drain(..) {
            match merged.last_mut() {
                Some(last) if last.serial_to.checked_add(1) == Some(b.serial_from) => {
                    last.serial_to = b.serial_to
                }
                _ => merged.push(b),
            }
        }
        self.0 = merged;
    }

    /// Take the `count` lowest serials held (all of them if fewer are held).
    pub fn take_lowest(&mut self, count: u64) -> Vec<SerialBlock> {
        let mut taken = Vec::new();
        let mut left = count;
        while left > 0 {
            let Some(first) = self.0.first().copied() else {
                break;
            };
            let len = first
                .serial_count()
                .expect("held blocks passed the quantity limit");
            let block = if len <= left {
                first
            } else {
                SerialBlock {
                    serial_from: first.serial_from,
                    serial_to: first.serial_from + (left - 1),
                }
            };
            self.remove(&block);
            left -= block.serial_count().expect("part of a held block");
            taken.push(block);
        }
        taken
    }
}
