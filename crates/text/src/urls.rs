//! URL detection in normalised message text, for the URL count and host
//! features.
//!
//! A deliberately small scanner, no regular expressions. The text is cut
//! into candidates at whitespace and at `< > " ' ( ) [ ] { } , ; | \` and
//! backtick. A candidate is a URL when it
//!
//! 1. starts with `http://` or `https://`: the host is what follows, after
//!    any `user@` part, up to the first character that cannot be in a host
//!    name (a port, path, query, ...);
//! 2. starts with `www.` and has more after it; or
//! 3. starts with a bare domain name: two or more non-empty labels of
//!    letters, digits and `-` joined by `.`, whose last label is at least
//!    two letters, and which is either followed by `/` or ends in one of the
//!    common top-level domains in [`COMMON_TLDS`]. This catches
//!    `example.com/claim` and `prize.example.com` but not `node.js`, `e.g.`,
//!    `3.14` or `ann@mail.example` (the last starts with `ann`, which has no
//!    dot).
//!
//! Host names may hold non-ASCII letters and digits (internationalised
//! names after NFKC). Trailing dots are dropped, and so is a leading `www.`,
//! so `http://www.example.com` and `example.com/x` share a host feature.
//! The text is already lowercased.

/// Top-level domains that make a bare `name.tld` a URL even without a
/// following `/`. Part of the stable feature format: changing it changes
/// which features messages have.
pub const COMMON_TLDS: &[&str] = &[
    "app", "au", "biz", "br", "ca", "cc", "cf", "click", "club", "cn", "co", "com", "de", "dev",
    "es", "eu", "fr", "ga", "gq", "in", "info", "io", "it", "jp", "link", "live", "ly", "me", "ml",
    "net", "nl", "online", "org", "pl", "ru", "shop", "site", "store", "tk", "top", "tv", "uk",
    "us", "vip", "win", "ws", "xyz",
];

pub(crate) fn is_delimiter(c: char) -> bool {
    c.is_whitespace()
        || matches!(
            c,
            '<' | '>'
                | '"'
                | '\''
                | '('
                | ')'
                | '['
                | ']'
                | '{'
                | '}'
                | ','
                | ';'
                | '|'
                | '\\'
                | '`'
        )
}

/// [`is_delimiter`] for ASCII bytes.
#[inline]
fn is_ascii_delimiter(byte: u8) -> bool {
    crate::ascii::is(byte, crate::ascii::URL_DELIMITER)
}

fn is_host_char(c: char) -> bool {
    if c.is_ascii() {
        c.is_ascii_alphanumeric() || c == '-' || c == '.'
    } else {
        c.is_alphanumeric()
    }
}

/// The longest prefix of `text` made of host characters.
fn host_prefix(text: &str) -> &str {
    let end = text.find(|c: char| !is_host_char(c)).unwrap_or(text.len());
    &text[..end]
}

/// Drops trailing dots and a leading `www.`.
fn tidy_host(host: &str) -> &str {
    let host = host.trim_end_matches('.');
    match host.strip_prefix("www.") {
        Some(rest) if !rest.is_empty() => rest,
        _ => host,
    }
}

/// Calls `f(host)` for every URL in `text`, in order. Hosts are never empty.
///
/// Same result as checking every piece of `text.split(is_delimiter)`, but
/// only pieces holding a `.` or `:` can be URLs, so only those are cut out:
/// the scan jumps from one such byte to the next. Neither byte occurs inside
/// a multi-byte UTF-8 character.
pub(crate) fn scan_urls<'a>(text: &'a str, mut f: impl FnMut(&'a str)) {
    let bytes = text.as_bytes();
    let is_ascii = text.is_ascii();
    let mut from = 0;
    while let Some(found) = bytes[from..]
        .iter()
        .position(|&byte| byte == b'.' || byte == b':')
    {
        let at = from + found;
        let (start, end) = if is_ascii {
            let start = bytes[..at]
                .iter()
                .rposition(|&byte| is_ascii_delimiter(byte))
                .map_or(0, |i| i + 1);
            let end = bytes[at..]
                .iter()
                .position(|&byte| is_ascii_delimiter(byte))
                .map_or(text.len(), |i| at + i);
            (start, end)
        } else {
            let start = text[..at]
                .rfind(is_delimiter)
                .map_or(0, |i| i + char_len_at(text, i));
            let end = text[at..].find(is_delimiter).map_or(text.len(), |i| at + i);
            (start, end)
        };
        if let Some(host) = url_host(&text[start..end]) {
            f(host);
        }
        if end >= text.len() {
            break;
        }
        from = end;
    }
}

fn char_len_at(text: &str, at: usize) -> usize {
    text[at..].chars().next().map_or(1, char::len_utf8)
}

