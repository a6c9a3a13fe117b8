//! Visible text, links and images of an HTML body part.
//!
//! Parses with html5ever (through `scraper`), the same tree builder browsers
//! follow, so malformed markup ends up where a mail client would show it.
//! Text inside `script`, `style`, `head` and `template` is not visible and is
//! skipped. The walk uses an explicit stack: nesting depth in hostile markup
//! must not turn into recursion depth.
//!
//! The tree builder's scope checks walk the stack of open elements for every
//! tag, so its cost grows with the square of the nesting depth (measured:
//! 40,000 nested `<div>` take about 3 s in a release build). Markup is
//! therefore cut before the first tag that would open more than
//! [`MAX_HTML_NESTING`] elements, counted by a cheap scan that ignores void
//! elements and elements whose start tag implicitly closes the previous one.

use scraper::{Html, Node};

/// What an HTML part shows and where its links go.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct HtmlText {
    /// Visible text, one line per block, whitespace collapsed.
    pub text: String,
    /// Every `<a href>` in document order.
    pub links: Vec<Link>,
    /// Number of `<img>` elements.
    pub image_count: usize,
    /// The markup nested deeper than [`MAX_HTML_NESTING`] and was cut
    /// before the tag that went too deep.
    pub is_cut_for_nesting: bool,
}

/// Deepest element nesting handed to the HTML parser. Real mail layouts stay
/// far below it (nested layout tables reach a few dozen levels).
pub const MAX_HTML_NESTING: usize = 256;

/// Elements the nesting scan does not count: void elements, which never
/// hold children, and elements that a repeat of themselves closes.
const NOT_NESTING: [&str; 25] = [
    "area", "base", "br", "col", "dd", "dt", "embed", "hr", "img", "input", "keygen", "li", "link",
    "meta", "option", "p", "param", "source", "tbody", "td", "tfoot", "th", "thead", "tr", "wbr",
];

/// Inline elements that a stray end tag of an element below them closes
/// ("any other end tag" in the HTML tree builder pops through elements that
/// are not special). Every other element stops the search, as special ones
/// do, which can only overstate the depth.
const POPPED_THROUGH: [&str; 22] = [
    "a", "abbr", "b", "bdi", "bdo", "big", "cite", "code", "em", "font", "i", "kbd", "label",
    "mark", "nobr", "q", "s", "small", "span", "strike", "strong", "u",
];

/// Formatting elements: the tree builder remembers them after they are
/// closed by another element's end tag and opens them again.
const FORMATTING: [&str; 14] = [
    "a", "b", "big", "code", "em", "font", "i", "nobr", "s", "small", "strike", "strong", "tt", "u",
];

/// Elements whose content the tokenizer reads as text up to their own end
/// tag (raw text and RCDATA; `noscript` too, as scripting is on).
const RAW_TEXT: [&str; 8] = [
    "iframe", "noembed", "noframes", "noscript", "script", "style", "textarea", "xmp",
];

fn is_one_of(name: &[u8], names: &[&str]) -> bool {
    names
        .iter()
        .any(|listed| listed.as_bytes().eq_ignore_ascii_case(name))
}

/// Index of the first `needle` at or after `from`, ASCII case-insensitive.
fn find_ignore_case(haystack: &[u8], from: usize, needle: &[u8]) -> Option<usize> {
    haystack
        .get(from..)?
        .windows(needle.len())
        .position(|window| window.eq_ignore_ascii_case(needle))
        .map(|offset| from + offset)
}

/// Index just past the `>` ending the tag whose name ends at `ix`, skipping
/// quoted attribute values (a quote opens a value only right after `=`).
fn tag_end(bytes: &[u8], mut ix: usize) -> usize {
    let mut last_significant = 0u8;
    while let Some(&byte) = bytes.get(ix) {
        match byte {
            b'>' => return ix + 1,
            b'"' | b'\'' if last_significant == b'=' => {
                let close = bytes[ix + 1..].iter().position(|&other| other == byte);
                match close {
                    Some(offset) => ix += offset + 1,
                    None => return bytes.len(),
                }
                last_significant = byte;
            }
            byte if byte.is_ascii_whitespace() => {}
            byte => last_significant = byte,
        }
        ix += 1;
    }
    bytes.len()
}

