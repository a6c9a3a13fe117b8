//! Whole-mail checks of `parse_mail`: RFC examples, invented shop mails for
//! each fact, and every cap.
//!
//! Invented mails belong to a fictional craft co-operative's shop mailbox and
//! use only the example domains reserved by RFC 2606.

use chaffgate_mail::{MailLimits, MimeShape, Truncation, parse_mail};
use chaffgate_text::MetaValue;

fn parse(raw: &str) -> chaffgate_mail::ParsedMail {
    parse_mail(raw.as_bytes(), &MailLimits::default())
}

#[test]
fn rfc2047_section8_header_examples_decode() {
    // RFC 2047 section 8, the first example message's From, To and Subject.
    let raw = concat!(
        "From: =?US-ASCII?Q?Keith_Moore?= <moore@cs.utk.edu>\r\n",
        "To: =?ISO-8859-1?Q?Keld_J=F8rn_Simonsen?= <keld@dkuug.dk>\r\n",
        "Subject: =?ISO-8859-1?B?SWYgeW91IGNhbiByZWFkIHRoaXMgeW8=?=\r\n",
        "    =?ISO-8859-2?B?dSB1bmRlcnN0YW5kIHRoZSBleGFtcGxlLg==?=\r\n",
        "\r\n",
        "body\r\n",
    );
    let parsed = parse(raw);
    assert_eq!(
        parsed.message.subject.as_deref(),
        Some("If you can read this you understand the example.")
    );
    assert_eq!(
        parsed.message.sender.as_deref(),
        Some("Keith Moore <moore@cs.utk.edu>")
    );
    assert_eq!(
        parsed.facts.from_display_name.as_deref(),
        Some("Keith Moore")
    );
    assert_eq!(
        parsed.facts.from_address.as_deref(),
        Some("moore@cs.utk.edu")
    );

    // Same section: the To display name, here put in From.
    let keld = parse(concat!(
        "From: =?ISO-8859-1?Q?Keld_J=F8rn_Simonsen?= <keld@dkuug.dk>\r\n",
        "\r\n",
    ));
    assert_eq!(
        keld.facts.from_display_name.as_deref(),
        Some("Keld J\u{f8}rn Simonsen")
    );
}

#[test]
fn rfc2047_section8_whitespace_between_encoded_words() {
    // RFC 2047 section 8, the table of encoded words and how they display.
    let cases = [
        ("(=?ISO-8859-1?Q?a?=)", "(a)"),
        ("(=?ISO-8859-1?Q?a?= b)", "(a b)"),
        ("(=?ISO-8859-1?Q?a?= =?ISO-8859-1?Q?b?=)", "(ab)"),
        ("(=?ISO-8859-1?Q?a?=  =?ISO-8859-1?Q?b?=)", "(ab)"),
        ("(=?ISO-8859-1?Q?a?=\r\n    =?ISO-8859-1?Q?b?=)", "(ab)"),
        ("(=?ISO-8859-1?Q?a_b?=)", "(a b)"),
        ("(=?ISO-8859-1?Q?a?= =?ISO-8859-2?Q?_b?=)", "(a b)"),
    ];
    for (encoded, shown) in cases {
        let parsed = parse(&format!("Subject: {encoded}\r\n\r\n"));
        assert_eq!(parsed.message.subject.as_deref(), Some(shown), "{encoded}");
    }
}

#[test]
fn rfc2046_simple_boundary_example() {
    // RFC 2046 section 5.1.1, the "simple boundary" message: two parts,
    // preamble and epilogue ignored.
    let raw = include_str!("fixtures/rfc2046-simple-boundary.eml");
    let parsed = parse(raw);
    assert_eq!(
        parsed.message.body.as_deref(),
        Some(concat!(
            "This is implicitly typed plain US-ASCII text.\r\n",
            "It does NOT end with a linebreak.\n\n",
            "This is explicitly typed plain US-ASCII text.\r\n",
            "It DOES end with a linebreak."
        ))
    );
    assert_eq!(parsed.facts.shape, MimeShape::Text);
    assert!(parsed.facts.attachments.is_empty());
    // -0800 means 07:56:48 UTC on 22 March 1993; Unix seconds computed with
    // Python's datetime (from memory of the offset rule in RFC 5322 3.3).
    assert_eq!(parsed.facts.date_unix, Some(732_787_008));
    assert!(parsed.truncations.is_empty());
}

