//! Drift reports end to end: messages streamed through the real daemon,
//! then `GET /v1/reports/drift` and `chaffgate drift --db` on its database.
//!
//! The scenario is invented: the contact mailbox of a craft co-operative's
//! small online shop. Customers write about orders, glazes and workshops;
//! known junk sells prizes, rankings and coins. Halfway through, a new kind
//! of junk appears: fake parcel notices written in the shop's own words
//! (order, delivery, tracking), which the model judges fine. All domains
//! are reserved `example.*` names.
//!
//! Decisions get the server's own time, so the windows are a few seconds:
//! the first half is the baseline, a pause, then the second half is the
//! current window, and `at` is just after it. Feature tallies count every
//! message in buckets of one second, so that each half's tallies fall in
//! its own window.

use std::time::{Duration, SystemTime, UNIX_EPOCH};

use serde_json::{Value, json};

use crate::util::{TestServer, chaffgate, json_ok, stderr};

const ITEMS: [&str; 6] = [
    "glazed mug",
    "sea-green bowl",
    "linen apron",
    "wool scarf",
    "oak spoon",
    "tea pot",
];
const NAMES: [&str; 6] = ["Ines", "Marta", "Olu", "Kim", "Tomas", "Ana"];

/// A customer's message: fine.
fn customer(n: usize) -> Value {
    let item = ITEMS[n % ITEMS.len()];
    let name = NAMES[n / 3 % NAMES.len()];
    let order = 4000 + n;
    let (subject, body) = match n % 4 {
        0 => (
            format!("Where is my order {order}?"),
            format!(
                "Hello, I ordered a {item} last week and the tracking page has not changed since Monday. Could you check? Thanks, {name}"
            ),
        ),
        1 => (
            format!("Return of a cracked {item}"),
            format!(
                "The {item} arrived with a crack along the rim. Can I get a replacement or a refund? Best, {name}"
            ),
        ),
        2 => (
            "Workshop booking".to_owned(),
            format!(
                "Can I book two places on the Saturday pottery workshop? I would also like to buy a {item} there. {name}"
            ),
        ),
        _ => (
            format!("Question about the {item}"),
            format!(
                "Do you still make the {item} in the sea-green glaze? I would like a set of four for my sister's wedding. {name}"
            ),
        ),
    };
    json!({"subject": subject, "body": body, "sender": format!("{}@customer.example.org", name.to_lowercase())})
}

/// Junk the model learns in the warm-up.
fn known_junk(n: usize) -> Value {
    let (subject, body, sender) = match n % 4 {
        0 => (
            "Claim your prize now!!!",
            format!(
                "Congratulations! Your email was selected for a {} EUR reward. Click http://lucky-draw.example.net/{n} to claim before midnight.",
                1000 + n
            ),
            "promo@lucky-draw.example.net",
        ),
        1 => (
            "Top ranking for your shop",
            format!(
                "We guarantee first page ranking for your shop in {} days. Cheap SEO offer, reply now for the price list.",
                5 + n % 9
            ),
            "seo@rank-boost.example.net",
        ),
        2 => (
            "Double your crypto in 7 days",
            format!(
                "Send any amount of coins to wallet {n} and receive double back. Limited giveaway, act now http://coin-double.example.net"
            ),
            "giveaway@coin-double.example.net",
        ),
        _ => (
            "URGENT: verify your seller account",
            format!(
                "Your seller account will be suspended in 24 hours. Verify your payment details now at http://account-check.example.net/login?u={n}"
            ),
            "security@account-check.example.net",
        ),
    };
    json!({"subject": subject, "body": body, "sender": sender})
}

/// The new junk: a fake parcel notice in the shop's own words.
fn parcel_notice(n: usize) -> Value {
    let item = ITEMS[n % ITEMS.len()];
    let order = 4000 + n;
    json!({
        "subject": format!("Your order {order}: delivery on hold"),
        "body": format!("Hello, your order of a {item} could not be delivered on Monday. The tracking page shows a customs fee of 1.{n:02} EUR. Please pay it at http://parcel-desk.example.com/{order} so we can deliver your parcel. Thanks"),
        "sender": "tracking@parcel-desk.example.com",
    })
}

