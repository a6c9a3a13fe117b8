//! Property tests: `parse_mail` never panics and always finishes, on
//! arbitrary bytes, on mutations of a valid multipart mail and on large
//! generated mails, and the raw-mail path up to the feature vector stays
//! within bounds set by the caps.

use chaffgate_mail::{MailLimits, Truncation, parse_mail};
use chaffgate_text::{Extractor, FeatureSettings, HashKey};
use proptest::prelude::*;

/// A valid mail touching every parsing path: encoded words, addresses,
/// nested multiparts, quoted-printable, base64, HTML with links.
const SEED_MAIL: &[u8] = b"From: =?UTF-8?Q?Loom_&_Kiln?= <shop@example.com>\r\n\
Reply-To: refunds@example.net\r\n\
Subject: =?ISO-8859-1?Q?Caf=E9?= order\r\n\
Date: Fri, 20 Nov 2026 09:15:00 +0100\r\n\
Received: from relay1.example.net\r\n\
List-Id: <news.example.com>\r\n\
Content-Type: multipart/mixed; boundary=\"outer\"\r\n\
\r\n\
preamble\r\n\
--outer\r\n\
Content-Type: multipart/alternative; boundary=\"inner\"\r\n\
\r\n\
--inner\r\n\
Content-Type: text/plain; charset=ISO-8859-1\r\n\
Content-Transfer-Encoding: quoted-printable\r\n\
\r\n\
Soft =\r\nbreak =3D caf=E9\r\n\
--inner\r\n\
Content-Type: text/html\r\n\
\r\n\
<p><a href=\"https://login.example.net/\">shop.example.com</a><img src=x></p>\r\n\
--inner--\r\n\
--outer\r\n\
Content-Type: application/pdf\r\n\
Content-Disposition: attachment; filename=\"a.pdf\"\r\n\
Content-Transfer-Encoding: base64\r\n\
\r\n\
JVBERi0xLjQK\r\n\
--outer--\r\n\
epilogue\r\n";

/// Small caps, so that mutated inputs hit every cap now and then.
fn small_limits() -> MailLimits {
    MailLimits {
        max_bytes: 4_096,
        max_mime_depth: 4,
        max_parts: 8,
        max_headers: 20,
        max_decoded_bytes: 256,
        ..MailLimits::default()
    }
}

#[derive(Debug, Clone)]
enum Mutation {
    Flip { at: usize, byte: u8 },
    Delete { at: usize, len: usize },
    Insert { at: usize, bytes: Vec<u8> },
    Duplicate { at: usize, len: usize },
}

fn mutation() -> impl Strategy<Value = Mutation> {
    let at = 0..SEED_MAIL.len();
    prop_oneof![
        (at.clone(), any::<u8>()).prop_map(|(at, byte)| Mutation::Flip { at, byte }),
        (at.clone(), 1..40usize).prop_map(|(at, len)| Mutation::Delete { at, len }),
        (
            at.clone(),
            prop::collection::vec(
                prop_oneof![
                    Just(b'\r'),
                    Just(b'\n'),
                    Just(b'='),
                    Just(b'-'),
                    Just(b'<'),
                    Just(b'"'),
                    any::<u8>()
                ],
                1..12
            )
        )
            .prop_map(|(at, bytes)| Mutation::Insert { at, bytes }),
        (at, 1..200usize).prop_map(|(at, len)| Mutation::Duplicate { at, len }),
    ]
}

fn apply(mail: &mut Vec<u8>, mutation: &Mutation) {
    let clamp = |at: usize, mail: &Vec<u8>| at.min(mail.len());
    match mutation {
        Mutation::Flip { at, byte } => {
            if let Some(slot) = mail.get_mut(*at) {
                *slot = *byte;
            }
        }
        Mutation::Delete { at, len } => {
            let start = clamp(*at, mail);
            let end = clamp(start + len, mail);
            mail.drain(start..end);
        }
        Mutation::Insert { at, bytes } => {
            let at = clamp(*at, mail);
            mail.splice(at..at, bytes.iter().copied());
        }
        Mutation::Duplicate { at, len } => {
            let start = clamp(*at, mail);
            let end = clamp(start + len, mail);
            let copy = mail[start..end].to_vec();
            mail.splice(end..end, copy);
        }
    }
}

