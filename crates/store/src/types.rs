//! The ids and closed word lists that rows are made of.
//!
//! Each enum maps one-to-one onto the strings a `CHECK` constraint in
//! `migrations/0001_initial.sql` allows, lowercase as on the wire. The
//! mapping is written twice, once for sqlx (`rename_all`) and once in
//! `as_str`; a test stores every variant and reads it back, so the two
//! cannot drift apart unnoticed.

use std::fmt;
use std::str::FromStr;

/// The id of a decision: a ULID in canonical text form, made by the caller.
///
/// Canonical ULIDs are 26 upper-case Crockford base-32 characters whose
/// first ten encode the creation time in milliseconds, so comparing ids as
/// text compares decisions by time. The schema rejects any other shape.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Hash, sqlx::Type)]
#[sqlx(transparent)]
pub struct DecisionId(String);

impl DecisionId {
    /// Wraps an id. The store checks its shape when the decision is written.
    pub fn new(id: impl Into<String>) -> DecisionId {
        DecisionId(id.into())
    }

    /// The id as text.
    pub fn as_str(&self) -> &str {
        &self.0
    }

    /// Whether `text` has the canonical ULID shape the schema requires:
    /// 26 characters from Crockford's base-32 alphabet, upper case.
    pub fn is_well_formed(text: &str) -> bool {
        text.len() == 26
            && text
                .bytes()
                .all(|b| b.is_ascii_digit() || (b.is_ascii_uppercase() && !b"ILOU".contains(&b)))
    }
}

impl fmt::Display for DecisionId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl From<String> for DecisionId {
    fn from(id: String) -> DecisionId {
        DecisionId(id)
    }
}

impl From<&str> for DecisionId {
    fn from(id: &str) -> DecisionId {
        DecisionId(id.to_owned())
    }
}

/// The sequence number of a feedback row.
///
/// Strictly increasing in the order rows were appended and never reused.
/// The learner applies feedback in this order, and a checkpoint records the
/// last number it includes. [`FeedbackSeq::ZERO`] stands for "no feedback
/// yet": real rows start at 1.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, sqlx::Type)]
#[sqlx(transparent)]
pub struct FeedbackSeq(pub i64);

impl FeedbackSeq {
    /// Before the first feedback row.
    pub const ZERO: FeedbackSeq = FeedbackSeq(0);
}

impl fmt::Display for FeedbackSeq {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{seq}", seq = self.0)
    }
}

/// A word outside a closed list, given to one of the `FromStr` impls here.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{word:?} is not a {what}; expected one of {allowed}", allowed = .allowed.join(", "))]
pub struct UnknownWord {
    /// The text that did not match.
    pub word: String,
    /// What was being parsed, e.g. "verdict".
    pub what: &'static str,
    /// The allowed words.
    pub allowed: &'static [&'static str],
}

/// Declares a lowercase word enum with `as_str`, `Display` and `FromStr`.
macro_rules! word_enum {
    (
        $(#[$meta:meta])*
        $name:ident, $what:literal {
            $( $(#[$vmeta:meta])* $variant:ident => $word:literal ),+ $(,)?
        }
    ) => {
        $(#[$meta])*
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, sqlx::Type)]
        #[sqlx(rename_all = "lowercase")]
        pub enum $name {
            $( $(#[$vmeta])* $variant ),+
        }

        impl $name {
            /// Every variant, in declaration order.
            pub const ALL: &'static [$name] = &[$($name::$variant),+];

            /// The word stored in the database and used on the wire.
            pub fn as_str(self) -> &'static str {
                match self {
                    $($name::$variant => $word),+
                }
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str(self.as_str())
            }
        }

        impl FromStr for $name {
            type Err = UnknownWord;

            fn from_str(word: &str) -> Result<$name, UnknownWord> {
                match word {
                    $($word => Ok($name::$variant),)+
                    _ => Err(UnknownWord {
                        word: word.to_owned(),
                        what: $what,
                        allowed: &[$($word),+],
                    }),
                }
            }
        }
    };
}

word_enum! {
    /// What a decision said about a message.
    Verdict, "verdict" {
        /// `p_junk` reached the channel's junk threshold.
        Junk => "junk",
        /// Uncertain: a person should look.
        Review => "review",
        /// `p_junk` stayed below the channel's review threshold.
        Fine => "fine",
    }
}

word_enum! {
    /// A moderator's label for a message.
    Label, "label" {
        /// The message is junk.
        Junk => "junk",
        /// The message is fine.
        Fine => "fine",
    }
}

word_enum! {
    /// Whether a feedback row is a decision's first label or changes one.
    FeedbackKind, "feedback kind" {
        /// The first live label for its decision, or feedback on an inline
        /// message.
        Label => "label",
        /// Replaces the opposite label given earlier to the same decision.
        Correction => "correction",
    }
}

word_enum! {
    /// What an API token may do.
    Role, "role" {
        /// Sends messages to be scored.
        Score => "score",
        /// Gives feedback on decisions and messages.
        Moderate => "moderate",
        /// Runs the service itself.
        Operate => "operate",
    }
}

impl Label {
    /// The other label.
    pub fn opposite(self) -> Label {
        match self {
            Label::Junk => Label::Fine,
            Label::Fine => Label::Junk,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn words_round_trip_through_from_str() {
        for verdict in Verdict::ALL {
            assert_eq!(verdict.as_str().parse::<Verdict>(), Ok(*verdict));
        }
        for label in Label::ALL {
            assert_eq!(label.as_str().parse::<Label>(), Ok(*label));
        }
        for kind in FeedbackKind::ALL {
            assert_eq!(kind.as_str().parse::<FeedbackKind>(), Ok(*kind));
        }
        for role in Role::ALL {
            assert_eq!(role.as_str().parse::<Role>(), Ok(*role));
        }
    }

    #[test]
    fn unknown_word_names_what_is_allowed() {
        let err = "spam".parse::<Label>().unwrap_err();
        assert_eq!(
            err.to_string(),
            r#""spam" is not a label; expected one of junk, fine"#
        );
    }

    #[test]
    fn decision_id_shape() {
        // A canonical ULID: the example in the ULID specification's README
        // (from memory).
        assert!(DecisionId::is_well_formed("01ARZ3NDEKTSV4RRFFQ69G5FAV"));
        // Lower case is valid ULID input but not the canonical form.
        assert!(!DecisionId::is_well_formed("01arz3ndektsv4rrffq69g5fav"));
        // I, L, O and U are not in Crockford's base-32 alphabet.
        assert!(!DecisionId::is_well_formed("01ARZ3NDEKTSV4RRFFQ69G5FAI"));
        assert!(!DecisionId::is_well_formed("01ARZ3NDEKTSV4RRFFQ69G5FA"));
        assert!(!DecisionId::is_well_formed(""));
    }
}