/// Length of the longest prefix of `html` in which the stack of open
/// elements, as estimated by a tokenizer-level scan, never holds more than
/// `max_nesting` counted elements. The cut always falls on a `<`.
///
/// The estimate must never be lower than what the tree builder builds, or
/// the quadratic cost comes back; it may be higher, which only cuts markup
/// no real mail has. So comments, bogus comments, quoted attribute values
/// and raw-text content are skipped as the tokenizer skips them, and an end
/// tag closes something only where the tree builder surely would.
fn nesting_safe_len(html: &str, max_nesting: usize) -> usize {
    let bytes = html.as_bytes();
    let mut open: Vec<&[u8]> = Vec::new();
    let mut ix = 0;
    while let Some(offset) = bytes.get(ix..).and_then(|rest| memchr::memchr(b'<', rest)) {
        let at = ix + offset;
        let after = &bytes[at + 1..];
        if after.starts_with(b"!--") {
            ix = find_ignore_case(bytes, at + 4, b"-->").map_or(bytes.len(), |end| end + 3);
            continue;
        }
        let (is_end_tag, name_start) = match after.first() {
            Some(b'/') => (true, at + 2),
            _ => (false, at + 1),
        };
        let name_len = bytes[name_start..]
            .iter()
            .take_while(|&&byte| !byte.is_ascii_whitespace() && byte != b'/' && byte != b'>')
            .count();
        let name = &bytes[name_start..name_start + name_len];
        if !name.first().is_some_and(u8::is_ascii_alphabetic) {
            // `<!...>`, `<?...>` and `</...>` without a name are bogus
            // comments up to the next `>`; a lone `<` is text.
            let is_bogus_comment = matches!(after.first(), Some(b'!' | b'?'))
                || (is_end_tag && !matches!(after.get(1), Some(b'>') | None));
            ix = if is_bogus_comment {
                bytes[at + 1..]
                    .iter()
                    .position(|&byte| byte == b'>')
                    .map_or(bytes.len(), |end| at + 1 + end + 1)
            } else {
                at + 1
            };
            continue;
        }
        ix = tag_end(bytes, name_start + name_len);
        if is_end_tag {
            for (depth, open_name) in open.iter().enumerate().rev() {
                if open_name.eq_ignore_ascii_case(name) {
                    // Formatting elements closed on the way stay in the
                    // list of active formatting elements and are rebuilt
                    // at the next text, so they stay counted.
                    let above = open.split_off(depth + 1);
                    open.pop();
                    open.extend(
                        above
                            .into_iter()
                            .filter(|closed| is_one_of(closed, &FORMATTING)),
                    );
                    break;
                }
                if !is_one_of(open_name, &POPPED_THROUGH) {
                    break;
                }
            }
            continue;
        }
        // Inside SVG or MathML every start tag nests (`script` and `tr`
        // too) unless it closes itself with `/>`.
        let is_foreign = open
            .iter()
            .any(|open_name| is_one_of(open_name, &["svg", "math"]));
        if is_foreign {
            if bytes.get(ix.saturating_sub(2)) != Some(&b'/') {
                open.push(name);
                if open.len() > max_nesting {
                    return at;
                }
            }
            continue;
        }
        if is_one_of(name, &RAW_TEXT) {
            let mut closing = b"</".to_vec();
            closing.extend_from_slice(name);
            ix = find_ignore_case(bytes, ix, &closing).unwrap_or(bytes.len());
            continue;
        }
        if is_one_of(name, &NOT_NESTING) {
            continue;
        }
        open.push(name);
        if open.len() > max_nesting {
            return at;
        }
    }
    html.len()
}

/// One link of an HTML part.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Link {
    /// Host of the `href`, lowercased; `None` for relative, `mailto:` and
    /// other targets without a web host.
    pub target_host: Option<String>,
    /// Host that the link text itself shows, when the text looks like a URL
    /// or a host name (`www.example.com`, `https://example.org/x`).
    pub text_host: Option<String>,
}

