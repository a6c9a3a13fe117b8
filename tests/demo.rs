//! `chaffgate demo --no-serve`: the whole job on the invented stream.
//!
//! The demo corpus and its generator are ours, so passing here shows that
//! the pipeline works end to end (teach, replay, label, learn, report), not
//! how accurate chaffgate is on real mail.

use crate::util::{chaffgate, stderr, stdout};

/// The figures of the summary's `all` row: messages and ROC AUC.
fn overall(summary: &str) -> (usize, f64) {
    let row = summary
        .lines()
        .find(|line| line.starts_with("all "))
        .unwrap_or_else(|| panic!("no `all` row in:\n{summary}"));
    let cells: Vec<&str> = row.split_whitespace().collect();
    (cells[1].parse().unwrap(), cells[2].parse().unwrap())
}

#[test]
fn demo_replays_the_invented_stream_and_stops() {
    let dir = tempfile::tempdir().unwrap();
    let output = chaffgate(dir.path(), &["demo", "--no-serve"], "");
    let (out, err) = (stdout(&output), stderr(&output));
    assert!(output.status.success(), "{out}\n{err}");
    let (messages, auc) = overall(&out);
    // Weeks 3-8 of the committed corpus (demo-corpus/README.md counts them).
    assert!(messages > 2000, "{out}");
    // The bar the demo must clear; the stream is ours, see the module docs.
    assert!(auc > 0.95, "{out}");
    assert!(dir.path().join("demo-data/chaffgate.db").exists());
    // The drift report finds the campaign that starts in week 5: at least
    // one alarm fires from then on.
    let alarm_weeks: Vec<u32> = out
        .lines()
        .filter(|line| line.trim_start().starts_with("alarm:"))
        .filter_map(|line| {
            line.rsplit_once("(week ")?
                .1
                .strip_suffix(')')?
                .parse()
                .ok()
        })
        .collect();
    assert!(alarm_weeks.iter().any(|&week| week >= 5), "{out}");

    // A run never deletes a folder it did not make.
    std::fs::create_dir(dir.path().join("mine")).unwrap();
    std::fs::write(dir.path().join("mine/notes.txt"), "keep me").unwrap();
    let refused = chaffgate(dir.path(), &["demo", "--no-serve", "--data", "mine"], "");
    assert!(!refused.status.success());
    assert!(
        stderr(&refused).contains("was not made by the demo"),
        "{}",
        stderr(&refused)
    );
    assert!(dir.path().join("mine/notes.txt").exists());
}
