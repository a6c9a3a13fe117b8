//! Pages for people: a shared page shell and what pages render with.
//!
//! Browsers send no bearer header when they navigate, so each page comes in
//! two parts:
//!
//! * the **shell** (`GET /review`, say) is served without a token and holds
//!   no data: a heading, static help, a sign-in form and a script. The
//!   script keeps the token the person types in `sessionStorage` (this tab
//!   only; never `localStorage`, never a cookie) and
//! * fetches a **fragment** (`GET /review/queue`) with
//!   `Authorization: Bearer <token>`. The fragment is HTML rendered here on
//!   the server; the script only inserts it and handles actions. A 401 or
//!   403 shows the sign-in form again with the reason.
//!
//! While no token exists (open mode, see [`crate::auth`]) fragments answer
//! without one, and the shell starts without the sign-in form.
//!
//! Every page calls [`shell`] with its title, fragment URL and its own
//! script and styles; an operator page fetches an operator-only fragment
//! the same way. A new page adds its shell's path to [`SHELL_PATHS`] and
//! registers both routes in `app()`; its fragment needs role `operate`
//! unless `auth::needed_role` names a lower one. The shared script gives page scripts one object,
//! `window.chaffgate`:
//!
//! | member | what it does |
//! | --- | --- |
//! | `request(url, init)` | `fetch` with the token's header added |
//! | `load(url?)` | fetches the fragment (default: the page's, with the page's query string) and inserts it |
//! | `announce(text)` | says `text` in the polite live region |
//! | `alert(text)` | shows `text` in the alert region (an error) |
//! | `errorMessage(response)` | a promise of an error answer's `message` |
//! | `signIn(why)` | forgets the token and shows the sign-in form with `why` |
//! | `isOpen` | whether the server was in open mode when the shell was served |
//!
//! and fires `chaffgate:fragment` on `document` after each insertion.
//!
//! What must stay true: everything from a request, the database or a
//! message goes through [`push_escaped`] before it reaches HTML. Scripts
//! and styles are inline (the pages work offline, with no other asset) and
//! are allowed by their SHA-256 in the `Content-Security-Policy`, so no
//! other script runs, not even an event-handler attribute that escaped
//! escaping.

pub mod reports;
pub mod review;

use axum::http::HeaderValue;
use axum::http::header::{
    CACHE_CONTROL, CONTENT_SECURITY_POLICY, CONTENT_TYPE, REFERRER_POLICY, X_CONTENT_TYPE_OPTIONS,
};
use axum::response::{IntoResponse, Response};
use chaffgate_store::Role;
use sha2::{Digest, Sha256};

/// The shared styles. Colours and their contrast are listed in [`PALETTE`].
const SHELL_STYLE: &str = include_str!("shell.css");

/// The shared script: token, fragment loading, live regions.
const SHELL_SCRIPT: &str = include_str!("shell.js");

/// The shells served without a token. [`crate::auth`] lets these through;
/// their fragments keep needing a role.
pub const SHELL_PATHS: &[&str] = &[review::PATH, reports::PATH];

/// Whether `path` is a page shell, served without a token.
pub fn is_shell(path: &str) -> bool {
    SHELL_PATHS.contains(&path)
}

/// Whether the server asks for tokens, as the shell is served.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Access {
    /// No token exists: fragments answer anyone who can reach the server.
    Open,
    /// Fragments need a bearer token.
    Tokens,
}

/// One page built on the shell.
#[derive(Debug, Clone, Copy)]
pub struct Shell<'a> {
    /// The page's name, in the title bar and the top heading.
    pub title: &'a str,
    /// Where the page's content comes from, e.g. `/review/queue`. The
    /// script adds the page's own query string.
    pub fragment_url: &'a str,
    /// The role the fragment needs, named by the sign-in form.
    pub role: Role,
    /// Static HTML shown above the content (help, cautions). Trusted:
    /// written in this crate, never built from input.
    pub lead_html: &'static str,
    /// The page's own script, run after the shared one.
    pub script: &'static str,
    /// The page's own styles, after the shared ones.
    pub style: &'static str,
}