#[test]
fn rfc2045_quoted_printable_rules() {
    // RFC 2045 section 6.7: rule (5) soft line breaks (its "Now's the time"
    // example), rule (1) "=3D" for "=" and hex escapes of 8-bit octets
    // (=E9 is e-acute in ISO-8859-1).
    let raw = concat!(
        "Subject: qp\r\n",
        "Content-Type: text/plain; charset=ISO-8859-1\r\n",
        "Content-Transfer-Encoding: quoted-printable\r\n",
        "\r\n",
        "Now's the time =\r\n",
        "for all folk to come=\r\n",
        " to the aid of their country.\r\n",
        "2+2=3D4, caf=E9\r\n",
    );
    let parsed = parse(raw);
    assert_eq!(
        parsed.message.body.as_deref(),
        Some(
            "Now's the time for all folk to come to the aid of their country.\r\n2+2=4, caf\u{e9}"
        )
    );
}

/// A shop mail from the co-operative with the given extra headers and body
/// section (which starts with its own Content-Type lines).
fn shop_mail(extra_headers: &str, mime: &str) -> String {
    format!(
        concat!(
            "From: Loom & Kiln Co-op <shop@example.com>\r\n",
            "To: orders@example.org\r\n",
            "Subject: Your order of hand-thrown mugs\r\n",
            "Date: Fri, 20 Nov 2026 09:15:00 +0100\r\n",
            "Received: from relay1.example.net by mx.example.org\r\n",
            "Received: from shop.example.com by relay1.example.net\r\n",
            "{extra_headers}",
            "MIME-Version: 1.0\r\n",
            "{mime}"
        ),
        extra_headers = extra_headers,
        mime = mime
    )
}

const TEXT_AND_HTML: &str = concat!(
    "Content-Type: multipart/alternative; boundary=\"alt-1\"\r\n",
    "\r\n",
    "--alt-1\r\n",
    "Content-Type: text/plain; charset=utf-8\r\n",
    "\r\n",
    "Your mugs ship on Monday.\r\n",
    "--alt-1\r\n",
    "Content-Type: text/html; charset=utf-8\r\n",
    "\r\n",
    "<p>Your mugs ship on <b>Monday</b>.</p>\r\n",
    "--alt-1--\r\n",
);

#[test]
fn plain_shop_mail_facts() {
    let raw = shop_mail(
        "",
        "Content-Type: text/plain\r\n\r\nThanks for your order.\r\n",
    );
    let parsed = parse(&raw);
    let facts = &parsed.facts;
    assert_eq!(facts.shape, MimeShape::Text);
    assert_eq!(facts.received_count, 2);
    assert!(!facts.has_list_headers);
    assert!(!facts.has_display_name_address_mismatch);
    assert!(!facts.is_reply_to_elsewhere());
    // 09:15 at +0100 is 08:15 UTC; Unix seconds computed with Python's datetime.
    assert_eq!(facts.date_unix, Some(1_795_162_500));
    assert_eq!(
        facts.from_display_name.as_deref(),
        Some("Loom & Kiln Co-op")
    );
    assert_eq!(
        parsed.message.sender.as_deref(),
        Some("Loom & Kiln Co-op <shop@example.com>")
    );
    assert_eq!(
        parsed.message.body.as_deref(),
        Some("Thanks for your order.")
    );
    let meta = &parsed.message.meta;
    assert_eq!(meta["mail.shape"], MetaValue::Text("text".into()));
    assert_eq!(meta["mail.relay_hops"], MetaValue::Text("2-3".into()));
    assert_eq!(meta["mail.html_only_share"], MetaValue::Text("none".into()));
    assert_eq!(meta["mail.has_date"], MetaValue::Bool(true));
}

#[test]
fn html_only_mail() {
    let raw = shop_mail(
        "",
        concat!(
            "Content-Type: text/html; charset=utf-8\r\n",
            "\r\n",
            "<html><head><style>p{color:red}</style></head><body>",
            "<p>Glaze sale</p><img src=\"cid:mug\"><script>track()</script>",
            "<p>ends Sunday</p></body></html>\r\n",
        ),
    );
    let parsed = parse(&raw);
    assert_eq!(parsed.facts.shape, MimeShape::Html);
    assert_eq!(
        parsed.message.body.as_deref(),
        Some("Glaze sale\nends Sunday")
    );
    assert_eq!(parsed.facts.html_only_share, 1.0);
    assert_eq!(parsed.facts.image_count, 1);
    assert_eq!(
        parsed.message.meta["mail.html_only_share"],
        MetaValue::Text("all".into())
    );
}

