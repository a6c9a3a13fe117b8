//! Property tests: `parse_mail` never panics and always finishes, on
//! arbitrary bytes and on mutations of a valid multipart mail.

use chaffgate_mail::{MailLimits, Truncation, parse_mail};
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
