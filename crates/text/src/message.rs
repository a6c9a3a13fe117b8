//! The message: the one thing chaffgate judges.
//!
//! A message has optional `subject`, `body`, `sender` and `channel` text and
//! free `meta` fields. The server deserialises it from a request body and the
//! mail parser builds it from raw mail; the extractor only reads it. Unknown
//! fields are rejected so that a misspelt field name (`bdoy`) is an error
//! rather than a silently empty message.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

/// One item to judge.
///
/// `meta` is a `BTreeMap` so that its iteration order, and with it the order
/// in which features are produced, never depends on hashing.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Message {
    /// Subject line or title.
    pub subject: Option<String>,
    /// Main text.
    pub body: Option<String>,
    /// Sender as written, e.g. `Ann Example <ann@mail.example>` or a bare address.
    pub sender: Option<String>,
    /// The stream the message arrived on (`mail`, `tickets`, `comments`, ...).
    pub channel: Option<String>,
    /// Free key/value fields supplied by the caller.
    #[serde(default)]
    pub meta: BTreeMap<String, MetaValue>,
}

/// The value of one `meta` field: a JSON boolean, number or string.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum MetaValue {
    /// `true` or `false`.
    Bool(bool),
    /// Any number; it becomes a log-scale bucket feature.
    Number(f64),
    /// Any text; it is normalised like message text.
    Text(String),
}

impl Message {
    /// True when there is nothing to judge: no subject, body or sender text
    /// (absent or only whitespace) and no `meta` fields. The channel alone
    /// does not count.
    pub fn is_empty(&self) -> bool {
        let has_text =
            |field: &Option<String>| field.as_deref().is_some_and(|text| !text.trim().is_empty());
        !has_text(&self.subject)
            && !has_text(&self.body)
            && !has_text(&self.sender)
            && self.meta.is_empty()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_message_is_empty() {
        assert!(Message::default().is_empty());
    }

    #[test]
    fn whitespace_only_text_and_channel_still_empty() {
        let msg = Message {
            subject: Some("  \n".into()),
            body: Some(String::new()),
            channel: Some("mail".into()),
            ..Message::default()
        };
        assert!(msg.is_empty());
    }

    #[test]
    fn any_text_or_meta_makes_it_non_empty() {
        let with_body = Message {
            body: Some("hi".into()),
            ..Message::default()
        };
        assert!(!with_body.is_empty());
        let with_sender = Message {
            sender: Some("a@b.example".into()),
            ..Message::default()
        };
        assert!(!with_sender.is_empty());
        let mut with_meta = Message::default();
        with_meta
            .meta
            .insert("is_reply".into(), MetaValue::Bool(false));
        assert!(!with_meta.is_empty());
    }

    #[test]
    fn json_meta_values_keep_their_kind() {
        let msg: Message =
            serde_json::from_str(r#"{"body":"x","meta":{"a":true,"b":2.5,"c":"text","d":3}}"#)
                .unwrap();
        assert_eq!(msg.meta["a"], MetaValue::Bool(true));
        assert_eq!(msg.meta["b"], MetaValue::Number(2.5));
        assert_eq!(msg.meta["c"], MetaValue::Text("text".into()));
        assert_eq!(msg.meta["d"], MetaValue::Number(3.0));
    }

    #[test]
    fn unknown_field_is_rejected() {
        let err = serde_json::from_str::<Message>(r#"{"bdoy":"x"}"#).unwrap_err();
        assert!(err.to_string().contains("bdoy"), "{err}");
    }

    #[test]
    fn meta_defaults_to_empty() {
        let msg: Message = serde_json::from_str(r#"{"subject":"s"}"#).unwrap();
        assert!(msg.meta.is_empty());
        assert_eq!(msg.subject.as_deref(), Some("s"));
    }
}
