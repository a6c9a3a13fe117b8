//! Scratch databases and made-up rows for the store's tests.

use tempfile::TempDir;

use crate::{DecisionId, DecisionInput, FeedbackSeq, NewDecision, Store, Verdict};

/// A fresh store in a new temporary folder, at `chaffgate.db`. Keep the
/// folder alive as long as the store.
pub(crate) async fn scratch() -> (TempDir, Store) {
    let dir = tempfile::tempdir().expect("temporary folder");
    let store = Store::open(&dir.path().join("chaffgate.db"))
        .await
        .expect("open scratch store");
    (dir, store)
}

/// A canonical ULID for time `ms` whose random part is `n`, so that ids
/// sort by `ms` first and by `n` within one millisecond. The layout (48-bit
/// time, 80-bit random part, Crockford base 32, 26 characters) is the ULID
/// specification's, from memory.
pub(crate) fn ulid(ms: i64, n: i64) -> DecisionId {
    const ALPHABET: &[u8; 32] = b"0123456789ABCDEFGHJKMNPQRSTVWXYZ";
    let value = (u128::try_from(ms).expect("ms >= 0") << 80) | u128::try_from(n).expect("n >= 0");
    let text: String = (0..26)
        .rev()
        .map(|digit| char::from(ALPHABET[((value >> (5 * digit)) & 31) as usize]))
        .collect();
    DecisionId::new(text)
}

/// A decision made at `ms`, varied by `n`: three channels, every verdict,
/// text kept for every other decision, and an input (expiring 1000 ms
/// later) for two decisions in three.
pub(crate) fn decision(ms: i64, n: i64) -> NewDecision {
    let verdict = Verdict::ALL[(n % 3) as usize];
    let channel = ["mail", "tickets", "comments"][(n % 5 % 3) as usize];
    NewDecision {
        id: ulid(ms, n),
        created_at_ms: ms,
        channel: channel.to_owned(),
        client_ref: (n % 4 == 0).then(|| format!("ref-{n}")),
        content_sha256: format!("{n:064x}"),
        content: (n % 2 == 0).then(|| format!("message number {n}")),
        p_junk: (n % 101) as f64 / 100.0,
        verdict,
        model_seq: FeedbackSeq(n / 10),
        reasons_json: format!(r#"[{{"feature":"word:n{n}","contribution":0.25}}]"#),
        latency_us: 100 + n,
        input: (n % 3 != 2).then(|| DecisionInput {
            message_json: format!(r#"{{"body":"message number {n}","channel":"{channel}"}}"#),
            expires_at_ms: ms + 1000,
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ulid_encodes_time_then_random_part() {
        // Time 0 and random part 0 are all zeros; the largest time the
        // format allows, 2^48 - 1 ms, starts with "7ZZZZZZZZZ" (from memory
        // of the ULID specification's overflow rule).
        assert_eq!(ulid(0, 0).as_str(), "00000000000000000000000000");
        assert!(ulid((1 << 48) - 1, 0).as_str().starts_with("7ZZZZZZZZZ"));
        assert!(ulid(1, 0) > ulid(0, 999_999));
        assert!(ulid(1, 2) > ulid(1, 1));
        assert!(DecisionId::is_well_formed(
            ulid(1_700_000_000_000, 42).as_str()
        ));
    }
}
