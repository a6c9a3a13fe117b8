//! The command's behaviour on good and bad input: train, score, errors.

use std::fs;

use crate::util::{SHOP_CORPUS, chaffgate, json_ok, stderr, stdout};

#[test]
fn train_then_score_ranks_junk_above_fine_and_names_reasons() {
    let dir = tempfile::tempdir().unwrap();
    fs::write(dir.path().join("shop.jsonl"), SHOP_CORPUS).unwrap();
    let out = chaffgate(
        dir.path(),
        &[
            "train",
            "--corpus",
            "shop.jsonl",
            "--out",
            "model.cgm",
            "--passes",
            "5",
        ],
        "",
    );
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(
        stdout(&out).contains("learnt 10 messages"),
        "{}",
        stdout(&out)
    );

    let junk = r#"{"subject":"Verify your account","body":"Your account will be suspended. Verify now at http://account-check.example.net/login","sender":"x@account-check.example.net"}"#;
    let fine = r#"{"subject":"My order of mugs","body":"Hello, could you check where my order of glazed mugs is? Thanks","sender":"sam@customer.example.org"}"#;
    let junk_out = json_ok(&chaffgate(
        dir.path(),
        &["score", "--model", "model.cgm", "--json"],
        junk,
    ));
    let fine_out = json_ok(&chaffgate(
        dir.path(),
        &["score", "--model", "model.cgm", "--json"],
        fine,
    ));
    let p_junk = junk_out["p_junk"].as_f64().unwrap();
    let p_fine = fine_out["p_junk"].as_f64().unwrap();
    assert!(p_junk > 0.5 && p_fine < 0.5, "junk {p_junk}, fine {p_fine}");
    assert!(p_junk > p_fine);
    let reasons = junk_out["reasons"].as_array().unwrap();
    assert!(!reasons.is_empty());
    // The reasons are readable feature names with signed contributions, and
    // the strongest pushes towards junk for a message judged junk.
    let first = &reasons[0];
    assert!(
        first["feature"]
            .as_str()
            .unwrap()
            .chars()
            .any(char::is_alphabetic)
    );
    assert!(first["contribution"].as_f64().unwrap() > 0.0, "{first}");
    let verdict = junk_out["verdict"].as_str().unwrap();
    assert!(["junk", "review"].contains(&verdict), "{verdict}");

    // The plain-text form says the same.
    let text = stdout(&chaffgate(
        dir.path(),
        &["score", "--model", "model.cgm"],
        fine,
    ));
    assert!(
        text.contains("p_junk") && text.contains("verdict  fine"),
        "{text}"
    );
}

#[test]
fn malformed_corpus_line_stops_with_line_number_or_is_skipped() {
    let dir = tempfile::tempdir().unwrap();
    fs::write(
        dir.path().join("c.tsv"),
        "ham\thello\nspam\tbuy now\nperhaps\tx\n",
    )
    .unwrap();
    let out = chaffgate(dir.path(), &["eval", "--corpus", "c.tsv"], "");
    assert_eq!(out.status.code(), Some(1));
    let err = stderr(&out);
    assert!(err.contains("line 3") && err.contains("perhaps"), "{err}");

    let out = chaffgate(
        dir.path(),
        &["eval", "--corpus", "c.tsv", "--skip-bad", "--json"],
        "",
    );
    let report = json_ok(&out);
    assert_eq!(report["judged"], 2);
    assert!(stderr(&out).contains("skipped 1"), "{}", stderr(&out));
}

#[test]
fn corrupted_model_file_is_refused_clearly() {
    let dir = tempfile::tempdir().unwrap();
    fs::write(dir.path().join("shop.jsonl"), SHOP_CORPUS).unwrap();
    let out = chaffgate(
        dir.path(),
        &["train", "--corpus", "shop.jsonl", "--out", "m.cgm"],
        "",
    );
    assert!(out.status.success(), "{}", stderr(&out));
    let path = dir.path().join("m.cgm");
    let mut bytes = fs::read(&path).unwrap();
    let middle = bytes.len() / 2;
    bytes[middle] ^= 0x40;
    fs::write(&path, &bytes).unwrap();
    let out = chaffgate(
        dir.path(),
        &["score", "--model", "m.cgm"],
        r#"{"body":"hi"}"#,
    );
    assert_eq!(out.status.code(), Some(1));
    assert!(stderr(&out).contains("m.cgm"), "{}", stderr(&out));

    fs::write(&path, &bytes[..bytes.len() / 3]).unwrap();
    let out = chaffgate(
        dir.path(),
        &["score", "--model", "m.cgm"],
        r#"{"body":"hi"}"#,
    );
    assert_eq!(out.status.code(), Some(1));
}