/// The host of `candidate` if it is a URL by the rules in the module doc.
fn url_host(candidate: &str) -> Option<&str> {
    if !candidate.contains('.') && !candidate.starts_with("http") {
        return None;
    }
    let after_scheme = candidate
        .strip_prefix("https://")
        .or_else(|| candidate.strip_prefix("http://"));
    if let Some(rest) = after_scheme {
        let authority_end = rest.find(['/', '?', '#']).unwrap_or(rest.len());
        let authority = &rest[..authority_end];
        let host_part = match authority.rfind('@') {
            Some(at) => &authority[at + 1..],
            None => authority,
        };
        let host = tidy_host(host_prefix(host_part));
        return (!host.is_empty()).then_some(host);
    }
    if candidate.starts_with("www.") {
        let host = tidy_host(host_prefix(candidate));
        return (host != "www").then_some(host);
    }
    let raw = host_prefix(candidate);
    let host = raw.trim_end_matches('.');
    let (_, tld) = host.rsplit_once('.')?;
    if tld.chars().count() < 2
        || !tld.chars().all(char::is_alphabetic)
        || host.split('.').any(str::is_empty)
    {
        return None;
    }
    let is_followed_by_slash = candidate[raw.len()..].starts_with('/');
    (is_followed_by_slash || COMMON_TLDS.contains(&tld)).then(|| tidy_host(host))
}

/// The last two labels of a host (`mail.example.com` -> `example.com`),
/// `None` for a single label or an IPv4 address.
pub(crate) fn base_domain(host: &str) -> Option<&str> {
    if is_ipv4(host) {
        return None;
    }
    let last_dot = host.rfind('.')?;
    let start = host[..last_dot].rfind('.').map_or(0, |dot| dot + 1);
    Some(&host[start..])
}

/// Four dot-separated runs of 1 to 3 ASCII digits.
pub(crate) fn is_ipv4(host: &str) -> bool {
    let mut labels = 0;
    for label in host.split('.') {
        labels += 1;
        if label.is_empty() || label.len() > 3 || !label.bytes().all(|b| b.is_ascii_digit()) {
            return false;
        }
    }
    labels == 4
}

#[cfg(test)]
mod tests {
    use super::*;

    fn hosts(text: &str) -> Vec<&str> {
        let mut found = Vec::new();
        scan_urls(text, |host| found.push(host));
        found
    }

    #[test]
    fn scheme_urls() {
        assert_eq!(
            hosts("see https://prize.example.com/claim?id=1 now"),
            ["prize.example.com"]
        );
        assert_eq!(hosts("http://www.shop.example:8080/x"), ["shop.example"]);
        assert_eq!(hosts("http://user:pw@evil.example/"), ["evil.example"]);
        assert_eq!(hosts("(http://intranet)"), ["intranet"]);
        assert_eq!(hosts("http://10.0.0.1/login"), ["10.0.0.1"]);
        assert!(hosts("http:// nothing").is_empty());
    }

    #[test]
    fn www_urls() {
        assert_eq!(hosts("visit www.deals.example today"), ["deals.example"]);
        assert_eq!(hosts("<www.deals.example.>"), ["deals.example"]);
        assert!(hosts("www. alone").is_empty());
    }

    #[test]
    fn bare_domains_need_a_slash_or_a_common_tld() {
        assert_eq!(hosts("go to example.com now"), ["example.com"]);
        assert_eq!(
            hosts("end of sentence: shop.example.co.uk."),
            ["shop.example.co.uk"]
        );
        assert_eq!(hosts("short.example/abc"), ["short.example"]);
        assert!(hosts("written in node.js, e.g. 3.14 or v1.2").is_empty());
        assert!(hosts("mail ann@mail.example or ann.lee@mail.com").is_empty());
        assert!(hosts("a..com and .com and x.c/").is_empty());
    }

    #[test]
    fn delimiters_split_candidates() {
        assert_eq!(
            hosts("[a.example/x],\"b.com\";c.org"),
            ["a.example", "b.com", "c.org"]
        );
    }

    /// The plain definition that [`scan_urls`] speeds up.
    fn hosts_by_split(text: &str) -> Vec<&str> {
        text.split(is_delimiter).filter_map(url_host).collect()
    }

    proptest::proptest! {
        #[test]
        fn jumping_scan_equals_plain_split(
            pieces in proptest::collection::vec(
                proptest::sample::select(&[
                    "http://", "https://", "www.", "a", "example", ".", ":", "/", "@", " ", "com", "\u{00A0}",
                    "\u{00FC}", "(", ")", ",", "1", "..", "\u{3000}", "x.co", "\n",
                ][..]),
                0..30,
            )
        ) {
            let text = pieces.concat();
            proptest::prop_assert_eq!(hosts(&text), hosts_by_split(&text));
        }
    }

    #[test]
    fn internationalised_hosts_are_kept() {
        assert_eq!(
            hosts("https://b\u{00FC}cher.example/"),
            ["b\u{00FC}cher.example"]
        );
    }

    #[test]
    fn base_domain_is_last_two_labels() {
        assert_eq!(base_domain("mail.example.com"), Some("example.com"));
        assert_eq!(base_domain("example.com"), Some("example.com"));
        assert_eq!(base_domain("intranet"), None);
        assert_eq!(base_domain("10.0.0.1"), None);
        assert!(is_ipv4("192.168.1.20") && !is_ipv4("1.2.3") && !is_ipv4("1.2.3.4444"));
    }
}
