-- Audit trail: append-only, hash-chained. Owner: server/audit/.
-- Each row stores the SHA-256 of the previous row (prev_hash) and its own hash over a canonical
-- serialization (server/audit/record-hash.ts). Triggers refuse UPDATE and DELETE; the hash chain
-- makes any change made around them (editing the file, dropping the triggers) visible to verify.
CREATE TABLE IF NOT EXISTS audit_trail (
  seq        INTEGER PRIMARY KEY,          -- 1, 2, 3, … no gaps
  at         TEXT    NOT NULL,             -- UTC, ISO 8601 with ms and 'Z'
  user       TEXT    NOT NULL,
  action     TEXT    NOT NULL,
  object     TEXT    NOT NULL,
  before     TEXT,                         -- canonical JSON or NULL
  after      TEXT,                         -- canonical JSON or NULL
  reason     TEXT,
  prev_hash  TEXT    NOT NULL,
  hash       TEXT    NOT NULL
);
CREATE INDEX IF NOT EXISTS audit_trail_at ON audit_trail(at);
CREATE INDEX IF NOT EXISTS audit_trail_object ON audit_trail(object);
CREATE INDEX IF NOT EXISTS audit_trail_user ON audit_trail(user);

-- The head of the chain (one row), so that removing records from the end is detected too.
CREATE TABLE IF NOT EXISTS audit_head (
  id    INTEGER PRIMARY KEY CHECK (id = 1),
  seq   INTEGER NOT NULL,
  hash  TEXT    NOT NULL
);

CREATE TRIGGER IF NOT EXISTS audit_trail_no_update BEFORE UPDATE ON audit_trail
BEGIN
  SELECT RAISE(ABORT, 'audit_trail is append-only: UPDATE refused');
END;
CREATE TRIGGER IF NOT EXISTS audit_trail_no_delete BEFORE DELETE ON audit_trail
BEGIN
  SELECT RAISE(ABORT, 'audit_trail is append-only: DELETE refused');
END;
CREATE TRIGGER IF NOT EXISTS audit_head_no_delete BEFORE DELETE ON audit_head
BEGIN
  SELECT RAISE(ABORT, 'audit_head may not be deleted');
END;
