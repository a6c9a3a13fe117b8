//! The daemon end to end: the real binary on a loopback port with its own
//! SQLite file.

use serde_json::{Value, json};

use crate::util::{TestServer, chaffgate, stdout};

const JUNK: &str = r#"{"subject":"Claim your prize now","body":"You were selected for a 5000 EUR reward, click http://lucky-draw.example.net to claim","sender":"promo@lucky-draw.example.net"}"#;
const FINE: &str = r#"{"subject":"Order 4411","body":"Hello, my glazed mugs have not arrived yet, could you check the tracking?","sender":"ines@customer.example.org"}"#;

fn p_junk(answer: &Value) -> f64 {
    answer["p_junk"]
        .as_f64()
        .unwrap_or_else(|| panic!("no p_junk in {answer}"))
}

fn feedback(server: &TestServer, decision_id: &str, label: &str) -> (u16, Value) {
    let body = json!({"decision_id": decision_id, "label": label, "moderator": "ana"});
    server.post("/v1/feedback", &body.to_string())
}

/// Waits until the model includes every committed feedback row.
fn wait_learnt(server: &TestServer) -> Value {
    for _ in 0..500 {
        let (status, model) = server.get("/v1/model");
        assert_eq!(status, 200, "{model}");
        if model["learner_lag_rows"] == 0 {
            return model;
        }
        std::thread::sleep(std::time::Duration::from_millis(10));
    }
    panic!("the learner never caught up");
}

#[test]
fn score_feedback_score_again_moves_p_junk_the_right_way() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &[]);
    let (status, first) = server.post("/v1/score", JUNK);
    assert_eq!(status, 200, "{first}");
    // An empty model gives sigma(0) = 1/2 (common practice, no source), and
    // the default thresholds put that in the review band.
    assert_eq!(p_junk(&first), 0.5);
    assert_eq!(first["verdict"], "review");
    assert_eq!(first["model_seq"], 0);
    let id = first["decision_id"].as_str().unwrap().to_owned();
    assert_eq!(id.len(), 26);

    let (status, answer) = feedback(&server, &id, "junk");
    assert_eq!(status, 201, "{answer}");
    assert_eq!(answer["seq"], 1);
    let (status, fine) = server.post("/v1/score", FINE);
    assert_eq!(status, 200);
    let fine_id = fine["decision_id"].as_str().unwrap().to_owned();
    assert_eq!(feedback(&server, &fine_id, "fine").0, 201);
    let model = wait_learnt(&server);
    assert_eq!(model["model_seq"], 2);
    assert_eq!(model["examples_seen"], 2);

    let (_, again) = server.post("/v1/score", JUNK);
    let (_, fine_again) = server.post("/v1/score", FINE);
    assert!(p_junk(&again) > 0.5, "{again}");
    assert!(p_junk(&fine_again) < 0.5, "{fine_again}");
    assert_eq!(again["model_seq"], 2);
    let reasons = again["reasons"].as_array().unwrap();
    assert!(!reasons.is_empty());
    assert!(reasons[0]["contribution"].as_f64().unwrap() > 0.0);

    // The decision is in the audit log, with a digest but no text by default.
    let (status, stored) = server.get(&format!("/v1/decisions/{id}"));
    assert_eq!(status, 200, "{stored}");
    assert_eq!(stored["verdict"], "review");
    assert_eq!(stored["content"], Value::Null);
    assert_eq!(stored["content_sha256"].as_str().unwrap().len(), 64);
    let (status, list) = server.get("/v1/decisions?limit=3");
    assert_eq!(status, 200);
    assert_eq!(list["decisions"].as_array().unwrap().len(), 3);
    let cursor = list["next_cursor"].as_str().unwrap();
    let (_, rest) = server.get(&format!("/v1/decisions?limit=3&cursor={cursor}"));
    assert_eq!(rest["decisions"].as_array().unwrap().len(), 1);
    assert_eq!(rest["next_cursor"], Value::Null);
    assert!(server.stop(), "clean exit");
}

