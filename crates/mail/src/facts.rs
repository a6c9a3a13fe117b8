//! Structure facts about one mail, and their meta fields.
//!
//! The parser fills [`MailFacts`]; [`mail_meta`] turns them into `meta`
//! entries with readable `mail.*` keys, so that the text crate's extractor
//! makes features of them like any other caller-supplied field. Counts that
//! vary a lot are bucketed into a few words here, so that each bucket becomes
//! one stable feature.

use std::collections::BTreeMap;

use chaffgate_text::MetaValue;

use crate::html::Link;

/// Which kinds of body text a mail carries.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum MimeShape {
    /// No text/plain or text/html body part.
    #[default]
    Empty,
    /// Only text/plain body parts.
    Text,
    /// Only text/html body parts.
    Html,
    /// Both text/plain and text/html body parts.
    TextAndHtml,
}

impl MimeShape {
    /// Stable name: `empty`, `text`, `html` or `text+html`.
    pub fn as_str(self) -> &'static str {
        match self {
            MimeShape::Empty => "empty",
            MimeShape::Text => "text",
            MimeShape::Html => "html",
            MimeShape::TextAndHtml => "text+html",
        }
    }
}

/// One part that is not body text: a file, an image, a forwarded mail.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Attachment {
    /// Lowercased MIME type, e.g. `application/pdf`.
    pub content_type: String,
    /// Decoded size, or what was decoded of it when the decoded-bytes cap hit.
    pub size_bytes: usize,
    /// File name from Content-Disposition or Content-Type, if given.
    pub filename: Option<String>,
}

/// What the headers and the MIME structure say about a mail.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct MailFacts {
    /// Address of the first From mailbox, as written.
    pub from_address: Option<String>,
    /// Display name of the first From mailbox, decoded.
    pub from_display_name: Option<String>,
    /// The From display name contains an address other than the real one,
    /// e.g. `"orders@example.com" <x@example.net>`.
    pub has_display_name_address_mismatch: bool,
    /// Lowercased domain of the first Reply-To address.
    pub reply_to_domain: Option<String>,
    /// Number of Received header fields (one per relay hop).
    pub received_count: usize,
    /// A List-Id or List-Unsubscribe header is present.
    pub has_list_headers: bool,
    /// The Date header as Unix seconds, when it parses.
    pub date_unix: Option<i64>,
    /// Which kinds of body text are present.
    pub shape: MimeShape,
    /// Non-text parts in document order.
    pub attachments: Vec<Attachment>,
    /// Share of the visible text (in characters) found only in HTML parts
    /// with no text/plain alternative; 0.0 when there is no text.
    pub html_only_share: f64,
    /// Links in the HTML parts.
    pub links: Vec<Link>,
    /// `<img>` elements in HTML parts plus `image/*` parts.
    pub image_count: usize,
}

impl MailFacts {
    /// Lowercased domain of `from_address`.
    pub fn from_domain(&self) -> Option<String> {
        self.from_address.as_deref().and_then(address_domain)
    }

    /// True when Reply-To names a domain other than From's.
    pub fn is_reply_to_elsewhere(&self) -> bool {
        match (self.reply_to_domain.as_deref(), self.from_domain()) {
            (Some(reply_to), Some(from)) => reply_to != from,
            _ => false,
        }
    }

    /// True when some link's text shows a host unrelated to its target.
    pub fn has_link_text_host_mismatch(&self) -> bool {
        self.links.iter().any(Link::is_text_host_different)
    }
}

/// Lowercased part after the last `@`, if non-empty.
pub(crate) fn address_domain(address: &str) -> Option<String> {
    let (_, domain) = address.rsplit_once('@')?;
    let domain = domain.trim().trim_end_matches('>').to_ascii_lowercase();
    if domain.is_empty() {
        None
    } else {
        Some(domain)
    }
}

/// Relay hops as a bucket word: `0`, `1`, `2-3`, `4-6`, `7+`.
fn relay_hops_bucket(count: usize) -> &'static str {
    match count {
        0 => "0",
        1 => "1",
        2..=3 => "2-3",
        4..=6 => "4-6",
        _ => "7+",
    }
}

/// HTML-only share as a bucket word: `none`, `some` (under half), `most`
/// (half or more) or `all`.
fn html_only_bucket(share: f64) -> &'static str {
    if share >= 1.0 {
        "all"
    } else if share >= 0.5 {
        "most"
    } else if share > 0.0 {
        "some"
    } else {
        // Also NaN, which the parser never produces.
        "none"
    }
}

