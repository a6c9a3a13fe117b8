//! Text normalisation: the form of a text that features and audit digests see.
//!
//! [`normalize_into`] applies, in this order:
//!
//! 1. removal of invisible characters: every character of General_Category
//!    `Cf` (format: zero-width space and joiners, soft hyphen, bidi controls,
//!    tag characters, ...) and the other default-ignorable characters that
//!    are not `Cf` (combining grapheme joiner, Hangul fillers, Khmer inherent
//!    vowels, Mongolian and other variation selectors), see [`is_invisible`];
//! 2. Unicode NFKC (UAX #15), so fullwidth letters, ligatures and other
//!    compatibility forms become their plain letters;
//! 3. lowercase, character by character (`char::to_lowercase`, so a final
//!    capital sigma becomes `σ`, not `ς`);
//! 4. runs of one character longer than `max_run` are cut to `max_run`
//!    (`freeeeee` becomes `freee` at the default 3). Numeric characters are
//!    exempt so that numbers keep their value and digit count.
//!
//! Invisible characters go first so that a zero-width space between a letter
//! and its combining accent cannot keep NFKC from composing them. The result
//! is the lowercase of an NFKC string, which is not always NFKC itself; it
//! only has to be the same every time.
//!
//! Counts for the length and share features ([`TextStats`]) are taken after
//! step 2 and before case folding, since the uppercase share needs the case.
//!
//! ASCII text skips steps 1 and 2 (ASCII holds no invisible characters and
//! NFKC is the identity on it); most traffic takes this path. Other text is
//! checked with the NFKC quick check first and only recomposed when needed;
//! when it need not be, its ASCII runs are folded in bulk, as pure ASCII
//! text is.

use unicode_normalization::{IsNormalized, UnicodeNormalization, is_nfkc_quick};
use unicode_properties::{GeneralCategory, UnicodeGeneralCategory};

use crate::ascii::for_each_run;

/// Counts over one normalised text, taken before case folding and run
/// collapse.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct TextStats {
    /// Characters after invisible removal and NFKC.
    pub chars: usize,
    /// Uppercase letters (`char::is_uppercase`).
    pub uppercase: usize,
    /// Lowercase letters (`char::is_lowercase`).
    pub lowercase: usize,
    /// Decimal digits (General_Category `Nd`).
    pub digits: usize,
    /// Characters that are not whitespace.
    pub non_space: usize,
}

/// True for characters removed before anything else looks at the text.
///
/// These are General_Category `Cf` and the default-ignorable characters of
/// other categories, which render as nothing and are used to break up words
/// (`fr\u{200B}ee`).
pub fn is_invisible(c: char) -> bool {
    if c.is_ascii() {
        return false;
    }
    matches!(
        c,
        '\u{034F}'                    // combining grapheme joiner
        | '\u{115F}' | '\u{1160}'     // Hangul choseong / jungseong fillers
        | '\u{17B4}' | '\u{17B5}'     // Khmer inherent vowels
        | '\u{180B}'..='\u{180D}'     // Mongolian free variation selectors
        | '\u{180F}'
        | '\u{3164}'                  // Hangul filler
        | '\u{FE00}'..='\u{FE0F}'     // variation selectors
        | '\u{FFA0}'                  // halfwidth Hangul filler
        | '\u{E0100}'..='\u{E01EF}' // variation selectors supplement
    ) || c.general_category() == GeneralCategory::Format
}

/// True for decimal digits (General_Category `Nd`), with an ASCII shortcut.
#[inline]
pub(crate) fn is_decimal_digit(c: char) -> bool {
    if c.is_ascii() {
        c.is_ascii_digit()
    } else {
        c.general_category() == GeneralCategory::DecimalNumber
    }
}

