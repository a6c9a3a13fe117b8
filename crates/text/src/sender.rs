//! Sender parsing: display name and address domain from a `sender` field.
//!
//! Accepts the forms people and mail headers use: `Name <local@domain>`,
//! `"Name" <local@domain>`, a bare `local@domain`, or just a name. Works on
//! normalised (lowercased) text. This is not an RFC 5322 parser: the mail
//! crate decodes headers; here we only need a domain that is stable across
//! messages from the same place.

/// The parts of a sender the features use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Sender<'a> {
    /// Text outside the address: the display name, possibly empty.
    pub display: &'a str,
    /// The address's domain, without trailing dots; `None` when no address
    /// with a non-empty domain was found.
    pub domain: Option<&'a str>,
}

/// Splits a normalised sender into display name and address domain.
pub(crate) fn parse_sender(sender: &str) -> Sender<'_> {
    if let Some(open) = sender.rfind('<') {
        let rest = &sender[open + 1..];
        let address = rest.split('>').next().unwrap_or(rest);
        return Sender {
            display: &sender[..open],
            domain: domain_of(address),
        };
    }
    match sender
        .split_whitespace()
        .rev()
        .find(|token| token.contains('@'))
    {
        Some(address) => Sender {
            display: "",
            domain: domain_of(address),
        },
        None => Sender {
            display: sender,
            domain: None,
        },
    }
}

fn domain_of(address: &str) -> Option<&str> {
    let at = address.rfind('@')?;
    let domain = address[at + 1..]
        .trim()
        .trim_end_matches(['.', '>', ')', ',', ';']);
    let is_ok = !domain.is_empty() && !domain.contains(char::is_whitespace);
    is_ok.then_some(domain)
}

/// The last label of a domain with at least two labels.
pub(crate) fn top_level(domain: &str) -> Option<&str> {
    let (_, tld) = domain.rsplit_once('.')?;
    (!tld.is_empty()).then_some(tld)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn name_and_angle_address() {
        let sender = parse_sender("prize team <win@mail.lucky.example>");
        assert_eq!(
            sender,
            Sender {
                display: "prize team ",
                domain: Some("mail.lucky.example")
            }
        );
        let quoted = parse_sender("\"ann\" <ann@corp.example.>");
        assert_eq!(quoted.domain, Some("corp.example"));
    }

    #[test]
    fn bare_address() {
        assert_eq!(
            parse_sender("ann@corp.example"),
            Sender {
                display: "",
                domain: Some("corp.example")
            }
        );
        assert_eq!(
            parse_sender("  ann@corp.example  ").domain,
            Some("corp.example")
        );
    }

    #[test]
    fn name_only_or_broken_address() {
        assert_eq!(
            parse_sender("just a name"),
            Sender {
                display: "just a name",
                domain: None
            }
        );
        assert_eq!(parse_sender("name <nobody>").domain, None);
        assert_eq!(parse_sender("name <a@>").domain, None);
        assert_eq!(parse_sender("x <a@b.example").domain, Some("b.example"));
        assert_eq!(parse_sender("").domain, None);
    }

    #[test]
    fn top_level_label() {
        assert_eq!(top_level("mail.lucky.example"), Some("example"));
        assert_eq!(top_level("localhost"), None);
        assert_eq!(top_level("trailing."), None);
    }
}
