//! Tokens inside and between words: character n-grams, symbols, `!` runs
//! and number shapes.
//!
//! All scanners work on normalised text and report borrowed slices, so they
//! never allocate.
//!
//! * **Words** are the UAX #29 words of unicode-segmentation's
//!   `unicode_words`: segments between word boundaries that hold a letter or
//!   digit. Pure ASCII text is split by a local scanner that gives the same
//!   words (a property test holds it to that) with less work per byte.
//! * **Character n-grams** of a word are the windows of `n` characters over
//!   the word with `^` before it and `$` after it (`free` with n = 4 gives
//!   `^fre`, `free`, `ree$`). Neither marker can occur inside a UAX #29
//!   word, so prefixes and suffixes are distinct from inner n-grams. A word
//!   whose padded form has at most `n` characters gives itself, padded, once
//!   (`^hi$`). Only the first [`MAX_NGRAM_WORD_CHARS`] characters of a word
//!   are used, and a word cut there has no `$`.
//! * **Symbols** are single characters of General_Category `Sm`, `Sc`, `Sk`
//!   or `So` (currency signs, math signs, emoji, ...) plus the ASCII
//!   punctuation `% # * & @`, which UAX #29 drops but which say a lot about
//!   a message (`50%`, `#1`, `*terms apply`).
//! * **`!` runs** are maximal runs of `!`, by length.
//! * **Numbers** are maximal sequences of decimal digits (General_Category
//!   `Nd`), where one space, `-`, `.` or `,` between two digits keeps the
//!   number going (`0800 123 4567` is one 11-digit number, `1,000.50` a
//!   6-digit one). Their feature is the digit count only, the "shape".

use unicode_properties::{GeneralCategory, UnicodeGeneralCategory};
use unicode_segmentation::UnicodeSegmentation;

use crate::ascii;
use crate::normalize::is_decimal_digit;

/// Calls `f(offset, word)` for the first `cap` UAX #29 words of `text`, in
/// order, with each word's byte offset in `text`.
///
/// Text that is not pure ASCII is cut into chunks after each run of ASCII
/// whitespace that an ASCII character follows. UAX #29 always breaks there
/// (no rule joins whitespace to a following ASCII character, and none looks
/// back across whitespace), so each chunk can be segmented alone, and the
/// ASCII chunks of mostly-ASCII text take the fast scanner.
pub(crate) fn for_each_word<'a>(text: &'a str, cap: usize, mut f: impl FnMut(usize, &'a str)) {
    if text.is_ascii() {
        for (offset, word) in AsciiWords::new(text).take(cap) {
            f(offset, word);
        }
        return;
    }
    let bytes = text.as_bytes();
    // A cut point: an ASCII character other than whitespace right after
    // ASCII whitespace (the vertical tab included, as UAX #29 has it).
    let is_space = |byte: u8| byte.is_ascii_whitespace() || byte == 0x0B;
    let is_cut = |i: usize| is_space(bytes[i - 1]) && bytes[i].is_ascii() && !is_space(bytes[i]);
    let mut left = cap;
    let mut emit = |chunk_start: usize, chunk: &'a str, left: &mut usize| {
        if chunk.is_ascii() {
            for (offset, word) in AsciiWords::new(chunk).take(*left) {
                f(chunk_start + offset, word);
                *left -= 1;
            }
        } else {
            for (offset, word) in chunk.unicode_word_indices().take(*left) {
                f(chunk_start + offset, word);
                *left -= 1;
            }
        }
    };
    // Chunks between cut points are whole runs of words; consecutive ASCII
    // chunks are taken together, and each stretch holding other characters
    // goes from the cut before its first such character to the cut after.
    let mut start = 0;
    while start < bytes.len() && left > 0 {
        let Some(non_ascii) = bytes[start..]
            .iter()
            .position(|byte| !byte.is_ascii())
            .map(|offset| start + offset)
        else {
            emit(start, &text[start..], &mut left);
            return;
        };
        if let Some(cut) = (start + 1..non_ascii).rev().find(|&i| is_cut(i)) {
            emit(start, &text[start..cut], &mut left);
            start = cut;
            if left == 0 {
                return;
            }
        }
        let end = (non_ascii + 1..bytes.len())
            .find(|&i| is_cut(i))
            .unwrap_or(bytes.len());
        emit(start, &text[start..end], &mut left);
        start = end;
    }
}

