//! Window lengths and points in time as operators type them, and times as
//! reports print them.
//!
//! Lengths are a whole number and one unit: `7d`, `24h`, `90m`, `3600s`.
//! A point in time is RFC 3339 (`2026-12-02T10:00:00Z`, any offset, any
//! fraction of a second, cut to milliseconds) or milliseconds since the Unix
//! epoch (`1796199330250`). Reports print times as RFC 3339 in UTC with
//! milliseconds.
//!
//! The calendar arithmetic is the proleptic Gregorian calendar of RFC 3339
//! section 5.6, with the day-count conversions `days_from_civil` and
//! `civil_from_days` of Howard Hinnant's "chrono-Compatible Low-Level Date
//! Algorithms" (from memory). Nothing here reads the clock.

use std::time::Duration;

/// Milliseconds in a second, minute, hour and day.
const SECOND_MS: i64 = 1_000;
const MINUTE_MS: i64 = 60 * SECOND_MS;
const HOUR_MS: i64 = 60 * MINUTE_MS;
const DAY_MS: i64 = 24 * HOUR_MS;

/// The longest window accepted: ten years of 365 days, far beyond any
/// audit retention, and small enough that window arithmetic cannot
/// overflow.
pub const MAX_SPAN_MS: i64 = 3650 * DAY_MS;

/// The latest time accepted or printed: 9999-12-31T23:59:59.999Z, the end
/// of the four-digit years RFC 3339 writes.
pub const MAX_TIME_MS: i64 = 253_402_300_799_999;

/// Text that is not a window length or a point in time.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum InputError {
    /// A length without its unit (`90`), or with one not known (`90x`).
    #[error(
        "{text:?} is not a length: write a whole number and a unit d, h, m or s (e.g. 7d, 24h, 90m, 3600s)"
    )]
    BadSpan {
        /// The text given.
        text: String,
    },

    /// A length of zero: a window must hold some time.
    #[error("{text:?}: a window must be longer than zero")]
    ZeroSpan {
        /// The text given.
        text: String,
    },

    /// A length over [`MAX_SPAN_MS`].
    #[error("{text:?}: a window may be at most 3650d (ten years)")]
    SpanTooLong {
        /// The text given.
        text: String,
    },

    /// Neither RFC 3339 nor a count of milliseconds, or a date that does
    /// not exist (February 30th), or a time outside years 1970 to 9999.
    #[error(
        "{text:?} is not a time: write RFC 3339 (e.g. 2026-12-02T10:00:00Z) or milliseconds since 1970-01-01T00:00:00Z; {why}"
    )]
    BadTime {
        /// The text given.
        text: String,
        /// What was wrong with it.
        why: &'static str,
    },
}

/// Reads a window length such as `7d`, `24h`, `90m` or `3600s`.
///
/// Errors: [`InputError::BadSpan`] for anything but digits and one unit,
/// [`InputError::ZeroSpan`] for zero, [`InputError::SpanTooLong`] past
/// [`MAX_SPAN_MS`].
pub fn parse_span(text: &str) -> Result<Duration, InputError> {
    let bad = || InputError::BadSpan {
        text: text.to_owned(),
    };
    let trimmed = text.trim();
    let split = trimmed
        .find(|c: char| !c.is_ascii_digit())
        .ok_or_else(bad)?;
    let (digits, unit) = trimmed.split_at(split);
    if digits.is_empty() {
        return Err(bad());
    }
    let unit_ms = match unit {
        "d" => DAY_MS,
        "h" => HOUR_MS,
        "m" => MINUTE_MS,
        "s" => SECOND_MS,
        _ => return Err(bad()),
    };
    let too_long = || InputError::SpanTooLong {
        text: text.to_owned(),
    };
    // Digits only, so the one failure left is a number too large for i64.
    let count: i64 = digits.parse().map_err(|_| too_long())?;
    let ms = count.checked_mul(unit_ms).ok_or_else(too_long)?;
    if ms == 0 {
        return Err(InputError::ZeroSpan {
            text: text.to_owned(),
        });
    }
    if ms > MAX_SPAN_MS {
        return Err(too_long());
    }
    Ok(Duration::from_millis(ms.unsigned_abs()))
}