/// The shell page: static HTML, inline styles and script, and headers
/// that allow exactly those.
pub fn shell(page: &Shell<'_>, access: Access) -> Response {
    let style = format!("{SHELL_STYLE}\n{page_style}", page_style = page.style);
    let script = format!("{SHELL_SCRIPT}\n{page_script}", page_script = page.script);
    let html = shell_html(page, access, &style, &script);
    let policy = format!(
        "default-src 'none'; script-src '{script_hash}'; style-src '{style_hash}'; \
         connect-src 'self'; img-src data:; form-action 'self'; base-uri 'none'; \
         frame-ancestors 'none'",
        script_hash = csp_hash(&script),
        style_hash = csp_hash(&style),
    );
    let mut response = html.into_response();
    let headers = response.headers_mut();
    headers.insert(
        CONTENT_TYPE,
        HeaderValue::from_static("text/html; charset=utf-8"),
    );
    headers.insert(CACHE_CONTROL, HeaderValue::from_static("no-cache"));
    if let Ok(policy) = HeaderValue::from_str(&policy) {
        headers.insert(CONTENT_SECURITY_POLICY, policy);
    }
    common_headers(&mut response);
    response
}

/// A fragment answer: HTML that a shell inserts. Never stored by caches,
/// since it holds messages.
pub fn fragment(html: String) -> Response {
    let mut response = html.into_response();
    let headers = response.headers_mut();
    headers.insert(
        CONTENT_TYPE,
        HeaderValue::from_static("text/html; charset=utf-8"),
    );
    headers.insert(CACHE_CONTROL, HeaderValue::from_static("no-store"));
    // Opened on its own, a fragment runs nothing and loads nothing.
    headers.insert(
        CONTENT_SECURITY_POLICY,
        HeaderValue::from_static("default-src 'none'; frame-ancestors 'none'"),
    );
    common_headers(&mut response);
    response
}

fn common_headers(response: &mut Response) {
    let headers = response.headers_mut();
    headers.insert(X_CONTENT_TYPE_OPTIONS, HeaderValue::from_static("nosniff"));
    headers.insert(REFERRER_POLICY, HeaderValue::from_static("no-referrer"));
}

/// A CSP source for inline text: `sha256-<base64 of its SHA-256>`.
fn csp_hash(text: &str) -> String {
    let digest = Sha256::digest(text.as_bytes());
    let base64 = data_encoding::BASE64.encode(&digest);
    format!("sha256-{base64}")
}

fn shell_html(page: &Shell<'_>, access: Access, style: &str, script: &str) -> String {
    let mut html = String::with_capacity(style.len() + script.len() + 4096);
    let title = escape_html(page.title);
    let fragment_url = escape_html(page.fragment_url);
    let role = page.role.as_str();
    let is_open = match access {
        Access::Open => "true",
        Access::Tokens => "false",
    };
    html.push_str(&format!(
        r##"<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="referrer" content="no-referrer">
<title>{title} · chaffgate</title>
<link rel="icon" href="data:,">
<style>{style}</style>
</head>
<body>
<a class="cg-skip" href="#cg-content">Skip to the content</a>
<header class="cg-bar">
<p class="cg-brand">chaffgate</p>
<h1 id="cg-title">{title}</h1>
<button type="button" id="cg-signout" class="cg-plain" hidden>Sign out</button>
</header>
<main id="cg-page" data-fragment="{fragment_url}" data-open="{is_open}">
{lead}
<div id="cg-alert" class="cg-alert" role="alert"></div>
<p id="cg-status" class="cg-status" role="status" aria-live="polite"></p>
<form id="cg-login" class="cg-login" aria-labelledby="cg-login-title" hidden>
<h2 id="cg-login-title">Sign in</h2>
<p id="cg-login-why" class="cg-login-why"></p>
<label for="cg-token">Access token (role {role} or above)</label>
<input id="cg-token" name="token" type="password" autocomplete="off" spellcheck="false" required aria-describedby="cg-token-help">
<p id="cg-token-help" class="cg-help">Kept only in this browser tab (session storage) and sent as a bearer token; closing the tab forgets it. Tokens come from <code>chaffgate token add</code>.</p>
<button type="submit" class="cg-primary">Sign in</button>
</form>
<noscript><p class="cg-alert">This page needs JavaScript: it fetches its content with your access token.</p></noscript>
<div id="cg-content" class="cg-content" tabindex="-1"></div>
</main>
<script>{script}</script>
</body>
</html>
"##,
        lead = page.lead_html,
    ));
    html
}

