//! Labelled corpora: JSONL message objects or two-column `LABEL<TAB>TEXT` files.
//!
//! A JSONL line may carry a raw mail (`raw` or `raw_b64`) instead of, or
//! beside, the message fields; it is parsed as the daemon parses one.
//! Besides `label`, a line may carry the corpus's own bookkeeping: `at`
//! (when the message arrived, RFC 3339, kept per item), and `id`, `week`
//! and `campaign`, which are read past. Any other unknown field is still
//! refused, so that a misspelt message field does not go unnoticed.
//!
//! A corpus's own label words are translated here and go no further:
//! `spam`/`ham` (as in the SMS Spam Collection) become `junk`/`fine`.
//! A malformed line stops loading with its line number and what is wrong,
//! unless the caller asks to skip bad lines, in which case they are counted.

use std::fmt;
use std::path::{Path, PathBuf};

use anyhow::{Context, bail};
use chaffgate_mail::{MailLimits, MessageInput};
use chaffgate_text::Message;

/// One message with the label a person gave it.
#[derive(Debug, Clone)]
pub struct Labelled {
    pub message: Message,
    pub is_junk: bool,
    /// When the message arrived (a JSONL line's `at`), in milliseconds
    /// since the Unix epoch.
    #[cfg_attr(
        not(test),
        expect(dead_code, reason = "kept for replaying a corpus on its own clock")
    )]
    pub at_unix_ms: Option<i64>,
}

/// What a loaded corpus holds, and what was skipped on the way.
#[derive(Debug)]
pub struct Corpus {
    pub items: Vec<Labelled>,
    pub skipped: Vec<LineProblem>,
}

impl Corpus {
    pub fn junk_count(&self) -> usize {
        self.items.iter().filter(|item| item.is_junk).count()
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum CorpusFormat {
    /// One JSON object per line: message fields plus `label`.
    Jsonl,
    /// `LABEL<TAB>TEXT` per line; LABEL is junk/fine or spam/ham.
    Tsv,
}

/// A line that could not be read, with its 1-based number.
#[derive(Debug, Clone)]
pub struct LineProblem {
    pub line: usize,
    pub what: String,
}

impl fmt::Display for LineProblem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let (line, what) = (self.line, &self.what);
        write!(f, "line {line}: {what}")
    }
}

/// Picks the format from the file name (`.jsonl`/`.json` or `.tsv`/`.txt`),
/// else from the first non-empty line (`{` means JSONL).
pub fn detect_format(path: &Path, bytes: &[u8]) -> CorpusFormat {
    let extension = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    match extension.as_deref() {
        Some("jsonl" | "json" | "ndjson") => return CorpusFormat::Jsonl,
        Some("tsv" | "txt") => return CorpusFormat::Tsv,
        _ => {}
    }
    let first = bytes
        .split(|b| *b == b'\n')
        .map(|line| line.trim_ascii())
        .find(|line| !line.is_empty());
    match first {
        Some(line) if line.starts_with(b"{") => CorpusFormat::Jsonl,
        _ => CorpusFormat::Tsv,
    }
}

/// Loads a corpus file, reading raw mails within `limits`. Empty lines are
/// ignored.
pub fn load(
    path: &Path,
    format: Option<CorpusFormat>,
    skip_bad: bool,
    limits: &MailLimits,
) -> anyhow::Result<Corpus> {
    let bytes =
        std::fs::read(path).with_context(|| format!("reading corpus {}", path.display()))?;
    let format = format.unwrap_or_else(|| detect_format(path, &bytes));
    parse(&bytes, format, skip_bad, limits)
        .with_context(|| format!("reading corpus {}", path.display()))
}