/// Settings for the streams: every message tallied, one-second tally
/// buckets written every second.
pub(crate) const TALLY_ENV: [(&str, &str); 3] = [
    ("CHAFFGATE_TALLY_SAMPLE_EVERY", "1"),
    ("CHAFFGATE_TALLY_FLUSH_EVERY_SECS", "1"),
    ("CHAFFGATE_TALLY_BUCKET_SECS", "1"),
];

/// POST as `token`, or without one in open mode.
fn post(server: &TestServer, token: Option<&str>, path: &str, body: &str) -> (u16, Value) {
    match token {
        Some(token) => server.post_with(token, path, body),
        None => server.post(path, body),
    }
}

/// GET as `token`, or without one in open mode.
fn get(server: &TestServer, token: Option<&str>, path: &str) -> (u16, Value) {
    match token {
        Some(token) => server.get_with(token, path),
        None => server.get(path),
    }
}

fn now_ms() -> i64 {
    let since = SystemTime::now().duration_since(UNIX_EPOCH).unwrap();
    i64::try_from(since.as_millis()).unwrap()
}

/// Waits until the model includes every committed feedback row.
fn wait_learnt(server: &TestServer, token: Option<&str>) {
    for _ in 0..1000 {
        let (status, model) = get(server, token, "/v1/model");
        assert_eq!(status, 200, "{model}");
        if model["learner_lag_rows"] == 0 {
            return;
        }
        std::thread::sleep(Duration::from_millis(10));
    }
    panic!("the learner never caught up");
}

/// Teaches the model the shop's usual mail with inline feedback (no
/// decisions, so the windows hold only the two halves).
fn warm_up(server: &TestServer, token: Option<&str>) {
    for n in 0..240 {
        let (message, label) = if n % 3 == 0 {
            (known_junk(n), "junk")
        } else {
            (customer(n), "fine")
        };
        let body = json!({"message": message, "label": label, "moderator": "ana"});
        let (status, answer) = post(server, token, "/v1/feedback", &body.to_string());
        assert_eq!(status, 201, "{answer}");
    }
    wait_learnt(server, token);
}

/// Scores every message, then gives each decision its true label.
fn stream(server: &TestServer, token: Option<&str>, messages: &[(Value, &str)]) {
    let mut decided = Vec::new();
    for (message, label) in messages {
        let (status, answer) = post(server, token, "/v1/score", &message.to_string());
        assert_eq!(status, 200, "{answer}");
        decided.push((answer["decision_id"].as_str().unwrap().to_owned(), *label));
    }
    for (n, (id, label)) in decided.iter().enumerate() {
        let moderator = ["ana", "ben"][n % 2];
        let body = json!({"decision_id": id, "label": label, "moderator": moderator});
        let (status, answer) = post(server, token, "/v1/feedback", &body.to_string());
        assert_eq!(status, 201, "{answer}");
    }
}

/// The first half: 70% customers, 30% known junk.
pub(crate) fn usual_mail(from: usize, count: usize) -> Vec<(Value, &'static str)> {
    (from..from + count)
        .map(|n| {
            if n % 10 < 3 {
                (known_junk(n), "junk")
            } else {
                (customer(n), "fine")
            }
        })
        .collect()
}

/// The second half with the new junk: 40% customers, 20% known junk, 40%
/// parcel notices.
pub(crate) fn mail_with_parcel_notices(from: usize, count: usize) -> Vec<(Value, &'static str)> {
    (from..from + count)
        .map(|n| match n % 5 {
            0 | 1 => (customer(n), "fine"),
            2 => (known_junk(n), "junk"),
            _ => (parcel_notice(n), "junk"),
        })
        .collect()
}

/// Runs the two halves (as `token`, or in open mode) and returns the
/// report's query string: windows of whole seconds that split exactly
/// between the halves, ending just after the second. Start the server with
/// [`TALLY_ENV`] for the feature tallies to split the same way.
pub(crate) fn two_halves(
    server: &TestServer,
    token: Option<&str>,
    second: &[(Value, &str)],
) -> String {
    warm_up(server, token);
    stream(server, token, &usual_mail(1000, 300));
    wait_learnt(server, token);
    // The pause that separates the windows: longer than the one second the
    // current window's length is rounded up by. The second half starts on
    // a whole second, so that its first tally bucket does not start
    // before the current window.
    std::thread::sleep(Duration::from_millis(1500));
    let second_start = (now_ms() / 1000 + 1) * 1000;
    while now_ms() < second_start {
        std::thread::sleep(Duration::from_millis(5));
    }
    stream(server, token, second);
    let at = now_ms() + 1;
    let current_secs = (at - second_start + 999) / 1000;
    // Two flush periods: the last tallies reach the database.
    std::thread::sleep(Duration::from_millis(2500));
    format!("baseline=1h&current={current_secs}s&at={at}")
}

