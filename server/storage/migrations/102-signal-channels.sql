-- Channels of the signal side that have run at least once. A channel configured on a
-- server that already has history starts at the end of the outbox, so a newly added receiver is not
-- sent last year's endpoints; once registered it always resumes from its cursors.
CREATE TABLE IF NOT EXISTS signal_channel (
  channel TEXT PRIMARY KEY,
  registered_at INTEGER NOT NULL,
  started_at_end INTEGER NOT NULL
);