proptest! {
    #[test]
    fn arbitrary_bytes_never_panic(raw in prop::collection::vec(any::<u8>(), 0..2_048)) {
        let parsed = parse_mail(&raw, &MailLimits::default());
        prop_assert!(parsed.facts.html_only_share >= 0.0 && parsed.facts.html_only_share <= 1.0);
    }

    #[test]
    fn mutated_mail_never_panics(mutations in prop::collection::vec(mutation(), 1..8)) {
        let mut raw = SEED_MAIL.to_vec();
        for mutation in &mutations {
            apply(&mut raw, mutation);
        }
        let limits = small_limits();
        let parsed = parse_mail(&raw, &limits);
        prop_assert!(parsed.facts.html_only_share >= 0.0 && parsed.facts.html_only_share <= 1.0);
        let decoded: usize = parsed.facts.attachments.iter().map(|a| a.size_bytes).sum();
        prop_assert!(decoded <= limits.max_decoded_bytes);
        if raw.len() > limits.max_bytes {
            prop_assert!(parsed.truncations.contains(&Truncation::MessageTooLarge));
        }
    }

    #[test]
    fn parsing_is_deterministic(raw in prop::collection::vec(any::<u8>(), 0..512)) {
        // A generous time budget, so that a slow machine cannot make the two
        // runs stop at different points.
        let limits = MailLimits {
            time_budget: std::time::Duration::from_secs(60),
            ..MailLimits::default()
        };
        let first = parse_mail(&raw, &limits);
        let second = parse_mail(&raw, &limits);
        prop_assert_eq!(first, second);
    }
}

#[test]
fn seed_mail_parses_without_truncation() {
    // Guards the property test: its seed must exercise the full paths.
    let parsed = parse_mail(SEED_MAIL, &small_limits());
    assert!(
        parsed.truncations.is_empty(),
        "{truncations:?}",
        truncations = parsed.truncations
    );
    assert_eq!(parsed.message.subject.as_deref(), Some("Caf\u{e9} order"));
    assert_eq!(
        parsed.message.body.as_deref(),
        Some("Soft break = caf\u{e9}")
    );
    assert_eq!(parsed.facts.attachments.len(), 1);
    assert!(parsed.facts.has_link_text_host_mismatch());
    assert!(parsed.facts.is_reply_to_elsewhere());
}

/// Pieces of text parts: shop words, respellings, invisible and combining
/// characters, quoted-printable escapes, line breaks, a stray delimiter.
const TEXT_PIECES: &[&str] = &[
    "glazed ",
    "bowl ",
    "order ",
    "w i n n e r ",
    "fr33 ",
    "c@$h ",
    "p\u{0430}rcel ",
    "\u{200B}",
    "\u{00AD}",
    "\u{0301}",
    "\u{FF26}",
    "\u{1F381}",
    "\u{FEFF}",
    "=",
    "=\r\n",
    "=C3=A9",
    "=ZZ",
    "\r\n",
    "\n",
    "\r",
    "--b1\r\n",
    "https://shop.example.com/cart?x=1 ",
    "www.example.net ",
    "0800 123 4567 ",
    "!!!!",
    "\u{00A3}",
    "x",
    " ",
];

