//! Caps on how much of a raw mail is read, and the record of which cap hit.
//!
//! A mail gateway hands over whatever arrived, so every cost of parsing (size,
//! MIME nesting, part and header counts, decoded bytes, wall time) has a cap.
//! Hitting a cap never fails the parse: the mail is read as far as allowed and
//! a [`Truncation`] says which cap stopped it.

use std::time::Duration;

/// Caps applied by [`crate::parse_mail`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct MailLimits {
    /// Raw bytes read; the rest of a longer mail is ignored.
    pub max_bytes: usize,
    /// Deepest MIME entity read; the top-level message is depth 0 and each
    /// multipart level adds one.
    pub max_mime_depth: usize,
    /// MIME entities read, counting the top-level message and containers.
    pub max_parts: usize,
    /// Header fields read over the whole mail, all parts together.
    pub max_headers: usize,
    /// Bytes produced by undoing transfer encodings (base64,
    /// quoted-printable), all parts together, before charset conversion.
    /// A part is decoded whole (never longer than its raw bytes, which
    /// `max_bytes` bounds) and then cut; once the total is reached, later
    /// parts are not decoded at all.
    pub max_decoded_bytes: usize,
    /// Wall time for one parse, checked before each part and after each
    /// decode. One HTML part's parse is not interrupted; the nesting cut in
    /// the HTML reader keeps it linear in the part's size.
    pub time_budget: Duration,
}

/// Highest accepted `max_mime_depth`: the walk recurses once per level, so
/// this keeps the stack small whatever the configuration says.
pub const MIME_DEPTH_CEILING: usize = 100;

impl Default for MailLimits {
    fn default() -> Self {
        MailLimits {
            max_bytes: 10 * 1024 * 1024,
            max_mime_depth: 20,
            max_parts: 200,
            max_headers: 1000,
            max_decoded_bytes: 20 * 1024 * 1024,
            time_budget: Duration::from_millis(200),
        }
    }
}

/// One setting of [`MailLimits`] outside what is allowed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("mail.{key} = {value}: {allowed}")]
pub struct LimitError {
    /// The field name, e.g. `max_parts`.
    pub key: &'static str,
    /// The rejected value as written.
    pub value: String,
    /// What would be accepted.
    pub allowed: &'static str,
}

impl MailLimits {
    /// Checks every field and returns all problems at once, so that an
    /// operator can fix a configuration in one pass.
    pub fn validate(&self) -> Result<(), Vec<LimitError>> {
        let mut problems = Vec::new();
        let mut at_least_one = |key: &'static str, value: usize| {
            if value == 0 {
                problems.push(LimitError {
                    key,
                    value: value.to_string(),
                    allowed: "must be at least 1",
                });
            }
        };
        at_least_one("max_bytes", self.max_bytes);
        at_least_one("max_parts", self.max_parts);
        at_least_one("max_headers", self.max_headers);
        at_least_one("max_decoded_bytes", self.max_decoded_bytes);
        if self.max_mime_depth > MIME_DEPTH_CEILING {
            problems.push(LimitError {
                key: "max_mime_depth",
                value: self.max_mime_depth.to_string(),
                allowed: "must be at most 100",
            });
        }
        if self.time_budget.is_zero() {
            problems.push(LimitError {
                key: "time_budget",
                value: format!("{budget:?}", budget = self.time_budget),
                allowed: "must be longer than zero",
            });
        }
        if problems.is_empty() {
            Ok(())
        } else {
            Err(problems)
        }
    }
}

/// Which cap stopped the parse early. Each kind is recorded at most once.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Truncation {
    /// The raw mail was longer than `max_bytes`; only its head was read.
    MessageTooLarge,
    /// A multipart sat deeper than `max_mime_depth`; its parts were skipped.
    TooDeep,
    /// More than `max_parts` entities; later ones were skipped.
    TooManyParts,
    /// More than `max_headers` header fields; later ones were skipped.
    TooManyHeaders,
    /// Decoding went past `max_decoded_bytes`; the part was cut there and
    /// later parts were not decoded.
    DecodedTooLarge,
    /// The parse ran past `time_budget`; remaining parts were skipped.
    TimeBudget,
    /// An HTML part nested elements deeper than
    /// [`crate::MAX_HTML_NESTING`]; its markup was cut before that tag.
    HtmlTooDeep,
}

impl Truncation {
    /// Stable snake_case name, for logs and meta values.
    pub fn as_str(self) -> &'static str {
        match self {
            Truncation::MessageTooLarge => "message_too_large",
            Truncation::TooDeep => "too_deep",
            Truncation::TooManyParts => "too_many_parts",
            Truncation::TooManyHeaders => "too_many_headers",
            Truncation::DecodedTooLarge => "decoded_too_large",
            Truncation::TimeBudget => "time_budget",
            Truncation::HtmlTooDeep => "html_too_deep",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_are_valid() {
        assert_eq!(MailLimits::default().validate(), Ok(()));
    }

    #[test]
    fn validate_collects_every_problem() {
        let limits = MailLimits {
            max_bytes: 0,
            max_mime_depth: 101,
            max_parts: 0,
            max_headers: 1,
            max_decoded_bytes: 1,
            time_budget: Duration::ZERO,
        };
        let problems = limits.validate().unwrap_err();
        let keys: Vec<&str> = problems.iter().map(|problem| problem.key).collect();
        assert_eq!(
            keys,
            ["max_bytes", "max_parts", "max_mime_depth", "time_budget"]
        );
        assert_eq!(
            problems[0].to_string(),
            "mail.max_bytes = 0: must be at least 1"
        );
    }
}
