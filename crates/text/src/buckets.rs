//! Bucket labels: how counts, shares and numbers become discrete features.
//!
//! A label is both the readable part of a feature name and its hashed
//! payload, so every label here is part of the stable feature format. All
//! bucketing is integer arithmetic (or exact bit inspection for `f64`) so
//! that the same input gives the same bucket on every machine.

use std::fmt::{self, Write};

/// A short label built on the stack, so the hot path needs no heap.
#[derive(Clone, Copy)]
pub(crate) struct Label {
    bytes: [u8; Label::CAPACITY],
    len: usize,
}

impl Label {
    const CAPACITY: usize = 40;

    pub(crate) fn new() -> Self {
        Label {
            bytes: [0; Label::CAPACITY],
            len: 0,
        }
    }

    pub(crate) fn as_str(&self) -> &str {
        // Only whole `&str`s are ever appended, so the bytes are UTF-8.
        std::str::from_utf8(&self.bytes[..self.len]).unwrap_or("")
    }
}

impl Write for Label {
    fn write_str(&mut self, text: &str) -> fmt::Result {
        let end = self.len + text.len();
        if end > Label::CAPACITY {
            return Err(fmt::Error);
        }
        self.bytes[self.len..end].copy_from_slice(text.as_bytes());
        self.len = end;
        Ok(())
    }
}

impl Label {
    /// Appends text; the callers' labels always fit.
    fn text(mut self, text: &str) -> Self {
        let fits = self.write_str(text);
        debug_assert!(fits.is_ok(), "label too long");
        self
    }

    /// Appends a number in decimal, without the formatting machinery (this
    /// runs for every message).
    fn number(self, value: u64) -> Self {
        let mut digits = [0u8; 20];
        let mut start = digits.len();
        let mut rest = value;
        loop {
            start -= 1;
            digits[start] = b'0' + (rest % 10) as u8;
            rest /= 10;
            if rest == 0 {
                break;
            }
        }
        // Only ASCII digits were written.
        self.text(std::str::from_utf8(&digits[start..]).unwrap_or(""))
    }
}

/// Lengths of `2^20` characters or more share one bucket.
const LENGTH_TOP_EXPONENT: u32 = 20;

/// Length in characters, log2 buckets: `0`, `1`, `2-3`, `4-7`, ...,
/// `524288-1048575`, `1048576+`.
pub(crate) fn length_label(chars: usize) -> Label {
    if chars == 0 {
        return Label::new().text("0");
    }
    let exponent = chars.ilog2();
    if exponent >= LENGTH_TOP_EXPONENT {
        return Label::new().number(1u64 << LENGTH_TOP_EXPONENT).text("+");
    }
    if exponent == 0 {
        return Label::new().text("1");
    }
    let low = 1u64 << exponent;
    let high = (low << 1) - 1;
    Label::new().number(low).text("-").number(high)
}

/// Share `part / whole` in log2 buckets: `none`, `<1/32`, `1/32-1/16`,
/// `1/16-1/8`, `1/8-1/4`, `1/4-1/2`, `1/2-1`, `all`. A bucket `1/2^k-1/2^(k-1)`
/// holds shares from `1/2^k` inclusive to `1/2^(k-1)` exclusive. `None` when
/// `whole` is 0 (no share to speak of).
pub(crate) fn share_label(part: usize, whole: usize) -> Option<&'static str> {
    const BUCKETS: [&str; 5] = ["1/2-1", "1/4-1/2", "1/8-1/4", "1/16-1/8", "1/32-1/16"];
    if whole == 0 {
        return None;
    }
    if part == 0 {
        return Some("none");
    }
    if part >= whole {
        return Some("all");
    }
    let part = part as u128;
    let whole = whole as u128;
    for (k, name) in (1u32..).zip(BUCKETS) {
        if part << k >= whole {
            return Some(name);
        }
    }
    Some("<1/32")
}

/// A small count in doubling buckets: `0`, `1`, `2-3`, `4-7`, `8+`.
pub(crate) fn count_label(count: usize) -> &'static str {
    match count {
        0 => "0",
        1 => "1",
        2..=3 => "2-3",
        4..=7 => "4-7",
        _ => "8+",
    }
}

/// A run of `!`: `1`, `2`, `3+`.
pub(crate) fn exclaim_label(run: usize) -> &'static str {
    match run {
        0 | 1 => "1",
        2 => "2",
        _ => "3+",
    }
}

/// Numbers with more digits than this share one bucket.
const MAX_NUMBER_DIGITS: usize = 20;

/// Digit count of a number: `1` .. `20`, then `21+`.
pub(crate) fn digits_label(digits: usize) -> Label {
    if digits > MAX_NUMBER_DIGITS {
        Label::new().number(MAX_NUMBER_DIGITS as u64 + 1).text("+")
    } else {
        Label::new().number(digits as u64)
    }
}

