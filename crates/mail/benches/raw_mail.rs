//! Raw-mail throughput: parsing typical 5-20 KB MIME mails, extracting
//! features from the parsed messages, and both together (what a score
//! request with `raw` costs before the model).
//!
//! Run: `cargo bench -p chaffgate-mail --bench raw_mail -- --warm-up-time 1 --measurement-time 5`.
//! Each iteration handles the whole batch of 64 mails; criterion reports
//! mails per second. The mails are invented (the contact mailbox of a craft
//! co-operative's online shop, RFC 2606 example domains) and generated from
//! a fixed linear congruential sequence, so runs are comparable. Each is a
//! multipart/mixed of a multipart/alternative (quoted-printable text/plain
//! and its text/html, with links and a layout table) and a base64
//! attachment of 1 KB to a third of the mail; a quarter also carry a 1 KB
//! inline image.

use std::hint::black_box;

use chaffgate_mail::{MailLimits, parse_mail};
use chaffgate_text::{Extractor, FeatureSettings, Features, HashKey};
use criterion::{Criterion, Throughput, criterion_group, criterion_main};

/// Sentences the shop's mails are put together from.
const SENTENCES: &[&str] = &[
    "Thank you for your order of four hand-thrown mugs in sea-green glaze.",
    "Our kiln was fired on Tuesday, so the bowls will be ready to ship by Friday.",
    "The wool for the spring blankets arrived from the mill this morning.",
    "Could you tell us whether the large serving platter is dishwasher safe?",
    "We offer gift wrapping for \u{00A3}3.50; just add a note at checkout.",
    "The Saturday pottery workshop has two places left for beginners.",
    "Your parcel left the studio today and should arrive within three working days.",
    "Members of the co-operative get ten percent off everything in the shop.",
    "Please find the invoice for order 4411 attached to this message.",
    "If a piece arrives cracked, send us a photo and we will replace it.",
    "The new catalogue shows this season's linen, baskets and stoneware.",
    "Caf\u{00E9} owners can ask for trade prices on orders of twenty cups or more.",
    "Our market stall moves to the north end of the square from next month.",
    "Hand-dyed yarn is made in small batches, so colours vary a little.",
    "We are closed on the bank holiday but answer messages the day after.",
    "The weaver's studio is open for visits on the first Sunday of each month.",
    "Returns are free within thirty days; keep the original box if you can.",
    "Glazes are lead-free and food safe, tested by an independent lab.",
    "Can you confirm the delivery address before we book the courier?",
    "Thanks again for supporting makers who work by hand.",
];

/// Link targets in the HTML parts.
const LINKS: &[&str] = &[
    "https://shop.example.com/orders/4411",
    "https://shop.example.com/workshops",
    "https://www.example.org/catalogue",
    "https://tracking.example.net/p/8f3k2",
];

/// A fixed linear congruential sequence (Knuth's MMIX constants).
struct Sequence(u64);

impl Sequence {
    fn next(&mut self) -> usize {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (self.0 >> 33) as usize
    }

    fn bytes(&mut self, len: usize) -> Vec<u8> {
        (0..len).map(|_| (self.next() & 0xff) as u8).collect()
    }
}