#[test]
fn repeated_and_corrected_feedback_are_told_apart() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &[]);
    let (_, decision) = server.post("/v1/score", JUNK);
    let id = decision["decision_id"].as_str().unwrap();
    assert_eq!(
        feedback(&server, id, "junk"),
        (201, json!({"seq": 1, "outcome": "recorded"}))
    );
    assert_eq!(
        feedback(&server, id, "junk"),
        (200, json!({"seq": 1, "outcome": "duplicate"}))
    );
    assert_eq!(
        feedback(&server, id, "fine"),
        (
            201,
            json!({"seq": 2, "outcome": "correction", "previous_label": "junk"})
        )
    );
    let keyed = json!({"message": {"body": "cheap watches"}, "label": "junk",
                       "moderator": "bo", "idempotency_key": "k-1"})
    .to_string();
    assert_eq!(server.post("/v1/feedback", &keyed).0, 201);
    let (status, repeat) = server.post("/v1/feedback", &keyed);
    assert_eq!((status, repeat["seq"].as_i64()), (200, Some(3)));
    let reused = json!({"message": {"body": "other"}, "label": "fine",
                        "moderator": "bo", "idempotency_key": "k-1"})
    .to_string();
    let (status, err) = server.post("/v1/feedback", &reused);
    assert_eq!(
        (status, err["error"]["code"].as_str()),
        (409, Some("idempotency_key_reused"))
    );
    let model = wait_learnt(&server);
    assert_eq!(model["examples_seen"], 3);
}

#[test]
fn client_mistakes_get_4xx_with_stable_codes() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(
        dir.path(),
        &[
            ("CHAFFGATE_SERVER_MAX_BODY_BYTES", "4096"),
            ("CHAFFGATE_SERVER_MAX_MESSAGE_BYTES", "1000"),
            ("CHAFFGATE_SERVER_MAX_BATCH", "2"),
        ],
    );
    let long_body = json!({"body": "x".repeat(2000)}).to_string();
    let huge = json!({"body": "x".repeat(10_000)}).to_string();
    let cases: Vec<(&str, String, u16, &str)> = vec![
        ("/v1/score", "not json".into(), 400, "invalid_json"),
        ("/v1/score", r#"{"bdy":"x"}"#.into(), 400, "invalid_json"),
        ("/v1/score", r#"{"body":5}"#.into(), 400, "invalid_json"),
        ("/v1/score", "{}".into(), 422, "empty_message"),
        ("/v1/score", long_body, 413, "message_too_large"),
        ("/v1/score", huge, 413, "body_too_large"),
        (
            "/v1/score/batch",
            r#"{"messages":[]}"#.into(),
            422,
            "batch_size",
        ),
        (
            "/v1/score/batch",
            r#"{"messages":[{"body":"a"},{"body":"b"},{"body":"c"}]}"#.into(),
            422,
            "batch_size",
        ),
        (
            "/v1/feedback",
            r#"{"label":"junk","moderator":"a"}"#.into(),
            422,
            "invalid_feedback",
        ),
        (
            "/v1/feedback",
            r#"{"message":{"body":"x"},"label":"spam","moderator":"a"}"#.into(),
            422,
            "invalid_feedback",
        ),
        (
            "/v1/feedback",
            r#"{"message":{"body":"x"},"label":"junk"}"#.into(),
            422,
            "invalid_feedback",
        ),
        (
            "/v1/feedback",
            r#"{"decision_id":"01M8TVPWQTQDAKVCVHFS3X2X6Q","label":"junk","moderator":"a"}"#.into(),
            404,
            "unknown_decision",
        ),
        (
            "/v1/feedback",
            r#"{"decision_id":"nope","label":"junk","moderator":"a"}"#.into(),
            422,
            "invalid_feedback",
        ),
    ];
    for (path, body, status, code) in cases {
        let (got, answer) = server.post(path, &body);
        assert_eq!(got, status, "{path} {body:.60}: {answer}");
        assert_eq!(answer["error"]["code"], code, "{path} {body:.60}: {answer}");
        assert!(answer["error"]["message"].as_str().unwrap().len() > 5);
    }
    let (status, answer) = server.post_as("/v1/score", "text/plain", "{}");
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (415, Some("unsupported_media_type"))
    );
    let invalid_utf8 = server.post("/v1/score", "{\"body\":\"\\ud800\"}");
    assert_eq!(invalid_utf8.0, 400, "{}", invalid_utf8.1);
    for (path, status, code) in [
        (
            "/v1/decisions/01M8TVPWQTQDAKVCVHFS3X2X6Q",
            404,
            "unknown_decision",
        ),
        ("/v1/decisions/short", 400, "invalid_parameter"),
        ("/v1/decisions?verdict=maybe", 400, "invalid_parameter"),
        ("/v1/decisions?limit=0", 400, "invalid_parameter"),
        ("/v1/decisions?cursor=garbage", 400, "invalid_parameter"),
        ("/v1/decisions?colour=red", 400, "invalid_parameter"),
        ("/v1/decisions?since=yesterday", 400, "invalid_parameter"),
        ("/v1/nothing", 404, "not_found"),
        ("/v1/score", 405, "method_not_allowed"),
    ] {
        let (got, answer) = server.get(path);
        assert_eq!(
            (got, answer["error"]["code"].as_str()),
            (status, Some(code)),
            "{path}: {answer}"
        );
    }
    // Raw bytes that are not UTF-8 are a client mistake too.
    let (status, answer) = server.post_bytes("/v1/score", b"{\"body\":\"\xff\xfe\"}");
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (400, Some("invalid_json"))
    );
    // The server is still fine after all of that, and counted it all.
    let (status, metrics) = server.get("/metrics");
    assert_eq!(status, 200);
    let metrics = metrics.as_str().unwrap().to_owned();
    assert!(
        metrics.contains(
            "chaffgate_http_request_duration_seconds_count{route=\"/v1/score\",status=\"400\"}"
        ),
        "{metrics}"
    );
    assert!(
        metrics.contains("chaffgate_learner_lag_rows 0"),
        "{metrics}"
    );
    assert_eq!(
        server
            .post(
                "/v1/score/batch",
                r#"{"messages":[{"body":"a"},{"body":"b"}]}"#
            )
            .0,
        200
    );
    assert!(server.stop());
}

