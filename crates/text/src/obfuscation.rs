//! Respelled words: confusable skeletons, spaced-out letters, digits
//! standing in for letters, and words that mix scripts.
//!
//! Junk senders respell the words a filter has learnt: `pаrcel` with a
//! Cyrillic `а`, `w i n n e r`, `fr33`. The extractor keeps the features of
//! the text as written and adds, for each trick, features of their own
//! (see the table in [`crate::extract`]); this module only finds the
//! respelled forms.
//!
//! * **Skeletons** are the `skeleton(X)` of Unicode Technical Standard #39,
//!   section 4 (Confusable Detection), computed by the `unicode-security`
//!   crate from the standard's `confusables.txt`. Two words that look alike
//!   have the same skeleton, so `pаrcel` (U+0430) and `parcel` meet. A
//!   skeleton is a key, not a spelling: `m` becomes `rn` and `0` becomes
//!   `O`, so readable names show odd forms such as `rnoney`.
//! * **Spelled letters**: a word that is one letter (`w`), or single letters
//!   joined by punctuation inside one UAX #29 word (`w.i.n`, `w_i_n`). A run
//!   of such words with short gaps between them spells one word.
//! * **Digit words**: a whitespace-separated token made of ASCII letters
//!   and stand-ins (`0 1 3 4 5 7 8 9 @ $ ! |`), with at least two letters
//!   and one stand-in, is read again with each stand-in as the letter it
//!   usually replaces (common practice, no source): `fr33` is `free`.
//! * **Mixed-script words** hold letters of scripts that never share a
//!   word: their resolved script set (UTS #39 section 5.1, augmented script
//!   sets, so Japanese kana with Han still count as one script) is empty.
//!
//! Everything here runs on normalised text (see [`crate::normalize`]), so
//! words are already NFKC, lowercase and free of invisible characters.
//! What must stay true: each function is a pure function of its input, and
//! its cost is linear in the input (bounded buffers, no backtracking).

use std::sync::OnceLock;

use unicode_security::MixedScript;

/// The UTS #39 skeleton of `word`: `word` itself when it is its own
/// skeleton and ASCII (most words), else written into `out`.
pub(crate) fn skeleton_of<'a>(word: &'a str, out: &'a mut String) -> &'a str {
    if word.is_ascii() {
        let table = ascii_skeletons();
        let bytes = word.as_bytes();
        if bytes
            .iter()
            .all(|&byte| table.is_identity[usize::from(byte)])
        {
            return word;
        }
        out.clear();
        if bytes.iter().all(|&byte| table.is_ascii[usize::from(byte)]) {
            for &byte in bytes {
                out.push_str(table.of(byte));
            }
            return out;
        }
    }
    out.clear();
    out.extend(unicode_security::skeleton(word));
    out
}

/// Skeletons of single ASCII characters, taken from `unicode-security` at
/// first use.
///
/// For a word of ASCII characters whose skeletons are ASCII, the skeleton
/// of the word is the concatenation of theirs: NFD leaves ASCII as it is,
/// no ASCII character is default-ignorable, and the prototypes, being
/// ASCII, need no reordering. A property test holds the shortcut to the
/// crate's answer.
struct AsciiSkeletons {
    /// Each character's skeleton, up to 4 bytes.
    bytes: [[u8; 4]; 128],
    len: [u8; 128],
    /// The character's skeleton is ASCII and fits in 4 bytes.
    is_ascii: [bool; 128],
    /// The character is its own skeleton.
    is_identity: [bool; 128],
}

impl AsciiSkeletons {
    fn of(&self, byte: u8) -> &str {
        let index = usize::from(byte);
        let len = usize::from(self.len[index]);
        // Only ASCII skeletons are stored, so the bytes are UTF-8.
        std::str::from_utf8(&self.bytes[index][..len]).unwrap_or("")
    }
}

fn ascii_skeletons() -> &'static AsciiSkeletons {
    static TABLE: OnceLock<AsciiSkeletons> = OnceLock::new();
    TABLE.get_or_init(|| {
        let mut table = AsciiSkeletons {
            bytes: [[0; 4]; 128],
            len: [0; 128],
            is_ascii: [false; 128],
            is_identity: [false; 128],
        };
        for byte in 0u8..128 {
            let text = char::from(byte).to_string();
            let skeleton: String = unicode_security::skeleton(&text).collect();
            let index = usize::from(byte);
            if skeleton.is_ascii() && skeleton.len() <= 4 {
                table.bytes[index][..skeleton.len()].copy_from_slice(skeleton.as_bytes());
                table.len[index] = skeleton.len() as u8;
                table.is_ascii[index] = true;
                table.is_identity[index] = skeleton == text;
            }
        }
        table
    })
}