#[test]
fn text_and_html_alternative_prefers_plain() {
    let parsed = parse(&shop_mail("", TEXT_AND_HTML));
    assert_eq!(parsed.facts.shape, MimeShape::TextAndHtml);
    assert_eq!(
        parsed.message.body.as_deref(),
        Some("Your mugs ship on Monday.")
    );
    assert_eq!(parsed.facts.html_only_share, 0.0);
    assert_eq!(
        parsed.message.meta["mail.shape"],
        MetaValue::Text("text+html".into())
    );
}

#[test]
fn html_beside_plain_without_alternative_counts_as_html_only() {
    // Plain and HTML parts of different content side by side in a
    // multipart/mixed: the HTML text is not an alternative of the plain one.
    let raw = shop_mail(
        "",
        concat!(
            "Content-Type: multipart/mixed; boundary=\"mix\"\r\n",
            "\r\n",
            "--mix\r\n",
            "Content-Type: text/plain\r\n",
            "\r\n",
            "abcd\r\n",
            "--mix\r\n",
            "Content-Type: text/html\r\n",
            "\r\n",
            "<p>efghijkl</p>\r\n",
            "--mix--\r\n",
        ),
    );
    let parsed = parse(&raw);
    // 8 HTML-only characters of 12 in all.
    assert!((parsed.facts.html_only_share - 8.0 / 12.0).abs() < 1e-12);
    assert_eq!(parsed.message.body.as_deref(), Some("abcd"));
}

#[test]
fn attachment_type_and_size() {
    // "JVBERi0xLjQK" is base64 of "%PDF-1.4\n" (9 bytes); common practice,
    // no source.
    let raw = shop_mail(
        "",
        concat!(
            "Content-Type: multipart/mixed; boundary=\"mix\"\r\n",
            "\r\n",
            "--mix\r\n",
            "Content-Type: text/plain\r\n",
            "\r\n",
            "Invoice attached.\r\n",
            "--mix\r\n",
            "Content-Type: application/pdf; name=\"invoice.pdf\"\r\n",
            "Content-Disposition: attachment; filename=\"invoice-42.pdf\"\r\n",
            "Content-Transfer-Encoding: base64\r\n",
            "\r\n",
            "JVBERi0xLjQK\r\n",
            "--mix\r\n",
            "Content-Type: image/png\r\n",
            "Content-Transfer-Encoding: base64\r\n",
            "\r\n",
            "iVBORw==\r\n",
            "--mix--\r\n",
        ),
    );
    let parsed = parse(&raw);
    let attachments = &parsed.facts.attachments;
    assert_eq!(attachments.len(), 2);
    assert_eq!(attachments[0].content_type, "application/pdf");
    assert_eq!(attachments[0].size_bytes, 9);
    assert_eq!(attachments[0].filename.as_deref(), Some("invoice-42.pdf"));
    assert_eq!(attachments[1].content_type, "image/png");
    assert_eq!(attachments[1].size_bytes, 4);
    assert_eq!(parsed.facts.image_count, 1);
    assert_eq!(parsed.message.body.as_deref(), Some("Invoice attached."));
    let meta = &parsed.message.meta;
    assert_eq!(meta["mail.attachments"], MetaValue::Number(2.0));
    assert_eq!(
        meta["mail.attachment_type.application/pdf"],
        MetaValue::Bool(true)
    );
}

#[test]
fn reply_to_on_another_domain() {
    let parsed = parse(&shop_mail(
        "Reply-To: Refunds <refunds@Example.NET>\r\n",
        "Content-Type: text/plain\r\n\r\nReply for a refund.\r\n",
    ));
    assert_eq!(parsed.facts.reply_to_domain.as_deref(), Some("example.net"));
    assert!(parsed.facts.is_reply_to_elsewhere());
    assert_eq!(
        parsed.message.meta["mail.reply_to_differs"],
        MetaValue::Bool(true)
    );

    let same = parse(&shop_mail(
        "Reply-To: help@example.com\r\n",
        "Content-Type: text/plain\r\n\r\nx\r\n",
    ));
    assert!(!same.facts.is_reply_to_elsewhere());
}

