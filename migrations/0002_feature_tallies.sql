-- Feature tallies: how many sampled messages contained each readable
-- feature name, per time bucket (an hour by default) and channel, for
-- drift reports.
--
-- The daemon tallies a sample of scored messages in memory, one bounded
-- Space-Saving summary per (bucket, channel), and writes each summary's top
-- names here periodically and at shutdown. Each daemon run (start to stop)
-- writes its own part of a bucket and rewrites that part on every flush;
-- readers add the parts up. So a restart within the hour adds to the
-- bucket instead of overwriting what the earlier run counted.

-- One run's part of one (bucket, channel).
CREATE TABLE feature_tally_parts (
    -- Start of the bucket the decisions were made in: created_at_ms rounded
    -- down to a multiple of the bucket length (3 600 000 by default).
    bucket_start_ms  INTEGER NOT NULL,
    channel          TEXT    NOT NULL CHECK (channel <> ''),
    -- The daemon run that counted it (a ULID made at start-up).
    run_id           TEXT    NOT NULL CHECK (run_id <> ''),
    -- Messages tallied, so that shares (messages / sampled_messages) can be
    -- estimated.
    sampled_messages INTEGER NOT NULL CHECK (sampled_messages >= 0),
    -- The most messages a name not listed for this part can have contained
    -- (0 when every name seen is listed, exactly).
    unlisted_max     INTEGER NOT NULL CHECK (unlisted_max >= 0),
    updated_at_ms    INTEGER NOT NULL,
    PRIMARY KEY (bucket_start_ms, channel, run_id)
);

-- Reports for one channel over a time window.
CREATE INDEX feature_tally_parts_by_channel ON feature_tally_parts (channel, bucket_start_ms);

-- The top names of one part.
CREATE TABLE feature_tallies (
    bucket_start_ms  INTEGER NOT NULL,
    channel          TEXT    NOT NULL,
    run_id           TEXT    NOT NULL,
    -- The readable name, e.g. 'body word "offer"'.
    feature          TEXT    NOT NULL CHECK (feature <> ''),
    -- The hashed slot the name lands in under the deployment's key.
    slot             INTEGER NOT NULL CHECK (slot >= 0),
    -- Sampled messages counted as containing it: at least the true number.
    messages         INTEGER NOT NULL CHECK (messages >= 1),
    -- How much of messages may belong to names it replaced in the summary:
    -- messages - overcount is at most the true number.
    overcount        INTEGER NOT NULL CHECK (overcount >= 0 AND overcount < messages),
    -- Sum of its contribution (weight x value) to the margin of each of the
    -- last messages - overcount messages counted.
    contribution_sum REAL    NOT NULL,
    PRIMARY KEY (bucket_start_ms, channel, run_id, feature),
    FOREIGN KEY (bucket_start_ms, channel, run_id)
        REFERENCES feature_tally_parts (bucket_start_ms, channel, run_id) ON DELETE CASCADE
);

-- Reports for one channel over a time window; all channels use the
-- primary key, which starts with the bucket.
CREATE INDEX feature_tallies_by_channel ON feature_tallies (channel, bucket_start_ms);