fn report(server: &TestServer, query: &str) -> Value {
    let (status, report) = server.get(&format!("/v1/reports/drift?{query}"));
    assert_eq!(status, 200, "{report}");
    report
}

fn rate(window: &Value, key: &str) -> f64 {
    window["overturns"][key]
        .as_f64()
        .unwrap_or_else(|| panic!("no {key} in {window}"))
}

#[test]
fn new_junk_the_model_misses_shows_as_drift_with_an_alarm() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &TALLY_ENV);
    let query = two_halves(&server, None, &mail_with_parcel_notices(2000, 300));
    let report = report(&server, &query);
    let overall = &report["overall"];
    let psi = overall["scores"]["psi"].as_f64().unwrap();
    // Above the moderate band (0.25 and more is "large"; common practice,
    // no single source).
    assert!(psi >= 0.25, "psi {psi}");
    assert_eq!(overall["scores"]["psi_band"], "large");
    assert_eq!(overall["scores"]["baseline"]["decisions"], 300);
    assert_eq!(overall["scores"]["current"]["decisions"], 300);
    let quality = &overall["quality"];
    let before = rate(&quality["baseline"], "missed_junk_rate");
    let after = rate(&quality["current"], "missed_junk_rate");
    assert!(after >= before + 0.2, "missed junk {before} -> {after}");
    assert_eq!(quality["current"]["labelled"], 300);
    let alarms = report["alarms"].as_array().unwrap();
    assert!(
        alarms
            .iter()
            .any(|alarm| alarm["detector"] == "feedback_errors"
                && alarm["window"] == "current"
                && alarm["channel"].is_null()),
        "{alarms:?}"
    );
    // Every message is tallied: 300 a window. Two in five of the current
    // window are parcel notices, whose words the baseline never had: a
    // rise in share of 120/300 = 0.4, the largest of all, shared by many
    // of the notices' words, pairs and n-grams (listed by name on a tie).
    // Space-Saving counts only ever run high, so at least that.
    let features = &report["features"];
    assert_eq!(features["baseline_sampled_messages"], 300, "{features}");
    assert_eq!(features["current_sampled_messages"], 300, "{features}");
    let rising = features["rising"].as_array().unwrap();
    assert_eq!(rising.len(), 20, "{rising:?}");
    for change in rising {
        assert!(change["change"].as_f64().unwrap() >= 0.4 - 1e-9, "{change}");
    }
    for name in ["body pair \"customs fee\"", "body pair \"can deliver\""] {
        let rise = rising
            .iter()
            .find(|change| change["feature"] == name)
            .unwrap_or_else(|| panic!("{name} is not rising: {rising:?}"));
        assert_eq!(rise["baseline_messages"], 0, "{rise}");
        assert!(rise["current_messages"].as_u64().unwrap() >= 120, "{rise}");
    }
    assert_eq!(report["activity"]["current"]["feedback"], 300);

    // The command on the same database, with the same windows, says the
    // same. The server may keep running: reads do not block its writer.
    let database = dir.path().join("data").join("chaffgate.db");
    let mut args = vec![
        "drift".to_owned(),
        "--db".to_owned(),
        database.display().to_string(),
        "--json".to_owned(),
    ];
    for pair in query.split('&') {
        let (key, value) = pair.split_once('=').unwrap();
        args.push(format!("--{key}"));
        args.push(value.to_owned());
    }
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let from_cli = json_ok(&chaffgate(dir.path(), &args, ""));
    assert_eq!(from_cli["overall"]["scores"], overall["scores"]);
    assert_eq!(from_cli["overall"]["quality"], overall["quality"]);
    assert_eq!(from_cli["alarms"], report["alarms"]);

    let text_args: Vec<&str> = args.iter().copied().filter(|a| *a != "--json").collect();
    let text = chaffgate(dir.path(), &text_args, "");
    assert!(text.status.success(), "{}", stderr(&text));
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(
        text.contains("(large)")
            && text.contains("feedback_errors")
            && text.contains("body pair \"customs fee\""),
        "{text}"
    );
    assert!(server.stop(), "clean exit");
}