/// A window length in the largest unit that divides it: `7d`, `36h`,
/// `90m`, `3601s`; below a second, milliseconds (`250ms`).
pub fn format_span(span: Duration) -> String {
    let ms = span_ms(span);
    for (unit_ms, unit) in [
        (DAY_MS, "d"),
        (HOUR_MS, "h"),
        (MINUTE_MS, "m"),
        (SECOND_MS, "s"),
    ] {
        if ms >= unit_ms && ms % unit_ms == 0 {
            let count = ms / unit_ms;
            return format!("{count}{unit}");
        }
    }
    format!("{ms}ms")
}

/// A length in whole milliseconds, saturating far beyond [`MAX_SPAN_MS`].
pub fn span_ms(span: Duration) -> i64 {
    i64::try_from(span.as_millis()).unwrap_or(i64::MAX)
}

/// Reads a point in time: RFC 3339 with any offset, or milliseconds since
/// the Unix epoch.
///
/// Errors: [`InputError::BadTime`], saying what was wrong.
pub fn parse_time(text: &str) -> Result<i64, InputError> {
    let trimmed = text.trim();
    let bad = |why| InputError::BadTime {
        text: text.to_owned(),
        why,
    };
    if !trimmed.is_empty() && trimmed.bytes().all(|b| b.is_ascii_digit()) {
        let ms: i64 = trimmed
            .parse()
            .map_err(|_| bad("the number is too large"))?;
        if ms > MAX_TIME_MS {
            return Err(bad("it is after the year 9999"));
        }
        return Ok(ms);
    }
    let ms = parse_rfc3339(trimmed).map_err(bad)?;
    if !(0..=MAX_TIME_MS).contains(&ms) {
        return Err(bad("it is outside the years 1970 to 9999"));
    }
    Ok(ms)
}

/// `YYYY-MM-DDTHH:MM:SS[.fraction](Z|+HH:MM|-HH:MM)`, RFC 3339 section 5.6.
/// `t`, `z` and a space between date and time are accepted as its notes
/// allow. A leap second (`:60`) reads as the second after `:59`.
fn parse_rfc3339(text: &str) -> Result<i64, &'static str> {
    let bytes = text.as_bytes();
    if bytes.len() < 20 {
        return Err("it is too short for RFC 3339");
    }
    let number = |from: usize, len: usize| -> Result<i64, &'static str> {
        let part = &bytes[from..from + len];
        if !part.iter().all(u8::is_ascii_digit) {
            return Err("a date or time field is not a number");
        }
        Ok(part
            .iter()
            .fold(0_i64, |acc, &b| acc * 10 + i64::from(b - b'0')))
    };
    let expect = |at: usize, allowed: &[u8], why: &'static str| -> Result<(), &'static str> {
        if allowed.contains(&bytes[at]) {
            Ok(())
        } else {
            Err(why)
        }
    };
    expect(4, b"-", "the date must be YYYY-MM-DD")?;
    expect(7, b"-", "the date must be YYYY-MM-DD")?;
    expect(10, b"Tt ", "date and time must be joined by T")?;
    expect(13, b":", "the time must be HH:MM:SS")?;
    expect(16, b":", "the time must be HH:MM:SS")?;
    let year = number(0, 4)?;
    let month = number(5, 2)?;
    let day = number(8, 2)?;
    let hour = number(11, 2)?;
    let minute = number(14, 2)?;
    let second = number(17, 2)?;
    if !(1..=12).contains(&month) {
        return Err("the month must be 01 to 12");
    }
    if day < 1 || day > days_in_month(year, month) {
        return Err("no such day in that month");
    }
    if hour > 23 || minute > 59 || second > 60 {
        return Err("the time of day is out of range");
    }

    let mut at = 19;
    let mut fraction_ms = 0;
    if bytes[at] == b'.' {
        at += 1;
        let start = at;
        while at < bytes.len() && bytes[at].is_ascii_digit() {
            at += 1;
        }
        if at == start {
            return Err("a decimal point must be followed by digits");
        }
        // Milliseconds from the first three digits; the rest is cut.
        let digits = &bytes[start..at.min(start + 3)];
        let scale = [100, 10, 1];
        fraction_ms = digits
            .iter()
            .zip(scale)
            .map(|(&b, weight)| i64::from(b - b'0') * weight)
            .sum();
    }
    let offset_ms = match &bytes[at..] {
        [b'Z' | b'z'] => 0,
        [sign @ (b'+' | b'-'), h1, h2, b':', m1, m2] => {
            let digits = [*h1, *h2, *m1, *m2];
            if !digits.iter().all(u8::is_ascii_digit) {
                return Err("the offset must be Z or +HH:MM / -HH:MM");
            }
            let hours = i64::from(h1 - b'0') * 10 + i64::from(h2 - b'0');
            let minutes = i64::from(m1 - b'0') * 10 + i64::from(m2 - b'0');
            if hours > 23 || minutes > 59 {
                return Err("the offset is out of range");
            }
            let size = hours * HOUR_MS + minutes * MINUTE_MS;
            if *sign == b'+' { size } else { -size }
        }
        _ => return Err("the offset must be Z or +HH:MM / -HH:MM"),
    };
    let days = days_from_civil(year, month, day);
    let local_ms = days * DAY_MS + hour * HOUR_MS + minute * MINUTE_MS + second * SECOND_MS;
    // Local time minus its offset is UTC.
    Ok(local_ms + fraction_ms - offset_ms)
}