/// Whether a word mixes scripts (UTS #39 section 5.1: its resolved script
/// set is empty). ASCII words never do.
pub(crate) fn is_mixed_script(word: &str) -> bool {
    !word.is_ascii() && !word.is_single_script()
}

/// Fewest spelled letters in a row that make a joined word.
pub(crate) const MIN_JOINED_LETTERS: usize = 3;

/// Longest gap, in characters, between two spelled-letter words of one run.
pub(crate) const MAX_JOIN_GAP_CHARS: usize = 3;

/// Letters kept of one joined word; a longer run keeps its first ones.
pub(crate) const MAX_JOINED_CHARS: usize = 64;

/// A word that spells letters one by one: a single letter (`w`), or single
/// letters with the same non-alphanumeric character between each two
/// (`w.i.n`, `w_i_n`, `w'i'n`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Spelled<'w> {
    word: &'w str,
    /// The character between the letters; `None` for a single letter.
    separator: Option<char>,
}

impl<'w> Spelled<'w> {
    /// `None` for a word that does not spell letters one by one.
    /// True for most words that do not spell letters: a second character
    /// that is a letter or digit. (A first character of several bytes
    /// leaves a byte >= 0x80 there, which is not decided here.)
    #[inline]
    fn is_surely_not(word: &str) -> bool {
        word.as_bytes()
            .get(1)
            .is_some_and(u8::is_ascii_alphanumeric)
    }

    pub(crate) fn of(word: &'w str) -> Option<Self> {
        if Spelled::is_surely_not(word) {
            return None;
        }
        let mut separator = None;
        let mut expects_letter = true;
        for c in word.chars() {
            if expects_letter {
                if !c.is_alphabetic() {
                    return None;
                }
            } else {
                if c.is_alphanumeric() || separator.is_some_and(|sep| sep != c) {
                    return None;
                }
                separator = Some(c);
            }
            expects_letter = !expects_letter;
        }
        // Empty, or ends on a separator (a UAX #29 word never does).
        if expects_letter {
            return None;
        }
        Some(Spelled { word, separator })
    }

    /// The letters, in order.
    pub(crate) fn letters(&self) -> impl Iterator<Item = char> + 'w {
        self.word.chars().step_by(2)
    }
}

/// Joins runs of spelled-letter words. Feed it every word of a field in
/// order with [`LetterRun::word`], then call [`LetterRun::finish`]; each
/// run of at least [`MIN_JOINED_LETTERS`] letters is reported once.
///
/// One run uses one separator throughout: the gaps between its words,
/// whitespace aside, and the characters inside its dotted words must all be
/// the same (`w i n`, `w . i . n`, `w-i-n`, `w.i.n`). So in
/// `you are a w.i.n.n.e.r` the article `a` stays out of the run; in
/// `a w i n n e r` it cannot be told apart and is joined (`awinner`).
#[derive(Debug, Default)]
pub(crate) struct LetterRun {
    letters: String,
    /// Letters in the current run, counting those past the cap.
    count: usize,
    /// Byte offset just past the run's last word.
    end: usize,
    /// The run's separator without whitespace, once known.
    separator: Option<String>,
}

impl LetterRun {
    /// Takes the word at `offset` in `text`; `joined` is called with the
    /// letters of a run that this word ends.
    #[inline]
    pub(crate) fn word(
        &mut self,
        text: &str,
        offset: usize,
        word: &str,
        joined: impl FnOnce(&str),
    ) {
        if self.count == 0 && Spelled::is_surely_not(word) {
            return; // most words: nothing to end, nothing to start
        }
        self.any_word(text, offset, word, joined);
    }

    fn any_word(&mut self, text: &str, offset: usize, word: &str, joined: impl FnOnce(&str)) {
        let Some(spelled) = Spelled::of(word) else {
            if self.count > 0 {
                self.finish(joined);
            }
            return;
        };
        let gap = text.get(self.end..offset).unwrap_or("\n");
        if self.count > 0 && !self.takes(gap, spelled.separator) {
            self.finish(joined);
        }
        if self.separator.is_none()
            && let Some(inner) = spelled.separator
        {
            self.separator = Some(inner.to_string());
        }
        for letter in spelled.letters() {
            if self.count < MAX_JOINED_CHARS {
                self.letters.push(letter);
            }
            self.count += 1;
        }
        self.end = offset + word.len();
    }

