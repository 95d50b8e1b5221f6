//! Strict decimal parsing for input files.
//!
//! Accepted: ASCII digits with at most one `.` and at least one digit,
//! optionally a leading `-` where the caller allows negatives. Refused, each
//! with its own reason: exponents, `+`, spaces, thousands separators, `NaN`,
//! `inf`, hexadecimal and non-ASCII digits. Nothing is ever rounded: a value
//! with more digits than `Decimal` holds exactly is refused.
//!
//! Also the two integer pieces the fast paths share: powers of ten and a
//! `Decimal` built from its mantissa's magnitude.

use rust_decimal::Decimal;
use thiserror::Error;

/// 10^0 ..= 10^38, every power of ten a u128 holds.
pub const POW10: [u128; 39] = {
    let mut t = [1u128; 39];
    let mut i = 1;
    while i < t.len() {
        t[i] = t[i - 1] * 10;
        i += 1;
    }
    t
};

/// The `Decimal` whose mantissa has magnitude `u` (below 2^96) and the sign
/// given, at `scale` (at most 28), from its parts: the checked constructors
/// cost more on the hot paths than what they check.
#[inline]
pub fn from_magnitude(u: u128, negative: bool, scale: u32) -> Decimal {
    debug_assert!(u < 1u128 << 96 && scale <= Decimal::MAX_SCALE);
    Decimal::from_parts(
        u as u32,
        (u >> 32) as u32,
        (u >> 64) as u32,
        negative,
        scale,
    )
}

/// Most significant digits a `Decimal` holds without rounding.
const DIGITS_MAX: usize = 28;

#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum DecimalError {
    #[error("empty")]
    Empty,
    #[error("not a number")]
    NotANumber,
    #[error("exponents are not accepted; write the digits out")]
    Exponent,
    #[error("spaces are not accepted")]
    Space,
    #[error("thousands separators are not accepted")]
    Separator,
    #[error("a leading + is not accepted")]
    Plus,
    #[error("negative values are not accepted")]
    Negative,
    #[error("more than {DIGITS_MAX} significant digits cannot be held exactly")]
    TooLong,
}

/// Parse a decimal written as plain digits. `allow_negative` admits a leading `-`.
pub fn parse_decimal(text: &str, allow_negative: bool) -> Result<Decimal, DecimalError> {
    if text.is_empty() {
        return Err(DecimalError::Empty);
    }
    let lower = text.to_ascii_lowercase();
    if matches!(
        lower.trim_start_matches(['-', '+']),
        "nan" | "inf" | "infinity"
    ) {
        return Err(DecimalError::NotANumber);
    }
    if text.chars().any(char::is_whitespace) {
        return Err(DecimalError::Space);
    }
    let (negative, body) = match text.as_bytes()[0] {
        b'-' => (true, &text[1..]),
        b'+' => return Err(DecimalError::Plus),
        _ => (false, text),
    };
    if negative && !allow_negative {
        return Err(DecimalError::Negative);
    }
    if body.starts_with("0x") || body.starts_with("0X") {
        return Err(DecimalError::NotANumber);
    }
    let mut digits = 0usize;
    let mut dots = 0usize;
    for c in body.chars() {
        match c {
            '0'..='9' => digits += 1,
            '.' => dots += 1,
            'e' | 'E' if digits > 0 => return Err(DecimalError::Exponent),
            ',' | '_' | '\'' => return Err(DecimalError::Separator),
            _ => return Err(DecimalError::NotANumber),
        }
    }
    if digits == 0 || dots > 1 {
        return Err(DecimalError::NotANumber);
    }
    let significant = body
        .trim_start_matches(['0', '.'])
        .chars()
        .filter(char::is_ascii_digit)
        .count();
    if significant > DIGITS_MAX || digits > DIGITS_MAX + 1 {
        return Err(DecimalError::TooLong);
    }
    let value = Decimal::from_str_exact(text).map_err(|_| DecimalError::TooLong)?;
    // "-0" is zero; keep it unsigned so stored text is canonical.
    Ok(if value.is_zero() {
        Decimal::ZERO.with_scale_of(value)
    } else {
        value
    })
}

trait WithScale {
    fn with_scale_of(self, other: Decimal) -> Decimal;
}