impl Link {
    /// True when the text shows one host and the link goes to an unrelated
    /// one. A host and its own subdomains count as related, and a leading
    /// `www.` is ignored, so `example.com` over `shop.example.com` is fine.
    pub fn is_text_host_different(&self) -> bool {
        match (&self.target_host, &self.text_host) {
            (Some(target), Some(shown)) => !hosts_related(target, shown),
            _ => false,
        }
    }
}

fn hosts_related(left: &str, right: &str) -> bool {
    let left = left.strip_prefix("www.").unwrap_or(left);
    let right = right.strip_prefix("www.").unwrap_or(right);
    left == right || left.ends_with(&format!(".{right}")) || right.ends_with(&format!(".{left}"))
}

/// Elements whose content a mail client does not show. (A `match` on the
/// name compares lengths first: cheaper than a list for the many elements
/// of a long part.)
fn is_hidden(name: &str) -> bool {
    matches!(name, "script" | "style" | "head" | "template")
}

/// Elements that start a new line of text.
fn is_block(name: &str) -> bool {
    matches!(
        name,
        "address"
            | "article"
            | "blockquote"
            | "br"
            | "dd"
            | "div"
            | "dt"
            | "footer"
            | "h1"
            | "h2"
            | "h3"
            | "h4"
            | "h5"
            | "h6"
            | "header"
            | "hr"
            | "li"
            | "p"
            | "td"
            | "tr"
    )
}

/// Extracts visible text, links and images from an HTML document.
pub fn html_to_text(html: &str) -> HtmlText {
    let safe_len = nesting_safe_len(html, MAX_HTML_NESTING);
    let document = Html::parse_document(&html[..safe_len]);
    let mut raw_text = String::new();
    let mut links = Vec::new();
    let mut image_count = 0;
    let mut hidden_depth = 0usize;
    // The open `<a>`: its href host and the text collected so far.
    let mut open_link: Option<(Option<String>, String)> = None;

    // (node, is_closing): closing entries are pushed before the children so
    // they pop after them.
    let mut stack = vec![(document.tree.root(), false)];
    while let Some((node, is_closing)) = stack.pop() {
        match node.value() {
            Node::Element(element) => {
                let name = element.name();
                let (is_hidden, is_block) = (is_hidden(name), is_block(name));
                if is_closing {
                    if is_hidden {
                        hidden_depth = hidden_depth.saturating_sub(1);
                    }
                    if name == "a"
                        && let Some((target_host, text)) = open_link.take()
                    {
                        links.push(Link {
                            target_host,
                            text_host: shown_host(&text),
                        });
                    }
                    if is_block {
                        raw_text.push('\n');
                    }
                    continue;
                }
                if is_hidden {
                    hidden_depth += 1;
                }
                if is_block {
                    raw_text.push('\n');
                }
                if name == "img" {
                    image_count += 1;
                }
                if name == "a"
                    && let Some(href) = element.attr("href")
                {
                    open_link = Some((url_host(href), String::new()));
                }
                stack.push((node, true));
            }
            Node::Text(text) => {
                if hidden_depth == 0 {
                    raw_text.push_str(text);
                    if let Some((_, link_text)) = open_link.as_mut() {
                        link_text.push_str(text);
                    }
                }
                continue;
            }
            _ if is_closing => continue,
            _ => {}
        }
        // Last child first, so that the first pops first.
        let mut child = node.last_child();
        while let Some(next) = child {
            stack.push((next, false));
            child = next.prev_sibling();
        }
    }

    HtmlText {
        text: collapse_whitespace(&raw_text),
        links,
        image_count,
        is_cut_for_nesting: safe_len < html.len(),
    }
}

