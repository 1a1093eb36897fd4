-- Users, sessions, login throttling, analyzer tokens, electronic signatures.
-- Owner: server/auth/.
CREATE TABLE IF NOT EXISTS auth_users (
  id                    INTEGER PRIMARY KEY,
  name                  TEXT    NOT NULL UNIQUE COLLATE NOCASE,
  full_name             TEXT    NOT NULL,
  role                  TEXT    NOT NULL CHECK (role IN ('viewer','operator','model-owner','administrator')),
  password_hash         TEXT    NOT NULL,   -- scrypt$N$r$p$salt(b64)$key(b64), per-user random salt
  must_change_password  INTEGER NOT NULL DEFAULT 0,
  created_at            TEXT    NOT NULL,
  created_by            TEXT    NOT NULL,
  password_changed_at   TEXT    NOT NULL,
  disabled_at           TEXT
);

-- Only the SHA-256 of the session token is stored; the token itself lives in the browser cookie.
CREATE TABLE IF NOT EXISTS auth_sessions (
  token_hash    TEXT    PRIMARY KEY,
  user_id       INTEGER NOT NULL REFERENCES auth_users(id),
  csrf_token    TEXT    NOT NULL,
  created_at    INTEGER NOT NULL,   -- ms epoch
  last_seen_at  INTEGER NOT NULL,
  expires_at    INTEGER NOT NULL,
  address       TEXT
);
CREATE INDEX IF NOT EXISTS auth_sessions_user ON auth_sessions(user_id);

-- Failed-login counters, keyed 'user:<name>' or 'addr:<address>'.
CREATE TABLE IF NOT EXISTS auth_login_failures (
  key              TEXT    PRIMARY KEY,
  failures         INTEGER NOT NULL,
  last_failure_at  INTEGER NOT NULL,   -- ms epoch
  locked_until     INTEGER NOT NULL    -- ms epoch; 0 when not locked
);

-- Analyzer tokens: random 256-bit secrets, stored as SHA-256 only.
CREATE TABLE IF NOT EXISTS auth_analyzer_tokens (
  id            TEXT    PRIMARY KEY,
  analyzer      TEXT    NOT NULL,
  label         TEXT    NOT NULL DEFAULT '',
  token_hash    TEXT    NOT NULL UNIQUE,
  created_at    TEXT    NOT NULL,
  created_by    TEXT    NOT NULL,
  revoked_at    TEXT,
  revoked_by    TEXT,
  last_used_at  TEXT
);
CREATE INDEX IF NOT EXISTS auth_analyzer_tokens_analyzer ON auth_analyzer_tokens(analyzer);

-- Electronic signatures (21 CFR 11.50/11.70): signer, meaning, time, reason, bound to the hash
-- of the signed object. Append-only.
CREATE TABLE IF NOT EXISTS auth_signatures (
  id           INTEGER PRIMARY KEY,
  user_id      INTEGER NOT NULL REFERENCES auth_users(id),
  user_name    TEXT    NOT NULL,
  full_name    TEXT    NOT NULL,
  role         TEXT    NOT NULL,
  meaning      TEXT    NOT NULL,
  object_type  TEXT    NOT NULL,
  object_id    TEXT    NOT NULL,
  object_hash  TEXT    NOT NULL,
  reason       TEXT    NOT NULL,
  signed_at    TEXT    NOT NULL,
  audit_seq    INTEGER NOT NULL
);
CREATE INDEX IF NOT EXISTS auth_signatures_object ON auth_signatures(object_type, object_id);
CREATE TRIGGER IF NOT EXISTS auth_signatures_no_update BEFORE UPDATE ON auth_signatures
BEGIN
  SELECT RAISE(ABORT, 'auth_signatures is append-only: UPDATE refused');
END;
CREATE TRIGGER IF NOT EXISTS auth_signatures_no_delete BEFORE DELETE ON auth_signatures
BEGIN
  SELECT RAISE(ABORT, 'auth_signatures is append-only: DELETE refused');
END;