/// Turns facts into `meta` entries with `mail.*` keys.
///
/// | key | value |
/// | --- | --- |
/// | `mail.shape` | `empty`, `text`, `html` or `text+html` |
/// | `mail.attachments` | number of non-text parts |
/// | `mail.attachment_type.<type>` | `true` for each attachment MIME type |
/// | `mail.relay_hops` | Received count bucket: `0`, `1`, `2-3`, `4-6`, `7+` |
/// | `mail.reply_to_differs` | Reply-To domain is not From's |
/// | `mail.list_headers` | List-Id or List-Unsubscribe present |
/// | `mail.display_name_hides_address` | From display name shows another address |
/// | `mail.link_text_host_differs` | a link's text shows another host |
/// | `mail.html_only_share` | `none`, `some`, `most` or `all` |
/// | `mail.links` | number of links |
/// | `mail.images` | number of images |
/// | `mail.has_date` | Date header parsed |
pub fn mail_meta(facts: &MailFacts) -> BTreeMap<String, MetaValue> {
    let mut meta = BTreeMap::new();
    let mut put = |key: &str, value: MetaValue| {
        meta.insert(key.to_string(), value);
    };
    put("mail.shape", MetaValue::Text(facts.shape.as_str().into()));
    put(
        "mail.attachments",
        MetaValue::Number(facts.attachments.len() as f64),
    );
    for attachment in &facts.attachments {
        put(
            &format!(
                "mail.attachment_type.{content_type}",
                content_type = attachment.content_type
            ),
            MetaValue::Bool(true),
        );
    }
    put(
        "mail.relay_hops",
        MetaValue::Text(relay_hops_bucket(facts.received_count).into()),
    );
    put(
        "mail.reply_to_differs",
        MetaValue::Bool(facts.is_reply_to_elsewhere()),
    );
    put("mail.list_headers", MetaValue::Bool(facts.has_list_headers));
    put(
        "mail.display_name_hides_address",
        MetaValue::Bool(facts.has_display_name_address_mismatch),
    );
    put(
        "mail.link_text_host_differs",
        MetaValue::Bool(facts.has_link_text_host_mismatch()),
    );
    put(
        "mail.html_only_share",
        MetaValue::Text(html_only_bucket(facts.html_only_share).into()),
    );
    put("mail.links", MetaValue::Number(facts.links.len() as f64));
    put("mail.images", MetaValue::Number(facts.image_count as f64));
    put("mail.has_date", MetaValue::Bool(facts.date_unix.is_some()));
    meta
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn buckets_have_the_documented_edges() {
        let hops: Vec<&str> = [0, 1, 2, 3, 4, 6, 7, 40]
            .into_iter()
            .map(relay_hops_bucket)
            .collect();
        assert_eq!(hops, ["0", "1", "2-3", "2-3", "4-6", "4-6", "7+", "7+"]);
        let shares: Vec<&str> = [0.0, 0.1, 0.5, 0.99, 1.0, f64::NAN]
            .into_iter()
            .map(html_only_bucket)
            .collect();
        assert_eq!(shares, ["none", "some", "most", "most", "all", "none"]);
    }

    #[test]
    fn reply_to_compares_domains_case_insensitively() {
        let mut facts = MailFacts {
            from_address: Some("orders@Example.com".into()),
            reply_to_domain: Some("example.com".into()),
            ..MailFacts::default()
        };
        assert!(!facts.is_reply_to_elsewhere());
        facts.reply_to_domain = Some("example.net".into());
        assert!(facts.is_reply_to_elsewhere());
        facts.from_address = None;
        assert!(!facts.is_reply_to_elsewhere());
    }

    #[test]
    fn meta_has_one_entry_per_fact() {
        let facts = MailFacts {
            received_count: 5,
            shape: MimeShape::Html,
            html_only_share: 1.0,
            attachments: vec![Attachment {
                content_type: "application/pdf".into(),
                size_bytes: 10,
                filename: None,
            }],
            ..MailFacts::default()
        };
        let meta = mail_meta(&facts);
        assert_eq!(meta["mail.shape"], MetaValue::Text("html".into()));
        assert_eq!(meta["mail.relay_hops"], MetaValue::Text("4-6".into()));
        assert_eq!(meta["mail.html_only_share"], MetaValue::Text("all".into()));
        assert_eq!(meta["mail.attachments"], MetaValue::Number(1.0));
        assert_eq!(
            meta["mail.attachment_type.application/pdf"],
            MetaValue::Bool(true)
        );
        assert_eq!(meta["mail.has_date"], MetaValue::Bool(false));
        assert_eq!(meta.len(), 12);
    }
}