impl WithScale for Decimal {
    fn with_scale_of(self, other: Decimal) -> Decimal {
        let mut d = self;
        d.rescale(other.scale());
        d
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rust_decimal_macros::dec;

    fn check(text: &str, expected: Result<Decimal, DecimalError>) {
        assert_eq!(parse_decimal(text, false), expected, "input {text:?}");
    }

    #[test]
    fn plain_digits_parse_exactly() {
        check("0", Ok(dec!(0)));
        check("12.50", Ok(dec!(12.50)));
        check(".5", Ok(dec!(0.5)));
        check("5.", Ok(dec!(5)));
        check("0.0000001", Ok(dec!(0.0000001)));
        assert_eq!(parse_decimal("12.50", false).unwrap().scale(), 2);
    }

    #[test]
    fn every_bad_form_has_its_own_reason() {
        check("", Err(DecimalError::Empty));
        check("NaN", Err(DecimalError::NotANumber));
        check("inf", Err(DecimalError::NotANumber));
        check("-inf", Err(DecimalError::NotANumber));
        check("1e309", Err(DecimalError::Exponent));
        check("1e3", Err(DecimalError::Exponent));
        check("1,5", Err(DecimalError::Separator));
        check("+5", Err(DecimalError::Plus));
        check(" 5", Err(DecimalError::Space));
        check("0x10", Err(DecimalError::NotANumber));
        check("５", Err(DecimalError::NotANumber));
        check("-5", Err(DecimalError::Negative));
        check("1.2.3", Err(DecimalError::NotANumber));
        check(".", Err(DecimalError::NotANumber));
        check("12345678901234567890123456789", Err(DecimalError::TooLong));
    }

    #[test]
    fn negative_zero_is_zero_where_negatives_are_allowed() {
        assert_eq!(parse_decimal("-0", true), Ok(dec!(0)));
        assert!(!parse_decimal("-0.00", true).unwrap().is_sign_negative());
        assert_eq!(parse_decimal("-2.5", true), Ok(dec!(-2.5)));
    }

    proptest::proptest! {
        #[test]
        fn formatted_decimals_round_trip(mantissa in 0i64..i64::MAX, scale in 0u32..12) {
            let d = Decimal::new(mantissa, scale);
            proptest::prop_assert_eq!(parse_decimal(&d.to_string(), false), Ok(d));
        }

        #[test]
        fn arbitrary_text_parses_exactly_or_is_refused(text in "\\PC{0,12}") {
            if let Ok(d) = parse_decimal(&text, true) {
                // Whatever is accepted is exactly the decimal written.
                proptest::prop_assert_eq!(Decimal::from_str_exact(&text).unwrap(), d);
            }
        }
    }
}

/// Why a fixed-point reading was refused.
#[derive(Debug, Error, Clone, PartialEq, Eq)]
pub enum FixedError {
    #[error(transparent)]
    Decimal(#[from] DecimalError),
    #[error("more than {0} decimal places")]
    Scale(u32),
}

/// Parse plain decimal text into an integer count of 10^-`scale` units, by
/// the same rules as [`parse_decimal`] (no sign, exponent or separator).
/// Faster than going through `Decimal` for the hourly path; a value with
/// more decimals than `scale` is refused, never rounded.
pub fn parse_fixed(text: &str, scale: u32) -> Result<i64, FixedError> {
    // The common case, at most 18 digits and one dot, in one pass without
    // overflow checks. Anything else, and every refusal's reason but too
    // many decimals, is the general loop's.
    let bytes = text.as_bytes();
    // 18 bytes hold at most 18 digits: no i64 overflow.
    if !bytes.is_empty() && bytes.len() <= 18 && scale <= 18 {
        let mut units = 0i64;
        let mut dot = None;
        let mut plain = true;
        for (i, &b) in bytes.iter().enumerate() {
            let d = b.wrapping_sub(b'0');
            if d < 10 {
                units = units * 10 + i64::from(d);
            } else if b == b'.' && dot.is_none() {
                dot = Some(i);
            } else {
                plain = false;
                break;
            }
        }
        let decimals = dot.map_or(0, |i| bytes.len() - i - 1) as u32;
        // A dot alone is no number: the loop says so.
        if plain && bytes.len() > usize::from(dot.is_some()) {
            let mut decimals = decimals;
            // Zeros after the last significant decimal are exact.
            while decimals > scale && units % 10 == 0 {
                units /= 10;
                decimals -= 1;
            }
            if decimals > scale {
                return Err(FixedError::Scale(scale));
            }
            return units
                .checked_mul(10i64.pow(scale - decimals))
                .ok_or(FixedError::Decimal(DecimalError::TooLong));
        }
    }
    parse_fixed_general(text, scale)
}

/// [`parse_fixed`] digit by digit, for any text.
fn parse_fixed_general(text: &str, scale: u32) -> Result<i64, FixedError> {
    let bytes = text.as_bytes();
    let mut int_part: i64 = 0;
    let mut frac_digits = 0u32;
    let mut seen_dot = false;
    let mut digits = 0usize;
    for &b in bytes {
        match b {
            b'0'..=b'9' => {
                digits += 1;
                if seen_dot {
                    frac_digits += 1;
                    if frac_digits > scale {
                        // Trailing zeros beyond the scale are still exact.
                        if b == b'0' {
                            frac_digits -= 1;
                            continue;
                        }
                        return Err(FixedError::Scale(scale));
                    }
                }
                int_part = int_part
                    .checked_mul(10)
                    .and_then(|v| v.checked_add(i64::from(b - b'0')))
                    .ok_or(DecimalError::TooLong)?;
            }
            b'.' if !seen_dot => seen_dot = true,
            // Anything else: let the strict parser name the reason.
            _ => {
                return Err(parse_decimal(text, false)
                    .err()
                    .unwrap_or(DecimalError::NotANumber)
                    .into())
            }
        }
    }
    if digits == 0 {
        return Err(parse_decimal(text, false)
            .err()
            .unwrap_or(DecimalError::NotANumber)
            .into());
    }
    10i64
        .checked_pow(scale - frac_digits)
        .and_then(|p| int_part.checked_mul(p))
        .ok_or(FixedError::Decimal(DecimalError::TooLong))
}

#[cfg(test)]
mod fixed_tests {
    use super::*;