/// One line per non-blank line of `text`, runs of whitespace made one space.
///
/// Whitespace is Unicode White_Space (`char::is_whitespace`); a run of it
/// that holds a line feed separates lines, any other run separates words.
/// Bytes are looked at one by one and only characters outside ASCII are
/// decoded: this runs over every HTML part's text.
fn collapse_whitespace(text: &str) -> String {
    let bytes = text.as_bytes();
    let mut out = String::with_capacity(text.len());
    let mut word_start: Option<usize> = None;
    // The separator owed before the next word: none yet, a space or a line
    // break (a run holding a line feed).
    let mut has_newline = false;
    let mut ix = 0;
    while ix < bytes.len() {
        let byte = bytes[ix];
        let (is_space, len) = if byte.is_ascii() {
            (
                matches!(byte, b'\t' | b'\n' | 0x0B | 0x0C | b'\r' | b' '),
                1,
            )
        } else {
            let c = text[ix..].chars().next().unwrap_or(' ');
            (c.is_whitespace(), c.len_utf8())
        };
        if is_space {
            if let Some(start) = word_start.take() {
                out.push_str(&text[start..ix]);
            }
            has_newline |= byte == b'\n';
        } else if word_start.is_none() {
            if !out.is_empty() {
                out.push(if has_newline { '\n' } else { ' ' });
            }
            has_newline = false;
            word_start = Some(ix);
        }
        ix += len;
    }
    if let Some(start) = word_start {
        out.push_str(&text[start..]);
    }
    out
}

/// Host of an absolute web URL (`http:`, `https:` or scheme-relative `//`).
pub fn url_host(url: &str) -> Option<String> {
    let url = url.trim();
    let lower = url.to_ascii_lowercase();
    let rest = if lower.starts_with("http://") {
        &url["http://".len()..]
    } else if lower.starts_with("https://") {
        &url["https://".len()..]
    } else if lower.starts_with("//") {
        &url[2..]
    } else {
        return None;
    };
    let authority = rest.split(['/', '?', '#', '\\']).next().unwrap_or_default();
    let host_port = authority.rsplit('@').next().unwrap_or_default();
    let host = if host_port.starts_with('[') {
        // IPv6 literal: keep the brackets, drop a port after them.
        host_port.split_inclusive(']').next().unwrap_or_default()
    } else {
        host_port.split(':').next().unwrap_or_default()
    };
    let host = host.trim_end_matches('.').to_ascii_lowercase();
    if host.is_empty() { None } else { Some(host) }
}

/// Host shown by link text that looks like a URL or a bare host name.
fn shown_host(text: &str) -> Option<String> {
    let text = text.trim();
    if text.is_empty() || text.chars().any(char::is_whitespace) {
        return None;
    }
    if let Some(host) = url_host(text) {
        return Some(host);
    }
    let candidate = text
        .split(['/', '?', '#'])
        .next()
        .unwrap_or_default()
        .trim_end_matches('.')
        .to_ascii_lowercase();
    looks_like_host(&candidate).then_some(candidate)
}

/// Two or more dot-separated labels of letters, digits and hyphens, ending
/// in an alphabetic label of two or more letters (a top-level domain).
fn looks_like_host(candidate: &str) -> bool {
    let labels: Vec<&str> = candidate.split('.').collect();
    if labels.len() < 2 {
        return false;
    }
    let labels_ok = labels.iter().all(|label| {
        !label.is_empty()
            && label
                .chars()
                .all(|ch| ch.is_ascii_alphanumeric() || ch == '-')
    });
    let tld = labels.last().copied().unwrap_or_default();
    labels_ok && tld.len() >= 2 && tld.chars().all(|ch| ch.is_ascii_alphabetic())
}

#[cfg(test)]
mod tests {
    use proptest::prelude::*;

    use super::*;

    /// Deepest element in a parsed document (the root counts 0).
    fn tree_depth(html: &str) -> usize {
        let document = Html::parse_document(html);
        let mut deepest = 0;
        let mut stack = vec![(document.tree.root(), 0usize)];
        while let Some((node, depth)) = stack.pop() {
            deepest = deepest.max(depth);
            for child in node.children() {
                stack.push((child, depth + 1));
            }
        }
        deepest
    }