/// UAX #29 words of ASCII text. The ASCII word-break classes are: letters
/// and digits (ALetter, Numeric), `_` (ExtendNumLet), `.` and `'`
/// (MidNumLet), `:` (MidLetter), `,` and `;` (MidNum); everything else
/// breaks. So a word is a run of letters, digits and `_`, continued across
/// one `.` `'` `:` between two letters (`e.g`, `don't`) or one `.` `,` `;`
/// `'` between two digits (`3.14`, `1,000`), and must hold a letter or digit.
struct AsciiWords<'a> {
    text: &'a str,
    bytes: &'a [u8],
    pos: usize,
}

impl<'a> AsciiWords<'a> {
    /// Words of `text`, which must be ASCII.
    fn new(text: &'a str) -> Self {
        debug_assert!(text.is_ascii());
        AsciiWords {
            text,
            bytes: text.as_bytes(),
            pos: 0,
        }
    }
}

#[inline]
fn is_word_core(byte: u8) -> bool {
    ascii::is(byte, ascii::WORD_CORE)
}

#[inline]
fn is_word_infix(byte: u8, before: u8, after: u8) -> bool {
    match byte {
        b'.' | b',' | b';' | b'\'' if before.is_ascii_digit() && after.is_ascii_digit() => true,
        b'\'' | b'.' | b':' => before.is_ascii_alphabetic() && after.is_ascii_alphabetic(),
        _ => false,
    }
}

impl<'a> Iterator for AsciiWords<'a> {
    type Item = (usize, &'a str);

    fn next(&mut self) -> Option<(usize, &'a str)> {
        let bytes = self.bytes;
        let len = bytes.len();
        loop {
            let start = self.pos
                + bytes
                    .get(self.pos..)?
                    .iter()
                    .position(|&byte| is_word_core(byte))?;
            let mut end = start + 1;
            loop {
                end += bytes[end..]
                    .iter()
                    .position(|&byte| !is_word_core(byte))
                    .unwrap_or(len - end);
                if end + 1 < len && is_word_infix(bytes[end], bytes[end - 1], bytes[end + 1]) {
                    end += 1;
                } else {
                    break;
                }
            }
            self.pos = end;
            // A joining infix stands between letters or digits, so a word
            // lacks them only if it is all `_`.
            let word = &bytes[start..end];
            if word.iter().any(|&byte| byte != b'_') {
                return self.text.get(start..end).map(|word| (start, word));
            }
        }
    }
}

/// Words longer than this give n-grams of their first this-many characters
/// only, which bounds the work per word on hostile input.
pub const MAX_NGRAM_WORD_CHARS: usize = 64;

/// Calls `f(gram)` for each n-gram of `word`, in order, where `gram`
/// includes its `^` / `$` markers. `n` must be at least 1. `padded` is
/// scratch space: the padded word is written there once and every n-gram is
/// a slice of it.
pub(crate) fn for_each_ngram(word: &str, n: usize, padded: &mut String, mut f: impl FnMut(&str)) {
    debug_assert!(n >= 1);
    padded.clear();
    if word.is_empty() {
        return;
    }
    padded.push('^');
    if word.is_ascii() {
        let len = word.len().min(MAX_NGRAM_WORD_CHARS);
        let is_cut = word.len() > MAX_NGRAM_WORD_CHARS;
        padded.push_str(&word[..len]);
        if !is_cut {
            padded.push('$');
        }
        windows(
            padded.len(),
            n,
            |start, end| padded.get(start..end).unwrap_or(""),
            &mut f,
        );
        return;
    }
    // bounds[k] is the byte offset in `padded` of its character k.
    let mut bounds = [0usize; MAX_NGRAM_WORD_CHARS + 3];
    let mut len = 1;
    let mut is_cut = false;
    for (offset, _) in word.char_indices() {
        if len == MAX_NGRAM_WORD_CHARS + 1 {
            padded.push_str(&word[..offset]);
            is_cut = true;
            break;
        }
        bounds[len] = offset + 1;
        len += 1;
    }
    if !is_cut {
        padded.push_str(word);
        bounds[len] = padded.len();
        padded.push('$');
        len += 1;
    }
    bounds[len] = padded.len();
    windows(
        len,
        n,
        |start, end| padded.get(bounds[start]..bounds[end]).unwrap_or(""),
        &mut f,
    );
}

/// The windows of `n` characters over a padded word of `len` characters,
/// where `slice(a, b)` gives characters `a..b`. A padded word of at most `n`
/// characters is one window.
#[inline]
fn windows<'w>(
    len: usize,
    n: usize,
    slice: impl Fn(usize, usize) -> &'w str,
    f: &mut impl FnMut(&str),
) {
    if len <= n {
        f(slice(0, len));
        return;
    }
    for start in 0..=len - n {
        f(slice(start, start + n));
    }
}