#[test]
fn display_name_showing_another_address() {
    let raw = concat!(
        "From: \"shop@example.com\" <payments@example.net>\r\n",
        "Subject: Payment needed\r\n",
        "\r\n",
        "Pay now.\r\n",
    );
    let parsed = parse(raw);
    assert_eq!(
        parsed.facts.from_address.as_deref(),
        Some("payments@example.net")
    );
    assert!(parsed.facts.has_display_name_address_mismatch);
    assert_eq!(
        parsed.message.meta["mail.display_name_hides_address"],
        MetaValue::Bool(true)
    );

    // The display name repeating the real address is not hiding anything.
    let honest = parse("From: \"Shop@Example.com\" <shop@example.com>\r\n\r\nx\r\n");
    assert!(!honest.facts.has_display_name_address_mismatch);
}

#[test]
fn list_headers() {
    let with_id = parse(&shop_mail(
        "List-Id: Co-op news <news.example.com>\r\n",
        "Content-Type: text/plain\r\n\r\nNews.\r\n",
    ));
    assert!(with_id.facts.has_list_headers);
    let with_unsubscribe = parse(&shop_mail(
        "List-Unsubscribe: <https://example.com/unsubscribe>\r\n",
        "Content-Type: text/plain\r\n\r\nNews.\r\n",
    ));
    assert!(with_unsubscribe.facts.has_list_headers);
    assert_eq!(
        with_unsubscribe.message.meta["mail.list_headers"],
        MetaValue::Bool(true)
    );
    assert!(!parse(&shop_mail("", "\r\nx\r\n")).facts.has_list_headers);
}

#[test]
fn link_text_showing_another_host() {
    let raw = shop_mail(
        "",
        concat!(
            "Content-Type: text/html\r\n",
            "\r\n",
            "<p>Track at <a href=\"https://login.example.net/track\">https://shop.example.com/orders</a>",
            " or <a href=\"https://shop.example.com/faq\">our FAQ</a>",
            " or <a href=\"https://www.example.com/\">example.com</a></p>\r\n",
        ),
    );
    let parsed = parse(&raw);
    let links = &parsed.facts.links;
    assert_eq!(links.len(), 3);
    assert_eq!(links[0].target_host.as_deref(), Some("login.example.net"));
    assert_eq!(links[0].text_host.as_deref(), Some("shop.example.com"));
    assert!(links[0].is_text_host_different());
    assert_eq!(links[1].text_host, None);
    assert!(!links[2].is_text_host_different());
    assert!(parsed.facts.has_link_text_host_mismatch());
    let meta = &parsed.message.meta;
    assert_eq!(meta["mail.link_text_host_differs"], MetaValue::Bool(true));
    assert_eq!(meta["mail.links"], MetaValue::Number(3.0));

    let honest = parse(&shop_mail("", TEXT_AND_HTML));
    assert!(!honest.facts.has_link_text_host_mismatch());
}

#[test]
fn oversized_mail_is_cut_and_flagged() {
    let limits = MailLimits {
        max_bytes: 64,
        ..MailLimits::default()
    };
    let raw = format!("Subject: big\r\n\r\n{body}", body = "a".repeat(1_000));
    let parsed = parse_mail(raw.as_bytes(), &limits);
    assert_eq!(parsed.truncations, [Truncation::MessageTooLarge]);
    assert_eq!(parsed.message.subject.as_deref(), Some("big"));
    // 64 bytes minus the 16-byte header section.
    assert_eq!(
        parsed.message.body.as_deref(),
        Some("a".repeat(48).as_str())
    );
}

/// A multipart nested `levels` deep, with a text part at the bottom.
fn nested(levels: usize) -> String {
    let mut raw = String::from("Subject: nest\r\n");
    for level in 0..levels {
        raw.push_str(&format!(
            "Content-Type: multipart/mixed; boundary=\"b{level}\"\r\n\r\n--b{level}\r\n"
        ));
    }
    raw.push_str("Content-Type: text/plain\r\n\r\nbottom\r\n");
    for level in (0..levels).rev() {
        raw.push_str(&format!("--b{level}--\r\n"));
    }
    raw
}