/// A `meta` number in log2 buckets of its magnitude: `0`, `nan`, `inf`,
/// `-inf`, or `2^k` / `-2^k` for `2^k <= |x| < 2^(k+1)`. `k` is read from
/// the bits of the double, so it is exact (`floor(log2 |x|)`, subnormals
/// included); `-0.0` is `0`.
pub(crate) fn number_label(value: f64) -> Label {
    if value.is_nan() {
        return Label::new().text("nan");
    }
    if value == 0.0 {
        return Label::new().text("0");
    }
    let sign = if value < 0.0 { "-" } else { "" };
    if value.is_infinite() {
        return Label::new().text(sign).text("inf");
    }
    let bits = value.abs().to_bits();
    let biased = (bits >> 52) as i32;
    let exponent = if biased == 0 {
        // Subnormal: value = mantissa * 2^-1074.
        let mantissa = bits & ((1u64 << 52) - 1);
        63 - mantissa.leading_zeros() as i32 - 1074
    } else {
        biased - 1023
    };
    let magnitude = Label::new().text(sign).text("2^");
    if exponent < 0 {
        magnitude
            .text("-")
            .number(u64::from(exponent.unsigned_abs()))
    } else {
        magnitude.number(u64::from(exponent.unsigned_abs()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn length_buckets_double() {
        let cases = [
            (0, "0"),
            (1, "1"),
            (2, "2-3"),
            (3, "2-3"),
            (4, "4-7"),
            (80, "64-127"),
            (127, "64-127"),
            (128, "128-255"),
            (2048, "2048-4095"),
            ((1 << 20) - 1, "524288-1048575"),
            (1 << 20, "1048576+"),
            (usize::MAX, "1048576+"),
        ];
        for (chars, expected) in cases {
            assert_eq!(length_label(chars).as_str(), expected, "{chars} chars");
        }
    }

    #[test]
    fn share_buckets_have_inclusive_lower_bounds() {
        let cases = [
            (0, 10, Some("none")),
            (10, 10, Some("all")),
            (5, 10, Some("1/2-1")),
            (9, 10, Some("1/2-1")),
            (4, 10, Some("1/4-1/2")),
            (1, 4, Some("1/4-1/2")),
            (1, 8, Some("1/8-1/4")),
            (1, 9, Some("1/16-1/8")),
            (1, 32, Some("1/32-1/16")),
            (1, 33, Some("<1/32")),
            (1, usize::MAX, Some("<1/32")),
            (0, 0, None),
        ];
        for (part, whole, expected) in cases {
            assert_eq!(share_label(part, whole), expected, "{part}/{whole}");
        }
    }

    #[test]
    fn count_and_run_buckets() {
        let counts: Vec<&str> = [0, 1, 2, 3, 4, 7, 8, 1000].map(count_label).to_vec();
        assert_eq!(counts, ["0", "1", "2-3", "2-3", "4-7", "4-7", "8+", "8+"]);
        let runs: Vec<&str> = [1, 2, 3, 16].map(exclaim_label).to_vec();
        assert_eq!(runs, ["1", "2", "3+", "3+"]);
        assert_eq!(digits_label(5).as_str(), "5");
        assert_eq!(digits_label(20).as_str(), "20");
        assert_eq!(digits_label(21).as_str(), "21+");
    }

    #[test]
    fn number_buckets_are_exact_floor_log2() {
        // Powers of two sit at the bottom of their bucket; IEEE 754 binary64
        // limits for the extremes (smallest subnormal 2^-1074, largest
        // finite just under 2^1024).
        let cases = [
            (1.0, "2^0"),
            (1.999, "2^0"),
            (2.0, "2^1"),
            (3.0, "2^1"),
            (0.5, "2^-1"),
            (0.3, "2^-2"),
            (1000.0, "2^9"),
            (1024.0, "2^10"),
            (-40.0, "-2^5"),
            (0.0, "0"),
            (-0.0, "0"),
            (f64::from_bits(1), "2^-1074"),
            (f64::MIN_POSITIVE, "2^-1022"),
            (f64::MAX, "2^1023"),
            (f64::INFINITY, "inf"),
            (f64::NEG_INFINITY, "-inf"),
            (f64::NAN, "nan"),
        ];
        for (value, expected) in cases {
            assert_eq!(number_label(value).as_str(), expected, "{value}");
        }
    }

    #[test]
    fn decimal_numbers() {
        for value in [0u64, 7, 10, 99, 100, 65_535, u64::MAX] {
            assert_eq!(Label::new().number(value).as_str(), value.to_string());
        }
    }

    #[test]
    fn label_refuses_overflow() {
        let mut label = Label::new();
        assert!(label.write_str(&"x".repeat(41)).is_err());
        assert_eq!(label.as_str(), "");
    }
}
