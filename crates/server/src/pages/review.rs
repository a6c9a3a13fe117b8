//! The moderator review page: `GET /review` (the shell) and
//! `GET /review/queue` (the queue, as an HTML fragment; role `moderate`).
//!
//! The queue holds the decisions waiting for a person (see
//! `chaffgate_store::QueueScope` for which): `?order=newest|uncertain`,
//! `?channel=NAME` for one channel's `review` decisions, `?channel=NAME&all=1`
//! for every decision of that channel, and `?cursor=` for the next page of
//! [`PAGE_LIMIT`]. Each item shows the time, channel, `p_junk`, the
//! message (when the operator keeps text; otherwise its digest) with the
//! words its reasons name marked, and Junk / Fine buttons. The page's
//! script sends those as `POST /v1/feedback`, exactly as an API client
//! would, and takes the item out of the queue.
//!
//! Reasons name features (`body word "prize"`, `subject pair "act now"`,
//! `body ngram "^pri"`, `url host "…"`, `sender word "…"`; see
//! `chaffgate_text`). Words, the two words of a pair, URL hosts and sender
//! words are marked where they occur in the field they came from, matched
//! case-insensitively on word boundaries; a character n-gram marks each
//! whole word that holds it (at the word's start for `^`, its end for
//! `$`). Feature text is normalised (NFKC, case folded, long runs cut), so
//! a word written with compatibility characters or a long run is named in
//! the reasons list but not marked in the text. Other features (lengths,
//! shares, counts, meta) are listed only.

use axum::Extension;
use axum::extract::State;
use axum::response::Response;
use chaffgate_store::{DecisionRow, QueueFilter, QueueOrder, QueueScope, Role, Verdict};
use serde::Deserialize;

use super::{Access, Shell, encode_query_value, push_escaped, utc_time};
use crate::auth::Caller;
use crate::error::{ApiError, ApiQuery};
use crate::state::{AppState, now_ms};

/// Where the shell is served.
pub const PATH: &str = "/review";

/// Where the queue fragment is served.
pub const QUEUE_PATH: &str = "/review/queue";

/// Decisions on one page of the queue.
pub const PAGE_LIMIT: u32 = 50;

/// Characters of one message field shown; the rest is counted, not shown.
const MAX_SHOWN_CHARS: usize = 4000;

/// The page's own styles; their colours are in [`super::PALETTE`].
pub(crate) const STYLE: &str = include_str!("review.css");

/// The page's own script: keys, buttons, feedback.
const SCRIPT: &str = include_str!("review.js");

/// Help above the queue: what the page is for, a caution, the keys.
const LEAD: &str = r#"<section class="cg-lead" aria-labelledby="cg-keys-title">
<p>Messages whose <code>p_junk</code> fell in a channel's review band wait here for a person. Mark each one junk or fine: the verdict goes into the feedback log, and the model learns from it within moments.</p>
<p class="cg-caution"><strong>Take care:</strong> automatic filtering can hide a legitimate message, such as a bank notice or a customer's complaint. Keep a review band so that uncertain messages reach a person, and follow your organisation's retention and privacy rules for the message text shown here.</p>
<h2 id="cg-keys-title" class="cg-keys-title">Keys</h2>
<dl class="cg-keys">
<div><dt><kbd>j</kbd> or <kbd>↓</kbd></dt><dd>next message</dd></div>
<div><dt><kbd>k</kbd> or <kbd>↑</kbd></dt><dd>previous message</dd></div>
<div><dt><kbd>x</kbd></dt><dd>mark as junk</dd></div>
<div><dt><kbd>f</kbd></dt><dd>mark as fine</dd></div>
</dl>
<p class="cg-help">Tab also reaches every button; a marked message leaves the queue and the next one takes the focus.</p>
</section>"#;

/// `GET /review`: the shell, served without a token.
pub async fn page(State(state): State<AppState>) -> Response {
    let access = if state.tokens().is_empty() {
        Access::Open
    } else {
        Access::Tokens
    };
    let page = Shell {
        title: "Review queue",
        fragment_url: QUEUE_PATH,
        role: Role::Moderate,
        lead_html: LEAD,
        script: SCRIPT,
        style: STYLE,
    };
    super::shell(&page, access)
}

/// The queue's query string.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct QueueQuery {
    /// `newest` (the default) or `uncertain`.
    order: Option<String>,
    /// One channel only; empty means every channel.
    channel: Option<String>,
    /// `1`: every verdict of `channel`, not only `review`.
    all: Option<String>,
    /// Where the page starts, from the page before.
    cursor: Option<String>,
}

impl QueueQuery {
    fn order(&self) -> Result<QueueOrder, ApiError> {
        match self.order.as_deref() {
            None | Some("" | "newest") => Ok(QueueOrder::Newest),
            Some("uncertain") => Ok(QueueOrder::Uncertain),
            Some(other) => Err(ApiError::InvalidParameter(format!(
                "order={other:?}: must be newest or uncertain"
            ))),
        }
    }