/// Writes the normalised form of `text` into `out` (cleared first) and
/// returns the counts. `max_run` below 1 is treated as 1.
pub fn normalize_into(text: &str, max_run: u8, out: &mut String) -> TextStats {
    out.clear();
    let max_run = usize::from(max_run.max(1));
    if text.is_ascii() {
        return normalize_ascii(text, max_run, out);
    }
    let mut sink = Folder {
        out,
        max_run,
        last: None,
        run: 0,
        stats: TextStats::default(),
    };
    if is_visible_text_nfkc(text) {
        // Nothing to recompose: the ASCII runs go through in bulk.
        for_each_run(text, |_, run, is_ascii| {
            if is_ascii {
                sink.push_ascii(run);
            } else {
                run.chars()
                    .filter(|&c| !is_invisible(c))
                    .for_each(|c| sink.push(c));
            }
        });
    } else {
        text.chars()
            .filter(|&c| !is_invisible(c))
            .nfkc()
            .for_each(|c| sink.push(c));
    }
    sink.stats
}

/// The NFKC quick check (UAX #15 section 9) of `text` without its invisible
/// characters says it is NFKC already. ASCII characters pass the check and
/// have canonical combining class 0, so no ordering constraint reaches
/// across them: checking each non-ASCII run alone gives the same answer.
fn is_visible_text_nfkc(text: &str) -> bool {
    let mut is_nfkc = true;
    for_each_run(text, |_, run, is_ascii| {
        if !is_ascii && is_nfkc {
            let visible = run.chars().filter(|&c| !is_invisible(c));
            is_nfkc = is_nfkc_quick(visible) == IsNormalized::Yes;
        }
    });
    is_nfkc
}

/// Counts of ASCII text. Written so that the compiler can vectorise it:
/// 8-bit counters over chunks of at most 255 bytes, so none overflows.
fn count_ascii(bytes: &[u8]) -> TextStats {
    let mut stats = TextStats {
        chars: bytes.len(),
        ..TextStats::default()
    };
    for chunk in bytes.chunks(usize::from(u8::MAX)) {
        let (mut uppercase, mut lowercase, mut digits, mut spaces) = (0u8, 0u8, 0u8, 0u8);
        for &byte in chunk {
            uppercase += u8::from(byte.is_ascii_uppercase());
            lowercase += u8::from(byte.is_ascii_lowercase());
            digits += u8::from(byte.is_ascii_digit());
            spaces += u8::from(byte.is_ascii_whitespace());
        }
        stats.uppercase += usize::from(uppercase);
        stats.lowercase += usize::from(lowercase);
        stats.digits += usize::from(digits);
        stats.non_space += chunk.len() - usize::from(spaces);
    }
    stats
}

/// False if lowercase ASCII `text` surely has no run longer than `max_run`
/// (digits aside); true if it might. A run longer than `max_run >= 2` holds
/// three equal bytes in a row, and one longer than 1 two. Written without
/// early exit so that the compiler can vectorise it.
fn may_have_long_run(text: &[u8], max_run: usize) -> bool {
    let pairs = text.iter().zip(text.get(1..).unwrap_or_default());
    if max_run <= 1 {
        return pairs.fold(false, |found, (&a, &b)| {
            found | ((a == b) & !a.is_ascii_digit())
        });
    }
    pairs
        .zip(text.get(2..).unwrap_or_default())
        .fold(false, |found, ((&a, &b), &c)| {
            found | ((a == b) & (b == c) & !a.is_ascii_digit())
        })
}

/// Whether ASCII `bytes` has a run of one letter (case folded) longer than
/// `max_run`, digits aside.
fn has_long_run(bytes: &[u8], max_run: usize) -> bool {
    let mut last = 0u8;
    let mut run = 0usize;
    for &byte in bytes {
        let lower = byte.to_ascii_lowercase();
        if lower == last {
            run += 1;
            if run > max_run && !lower.is_ascii_digit() {
                return true;
            }
        } else {
            last = lower;
            run = 1;
        }
    }
    false
}