/// Pieces of HTML parts: nesting, comments inside words, raw text,
/// character references, links and images.
const HTML_PIECES: &[&str] = &[
    "<div>",
    "</div>",
    "<p>",
    "<span>",
    "</span>",
    "<b>",
    "win<!-- x -->ner ",
    "<!--",
    "-->",
    "<script>",
    "</script>",
    "<style>p{}</style>",
    "<a href=\"https://login.example.net/\">",
    "shop.example.com",
    "</a>",
    "<img src=x>",
    "&#8203;",
    "&amp;",
    "&notanentity;",
    "<table><tr><td>",
    "</table>",
    "k\u{0456}ln ",
    "glazed bowls ",
    "<",
    ">",
    " ",
];

/// One leaf part of a generated mail.
#[derive(Debug, Clone)]
enum Leaf {
    Plain { text: String },
    QuotedPrintable { text: String },
    Html { html: String, is_base64: bool },
    Attachment { len: usize, seed: u64 },
}

/// `unit` repeated `times` times: large inputs from a short description.
fn repeated(pieces: &'static [&'static str], max_times: usize) -> impl Strategy<Value = String> {
    (
        prop::collection::vec(prop::sample::select(pieces), 1..24),
        1..max_times,
    )
        .prop_map(|(unit, times)| unit.concat().repeat(times))
}

fn leaf() -> impl Strategy<Value = Leaf> {
    prop_oneof![
        repeated(TEXT_PIECES, 400).prop_map(|text| Leaf::Plain { text }),
        repeated(TEXT_PIECES, 400).prop_map(|text| Leaf::QuotedPrintable { text }),
        (repeated(HTML_PIECES, 600), any::<bool>())
            .prop_map(|(html, is_base64)| Leaf::Html { html, is_base64 }),
        (0..48_000usize, any::<u64>()).prop_map(|(len, seed)| Leaf::Attachment { len, seed }),
    ]
}

/// Pseudo-random bytes from a fixed 64-bit linear congruential sequence.
fn noise(len: usize, seed: u64) -> Vec<u8> {
    let mut state = seed | 1;
    (0..len)
        .map(|_| {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (state >> 56) as u8
        })
        .collect()
}

/// Base64 in lines of 76 characters (RFC 2045 section 6.8).
fn base64_lines(bytes: &[u8]) -> String {
    let encoded = data_encoding::BASE64.encode(bytes);
    let mut out = String::with_capacity(encoded.len() + encoded.len() / 38);
    for line in encoded.as_bytes().chunks(76) {
        out.push_str(std::str::from_utf8(line).unwrap_or_default());
        out.push_str("\r\n");
    }
    out
}

fn render_leaf(leaf: &Leaf) -> String {
    match leaf {
        Leaf::Plain { text } => {
            format!("Content-Type: text/plain; charset=utf-8\r\n\r\n{text}\r\n")
        }
        Leaf::QuotedPrintable { text } => format!(
            "Content-Type: text/plain; charset=utf-8\r\n\
             Content-Transfer-Encoding: quoted-printable\r\n\r\n{text}\r\n"
        ),
        Leaf::Html { html, is_base64 } => {
            if *is_base64 {
                let body = base64_lines(html.as_bytes());
                format!(
                    "Content-Type: text/html; charset=utf-8\r\n\
                     Content-Transfer-Encoding: base64\r\n\r\n{body}"
                )
            } else {
                format!("Content-Type: text/html; charset=utf-8\r\n\r\n{html}\r\n")
            }
        }
        Leaf::Attachment { len, seed } => {
            let body = base64_lines(&noise(*len, *seed));
            format!(
                "Content-Type: application/octet-stream; name=\"kiln-{seed}.bin\"\r\n\
                 Content-Disposition: attachment; filename=\"kiln-{seed}.bin\"\r\n\
                 Content-Transfer-Encoding: base64\r\n\r\n{body}"
            )
        }
    }
}