/// `text` with `&`, `<`, `>`, `"` and `'` replaced by character references,
/// safe inside element content and quoted attribute values.
pub fn escape_html(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + text.len() / 8);
    push_escaped(&mut out, text);
    out
}

/// Appends `text` to `out`, escaped as [`escape_html`] does. NUL, which
/// HTML parsers replace or drop, becomes U+FFFD here, so that what is shown
/// does not depend on the parser.
pub fn push_escaped(out: &mut String, text: &str) {
    for ch in text.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            '\0' => out.push('\u{FFFD}'),
            other => out.push(other),
        }
    }
}

/// `text` percent-encoded for a URL query value: every byte but the RFC
/// 3986 unreserved characters (section 2.3) becomes `%XX`.
pub fn encode_query_value(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for byte in text.bytes() {
        if byte.is_ascii_alphanumeric() || matches!(byte, b'-' | b'.' | b'_' | b'~') {
            out.push(char::from(byte));
        } else {
            out.push_str(&format!("%{byte:02X}"));
        }
    }
    out
}

/// A time in milliseconds since the Unix epoch as UTC: a readable form
/// (`2024-02-29 13:05:09 UTC`) and the `datetime` attribute form
/// (`2024-02-29T13:05:09.250Z`).
pub fn utc_time(ms: i64) -> (String, String) {
    let attribute = chaffgate_report::time::rfc3339(ms);
    // `YYYY-MM-DDTHH:MM:SS.mmmZ` read as date, time and seconds.
    let readable = format!("{} {} UTC", &attribute[..10], &attribute[11..19]);
    (readable, attribute)
}

