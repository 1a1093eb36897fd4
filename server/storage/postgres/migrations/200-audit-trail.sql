-- Audit trail on PostgreSQL: append-only, hash-chained (as server/storage/migrations/200-audit-trail.sql).
-- Each row stores the SHA-256 of the previous row (prev_hash) and its own hash over a canonical
-- serialization (server/audit/record-hash.ts). Triggers refuse UPDATE, DELETE and TRUNCATE; the hash
-- chain makes any change made around them (a superuser dropping the triggers) visible to verify.
-- Appends are serialized by a transaction-level advisory lock taken by the unit of work
-- (server/storage/postgres/pg-audit.ts), across every Tideline instance on the database.
CREATE TABLE audit_trail (
  seq        BIGINT PRIMARY KEY CHECK (seq >= 1),  -- 1, 2, 3, … no gaps
  at         TEXT   COLLATE "C" NOT NULL,                     -- UTC, ISO 8601 with ms and 'Z', as sealed
  "user"     TEXT   NOT NULL,
  action     TEXT   NOT NULL,
  object     TEXT   NOT NULL,
  before     TEXT,                                 -- canonical JSON or NULL, as sealed
  after      TEXT,
  reason     TEXT,
  prev_hash  TEXT   NOT NULL,
  hash       TEXT   NOT NULL
);
CREATE INDEX audit_trail_at ON audit_trail(at);
CREATE INDEX audit_trail_object ON audit_trail(object);
CREATE INDEX audit_trail_user ON audit_trail("user");

-- The head of the chain (one row), so that removing records from the end is detected too.
CREATE TABLE audit_head (
  id    INTEGER PRIMARY KEY CHECK (id = 1),
  seq   BIGINT  NOT NULL,
  hash  TEXT    NOT NULL
);

CREATE TRIGGER audit_trail_append_only BEFORE UPDATE OR DELETE ON audit_trail FOR EACH ROW EXECUTE FUNCTION tideline_refuse_change('audit_trail is append-only');
CREATE TRIGGER audit_trail_no_truncate BEFORE TRUNCATE ON audit_trail FOR EACH STATEMENT EXECUTE FUNCTION tideline_refuse_change('audit_trail is append-only');
CREATE TRIGGER audit_head_no_delete BEFORE DELETE ON audit_head FOR EACH ROW EXECUTE FUNCTION tideline_refuse_change('audit_head may not be deleted');
CREATE TRIGGER audit_head_no_truncate BEFORE TRUNCATE ON audit_head FOR EACH STATEMENT EXECUTE FUNCTION tideline_refuse_change('audit_head may not be deleted');
