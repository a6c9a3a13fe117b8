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

#[cfg(test)]
mod tests {
    use super::*;

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