/// Loads folders of raw mails (files ending in `.eml`), labelled by the
/// folder they are in, each read within `limits`. The mails are taken in
/// file-name order across both folders (name the files by date for a
/// time-ordered progressive eval).
pub fn load_mail_dirs(
    junk_dir: Option<&Path>,
    fine_dir: Option<&Path>,
    limits: &MailLimits,
) -> anyhow::Result<Corpus> {
    let mut files: Vec<(std::ffi::OsString, PathBuf, bool)> = Vec::new();
    for (dir, is_junk) in [(junk_dir, true), (fine_dir, false)] {
        let Some(dir) = dir else { continue };
        let entries =
            std::fs::read_dir(dir).with_context(|| format!("reading folder {}", dir.display()))?;
        for entry in entries {
            let entry = entry.with_context(|| format!("reading folder {}", dir.display()))?;
            let path = entry.path();
            let is_mail = path
                .extension()
                .and_then(|e| e.to_str())
                .is_some_and(|e| e.eq_ignore_ascii_case("eml"));
            if is_mail && path.is_file() {
                files.push((entry.file_name(), path, is_junk));
            }
        }
    }
    files.sort();
    let mut items = Vec::with_capacity(files.len());
    for (_, path, is_junk) in files {
        let raw =
            std::fs::read(&path).with_context(|| format!("reading mail {}", path.display()))?;
        let parsed = chaffgate_mail::parse_mail(&raw, limits);
        items.push(Labelled {
            message: parsed.message,
            is_junk,
            at_unix_ms: None,
        });
    }
    if items.is_empty() {
        bail!("no .eml files found in the given folders");
    }
    Ok(Corpus {
        items,
        skipped: Vec::new(),
    })
}

/// Parses corpus bytes; see [`load`].
pub fn parse(
    bytes: &[u8],
    format: CorpusFormat,
    skip_bad: bool,
    limits: &MailLimits,
) -> anyhow::Result<Corpus> {
    let mut items = Vec::new();
    let mut skipped = Vec::new();
    for (index, raw) in bytes.split(|b| *b == b'\n').enumerate() {
        let line_number = index + 1;
        let raw = raw.strip_suffix(b"\r").unwrap_or(raw);
        if raw.trim_ascii().is_empty() {
            continue;
        }
        let parsed = match std::str::from_utf8(raw) {
            Ok(line) => match format {
                CorpusFormat::Jsonl => parse_jsonl_line(line, limits),
                CorpusFormat::Tsv => parse_tsv_line(line),
            },
            Err(err) => Err(format!("not valid UTF-8 ({err})")),
        };
        match parsed {
            Ok(item) => items.push(item),
            Err(what) => {
                let problem = LineProblem {
                    line: line_number,
                    what,
                };
                if !skip_bad {
                    bail!("{problem} (use --skip-bad to skip such lines)");
                }
                skipped.push(problem);
            }
        }
    }
    if items.is_empty() {
        bail!("no labelled messages found");
    }
    Ok(Corpus { items, skipped })
}

/// Maps a corpus label to `is_junk`.
fn parse_label(label: &str) -> Result<bool, String> {
    match label.trim().to_ascii_lowercase().as_str() {
        "junk" | "spam" => Ok(true),
        "fine" | "ham" => Ok(false),
        _ => Err(format!(
            "label {label:?} is not one of junk, fine (or spam, ham)"
        )),
    }
}

fn parse_tsv_line(line: &str) -> Result<Labelled, String> {
    let Some((label, text)) = line.split_once('\t') else {
        return Err("expected LABEL<TAB>TEXT, found no tab".to_owned());
    };
    let is_junk = parse_label(label)?;
    let message = Message {
        body: Some(text.to_owned()),
        ..Message::default()
    };
    Ok(Labelled {
        message,
        is_junk,
        at_unix_ms: None,
    })
}

fn parse_jsonl_line(line: &str, limits: &MailLimits) -> Result<Labelled, String> {
    let value: serde_json::Value =
        serde_json::from_str(line).map_err(|err| format!("not valid JSON: {err}"))?;
    let serde_json::Value::Object(mut object) = value else {
        return Err("expected a JSON object".to_owned());
    };
    let label = match object.remove("label") {
        Some(serde_json::Value::String(label)) => label,
        Some(other) => return Err(format!("label must be a string, found {other}")),
        None => return Err("missing \"label\"".to_owned()),
    };
    let is_junk = parse_label(&label)?;
    let at_unix_ms = match object.remove("at") {
        Some(serde_json::Value::String(at)) => Some(
            parse_rfc3339_ms(&at).map_err(|what| format!("at {at:?} is not RFC 3339: {what}"))?,
        ),
        Some(serde_json::Value::Null) | None => None,
        Some(other) => return Err(format!("at must be a string, found {other}")),
    };
    for bookkeeping in ["id", "week", "campaign"] {
        object.remove(bookkeeping);
    }
    let input: MessageInput = serde_json::from_value(serde_json::Value::Object(object))
        .map_err(|err| format!("not a message: {err}"))?;
    let (message, _cuts) = input.into_message(limits).map_err(|err| err.to_string())?;
    if message.is_empty() {
        return Err("the message has no subject, body, sender or meta".to_owned());
    }
    Ok(Labelled {
        message,
        is_junk,
        at_unix_ms,
    })
}

