//! Raw mail bytes to a message plus structure facts, under caps.
//!
//! `mailparse` reads header fields, RFC 2047 encoded words, addresses, dates,
//! transfer encodings and charsets. The MIME tree is walked here rather than
//! by `mailparse::parse_mail`, because every cap in [`MailLimits`] has to be
//! checked while walking: depth and part counts before a part is read,
//! decoded bytes before and after each decode, the time budget between
//! steps. Nothing in this module may panic or fail on any input; a cap that
//! hits stops the walk and is recorded as a [`Truncation`].

use std::borrow::Cow;
use std::time::Instant;

use chaffgate_text::Message;
use mailparse::body::Body;
use mailparse::{
    DispositionType, MailAddr, MailHeader, MailHeaderMap, ParsedContentType, addrparse_header,
    dateparse, parse_content_disposition, parse_content_type, parse_header,
};
use memchr::memmem::Finder;

use crate::facts::{Attachment, MailFacts, MimeShape, address_domain, mail_meta};
use crate::html::{Link, html_to_text};
use crate::limits::{MailLimits, Truncation};
use crate::qp::decode_quoted_printable;

/// The result of [`parse_mail`].
#[derive(Debug, Clone, PartialEq)]
pub struct ParsedMail {
    /// Subject, body and sender text, with [`mail_meta`] of the facts in
    /// `meta`. `channel` is left empty for the caller to set.
    pub message: Message,
    /// What the headers and MIME structure say.
    pub facts: MailFacts,
    /// Caps that stopped the parse early, in the order they first hit.
    pub truncations: Vec<Truncation>,
}

/// Parses a raw RFC 5322 mail.
///
/// Never panics and never fails: unreadable header lines end the header
/// section, broken transfer encodings fall back to the bytes as written, and
/// each cap in `limits` that hits cuts the parse there and is recorded in
/// [`ParsedMail::truncations`].
///
/// `body` is the text/plain body parts joined by blank lines, or the visible
/// text of the HTML parts when there is no text/plain part. `sender` is the
/// From header with encoded words decoded.
pub fn parse_mail(raw: &[u8], limits: &MailLimits) -> ParsedMail {
    let mut walker = Walker::new(limits);
    let raw = if raw.len() > limits.max_bytes {
        walker.flag(Truncation::MessageTooLarge);
        &raw[..limits.max_bytes]
    } else {
        raw
    };

    let (headers, body_start) = walker.read_headers(raw);
    walker.walk_body(&headers, &raw[body_start..], 0, None, false);

    let mut facts = header_facts(&headers);
    let mut message = Message {
        subject: headers.get_first_value("Subject"),
        sender: headers.get_first_value("From"),
        ..Message::default()
    };
    walker.fill_body_facts(&mut message, &mut facts);
    message.meta = mail_meta(&facts);
    ParsedMail {
        message,
        facts,
        truncations: walker.truncations,
    }
}

/// One text/plain or text/html body part after decoding.
struct TextPart {
    is_html: bool,
    text: String,
    links: Vec<Link>,
    image_count: usize,
    /// Which multipart/alternative this part sits in, if any.
    alternative_group: Option<usize>,
}

/// State of one walk over the MIME tree.
struct Walker<'l> {
    limits: &'l MailLimits,
    started_at: Instant,
    headers_left: usize,
    parts_seen: usize,
    decoded_bytes: usize,
    next_group: usize,
    /// Set by caps after which nothing more is read (parts, time).
    is_stopped: bool,
    truncations: Vec<Truncation>,
    text_parts: Vec<TextPart>,
    attachments: Vec<Attachment>,
}

impl<'l> Walker<'l> {
    fn new(limits: &'l MailLimits) -> Self {
        Walker {
            limits,
            started_at: Instant::now(),
            headers_left: limits.max_headers,
            parts_seen: 0,
            decoded_bytes: 0,
            next_group: 0,
            is_stopped: false,
            truncations: Vec::new(),
            text_parts: Vec::new(),
            attachments: Vec::new(),
        }
    }

    fn flag(&mut self, truncation: Truncation) {
        if !self.truncations.contains(&truncation) {
            self.truncations.push(truncation);
        }
    }

    /// True, after recording it, when the time budget is spent.
    fn is_out_of_time(&mut self) -> bool {
        if self.started_at.elapsed() > self.limits.time_budget {
            self.flag(Truncation::TimeBudget);
            self.is_stopped = true;
        }
        self.is_stopped
    }

