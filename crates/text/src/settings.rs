//! Feature settings: which features exist and how many hash slots they share.
//!
//! The binary reads these from the `[features]` section of the config file and
//! calls [`FeatureSettings::validate`] once at start-up; every problem is
//! reported at once as key, value and what is allowed. A model is only valid
//! for the settings (and the hash key) it was trained with, so the settings
//! are recorded beside it.

use serde::{Deserialize, Serialize};

/// Settings of the feature extractor, as found in the `[features]` section.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct FeatureSettings {
    /// Hash slots are `2^bits`. Allowed 8..=30.
    pub bits: u8,
    /// Length of character n-grams inside words; 0 turns them off.
    /// Allowed 0 or 2..=8.
    pub char_ngram: u8,
    /// Whether adjacent word pairs are features.
    pub word_pairs: bool,
    /// Runs of one character longer than this collapse to this length
    /// (digits excepted). Allowed 1..=16.
    pub max_run: u8,
    /// At most this many words, and at most this many other tokens (symbols,
    /// numbers, `!` runs, URL hosts), are read per field. Allowed at least 1.
    pub max_words_per_field: u32,
    /// Whether symbols (currency signs, emoji, `%`, ...) and runs of `!` are
    /// features.
    pub symbols: bool,
    /// Whether the digit-count shape of numbers is a feature.
    pub number_shapes: bool,
    /// Whether each word with a letter also gives its confusable skeleton
    /// (UTS #39 section 4), so that look-alike spellings such as `pаrcel`
    /// with a Cyrillic `а` share a feature with `parcel`. Joined and
    /// digit-mapped words give their skeleton too, which is where they meet
    /// the plain spelling.
    pub skeletons: bool,
    /// Whether three or more single letters in a row (`w i n n e r`,
    /// `w.i.n`, `w-i-n`) give the word they spell as a feature.
    pub joined_letters: bool,
    /// Whether tokens that mix letters with digits or `@ $ ! |` standing in
    /// for letters (`fr33`, `p@rcel`) give their letter reading as a feature.
    pub digit_letters: bool,
    /// Whether the number of words that mix scripts (Latin with Cyrillic
    /// letters, say) is a feature of each field.
    pub mixed_script: bool,
}

impl Default for FeatureSettings {
    fn default() -> Self {
        FeatureSettings {
            bits: 22,
            char_ngram: 4,
            word_pairs: true,
            max_run: 3,
            max_words_per_field: 5000,
            symbols: true,
            number_shapes: true,
            skeletons: true,
            joined_letters: true,
            digit_letters: true,
            mixed_script: true,
        }
    }
}

/// One invalid setting: its key, the value given and what is allowed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{key} = {value}: {allowed}")]
pub struct SettingsProblem {
    /// Full config key, e.g. `features.bits`.
    pub key: &'static str,
    /// The value given, as written in the config.
    pub value: String,
    /// What is allowed, e.g. `must be between 8 and 30`.
    pub allowed: &'static str,
}

/// Smallest allowed [`FeatureSettings::bits`].
pub const MIN_BITS: u8 = 8;
/// Largest allowed [`FeatureSettings::bits`]; indices must fit a `u32` with room to spare.
pub const MAX_BITS: u8 = 30;

impl FeatureSettings {
    /// Checks every setting and returns all problems found. The switches
    /// (`word_pairs`, `symbols`, `skeletons`, ...) are plain booleans: every
    /// value is valid, and each may be set without the others.
    pub fn validate(&self) -> Result<(), Vec<SettingsProblem>> {
        let mut problems = Vec::new();
        if !(MIN_BITS..=MAX_BITS).contains(&self.bits) {
            problems.push(SettingsProblem {
                key: "features.bits",
                value: self.bits.to_string(),
                allowed: "must be between 8 and 30",
            });
        }
        if self.char_ngram == 1 || self.char_ngram > 8 {
            problems.push(SettingsProblem {
                key: "features.char_ngram",
                value: self.char_ngram.to_string(),
                allowed: "must be 0 (off) or between 2 and 8",
            });
        }
        if !(1..=16).contains(&self.max_run) {
            problems.push(SettingsProblem {
                key: "features.max_run",
                value: self.max_run.to_string(),
                allowed: "must be between 1 and 16",
            });
        }
        if self.max_words_per_field == 0 {
            problems.push(SettingsProblem {
                key: "features.max_words_per_field",
                value: self.max_words_per_field.to_string(),
                allowed: "must be at least 1",
            });
        }
        if problems.is_empty() {
            Ok(())
        } else {
            Err(problems)
        }
    }