/// A token found between or around words.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Mark<'a> {
    /// One symbol character, as a slice of the text.
    Symbol(&'a str),
    /// A maximal run of `!` of this length.
    ExclaimRun(usize),
    /// A number with this many digits.
    Number(usize),
}

/// Whether `c` counts as a symbol (see the module doc).
#[inline]
pub(crate) fn is_symbol(c: char) -> bool {
    if c.is_ascii() {
        ascii::is(c as u8, ascii::SYMBOL)
    } else {
        is_symbol_by_definition(c)
    }
}

/// The definition of a symbol, without the ASCII table.
pub(crate) fn is_symbol_by_definition(c: char) -> bool {
    matches!(c, '%' | '#' | '*' | '&' | '@')
        || matches!(
            c.general_category(),
            GeneralCategory::MathSymbol
                | GeneralCategory::CurrencySymbol
                | GeneralCategory::ModifierSymbol
                | GeneralCategory::OtherSymbol
        )
}

/// Reports every symbol, `!` run and number of `text` in order of their end.
pub(crate) fn scan_marks<'a>(text: &'a str, mut f: impl FnMut(Mark<'a>)) {
    let mut scan = MarkScan::default();
    if text.is_ascii() {
        for (offset, &byte) in text.as_bytes().iter().enumerate() {
            if scan.is_idle() && !ascii::is(byte, ascii::MARK) {
                // Nothing to end and nothing to start: the common case.
                continue;
            }
            let symbol = ascii::is(byte, ascii::SYMBOL).then(|| &text[offset..=offset]);
            scan.step(byte == b'!', byte.is_ascii_digit(), byte, symbol, &mut f);
        }
    } else {
        // Same steps, the ASCII runs byte by byte.
        ascii::for_each_run(text, |_, run, is_ascii| {
            if is_ascii {
                for (offset, &byte) in run.as_bytes().iter().enumerate() {
                    if scan.is_idle() && !ascii::is(byte, ascii::MARK) {
                        continue;
                    }
                    let symbol = ascii::is(byte, ascii::SYMBOL).then(|| &run[offset..=offset]);
                    scan.step(byte == b'!', byte.is_ascii_digit(), byte, symbol, &mut f);
                }
                return;
            }
            for (offset, c) in run.char_indices() {
                let symbol = is_symbol(c).then(|| &run[offset..offset + c.len_utf8()]);
                // Separators are ASCII, so non-ASCII characters pass as 0.
                scan.step(c == '!', is_decimal_digit(c), 0, symbol, &mut f);
            }
        });
    }
    scan.finish(&mut f);
}

/// Run state of [`scan_marks`].
#[derive(Default)]
struct MarkScan {
    exclaim_run: usize,
    digits: usize,
    /// A separator was seen right after a digit; one more digit continues
    /// the number, anything else ends it.
    is_after_separator: bool,
}

impl MarkScan {
    /// No run or number is open.
    #[inline]
    fn is_idle(&self) -> bool {
        self.exclaim_run == 0 && self.digits == 0
    }