    /// Reads the header section of one entity, up to the header cap, and
    /// returns the fields and where the body starts.
    fn read_headers<'a>(&mut self, raw: &'a [u8]) -> (Vec<MailHeader<'a>>, usize) {
        let mut headers = Vec::new();
        let mut ix = 0;
        loop {
            match raw.get(ix..) {
                None | Some([]) => return (headers, raw.len()),
                Some([b'\n', ..]) => return (headers, ix + 1),
                Some([b'\r', b'\n', ..]) => return (headers, ix + 2),
                // A lone CR cannot start a header field; treat the line as
                // the end of the header section's readable part.
                Some([b'\r', ..]) => return (headers, body_after_blank_line(raw, ix)),
                Some(rest) => {
                    if self.headers_left == 0 {
                        self.flag(Truncation::TooManyHeaders);
                        return (headers, body_after_blank_line(raw, ix));
                    }
                    match parse_header(rest) {
                        Ok((header, consumed)) if consumed > 0 => {
                            headers.push(header);
                            self.headers_left -= 1;
                            ix += consumed;
                        }
                        _ => return (headers, body_after_blank_line(raw, ix)),
                    }
                }
            }
        }
    }

    /// Reads one entity inside a multipart: its headers, then its body.
    fn walk_entity(
        &mut self,
        raw: &[u8],
        depth: usize,
        alternative_group: Option<usize>,
        is_in_digest: bool,
    ) {
        if self.is_stopped {
            return;
        }
        let (headers, body_start) = self.read_headers(raw);
        self.walk_body(
            &headers,
            &raw[body_start..],
            depth,
            alternative_group,
            is_in_digest,
        );
    }

    fn walk_body(
        &mut self,
        headers: &[MailHeader<'_>],
        body: &[u8],
        depth: usize,
        alternative_group: Option<usize>,
        is_in_digest: bool,
    ) {
        if self.is_out_of_time() {
            return;
        }
        if self.parts_seen >= self.limits.max_parts {
            self.flag(Truncation::TooManyParts);
            self.is_stopped = true;
            return;
        }
        self.parts_seen += 1;

        let ctype = match headers.get_first_value("Content-Type") {
            Some(value) => parse_content_type(&value),
            None if is_in_digest => parse_content_type("message/rfc822"),
            None => ParsedContentType::default(),
        };
        let mimetype = ctype.mimetype.to_ascii_lowercase();
        if mimetype.starts_with("multipart/")
            && let Some(boundary) = ctype.params.get("boundary")
        {
            if depth >= self.limits.max_mime_depth {
                self.flag(Truncation::TooDeep);
                return;
            }
            let group = if mimetype == "multipart/alternative" {
                self.next_group += 1;
                Some(self.next_group)
            } else {
                alternative_group
            };
            let delimiter = format!("--{boundary}");
            self.walk_multipart(
                body,
                delimiter.as_bytes(),
                depth + 1,
                group,
                mimetype == "multipart/digest",
            );
            return;
        }
        self.read_leaf(headers, body, &ctype, &mimetype, alternative_group);
    }

    /// Splits a multipart body at its delimiter lines (RFC 2046 section
    /// 5.1.1) and walks each part; preamble and epilogue are skipped.
    fn walk_multipart(
        &mut self,
        body: &[u8],
        delimiter: &[u8],
        depth: usize,
        alternative_group: Option<usize>,
        is_digest: bool,
    ) {
        let finder = Finder::new(delimiter);
        let Some(mut delimiter_at) = find_delimiter_line(body, 0, &finder) else {
            return;
        };
        loop {
            if body[delimiter_at + delimiter.len()..].starts_with(b"--") {
                return; // close delimiter: the rest is epilogue
            }
            let Some(part_start) = line_end(body, delimiter_at) else {
                return;
            };
            let next = find_delimiter_line(body, part_start, &finder);
            // The line break before a delimiter belongs to the delimiter.
            let part_end = match next {
                Some(next_at) => strip_line_break_before(body, part_start, next_at),
                None => body.len(),
            };
            self.walk_entity(
                &body[part_start..part_end],
                depth,
                alternative_group,
                is_digest,
            );
            match next {
                Some(next_at) if !self.is_stopped => delimiter_at = next_at,
                _ => return,
            }
        }
    }

    /// Decodes a single-part entity and files it as body text or attachment.
    fn read_leaf(
        &mut self,
        headers: &[MailHeader<'_>],
        body: &[u8],
        ctype: &ParsedContentType,
        mimetype: &str,
        alternative_group: Option<usize>,
    ) {
        let disposition = headers
            .get_first_value("Content-Disposition")
            .map(|value| parse_content_disposition(&value))
            .unwrap_or_default();
        let is_attachment = disposition.disposition == DispositionType::Attachment;
        let is_text = !is_attachment && (mimetype == "text/plain" || mimetype == "text/html");

        let transfer_encoding = headers
            .get_first_value("Content-Transfer-Encoding")
            .map(|value| value.trim().to_ascii_lowercase());
        let decoded = self.decode_capped(body, ctype, &transfer_encoding);

        if is_text {
            if self.is_out_of_time() {
                return;
            }
            // The bytes are already transfer-decoded; "8bit" makes mailparse
            // apply only the charset.
            let as_8bit = Some("8bit".to_string());
            let text = match Body::new(&decoded, ctype, &as_8bit) {
                Body::EightBit(text_body) => text_body
                    .get_as_string()
                    .unwrap_or_else(|_| String::from_utf8_lossy(&decoded).into_owned()),
                _ => String::from_utf8_lossy(&decoded).into_owned(),
            };
            let part = if mimetype == "text/html" {
                let html = html_to_text(&text);
                if html.is_cut_for_nesting {
                    self.flag(Truncation::HtmlTooDeep);
                }
                TextPart {
                    is_html: true,
                    text: html.text,
                    links: html.links,
                    image_count: html.image_count,
                    alternative_group,
                }
            } else {
                TextPart {
                    is_html: false,
                    text,
                    links: Vec::new(),
                    image_count: 0,
                    alternative_group,
                }
            };
            self.text_parts.push(part);
            return;
        }

        let filename = disposition
            .params
            .get("filename")
            .or_else(|| ctype.params.get("name"))
            .cloned();
        self.attachments.push(Attachment {
            content_type: mimetype.to_string(),
            size_bytes: decoded.len(),
            filename,
        });
    }

    /// Undoes the transfer encoding, keeping at most what the decoded-bytes
    /// cap still allows. Transfer decoding never makes data longer than the
    /// raw input, which `max_bytes` already bounds; the cap bounds the total
    /// over all parts and what later steps (charset, HTML) have to handle.
    fn decode_capped<'a>(
        &mut self,
        body: &'a [u8],
        ctype: &'a ParsedContentType,
        transfer_encoding: &Option<String>,
    ) -> Cow<'a, [u8]> {
        let remaining = self
            .limits
            .max_decoded_bytes
            .saturating_sub(self.decoded_bytes);
        if remaining == 0 {
            if !body.is_empty() {
                self.flag(Truncation::DecodedTooLarge);
            }
            return Cow::Borrowed(&[]);
        }
        if transfer_encoding.as_deref() == Some("quoted-printable") {
            // Same bytes as mailparse's decoder, several times faster.
            let decoded = Cow::Owned(decode_quoted_printable(body));
            return self.cut_decoded(decoded, remaining);
        }
        let decoded = match Body::new(body, ctype, transfer_encoding) {
            Body::Base64(encoded) | Body::QuotedPrintable(encoded) => encoded
                .get_decoded()
                .map(Cow::Owned)
                .unwrap_or(Cow::Borrowed(encoded.get_raw())),
            Body::SevenBit(text) | Body::EightBit(text) => Cow::Borrowed(text.get_raw()),
            Body::Binary(binary) => Cow::Borrowed(binary.get_raw()),
        };
        self.cut_decoded(decoded, remaining)
    }

    /// Cuts decoded bytes to what the cap still allows and counts them.
    fn cut_decoded<'a>(&mut self, mut decoded: Cow<'a, [u8]>, remaining: usize) -> Cow<'a, [u8]> {
        if decoded.len() > remaining {
            self.flag(Truncation::DecodedTooLarge);
            decoded = match decoded {
                Cow::Borrowed(bytes) => Cow::Borrowed(&bytes[..remaining]),
                Cow::Owned(mut bytes) => {
                    bytes.truncate(remaining);
                    Cow::Owned(bytes)
                }
            };
        }
        self.decoded_bytes += decoded.len();
        decoded
    }

    /// Builds the message body and the body-derived facts.
    fn fill_body_facts(&self, message: &mut Message, facts: &mut MailFacts) {
        // Parts with only whitespace carry no text and do not shape the mail.
        let has_text = |is_html: bool| {
            self.text_parts
                .iter()
                .any(|part| part.is_html == is_html && !part.text.trim().is_empty())
        };
        let has_plain = has_text(false);
        let has_html = has_text(true);
        facts.shape = match (has_plain, has_html) {
            (false, false) => MimeShape::Empty,
            (true, false) => MimeShape::Text,
            (false, true) => MimeShape::Html,
            (true, true) => MimeShape::TextAndHtml,
        };

        let chosen: Vec<&str> = self
            .text_parts
            .iter()
            .filter(|part| part.is_html != has_plain)
            .map(|part| part.text.trim())
            .filter(|text| !text.is_empty())
            .collect();
        if !chosen.is_empty() {
            message.body = Some(chosen.join("\n\n"));
        }

        let mut plain_chars = 0usize;
        let mut html_only_chars = 0usize;
        for part in &self.text_parts {
            let chars = part.text.trim().chars().count();
            if !part.is_html {
                plain_chars += chars;
                continue;
            }
            let has_plain_alternative = part.alternative_group.is_some()
                && self.text_parts.iter().any(|other| {
                    !other.is_html && other.alternative_group == part.alternative_group
                });
            if !has_plain_alternative {
                html_only_chars += chars;
            }
        }
        let total = plain_chars + html_only_chars;
        facts.html_only_share = if total == 0 {
            0.0
        } else {
            html_only_chars as f64 / total as f64
        };

        facts.links = self
            .text_parts
            .iter()
            .flat_map(|part| part.links.iter().cloned())
            .collect();
        let image_parts = self
            .attachments
            .iter()
            .filter(|attachment| attachment.content_type.starts_with("image/"))
            .count();
        facts.image_count = self
            .text_parts
            .iter()
            .map(|part| part.image_count)
            .sum::<usize>()
            + image_parts;
        facts.attachments = self.attachments.clone();
    }
}

