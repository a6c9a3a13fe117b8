//! Property tests: extraction never panics, is deterministic and always
//! gives a sorted unit vector whose indices match the named features.

use std::collections::BTreeMap;

use chaffgate_text::{
    Extractor, FeatureSettings, Features, HashKey, Message, MetaValue, normalize_into,
};
use proptest::prelude::*;

/// Characters that exercise the tricky paths: invisible characters,
/// combining marks, compatibility forms, symbols, digits, URL punctuation.
const INTERESTING: &[char] = &[
    '\u{200B}',
    '\u{200D}',
    '\u{00AD}',
    '\u{FEFF}',
    '\u{034F}',
    '\u{FE0F}',
    '\u{0301}',
    '\u{0308}',
    '\u{FB01}',
    '\u{FF26}',
    '\u{212A}',
    '\u{00B2}',
    '\u{03A3}',
    '\u{0130}',
    '\u{00DF}',
    '\u{1F381}',
    '\u{00A3}',
    '$',
    '%',
    '!',
    '?',
    '.',
    ',',
    '-',
    '/',
    ':',
    '@',
    '<',
    '>',
    ' ',
    '\n',
    '\t',
    '0',
    '7',
    '\u{0661}',
    'a',
    'E',
    'w',
    'h',
    't',
    'p',
    's',
    '\u{65E5}',
    '\u{0000}',
    // Look-alikes and stand-ins for the respelling features: U+0430
    // CYRILLIC SMALL LETTER A, U+043E CYRILLIC SMALL LETTER O, U+03BF
    // GREEK SMALL LETTER OMICRON.
    '\u{0430}',
    '\u{043E}',
    '\u{03BF}',
    '3',
    '1',
    '_',
    'm',
];

fn text() -> impl Strategy<Value = String> {
    let piece = prop_oneof![
        3 => any::<char>().prop_map(String::from),
        4 => prop::sample::select(INTERESTING).prop_map(String::from),
        1 => prop::sample::select(&["http://", "https://", "www.", ".com", "example", "0800 ", "!!!!!!"][..])
            .prop_map(String::from),
    ];
    prop::collection::vec(piece, 0..120).prop_map(|pieces| pieces.concat())
}

fn meta_value() -> impl Strategy<Value = MetaValue> {
    prop_oneof![
        any::<bool>().prop_map(MetaValue::Bool),
        any::<f64>().prop_map(MetaValue::Number),
        prop::sample::select(&[f64::NAN, f64::INFINITY, -0.0, f64::MIN_POSITIVE / 4.0][..])
            .prop_map(MetaValue::Number),
        text().prop_map(MetaValue::Text),
    ]
}

fn message() -> impl Strategy<Value = Message> {
    (
        prop::option::of(text()),
        prop::option::of(text()),
        prop::option::of(text()),
        prop::option::of(text()),
        prop::collection::btree_map(text(), meta_value(), 0..4),
    )
        .prop_map(
            |(subject, body, sender, channel, meta): (_, _, _, _, BTreeMap<String, MetaValue>)| {
                Message {
                    subject,
                    body,
                    sender,
                    channel,
                    meta,
                }
            },
        )
}

fn settings() -> impl Strategy<Value = FeatureSettings> {
    (
        8u8..=30,
        prop_oneof![Just(0u8), 2u8..=8],
        any::<bool>(),
        1u8..=16,
        1u32..50,
        any::<bool>(),
        any::<bool>(),
        any::<[bool; 4]>(),
    )
        .prop_map(
            |(
                bits,
                char_ngram,
                word_pairs,
                max_run,
                max_words_per_field,
                symbols,
                number_shapes,
                [skeletons, joined_letters, digit_letters, mixed_script],
            )| FeatureSettings {
                bits,
                char_ngram,
                word_pairs,
                max_run,
                max_words_per_field,
                symbols,
                number_shapes,
                skeletons,
                joined_letters,
                digit_letters,
                mixed_script,
            },
        )
}

