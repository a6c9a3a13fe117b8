//! Feature tallies and drift alarms end to end: the real daemon scores the
//! contact mailbox of a craft co-operative's online shop, a new junk
//! campaign with invented words arrives halfway, and the tallies in the
//! database and the alarms at `/metrics` show it.
//!
//! Every message, name and domain here is invented for these tests
//! (reserved `example.*` domains).

use serde_json::{Value, json};

use chaffgate_store::{FeatureTally, Store, feature_drift};

use crate::util::{SHOP_CORPUS, TestServer};

/// Short buckets, so that the two halves of a stream land in different
/// windows within a test.
const BUCKET_MS: i64 = 2_000;
/// Messages in each half of a stream.
const HALF: usize = 150;
/// The invented words of the new campaign, as body words.
const CAMPAIGN_WORDS: [&str; 4] = ["zembrulo", "quintavex", "glimmerfax", "vorlisk"];

/// Settings for a test run: tally every message, short buckets and
/// flushes, and a p_junk detector quick enough for streams of a few
/// hundred messages (the defaults wait for several hundred decisions).
/// Measured on these streams (no outside source): the steady stream's
/// statistic peaked at 0.8 against lambda 10, and the shifted stream's
/// detector fired 34 decisions after the campaign began.
const ENV: [(&str, &str); 6] = [
    ("CHAFFGATE_TALLY_SAMPLE_EVERY", "1"),
    ("CHAFFGATE_TALLY_FLUSH_EVERY_SECS", "1"),
    ("CHAFFGATE_TALLY_BUCKET_SECS", "2"),
    ("CHAFFGATE_ALARMS_P_JUNK_DELTA", "0.05"),
    ("CHAFFGATE_ALARMS_P_JUNK_LAMBDA", "10"),
    ("CHAFFGATE_ALARMS_P_JUNK_MIN_SAMPLES", "30"),
];

const NAMES: [&str; 8] = ["Ines", "Marta", "Olu", "Kim", "Tomas", "Ana", "Ravi", "Lea"];
const ITEMS: [&str; 6] = [
    "glazed mug",
    "stoneware bowl",
    "teapot",
    "serving plate",
    "wool scarf",
    "flower vase",
];

/// A customer writing to the shop.
fn customer(i: usize) -> Value {
    let name = NAMES[i % NAMES.len()];
    let item = ITEMS[(i / 3) % ITEMS.len()];
    let order = 4400 + i;
    let (subject, body) = match i % 4 {
        0 => (
            format!("Where is my order {order}?"),
            format!(
                "Hello, I ordered a {item} last week and the tracking page has not changed. \
                 Could you check? Thanks, {name}"
            ),
        ),
        1 => (
            format!("Question about the {item}"),
            format!(
                "Hi, do you still make the {item} in sea-green? I would like two as a \
                 wedding present. Best, {name}"
            ),
        ),
        2 => (
            "Workshop booking".to_owned(),
            format!(
                "Can I book two places on the Saturday pottery workshop? My daughter is \
                 {age}. Kind regards, {name}",
                age = 9 + i % 6
            ),
        ),
        _ => (
            format!("Return of a {item}"),
            format!(
                "The {item} arrived with a crack along the rim. Can I get a replacement \
                 or a refund? {name}"
            ),
        ),
    };
    let sender = format!("{}@customer.example.org", name.to_lowercase());
    json!({"subject": subject, "body": body, "sender": sender, "channel": "contact"})
}

/// Junk of the kinds the shop already knows.
fn known_junk(i: usize) -> Value {
    let (subject, body, sender) = match i % 3 {
        0 => (
            "Claim your prize now!!!".to_owned(),
            format!(
                "Congratulations! Your email was selected for a {amount} EUR reward. Click \
                 http://lucky-draw.example.net to claim before midnight.",
                amount = 1000 + 500 * (i % 9)
            ),
            "promo@lucky-draw.example.net",
        ),
        1 => (
            "Invoice overdue - pay today".to_owned(),
            format!(
                "Invoice {number} is overdue. Pay the outstanding amount today via \
                 http://billing-desk.example.net/pay or legal action follows.",
                number = 99_000 + i
            ),
            "billing@billing-desk.example.net",
        ),
        _ => (
            "Top ranking for your shop".to_owned(),
            "We guarantee first page ranking for your shop in 10 days. Cheap offer, reply \
             now for the price list."
                .to_owned(),
            "seo@rank-boost.example.net",
        ),
    };
    json!({"subject": subject, "body": body, "sender": sender, "channel": "contact"})
}