/// `ms` as RFC 3339 in UTC with milliseconds, e.g.
/// `2026-12-02T10:00:00.000Z`. Times before 1970 or after 9999 are
/// clamped to those ends (no report holds such times).
pub fn rfc3339(ms: i64) -> String {
    let ms = ms.clamp(0, MAX_TIME_MS);
    let days = ms.div_euclid(DAY_MS);
    let of_day = ms.rem_euclid(DAY_MS);
    let (year, month, day) = civil_from_days(days);
    let hour = of_day / HOUR_MS;
    let minute = of_day % HOUR_MS / MINUTE_MS;
    let second = of_day % MINUTE_MS / SECOND_MS;
    let milli = of_day % SECOND_MS;
    format!("{year:04}-{month:02}-{day:02}T{hour:02}:{minute:02}:{second:02}.{milli:03}Z")
}

fn is_leap_year(year: i64) -> bool {
    (year % 4 == 0 && year % 100 != 0) || year % 400 == 0
}

fn days_in_month(year: i64, month: i64) -> i64 {
    match month {
        2 if is_leap_year(year) => 29,
        2 => 28,
        4 | 6 | 9 | 11 => 30,
        _ => 31,
    }
}

/// Days from 1970-01-01 to the given date (Hinnant's `days_from_civil`).
fn days_from_civil(year: i64, month: i64, day: i64) -> i64 {
    let year = if month <= 2 { year - 1 } else { year };
    let era = year.div_euclid(400);
    let year_of_era = year - era * 400;
    // Months counted from March, so that February's leap day is last.
    let month_from_march = (month + 9) % 12;
    let day_of_year = (153 * month_from_march + 2) / 5 + day - 1;
    let day_of_era = year_of_era * 365 + year_of_era / 4 - year_of_era / 100 + day_of_year;
    era * 146_097 + day_of_era - 719_468
}