    /// Whether a word after `gap`, with `inner` between its own letters,
    /// continues the run; fixes the run's separator if it was open.
    fn takes(&mut self, gap: &str, inner: Option<char>) -> bool {
        let is_short = gap.len() <= 4 * MAX_JOIN_GAP_CHARS
            && gap.chars().count() <= MAX_JOIN_GAP_CHARS
            && !gap.contains(['\n', '\r']);
        if !is_short {
            return false;
        }
        let key = gap.chars().filter(|c| !c.is_whitespace());
        let is_same = match &self.separator {
            Some(separator) => key.eq(separator.chars()),
            None => {
                self.separator = Some(key.collect());
                true
            }
        };
        let separator = self.separator.as_deref().unwrap_or("");
        is_same && inner.is_none_or(|inner| separator.chars().eq([inner]))
    }

    /// Ends the current run; `joined` is called with its letters if it is
    /// long enough.
    pub(crate) fn finish(&mut self, joined: impl FnOnce(&str)) {
        if self.count >= MIN_JOINED_LETTERS {
            joined(&self.letters);
        }
        self.letters.clear();
        self.count = 0;
        self.separator = None;
    }
}

/// Longest token, in bytes, that is read as a digit word.
pub(crate) const MAX_DIGIT_WORD_BYTES: usize = 32;

/// The letter an ASCII stand-in usually replaces (common practice, no
/// source).
const fn stand_in_letter(byte: u8) -> Option<u8> {
    Some(match byte {
        b'0' => b'o',
        b'1' | b'!' => b'i',
        b'3' => b'e',
        b'4' | b'@' => b'a',
        b'5' | b'$' => b's',
        b'7' => b't',
        b'8' => b'b',
        b'9' => b'g',
        b'|' => b'l',
        _ => return None,
    })
}

/// Calls `f` with the letter reading of each digit word of `text` (see the
/// module doc), for at most `cap` of them. `out` holds the reading.
///
/// Tokens are split at ASCII whitespace (NFKC has already made other
/// spaces ASCII) and lose leading and trailing characters other than
/// letters, digits, `@` and `$`. A token whose stand-ins are all a leading
/// number or `@` (`10am`, `1st`, `@name`) is a quantity, an ordinal or a
/// handle, not a respelling, and is skipped.
///
/// The scan jumps from stand-in to stand-in; only the tokens holding one
/// are looked at whole.
pub(crate) fn for_each_digit_word(
    text: &str,
    cap: usize,
    out: &mut String,
    mut f: impl FnMut(&str),
) {
    let bytes = text.as_bytes();
    let mut taken = 0;
    let mut from = 0;
    while let Some(offset) = bytes[from..]
        .iter()
        .position(|&byte| IS_STAND_IN[usize::from(byte)])
    {
        let at = from + offset;
        // `from` is 0 or just past whitespace, so the token starts there
        // at the earliest.
        let start = bytes[from..at]
            .iter()
            .rposition(u8::is_ascii_whitespace)
            .map_or(from, |i| from + i + 1);
        let end = bytes[at..]
            .iter()
            .position(u8::is_ascii_whitespace)
            .map_or(bytes.len(), |i| at + i);
        if let Some(core) = digit_word_core(&bytes[start..end]) {
            if taken >= cap {
                return;
            }
            out.clear();
            for &byte in core {
                out.push(char::from(stand_in_letter(byte).unwrap_or(byte)));
            }
            taken += 1;
            f(out);
        }
        from = end;
    }
}

/// The bytes [`stand_in_letter`] maps, as a table for the scan.
static IS_STAND_IN: [bool; 256] = {
    let mut table = [false; 256];
    let mut byte = 0;
    while byte < 256 {
        table[byte] = stand_in_letter(byte as u8).is_some();
        byte += 1;
    }
    table
};

/// The token without its trimmed ends, if it is a digit word.
fn digit_word_core(token: &[u8]) -> Option<&[u8]> {
    let is_kept = |byte: &u8| byte.is_ascii_alphanumeric() || matches!(byte, b'@' | b'$');
    let start = token.iter().position(is_kept)?;
    let last = token.iter().rposition(is_kept)?;
    let core = &token[start..=last];
    (core.len() <= MAX_DIGIT_WORD_BYTES && is_digit_word(core)).then_some(core)
}