fn key() -> impl Strategy<Value = HashKey> {
    any::<[u8; 16]>().prop_map(HashKey::from_bytes)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn extraction_is_deterministic_and_a_unit_vector(msg in message(), settings in settings(), key in key()) {
        prop_assert_eq!(settings.validate(), Ok(()));
        let mut first = Extractor::new(settings.clone(), key.clone());
        let mut second = Extractor::new(settings, key);
        let a = first.extract_features(&msg);
        let b = second.extract_features(&msg);
        prop_assert_eq!(&a, &b);

        let slice = a.as_slice();
        prop_assert!(!slice.is_empty(), "bias is always present");
        prop_assert!(slice.windows(2).all(|pair| pair[0].0 < pair[1].0));
        prop_assert!(slice.iter().all(|&(index, _)| index < first.dimension()));
        let norm: f32 = slice.iter().map(|&(_, value)| value * value).sum();
        prop_assert!((norm - 1.0).abs() < 1e-4, "norm {}", norm);
    }

    #[test]
    fn named_extraction_has_the_same_indices(msg in message(), settings in settings()) {
        let mut extractor = Extractor::new(settings, HashKey::from_bytes([42; 16]));
        let plain: Vec<u32> = extractor.extract_features(&msg).indices().collect();
        let named = extractor.extract_named(&msg);
        let mut indices: Vec<u32> = named.iter().map(|feature| feature.index).collect();
        indices.dedup();
        prop_assert_eq!(plain, indices);
        prop_assert!(named.iter().all(|feature| !feature.name.is_empty()));
    }

    #[test]
    fn long_repetitive_bodies_agree_with_names(
        words in prop::collection::vec(prop::sample::select(&[
            "the", "The", "offer", "free", "entry", "\u{00E9}t\u{00E9}", "2024", "win!!", "a", "prize.example.com/x",
            "snake_case", "don't", "\u{65E5}\u{672C}", "x", "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa",
            "fr33", "w", "w.i.n", "p\u{0430}y", "c@$h", "-", ".",
        ][..]), 40..400),
        char_ngram in prop_oneof![Just(0u8), 2u8..=8],
    ) {
        // The plain path skips repeated words and pairs and reads the
        // feature cache; both paths must still give the same indices.
        let msg = Message { body: Some(words.join(" ")), ..Message::default() };
        let settings = FeatureSettings { char_ngram, ..FeatureSettings::default() };
        let mut extractor = Extractor::new(settings, HashKey::from_bytes([3; 16]));
        let plain: Vec<u32> = extractor.extract_features(&msg).indices().collect();
        let mut named: Vec<u32> = extractor.extract_named(&msg).iter().map(|feature| feature.index).collect();
        named.dedup();
        prop_assert_eq!(plain, named);
    }

    #[test]
    fn a_warm_extractor_agrees_with_names_and_with_a_fresh_one(
        stream in prop::collection::vec(
            prop::collection::vec(prop::sample::select(&[
                "the", "The", "offer", "free", "entry", "\u{00E9}t\u{00E9}", "2024", "win!!", "a",
                "prize.example.com/x", "snake_case", "don't", "\u{65E5}\u{672C}", "x",
                "supercalifragilisticexpialidocious", "fr33", "w", "w.i.n", "p\u{0430}y", "c@$h",
            ][..]), 0..200),
            1..8,
        ),
        settings in settings(),
    ) {
        // One extractor keeps its feature cache from message to message;
        // neither the explanation path nor a fresh extractor has one.
        let key = HashKey::from_bytes([5; 16]);
        let mut warm = Extractor::new(settings.clone(), key.clone());
        for words in &stream {
            let msg = Message {
                subject: words.get(..3).map(|head| head.join(" ")),
                body: Some(words.join(" ")),
                ..Message::default()
            };
            let features = warm.extract_features(&msg);
            let fresh = Extractor::new(settings.clone(), key.clone()).extract_features(&msg);
            prop_assert_eq!(&features, &fresh);
            let mut named: Vec<u32> = warm.extract_named(&msg).iter().map(|feature| feature.index).collect();
            named.dedup();
            prop_assert_eq!(features.indices().collect::<Vec<_>>(), named);
        }
    }

    #[test]
    fn reused_buffers_give_fresh_results(first in message(), second in message()) {
        let key = HashKey::from_bytes([7; 16]);
        let mut reused = Extractor::new(FeatureSettings::default(), key.clone());
        let mut out = Features::default();
        reused.extract(&first, &mut out);
        reused.extract(&second, &mut out);
        let fresh = Extractor::new(FeatureSettings::default(), key).extract_features(&second);
        prop_assert_eq!(out, fresh);
    }

    #[test]
    fn normalised_text_has_no_long_runs_or_invisibles(text in text(), max_run in 1u8..=16) {
        let mut out = String::new();
        normalize_into(&text, max_run, &mut out);
        let mut run = 0usize;
        let mut last = None;
        for c in out.chars() {
            prop_assert!(!chaffgate_text::normalize::is_invisible(c), "invisible {:?} left in {:?}", c, out);
            if Some(c) == last { run += 1 } else { run = 1; last = Some(c) }
            prop_assert!(c.is_numeric() || run <= usize::from(max_run), "run of {:?} in {:?}", c, out);
        }
    }

    #[test]
    fn ascii_normalisation_is_idempotent(text in "[ -~\t\n]{0,200}") {
        let mut once = String::new();
        normalize_into(&text, 3, &mut once);
        let mut twice = String::new();
        normalize_into(&once, 3, &mut twice);
        prop_assert_eq!(once, twice);
    }
}