    /// Markup pieces that stress the tree builder: nesting, stray and
    /// misnested end tags, tables, raw text, comments, quoted attributes.
    fn soup_piece() -> impl Strategy<Value = &'static str> {
        prop::sample::select(vec![
            "<div>",
            "</div>",
            "<span>",
            "</span>",
            "<b>",
            "</b>",
            "<i>",
            "</i>",
            "<a href=x>",
            "</a>",
            "<p>",
            "</p>",
            "<table>",
            "</table>",
            "<tr>",
            "<td>",
            "</td>",
            "<ul>",
            "<li>",
            "</ul>",
            "<font>",
            "<select>",
            "<option>",
            "<script>",
            "</script>",
            "<!--",
            "-->",
            "<span title=\"</span>\">",
            "<?",
            ">",
            "</",
            "<svg>",
            "<math>",
            "<template>",
            "</template>",
            "<button>",
            "<form>",
            "<h1>",
            "<pre>",
            "x",
            " ",
        ])
    }

    /// A short run of pieces repeated many times: the shape of input that
    /// makes the tree builder's stack grow without bound.
    fn repeated_unit() -> impl Strategy<Value = String> {
        (prop::collection::vec(soup_piece(), 1..6), 20..80usize)
            .prop_map(|(unit, times)| unit.concat().repeat(times))
    }

    proptest! {
        #[test]
        fn cut_repeated_markup_stays_shallow(html in repeated_unit()) {
            let max_nesting = 8;
            let safe = &html[..nesting_safe_len(&html, max_nesting)];
            let depth = tree_depth(safe);
            prop_assert!(depth <= 5 * (max_nesting + 1) + 3, "depth {depth} for {safe:?}");
        }

        /// The scan's estimate is an upper bound in practice: after the cut,
        /// the parsed tree is never much deeper than the counted nesting
        /// allows (each counted level may add a few uncounted ones such as
        /// `tbody`, `tr`, `td`, `li`, `p`).
        #[test]
        fn cut_markup_stays_shallow(pieces in prop::collection::vec(soup_piece(), 0..400)) {
            let html: String = pieces.concat();
            let max_nesting = 8;
            let safe = &html[..nesting_safe_len(&html, max_nesting)];
            let depth = tree_depth(safe);
            prop_assert!(depth <= 5 * (max_nesting + 1) + 3, "depth {depth} for {safe:?}");
        }
    }

    /// The rule `collapse_whitespace` follows, written with the standard
    /// library's line and word splitting.
    fn collapse_by_lines(text: &str) -> String {
        let lines: Vec<String> = text
            .split('\n')
            .map(|line| line.split_whitespace().collect::<Vec<_>>().join(" "))
            .filter(|line| !line.is_empty())
            .collect();
        lines.join("\n")
    }

    proptest! {
        #[test]
        fn whitespace_collapses_like_splitting_lines_then_words(
            pieces in prop::collection::vec(prop::sample::select(&[
                "a", "bc", " ", "  ", "\t", "\n", "\r\n", "\r", "\u{000B}", "\u{000C}", "\u{0085}",
                "\u{00A0}", "\u{2028}", "\u{3000}", "\u{00E9}", "\u{1F381}", "\u{200B}",
            ][..]), 0..40)
        ) {
            let text = pieces.concat();
            prop_assert_eq!(collapse_whitespace(&text), collapse_by_lines(&text));
        }
    }

    #[test]
    fn skips_script_and_style_and_keeps_blocks_apart() {
        let html = "<html><head><title>t</title><style>p{}</style></head>\
                    <body><p>Hand-dyed   wool</p><script>var x=1;</script><p>in stock</p></body></html>";
        let out = html_to_text(html);
        assert_eq!(out.text, "Hand-dyed wool\nin stock");
    }

    #[test]
    fn comments_and_inline_tags_inside_a_word_leave_the_word_whole() {
        // A comment is no text node (HTML Living Standard, 13.2.6 tree
        // construction: comments become Comment nodes), so the letters on
        // both sides meet; inline elements do not break a line either.
        assert_eq!(html_to_text("<p>win<!-- x -->ner</p>").text, "winner");
        assert_eq!(
            html_to_text("<p>w<!---->in<span>n</span><b></b>er today</p>").text,
            "winner today"
        );
        // A comment hiding a whole phrase hides it.
        assert_eq!(
            html_to_text("<p>glazed <!-- cheap pills --> bowls</p>").text,
            "glazed bowls"
        );
    }

    #[test]
    fn character_references_for_invisible_characters_reach_the_text() {
        // &#8203; is U+200B ZERO WIDTH SPACE: html_to_text keeps it (it is
        // not whitespace), and the feature extractor's normalisation drops
        // it (see the tests of chaffgate-mail's respelled-word checks).
        assert_eq!(html_to_text("<p>win&#8203;ner</p>").text, "win\u{200B}ner");
    }

    #[test]
    fn collects_links_and_images() {
        let html = r#"<p><a href="https://Shop.Example.com/cart?x=1">www.example.org</a>
            <a href="mailto:orders@example.com">write</a><img src="a.png"><img src="b.png"></p>"#;
        let out = html_to_text(html);
        assert_eq!(out.image_count, 2);
        assert_eq!(
            out.links,
            [
                Link {
                    target_host: Some("shop.example.com".into()),
                    text_host: Some("www.example.org".into()),
                },
                Link {
                    target_host: None,
                    text_host: None,
                },
            ]
        );
        assert!(out.links[0].is_text_host_different());
        assert!(!out.links[1].is_text_host_different());
    }

    #[test]
    fn subdomain_or_www_is_not_a_different_host() {
        let link = Link {
            target_host: Some("shop.example.com".into()),
            text_host: Some("www.example.com".into()),
        };
        assert!(!link.is_text_host_different());
    }

    #[test]
    fn url_host_strips_userinfo_port_and_case() {
        assert_eq!(
            url_host("HTTPS://user:pw@Example.NET:8443/a").as_deref(),
            Some("example.net")
        );
        assert_eq!(url_host("//example.org").as_deref(), Some("example.org"));
        assert_eq!(url_host("/relative/path"), None);
        assert_eq!(url_host("http://"), None);
    }

    #[test]
    fn plain_words_are_not_hosts() {
        assert_eq!(shown_host("click here"), None);
        assert_eq!(shown_host("order.now"), Some("order.now".into()));
        assert_eq!(shown_host("v1.2"), None);
        assert_eq!(shown_host("example.com/offer"), Some("example.com".into()));
    }

    #[test]
    fn nesting_up_to_the_cap_is_read_whole() {
        let html = "<div>".repeat(MAX_HTML_NESTING) + "deep" + &"</div>".repeat(MAX_HTML_NESTING);
        let out = html_to_text(&html);
        assert_eq!(out.text, "deep");
        assert!(!out.is_cut_for_nesting);
    }

    #[test]
    fn nesting_past_the_cap_is_cut_before_the_deep_tag() {
        let html = "<p>top</p>".to_string() + &"<div>".repeat(50_000) + "deep";
        let out = html_to_text(&html);
        assert_eq!(out.text, "top");
        assert!(out.is_cut_for_nesting);
    }

    #[test]
    fn nesting_scan_ignores_void_and_self_closing_siblings() {
        // 1,000 paragraphs, list items, rows and images never nest, and
        // closed divs give their level back.
        let flat =
            "<p>a<li>b<tr><td>c<br><img src=x>".repeat(1_000) + &"<div>x</div>".repeat(1_000);
        assert_eq!(nesting_safe_len(&flat, 2), flat.len());
        assert_eq!(nesting_safe_len("<div><DIV><span>", 2), 10);
        assert_eq!(nesting_safe_len("a < b <1 </>", 0), 12);
    }

    #[test]
    fn nesting_scan_is_not_fooled_by_stray_or_hidden_end_tags() {
        // Each of these opens one element per repeat in the tree builder;
        // the end tags are ignored, or are not tags at all.
        let hostile = [
            "<div></span>",
            "<span><!--</span>-->",
            "<span title=\"</span>\">",
            "<span><?</span>",
            "<span><script></span></script>",
            "<div><table></div>",
            "<a><b></a>x",
            "<div><b>x</div>",
            "<svg><tr><script>",
        ];
        for unit in hostile {
            let html = unit.repeat(10);
            assert!(nesting_safe_len(&html, 5) < html.len(), "{unit}");
        }
        // Closed elements give their level back, also unclosed inline
        // ones (not formatting ones) that an outer end tag closes.
        let html = "<div><span><label>x</div><b>y</b>".repeat(10);
        assert_eq!(nesting_safe_len(&html, 3), html.len());
        // Document root, html, body, div, span, label, text.
        assert!(tree_depth(&html) <= 6, "{depth}", depth = tree_depth(&html));
    }
}