/// The new campaign: nothing the model has learnt, words never seen.
fn campaign(i: usize) -> Value {
    json!({
        "subject": format!("Glimmerfax vorlisk bundle {n}", n = 300 + i),
        "body": format!(
            "Dear shop owner, the zembrulo quintavex glimmerfax bundle is ready for your \
             vorlisk shelf. Reply today to claim voucher ZQ{i:04} at \
             http://vorlisk-deals.example.net/zembrulo"
        ),
        "sender": "offers@vorlisk-deals.example.net",
        "channel": "contact",
    })
}

/// The usual mix: one message in seven is known junk.
fn usual(i: usize) -> Value {
    if i % 7 == 3 {
        known_junk(i)
    } else {
        customer(i)
    }
}

/// Teaches the model the shop's usual mail with inline feedback.
fn train(server: &TestServer) {
    let mut examples: Vec<(Value, &str)> = SHOP_CORPUS
        .lines()
        .map(|line| {
            let mut message: Value = serde_json::from_str(line).unwrap();
            let label = if message["label"] == "junk" {
                "junk"
            } else {
                "fine"
            };
            message.as_object_mut().unwrap().remove("label");
            (message, label)
        })
        .collect();
    // Numbers far from the stream's, so no training message is scored.
    examples.extend((1000..1030).map(|i| (customer(i), "fine")));
    examples.extend((1000..1012).map(|i| (known_junk(i), "junk")));
    for (message, label) in examples {
        let body = json!({"message": message, "label": label, "moderator": "ana"});
        let (status, answer) = server.post("/v1/feedback", &body.to_string());
        assert_eq!(status, 201, "{answer}");
    }
    for _ in 0..500 {
        if server.get("/v1/model").1["learner_lag_rows"] == 0 {
            return;
        }
        std::thread::sleep(std::time::Duration::from_millis(10));
    }
    panic!("the learner never caught up");
}

fn score_all(server: &TestServer, messages: impl IntoIterator<Item = Value>) -> Vec<f64> {
    messages
        .into_iter()
        .map(|message| {
            let (status, answer) = server.post("/v1/score", &message.to_string());
            assert_eq!(status, 200, "{answer}");
            answer["p_junk"].as_f64().unwrap()
        })
        .collect()
}

/// The value of one sample line of the `/metrics` page.
fn metric(server: &TestServer, series: &str) -> f64 {
    let (status, page) = server.get("/metrics");
    assert_eq!(status, 200);
    let page = page.as_str().expect("/metrics is text");
    let prefix = format!("{series} ");
    page.lines()
        .find_map(|line| line.strip_prefix(&prefix))
        .unwrap_or_else(|| panic!("{series} not in /metrics:\n{page}"))
        .parse()
        .unwrap()
}

fn now_ms() -> i64 {
    let since = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .unwrap();
    i64::try_from(since.as_millis()).unwrap()
}

/// Sleeps until the next bucket starts and returns its start.
fn wait_for_next_bucket() -> i64 {
    let next = (now_ms() / BUCKET_MS + 1) * BUCKET_MS;
    while now_ms() < next + 20 {
        std::thread::sleep(std::time::Duration::from_millis(10));
    }
    next
}

/// The tallies of the `contact` channel in `[from_ms, to_ms)`, read from
/// the server's database file.
fn read_tally(dir: &std::path::Path, from_ms: i64, to_ms: i64) -> FeatureTally {
    let runtime = tokio::runtime::Runtime::new().unwrap();
    runtime.block_on(async {
        let store = Store::open(&dir.join("data/chaffgate.db")).await.unwrap();
        let tally = store
            .feature_tally(Some("contact"), from_ms, to_ms)
            .await
            .unwrap();
        store.close().await;
        tally
    })
}

fn messages_with(tally: &FeatureTally, feature: &str) -> u64 {
    tally
        .features
        .iter()
        .find(|count| count.feature == feature)
        .map_or(0, |count| count.messages)
}

