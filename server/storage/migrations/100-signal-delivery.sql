-- Signal delivery bookkeeping (server/signals). The outbox itself is created by 0NN files.
-- Each channel (webhook:<name>, mqtt, opcua, alarms) delivers one unit's outbox rows in unit_seq
-- order and remembers the last delivered (or dead-lettered) seq here.
CREATE TABLE IF NOT EXISTS signal_cursor (
  channel TEXT NOT NULL,
  unit TEXT NOT NULL,
  last_seq INTEGER NOT NULL,
  updated_at INTEGER NOT NULL,
  PRIMARY KEY (channel, unit)
);

-- Failed attempts of the row at the head of a channel's queue for one unit.
CREATE TABLE IF NOT EXISTS signal_attempt (
  channel TEXT NOT NULL,
  event_id TEXT NOT NULL,
  unit TEXT NOT NULL,
  unit_seq INTEGER NOT NULL,
  attempts INTEGER NOT NULL,
  next_at INTEGER NOT NULL,
  last_error TEXT NOT NULL,
  last_at INTEGER NOT NULL,
  PRIMARY KEY (channel, event_id)
);

-- Rows a channel gave up on after its maximum number of attempts; listed by the API, can be requeued.
CREATE TABLE IF NOT EXISTS signal_dead_letter (
  channel TEXT NOT NULL,
  event_id TEXT NOT NULL,
  unit TEXT NOT NULL,
  unit_seq INTEGER NOT NULL,
  type TEXT NOT NULL,
  attempts INTEGER NOT NULL,
  last_error TEXT NOT NULL,
  dead_at INTEGER NOT NULL,
  requeued_at INTEGER,
  delivered_at INTEGER,
  PRIMARY KEY (channel, event_id)
);
CREATE INDEX IF NOT EXISTS signal_dead_letter_pending ON signal_dead_letter (channel, requeued_at, delivered_at);
