//! Byte classes for the ASCII fast paths of the tokenisers.
//!
//! One table lookup replaces a chain of comparisons in the loops that run
//! over every byte of ASCII text. Each class has a unit test holding it to
//! the character predicate it stands for.

/// Letters, digits and `_`: the core of a UAX #29 word in ASCII.
pub(crate) const WORD_CORE: u8 = 1 << 0;
/// Symbols: `$ + < = > ^ ` | ~` (General_Category S*) and `% # * & @`.
pub(crate) const SYMBOL: u8 = 1 << 1;
/// Bytes that start or continue a mark: `!`, digits and symbols.
pub(crate) const MARK: u8 = 1 << 2;
/// Bytes that end a URL candidate: whitespace and `< > " ' ( ) [ ] { } , ; | \` and backtick.
pub(crate) const URL_DELIMITER: u8 = 1 << 3;

const fn build() -> [u8; 256] {
    let mut table = [0u8; 256];
    let mut byte = 0usize;
    while byte < 128 {
        let b = byte as u8;
        let mut class = 0;
        if b.is_ascii_alphanumeric() || b == b'_' {
            class |= WORD_CORE;
        }
        let is_symbol = matches!(
            b,
            b'$' | b'+'
                | b'<'
                | b'='
                | b'>'
                | b'^'
                | b'`'
                | b'|'
                | b'~'
                | b'%'
                | b'#'
                | b'*'
                | b'&'
                | b'@'
        );
        if is_symbol {
            class |= SYMBOL;
        }
        if is_symbol || b == b'!' || b.is_ascii_digit() {
            class |= MARK;
        }
        // ASCII White_Space is 0x09..=0x0D and the space.
        let is_space = matches!(b, 0x09..=0x0D | b' ');
        let is_url_punct = matches!(
            b,
            b'<' | b'>'
                | b'"'
                | b'\''
                | b'('
                | b')'
                | b'['
                | b']'
                | b'{'
                | b'}'
                | b','
                | b';'
                | b'|'
                | b'\\'
                | b'`'
        );
        if is_space || is_url_punct {
            class |= URL_DELIMITER;
        }
        table[byte] = class;
        byte += 1;
    }
    table
}

static CLASSES: [u8; 256] = build();

/// Whether `byte` is in any of the classes in `mask`.
#[inline]
pub(crate) fn is(byte: u8, mask: u8) -> bool {
    CLASSES[usize::from(byte)] & mask != 0
}

/// Calls `f(offset, run, is_ascii)` for the maximal runs of ASCII and of
/// non-ASCII characters of `text`, in order. Mostly-ASCII text then takes
/// the byte-wise fast paths for most of its length. An ASCII byte is
/// always a whole character, so every run is a `str` of its own.
#[inline]
pub(crate) fn for_each_run<'a>(text: &'a str, mut f: impl FnMut(usize, &'a str, bool)) {
    let bytes = text.as_bytes();
    let mut start = 0;
    while start < bytes.len() {
        let is_ascii = bytes[start].is_ascii();
        let len = bytes[start..]
            .iter()
            .position(|byte| byte.is_ascii() != is_ascii)
            .unwrap_or(bytes.len() - start);
        f(start, &text[start..start + len], is_ascii);
        start += len;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn runs_alternate_and_cover_the_text() {
        let text = "caf\u{00E9} \u{00A3}5, na\u{00EF}ve\u{1F381}";
        let mut runs = Vec::new();
        for_each_run(text, |offset, run, is_ascii| {
            assert_eq!(&text[offset..offset + run.len()], run);
            assert_eq!(run.is_ascii(), is_ascii);
            runs.push(run);
        });
        assert_eq!(runs.concat(), text);
        assert_eq!(
            runs,
            [
                "caf",
                "\u{00E9}",
                " ",
                "\u{00A3}",
                "5, na",
                "\u{00EF}",
                "ve",
                "\u{1F381}"
            ]
        );
        for_each_run("", |_, _, _| panic!("no runs in empty text"));
    }

    #[test]
    fn classes_match_their_predicates() {
        for byte in 0u8..128 {
            let c = char::from(byte);
            assert_eq!(
                is(byte, WORD_CORE),
                c.is_ascii_alphanumeric() || c == '_',
                "{c:?}"
            );
            assert_eq!(
                is(byte, SYMBOL),
                crate::tokens::is_symbol_by_definition(c),
                "{c:?}"
            );
            assert_eq!(
                is(byte, MARK),
                c == '!' || c.is_ascii_digit() || crate::tokens::is_symbol_by_definition(c),
                "{c:?}"
            );
            assert_eq!(
                is(byte, URL_DELIMITER),
                crate::urls::is_delimiter(c),
                "{c:?}"
            );
        }
        for byte in 128u8..=255 {
            assert!(
                !is(byte, WORD_CORE | SYMBOL | MARK | URL_DELIMITER),
                "{byte}"
            );
        }
    }
}