#[test]
fn feedback_after_the_window_answers_410() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &[("CHAFFGATE_AUDIT_FEEDBACK_WINDOW_SECS", "1")]);
    let (_, decision) = server.post("/v1/score", JUNK);
    let id = decision["decision_id"].as_str().unwrap();
    std::thread::sleep(std::time::Duration::from_millis(1100));
    let (status, answer) = feedback(&server, id, "junk");
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (410, Some("decision_expired"))
    );
}

#[test]
fn restart_keeps_decisions_feedback_and_the_learnt_model() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &[]);
    let (_, decision) = server.post("/v1/score", JUNK);
    let id = decision["decision_id"].as_str().unwrap().to_owned();
    assert_eq!(feedback(&server, &id, "junk").0, 201);
    wait_learnt(&server);
    let (_, before) = server.post("/v1/score", JUNK);
    assert!(server.stop());

    let server = TestServer::start_in(dir.path(), &[]);
    let (_, after) = server.post("/v1/score", JUNK);
    assert_eq!(
        p_junk(&after),
        p_junk(&before),
        "the same model after restart"
    );
    assert_eq!(after["model_seq"], 1);
    assert_eq!(server.get(&format!("/v1/decisions/{id}")).0, 200);
    assert_eq!(feedback(&server, &id, "junk").1["outcome"], "duplicate");
    assert!(server.stop());
}

#[test]
fn kill_9_after_acknowledged_feedback_then_restart_equals_rebuild() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &[]);
    let mut ids = Vec::new();
    for i in 0..12 {
        let body = if i % 3 == 0 { JUNK } else { FINE };
        let (_, decision) = server.post("/v1/score", body);
        ids.push((
            decision["decision_id"].as_str().unwrap().to_owned(),
            i % 3 == 0,
        ));
    }
    for (id, is_junk) in &ids {
        let label = if *is_junk { "junk" } else { "fine" };
        assert_eq!(feedback(&server, id, label).0, 201);
    }
    // No time to learn or checkpoint: every acknowledged row must survive.
    server.kill_hard();

    let server = TestServer::start_in(dir.path(), &[]);
    let model = wait_learnt(&server);
    assert_eq!(model["model_seq"], 12);
    assert!(server.stop(), "clean exit writes a shutdown checkpoint");

    assert_rebuild_matches(dir.path(), 12);
}