/// Foreground and background pairs the styles use, as `(use, fg, bg)`.
///
/// Contrast ratios by the WCAG 2.1 formula (relative luminance, section
/// "Definitions"; success criteria 1.4.3 and 1.4.11), rounded down; the
/// test below recomputes them from the hex values:
///
/// | use | fg | bg | ratio | needs |
/// | --- | --- | --- | --- | --- |
/// | text | `#1b1b1f` | `#ffffff` | 17.1:1 | 4.5:1 |
/// | secondary text | `#545861` | `#ffffff` | 7.1:1 | 4.5:1 |
/// | text on an item | `#1b1b1f` | `#f4f5f7` | 15.7:1 | 4.5:1 |
/// | secondary text on an item | `#545861` | `#f4f5f7` | 6.5:1 | 4.5:1 |
/// | words pushing towards junk | `#1b1b1f` | `#ffe0db` | 13.8:1 | 4.5:1 |
/// | words pushing towards fine | `#1b1b1f` | `#dcebff` | 14.2:1 | 4.5:1 |
/// | the Junk button | `#ffffff` | `#9b1c1c` | 8.1:1 | 4.5:1 |
/// | the Fine button | `#ffffff` | `#1d5e34` | 7.7:1 | 4.5:1 |
/// | links, focus outline, sign-in button (reversed) | `#1f4fbf` | `#ffffff` | 7.1:1 | 4.5:1 (3:1 for the outline) |
/// | focus outline on an item | `#1f4fbf` | `#f4f5f7` | 6.5:1 | 3:1 |
/// | caution box | `#1b1b1f` | `#fff4d6` | 15.6:1 | 4.5:1 |
/// | errors | `#9b1c1c` | `#ffffff` | 8.1:1 | 4.5:1 |
///
/// Every pair clears the AA level of 4.5:1 for normal-size text.
pub const PALETTE: &[(&str, &str, &str)] = &[
    ("text", "#1b1b1f", "#ffffff"),
    ("secondary text", "#545861", "#ffffff"),
    ("text on an item", "#1b1b1f", "#f4f5f7"),
    ("secondary text on an item", "#545861", "#f4f5f7"),
    ("words pushing towards junk", "#1b1b1f", "#ffe0db"),
    ("words pushing towards fine", "#1b1b1f", "#dcebff"),
    ("the Junk button", "#ffffff", "#9b1c1c"),
    ("the Fine button", "#ffffff", "#1d5e34"),
    ("links, focus outline, sign-in button", "#1f4fbf", "#ffffff"),
    ("focus outline on an item", "#1f4fbf", "#f4f5f7"),
    ("caution box", "#1b1b1f", "#fff4d6"),
    ("errors", "#9b1c1c", "#ffffff"),
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_defuses_hostile_text() {
        let hostile = r#"<script>alert('x')</script>"><img src=x onerror="alert(1)">&amp;"#;
        let escaped = escape_html(hostile);
        assert_eq!(
            escaped,
            "&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt;&quot;&gt;&lt;img src=x \
             onerror=&quot;alert(1)&quot;&gt;&amp;amp;"
        );
        for raw in ['<', '>', '"', '\''] {
            assert!(!escaped.contains(raw), "{raw} left in {escaped}");
        }
        // Every & left starts one of the references written above.
        let references = ["&amp;", "&lt;", "&gt;", "&quot;", "&#39;"];
        for (at, _) in escaped.match_indices('&') {
            assert!(
                references.iter().any(|r| escaped[at..].starts_with(r)),
                "stray & at {at} in {escaped}"
            );
        }
    }

    #[test]
    fn escaping_keeps_other_text_and_replaces_nul() {
        assert_eq!(
            escape_html("plain text, ünïcode ✓"),
            "plain text, ünïcode ✓"
        );
        assert_eq!(escape_html("a\0b"), "a\u{FFFD}b");
        assert_eq!(escape_html(""), "");
    }

    #[test]
    fn query_values_keep_only_unreserved_characters() {
        // Unreserved set from RFC 3986, section 2.3.
        assert_eq!(encode_query_value("aZ09-._~"), "aZ09-._~");
        assert_eq!(encode_query_value("a b&c=d/é"), "a%20b%26c%3Dd%2F%C3%A9");
    }

    #[test]
    fn utc_times_match_known_dates() {
        // The Unix epoch (POSIX); 951_782_400 s is 2000-02-29, a leap day
        // in a year divisible by 400 (checked with GNU `date -u -d @SECONDS`).
        assert_eq!(
            utc_time(0),
            (
                "1970-01-01 00:00:00 UTC".to_owned(),
                "1970-01-01T00:00:00.000Z".to_owned()
            )
        );
        assert_eq!(utc_time(951_782_400_250).1, "2000-02-29T00:00:00.250Z");
        // Before the epoch clamps to it: no decision is that old.
        assert_eq!(utc_time(-1).1, "1970-01-01T00:00:00.000Z");
        // 1_709_211_909 s: 2024-02-29 13:05:09 UTC (GNU date, as above).
        assert_eq!(utc_time(1_709_211_909_000).0, "2024-02-29 13:05:09 UTC");
    }

    /// Relative luminance of `#rrggbb`, WCAG 2.1 "Definitions".
    fn luminance(hex: &str) -> f64 {
        let channel = |at: usize| {
            let value = f64::from(u8::from_str_radix(&hex[at..at + 2], 16).unwrap()) / 255.0;
            if value <= 0.03928 {
                value / 12.92
            } else {
                ((value + 0.055) / 1.055).powf(2.4)
            }
        };
        0.2126 * channel(1) + 0.7152 * channel(3) + 0.0722 * channel(5)
    }

    fn contrast(fg: &str, bg: &str) -> f64 {
        let (a, b) = (luminance(fg), luminance(bg));
        (a.max(b) + 0.05) / (a.min(b) + 0.05)
    }

    #[test]
    fn contrast_formula_matches_the_extremes() {
        // Black on white is 21:1 and a colour on itself 1:1 (WCAG 2.1,
        // "contrast ratio" note).
        assert!((contrast("#000000", "#ffffff") - 21.0).abs() < 1e-9);
        assert!((contrast("#1f4fbf", "#1f4fbf") - 1.0).abs() < 1e-9);
    }

    #[test]
    fn every_colour_pair_meets_wcag_aa_and_is_the_one_styled() {
        let styles = format!(
            "{SHELL_STYLE}{review}{reports}",
            review = review::STYLE,
            reports = reports::STYLE
        );
        for (name, fg, bg) in PALETTE {
            let ratio = contrast(fg, bg);
            assert!(ratio >= 4.5, "{name}: {fg} on {bg} is {ratio:.2}:1");
            for colour in [fg, bg] {
                assert!(styles.contains(colour), "{name}: {colour} is not styled");
            }
        }
    }

    #[test]
    fn every_colour_in_the_styles_is_in_the_palette() {
        let styles = format!(
            "{SHELL_STYLE}{review}{reports}",
            review = review::STYLE,
            reports = reports::STYLE
        );
        for (at, _) in styles.match_indices('#') {
            let colour = &styles[at..(at + 7).min(styles.len())];
            if colour.len() == 7 && colour[1..].bytes().all(|b| b.is_ascii_hexdigit()) {
                assert!(
                    PALETTE
                        .iter()
                        .any(|(_, fg, bg)| *fg == colour || *bg == colour),
                    "{colour} is styled but its contrast is not checked"
                );
            }
        }
    }

    #[test]
    fn the_shell_escapes_its_title_and_allows_exactly_its_inline_code() {
        let page = Shell {
            title: "Queue <b>&",
            fragment_url: "/x?a=\"1\"",
            role: Role::Moderate,
            lead_html: "<p>help</p>",
            script: "console.log('page');",
            style: "p { color: #1b1b1f; }",
        };
        let response = shell(&page, Access::Tokens);
        let policy = response.headers()[CONTENT_SECURITY_POLICY]
            .to_str()
            .unwrap()
            .to_owned();
        let script = format!("{SHELL_SCRIPT}\nconsole.log('page');");
        assert!(policy.contains(&csp_hash(&script)), "{policy}");
        assert!(policy.starts_with("default-src 'none';"), "{policy}");
        let html = shell_html(&page, Access::Tokens, "", "");
        assert!(html.contains("<title>Queue &lt;b&gt;&amp; · chaffgate</title>"));
        assert!(html.contains(r#"data-fragment="/x?a=&quot;1&quot;""#));
        assert!(html.contains(r#"data-open="false""#));
        assert!(html.contains("role moderate or above"));
        assert!(shell_html(&page, Access::Open, "", "").contains(r#"data-open="true""#));
    }

    #[test]
    fn csp_hash_is_base64_of_sha256() {
        // SHA-256("abc") from FIPS 180-2, Appendix B.1, in base64 (RFC 4648,
        // section 4) of ba7816bf...15ad.
        assert_eq!(
            csp_hash("abc"),
            "sha256-ungWv48Bz+pBQUDeXa4iI7ADYaOWF3qctBD/YfIAFa0="
        );
    }
}