#[test]
fn a_new_campaign_rises_in_the_tallies_and_raises_the_p_junk_alarm() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &ENV);
    train(&server);
    let started_ms = now_ms();
    let before = score_all(&server, (0..HALF).map(usual));
    let alarm = "chaffgate_drift_alarm{detector=\"p_junk\"}";
    assert_eq!(metric(&server, alarm), 0.0, "no alarm on the usual mix");

    let boundary_ms = wait_for_next_bucket();
    let after = score_all(
        &server,
        (0..HALF).map(|i| {
            if i % 2 == 0 {
                campaign(i)
            } else {
                usual(HALF + i)
            }
        }),
    );
    let mean = |p: &[f64]| p.iter().sum::<f64>() / p.len() as f64;
    let (mean_before, mean_after) = (mean(&before), mean(&after));
    assert!(
        mean_after > mean_before + 0.1,
        "the campaign should move p_junk: {mean_before} -> {mean_after}"
    );
    assert_eq!(metric(&server, alarm), 1.0, "{mean_before} -> {mean_after}");
    assert!(metric(&server, "chaffgate_drift_alarms_total{detector=\"p_junk\"}") >= 1.0);
    assert!(
        metric(
            &server,
            "chaffgate_drift_last_alarm_timestamp_seconds{detector=\"p_junk\"}"
        ) * 1000.0
            >= boundary_ms as f64
    );
    assert_eq!(
        metric(&server, "chaffgate_tally_sampled_total"),
        (2 * HALF) as f64
    );
    assert_eq!(
        metric(
            &server,
            "chaffgate_tally_dropped_total{reason=\"queue_full\"}"
        ),
        0.0
    );
    // A graceful stop writes the last tallies.
    assert!(server.stop(), "clean exit");

    let far = boundary_ms + 3_600_000;
    let baseline = read_tally(dir.path(), started_ms - BUCKET_MS, boundary_ms);
    let current = read_tally(dir.path(), boundary_ms, far);
    assert_eq!(baseline.sampled_messages, HALF as u64);
    assert_eq!(current.sampled_messages, HALF as u64);
    let drift = feature_drift(&baseline, &current, 200);
    // Half of the second half carries each invented word; none of the
    // first half does: a rise in share of 75/150 - 0 = 0.5, the largest
    // of all.
    for word in CAMPAIGN_WORDS {
        let name = format!("body word \"{word}\"");
        let rise = drift
            .rising
            .iter()
            .find(|change| change.feature == name)
            .unwrap_or_else(|| panic!("{name} is not rising"));
        assert_eq!((rise.baseline_messages, rise.current_messages), (0, 75));
        assert!((rise.change - 0.5).abs() < 1e-12, "{rise:?}");
    }
    assert!((drift.rising[0].change - 0.5).abs() < 1e-12);
    // The usual mail is half as frequent now.
    let ordered = drift
        .falling
        .iter()
        .find(|change| change.feature == "body word \"ordered\"")
        .expect("a customer's word falls");
    assert!(ordered.change < 0.0);
    // What moved p_junk: senders in .net were learnt as junk (every
    // known-junk sender is), those in .org as fine, and the contributions
    // come from the model that scored each message.
    let contribution = |name: &str| {
        drift
            .top_contributions
            .iter()
            .find(|c| c.feature == name)
            .unwrap_or_else(|| panic!("{name} is not among the top contributions"))
            .contribution_sum
    };
    assert!(contribution("sender tld \"net\"") > 0.0);
    assert!(contribution("sender tld \"org\"") < 0.0);

    // A restart on the same database keeps the tallies, and adds to them.
    let server = TestServer::start_in(dir.path(), &ENV);
    let kept = read_tally(dir.path(), boundary_ms, far);
    assert_eq!(kept, current);
    assert_eq!(metric(&server, alarm), 0.0, "alarm state is in memory only");
    score_all(&server, (0..10).map(|i| campaign(1000 + i)));
    assert!(server.stop(), "clean exit");
    let added = read_tally(dir.path(), boundary_ms, far);
    assert_eq!(added.sampled_messages, HALF as u64 + 10);
    assert_eq!(messages_with(&added, "body word \"zembrulo\""), 85);
    assert_eq!(
        read_tally(dir.path(), started_ms - BUCKET_MS, boundary_ms),
        baseline
    );
}

#[test]
fn a_steady_stream_raises_no_alarm() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &ENV);
    train(&server);
    score_all(&server, (0..2 * HALF).map(usual));
    for detector in ["p_junk", "feedback_error"] {
        let alarm = format!("chaffgate_drift_alarm{{detector=\"{detector}\"}}");
        assert_eq!(metric(&server, &alarm), 0.0, "{detector}");
        let total = format!("chaffgate_drift_alarms_total{{detector=\"{detector}\"}}");
        assert_eq!(metric(&server, &total), 0.0, "{detector}");
    }
    assert!(metric(&server, "chaffgate_drift_samples{detector=\"p_junk\"}") >= (2 * HALF) as f64);
    assert!(server.stop(), "clean exit");
}
