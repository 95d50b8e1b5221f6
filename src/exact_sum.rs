//! Sums of many `Decimal`s, rounded once.
//!
//! `Decimal` rounds a sum to the 28 or 29 significant digits it holds at
//! every addition, so a year of hourly values summed one by one can carry
//! a rounding per hour, and the result depends on the order of the terms.
//! An [`ExactSum`] keeps the total exactly: each term's integer mantissa
//! goes into a bucket of its scale, and the buckets fold into a 256-bit
//! integer count of 10⁻²⁸ (every `Decimal` is a whole number of those).
//! [`ExactSum::value`] rounds it once, half to even, to the most digits a
//! `Decimal` holds. Where the total fits without rounding, the result is
//! what `Decimal` addition gives: the same digits and the same scale (the
//! largest scale among the non-zero terms; `Decimal` drops a zero
//! operand's scale, so that 0.00 + 0.9 is 0.9).

use crate::decimal::{from_magnitude, POW10};
use rust_decimal::Decimal;

/// Finest scale of a `Decimal`.
const SCALE_MAX: u32 = 28;

/// A two's-complement 256-bit integer: `high · 2^128 + low`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
struct Wide {
    low: u128,
    high: u128,
}

impl Wide {
    fn add(&mut self, low: u128, high: u128) {
        let (l, carry) = self.low.overflowing_add(low);
        self.low = l;
        self.high = self.high.wrapping_add(high).wrapping_add(u128::from(carry));
    }

    fn sub(&mut self, low: u128, high: u128) {
        let (l, borrow) = self.low.overflowing_sub(low);
        self.low = l;
        self.high = self
            .high
            .wrapping_sub(high)
            .wrapping_sub(u128::from(borrow));
    }

    fn negated(self) -> Wide {
        let mut zero = Wide::default();
        zero.sub(self.low, self.high);
        zero
    }

    /// Whether the value is negative, and its magnitude.
    fn sign_and_magnitude(self) -> (bool, Wide) {
        let negative = self.high >> 127 == 1;
        (negative, if negative { self.negated() } else { self })
    }

    /// Divide a non-negative value by `d` (not zero), returning the remainder.
    fn div_rem(&mut self, d: u64) -> u64 {
        let d = u128::from(d);
        let mut rem = 0u128;
        let mut limbs = [
            self.high >> 64,
            self.high as u64 as u128,
            self.low >> 64,
            self.low as u64 as u128,
        ];
        for limb in &mut limbs {
            let cur = (rem << 64) | *limb;
            *limb = cur / d;
            rem = cur % d;
        }
        self.high = (limbs[0] << 64) | limbs[1];
        self.low = (limbs[2] << 64) | limbs[3];
        rem as u64
    }

    /// The value if it is below 2^96.
    fn below_2_96(&self) -> Option<u128> {
        (self.high == 0 && self.low < 1u128 << 96).then_some(self.low)
    }
}

/// Terms a bucket takes before it is folded: each mantissa is below 2^96,
/// so 2^30 of them stay below 2^126 in an i128.
const FOLD_AT: u32 = 1 << 30;

/// `a × b` as (low, high) halves of 256 bits.
fn product(a: u128, b: u128) -> (u128, u128) {
    let (a0, a1) = (a as u64 as u128, a >> 64);
    let (b0, b1) = (b as u64 as u128, b >> 64);
    let (p00, p01, p10, p11) = (a0 * b0, a0 * b1, a1 * b0, a1 * b1);
    let (low, c1) = p00.overflowing_add(p01 << 64);
    let (low, c2) = low.overflowing_add(p10 << 64);
    let high = p11 + (p01 >> 64) + (p10 >> 64) + u128::from(c1) + u128::from(c2);
    (low, high)
}