/// Letters and stand-ins only, at least two letters and one stand-in, and
/// not a leading number or `@` before plain letters.
fn is_digit_word(core: &[u8]) -> bool {
    let mut letters = 0;
    let mut stand_ins = 0;
    for &byte in core {
        if byte.is_ascii_alphabetic() {
            letters += 1;
        } else if stand_in_letter(byte).is_some() {
            stand_ins += 1;
        } else {
            return false;
        }
    }
    if letters < 2 || stand_ins == 0 {
        return false;
    }
    let leading = core
        .iter()
        .take_while(|&&byte| byte.is_ascii_digit() || byte == b'@')
        .count();
    let is_leading_quantity = leading > 0
        && core[leading..]
            .iter()
            .all(|byte| byte.is_ascii_alphabetic());
    !is_leading_quantity
}

#[cfg(test)]
mod tests {
    use proptest::prelude::*;

    use super::*;

    fn skeleton(word: &str) -> String {
        let mut out = String::new();
        skeleton_of(word, &mut out).to_owned()
    }

    #[test]
    fn confusables_meet_in_one_skeleton() {
        // Mappings from the Unicode confusables data (UTS #39,
        // confusables.txt, the version shipped by unicode-security):
        // U+0430 CYRILLIC SMALL LETTER A -> U+0061 LATIN SMALL LETTER A
        assert_eq!(skeleton("p\u{0430}rcel"), skeleton("parcel"));
        // U+043E CYRILLIC SMALL LETTER O -> U+006F LATIN SMALL LETTER O
        assert_eq!(skeleton("sh\u{043E}p"), "shop");
        // U+0456 CYRILLIC SMALL LETTER BYELORUSSIAN-UKRAINIAN I -> U+0069
        assert_eq!(skeleton("w\u{0456}nner"), "winner");
        // U+03BF GREEK SMALL LETTER OMICRON -> U+006F
        assert_eq!(skeleton("\u{03BF}rder"), "order");
        // U+0031 DIGIT ONE -> U+006C LATIN SMALL LETTER L
        assert_eq!(skeleton("1ink"), skeleton("link"));
        // U+006D LATIN SMALL LETTER M -> U+0072 U+006E ("rn"): the
        // skeleton is a key, not a spelling.
        assert_eq!(skeleton("money"), "rnoney");
        assert_eq!(skeleton("rnoney"), "rnoney");
        // U+0030 DIGIT ZERO -> U+004F LATIN CAPITAL LETTER O
        assert_eq!(skeleton("g00d"), "gOOd");
        // Unrelated words stay apart.
        assert_ne!(skeleton("bowl"), skeleton("bawl"));
    }

    #[test]
    fn ascii_table_matches_the_crate_for_every_character() {
        for byte in 0u8..128 {
            let text = char::from(byte).to_string();
            let expected: String = unicode_security::skeleton(&text).collect();
            assert_eq!(skeleton(&text), expected, "{byte:#04x}");
        }
        // '%' maps to a non-ASCII sequence (U+00B0 / U+2080), so words
        // with it take the general path.
        assert!(!ascii_skeletons().is_ascii[usize::from(b'%')]);
    }

    proptest! {
        #[test]
        fn ascii_shortcut_equals_the_crate(word in "[ -~]{0,24}") {
            let expected: String = unicode_security::skeleton(&word).collect();
            prop_assert_eq!(skeleton(&word), expected);
        }

        #[test]
        fn skeletons_of_any_text_do_not_panic(word in "\\PC{0,24}") {
            let expected: String = unicode_security::skeleton(&word).collect();
            prop_assert_eq!(skeleton(&word), expected);
        }
    }

    #[test]
    fn mixed_scripts_are_found_by_resolved_script_set() {
        // Latin with U+0430 CYRILLIC SMALL LETTER A: no script has both.
        assert!(is_mixed_script("p\u{0430}rcel"));
        // Latin with U+03BF GREEK SMALL LETTER OMICRON.
        assert!(is_mixed_script("\u{03BF}rder"));
        // One script each, with digits and accents (Common, Inherited).
        assert!(!is_mixed_script("caf\u{00E9}"));
        assert!(!is_mixed_script(
            "\u{043F}\u{0440}\u{0438}\u{0432}\u{0435}\u{0442}"
        ));
        assert!(!is_mixed_script("na\u{00EF}ve2"));
        // Han with Katakana is one augmented script set (Japanese), per
        // UTS #39 section 5.1.
        assert!(!is_mixed_script("\u{6771}\u{4EAC}\u{30BF}\u{30EF}\u{30FC}"));
        assert!(!is_mixed_script("plain"));
    }