    #[inline]
    fn step<'a>(
        &mut self,
        is_exclaim: bool,
        is_digit: bool,
        ascii: u8,
        symbol: Option<&'a str>,
        f: &mut impl FnMut(Mark<'a>),
    ) {
        if is_exclaim {
            self.exclaim_run += 1;
        } else if self.exclaim_run > 0 {
            f(Mark::ExclaimRun(self.exclaim_run));
            self.exclaim_run = 0;
        }
        if is_digit {
            self.digits += 1;
            self.is_after_separator = false;
        } else if self.digits > 0
            && !self.is_after_separator
            && matches!(ascii, b' ' | b'-' | b'.' | b',')
        {
            self.is_after_separator = true;
        } else {
            if self.digits > 0 {
                f(Mark::Number(self.digits));
            }
            self.digits = 0;
            self.is_after_separator = false;
        }
        if let Some(symbol) = symbol {
            f(Mark::Symbol(symbol));
        }
    }

    fn finish<'a>(&mut self, f: &mut impl FnMut(Mark<'a>)) {
        if self.exclaim_run > 0 {
            f(Mark::ExclaimRun(self.exclaim_run));
        }
        if self.digits > 0 {
            f(Mark::Number(self.digits));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ngrams(word: &str, n: usize) -> Vec<String> {
        let mut found = Vec::new();
        let mut padded = String::new();
        for_each_ngram(word, n, &mut padded, |gram| found.push(gram.to_owned()));
        found
    }

    fn marks(text: &str) -> Vec<Mark<'_>> {
        let mut found = Vec::new();
        scan_marks(text, |mark| found.push(mark));
        found
    }

    fn words(text: &str) -> Vec<&str> {
        let mut found = Vec::new();
        for_each_word(text, usize::MAX, |offset, word| {
            assert_eq!(&text[offset..offset + word.len()], word);
            found.push(word);
        });
        found
    }

    #[test]
    fn ascii_words_follow_uax29() {
        // Expected splits by the UAX #29 word boundary rules WB5-WB13b
        // (letters across MidLetter / MidNumLet, digits across MidNum /
        // MidNumLet, ExtendNumLet joins), checked against unicode_words.
        let cases: [(&str, &[&str]); 6] = [
            (
                "Don't stop: e.g. 3.14, 1,000 and snake_case",
                &["Don't", "stop", "e.g", "3.14", "1,000", "and", "snake_case"],
            ),
            (
                "http://x.example/a_b?c=1",
                &["http", "x.example", "a_b", "c", "1"],
            ),
            ("__ _a a1.b 1.a", &["_a", "a1", "b", "1", "a"]),
            ("end.", &["end"]),
            ("  ", &[]),
            ("a\r\nb", &["a", "b"]),
        ];
        for (text, expected) in cases {
            assert_eq!(words(text), expected, "{text:?}");
            assert_eq!(
                text.unicode_words().collect::<Vec<_>>(),
                expected,
                "{text:?}"
            );
        }
        let mut capped = Vec::new();
        for_each_word("one two three", 2, |_, word| capped.push(word));
        assert_eq!(capped, ["one", "two"]);
        let mut capped = Vec::new();
        for_each_word("\u{00E9}t\u{00E9} one two three", 3, |_, word| {
            capped.push(word)
        });
        assert_eq!(capped, ["\u{00E9}t\u{00E9}", "one", "two"]);
    }

    proptest::proptest! {
        #[test]
        fn ascii_words_equal_unicode_words(text in "[ -~\t\r\n]{0,60}") {
            proptest::prop_assert_eq!(words(&text), text.unicode_words().collect::<Vec<_>>());
        }

        #[test]
        fn word_offsets_point_at_the_words(text in "\\PC{0,40}") {
            // `words` asserts each offset; this runs it on non-ASCII text.
            proptest::prop_assert_eq!(words(&text), text.unicode_words().collect::<Vec<_>>());
        }

        #[test]
        fn chunked_words_equal_unicode_words(
            pieces in proptest::collection::vec(proptest::sample::select(&[
                "a", "B", "1", "_", ".", "'", ":", ",", " ", "  ", "\t", "\n", "\r", "\r\n", "\u{000B}", "\u{000C}",
                "\u{00E9}", "\u{0301}", "\u{200D}", "\u{1F600}", "\u{2764}", "\u{FE0F}", "\u{65E5}", "\u{30AB}",
                "\u{05D0}", "\"", "\u{1F1EC}", "\u{1F1E7}", "\u{00A0}", "\u{3000}", "\u{2019}", "\u{0661}",
            ][..]), 0..40)
        ) {
            let text = pieces.concat();
            proptest::prop_assert_eq!(words(&text), text.unicode_words().collect::<Vec<_>>());
        }

        #[test]
        fn ascii_words_equal_unicode_words_on_word_characters(
            text in "([a-c0-2_.,;:' ]|\\.a|a\\.|1,2){0,40}"
        ) {
            proptest::prop_assert_eq!(words(&text), text.unicode_words().collect::<Vec<_>>());
        }
    }

    #[test]
    fn ngrams_are_padded_windows() {
        assert_eq!(ngrams("free", 4), ["^fre", "free", "ree$"]);
        assert_eq!(ngrams("free", 3), ["^fr", "fre", "ree", "ee$"]);
        assert_eq!(ngrams("free", 2), ["^f", "fr", "re", "ee", "e$"]);
        assert_eq!(ngrams("a", 2), ["^a", "a$"]);
    }

    #[test]
    fn short_words_give_themselves_once() {
        assert_eq!(ngrams("hi", 4), ["^hi$"]);
        assert_eq!(ngrams("a", 4), ["^a$"]);
        assert_eq!(ngrams("abcdef", 8), ["^abcdef$"]);
        assert!(ngrams("", 4).is_empty());
    }

    #[test]
    fn ngrams_count_characters_not_bytes() {
        assert_eq!(
            ngrams("\u{00E9}t\u{00E9}", 3),
            ["^\u{00E9}t", "\u{00E9}t\u{00E9}", "t\u{00E9}$"]
        );
        assert_eq!(ngrams("日本語", 4), ["^日本語", "日本語$"]);
    }

    #[test]
    fn long_words_are_cut_without_end_marker() {
        let long = "a".repeat(100);
        let found = ngrams(&long, 4);
        // Padded form: ^ + 64 characters, no $: 65 - 4 + 1 windows.
        assert_eq!(found.len(), 62);
        assert_eq!(found[0], "^aaa");
        assert!(found.iter().all(|gram| !gram.ends_with('$')));
        let long_accented = "\u{00E9}".repeat(100);
        assert_eq!(ngrams(&long_accented, 4).len(), 62);
        // Exactly 64 characters is not cut.
        assert_eq!(
            ngrams(&"b".repeat(64), 4).last().map(String::as_str),
            Some("bbb$")
        );
    }

    #[test]
    fn symbols_include_currency_emoji_and_chosen_punctuation() {
        assert_eq!(
            marks("\u{00A3}5 \u{20AC} 50% \u{1F381} #1 a@b ok."),
            [
                Mark::Symbol("\u{00A3}"),
                Mark::Number(1),
                Mark::Symbol("\u{20AC}"),
                Mark::Number(2),
                Mark::Symbol("%"),
                Mark::Symbol("\u{1F381}"),
                Mark::Symbol("#"),
                Mark::Number(1),
                Mark::Symbol("@"),
            ]
        );
        assert!(is_symbol('$') && is_symbol('+') && is_symbol('\u{2764}'));
        assert!(!is_symbol('.') && !is_symbol('!') && !is_symbol('a') && !is_symbol('\u{00E9}'));
    }

    #[test]
    fn exclaim_runs_are_maximal() {
        assert_eq!(
            marks("wow!! now! yes!!!"),
            [
                Mark::ExclaimRun(2),
                Mark::ExclaimRun(1),
                Mark::ExclaimRun(3)
            ]
        );
    }

    #[test]
    fn numbers_join_over_single_separators() {
        assert_eq!(marks("call 0800 123 4567 now"), [Mark::Number(11)]);
        assert_eq!(marks("text 12345"), [Mark::Number(5)]);
        assert_eq!(marks("1,000.50"), [Mark::Number(6)]);
        assert_eq!(marks("07700-900123."), [Mark::Number(11)]);
        // Two separators in a row end the number.
        assert_eq!(marks("12  34"), [Mark::Number(2), Mark::Number(2)]);
        assert_eq!(marks("12 or 34"), [Mark::Number(2), Mark::Number(2)]);
        // Arabic-Indic digits are Nd.
        assert_eq!(marks("\u{0661}\u{0662}\u{0663}"), [Mark::Number(3)]);
    }
}