/// An exact running total of `Decimal`s. The folded total (each term below
/// 2^190 units of 10⁻²⁸) stays within 256 bits for 2^64 terms, far more
/// than the hours of any year.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ExactSum {
    /// Σ mantissas of the terms of each scale since the last fold.
    buckets: [i128; SCALE_MAX as usize + 1],
    /// Terms since the last fold.
    terms: u32,
    /// The folded total in units of 10⁻²⁸.
    total: Wide,
    /// Largest scale among the non-zero terms.
    scale: u32,
    /// The scale of the last term, where every term so far was zero.
    zero_scale: Option<u32>,
    nonzero: bool,
}

impl Default for ExactSum {
    fn default() -> ExactSum {
        ExactSum {
            buckets: [0; SCALE_MAX as usize + 1],
            terms: 0,
            total: Wide::default(),
            scale: 0,
            zero_scale: None,
            nonzero: false,
        }
    }
}

impl ExactSum {
    pub fn add(&mut self, term: Decimal) {
        let m = term.mantissa();
        if m == 0 {
            self.zero_scale = Some(term.scale());
            return;
        }
        let s = term.scale();
        self.scale = self.scale.max(s);
        self.nonzero = true;
        self.buckets[s as usize] += m;
        self.terms += 1;
        if self.terms == FOLD_AT {
            self.fold();
        }
    }

    fn fold(&mut self) {
        for (s, bucket) in self.buckets.iter_mut().enumerate() {
            if *bucket != 0 {
                let (low, high) = product(bucket.unsigned_abs(), POW10[SCALE_MAX as usize - s]);
                if *bucket < 0 {
                    self.total.sub(low, high);
                } else {
                    self.total.add(low, high);
                }
                *bucket = 0;
            }
        }
        self.terms = 0;
    }

    /// Add another sum's terms, exactly.
    pub fn merge(&mut self, mut other: ExactSum) {
        self.fold();
        other.fold();
        self.total.add(other.total.low, other.total.high);
        if other.nonzero {
            self.scale = self.scale.max(other.scale);
            self.nonzero = true;
        }
        if other.zero_scale.is_some() && !other.nonzero {
            self.zero_scale = other.zero_scale;
        }
    }

    /// The exact total times `factor`.
    pub fn times(mut self, factor: u32) -> ExactSum {
        self.fold();
        let (negative, magnitude) = self.total.sign_and_magnitude();
        let (low, carry) = product(magnitude.low, u128::from(factor));
        let (high, _) = product(magnitude.high, u128::from(factor));
        let mut out = Wide { low, high };
        out.high = out.high.wrapping_add(carry);
        self.total = if negative { out.negated() } else { out };
        if factor == 0 {
            self.nonzero = false;
            self.zero_scale = Some(self.scale);
        }
        self
    }

    /// The total, rounded half to even to the most digits a `Decimal` holds.
    ///
    /// Panics where the total is beyond `Decimal`'s range (about 7.9 × 10²⁸),
    /// as `Decimal` addition does.
    pub fn value(&self) -> Decimal {
        let mut folded = *self;
        folded.fold();
        let (negative, magnitude) = folded.total.sign_and_magnitude();
        let scale = match self.zero_scale {
            Some(s) if !self.nonzero => s,
            _ => self.scale,
        };
        // Drop the digits below the terms' largest scale (all zero), then
        // as many more as it takes to fit 96 bits.
        let mut dropped = SCALE_MAX - scale;
        loop {
            if let Some(m) = rounded(magnitude, dropped).below_2_96() {
                let scale = SCALE_MAX
                    .checked_sub(dropped)
                    .expect("a sum beyond the range of Decimal");
                return from_magnitude(m, negative && m != 0, scale);
            }
            dropped += 1;
        }
    }
}

/// `value / 10^digits`, rounded half to even.
fn rounded(mut value: Wide, digits: u32) -> Wide {
    if digits == 0 {
        return value;
    }
    // All but the last dropped digit decide only whether anything was dropped.
    let mut sticky = false;
    let mut left = digits - 1;
    while left > 0 {
        let k = left.min(19);
        sticky |= value.div_rem(POW10[k as usize] as u64) != 0;
        left -= k;
    }
    let last = value.div_rem(10);
    let odd = value.low & 1 == 1;
    if last > 5 || (last == 5 && (sticky || odd)) {
        value.add(1, 0);
    }
    value
}