#[test]
fn a_stationary_stream_shows_no_drift() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &TALLY_ENV);
    let query = two_halves(&server, None, &usual_mail(2000, 300));
    let report = report(&server, &query);
    let overall = &report["overall"];
    let psi = overall["scores"]["psi"].as_f64().unwrap();
    assert!(psi < 0.25, "psi {psi}");
    let quality = &overall["quality"];
    let before = rate(&quality["baseline"], "missed_junk_rate");
    let after = rate(&quality["current"], "missed_junk_rate");
    assert!(after < before + 0.05, "missed junk {before} -> {after}");
    assert_eq!(report["alarms"], json!([]), "{}", report["alarms"]);
    assert!(server.stop(), "clean exit");
}

#[test]
fn bad_parameters_answer_400_and_the_route_needs_operate() {
    let dir = tempfile::tempdir().unwrap();
    let moderator = token(dir.path(), "moderate", "ana");
    let operator = token(dir.path(), "operate", "ops");
    let server = TestServer::start_in(dir.path(), &[]);
    for query in [
        "baseline=7",
        "current=0h",
        "current=1.5h",
        "at=yesterday",
        "at=2026-02-30T00:00:00Z",
        "channel=",
        "colour=blue",
    ] {
        let (status, answer) = server.get_with(&operator, &format!("/v1/reports/drift?{query}"));
        assert_eq!(status, 400, "{query}: {answer}");
        assert_eq!(answer["error"]["code"], "invalid_parameter", "{query}");
        assert!(answer["error"]["message"].is_string(), "{query}: {answer}");
    }
    let (status, answer) = server.get_with(&moderator, "/v1/reports/drift");
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (403, Some("forbidden"))
    );
    let (status, report) = server.get_with(
        &operator,
        "/v1/reports/drift?baseline=90m&current=3600s&channel=mail&at=2026-12-01T00:00:00Z",
    );
    assert_eq!(status, 200, "{report}");
    assert_eq!(report["at"], "2026-12-01T00:00:00.000Z");
    assert_eq!(report["windows"]["current"]["length"], "1h");
    assert_eq!(report["windows"]["baseline"]["length"], "90m");
    assert_eq!(report["channel"], "mail");
    assert!(server.stop(), "clean exit");

    // The command's own mistakes.
    let out = chaffgate(dir.path(), &["drift", "--current", "7 days"], "");
    assert!(!out.status.success());
    assert!(
        stderr(&out).contains("7d, 24h, 90m, 3600s"),
        "{}",
        stderr(&out)
    );
    let out = chaffgate(dir.path(), &["drift", "--db", "nowhere.db"], "");
    assert!(!out.status.success());
    assert!(
        stderr(&out).contains("no database at nowhere.db"),
        "{}",
        stderr(&out)
    );
}

fn token(dir: &std::path::Path, role: &str, name: &str) -> String {
    let out = chaffgate(dir, &["token", "add", "--role", role, "--name", name], "");
    assert!(out.status.success(), "{}", stderr(&out));
    String::from_utf8_lossy(&out.stdout).trim().to_owned()
}

