//! Respelled words in raw mail: what the mail reader must hand the feature
//! extractor so that a hidden word is still seen, and what the extractor
//! makes of it.
//!
//! Invented mails to the contact mailbox of a fictional craft co-operative's
//! online shop; only the example domains reserved by RFC 2606.

use chaffgate_mail::{MailLimits, parse_mail};
use chaffgate_text::{Extractor, FeatureSettings, HashKey, Message};

fn parse(raw: &str) -> Message {
    parse_mail(raw.as_bytes(), &MailLimits::default()).message
}

fn names(message: &Message) -> Vec<String> {
    let mut extractor = Extractor::new(FeatureSettings::default(), HashKey::from_bytes([7; 16]));
    extractor
        .extract_named(message)
        .into_iter()
        .map(|feature| feature.name)
        .collect()
}

fn index_of(message: &Message, name: &str) -> u32 {
    let mut extractor = Extractor::new(FeatureSettings::default(), HashKey::from_bytes([7; 16]));
    let named = extractor.extract_named(message);
    named
        .iter()
        .find(|feature| feature.name == name)
        .map(|feature| feature.index)
        .unwrap_or_else(|| panic!("no feature {name:?} in {named:#?}"))
}

/// A mail to the shop's contact address with one HTML body.
fn html_mail(html: &str) -> String {
    format!(
        "From: Prize Desk <desk@example.net>\r\n\
         To: contact@example.com\r\n\
         Subject: Your stall\r\n\
         Content-Type: text/html; charset=utf-8\r\n\
         \r\n\
         <html><body><p>{html}</p></body></html>\r\n"
    )
}

#[test]
fn html_comment_inside_a_word_gives_the_whole_word() {
    let message = parse(&html_mail("You are the win<!-- x -->ner of a kiln"));
    assert_eq!(
        message.body.as_deref(),
        Some("You are the winner of a kiln")
    );
    let named = names(&message);
    assert!(
        named.iter().any(|name| name == "body word \"winner\""),
        "{named:?}"
    );
    assert!(
        !named
            .iter()
            .any(|name| name == "body word \"win\"" || name == "body word \"ner\""),
        "{named:?}"
    );
}

#[test]
fn invisible_characters_inside_a_word_are_dropped_before_features() {
    // U+200B ZERO WIDTH SPACE as a character reference and U+00AD SOFT
    // HYPHEN as raw UTF-8 (both General_Category Cf, removed by the
    // normaliser), and a quoted-printable soft line break (RFC 2045
    // section 6.7, rule 5) inside one word.
    let html = html_mail("the win&#8203;ner of a gla\u{00AD}zed bowl");
    let qp = "From: Prize Desk <desk@example.net>\r\n\
              Subject: Your stall\r\n\
              Content-Type: text/plain; charset=utf-8\r\n\
              Content-Transfer-Encoding: quoted-printable\r\n\
              \r\n\
              the win=\r\nner of a gla=C2=ADzed bowl\r\n";
    for raw in [html.as_str(), qp] {
        let message = parse(raw);
        let named = names(&message);
        for word in ["body word \"winner\"", "body word \"glazed\""] {
            assert!(named.iter().any(|name| name == word), "{word}: {named:?}");
        }
    }
}

/// The same shop notice twice: once plain, once with the tricks a junk
/// sender would use on its key words.
#[test]
fn respelled_mail_shares_skeleton_features_with_the_plain_mail() {
    let plain = parse(&html_mail(
        "Dear maker, you are a winner! Claim your free kiln voucher at the stall.",
    ));
    // U+0430 CYRILLIC SMALL LETTER A -> U+0061 and U+043E CYRILLIC SMALL
    // LETTER O -> U+006F (UTS #39, confusables.txt).
    let respelled = parse(&html_mail(
        "Dear maker, you are a w.i.n.n.e.r! Cl\u{0430}im your fr33 kiln v\u{043E}ucher at the stall.",
    ));
    for name in [
        "body skeleton \"winner\"",
        // U+006D m -> U+0072 U+006E: skeletons are keys, not spellings.
        "body skeleton \"clairn\"",
        "body skeleton \"free\"",
        "body skeleton \"voucher\"",
    ] {
        assert_eq!(index_of(&plain, name), index_of(&respelled, name), "{name}");
    }
    let named = names(&respelled);
    for name in [
        "body joined \"winner\"",
        "body digit-mapped \"free\"",
        "body mixed-script-words 2-3",
        "body word \"fr33\"",
    ] {
        assert!(named.iter().any(|n| n == name), "{name} missing: {named:?}");
    }
}