    /// A copy with every out-of-range value moved to the nearest allowed one.
    /// Used by the extractor so that unvalidated settings cannot make it panic.
    pub(crate) fn clamped(&self) -> FeatureSettings {
        FeatureSettings {
            bits: self.bits.clamp(MIN_BITS, MAX_BITS),
            char_ngram: match self.char_ngram {
                0 => 0,
                n => n.clamp(2, 8),
            },
            max_run: self.max_run.clamp(1, 16),
            max_words_per_field: self.max_words_per_field.max(1),
            ..self.clone()
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_are_valid_and_as_documented() {
        let settings = FeatureSettings::default();
        assert_eq!(settings.validate(), Ok(()));
        assert_eq!(settings.bits, 22);
        assert_eq!(settings.char_ngram, 4);
        assert!(settings.word_pairs);
        assert_eq!(settings.max_run, 3);
        assert_eq!(settings.max_words_per_field, 5000);
        assert!(settings.skeletons && settings.joined_letters);
        assert!(settings.digit_letters && settings.mixed_script);
    }

    #[test]
    fn every_problem_is_reported_at_once() {
        let settings = FeatureSettings {
            bits: 40,
            char_ngram: 1,
            max_run: 0,
            max_words_per_field: 0,
            ..FeatureSettings::default()
        };
        let problems = settings.validate().unwrap_err();
        let shown: Vec<String> = problems.iter().map(ToString::to_string).collect();
        assert_eq!(
            shown,
            [
                "features.bits = 40: must be between 8 and 30",
                "features.char_ngram = 1: must be 0 (off) or between 2 and 8",
                "features.max_run = 0: must be between 1 and 16",
                "features.max_words_per_field = 0: must be at least 1",
            ]
        );
    }

    #[test]
    fn edges_of_allowed_ranges() {
        for (bits, is_ok) in [(7, false), (8, true), (30, true), (31, false)] {
            let settings = FeatureSettings {
                bits,
                ..FeatureSettings::default()
            };
            assert_eq!(settings.validate().is_ok(), is_ok, "bits {bits}");
        }
        for (char_ngram, is_ok) in [(0, true), (1, false), (2, true), (8, true), (9, false)] {
            let settings = FeatureSettings {
                char_ngram,
                ..FeatureSettings::default()
            };
            assert_eq!(
                settings.validate().is_ok(),
                is_ok,
                "char_ngram {char_ngram}"
            );
        }
        for (max_run, is_ok) in [(1, true), (16, true), (17, false)] {
            let settings = FeatureSettings {
                max_run,
                ..FeatureSettings::default()
            };
            assert_eq!(settings.validate().is_ok(), is_ok, "max_run {max_run}");
        }
    }

    #[test]
    fn clamped_settings_always_validate() {
        let wild = FeatureSettings {
            bits: 255,
            char_ngram: 1,
            max_run: 0,
            max_words_per_field: 0,
            ..FeatureSettings::default()
        };
        let clamped = wild.clamped();
        assert_eq!(clamped.validate(), Ok(()));
        assert_eq!(
            (clamped.bits, clamped.char_ngram, clamped.max_run),
            (30, 2, 1)
        );
        assert_eq!(
            FeatureSettings::default().clamped(),
            FeatureSettings::default()
        );
    }

    #[test]
    fn respelling_switches_default_on_and_can_be_turned_off() {
        // Settings saved before these switches existed read them as on.
        let settings: FeatureSettings =
            serde_json::from_str(r#"{"bits": 22, "symbols": true}"#).unwrap();
        assert!(settings.skeletons && settings.joined_letters);
        assert!(settings.digit_letters && settings.mixed_script);
        let off: FeatureSettings = serde_json::from_str(
            r#"{"skeletons": false, "joined_letters": false, "digit_letters": false, "mixed_script": false}"#,
        )
        .unwrap();
        assert_eq!(off.validate(), Ok(()));
        assert!(!(off.skeletons || off.joined_letters || off.digit_letters || off.mixed_script));
    }

    #[test]
    fn partial_config_fills_defaults_and_rejects_unknown_keys() {
        let settings: FeatureSettings = serde_json::from_str(r#"{"bits": 18}"#).unwrap();
        assert_eq!(
            settings,
            FeatureSettings {
                bits: 18,
                ..FeatureSettings::default()
            }
        );
        let err = serde_json::from_str::<FeatureSettings>(r#"{"bitz": 18}"#).unwrap_err();
        assert!(err.to_string().contains("bitz"), "{err}");
    }
}
