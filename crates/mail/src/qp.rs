//! Quoted-printable decoding (RFC 2045 section 6.7), forgiving as mail
//! readers are.
//!
//! The parser used to go through `mailparse`, which hands the body to the
//! `quoted_printable` crate in its robust mode; that first copies the body
//! into a `String` one character at a time, and was the largest single cost
//! of reading a typical mail. This module gives byte for byte the same
//! output in one pass (a property test compares the two):
//!
//! * only tab, CR, LF and printable ASCII are read; other bytes are dropped;
//! * lines end at LF (a CR before it belongs to the break) and lose trailing
//!   whitespace (rule 3: it may have been added in transport);
//! * `=` at the end of a line is a soft line break (rule 5): the lines join;
//! * `=XY` with two hex digits, either case, is the byte `0xXY` (rule 1);
//!   an `=` not followed by two hex digits is kept as written;
//! * other line breaks become CRLF, including one at the very end.

/// Decodes a quoted-printable body; see the module doc. Never fails.
pub(crate) fn decode_quoted_printable(body: &[u8]) -> Vec<u8> {
    let mut out = Vec::with_capacity(body.len());
    // Lines holding bytes that are dropped are copied here without them.
    let mut filtered: Vec<u8> = Vec::new();
    // A line break is owed before the next line's content.
    let mut owes_break = false;
    let mut rest = body;
    // Whether the last line read ended with LF.
    let mut ended_with_lf = false;
    while !rest.is_empty() {
        let (raw_line, after) = match memchr::memchr(b'\n', rest) {
            Some(at) => (&rest[..at], &rest[at + 1..]),
            None => (rest, &[][..]),
        };
        ended_with_lf = after.len() < rest.len() - raw_line.len();
        rest = after;
        let mut line = if raw_line.iter().all(|&byte| is_read(byte)) {
            raw_line
        } else {
            filtered.clear();
            filtered.extend(raw_line.iter().copied().filter(|&byte| is_read(byte)));
            &filtered[..]
        };
        // `str::lines` drops one CR before the LF, then `trim_end` all
        // trailing whitespace; among the bytes read that is tab, CR, space.
        while let [head @ .., b'\t' | b'\r' | b' '] = line {
            line = head;
        }
        if owes_break {
            out.extend_from_slice(b"\r\n");
        }
        owes_break = decode_line(line, &mut out);
    }
    if ended_with_lf && owes_break {
        out.extend_from_slice(b"\r\n");
    }
    out
}

/// Tab, CR and printable ASCII: the bytes read (LF splits lines).
#[inline]
fn is_read(byte: u8) -> bool {
    matches!(byte, b'\t' | b'\r' | b' '..=b'~')
}

/// Decodes one line without its break into `out`; returns whether the
/// line ends with a hard break (false after a soft break).
fn decode_line(mut line: &[u8], out: &mut Vec<u8>) -> bool {
    while let Some(at) = memchr::memchr(b'=', line) {
        out.extend_from_slice(&line[..at]);
        match (line.get(at + 1), line.get(at + 2)) {
            (None, _) => return false,
            (Some(&upper), None) => {
                out.extend_from_slice(&[b'=', upper]);
                return true;
            }
            (Some(&upper), Some(&lower)) => {
                match (hex_value(upper), hex_value(lower)) {
                    (Some(high), Some(low)) => out.push(high << 4 | low),
                    _ => out.extend_from_slice(&[b'=', upper, lower]),
                }
                line = &line[at + 3..];
            }
        }
    }
    out.extend_from_slice(line);
    true
}

fn hex_value(byte: u8) -> Option<u8> {
    match byte {
        b'0'..=b'9' => Some(byte - b'0'),
        b'a'..=b'f' => Some(byte - b'a' + 10),
        b'A'..=b'F' => Some(byte - b'A' + 10),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use mailparse::ParsedContentType;
    use mailparse::body::Body;
    use proptest::prelude::*;

    use super::*;

    /// What `mailparse` (and the `quoted_printable` crate under it) gives.
    fn reference(body: &[u8]) -> Vec<u8> {
        let ctype = ParsedContentType::default();
        let encoding = Some("quoted-printable".to_owned());
        match Body::new(body, &ctype, &encoding) {
            Body::QuotedPrintable(encoded) => encoded.get_decoded().unwrap_or_default(),
            _ => unreachable!("quoted-printable body expected"),
        }
    }

    #[test]
    fn rfc2045_rules() {
        // RFC 2045 section 6.7: the "Now's the time" soft line break example
        // of rule 5, "=3D" for "=" (rule 1), and trailing white space that
        // transport may add (rule 3) removed.
        let body = b"Now's the time =\r\nfor all folk to come=\r\n to the aid of their country.  \r\n2+2=3D4\r\n";
        let decoded = decode_quoted_printable(body);
        assert_eq!(
            decoded,
            b"Now's the time for all folk to come to the aid of their country.\r\n2+2=4\r\n"
        );
        assert_eq!(decoded, reference(body));
    }

    #[test]
    fn broken_escapes_are_kept_as_written() {
        for body in [
            &b"a=ZZb"[..],
            b"a=4",
            b"=",
            b"a=\n",
            b"caf=e9 =C3=A9",
            b"x\ry\r\n\r\n",
            b"\n\n",
            b"",
            b"tab\t\nend",
            b"8bit \xe9 dropped",
        ] {
            assert_eq!(decode_quoted_printable(body), reference(body), "{body:?}");
        }
    }

    /// Bytes that exercise every rule: escapes, breaks, whitespace.
    fn qp_byte() -> impl Strategy<Value = u8> {
        prop_oneof![
            4 => prop::sample::select(&b"=\r\n \tAaF09zZ"[..]),
            1 => any::<u8>(),
        ]
    }

    proptest! {
        #[test]
        fn same_bytes_as_the_reference_decoder(body in prop::collection::vec(qp_byte(), 0..200)) {
            prop_assert_eq!(decode_quoted_printable(&body), reference(&body));
        }
    }
}
