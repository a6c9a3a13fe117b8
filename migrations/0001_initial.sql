-- The audit log, the feedback log, checkpoints, model history and API tokens.
--
-- Conventions:
-- * Times are milliseconds since the Unix epoch (UTC), in columns named *_ms.
-- * Hashes are lowercase hex SHA-256 (64 characters).
-- * Columns holding JSON are checked with json_valid().
-- * Decision ids are ULIDs in their canonical form (26 upper-case Crockford
--   base-32 characters), so sorting ids as text sorts decisions by time.

-- One row per scored message.
CREATE TABLE decisions (
    id             TEXT    PRIMARY KEY NOT NULL
                   CHECK (length(id) = 26 AND id NOT GLOB '*[^0-9A-HJKMNP-TV-Z]*'),
    created_at_ms  INTEGER NOT NULL,
    channel        TEXT    NOT NULL CHECK (channel <> ''),
    client_ref     TEXT,
    -- Of the normalised content, whether or not the text itself is kept.
    content_sha256 TEXT    NOT NULL
                   CHECK (length(content_sha256) = 64 AND content_sha256 NOT GLOB '*[^0-9a-f]*'),
    -- Only when the operator chose to keep message text.
    content        TEXT,
    p_junk         REAL    NOT NULL CHECK (p_junk >= 0.0 AND p_junk <= 1.0),
    verdict        TEXT    NOT NULL CHECK (verdict IN ('junk', 'review', 'fine')),
    -- The last feedback sequence number the scoring model had applied.
    model_seq      INTEGER NOT NULL CHECK (model_seq >= 0),
    reasons        TEXT    NOT NULL CHECK (json_valid(reasons)),
    latency_us     INTEGER NOT NULL CHECK (latency_us >= 0)
);

-- Listings page newest first by (created_at_ms, id). Each index below both
-- narrows to its filter and yields rows in that order, so no page is sorted
-- in memory, and a time window is a range of every index.
CREATE INDEX decisions_by_time ON decisions (created_at_ms, id);
CREATE INDEX decisions_by_channel ON decisions (channel, created_at_ms, id);
CREATE INDEX decisions_by_verdict ON decisions (verdict, created_at_ms, id);

-- What feedback on a decision needs to learn from it: the message as JSON.
-- Kept only for a retention window, then purged.
CREATE TABLE decision_inputs (
    decision_id   TEXT    PRIMARY KEY NOT NULL
                  REFERENCES decisions (id) ON DELETE CASCADE,
    message       TEXT    NOT NULL CHECK (json_valid(message)),
    expires_at_ms INTEGER NOT NULL
);

CREATE INDEX decision_inputs_by_expiry ON decision_inputs (expires_at_ms);

-- The feedback log: the source of truth the model is rebuilt from.
-- AUTOINCREMENT makes seq strictly increasing and never reused, even when
-- the newest row is deleted.
CREATE TABLE feedback (
    seq             INTEGER PRIMARY KEY AUTOINCREMENT,
    created_at_ms   INTEGER NOT NULL,
    -- NULL for feedback on an inline message.
    decision_id     TEXT    REFERENCES decisions (id),
    -- The message to learn from, copied here so the log alone rebuilds the model.
    message         TEXT    NOT NULL CHECK (json_valid(message)),
    label           TEXT    NOT NULL CHECK (label IN ('junk', 'fine')),
    moderator       TEXT    NOT NULL CHECK (moderator <> ''),
    note            TEXT,
    idempotency_key TEXT    UNIQUE,
    kind            TEXT    NOT NULL CHECK (kind IN ('label', 'correction')),
    -- Set when the row is un-learned; replay skips revoked rows.
    revoked_at_ms   INTEGER,
    -- Only feedback on a decision can correct earlier feedback.
    CHECK (kind = 'label' OR decision_id IS NOT NULL)
);

-- The latest feedback on a decision, for duplicates and corrections.
CREATE INDEX feedback_by_decision ON feedback (decision_id, seq);

-- Saved copies of the model, each tagged with the last feedback it includes.
CREATE TABLE checkpoints (
    id            INTEGER PRIMARY KEY,
    created_at_ms INTEGER NOT NULL,
    file_name     TEXT    NOT NULL CHECK (file_name <> ''),
    last_seq      INTEGER NOT NULL CHECK (last_seq >= 0),
    examples_seen INTEGER NOT NULL CHECK (examples_seen >= 0),
    -- Why it was written, e.g. 'periodic', 'shutdown', 'rollback-target'.
    reason        TEXT    NOT NULL CHECK (reason <> ''),
    deleted_at_ms INTEGER
);

-- The model's version history: rollbacks, rebuilds and the like.
CREATE TABLE model_events (
    id            INTEGER PRIMARY KEY,
    created_at_ms INTEGER NOT NULL,
    kind          TEXT    NOT NULL CHECK (kind <> ''),
    detail        TEXT    NOT NULL CHECK (json_valid(detail))
);

-- API tokens. Only a hash of each secret is stored. Names stay taken after
-- revocation so that the audit trail keeps meaning one thing.
CREATE TABLE tokens (
    id            INTEGER PRIMARY KEY,
    name          TEXT    NOT NULL UNIQUE CHECK (name <> ''),
    role          TEXT    NOT NULL CHECK (role IN ('score', 'moderate', 'operate')),
    token_sha256  TEXT    NOT NULL UNIQUE
                  CHECK (length(token_sha256) = 64 AND token_sha256 NOT GLOB '*[^0-9a-f]*'),
    created_at_ms INTEGER NOT NULL,
    revoked_at_ms INTEGER
);