/// Runs `chaffgate rebuild` on the data folder in `dir` (the default
/// `./data`) and checks it replayed `rows` rows into a model identical to
/// the newest checkpoint.
fn assert_rebuild_matches(dir: &std::path::Path, rows: usize) {
    let out = chaffgate(dir, &["rebuild", "--out", "rebuilt.cgm"], "");
    let text = stdout(&out);
    assert!(
        out.status.success(),
        "{text}\n{}",
        crate::util::stderr(&out)
    );
    assert!(
        text.contains(&format!("rebuilt from {rows} feedback rows")),
        "{text}"
    );
    assert!(text.contains("bit for bit"), "{text}");
}

/// Adds a token with `chaffgate token add` in `dir` and returns its secret.
fn add_token(dir: &std::path::Path, role: &str, name: &str) -> String {
    let out = chaffgate(dir, &["token", "add", "--role", role, "--name", name], "");
    assert!(out.status.success(), "{}", crate::util::stderr(&out));
    let secret = stdout(&out).trim().to_owned();
    assert_eq!(secret.len(), 64, "{secret}");
    secret
}

#[test]
fn tokens_and_roles_give_distinct_401_and_403() {
    let dir = tempfile::tempdir().unwrap();
    let scorer = add_token(dir.path(), "score", "gateway");
    let moderator = add_token(dir.path(), "moderate", "ana");
    let operator = add_token(dir.path(), "operate", "ops");
    let out = chaffgate(
        dir.path(),
        &["token", "add", "--role", "score", "--name", "ana"],
        "",
    );
    assert!(!out.status.success(), "duplicate names are refused");
    let server = TestServer::start_in(dir.path(), &[]);

    let (status, answer) = server.post("/v1/score", JUNK);
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (401, Some("unauthenticated"))
    );
    let (status, _) = server.post_with("not-a-token", "/v1/score", JUNK);
    assert_eq!(status, 401);
    let (status, decision) = server.post_with(&scorer, "/v1/score", JUNK);
    assert_eq!(status, 200, "{decision}");
    let id = decision["decision_id"].as_str().unwrap();

    // A scorer may not give feedback or read decisions or the model.
    let body = json!({"decision_id": id, "label": "junk"}).to_string();
    let (status, answer) = server.post_with(&scorer, "/v1/feedback", &body);
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (403, Some("forbidden"))
    );
    assert_eq!(
        server.get_with(&scorer, &format!("/v1/decisions/{id}")).0,
        403
    );
    // A moderator may; without a moderator field the token's name is used.
    let (status, answer) = server.post_with(&moderator, "/v1/feedback", &body);
    assert_eq!(status, 201, "{answer}");
    assert_eq!(
        server
            .get_with(&moderator, &format!("/v1/decisions/{id}"))
            .0,
        200
    );
    assert_eq!(server.get_with(&moderator, "/v1/model").0, 403);
    assert_eq!(server.get_with(&moderator, "/metrics").0, 403);
    // An operator may do everything.
    assert_eq!(server.get_with(&operator, "/v1/model").0, 200);
    assert_eq!(server.post_with(&operator, "/v1/score", FINE).0, 200);
    // Health needs no token.
    assert_eq!(server.get("/healthz").0, 200);

    let out = chaffgate(dir.path(), &["token", "list"], "");
    let listing = stdout(&out);
    assert!(
        listing.contains("gateway") && listing.contains("moderate"),
        "{listing}"
    );
    assert!(
        !listing.contains(&scorer),
        "secrets are never stored or shown again"
    );
    assert!(server.stop());
}

#[test]
fn without_tokens_the_server_refuses_to_listen_beyond_loopback() {
    let dir = tempfile::tempdir().unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_chaffgate"))
        .arg("serve")
        .current_dir(dir.path())
        .env("CHAFFGATE_SERVER_LISTEN", "0.0.0.0:0")
        .output()
        .expect("running chaffgate serve");
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("server.listen") && err.contains("token add"),
        "{err}"
    );
}