    proptest::proptest! {
        /// Whatever text: accepted exactly when the strict `Decimal` parser
        /// accepts it and its value fits `scale` decimals and an i64, and
        /// then the same number of 10^-scale units.
        #[test]
        fn fixed_agrees_with_the_decimal_parser(
            text in "[0-9]{0,22}(\\.[0-9]{0,9})?|\\PC{0,8}",
            scale in 0u32..=8,
        ) {
            let reference = parse_decimal(&text, false).ok().and_then(|d| {
                let n = d.normalize();
                if n.scale() > scale {
                    return None;
                }
                let units = n.mantissa().checked_mul(10i128.pow(scale - n.scale()))?;
                i64::try_from(units).ok()
            });
            proptest::prop_assert_eq!(parse_fixed(&text, scale).ok(), reference, "{:?}", text);
        }

        /// The fast path gives what the general loop gives, refusals included.
        #[test]
        fn fixed_fast_path_is_the_general_loop(
            text in "[0-9]{0,20}(\\.[0-9]{0,12})?0{0,4}|[0-9.]{0,8}|\\PC{0,8}",
            scale in 0u32..=20,
        ) {
            proptest::prop_assert_eq!(parse_fixed(&text, scale), parse_fixed_general(&text, scale), "{:?}", text);
        }
    }

    #[test]
    fn nineteen_digits_go_to_the_checked_loop() {
        // Found by the proptest: 19 digits overflowed the unchecked pass.
        assert_eq!(
            parse_fixed("9999999999999999999", 0),
            Err(FixedError::Decimal(DecimalError::TooLong))
        );
        assert_eq!(
            parse_fixed("999999999999999999", 0),
            Ok(999_999_999_999_999_999)
        );
        assert_eq!(
            parse_fixed("1000000000000000000", 0),
            Ok(1_000_000_000_000_000_000)
        );
    }

    #[test]
    fn fixed_point_parses_exactly_and_refuses_what_it_cannot_hold() {
        assert_eq!(parse_fixed("12.5", 3), Ok(12_500));
        assert_eq!(parse_fixed("0.001", 3), Ok(1));
        assert_eq!(parse_fixed("7", 2), Ok(700));
        assert_eq!(parse_fixed("1.2500", 2), Ok(125));
        assert_eq!(parse_fixed("0.125", 2), Err(FixedError::Scale(2)));
        assert_eq!(
            parse_fixed("", 2),
            Err(FixedError::Decimal(DecimalError::Empty))
        );
        assert_eq!(
            parse_fixed("NaN", 2),
            Err(FixedError::Decimal(DecimalError::NotANumber))
        );
        assert_eq!(
            parse_fixed("-1", 2),
            Err(FixedError::Decimal(DecimalError::Negative))
        );
        assert_eq!(
            parse_fixed("1e3", 2),
            Err(FixedError::Decimal(DecimalError::Exponent))
        );
        assert_eq!(
            parse_fixed("99999999999999999999", 2),
            Err(FixedError::Decimal(DecimalError::TooLong))
        );
    }

    proptest::proptest! {
        #[test]
        fn fixed_agrees_with_decimal(mantissa in 0i64..1_000_000_000_000, scale in 0u32..7) {
            let d = Decimal::new(mantissa, scale);
            let text = d.to_string();
            let fixed = parse_fixed(&text, 6).unwrap();
            proptest::prop_assert_eq!(Decimal::new(fixed, 6), d);
        }
    }
}
