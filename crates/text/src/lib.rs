//! Message features for chaffgate: normalisation, tokens and keyed hashing.
//!
//! Owns the path from a [`Message`] to a sparse feature vector: Unicode
//! normalisation ([`normalize`]), UAX #29 words, word pairs, character
//! n-grams, symbols and number shapes ([`tokens`]), URL hosts ([`urls`]),
//! sender, channel and `meta` features, and the keyed SipHash-2-4 feature
//! hashing ([`hashing`]) that gives each feature a stable index. The scorer
//! and the learner call [`Extractor::extract`]; explanations call
//! [`Extractor::extract_named`]. It knows no HTTP, SQL or model.
//!
//! What must stay true: the index of a feature is a pure function of the
//! feature, the [`HashKey`] and `bits`, defined byte for byte in
//! [`hashing`] and [`extract`]. Saved models depend on it, so any change to
//! a tag, a part, a bucket or a tokenisation rule is a new
//! [`FEATURE_FORMAT_VERSION`].

mod ascii;
mod buckets;
mod cache;
pub mod extract;
pub mod hashing;
mod message;
pub mod normalize;
mod obfuscation;
mod sender;
mod settings;
mod sort;
pub mod tokens;
pub mod urls;

pub use extract::{Extractor, Features, MAX_META_TEXT_CHARS, NamedFeature};
pub use hashing::{HashKey, KeyError};
pub use message::{Message, MetaValue};
pub use normalize::{TextStats, normalize_into};
pub use settings::{FeatureSettings, SettingsProblem};

/// Version of the feature format: tags, parts, buckets and tokenisation
/// rules. Checkpoints record it beside the key id and settings; a model is
/// only valid for the version it was trained under.
pub const FEATURE_FORMAT_VERSION: u32 = 1;