#[test]
fn rollback_serves_a_checkpoint_and_unlearns_later_feedback() {
    let dir = tempfile::tempdir().unwrap();
    let env = [("CHAFFGATE_LEARNER_CHECKPOINT_EVERY_UPDATES", "2")];
    let server = TestServer::start_in(dir.path(), &env);
    let mut ids = Vec::new();
    for body in [JUNK, FINE, JUNK, JUNK] {
        let (_, decision) = server.post("/v1/score", body);
        ids.push(decision["decision_id"].as_str().unwrap().to_owned());
    }
    assert_eq!(feedback(&server, &ids[0], "junk").0, 201);
    assert_eq!(feedback(&server, &ids[1], "fine").0, 201);
    // Two learnt rows make a checkpoint (written just after learning).
    let checkpoint = (0..500)
        .find_map(|_| {
            let model = wait_learnt(&server);
            let found = model["checkpoints"]
                .as_array()
                .unwrap()
                .iter()
                .find(|c| c["last_seq"] == 2)
                .cloned();
            if found.is_none() {
                std::thread::sleep(std::time::Duration::from_millis(10));
            }
            found
        })
        .expect("a checkpoint at seq 2");
    let at_two = p_junk(&server.post("/v1/score", JUNK).1);

    // Two moderators disagree with the first: junk-looking mail is fine.
    assert_eq!(feedback(&server, &ids[2], "fine").0, 201);
    assert_eq!(feedback(&server, &ids[3], "fine").0, 201);
    wait_learnt(&server);
    let at_four = p_junk(&server.post("/v1/score", JUNK).1);
    assert!(at_four < at_two, "{at_four} < {at_two}");

    let body = json!({"checkpoint_id": checkpoint["id"]}).to_string();
    let (status, report) = server.post("/v1/model/rollback", &body);
    assert_eq!(status, 200, "{report}");
    assert_eq!(report["model_seq"], 2);
    assert_eq!(report["revoked_rows"], 2);
    let (_, again) = server.post("/v1/score", JUNK);
    assert_eq!(p_junk(&again), at_two, "the checkpoint's weights, exactly");
    assert_eq!(again["model_seq"], 2);

    let (status, answer) = server.post("/v1/model/rollback", r#"{"checkpoint_id": 999}"#);
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (404, Some("unknown_checkpoint"))
    );

    // New feedback after the rollback is learnt on top of it, and the model
    // is still what the log minus revoked rows gives.
    let (_, decision) = server.post("/v1/score", FINE);
    let id = decision["decision_id"].as_str().unwrap();
    assert_eq!(feedback(&server, id, "fine").1["seq"], 5);
    wait_learnt_to(&server, 5);
    assert!(server.stop());
    assert_rebuild_matches(dir.path(), 3);
}

/// Waits until the model includes feedback up to `seq`.
fn wait_learnt_to(server: &TestServer, seq: i64) {
    for _ in 0..500 {
        if server.get("/v1/model").1["model_seq"] == seq {
            return;
        }
        std::thread::sleep(std::time::Duration::from_millis(10));
    }
    panic!("the model never reached seq {seq}");
}