    fn scope(&self) -> Result<QueueScope, ApiError> {
        let channel = self
            .channel
            .as_deref()
            .map(str::trim)
            .filter(|name| !name.is_empty())
            .map(str::to_owned);
        let is_all = match self.all.as_deref() {
            None | Some("" | "0") => false,
            Some("1") => true,
            Some(other) => {
                return Err(ApiError::InvalidParameter(format!(
                    "all={other:?}: must be 1 (every verdict of the channel) or 0"
                )));
            }
        };
        match (is_all, channel) {
            (true, Some(channel)) => Ok(QueueScope::Channel { channel }),
            (true, None) => Err(ApiError::InvalidParameter(
                "all=1 needs channel=NAME: every verdict is listed for one channel at a time"
                    .to_owned(),
            )),
            (false, channel) => Ok(QueueScope::Review { channel }),
        }
    }
}

/// `GET /review/queue`: one page of the queue as HTML.
pub async fn queue(
    State(state): State<AppState>,
    Extension(caller): Extension<Caller>,
    ApiQuery(query): ApiQuery<QueueQuery>,
) -> Result<Response, ApiError> {
    let order = query.order()?;
    let scope = query.scope()?;
    let now_ms = now_ms();
    let filter = QueueFilter {
        scope,
        order,
        limit: PAGE_LIMIT,
        cursor: query.cursor.clone().filter(|cursor| !cursor.is_empty()),
        now_ms,
    };
    let page = state.store().review_queue(&filter).await?;
    let waiting = state
        .store()
        .review_queue_len(&filter.scope, now_ms)
        .await?;
    let view = QueueView {
        rows: &page.rows,
        waiting,
        scope: &filter.scope,
        order,
        next_cursor: page.next_cursor.as_deref(),
        is_later_page: filter.cursor.is_some(),
        // Open mode: no token names the moderator, so the page asks.
        is_open: caller.name.is_none(),
    };
    Ok(super::fragment(render_queue(&view)))
}

/// What one queue fragment shows.
struct QueueView<'a> {
    rows: &'a [DecisionRow],
    /// Every waiting decision in the scope, not only this page's.
    waiting: u64,
    scope: &'a QueueScope,
    order: QueueOrder,
    next_cursor: Option<&'a str>,
    is_later_page: bool,
    is_open: bool,
}

fn order_word(order: QueueOrder) -> &'static str {
    match order {
        QueueOrder::Newest => "newest",
        QueueOrder::Uncertain => "uncertain",
    }
}

/// `/review?…` for this scope and order, at `cursor`.
fn page_link(scope: &QueueScope, order: QueueOrder, cursor: Option<&str>) -> String {
    let mut link = format!("{PATH}?order={order}", order = order_word(order));
    let (channel, is_all) = match scope {
        QueueScope::Review { channel } => (channel.as_deref(), false),
        QueueScope::Channel { channel } => (Some(channel.as_str()), true),
    };
    if let Some(channel) = channel {
        link.push_str("&channel=");
        link.push_str(&encode_query_value(channel));
    }
    if is_all {
        link.push_str("&all=1");
    }
    if let Some(cursor) = cursor {
        link.push_str("&cursor=");
        link.push_str(&encode_query_value(cursor));
    }
    link
}