impl Extend<Decimal> for ExactSum {
    fn extend<I: IntoIterator<Item = Decimal>>(&mut self, terms: I) {
        for t in terms {
            self.add(t);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use rust_decimal_macros::dec;

    fn sum(terms: &[Decimal]) -> Decimal {
        let mut s = ExactSum::default();
        s.extend(terms.iter().copied());
        s.value()
    }

    /// Same digits and scale, not only the same number.
    fn same(a: Decimal, b: Decimal) -> bool {
        a.mantissa() == b.mantissa() && a.scale() == b.scale()
    }

    #[test]
    fn exact_totals_are_decimal_addition() {
        assert!(same(sum(&[]), Decimal::ZERO));
        assert!(same(sum(&[dec!(0.00), dec!(0.9)]), dec!(0.00) + dec!(0.9)));
        assert!(same(sum(&[dec!(0.9), dec!(0.00)]), dec!(0.9)));
        assert!(same(sum(&[dec!(0.00), dec!(0.000)]), dec!(0.000)));
        assert!(same(sum(&[dec!(1.25), dec!(-3.5), dec!(2)]), dec!(-0.25)));
        assert!(same(sum(&[dec!(0.50), dec!(0.50)]), dec!(1.00)));
    }

    #[test]
    fn one_rounding_half_to_even() {
        // 1/3 to 28 places three times: exactly 0.9999…9 (28 nines).
        let third = Decimal::ONE / Decimal::from(3);
        let s = sum(&[third, third, third]);
        assert_eq!(s.to_string(), format!("0.{}", "9".repeat(28)));
        // 10^28 + 0.5 rounds to the even 10^28; + 1.5 to 10^28 + 2.
        let big = Decimal::from_i128_with_scale(10i128.pow(28), 0);
        assert!(same(sum(&[big, dec!(0.5)]), big));
        assert!(same(sum(&[big, dec!(1.5)]), big + dec!(2)));
        // Just past a half rounds up.
        assert!(same(sum(&[big, dec!(0.5000000001)]), big + Decimal::ONE));
    }

    #[test]
    fn times_is_exact_before_the_one_rounding() {
        // Σ of three 1/3 (28 places) × 2000: exactly 1999.99…98, 29 digits, not rounded.
        let third = Decimal::ONE / Decimal::from(3);
        let mut s = ExactSum::default();
        s.extend([third, third, third]);
        let lb = s.times(2000).value();
        let third_times_6000 = "1999.".to_string() + &"9".repeat(24) + "8";
        assert_eq!(lb.to_string(), third_times_6000);
        let mut n = ExactSum::default();
        n.extend([dec!(-1.5), dec!(0.25)]);
        assert!(same(n.times(2000).value(), dec!(-2500.00)));
    }

    #[test]
    #[should_panic(expected = "beyond the range")]
    fn beyond_decimal_range_panics_as_decimal_does() {
        sum(&[Decimal::MAX, Decimal::MAX]);
    }

    /// A term: any mantissa below 2^96 at any scale.
    fn term() -> impl Strategy<Value = Decimal> {
        (any::<i128>(), 0u32..=28, 0u32..=96).prop_map(|(m, s, bits)| {
            let m = m % (1i128 << bits.max(1)).min((1i128 << 96) - 1);
            Decimal::from_i128_with_scale(m, s)
        })
    }

    /// Reference: the exact total in i128 units of 10⁻²⁸ (where it fits),
    /// rounded with i128 arithmetic, half to even.
    fn reference(terms: &[Decimal]) -> Option<Decimal> {
        let mut total: i128 = 0;
        // Decimal's rule: the largest scale of a non-zero term, else the last zero's.
        let scale = terms
            .iter()
            .filter(|t| !t.is_zero())
            .map(|t| t.scale())
            .max()
            .or(terms.last().map(|t| t.scale()))
            .unwrap_or(0);
        for t in terms {
            total = total.checked_add(t.mantissa().checked_mul(10i128.pow(28 - t.scale()))?)?;
        }
        let mut dropped = 28 - scale;
        loop {
            let d = 10i128.pow(dropped);
            let (q, r) = (total.abs() / d, total.abs() % d);
            let q = if 2 * r > d || (2 * r == d && q % 2 == 1) {
                q + 1
            } else {
                q
            };
            if q < 1i128 << 96 {
                return Some(Decimal::from_i128_with_scale(
                    total.signum() * q,
                    28 - dropped,
                ));
            }
            dropped += 1;
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(4000))]
        /// Wherever plain `Decimal` addition is exact (small terms), the
        /// same number, and the same digits and scale unless a partial sum
        /// cancels to zero (where `Decimal` then drops that zero's scale).
        #[test]
        fn matches_exact_decimal_addition(terms in proptest::collection::vec(
            (-1_000_000i64..1_000_000, 0u32..=6).prop_map(|(m, s)| Decimal::new(m, s)), 0..50)) {
            let mut plain = Decimal::ZERO;
            let mut cancelled = false;
            for (i, &t) in terms.iter().enumerate() {
                plain += t;
                cancelled |= plain.is_zero() && i + 1 < terms.len() && !t.is_zero();
            }
            let exact = sum(&terms);
            prop_assert_eq!(exact, plain);
            if !cancelled {
                prop_assert!(same(exact, plain), "{} vs {}", exact, plain);
            }
        }

        /// Any terms whose exact total fits i128: the i128 reference's rounding.
        #[test]
        fn matches_the_i128_reference(terms in proptest::collection::vec(term(), 0..8)) {
            if let Some(expected) = reference(&terms) {
                let got = sum(&terms);
                prop_assert!(same(got, expected), "{} vs {}", got, expected);
            }
        }

        /// `times(f)` is the exact total times f, rounded once (the i128 reference).
        #[test]
        fn times_matches_the_i128_reference(terms in proptest::collection::vec(term(), 0..6), f in 0u32..5000) {
            let scaled: Vec<Decimal> = terms.iter().map(|t| *t / Decimal::from(10_000)).collect();
            let mut s = ExactSum::default();
            s.extend(scaled.iter().copied());
            if f > 0 && scaled.iter().all(|t| (t.mantissa() * i128::from(f)).unsigned_abs() < 1u128 << 96) {
                let by_terms: Vec<Decimal> = scaled.iter().map(|t| Decimal::from_i128_with_scale(t.mantissa() * i128::from(f), t.scale())).collect();
                if let Some(expected) = reference(&by_terms) {
                    let got = s.times(f).value();
                    prop_assert_eq!(got, expected);
                }
            }
        }

        /// Merging two sums is summing all their terms.
        #[test]
        fn merge_is_one_sum(a in proptest::collection::vec(term(), 0..10), b in proptest::collection::vec(term(), 1..10)) {
            let small = |v: &Vec<Decimal>| -> Vec<Decimal> { v.iter().map(|t| *t / Decimal::from(1_000)).collect() };
            let (a, b) = (small(&a), small(&b));
            let mut left = ExactSum::default();
            left.extend(a.iter().copied());
            let mut right = ExactSum::default();
            right.extend(b.iter().copied());
            left.merge(right);
            let all: Vec<Decimal> = a.iter().chain(b.iter()).copied().collect();
            prop_assert!(same(left.value(), sum(&all)));
        }

        /// The order of the terms does not matter.
        #[test]
        fn order_free(mut terms in proptest::collection::vec(term(), 0..30)) {
            let bounded: Vec<Decimal> = terms.iter().map(|t| *t / Decimal::from(1_000_000)).collect();
            terms = bounded;
            let forward = sum(&terms);
            terms.reverse();
            prop_assert!(same(sum(&terms), forward));
        }
    }
}
