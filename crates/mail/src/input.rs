//! A message as clients send it: plain fields, a raw mail, or both.
//!
//! Score requests and JSONL corpora take the message fields of
//! [`Message`] plus `raw` (the RFC 5322 text) or `raw_b64` (the mail's
//! bytes in standard base64, for mails that are not valid UTF-8). With a
//! raw mail, the parsed subject, body, sender and `mail.*` facts are used,
//! and any field the client also gave explicitly wins; explicit `meta`
//! keys win over parsed ones. Caps that cut the mail short are recorded as
//! `mail.truncated.<cap>` meta fields, so they become features and stay
//! visible in the decision.

use std::collections::BTreeMap;

use chaffgate_text::{Message, MetaValue};
use serde::Deserialize;

use crate::{MailLimits, Truncation, parse_mail};

#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MessageInput {
    pub subject: Option<String>,
    pub body: Option<String>,
    pub sender: Option<String>,
    pub channel: Option<String>,
    #[serde(default)]
    pub meta: BTreeMap<String, MetaValue>,
    /// The whole RFC 5322 mail as text.
    pub raw: Option<String>,
    /// The whole mail's bytes in standard base64 (RFC 4648 section 4).
    pub raw_b64: Option<String>,
}

/// Why a message input cannot be used.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum InputError {
    /// Both `raw` and `raw_b64` were given.
    #[error("give either raw or raw_b64, not both")]
    BothRaw,
    /// `raw_b64` is not standard base64.
    #[error("raw_b64 is not valid base64 (RFC 4648 section 4): {reason}")]
    BadBase64 { reason: String },
}

impl MessageInput {
    /// Bytes of raw mail this input carries (before any parsing).
    pub fn raw_len(&self) -> usize {
        self.raw.as_ref().map_or(0, String::len) + self.raw_b64.as_ref().map_or(0, String::len)
    }

    /// The message to judge, and the caps a raw mail hit.
    pub fn into_message(
        self,
        limits: &MailLimits,
    ) -> Result<(Message, Vec<Truncation>), InputError> {
        let raw: Option<Vec<u8>> = match (self.raw, self.raw_b64) {
            (Some(_), Some(_)) => return Err(InputError::BothRaw),
            (Some(text), None) => Some(text.into_bytes()),
            (None, Some(encoded)) => Some(
                data_encoding::BASE64
                    .decode(encoded.trim().as_bytes())
                    .map_err(|err| InputError::BadBase64 {
                        reason: err.to_string(),
                    })?,
            ),
            (None, None) => None,
        };
        let explicit = Message {
            subject: self.subject,
            body: self.body,
            sender: self.sender,
            channel: self.channel,
            meta: self.meta,
        };
        let Some(raw) = raw else {
            return Ok((explicit, Vec::new()));
        };
        let parsed = parse_mail(&raw, limits);
        let mut meta = parsed.message.meta;
        for cap in &parsed.truncations {
            meta.insert(
                format!("mail.truncated.{}", cap.as_str()),
                MetaValue::Bool(true),
            );
        }
        meta.extend(explicit.meta);
        let message = Message {
            subject: explicit.subject.or(parsed.message.subject),
            body: explicit.body.or(parsed.message.body),
            sender: explicit.sender.or(parsed.message.sender),
            channel: explicit.channel,
            meta,
        };
        Ok((message, parsed.truncations))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const MAIL: &str = "From: Shop Team <team@coop-shop.example.com>\r\n\
        Subject: Your order has shipped\r\n\
        Content-Type: text/plain; charset=us-ascii\r\n\
        \r\n\
        Your glazed bowls left the studio today.\r\n";

    fn input(json: &str) -> MessageInput {
        serde_json::from_str(json).unwrap()
    }

    #[test]
    fn plain_fields_pass_through() {
        let (message, cuts) = input(r#"{"body":"hello","meta":{"vip":true}}"#)
            .into_message(&MailLimits::default())
            .unwrap();
        assert_eq!(message.body.as_deref(), Some("hello"));
        assert!(cuts.is_empty());
        assert_eq!(message.meta.len(), 1);
    }

    #[test]
    fn raw_mail_fills_fields_and_explicit_ones_win() {
        let json = serde_json::json!({ "raw": MAIL, "channel": "mail" }).to_string();
        let (message, _) = input(&json).into_message(&MailLimits::default()).unwrap();
        assert_eq!(message.subject.as_deref(), Some("Your order has shipped"));
        assert!(message.body.unwrap().contains("glazed bowls"));
        assert_eq!(message.channel.as_deref(), Some("mail"));
        assert!(message.meta.contains_key("mail.shape"));

        let json = serde_json::json!({ "raw": MAIL, "subject": "Overridden" }).to_string();
        let (message, _) = input(&json).into_message(&MailLimits::default()).unwrap();
        assert_eq!(message.subject.as_deref(), Some("Overridden"));
    }

    #[test]
    fn base64_raw_is_the_same_mail() {
        let encoded = data_encoding::BASE64.encode(MAIL.as_bytes());
        let json = serde_json::json!({ "raw_b64": encoded }).to_string();
        let (from_b64, _) = input(&json).into_message(&MailLimits::default()).unwrap();
        let json = serde_json::json!({ "raw": MAIL }).to_string();
        let (from_text, _) = input(&json).into_message(&MailLimits::default()).unwrap();
        assert_eq!(from_b64, from_text);
    }

    #[test]
    fn bad_inputs_are_named() {
        let both = serde_json::json!({ "raw": MAIL, "raw_b64": "AAAA" }).to_string();
        assert_eq!(
            input(&both)
                .into_message(&MailLimits::default())
                .unwrap_err(),
            InputError::BothRaw
        );
        let bad = r#"{"raw_b64":"not base64!"}"#;
        assert!(matches!(
            input(bad).into_message(&MailLimits::default()),
            Err(InputError::BadBase64 { .. })
        ));
    }

    #[test]
    fn caps_are_recorded_as_meta() {
        let limits = MailLimits {
            max_bytes: 40,
            ..MailLimits::default()
        };
        let json = serde_json::json!({ "raw": MAIL }).to_string();
        let (message, cuts) = input(&json).into_message(&limits).unwrap();
        assert_eq!(cuts, [Truncation::MessageTooLarge]);
        assert_eq!(
            message.meta.get("mail.truncated.message_too_large"),
            Some(&MetaValue::Bool(true))
        );
    }
}