/// Quoted-printable per RFC 2045 section 6.7: `=` and non-ASCII bytes
/// escaped, soft line breaks before 76 characters.
fn quoted_printable(text: &str) -> String {
    let mut out = String::with_capacity(text.len() * 11 / 10);
    let mut line_len = 0;
    for &byte in text.as_bytes() {
        let piece = if byte == b'\n' {
            out.push_str("\r\n");
            line_len = 0;
            continue;
        } else if byte == b'=' || !(32..127).contains(&byte) {
            format!("={byte:02X}")
        } else {
            char::from(byte).to_string()
        };
        if line_len + piece.len() > 75 {
            out.push_str("=\r\n");
            line_len = 0;
        }
        line_len += piece.len();
        out.push_str(&piece);
    }
    out
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

/// One mail of roughly `target` bytes.
fn mail(number: usize, target: usize, seq: &mut Sequence) -> Vec<u8> {
    // Base64 makes the attachment a third longer; headers take about 1 KB.
    let attachment_len = 1024 + seq.next() % (target / 3);
    let mut text = String::from("Hello from the Loom & Kiln shop,\n\n");
    let mut html = String::from(
        "<html><head><style>td{padding:4px}</style></head><body>\
         <table width=\"600\"><tr><td><h2>Loom &amp; Kiln Co-op</h2></td></tr><tr><td>",
    );
    // Text and HTML carry the same sentences; the HTML adds markup and
    // quoted-printable a little, so the text gets about a third of what the
    // attachment and the headers leave.
    let text_budget = target.saturating_sub(attachment_len * 4 / 3 + 1024) * 4 / 11;
    while text.len() < text_budget {
        let sentence = SENTENCES[seq.next() % SENTENCES.len()];
        text.push_str(sentence);
        html.push_str("<p>");
        html.push_str(sentence);
        if seq.next().is_multiple_of(4) {
            let link = LINKS[seq.next() % LINKS.len()];
            text.push_str(&format!(" {link}"));
            html.push_str(&format!(" <a href=\"{link}\">see here</a>"));
        }
        html.push_str("</p>\n");
        text.push(if seq.next().is_multiple_of(3) {
            '\n'
        } else {
            ' '
        });
    }
    html.push_str("</td></tr></table></body></html>\n");
    let attachment = base64_lines(&seq.bytes(attachment_len));
    let image = if number.is_multiple_of(4) {
        let bytes = seq.bytes(1024);
        format!(
            "--mixed-{number}\r\n\
             Content-Type: image/png\r\n\
             Content-Disposition: inline; filename=\"logo.png\"\r\n\
             Content-Transfer-Encoding: base64\r\n\r\n{data}",
            data = base64_lines(&bytes)
        )
    } else {
        String::new()
    };
    format!(
        "Received: from relay1.example.net by mx.example.com\r\n\
         Received: from shop.example.com by relay1.example.net\r\n\
         From: =?UTF-8?Q?Loom_&_Kiln_Caf=C3=A9?= <shop@example.com>\r\n\
         To: contact@example.org\r\n\
         Subject: Your order {number} from the co-op shop\r\n\
         Date: Fri, 20 Nov 2026 09:15:00 +0100\r\n\
         Message-ID: <{number}@shop.example.com>\r\n\
         MIME-Version: 1.0\r\n\
         Content-Type: multipart/mixed; boundary=\"mixed-{number}\"\r\n\
         \r\n\
         --mixed-{number}\r\n\
         Content-Type: multipart/alternative; boundary=\"alt-{number}\"\r\n\
         \r\n\
         --alt-{number}\r\n\
         Content-Type: text/plain; charset=utf-8\r\n\
         Content-Transfer-Encoding: quoted-printable\r\n\
         \r\n\
         {text}\r\n\
         --alt-{number}\r\n\
         Content-Type: text/html; charset=utf-8\r\n\
         Content-Transfer-Encoding: quoted-printable\r\n\
         \r\n\
         {html}\r\n\
         --alt-{number}--\r\n\
         --mixed-{number}\r\n\
         Content-Type: application/pdf; name=\"invoice-{number}.pdf\"\r\n\
         Content-Disposition: attachment; filename=\"invoice-{number}.pdf\"\r\n\
         Content-Transfer-Encoding: base64\r\n\
         \r\n\
         {attachment}\
         {image}\
         --mixed-{number}--\r\n",
        text = quoted_printable(&text),
        html = quoted_printable(&html),
    )
    .into_bytes()
}

/// 64 mails of 5 to 20 KB.
fn mails() -> Vec<Vec<u8>> {
    let mut seq = Sequence(0x2545_f491);
    (0..64)
        .map(|number| {
            let target = 5 * 1024 + seq.next() % (15 * 1024);
            mail(number, target, &mut seq)
        })
        .collect()
}

fn raw_mail(c: &mut Criterion) {
    let mails = mails();
    let sizes: Vec<usize> = mails.iter().map(Vec::len).collect();
    let total: usize = sizes.iter().sum();
    eprintln!(
        "{count} mails, {smallest}-{largest} bytes, {mean} bytes on average",
        count = mails.len(),
        smallest = sizes.iter().min().copied().unwrap_or(0),
        largest = sizes.iter().max().copied().unwrap_or(0),
        mean = total / mails.len().max(1)
    );
    let limits = MailLimits::default();
    let mut extractor = Extractor::new(FeatureSettings::default(), HashKey::from_bytes([0x5a; 16]));
    let mut features = Features::default();

    let mut group = c.benchmark_group("raw_mail");
    group.throughput(Throughput::Elements(mails.len() as u64));
    group.bench_function("parse_64_mails_5_20kb", |b| {
        b.iter(|| {
            for raw in &mails {
                black_box(parse_mail(black_box(raw), &limits));
            }
        });
    });
    let parsed: Vec<_> = mails
        .iter()
        .map(|raw| parse_mail(raw, &limits).message)
        .collect();
    group.bench_function("extract_64_parsed_mails_5_20kb", |b| {
        b.iter(|| {
            for message in &parsed {
                extractor.extract(black_box(message), &mut features);
                black_box(features.len());
            }
        });
    });
    group.bench_function("parse_and_extract_64_mails_5_20kb", |b| {
        b.iter(|| {
            for raw in &mails {
                let parsed = parse_mail(black_box(raw), &limits);
                extractor.extract(&parsed.message, &mut features);
                black_box(features.len());
            }
        });
    });
    group.finish();
}

criterion_group!(benches, raw_mail);
criterion_main!(benches);