/// Fills a database for the drift report benchmark in docs/benchmarks.md:
/// 1,000,000 decisions over the 8 days before 2026-12-01T00:00:00Z in
/// three channels, and 101,000 feedback rows (labels on one decision in
/// ten by five moderators, 1,000 of them after a wrong first label, 500
/// revoked). Scores are
/// invented; in the last day a tenth of the stream is a new kind of junk
/// scored 0.2 to 0.5. Run with
///
/// ```sh
/// CHAFFGATE_BENCH_DB=/tmp/drift-bench.db cargo test --release --test integration \
///     drift::fill_a_database_for_the_benchmark -- --ignored
/// ```
#[test]
#[ignore = "writes a large database; run by hand for the benchmark"]
fn fill_a_database_for_the_benchmark() {
    use chaffgate_store::{
        DecisionId, FeedbackImport, FeedbackKind, FeedbackSeq, Label, NewDecision, Store, Verdict,
    };

    const DECISIONS: i64 = 1_000_000;
    // 2026-12-01T00:00:00Z (GNU date: `date -u -d 2026-12-01 +%s`).
    const END_MS: i64 = 1_796_083_200_000;
    const SPAN_MS: i64 = 8 * 24 * 3_600_000;
    let path = std::path::PathBuf::from(
        std::env::var_os("CHAFFGATE_BENCH_DB").expect("set CHAFFGATE_BENCH_DB to the file to fill"),
    );
    assert!(!path.exists(), "{} exists; give a new file", path.display());

    // xorshift64* (Vigna, ACM TOMS 2016; constants from memory).
    let mut state: u64 = 2_026;
    let mut unit = move || {
        state ^= state >> 12;
        state ^= state << 25;
        state ^= state >> 27;
        let top = state.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11;
        #[expect(clippy::cast_precision_loss, reason = "53 bits fit an f64 exactly")]
        let value = top as f64 / (1_u64 << 53) as f64;
        value
    };

    let runtime = tokio::runtime::Runtime::new().unwrap();
    runtime.block_on(async {
        let store = Store::open(&path).await.unwrap();
        let started = std::time::Instant::now();
        let mut batch = Vec::with_capacity(20_000);
        let mut feedback = Vec::with_capacity(110_000);
        let mut labelled: i64 = 0;
        for n in 0..DECISIONS {
            let at_ms = END_MS - SPAN_MS + n * SPAN_MS / DECISIONS;
            let is_last_day = at_ms >= END_MS - 24 * 3_600_000;
            let channel = match n % 10 {
                0..=4 => "mail",
                5..=7 => "tickets",
                _ => "comments",
            };
            let draw = unit();
            let (is_junk, p_junk) = if is_last_day && draw < 0.1 {
                (true, 0.2 + 0.3 * unit())
            } else if draw < 0.35 {
                (
                    true,
                    if unit() < 0.9 {
                        0.85 + 0.15 * unit()
                    } else {
                        0.4 + 0.5 * unit()
                    },
                )
            } else {
                (
                    false,
                    if unit() < 0.95 {
                        0.2 * unit()
                    } else {
                        0.3 + 0.4 * unit()
                    },
                )
            };
            let verdict = if p_junk >= 0.9 {
                Verdict::Junk
            } else if p_junk >= 0.4 {
                Verdict::Review
            } else {
                Verdict::Fine
            };
            let id = DecisionId::new(format!("{n:026}"));
            // One decision in ten, spread over the channels (the last digit
            // picks the channel).
            if n % 10 == n / 10 % 10 {
                labelled += 1;
                let label = if is_junk { Label::Junk } else { Label::Fine };
                let moderator = ["ana", "ben", "cy", "dee", "eli"][(labelled % 5) as usize];
                let mut row = FeedbackImport {
                    created_at_ms: at_ms + 60_000,
                    decision_id: Some(id.clone()),
                    message_json: "{}".to_owned(),
                    label,
                    moderator: moderator.to_owned(),
                    kind: FeedbackKind::Label,
                    revoked_at_ms: None,
                };
                if labelled % 100 == 0 {
                    // A wrong first label, corrected a minute later.
                    feedback.push(FeedbackImport {
                        label: label.opposite(),
                        ..row.clone()
                    });
                    row.kind = FeedbackKind::Correction;
                    row.created_at_ms += 60_000;
                } else if labelled % 200 == 13 {
                    row.revoked_at_ms = Some(at_ms + 3_600_000);
                }
                feedback.push(row);
            }
            batch.push(NewDecision {
                id,
                created_at_ms: at_ms,
                channel: channel.to_owned(),
                client_ref: None,
                content_sha256: format!("{n:064x}"),
                content: None,
                p_junk,
                verdict,
                model_seq: FeedbackSeq(n / 10),
                reasons_json: "[]".to_owned(),
                latency_us: 90,
                input: None,
            });
            if batch.len() == batch.capacity() {
                store.insert_decisions(&batch).await.unwrap();
                batch.clear();
            }
        }
        store.insert_decisions(&batch).await.unwrap();
        for chunk in feedback.chunks(20_000) {
            store.insert_feedback_rows(chunk).await.unwrap();
        }
        let rows = feedback.len();
        let took = started.elapsed();
        eprintln!("{DECISIONS} decisions and {rows} feedback rows written in {took:?}");
        store.close().await;
    });
}