fn render_queue(view: &QueueView<'_>) -> String {
    let mut html = String::with_capacity(4096 + view.rows.len() * 2048);
    let waiting = view.waiting;
    let what = match view.scope {
        QueueScope::Review { channel: None } => "Waiting for a verdict".to_owned(),
        QueueScope::Review {
            channel: Some(channel),
        } => format!("Waiting for a verdict in channel {channel}"),
        QueueScope::Channel { channel } => {
            format!("Every decision of channel {channel} without a verdict")
        }
    };
    html.push_str(r#"<section class="cg-queue-section" aria-labelledby="cg-queue-title">"#);
    html.push_str(r#"<h2 id="cg-queue-title" tabindex="-1">"#);
    push_escaped(&mut html, &what);
    html.push_str(&format!(
        r#": <span id="cg-count" data-count="{waiting}">{waiting}</span></h2>"#
    ));
    render_filters(&mut html, view);
    if view.is_open {
        html.push_str(concat!(
            r#"<div class="cg-open"><p>No access token exists yet, so this service is open to anyone on this machine. "#,
            r#"Verdicts are recorded under the name you give here.</p>"#,
            r#"<label for="cg-moderator">Your name</label> "#,
            r#"<input id="cg-moderator" name="moderator" autocomplete="name" maxlength="200"></div>"#,
        ));
    }
    if view.rows.is_empty() {
        html.push_str(r#"<p class="cg-empty">Nothing is waiting here.</p>"#);
    } else {
        html.push_str(concat!(
            r#"<p class="cg-legend">Marked words pushed <code>p_junk</code> "#,
            r#"<mark class="cg-up">towards junk</mark> (solid underline) or "#,
            r#"<mark class="cg-down">towards fine</mark> (dotted underline).</p>"#,
            r#"<ol id="cg-queue" class="cg-queue" aria-labelledby="cg-queue-title">"#,
        ));
        for row in view.rows {
            render_item(&mut html, row);
        }
        html.push_str("</ol>");
    }
    if view.next_cursor.is_some() || view.is_later_page {
        html.push_str(r#"<nav class="cg-pages" aria-label="Queue pages">"#);
        if view.is_later_page {
            let first = page_link(view.scope, view.order, None);
            html.push_str(r#"<a href=""#);
            push_escaped(&mut html, &first);
            html.push_str(r#"">First page</a> "#);
        }
        if let Some(cursor) = view.next_cursor {
            let next = page_link(view.scope, view.order, Some(cursor));
            html.push_str(r#"<a href=""#);
            push_escaped(&mut html, &next);
            html.push_str(r#"" rel="next">Next page</a>"#);
        }
        html.push_str("</nav>");
    }
    html.push_str("</section>");
    html
}

/// The order and channel form: a plain GET form, so choosing reloads the
/// shell with a new query string that its script hands on.
fn render_filters(html: &mut String, view: &QueueView<'_>) {
    let (channel, is_all) = match view.scope {
        QueueScope::Review { channel } => (channel.as_deref().unwrap_or(""), false),
        QueueScope::Channel { channel } => (channel.as_str(), true),
    };
    let selected = |order: QueueOrder| {
        if order == view.order { " selected" } else { "" }
    };
    html.push_str(&format!(
        concat!(
            r#"<form class="cg-filters" method="get" action="{PATH}" aria-label="Which messages">"#,
            r#"<div><label for="cg-order">Order</label>"#,
            r#"<select id="cg-order" name="order">"#,
            r#"<option value="newest"{newest}>Newest first</option>"#,
            r#"<option value="uncertain"{uncertain}>Most uncertain first (p_junk nearest 50%)</option>"#,
            r#"</select></div>"#,
            r#"<div><label for="cg-channel">Channel</label>"#,
            r#"<input id="cg-channel" name="channel" value=""#,
        ),
        PATH = PATH,
        newest = selected(QueueOrder::Newest),
        uncertain = selected(QueueOrder::Uncertain),
    ));
    push_escaped(html, channel);
    html.push_str(&format!(
        concat!(
            r#"" aria-describedby="cg-channel-help">"#,
            r#"<span id="cg-channel-help" class="cg-help">Empty: every channel.</span></div>"#,
            r#"<div class="cg-check"><input type="checkbox" id="cg-all" name="all" value="1"{checked}>"#,
            r#"<label for="cg-all">Every verdict of this channel, not only review</label></div>"#,
            r#"<div><button type="submit">Show</button></div></form>"#,
        ),
        checked = if is_all { " checked" } else { "" },
    ));
}

fn render_item(html: &mut String, row: &DecisionRow) {
    let id = row.id.as_str();
    let (shown_time, datetime) = utc_time(row.created_at_ms);
    let percent = p_junk_percent(row.p_junk);
    let reasons: Vec<StoredReason> = serde_json::from_str(&row.reasons_json).unwrap_or_default();
    let terms = FieldTerms::from_reasons(&reasons);

    html.push_str(r#"<li><article class="cg-item" tabindex="-1" data-decision=""#);
    push_escaped(html, id);
    html.push_str(r#"" data-summary=""#);
    push_escaped(
        html,
        &format!("{channel} message of {shown_time}", channel = row.channel),
    );
    html.push_str(r#"" aria-labelledby="cg-h-"#);
    push_escaped(html, id);
    html.push_str(r#""><h3 class="cg-item-head" id="cg-h-"#);
    push_escaped(html, id);
    html.push_str(&format!(
        r#""><span class="cg-pj">p_junk {percent}</span> <span aria-hidden="true">·</span> <time datetime="{datetime}">{shown_time}</time> <span aria-hidden="true">·</span> channel <span class="cg-ch">"#
    ));
    push_escaped(html, &row.channel);
    html.push_str("</span>");
    if row.verdict != Verdict::Review {
        html.push_str(&format!(
            r#" <span aria-hidden="true">·</span> verdict {verdict}"#,
            verdict = row.verdict.as_str()
        ));
    }
    html.push_str("</h3>");

    match row.content.as_deref() {
        Some(content) => render_message(html, content, &terms),
        None => {
            html.push_str(concat!(
                r#"<p class="cg-note">The operator does not keep message text "#,
                r#"(<code>audit.keep_text</code> is off), so only its digest is shown. "#,
                r#"SHA-256 of the normalised text: <code class="cg-digest">"#,
            ));
            push_escaped(html, &row.content_sha256);
            html.push_str("</code></p>");
        }
    }
    if let Some(client_ref) = &row.client_ref {
        html.push_str(r#"<p class="cg-ref">Client reference: <code>"#);
        push_escaped(html, client_ref);
        html.push_str("</code></p>");
    }
    if !reasons.is_empty() {
        html.push_str(r#"<ul class="cg-reasons" aria-label="Reasons">"#);
        for reason in &reasons {
            let contribution = reason.contribution;
            let towards = if contribution > 0.0 { "junk" } else { "fine" };
            html.push_str(&format!(
                r#"<li><span class="cg-weight">{contribution:+.3} towards {towards}</span> <code>"#
            ));
            push_escaped(html, &reason.feature);
            html.push_str("</code></li>");
        }
        html.push_str("</ul>");
    }
    html.push_str(concat!(
        r#"<div class="cg-actions">"#,
        r#"<button type="button" class="cg-junk" data-label="junk" aria-keyshortcuts="x" aria-describedby="cg-h-"#,
    ));
    push_escaped(html, id);
    html.push_str(concat!(
        r#"">Junk</button>"#,
        r#"<button type="button" class="cg-fine" data-label="fine" aria-keyshortcuts="f" aria-describedby="cg-h-"#,
    ));
    push_escaped(html, id);
    html.push_str(r#"">Fine</button></div></article></li>"#);
}

/// The kept message (JSON, as scored) as a list of its text fields.
fn render_message(html: &mut String, content: &str, terms: &FieldTerms) {
    let message: serde_json::Value =
        serde_json::from_str(content).unwrap_or(serde_json::Value::Null);
    let field = |name: &str| message.get(name).and_then(serde_json::Value::as_str);
    let fields = [
        ("Subject", field("subject"), &terms.subject),
        ("From", field("sender"), &terms.sender),
        ("Text", field("body"), &terms.body),
    ];
    html.push_str(r#"<dl class="cg-msg">"#);
    let mut is_any = false;
    for (label, text, terms) in fields {
        let Some(text) = text else { continue };
        is_any = true;
        html.push_str(&format!("<dt>{label}</dt><dd>"));
        let (shown, hidden_chars) = shown_part(text);
        push_highlighted(html, shown, terms);
        if hidden_chars > 0 {
            html.push_str(&format!(
                r#"<span class="cg-cut"> … ({hidden_chars} more characters not shown)</span>"#
            ));
        }
        html.push_str("</dd>");
    }
    if !is_any {
        html.push_str(r#"<dt>Text</dt><dd class="cg-muted">(no subject, sender or text)</dd>"#);
    }
    html.push_str("</dl>");
}

/// The first [`MAX_SHOWN_CHARS`] characters of `text` and how many follow.
fn shown_part(text: &str) -> (&str, usize) {
    match text.char_indices().nth(MAX_SHOWN_CHARS) {
        Some((cut, _)) => (&text[..cut], text[cut..].chars().count()),
        None => (text, 0),
    }
}

/// `p_junk` as a percentage with one decimal, e.g. `12.3%`.
fn p_junk_percent(p_junk: f64) -> String {
    let percent = p_junk * 100.0;
    format!("{percent:.1}%")
}

/// A reason as the decision row stores it.
#[derive(Debug, Clone, Deserialize)]
struct StoredReason {
    feature: String,
    contribution: f64,
}

/// Something to mark, lowercased, with the reason it came from.
#[derive(Debug, Clone, PartialEq)]
struct Term {
    chars: Vec<char>,
    fit: Fit,
    contribution: f64,
    feature: String,
}

/// How a term meets the text.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Fit {
    /// The term is a whole word (or host) of the text.
    Whole,
    /// The term is a character n-gram: the word holding it is marked.
    /// `^` before and `$` after it in the feature name tie it to the
    /// word's start and end.
    Inside { is_start: bool, is_end: bool },
}

impl Term {
    /// Whether `word` (lowercased word characters) holds this n-gram.
    fn is_inside(&self, word: &[char]) -> bool {
        let Fit::Inside { is_start, is_end } = self.fit else {
            return false;
        };
        let gram = &self.chars[..];
        match (is_start, is_end) {
            (true, true) => word == gram,
            (true, false) => word.starts_with(gram),
            (false, true) => word.ends_with(gram),
            (false, false) => word.windows(gram.len()).any(|window| window == gram),
        }
    }
}

/// The words to mark in each shown field.
#[derive(Debug, Default)]
struct FieldTerms {
    subject: Vec<Term>,
    body: Vec<Term>,
    sender: Vec<Term>,
}

/// Which shown fields a feature's words belong to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Target {
    Subject,
    Body,
    SubjectAndBody,
    Sender,
}

impl FieldTerms {
    /// The words named by `reasons`. A word named twice keeps the first
    /// (strongest) reason, as reasons come strongest first.
    fn from_reasons(reasons: &[StoredReason]) -> FieldTerms {
        let mut terms = FieldTerms::default();
        for reason in reasons {
            // Names sharing one hashed slot are joined with " | ".
            for name in reason.feature.split(" | ") {
                let Some((target, fit, words)) = parse_feature(name) else {
                    continue;
                };
                let lists: &mut [&mut Vec<Term>] = match target {
                    Target::Subject => &mut [&mut terms.subject],
                    Target::Body => &mut [&mut terms.body],
                    Target::SubjectAndBody => &mut [&mut terms.subject, &mut terms.body],
                    Target::Sender => &mut [&mut terms.sender],
                };
                for word in &words {
                    let chars: Vec<char> = word.chars().flat_map(char::to_lowercase).collect();
                    if chars.is_empty() {
                        continue;
                    }
                    for list in lists.iter_mut() {
                        if list
                            .iter()
                            .all(|term| term.chars != chars || term.fit != fit)
                        {
                            list.push(Term {
                                chars: chars.clone(),
                                fit,
                                contribution: reason.contribution,
                                feature: name.to_owned(),
                            });
                        }
                    }
                }
            }
        }
        for list in [&mut terms.subject, &mut terms.body, &mut terms.sender] {
            // Whole terms before n-grams, longest first, so a host is
            // marked whole rather than its base domain alone; the sort is
            // stable, so n-grams keep the reasons' strongest-first order.
            list.sort_by_key(|term| match term.fit {
                Fit::Whole => (0, std::cmp::Reverse(term.chars.len())),
                Fit::Inside { .. } => (1, std::cmp::Reverse(0)),
            });
        }
        terms
    }
}

/// The target field, the fit and the words of a feature name such as
/// `body word "prize"`; `None` for features that name no text.
fn parse_feature(name: &str) -> Option<(Target, Fit, Vec<String>)> {
    let (scope, rest) = name.split_once(' ')?;
    let (kind, quoted) = rest.split_once(' ')?;
    let text = unquote(quoted)?;
    let target = match (scope, kind) {
        ("subject", "word" | "pair" | "ngram") => Target::Subject,
        ("body", "word" | "pair" | "ngram") => Target::Body,
        ("url", "host" | "base-domain") => Target::SubjectAndBody,
        ("sender", "word" | "domain" | "base-domain") => Target::Sender,
        _ => return None,
    };
    match kind {
        "pair" => Some((
            target,
            Fit::Whole,
            text.split(' ').map(str::to_owned).collect(),
        )),
        "ngram" => {
            let (is_start, gram) = match text.strip_prefix('^') {
                Some(gram) => (true, gram),
                None => (false, text.as_str()),
            };
            let (is_end, gram) = match gram.strip_suffix('$') {
                Some(gram) => (true, gram),
                None => (false, gram),
            };
            let fit = Fit::Inside { is_start, is_end };
            Some((target, fit, vec![gram.to_owned()]))
        }
        _ => Some((target, Fit::Whole, vec![text])),
    }
}

/// The text of a double-quoted string written with Rust's `{:?}` (as
/// feature names quote their words): `\"`, `\\`, `\n`, `\r`, `\t`, `\0`,
/// `\'` and `\u{…}` escapes. `None` if `quoted` is not one.
fn unquote(quoted: &str) -> Option<String> {
    let inner = quoted.strip_prefix('"')?.strip_suffix('"')?;
    let mut out = String::with_capacity(inner.len());
    let mut chars = inner.chars();
    while let Some(ch) = chars.next() {
        if ch != '\\' {
            out.push(ch);
            continue;
        }
        match chars.next()? {
            '"' => out.push('"'),
            '\\' => out.push('\\'),
            '\'' => out.push('\''),
            'n' => out.push('\n'),
            'r' => out.push('\r'),
            't' => out.push('\t'),
            '0' => out.push('\0'),
            'u' => {
                if chars.next()? != '{' {
                    return None;
                }
                let mut hex = String::new();
                loop {
                    match chars.next()? {
                        '}' => break,
                        digit if digit.is_ascii_hexdigit() && hex.len() < 6 => hex.push(digit),
                        _ => return None,
                    }
                }
                out.push(char::from_u32(u32::from_str_radix(&hex, 16).ok()?)?);
            }
            _ => return None,
        }
    }
    Some(out)
}

/// Letters, digits and `_` make up words; anything else bounds them.
fn is_word_char(ch: char) -> bool {
    ch.is_alphanumeric() || ch == '_'
}

/// Appends `text`, escaped, with each whole-word occurrence of a term,
/// and each word holding an n-gram term, wrapped in `<mark>`. Matching
/// compares lowercased characters; a match starts and ends on whole
/// characters of `text` and on word boundaries. The marked text is escaped
/// like the rest, so a mark never splits a character reference.
fn push_highlighted(html: &mut String, text: &str, terms: &[Term]) {
    if terms.is_empty() {
        push_escaped(html, text);
        return;
    }
    let originals: Vec<(usize, char)> = text.char_indices().collect();
    // The lowercased text, each character with the original it came from.
    let mut folded: Vec<char> = Vec::with_capacity(originals.len());
    let mut owner: Vec<usize> = Vec::with_capacity(originals.len());
    for (k, &(_, ch)) in originals.iter().enumerate() {
        for lower in ch.to_lowercase() {
            folded.push(lower);
            owner.push(k);
        }
    }
    let is_word_at = |j: usize| is_word_char(originals[owner[j]].1);
    let byte_at = |k: usize| originals.get(k).map_or(text.len(), |&(at, _)| at);
    let mut shown_to = 0;
    let mut i = 0;
    while i < folded.len() {
        let k = owner[i];
        let starts_char = i == 0 || owner[i - 1] != k;
        let starts_word = k == 0 || !is_word_char(originals[k - 1].1);
        if !(starts_char && starts_word) {
            i += 1;
            continue;
        }
        let whole = terms.iter().find_map(|term| {
            let end = i + term.chars.len();
            if term.fit != Fit::Whole || end > folded.len() || folded[i..end] != term.chars[..] {
                return None;
            }
            let ends_char = end == folded.len() || owner[end] != owner[end - 1];
            let ends_word = end == folded.len() || !is_word_at(end);
            (ends_char && ends_word).then_some((term, end))
        });
        let found = whole.or_else(|| {
            let mut word_end = i;
            while word_end < folded.len() && is_word_at(word_end) {
                word_end += 1;
            }
            let word = &folded[i..word_end];
            let term = terms
                .iter()
                .find(|term| !word.is_empty() && term.is_inside(word))?;
            Some((term, word_end))
        });
        let Some((term, end)) = found else {
            i += 1;
            continue;
        };
        let (start_byte, end_byte) = (byte_at(k), byte_at(owner[end - 1] + 1));
        push_escaped(html, &text[shown_to..start_byte]);
        let class = if term.contribution > 0.0 {
            "cg-up"
        } else {
            "cg-down"
        };
        html.push_str(&format!(r#"<mark class="{class}" title=""#));
        push_escaped(
            html,
            &format!(
                "{feature}: {contribution:+.3}",
                feature = term.feature,
                contribution = term.contribution
            ),
        );
        html.push_str(r#"">"#);
        push_escaped(html, &text[start_byte..end_byte]);
        html.push_str("</mark>");
        shown_to = end_byte;
        i = end;
    }
    push_escaped(html, &text[shown_to..]);
}

#[cfg(test)]
mod tests {
    use super::*;
    use chaffgate_store::{DecisionId, FeedbackSeq};

    fn reason(feature: &str, contribution: f64) -> StoredReason {
        StoredReason {
            feature: feature.to_owned(),
            contribution,
        }
    }

    fn marked(text: &str, reasons: &[StoredReason]) -> String {
        let terms = FieldTerms::from_reasons(reasons);
        let mut html = String::new();
        push_highlighted(&mut html, text, &terms.body);
        html
    }

    /// Drops every `title="…"` so that expectations stay short.
    fn without_titles(html: &str) -> String {
        let mut out = String::new();
        let mut rest = html;
        while let Some(at) = rest.find(" title=\"") {
            out.push_str(&rest[..at]);
            let after = &rest[at + 8..];
            let close = after.find('"').unwrap();
            rest = &after[close + 1..];
        }
        out.push_str(rest);
        out
    }

    #[test]
    fn words_are_marked_on_word_boundaries_whatever_their_case() {
        let html = marked(
            "Claim your PRIZE now, prizes aside: prize!",
            &[
                reason(r#"body word "prize""#, 0.8),
                reason(r#"body word "now""#, -0.1),
            ],
        );
        assert_eq!(
            without_titles(&html),
            "Claim your <mark class=\"cg-up\">PRIZE</mark> <mark class=\"cg-down\">now</mark>, \
             prizes aside: <mark class=\"cg-up\">prize</mark>!"
        );
        assert!(html.contains(r#"title="body word &quot;prize&quot;: +0.800""#));
    }

    #[test]
    fn hostile_text_is_escaped_around_and_inside_marks() {
        let text = r#"<script>win</script> "win" <img src=x onerror=alert(1)> &amp; win"#;
        let html = marked(
            text,
            &[
                reason(r#"body word "script""#, 0.5),
                reason(r#"body word "win""#, 0.5),
            ],
        );
        assert_eq!(
            without_titles(&html),
            "&lt;<mark class=\"cg-up\">script</mark>&gt;<mark class=\"cg-up\">win</mark>&lt;/\
             <mark class=\"cg-up\">script</mark>&gt; &quot;<mark class=\"cg-up\">win</mark>&quot; \
             &lt;img src=x onerror=alert(1)&gt; &amp;amp; <mark class=\"cg-up\">win</mark>"
        );
        // A term that is itself markup is matched as text and escaped.
        let html = marked("a <b> c", &[reason(r#"body word "<b>""#, 1.0)]);
        assert_eq!(
            without_titles(&html),
            "a <mark class=\"cg-up\">&lt;b&gt;</mark> c"
        );
        // Nor can a feature name break out of the title attribute.
        let html = marked(
            r#"x"><script>"#,
            &[reason(r#"body word "x\"><script>""#, 1.0)],
        );
        assert_eq!(
            html,
            "<mark class=\"cg-up\" title=\"body word &quot;x\\&quot;&gt;&lt;script&gt;&quot;: \
             +1.000\">x&quot;&gt;&lt;script&gt;</mark>"
        );
    }

    #[test]
    fn pairs_mark_both_words_and_hosts_win_over_their_base_domain() {
        let reasons = [
            reason(r#"body pair "act now""#, 0.4),
            reason(r#"url base-domain "example.net""#, 0.3),
            reason(r#"url host "lucky-draw.example.net""#, 0.2),
        ];
        let html = marked("Act now: http://lucky-draw.example.net/x", &reasons);
        assert_eq!(
            without_titles(&html),
            "<mark class=\"cg-up\">Act</mark> <mark class=\"cg-up\">now</mark>: \
             http://<mark class=\"cg-up\">lucky-draw.example.net</mark>/x"
        );
    }

    #[test]
    fn words_go_to_the_field_they_were_found_in() {
        let terms = FieldTerms::from_reasons(&[
            reason(r#"subject word "offer""#, 0.5),
            reason(r#"sender word "promo""#, 0.5),
            reason(r#"body ngram "^off""#, 0.9),
            reason(r#"url count 1"#, 0.1),
            reason(r#"slot 12345"#, 0.1),
            reason(r#"body word "deal" | subject word "deal""#, 0.2),
        ]);
        let words = |list: &[Term]| -> Vec<String> {
            list.iter().map(|t| t.chars.iter().collect()).collect()
        };
        assert_eq!(words(&terms.subject), ["offer", "deal"]);
        // Whole words first, then n-grams (anchors taken off).
        assert_eq!(words(&terms.body), ["deal", "off"]);
        assert_eq!(
            terms.body[1].fit,
            Fit::Inside {
                is_start: true,
                is_end: false
            }
        );
        assert_eq!(words(&terms.sender), ["promo"]);
    }

    #[test]
    fn an_ngram_marks_the_whole_words_holding_it_where_its_anchors_allow() {
        let text = "Free freedom, refree; FREE-ride";
        let starts = marked(text, &[reason(r#"body ngram "^fre""#, 0.3)]);
        assert_eq!(
            without_titles(&starts),
            "<mark class=\"cg-up\">Free</mark> <mark class=\"cg-up\">freedom</mark>, refree; \
             <mark class=\"cg-up\">FREE</mark>-ride"
        );
        let ends = marked(text, &[reason(r#"body ngram "ree$""#, -0.3)]);
        assert_eq!(
            without_titles(&ends),
            "<mark class=\"cg-down\">Free</mark> freedom, <mark class=\"cg-down\">refree</mark>; \
             <mark class=\"cg-down\">FREE</mark>-ride"
        );
        let inside = marked(text, &[reason(r#"body ngram "eed""#, 0.3)]);
        assert_eq!(
            without_titles(&inside),
            "Free <mark class=\"cg-up\">freedom</mark>, refree; FREE-ride"
        );
        let both = marked("hi him", &[reason(r#"body ngram "^hi$""#, 0.3)]);
        assert_eq!(without_titles(&both), "<mark class=\"cg-up\">hi</mark> him");
        // A whole word wins over an n-gram, whatever the reasons' order.
        let html = marked(
            "freedom",
            &[
                reason(r#"body ngram "^fre""#, 0.9),
                reason(r#"body word "freedom""#, -0.1),
            ],
        );
        assert_eq!(
            without_titles(&html),
            "<mark class=\"cg-down\">freedom</mark>"
        );
    }

    #[test]
    fn non_ascii_case_folding_keeps_byte_offsets_right() {
        // 'İ' (U+0130) lowercases to two characters; the marks around it
        // must still cut the original text on character boundaries.
        let html = marked(
            "İstanbul Straße ÉTÉ",
            &[
                reason(r#"body word "straße""#, 1.0),
                reason(r#"body word "été""#, -1.0),
            ],
        );
        assert_eq!(
            without_titles(&html),
            "İstanbul <mark class=\"cg-up\">Straße</mark> <mark class=\"cg-down\">ÉTÉ</mark>"
        );
    }

    #[test]
    fn quoted_words_read_back_as_rust_debug_wrote_them() {
        for word in [
            "plain",
            "quote\"d",
            "back\\slash",
            "tab\tnew\nline",
            "\u{200b}x",
            "é",
        ] {
            let quoted = format!("{word:?}");
            assert_eq!(unquote(&quoted).as_deref(), Some(word), "{quoted}");
        }
        assert_eq!(unquote("no quotes"), None);
        assert_eq!(unquote(r#""bad \q escape""#), None);
        assert_eq!(unquote(r#""\u{110000}""#), None);
    }

    #[test]
    fn percentages_have_one_decimal() {
        // `{:.1}` rounds the binary value to nearest (Rust's float
        // formatting; common practice, no source).
        assert_eq!(p_junk_percent(0.5), "50.0%");
        assert_eq!(p_junk_percent(0.12345), "12.3%");
        assert_eq!(p_junk_percent(0.99999), "100.0%");
        assert_eq!(p_junk_percent(0.0), "0.0%");
    }

    #[test]
    fn long_fields_are_cut_on_a_character_boundary() {
        let text = "é".repeat(MAX_SHOWN_CHARS + 7);
        let (shown, hidden) = shown_part(&text);
        assert_eq!((shown.chars().count(), hidden), (MAX_SHOWN_CHARS, 7));
        assert_eq!(shown_part("short"), ("short", 0));
    }

    fn row(content: Option<&str>, verdict: Verdict) -> DecisionRow {
        DecisionRow {
            id: DecisionId::new("01HZX3K6V1D2E3F4G5H6J7K8M9"),
            created_at_ms: 1_709_211_909_000,
            channel: "comments<i>".to_owned(),
            client_ref: Some("ticket-7\"".to_owned()),
            content_sha256: "ab".repeat(32),
            content: content.map(str::to_owned),
            p_junk: 0.4567,
            verdict,
            model_seq: FeedbackSeq(3),
            reasons_json: r#"[{"feature":"body word \"prize\"","contribution":0.61}]"#.to_owned(),
            latency_us: 120,
            input_expires_at_ms: Some(2_000_000_000_000),
        }
    }

    fn view<'a>(rows: &'a [DecisionRow], scope: &'a QueueScope, is_open: bool) -> QueueView<'a> {
        QueueView {
            rows,
            waiting: 7,
            scope,
            order: QueueOrder::Uncertain,
            next_cursor: Some("n.1.X"),
            is_later_page: false,
            is_open,
        }
    }

    #[test]
    fn an_item_shows_time_channel_p_junk_marked_text_and_buttons() {
        let rows = [row(
            Some(r#"{"subject":"Hi <there>","body":"Win a prize today","sender":"x@y.example"}"#),
            Verdict::Review,
        )];
        let scope = QueueScope::Review { channel: None };
        let html = render_queue(&view(&rows, &scope, false));
        assert!(html.contains(r#"data-decision="01HZX3K6V1D2E3F4G5H6J7K8M9""#));
        assert!(html.contains("p_junk 45.7%"), "{html}");
        assert!(html.contains(
            r#"<time datetime="2024-02-29T13:05:09.000Z">2024-02-29 13:05:09 UTC</time>"#
        ));
        assert!(html.contains("channel <span class=\"cg-ch\">comments&lt;i&gt;</span>"));
        assert!(html.contains("<dd>Hi &lt;there&gt;</dd>"));
        assert!(html.contains(">prize</mark> today"), "{html}");
        assert!(html.contains("ticket-7&quot;"));
        assert!(html.contains(r#"data-label="junk" aria-keyshortcuts="x""#));
        assert!(html.contains(">Junk</button>") && html.contains(">Fine</button>"));
        assert!(html.contains(r#"<span id="cg-count" data-count="7">7</span>"#));
        assert!(html.contains(r#"<option value="uncertain" selected>"#));
        assert!(html.contains(r#"href="/review?order=uncertain&amp;cursor=n.1.X" rel="next""#));
        assert!(
            !html.contains("verdict review"),
            "review is the page's subject"
        );
        assert!(
            !html.contains("cg-moderator"),
            "the token names the moderator"
        );
        assert!(!html.contains("<i>"), "{html}");
    }

    #[test]
    fn without_kept_text_the_item_says_so_and_shows_the_digest() {
        let rows = [row(None, Verdict::Junk)];
        let scope = QueueScope::Channel {
            channel: "comments<i>".to_owned(),
        };
        let html = render_queue(&view(&rows, &scope, true));
        assert!(html.contains("does not keep message text"), "{html}");
        assert!(html.contains(&format!(
            r#"<code class="cg-digest">{}</code>"#,
            "ab".repeat(32)
        )));
        assert!(html.contains("verdict junk"));
        assert!(html.contains(r#"value="comments&lt;i&gt;""#));
        assert!(html.contains(r#"id="cg-all" name="all" value="1" checked"#));
        assert!(html.contains(r#"<label for="cg-moderator">Your name</label>"#));
        assert!(html.contains(
            "/review?order=uncertain&amp;channel=comments%3Ci%3E&amp;all=1&amp;cursor=n.1.X"
        ));
    }

    #[test]
    fn an_empty_queue_says_nothing_is_waiting() {
        let scope = QueueScope::Review {
            channel: Some("mail".to_owned()),
        };
        let mut empty = view(&[], &scope, false);
        empty.next_cursor = None;
        empty.waiting = 0;
        let html = render_queue(&empty);
        assert!(html.contains("Nothing is waiting here."));
        assert!(html.contains("in channel mail"));
        assert!(!html.contains("cg-pages"));
    }

    #[test]
    fn query_words_are_checked() {
        let query = |order: Option<&str>, channel: Option<&str>, all: Option<&str>| QueueQuery {
            order: order.map(str::to_owned),
            channel: channel.map(str::to_owned),
            all: all.map(str::to_owned),
            cursor: None,
        };
        assert_eq!(query(None, None, None).order().unwrap(), QueueOrder::Newest);
        assert_eq!(
            query(Some("uncertain"), None, None).order().unwrap(),
            QueueOrder::Uncertain
        );
        assert!(query(Some("oldest"), None, None).order().is_err());
        assert_eq!(
            query(None, Some(" "), Some("0")).scope().unwrap(),
            QueueScope::Review { channel: None }
        );
        assert_eq!(
            query(None, Some("mail"), Some("1")).scope().unwrap(),
            QueueScope::Channel {
                channel: "mail".to_owned()
            }
        );
        assert!(query(None, None, Some("1")).scope().is_err());
        assert!(query(None, Some("mail"), Some("yes")).scope().is_err());
    }
}