/// The ASCII path. Text without runs to collapse (nearly all of it) is
/// counted, copied and lowercased in bulk, and a quick scan of the copy
/// shows that it has no such run; only text that might is checked byte by
/// byte and, if need be, written again with its runs collapsed.
fn normalize_ascii(text: &str, max_run: usize, out: &mut String) -> TextStats {
    let bytes = text.as_bytes();
    let stats = count_ascii(bytes);
    out.push_str(text);
    out.make_ascii_lowercase();
    if !may_have_long_run(out.as_bytes(), max_run) || !has_long_run(bytes, max_run) {
        return stats;
    }
    out.clear();
    out.reserve(bytes.len());
    let mut last = 0u8;
    let mut run = 0usize;
    for &byte in bytes {
        let lower = byte.to_ascii_lowercase();
        if lower == last && run > 0 {
            if run >= max_run && !lower.is_ascii_digit() {
                continue;
            }
            run += 1;
        } else {
            last = lower;
            run = 1;
        }
        out.push(char::from(lower));
    }
    stats
}

/// Steps 3 and 4 for one character at a time, plus the counts.
struct Folder<'a> {
    out: &'a mut String,
    max_run: usize,
    last: Option<char>,
    run: usize,
    stats: TextStats,
}

impl Folder<'_> {
    fn push(&mut self, c: char) {
        self.stats.chars += 1;
        if c.is_ascii() {
            // Most characters of mostly-ASCII text: no table lookups.
            let byte = c as u8;
            self.stats.uppercase += usize::from(byte.is_ascii_uppercase());
            self.stats.lowercase += usize::from(byte.is_ascii_lowercase());
            self.stats.digits += usize::from(byte.is_ascii_digit());
            self.stats.non_space += usize::from(!byte.is_ascii_whitespace());
            self.put(char::from(byte.to_ascii_lowercase()));
            return;
        }
        self.stats.uppercase += usize::from(c.is_uppercase());
        self.stats.lowercase += usize::from(c.is_lowercase());
        self.stats.digits += usize::from(is_decimal_digit(c));
        self.stats.non_space += usize::from(!c.is_whitespace());
        for lower in c.to_lowercase() {
            self.put(lower);
        }
    }

    /// [`Folder::push`] for each character of an ASCII run, in bulk where
    /// that gives the same: the run is counted, copied and lowercased at
    /// once unless it continues the last character's run or may hold a run
    /// to collapse (see [`normalize_ascii`]).
    fn push_ascii(&mut self, run: &str) {
        let bytes = run.as_bytes();
        let Some(&first) = bytes.first() else {
            return;
        };
        let counts = count_ascii(bytes);
        self.stats.chars += counts.chars;
        self.stats.uppercase += counts.uppercase;
        self.stats.lowercase += counts.lowercase;
        self.stats.digits += counts.digits;
        self.stats.non_space += counts.non_space;
        let start = self.out.len();
        let continues_run = self.last == Some(char::from(first.to_ascii_lowercase()));
        if !continues_run {
            self.out.push_str(run);
            self.out[start..].make_ascii_lowercase();
            let folded = &self.out.as_bytes()[start..];
            if !may_have_long_run(folded, self.max_run) || !has_long_run(bytes, self.max_run) {
                let last = folded[folded.len() - 1];
                let trailing = folded.iter().rev().take_while(|&&b| b == last).count();
                self.last = Some(char::from(last));
                self.run = trailing;
                return;
            }
            self.out.truncate(start);
        }
        for &byte in bytes {
            self.put(char::from(byte.to_ascii_lowercase()));
        }
    }

    /// Appends one folded character unless it extends a run past `max_run`.
    #[inline]
    fn put(&mut self, lower: char) {
        if self.last == Some(lower) {
            if self.run >= self.max_run && !lower.is_numeric() {
                return;
            }
            self.run += 1;
        } else {
            self.last = Some(lower);
            self.run = 1;
        }
        self.out.push(lower);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn norm(text: &str) -> String {
        let mut out = String::new();
        normalize_into(text, 3, &mut out);
        out
    }

    #[test]
    fn nfkc_compatibility_forms() {
        // Decomposition mappings from the Unicode Character Database
        // (UnicodeData.txt), applied as NFKC per UAX #15.
        assert_eq!(norm("\u{FB01}nance"), "finance"); // U+FB01 LATIN SMALL LIGATURE FI -> f i
        assert_eq!(norm("\u{FF26}\u{FF32}\u{FF25}\u{FF25}"), "free"); // fullwidth F R E E (<wide>)
        assert_eq!(norm("x\u{00B2}"), "x2"); // U+00B2 SUPERSCRIPT TWO -> 2 (<super>)
        assert_eq!(norm("\u{212A}"), "k"); // U+212A KELVIN SIGN -> K (canonical singleton)
        assert_eq!(norm("\u{2460}"), "1"); // U+2460 CIRCLED DIGIT ONE -> 1 (<circle>)
    }

    #[test]
    fn canonical_composition() {
        // UAX #15: e + U+0301 COMBINING ACUTE ACCENT composes to U+00E9.
        assert_eq!(norm("cafe\u{0301}"), "caf\u{00E9}");
        // Even when a zero-width space sat between them.
        assert_eq!(norm("cafe\u{200B}\u{0301}"), "caf\u{00E9}");
    }

    #[test]
    fn invisible_characters_are_removed() {
        assert_eq!(norm("fr\u{200B}ee"), "free"); // zero-width space (Cf)
        assert_eq!(norm("of\u{00AD}fer"), "offer"); // soft hyphen (Cf)
        assert_eq!(norm("w\u{200C}i\u{200D}n\u{2060}"), "win"); // ZWNJ, ZWJ, word joiner (Cf)
        assert_eq!(norm("\u{FEFF}hi\u{202E}"), "hi"); // BOM, right-to-left override (Cf)
        assert_eq!(norm("a\u{034F}b\u{FE0F}c\u{3164}d"), "abcd"); // default-ignorable, not Cf
        assert!(is_invisible('\u{E0041}')); // tag letter A (Cf)
        assert!(!is_invisible('a') && !is_invisible('\u{00E9}') && !is_invisible(' '));
    }

    #[test]
    fn lowercase_is_per_character() {
        assert_eq!(norm("FREE Money"), "free money");
        assert_eq!(norm("\u{00C9}T\u{00C9}"), "\u{00E9}t\u{00E9}");
        // char::to_lowercase maps capital sigma to σ even at a word end.
        assert_eq!(norm("\u{03A3}\u{03A3}"), "\u{03C3}\u{03C3}");
    }

    #[test]
    fn long_runs_collapse_but_numbers_do_not() {
        assert_eq!(norm("freeeeeee!!!!!!"), "freee!!!");
        assert_eq!(norm("FREEeee"), "freee");
        assert_eq!(norm("aaa"), "aaa");
        assert_eq!(norm("call 0800 000000"), "call 0800 000000");
        assert_eq!(
            norm("\u{00E9}\u{00E9}\u{00E9}\u{00E9}\u{00E9}"),
            "\u{00E9}\u{00E9}\u{00E9}"
        );
        let mut out = String::new();
        normalize_into("yessss", 1, &mut out);
        assert_eq!(out, "yes");
        normalize_into("yessss", 0, &mut out);
        assert_eq!(out, "yes", "0 acts as 1");
    }

    #[test]
    fn runs_are_counted_after_invisibles_are_removed() {
        assert_eq!(norm("e\u{200B}e\u{200B}e\u{200B}e\u{200B}e"), "eee");
    }

    #[test]
    fn stats_are_taken_before_case_folding() {
        let mut out = String::new();
        let stats = normalize_into("WIN 100 Euro", 3, &mut out);
        assert_eq!(
            stats,
            TextStats {
                chars: 12,
                uppercase: 4,
                lowercase: 3,
                digits: 3,
                non_space: 10
            }
        );
        let stats = normalize_into("\u{FF37}in \u{0661}\u{0662}", 3, &mut out);
        // Fullwidth W becomes W (uppercase) before folding; Arabic-Indic digits are Nd.
        assert_eq!(
            stats,
            TextStats {
                chars: 6,
                uppercase: 1,
                lowercase: 2,
                digits: 2,
                non_space: 5
            }
        );
        assert_eq!(out, "win \u{0661}\u{0662}");
    }

    #[test]
    fn counts_do_not_overflow_on_long_text() {
        let text = "Ab1 ".repeat(40_000);
        let mut out = String::new();
        let stats = normalize_into(&text, 3, &mut out);
        assert_eq!(
            stats,
            TextStats {
                chars: 160_000,
                uppercase: 40_000,
                lowercase: 40_000,
                digits: 40_000,
                non_space: 120_000
            }
        );
    }

    #[test]
    fn ascii_and_general_paths_agree() {
        // The same ASCII text with one non-ASCII character appended must
        // normalise to the same prefix with the same counts plus one.
        let ascii = "Hello WORLD!!!!! 12345 aaaaa\tTAB";
        let mut fast = String::new();
        let fast_stats = normalize_into(ascii, 3, &mut fast);
        let mut general = String::new();
        let general_stats = normalize_into(&format!("{ascii}\u{00E9}"), 3, &mut general);
        assert_eq!(general, format!("{fast}\u{00E9}"));
        assert_eq!(general_stats.chars, fast_stats.chars + 1);
        assert_eq!(general_stats.lowercase, fast_stats.lowercase + 1);
        assert_eq!(general_stats.uppercase, fast_stats.uppercase);
        assert_eq!(general_stats.digits, fast_stats.digits);
    }

    /// The general path's folding, applied to every character.
    fn fold_by_characters(text: &str, max_run: u8) -> (String, TextStats) {
        let mut out = String::new();
        let mut folder = Folder {
            out: &mut out,
            max_run: usize::from(max_run.max(1)),
            last: None,
            run: 0,
            stats: TextStats::default(),
        };
        text.chars().for_each(|c| folder.push(c));
        let stats = folder.stats;
        (out, stats)
    }

    #[test]
    fn ascii_runs_of_every_kind() {
        for (text, max_run) in [
            ("www.example.com", 3),
            ("www.example.com", 2),
            ("aa", 1),
            ("aA", 1),
            ("1111 ....", 3),
            ("\0\0\0\0", 3),
            ("NOOOO no", 3),
            ("ab", 1),
            ("", 1),
            ("x", 16),
        ] {
            let mut fast = String::new();
            let stats = normalize_into(text, max_run, &mut fast);
            assert_eq!((fast, stats), fold_by_characters(text, max_run), "{text:?}");
        }
    }

    proptest::proptest! {
        #[test]
        fn ascii_path_equals_folding_by_characters(
            text in "([ -~\t\n\r\x0b\x0c]|aaaa|EEe|!!!!|0000){0,80}",
            max_run in 1u8..=5,
        ) {
            let mut fast = String::new();
            let stats = normalize_into(&text, max_run, &mut fast);
            proptest::prop_assert_eq!((fast, stats), fold_by_characters(&text, max_run));
        }
    }

    /// The definition of the general path: visible characters, NFKC if the
    /// quick check asks for it, then folding one character at a time.
    fn reference(text: &str, max_run: u8) -> (String, TextStats) {
        let visible: String = text.chars().filter(|&c| !is_invisible(c)).collect();
        let composed: String = if is_nfkc_quick(visible.chars()) == IsNormalized::Yes {
            visible
        } else {
            visible.nfkc().collect()
        };
        fold_by_characters(&composed, max_run)
    }

    proptest::proptest! {
        #[test]
        fn mixed_text_equals_folding_by_characters(
            pieces in proptest::collection::vec(proptest::sample::select(&[
                "a", "A", "aaaa", "e", "EEE", "0000", "!", " ", "\t", "\n", "i", "ii",
                "\u{00E9}", "\u{00C9}", "\u{0301}", "\u{0130}", "\u{200B}", "\u{00AD}", "\u{FB01}",
                "\u{FF26}", "\u{212A}", "\u{00A3}", "\u{03A3}", "\u{1F381}", "\u{0661}", "\u{00A0}",
            ][..]), 0..40),
            max_run in 1u8..=4,
        ) {
            let text = pieces.concat();
            let mut fast = String::new();
            let stats = normalize_into(&text, max_run, &mut fast);
            proptest::prop_assert_eq!((fast, stats), reference(&text, max_run));
        }
    }

    #[test]
    fn output_buffer_is_cleared() {
        let mut out = String::from("stale");
        normalize_into("", 3, &mut out);
        assert_eq!(out, "");
    }
}
