//! Window lengths and points in time as operators type them, and times as
//! reports print them.
//!
//! Lengths are a whole number and one unit: `7d`, `24h`, `90m`, `3600s`.
//! A point in time is RFC 3339 (`2026-12-02T10:00:00Z`, any offset, any
//! fraction of a second, cut to milliseconds) or milliseconds since the Unix
//! epoch (`1796199330250`). Reports print times as RFC 3339 in UTC with
//! milliseconds.
//!
//! The calendar arithmetic is the `time` crate's. Nothing here reads the
//! clock.

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

/// Milliseconds since the Unix epoch of
/// `YYYY-MM-DDTHH:MM:SS[.fraction](Z|+HH:MM|-HH:MM)`, RFC 3339 section 5.6,
/// read by the `time` crate. A space between date and time is accepted as
/// the section's note allows; fractions finer than a millisecond are cut.
pub fn parse_rfc3339(text: &str) -> Result<i64, &'static str> {
    let joined;
    let text = if text.len() > 10 && text.as_bytes()[10] == b' ' {
        joined = format!("{}T{}", &text[..10], &text[11..]);
        joined.as_str()
    } else {
        text
    };
    let time = time::OffsetDateTime::parse(text, &time::format_description::well_known::Rfc3339)
        .map_err(|_| "it is not an RFC 3339 time such as 2026-12-02T10:00:00Z")?;
    i64::try_from(time.unix_timestamp_nanos().div_euclid(1_000_000))
        .map_err(|_| "it is out of range")
}

/// `ms` as RFC 3339 in UTC with milliseconds, e.g.
/// `2026-12-02T10:00:00.000Z`. Times before 1970 or after 9999 are
/// clamped to those ends (no report holds such times).
pub fn rfc3339(ms: i64) -> String {
    let ms = ms.clamp(0, MAX_TIME_MS);
    let Ok(time) = time::OffsetDateTime::from_unix_timestamp_nanos(i128::from(ms) * 1_000_000)
    else {
        return format!("{ms} ms");
    };
    let (year, month, day) = (time.year(), u8::from(time.month()), time.day());
    let (hour, minute, second) = (time.hour(), time.minute(), time.second());
    let milli = time.millisecond();
    format!("{year:04}-{month:02}-{day:02}T{hour:02}:{minute:02}:{second:02}.{milli:03}Z")
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
        let not_rfc3339 = "not an RFC 3339 time";
        for (text, why) in [
            ("yesterday", not_rfc3339),
            ("2026-02-30T00:00:00Z", not_rfc3339),
            ("2025-02-29T00:00:00Z", not_rfc3339),
            ("2026-13-01T00:00:00Z", not_rfc3339),
            ("2026-12-02T24:00:00Z", not_rfc3339),
            ("2026-12-02T10:00:00.5", not_rfc3339),
            ("2026-12-02T10:00:00+0200", not_rfc3339),
            ("2026-12-02T10:00:00.Z", not_rfc3339),
            ("2026/12/02T10:00:00Z", not_rfc3339),
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
