-- Indexes for drift reports (`chaffgate drift`, GET /v1/reports/drift).
--
-- A report reads every decision of its two windows and every feedback row
-- appended since the baseline window began. Each index below holds every
-- column the report reads, so SQLite answers from the index alone (a
-- covering index) without visiting the table rows, which carry the much
-- larger reasons and digests.

-- Decisions, tallied per UTC hour, channel and verdict. Leading with the
-- hour (the expression must be written exactly so in queries) lets SQLite
-- group in index order in one pass, instead of sorting a million rows
-- first; created_at_ms follows so that a window's partial first and last
-- hours are cut exactly. A report for one channel scans the same hours and
-- skips other channels' entries: no dearer than a report on all channels,
-- and a second, channel-first index would cost every decision write more.
CREATE INDEX decisions_by_hour_for_reports
    ON decisions (created_at_ms / 3600000, channel, verdict, p_junk, created_at_ms, model_seq);

-- Feedback: labels on the windows' decisions and moderators' activity.
CREATE INDEX feedback_for_reports
    ON feedback (created_at_ms, decision_id, seq, label, kind, moderator, revoked_at_ms);