#[test]
fn raw_mail_is_scored_and_learnt_like_any_message() {
    let dir = tempfile::tempdir().unwrap();
    // Enough reasons to list every feature: which ones lead depends on the
    // server's random hash key.
    let server = TestServer::start_in(dir.path(), &[("CHAFFGATE_SERVER_REASONS", "100")]);
    let mail = "From: Prize Desk <draw@lucky-draw.example.net>\r\n\
                Reply-To: claims@elsewhere.example.org\r\n\
                Subject: =?UTF-8?Q?Claim_your_prize_now?=\r\n\
                MIME-Version: 1.0\r\n\
                Content-Type: text/html; charset=utf-8\r\n\
                \r\n\
                <p>You won 5000 EUR. <a href=\"http://lucky-draw.example.net/claim\">www.coop-shop.example.com</a></p>\r\n";
    let body = json!({ "raw": mail, "channel": "mail" }).to_string();
    let (status, decision) = server.post("/v1/score", &body);
    assert_eq!(status, 200, "{decision}");
    let id = decision["decision_id"].as_str().unwrap().to_owned();
    assert_eq!(feedback(&server, &id, "junk").0, 201);
    wait_learnt(&server);
    let (_, again) = server.post("/v1/score", &body);
    assert!(p_junk(&again) > 0.5, "{again}");
    let features: Vec<&str> = again["reasons"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["feature"].as_str().unwrap())
        .collect();
    // The header facts reach the model as meta features.
    assert!(features.iter().any(|f| f.contains("mail.")), "{features:?}");

    let encoded = json!({ "raw_b64": "not base64!" }).to_string();
    let (status, answer) = server.post("/v1/score", &encoded);
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (422, Some("invalid_message"))
    );
    let both = json!({ "raw": mail, "raw_b64": "AAAA" }).to_string();
    assert_eq!(server.post("/v1/score", &both).0, 422);

    // Inline feedback takes a raw mail too, parsed the same way.
    let before = p_junk(&server.post("/v1/score", &body).1);
    let inline = json!({ "message": { "raw": mail }, "label": "junk", "moderator": "ana" });
    let (status, answer) = server.post("/v1/feedback", &inline.to_string());
    assert_eq!(status, 201, "{answer}");
    wait_learnt(&server);
    assert!(p_junk(&server.post("/v1/score", &body).1) > before);
    let bad = json!({ "message": { "raw_b64": "%%" }, "label": "junk", "moderator": "ana" });
    assert_eq!(server.post("/v1/feedback", &bad.to_string()).0, 422);
}

#[test]
fn client_time_is_refused_by_default_and_recorded_when_allowed() {
    let body =
        r#"{"subject": "Glaze colours for the spring mugs", "received_at_ms": 1772409600000}"#;
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &[]);
    let (status, answer) = server.post("/v1/score", body);
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (400, Some("invalid_parameter"))
    );
    server.stop();

    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(
        dir.path(),
        &[("CHAFFGATE_AUDIT_ACCEPT_CLIENT_TIME", "true")],
    );
    let (status, answer) = server.post("/v1/score", body);
    assert_eq!(status, 200, "{answer}");
    let id = answer["decision_id"].as_str().unwrap();
    let (_, row) = server.get(&format!("/v1/decisions/{id}"));
    // 2026-03-02T00:00:00Z, the time the request gave.
    assert_eq!(row["created_at_ms"], 1_772_409_600_000_i64);
    // The decision list finds it by that time, in RFC 3339 or in ms.
    let listed = |query: &str| {
        let (status, page) = server.get(&format!("/v1/decisions?{query}"));
        assert_eq!(status, 200, "{page}");
        page["decisions"].as_array().unwrap().len()
    };
    assert_eq!(
        listed("since=2026-03-01T00:00:00Z&until=2026-03-03T00:00:00Z"),
        1
    );
    assert_eq!(listed("since=1772409600000&until=1772409600001"), 1);
    assert_eq!(listed("since=2026-03-02T00:00:00.001Z"), 0);
    assert_eq!(listed("until=2026-03-02T01:00:00%2B01:00"), 0);
    // The feedback window runs from when the service saw the message, so
    // feedback on an old message is still accepted.
    let (status, _) = feedback(&server, id, "fine");
    assert_eq!(status, 201);
    let (status, answer) = server.post("/v1/score", r#"{"subject": "x", "received_at_ms": -5}"#);
    assert_eq!(
        (status, answer["error"]["code"].as_str()),
        (400, Some("invalid_parameter"))
    );
}

#[test]
fn configured_mail_caps_apply_to_raw_mail_in_score_requests() {
    let dir = tempfile::tempdir().unwrap();
    let server = TestServer::start_in(dir.path(), &[("CHAFFGATE_MAIL_MAX_BYTES", "80")]);
    let mail = "From: Shop <shop@coop-shop.example.com>\r\n\
                Subject: Your glazed bowls have shipped\r\n\
                \r\n\
                They left the studio this morning.\r\n";
    let body = json!({ "raw": mail }).to_string();
    let (status, decision) = server.post("/v1/score", &body);
    assert_eq!(status, 200, "{decision}");
    assert_eq!(
        decision["mail_truncated"],
        json!(["message_too_large"]),
        "{decision}"
    );
}