#[test]
fn bad_input_gets_clear_errors_not_panics() {
    let dir = tempfile::tempdir().unwrap();
    fs::write(dir.path().join("shop.jsonl"), SHOP_CORPUS).unwrap();
    let out = chaffgate(
        dir.path(),
        &["train", "--corpus", "shop.jsonl", "--out", "m.cgm"],
        "",
    );
    assert!(out.status.success());
    for (input, expected) in [
        ("{}", "nothing to score"),
        ("not json", "JSON"),
        (r#"{"bdy":"x"}"#, "bdy"),
    ] {
        let out = chaffgate(dir.path(), &["score", "--model", "m.cgm"], input);
        assert_eq!(out.status.code(), Some(1), "{input}");
        let err = stderr(&out);
        assert!(err.contains(expected), "{input}: {err}");
        assert!(!err.contains("panicked"), "{err}");
    }
    let out = chaffgate(
        dir.path(),
        &["eval", "--corpus", "shop.jsonl", "--holdout", "1.5"],
        "",
    );
    assert_eq!(out.status.code(), Some(1));
    assert!(stderr(&out).contains("--holdout"));
    let out = chaffgate(dir.path(), &["eval", "--corpus", "missing.tsv"], "");
    assert!(stderr(&out).contains("missing.tsv"));
}

#[test]
fn bad_config_value_names_key_value_and_allowed_range() {
    let dir = tempfile::tempdir().unwrap();
    fs::write(dir.path().join("shop.jsonl"), SHOP_CORPUS).unwrap();
    fs::create_dir(dir.path().join("config")).unwrap();
    fs::write(
        dir.path().join("config/chaffgate.toml"),
        "[features]\nbits = 99\n",
    )
    .unwrap();
    let out = chaffgate(dir.path(), &["eval", "--corpus", "shop.jsonl"], "");
    assert_eq!(out.status.code(), Some(1));
    let err = stderr(&out);
    assert!(err.contains("features.bits = 99"), "{err}");
}

#[test]
fn eval_reads_folders_of_raw_mails() {
    let dir = tempfile::tempdir().unwrap();
    let junk = dir.path().join("junk");
    let fine = dir.path().join("fine");
    fs::create_dir(&junk).unwrap();
    fs::create_dir(&fine).unwrap();
    for day in 1..=6 {
        let prize = format!(
            "From: Prize Desk <draw@lucky-draw.example.net>\r\nSubject: Claim your prize {day}\r\n\r\nYou won {day}000 EUR, claim now at http://lucky-draw.example.net\r\n"
        );
        let order = format!(
            "From: Ines <ines@customer.example.org>\r\nSubject: Order {day}\r\n\r\nMy glazed mugs from order {day} have not arrived yet.\r\n"
        );
        fs::write(junk.join(format!("2026-11-0{day}a.eml")), prize).unwrap();
        fs::write(fine.join(format!("2026-11-0{day}b.eml")), order).unwrap();
    }
    fs::write(fine.join("notes.txt"), "not a mail").unwrap();
    let out = chaffgate(
        dir.path(),
        &["eval", "--junk-dir", "junk", "--fine-dir", "fine", "--json"],
        "",
    );
    let report = json_ok(&out);
    assert_eq!(report["judged"], 12);
    assert_eq!(report["junk"], 6);
    let out = chaffgate(
        dir.path(),
        &["eval", "--corpus", "x.tsv", "--junk-dir", "junk"],
        "",
    );
    assert_eq!(
        out.status.code(),
        Some(2),
        "a corpus file and mail folders exclude each other"
    );
    let out = chaffgate(dir.path(), &["eval"], "");
    assert_eq!(out.status.code(), Some(2));
}
