//! Raw RFC 5322 / MIME mail to a chaffgate message.
//!
//! A mail gateway hands chaffgate whole raw mails. This crate reads one into
//! the [`Message`](chaffgate_text::Message) the extractor judges (subject,
//! body text, sender) plus [`MailFacts`] about its headers and MIME
//! structure, which [`mail_meta`] turns into `mail.*` meta fields. It knows
//! no HTTP, SQL or model. Parsing is bounded by [`MailLimits`] and never
//! fails: what a cap cuts off is listed in [`ParsedMail::truncations`].

mod facts;
mod html;
mod input;
mod limits;
mod parse;
mod qp;

pub use facts::{Attachment, MailFacts, MimeShape, mail_meta};
pub use html::{HtmlText, Link, MAX_HTML_NESTING, html_to_text};
pub use input::{InputError, MessageInput};
pub use limits::{LimitError, MIME_DEPTH_CEILING, MailLimits, Truncation};
pub use parse::{ParsedMail, parse_mail};