#[test]
fn nesting_over_the_depth_cap_is_flagged() {
    let limits = MailLimits {
        max_mime_depth: 5,
        ..MailLimits::default()
    };
    // Five multipart levels put the text part at depth 5: allowed.
    let within = parse_mail(nested(5).as_bytes(), &limits);
    assert!(within.truncations.is_empty());
    assert_eq!(within.message.body.as_deref(), Some("bottom"));
    // Six put it at depth 6: the innermost multipart is not opened.
    let over = parse_mail(nested(6).as_bytes(), &limits);
    assert_eq!(over.truncations, [Truncation::TooDeep]);
    assert_eq!(over.message.body, None);
    // Far deeper than any cap: still no crash, still flagged.
    let deep = parse_mail(nested(5_000).as_bytes(), &MailLimits::default());
    assert_eq!(deep.truncations, [Truncation::TooDeep]);
}

#[test]
fn too_many_parts_are_flagged_and_the_first_ones_kept() {
    let limits = MailLimits {
        max_parts: 4,
        ..MailLimits::default()
    };
    let mut raw = String::from("Content-Type: multipart/mixed; boundary=\"p\"\r\n\r\n");
    for index in 0..10 {
        raw.push_str(&format!(
            "--p\r\nContent-Type: text/plain\r\n\r\npart{index}\r\n"
        ));
    }
    raw.push_str("--p--\r\n");
    let parsed = parse_mail(raw.as_bytes(), &limits);
    assert_eq!(parsed.truncations, [Truncation::TooManyParts]);
    // The container counts as one part, so three leaves fit.
    assert_eq!(
        parsed.message.body.as_deref(),
        Some("part0\n\npart1\n\npart2")
    );
}

#[test]
fn base64_decoding_past_the_cap_is_cut_and_flagged() {
    let limits = MailLimits {
        max_decoded_bytes: 10,
        ..MailLimits::default()
    };
    // "aGVsbG8gd29ybGQgaGVsbG8gd29ybGQ=" is base64 of "hello world hello
    // world" (23 bytes); common practice, no source.
    let raw = concat!(
        "Content-Type: multipart/mixed; boundary=\"d\"\r\n",
        "\r\n",
        "--d\r\n",
        "Content-Type: text/plain\r\n",
        "Content-Transfer-Encoding: base64\r\n",
        "\r\n",
        "aGVsbG8gd29ybGQgaGVsbG8gd29ybGQ=\r\n",
        "--d\r\n",
        "Content-Type: text/plain\r\n",
        "\r\n",
        "never decoded\r\n",
        "--d--\r\n",
    );
    let parsed = parse_mail(raw.as_bytes(), &limits);
    assert_eq!(parsed.truncations, [Truncation::DecodedTooLarge]);
    assert_eq!(parsed.message.body.as_deref(), Some("hello worl"));
}

#[test]
fn spent_time_budget_stops_the_walk() {
    let limits = MailLimits {
        time_budget: std::time::Duration::from_nanos(1),
        ..MailLimits::default()
    };
    let parsed = parse_mail(nested(3).as_bytes(), &limits);
    assert!(parsed.truncations.contains(&Truncation::TimeBudget));
}

#[test]
fn empty_and_header_only_input() {
    let empty = parse_mail(b"", &MailLimits::default());
    assert_eq!(empty.message.body, None);
    assert_eq!(empty.facts.shape, MimeShape::Empty);
    let headers_only = parse("Subject: only\r\n");
    assert_eq!(headers_only.message.subject.as_deref(), Some("only"));
    assert_eq!(headers_only.message.body, None);
}

#[test]
fn deeply_nested_html_is_cut_and_flagged() {
    // Without the nesting cut this part takes minutes in the HTML tree
    // builder (its cost grows with the square of the depth).
    let raw = format!(
        "Content-Type: text/html\r\n\r\n<p>Mug sale</p>{divs}never shown",
        divs = "<div>".repeat(200_000)
    );
    let parsed = parse(&raw);
    assert_eq!(parsed.truncations, [Truncation::HtmlTooDeep]);
    assert_eq!(parsed.message.body.as_deref(), Some("Mug sale"));
}