/// The date `days` after 1970-01-01 (Hinnant's `civil_from_days`).
fn civil_from_days(days: i64) -> (i64, i64, i64) {
    let shifted = days + 719_468;
    let era = shifted.div_euclid(146_097);
    let day_of_era = shifted - era * 146_097;
    let year_of_era =
        (day_of_era - day_of_era / 1460 + day_of_era / 36_524 - day_of_era / 146_096) / 365;
    let day_of_year = day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);
    let month_from_march = (5 * day_of_year + 2) / 153;
    let day = day_of_year - (153 * month_from_march + 2) / 5 + 1;
    let month = if month_from_march < 10 {
        month_from_march + 3
    } else {
        month_from_march - 9
    };
    let year = year_of_era + era * 400 + i64::from(month <= 2);
    (year, month, day)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spans_in_each_unit() {
        assert_eq!(parse_span("7d"), Ok(Duration::from_secs(7 * 86_400)));
        assert_eq!(parse_span("24h"), Ok(Duration::from_secs(86_400)));
        assert_eq!(parse_span("90m"), Ok(Duration::from_secs(5_400)));
        assert_eq!(parse_span("3600s"), Ok(Duration::from_secs(3_600)));
        assert_eq!(parse_span(" 1h "), Ok(Duration::from_secs(3_600)));
        assert_eq!(parse_span("3650d"), Ok(Duration::from_secs(3650 * 86_400)));
    }

    #[test]
    fn bad_spans_say_what_is_allowed() {
        for text in ["", "d", "7", "7 d", "7days", "1.5h", "-1h", "7D", "h7"] {
            let err = parse_span(text).unwrap_err();
            assert_eq!(
                err,
                InputError::BadSpan {
                    text: text.to_owned()
                }
            );
            assert!(err.to_string().contains("7d, 24h, 90m, 3600s"), "{err}");
        }
        assert!(matches!(parse_span("0m"), Err(InputError::ZeroSpan { .. })));
        assert!(matches!(
            parse_span("3651d"),
            Err(InputError::SpanTooLong { .. })
        ));
        assert!(matches!(
            parse_span("99999999999999999999s"),
            Err(InputError::SpanTooLong { .. })
        ));
        assert!(matches!(
            parse_span("9223372036854775807d"),
            Err(InputError::SpanTooLong { .. })
        ));
    }

    #[test]
    fn spans_print_in_the_largest_whole_unit() {
        assert_eq!(format_span(Duration::from_secs(7 * 86_400)), "7d");
        assert_eq!(format_span(Duration::from_secs(36 * 3_600)), "36h");
        assert_eq!(format_span(Duration::from_secs(5_400)), "90m");
        assert_eq!(format_span(Duration::from_secs(3_601)), "3601s");
        assert_eq!(format_span(Duration::from_millis(250)), "250ms");
        for text in ["7d", "36h", "90m", "3601s"] {
            assert_eq!(format_span(parse_span(text).unwrap()), text);
        }
    }

    #[test]
    fn times_print_as_utc_rfc3339() {
        // Epoch seconds checked with GNU date (`date -u -d @951782400`):
        // 951782400 is 2000-02-29T00:00:00Z, a leap day of a year divisible
        // by 400; 1798761599 is 2026-12-31T23:59:59Z.
        assert_eq!(rfc3339(0), "1970-01-01T00:00:00.000Z");
        assert_eq!(rfc3339(951_782_400_000), "2000-02-29T00:00:00.000Z");
        assert_eq!(rfc3339(1_798_761_599_999), "2026-12-31T23:59:59.999Z");
        assert_eq!(rfc3339(MAX_TIME_MS), "9999-12-31T23:59:59.999Z");
        assert_eq!(rfc3339(-5), "1970-01-01T00:00:00.000Z");
    }

    #[test]
    fn times_parse_from_rfc3339_or_milliseconds() {
        // GNU date: `date -u -d '2026-12-02T10:15:30.250+02:00' +%s.%N`
        // gives 1796199330.250000000.
        assert_eq!(
            parse_time("2026-12-02T10:15:30.250+02:00"),
            Ok(1_796_199_330_250)
        );
        assert_eq!(
            parse_time("2026-12-02T08:15:30.250999Z"),
            Ok(1_796_199_330_250)
        );
        assert_eq!(parse_time("2026-12-02 08:15:30.25z"), Ok(1_796_199_330_250));
        assert_eq!(parse_time("2000-02-29T00:00:00Z"), Ok(951_782_400_000));
        assert_eq!(parse_time("1796199330250"), Ok(1_796_199_330_250));
        assert_eq!(parse_time("0"), Ok(0));
        for ms in [0, 951_782_400_000, 1_796_199_330_250, MAX_TIME_MS] {
            assert_eq!(parse_time(&rfc3339(ms)), Ok(ms));
        }
    }

    #[test]
    fn bad_times_say_why() {
        for (text, why) in [
            ("yesterday", "too short"),
            ("2026-02-30T00:00:00Z", "no such day"),
            ("2025-02-29T00:00:00Z", "no such day"),
            ("2026-13-01T00:00:00Z", "month"),
            ("2026-12-02T24:00:00Z", "time of day"),
            ("2026-12-02T10:00:00.5", "offset"),
            ("2026-12-02T10:00:00+0200", "offset"),
            ("2026-12-02T10:00:00.Z", "decimal point"),
            ("2026/12/02T10:00:00Z", "YYYY-MM-DD"),
            ("1969-12-31T23:59:59Z", "1970"),
            ("99999999999999999999", "too large"),
            ("253402300800000", "9999"),
        ] {
            match parse_time(text) {
                Err(InputError::BadTime { why: got, .. }) => {
                    assert!(got.contains(why), "{text}: {got}");
                }
                other => panic!("{text}: {other:?}"),
            }
        }
    }
}