/// Reads an RFC 3339 date-time (section 5.6), such as
/// `2026-03-02T08:15:00Z` or `2026-03-02T09:15:00.250+01:00`, as
/// milliseconds since the Unix epoch. Fractions finer than a millisecond
/// are dropped.
fn parse_rfc3339_ms(text: &str) -> Result<i64, String> {
    chaffgate_report::time::parse_rfc3339(text).map_err(str::to_owned)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tsv_labels_map_to_product_words() {
        let corpus = parse(
            b"spam\tWin now\nham\thello there\r\n\nfine\tok\n",
            CorpusFormat::Tsv,
            false,
            &MailLimits::default(),
        )
        .unwrap();
        let labels: Vec<bool> = corpus.items.iter().map(|i| i.is_junk).collect();
        assert_eq!(labels, [true, false, false]);
        assert_eq!(corpus.items[1].message.body.as_deref(), Some("hello there"));
    }

    #[test]
    fn malformed_line_stops_with_its_number() {
        let err = parse(
            b"ham\tok\nno tab here\n",
            CorpusFormat::Tsv,
            false,
            &MailLimits::default(),
        )
        .unwrap_err();
        let text = format!("{err:#}");
        assert!(text.contains("line 2"), "{text}");
        assert!(text.contains("no tab"), "{text}");
    }

    #[test]
    fn skip_bad_counts_what_was_skipped() {
        let corpus = parse(
            b"ham\tok\nmaybe\tunsure\n\xff\xfe\tbytes\njunk\tbuy\n",
            CorpusFormat::Tsv,
            true,
            &MailLimits::default(),
        )
        .unwrap();
        assert_eq!(corpus.items.len(), 2);
        let lines: Vec<usize> = corpus.skipped.iter().map(|p| p.line).collect();
        assert_eq!(lines, [2, 3]);
        assert!(corpus.skipped[0].what.contains("\"maybe\""));
        assert!(corpus.skipped[1].what.contains("UTF-8"));
    }

    #[test]
    fn jsonl_reads_message_fields_and_label() {
        let text = br#"{"subject":"Order 12","body":"Where is it?","sender":"a@shop.example.org","meta":{"vip":true},"label":"fine"}
{"body":"cheap watches","label":"junk"}"#;
        let corpus = parse(text, CorpusFormat::Jsonl, false, &MailLimits::default()).unwrap();
        assert_eq!(corpus.items.len(), 2);
        assert_eq!(corpus.items[0].message.subject.as_deref(), Some("Order 12"));
        assert!(corpus.items[1].is_junk);
    }

    #[test]
    fn jsonl_reads_raw_mail() {
        let mail =
            "From: Ines <ines@customer.example.org>\r\nSubject: Order 12\r\n\r\nWhere is it?\r\n";
        let line = serde_json::json!({ "raw": mail, "label": "fine" }).to_string();
        let corpus = parse(
            line.as_bytes(),
            CorpusFormat::Jsonl,
            false,
            &MailLimits::default(),
        )
        .unwrap();
        let message = &corpus.items[0].message;
        assert_eq!(message.subject.as_deref(), Some("Order 12"));
        assert!(message.body.as_deref().unwrap().contains("Where is it?"));
        assert!(message.meta.keys().any(|key| key.starts_with("mail.")));
    }

    #[test]
    fn jsonl_raw_mail_is_read_within_the_given_caps() {
        let mail = "Subject: Order 12\r\n\r\nWhere is my parcel of glazed bowls?\r\n";
        let line = serde_json::json!({ "raw": mail, "label": "fine" }).to_string();
        let limits = MailLimits {
            max_bytes: 30,
            ..MailLimits::default()
        };
        let corpus = parse(line.as_bytes(), CorpusFormat::Jsonl, false, &limits).unwrap();
        let message = &corpus.items[0].message;
        assert_eq!(
            message.meta.get("mail.truncated.message_too_large"),
            Some(&chaffgate_text::MetaValue::Bool(true))
        );
        assert!(!message.body.as_deref().unwrap_or("").contains("bowls"));
    }

    #[test]
    fn jsonl_problems_are_named() {
        for (line, expected) in [
            (r#"{"body":"x"}"#, "missing \"label\""),
            (r#"{"body":"x","label":"bad"}"#, "not one of"),
            (r#"{"bodyy":"x","label":"junk"}"#, "bodyy"),
            (r#"{"label":"junk"}"#, "no subject"),
            (r#"[1,2]"#, "JSON object"),
            (r#"{"body":"x""#, "not valid JSON"),
        ] {
            let err = parse(
                line.as_bytes(),
                CorpusFormat::Jsonl,
                false,
                &MailLimits::default(),
            )
            .unwrap_err();
            let text = format!("{err:#}");
            assert!(text.contains(expected), "{line}: {text}");
            assert!(text.contains("line 1"), "{line}: {text}");
        }
    }

    #[test]
    fn jsonl_keeps_arrival_time_and_reads_past_bookkeeping() {
        let text = br#"{"id":"m-1","at":"2026-03-02T00:00:00Z","week":1,"channel":"mail","campaign":"order-question","body":"Where is it?","label":"fine"}
{"body":"no clock here","label":"junk"}"#;
        let corpus = parse(text, CorpusFormat::Jsonl, false, &MailLimits::default()).unwrap();
        // 1772409600 s from GNU date: `date -u -d 2026-03-02T00:00:00Z +%s`.
        assert_eq!(corpus.items[0].at_unix_ms, Some(1_772_409_600_000));
        assert_eq!(corpus.items[0].message.channel.as_deref(), Some("mail"));
        assert!(corpus.items[0].message.meta.is_empty());
        assert_eq!(corpus.items[1].at_unix_ms, None);

        for (line, expected) in [
            (
                r#"{"body":"x","at":"yesterday","label":"fine"}"#,
                "not RFC 3339",
            ),
            (
                r#"{"body":"x","at":17,"label":"fine"}"#,
                "at must be a string",
            ),
            (r#"{"body":"x","idd":"m-1","label":"fine"}"#, "idd"),
        ] {
            let err = parse(
                line.as_bytes(),
                CorpusFormat::Jsonl,
                false,
                &MailLimits::default(),
            )
            .unwrap_err();
            let text = format!("{err:#}");
            assert!(text.contains(expected), "{line}: {text}");
        }
    }

    #[test]
    fn rfc3339_examples_read_as_epoch_milliseconds() {
        // The examples of RFC 3339 section 5.8; the expected values are
        // Python 3.11's datetime.fromisoformat(...).timestamp() * 1000.
        for (text, expected) in [
            ("1985-04-12T23:20:50.52Z", 482_196_050_520),
            ("1996-12-19T16:39:57-08:00", 851_042_397_000),
            ("1937-01-01T12:00:27.87+00:20", -1_041_337_172_130),
            // A leap day; `date -u -d 2000-02-29T12:00:00Z +%s` (GNU date).
            ("2000-02-29T12:00:00Z", 951_825_600_000),
        ] {
            assert_eq!(parse_rfc3339_ms(text), Ok(expected), "{text}");
        }
        for bad in [
            "2026-02-29T00:00:00Z",
            "2026-03-02",
            "2026-03-02T00:00:00",
            "2026-03-02T00:00:00Zjunk",
            "2026-03-02T00:00:00.Z",
            "2026-03-02T00:00:00+0100",
        ] {
            assert!(parse_rfc3339_ms(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn format_is_detected_from_name_then_content() {
        assert_eq!(
            detect_format(Path::new("a.jsonl"), b""),
            CorpusFormat::Jsonl
        );
        assert_eq!(detect_format(Path::new("a.tsv"), b"{"), CorpusFormat::Tsv);
        assert_eq!(
            detect_format(Path::new("a"), b"\n {\"x\":1}"),
            CorpusFormat::Jsonl
        );
        assert_eq!(detect_format(Path::new("a"), b"ham\tx"), CorpusFormat::Tsv);
    }
}