/// Facts read from the top-level header fields.
fn header_facts(headers: &[MailHeader<'_>]) -> MailFacts {
    let mut facts = MailFacts::default();
    if let Some(from) = headers.get_first_header("From")
        && let Some((name, address)) = first_mailbox(from)
    {
        if let Some(name) = name.as_deref() {
            facts.has_display_name_address_mismatch = addresses_in(name)
                .iter()
                .any(|shown| !shown.eq_ignore_ascii_case(&address));
        }
        facts.from_display_name = name;
        facts.from_address = Some(address);
    }
    facts.reply_to_domain = headers
        .get_first_header("Reply-To")
        .and_then(first_mailbox)
        .and_then(|(_, address)| address_domain(&address));
    facts.received_count = headers.get_all_headers("Received").len();
    facts.has_list_headers = headers.get_first_header("List-Id").is_some()
        || headers.get_first_header("List-Unsubscribe").is_some();
    facts.date_unix = headers
        .get_first_value("Date")
        .and_then(|value| dateparse(&value).ok());
    facts
}

/// Display name and address of the first mailbox in an address header.
fn first_mailbox(header: &MailHeader<'_>) -> Option<(Option<String>, String)> {
    let list = addrparse_header(header).ok()?;
    let single = match list.iter().next()? {
        MailAddr::Single(single) => single.clone(),
        MailAddr::Group(group) => group.addrs.first()?.clone(),
    };
    let name = single.display_name.filter(|name| !name.trim().is_empty());
    Some((name, single.addr))
}

/// Address-like tokens (`local@domain.tld`) in free text.
fn addresses_in(text: &str) -> Vec<String> {
    text.split(|ch: char| ch.is_whitespace() || "<>()[]\"',;:".contains(ch))
        .filter(|token| {
            token
                .split_once('@')
                .is_some_and(|(local, domain)| !local.is_empty() && domain.contains('.'))
        })
        .map(|token| token.trim_end_matches('.').to_string())
        .collect()
}

/// Index just past the `\n` ending the line that contains `ix`.
fn line_end(data: &[u8], ix: usize) -> Option<usize> {
    memchr::memchr(b'\n', data.get(ix..)?).map(|offset| ix + offset + 1)
}

/// Where the body starts when the header section could not be read to its
/// end: just past the next blank line at or after line start `ix`, or the
/// end of the data when there is none.
fn body_after_blank_line(raw: &[u8], mut ix: usize) -> usize {
    loop {
        let Some(next) = line_end(raw, ix) else {
            return raw.len();
        };
        let line = &raw[ix..next - 1];
        if line.is_empty() || line == b"\r" {
            return next;
        }
        ix = next;
    }
}

/// Start of the first line at or after line start `from` that is a
/// delimiter line: the delimiter, an optional `--`, then only whitespace.
/// `finder` searches for the delimiter; hits inside a line are passed over.
fn find_delimiter_line(data: &[u8], from: usize, finder: &Finder<'_>) -> Option<usize> {
    let delimiter_len = finder.needle().len();
    let rest = data.get(from..)?;
    for offset in finder.find_iter(rest) {
        let at = from + offset;
        if at > from && data[at - 1] != b'\n' {
            continue;
        }
        let end = line_end(data, at).unwrap_or(data.len());
        let after = &data[at + delimiter_len..end];
        let after = after.strip_prefix(b"--").unwrap_or(after);
        if after.iter().all(u8::is_ascii_whitespace) {
            return Some(at);
        }
    }
    None
}

/// `end`, moved back over one LF or CRLF if one precedes it (not before
/// `start`).
fn strip_line_break_before(data: &[u8], start: usize, mut end: usize) -> usize {
    if end > start && data[end - 1] == b'\n' {
        end -= 1;
        if end > start && data[end - 1] == b'\r' {
            end -= 1;
        }
    }
    end
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rfc2046_simple_boundary_parts_exclude_preamble_epilogue_and_final_line_break() {
        // RFC 2046 section 5.1.1, the "simple boundary" example, in canonical
        // CRLF form. The CRLF before a delimiter belongs to the delimiter, so
        // the first part has no trailing line break and the second keeps the
        // one it "DOES end with".
        let raw = include_str!("../tests/fixtures/rfc2046-simple-boundary.eml");
        let limits = MailLimits::default();
        let mut walker = Walker::new(&limits);
        let (headers, body_start) = walker.read_headers(raw.as_bytes());
        walker.walk_body(&headers, &raw.as_bytes()[body_start..], 0, None, false);
        let texts: Vec<&str> = walker
            .text_parts
            .iter()
            .map(|part| part.text.as_str())
            .collect();
        assert_eq!(
            texts,
            [
                "This is implicitly typed plain US-ASCII text.\r\nIt does NOT end with a linebreak.",
                "This is explicitly typed plain US-ASCII text.\r\nIt DOES end with a linebreak.\r\n",
            ]
        );
        assert!(walker.attachments.is_empty());
        assert!(walker.truncations.is_empty());
    }

    #[test]
    fn delimiter_line_needs_only_whitespace_after_it() {
        let data = b"--abc\n--abcd\n--abc--  \r\n";
        let finder = Finder::new(b"--abc");
        assert_eq!(find_delimiter_line(data, 0, &finder), Some(0));
        assert_eq!(find_delimiter_line(data, 6, &finder), Some(13));
        assert_eq!(find_delimiter_line(b"x--abc\n", 0, &finder), None);
        // A hit inside a line is passed over for the next line's.
        assert_eq!(
            find_delimiter_line(b"a --abc\n--abc\n", 0, &finder),
            Some(8)
        );
        assert_eq!(find_delimiter_line(b"--abcd\n", 0, &finder), None);
    }

    #[test]
    fn blank_line_search_handles_crlf_and_missing_body() {
        assert_eq!(body_after_blank_line(b"a\r\nb\r\n\r\nbody", 0), 8);
        assert_eq!(body_after_blank_line(b"a\nb", 0), 3);
    }

    #[test]
    fn addresses_in_display_names() {
        assert_eq!(
            addresses_in("Orders (orders@example.com) team"),
            ["orders@example.com"]
        );
        assert!(addresses_in("Ann @ home").is_empty());
    }

    #[test]
    fn headers_over_the_cap_are_skipped_but_the_body_is_found() {
        let limits = MailLimits {
            max_headers: 2,
            ..MailLimits::default()
        };
        let raw = b"Subject: a\r\nFrom: b@example.com\r\nTo: c@example.com\r\n\r\nhello\r\n";
        let parsed = parse_mail(raw, &limits);
        assert_eq!(parsed.truncations, [Truncation::TooManyHeaders]);
        assert_eq!(parsed.message.body.as_deref(), Some("hello"));
        assert_eq!(parsed.message.subject.as_deref(), Some("a"));
    }

    #[test]
    fn lone_cr_in_headers_does_not_lose_the_body() {
        let parsed = parse_mail(b"Subject: a\r\n\rX: y\r\n\r\nbody", &MailLimits::default());
        assert_eq!(parsed.message.subject.as_deref(), Some("a"));
        assert_eq!(parsed.message.body.as_deref(), Some("body"));
    }
}