/// A whole mail: headers, then a multipart/mixed of groups, each either one
/// leaf or a multipart/alternative of several.
fn large_mail() -> impl Strategy<Value = Vec<u8>> {
    (
        repeated(TEXT_PIECES, 40),
        prop::collection::vec(prop::collection::vec(leaf(), 1..4), 1..6),
    )
        .prop_map(|(subject, groups)| {
            let subject: String = subject
                .chars()
                .filter(|c| *c != '\r' && *c != '\n')
                .collect();
            let mut mail = format!(
                "From: Loom & Kiln Co-op <shop@example.com>\r\n\
                 To: contact@example.org\r\n\
                 Subject: {subject}\r\n\
                 MIME-Version: 1.0\r\n\
                 Content-Type: multipart/mixed; boundary=\"b1\"\r\n\r\n"
            );
            for (number, group) in groups.iter().enumerate() {
                mail.push_str("--b1\r\n");
                if let [single] = group.as_slice() {
                    mail.push_str(&render_leaf(single));
                    continue;
                }
                let inner = format!("alt-{number}");
                mail.push_str(&format!(
                    "Content-Type: multipart/alternative; boundary=\"{inner}\"\r\n\r\n"
                ));
                for leaf in group {
                    mail.push_str(&format!("--{inner}\r\n{leaf}", leaf = render_leaf(leaf)));
                }
                mail.push_str(&format!("--{inner}--\r\n"));
            }
            mail.push_str("--b1--\r\n");
            mail.into_bytes()
        })
}

/// Caps that large mails hit now and then, or the defaults.
fn some_limits() -> impl Strategy<Value = MailLimits> {
    prop_oneof![
        Just(MailLimits::default()),
        (1_000..200_000usize, 1..30usize, 100..100_000usize).prop_map(
            |(max_bytes, max_parts, max_decoded_bytes)| MailLimits {
                max_bytes,
                max_parts,
                max_decoded_bytes,
                ..MailLimits::default()
            }
        ),
    ]
}

/// Words per field in the bounded-output property: small, so that the
/// bound says something.
const WORDS_PER_FIELD: u32 = 200;

proptest! {
    // Few cases of large mails (up to a few hundred KB each): enough to
    // reach every path, and a few seconds in a debug build.
    #![proptest_config(ProptestConfig::with_cases(24))]

    #[test]
    fn large_mails_parse_and_extract_within_bounds(raw in large_mail(), limits in some_limits()) {
        let parsed = parse_mail(&raw, &limits);
        if raw.len() > limits.max_bytes {
            prop_assert!(parsed.truncations.contains(&Truncation::MessageTooLarge));
        }
        // Each decoded byte gives at most one character of at most three
        // UTF-8 bytes (a lossy U+FFFD), and parts are joined by blank lines.
        let body = parsed.message.body.as_deref().unwrap_or_default();
        let decoded_cap = limits.max_decoded_bytes.min(limits.max_bytes);
        prop_assert!(
            body.len() <= 3 * decoded_cap + 2 * limits.max_parts,
            "body of {len} bytes", len = body.len()
        );
        let attachments: usize = parsed.facts.attachments.iter().map(|a| a.size_bytes).sum();
        prop_assert!(attachments <= limits.max_decoded_bytes);

        let settings = FeatureSettings {
            max_words_per_field: WORDS_PER_FIELD,
            ..FeatureSettings::default()
        };
        let mut extractor = Extractor::new(settings, HashKey::from_bytes([11; 16]));
        let features = extractor.extract_features(&parsed.message);
        // Per text field and word: word, n-grams of at most 64 characters,
        // skeleton, pair, joined and digit-mapped words with skeletons,
        // marks, URL hosts with base domains; then sender words, meta (a
        // dozen facts plus one per attachment type) and a few singles.
        let words = WORDS_PER_FIELD as usize;
        let bound = 2 * words * (1 + 66 + 1 + 1 + 2 + 2 + 1 + 2) + words + limits.max_parts + 64;
        prop_assert!(features.len() <= bound, "{len} features", len = features.len());
        prop_assert!(features.as_slice().windows(2).all(|pair| pair[0].0 < pair[1].0));
        prop_assert_eq!(extractor.extract_features(&parsed.message), features);
    }
}