    fn spelled(word: &str) -> Option<String> {
        Spelled::of(word).map(|spelled| spelled.letters().collect())
    }

    #[test]
    fn spelled_letter_words() {
        assert_eq!(spelled("w").as_deref(), Some("w"));
        assert_eq!(spelled("w.i.n").as_deref(), Some("win"));
        assert_eq!(spelled("w_i_n").as_deref(), Some("win"));
        assert_eq!(spelled("\u{00E9}").as_deref(), Some("\u{00E9}"));
        for word in [
            "win", "w..i", "w.in", "1", "w.1", "w1i", "w.i_n", "e.g.", "", "_w",
        ] {
            assert_eq!(spelled(word), None, "{word:?}");
        }
    }

    /// Joined words of `text`, split into UAX #29 words.
    fn joined(text: &str) -> Vec<String> {
        let mut found = Vec::new();
        let mut run = LetterRun::default();
        crate::tokens::for_each_word(text, usize::MAX, |offset, word| {
            run.word(text, offset, word, |letters| found.push(letters.to_owned()));
        });
        run.finish(|letters| found.push(letters.to_owned()));
        found
    }

    #[test]
    fn runs_of_single_letters_are_joined() {
        assert_eq!(joined("claim the w i n n e r prize"), ["winner"]);
        assert_eq!(joined("w.i.n.n.e.r"), ["winner"]);
        assert_eq!(joined("w-i-n"), ["win"]);
        assert_eq!(joined("w . i . n"), ["win"]);
        assert_eq!(joined("w.i.n . n.e.r"), ["winner"]);
        assert_eq!(joined("f r e e, then s h o p"), ["free", "shop"]);
        // One separator per run: the article stays out.
        assert_eq!(joined("you are a w.i.n.n.e.r"), ["winner"]);
        assert_eq!(joined("x y z-w-i-n"), ["xyz", "win"]);
        // ... unless it cannot be told apart.
        assert_eq!(joined("you are a w i n n e r"), ["awinner"]);
        // Two letters are not enough, a long gap or a line break ends a run.
        assert!(joined("a b cat").is_empty());
        assert!(joined("w    i    n").is_empty());
        assert!(joined("w\ni\nn").is_empty());
        assert!(joined("a plain sentence").is_empty());
    }

    #[test]
    fn joined_words_are_capped() {
        let text = "x ".repeat(1000);
        let found = joined(&text);
        assert_eq!(found, ["x".repeat(MAX_JOINED_CHARS)]);
    }

    fn digit_words(text: &str) -> Vec<String> {
        let mut found = Vec::new();
        let mut out = String::new();
        for_each_digit_word(text, usize::MAX, &mut out, |word| {
            found.push(word.to_owned())
        });
        found
    }

    #[test]
    fn stand_ins_read_as_letters() {
        assert_eq!(
            digit_words("get fr33 c4$h, b0wls and p@rcel (l0an)!"),
            ["free", "cash", "bowls", "parcel", "loan"]
        );
        assert_eq!(digit_words("$ave now"), ["save"]);
    }

    #[test]
    fn quantities_codes_and_plain_words_are_not_digit_words() {
        assert!(
            digit_words("at 10am on the 1st, 3 bowls, 2nite @coop h2o a1 free 12345").is_empty()
        );
        assert!(digit_words("shop.example.com/f00 x@example.com").is_empty());
        let long = format!("{}0", "a".repeat(MAX_DIGIT_WORD_BYTES));
        assert!(digit_words(&long).is_empty());
    }

    proptest! {
        #[test]
        fn digit_words_are_those_of_each_whitespace_token(
            pieces in prop::collection::vec(prop::sample::select(&[
                "fr", "ee", "3", "0", "1", "2", "@", "$", "!", "|", " ", "\t", "\n", ".", "(", "\u{00E9}", "x",
            ][..]), 0..40)
        ) {
            let text = pieces.concat();
            let expected: Vec<String> = text
                .split(|c: char| c.is_ascii_whitespace())
                .filter_map(|token| digit_word_core(token.as_bytes()))
                .map(|core| {
                    core.iter()
                        .map(|&byte| char::from(stand_in_letter(byte).unwrap_or(byte)))
                        .collect()
                })
                .collect();
            prop_assert_eq!(digit_words(&text), expected);
        }
    }

    #[test]
    fn digit_words_are_capped() {
        let mut found = 0;
        let mut out = String::new();
        for_each_digit_word(&"fr33 ".repeat(100), 7, &mut out, |_| found += 1);
        assert_eq!(found, 7);
    }
}
