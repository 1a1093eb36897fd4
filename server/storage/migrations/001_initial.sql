-- Tideline storage schema, part D (server core). Times are ms since the Unix epoch (UTC).
-- The stored spectra are the record: triggers below refuse any UPDATE or DELETE on them.

CREATE TABLE units (
  id TEXT PRIMARY KEY,
  name TEXT NOT NULL,
  kind TEXT NOT NULL DEFAULT 'other',
  description TEXT NOT NULL DEFAULT '',
  created_at INTEGER NOT NULL
);

CREATE TABLE analyzers (
  id TEXT PRIMARY KEY,
  name TEXT NOT NULL,
  created_at INTEGER NOT NULL
);

-- Analyzer tokens, stored as SHA-256 of a 256-bit random token (never the token itself).
CREATE TABLE analyzer_tokens (
  id INTEGER PRIMARY KEY,
  analyzer TEXT NOT NULL REFERENCES analyzers(id),
  token_sha256 TEXT NOT NULL UNIQUE,
  created_at INTEGER NOT NULL,
  revoked_at INTEGER
);

-- One row per (analyzer, boot epoch): the axis it announced and the highest persisted seq.
CREATE TABLE analyzer_boots (
  analyzer TEXT NOT NULL REFERENCES analyzers(id),
  boot INTEGER NOT NULL,
  axis BLOB NOT NULL,            -- Float64 little-endian
  instrument TEXT,
  first_seen INTEGER NOT NULL,
  last_seen INTEGER NOT NULL,
  last_seq INTEGER NOT NULL DEFAULT -1,
  PRIMARY KEY (analyzer, boot)
);

-- Log entries refused with an error that consumed their seq (see docs/protocol.md): kept for the record.
CREATE TABLE rejected_entries (
  analyzer TEXT NOT NULL,
  boot INTEGER NOT NULL,
  seq INTEGER NOT NULL,
  code TEXT NOT NULL,
  message TEXT NOT NULL,
  received_at INTEGER NOT NULL,
  PRIMARY KEY (analyzer, boot, seq)
);

CREATE TABLE model_versions (
  id TEXT PRIMARY KEY,
  name TEXT NOT NULL,
  version INTEGER NOT NULL,
  product TEXT NOT NULL,
  sha256 TEXT NOT NULL,
  body TEXT NOT NULL,            -- the serialized monitoring model file
  settings TEXT NOT NULL,        -- JSON
  reference_batches TEXT NOT NULL, -- JSON array of batch ids
  components INTEGER NOT NULL,
  confidence REAL NOT NULL,
  status TEXT NOT NULL DEFAULT 'draft' CHECK (status IN ('draft', 'approved', 'retired')),
  created_at INTEGER NOT NULL,
  created_by TEXT NOT NULL,
  approved_at INTEGER,
  approved_by TEXT,
  approval_reason TEXT,
  retired_at INTEGER,
  retired_by TEXT,
  retire_reason TEXT,
  UNIQUE (name, version)
);
-- A model version's content never changes.
CREATE TRIGGER model_versions_immutable BEFORE UPDATE OF id, name, version, product, sha256, body, settings, reference_batches, components, confidence ON model_versions
BEGIN SELECT RAISE(ABORT, 'model versions are immutable'); END;
CREATE TRIGGER model_versions_no_delete BEFORE DELETE ON model_versions
BEGIN SELECT RAISE(ABORT, 'model versions are never deleted'); END;

CREATE TABLE model_evaluations (
  id TEXT PRIMARY KEY,
  model_version TEXT NOT NULL REFERENCES model_versions(id),
  created_at INTEGER NOT NULL,
  created_by TEXT NOT NULL,
  body TEXT NOT NULL             -- JSON EvaluationResult
);

CREATE TABLE deployments (
  id TEXT PRIMARY KEY,
  unit TEXT NOT NULL REFERENCES units(id),
  model_version TEXT NOT NULL REFERENCES model_versions(id),
  deployed_at INTEGER NOT NULL,
  deployed_by TEXT NOT NULL,
  reason TEXT,
  ended_at INTEGER
);
CREATE INDEX deployments_unit ON deployments(unit, ended_at);

CREATE TABLE batches (
  id TEXT PRIMARY KEY,
  unit TEXT NOT NULL REFERENCES units(id),
  analyzer TEXT NOT NULL REFERENCES analyzers(id),
  boot INTEGER NOT NULL,
  product TEXT NOT NULL,
  status TEXT NOT NULL CHECK (status IN ('open', 'ended')),
  start_seq INTEGER NOT NULL,
  start_t REAL NOT NULL,
  end_seq INTEGER,
  end_t REAL,
  end_reason TEXT,
  axis BLOB NOT NULL,            -- Float64 little-endian
  model_version TEXT REFERENCES model_versions(id),
  spectrum_count INTEGER NOT NULL DEFAULT 0,
  last_seq INTEGER,
  last_t REAL,
  endpoint_state TEXT,
  endpoint_at REAL,
  created_at INTEGER NOT NULL
);
CREATE INDEX batches_unit ON batches(unit, start_t);
CREATE INDEX batches_status ON batches(status);

CREATE TABLE spectra (
  id INTEGER PRIMARY KEY,
  batch TEXT NOT NULL REFERENCES batches(id),
  idx INTEGER NOT NULL,          -- 0-based position in the batch
  analyzer TEXT NOT NULL,
  boot INTEGER NOT NULL,
  seq INTEGER NOT NULL,
  t REAL NOT NULL,
  vals BLOB NOT NULL,            -- Float32 little-endian, raw as received
  received_at INTEGER NOT NULL,
  UNIQUE (analyzer, boot, seq),
  UNIQUE (batch, idx)
);
CREATE TRIGGER spectra_no_update BEFORE UPDATE ON spectra
BEGIN SELECT RAISE(ABORT, 'stored spectra are the record and are never changed'); END;
CREATE TRIGGER spectra_no_delete BEFORE DELETE ON spectra
BEGIN SELECT RAISE(ABORT, 'stored spectra are the record and are never deleted'); END;

CREATE TABLE results (
  batch TEXT NOT NULL REFERENCES batches(id),
  idx INTEGER NOT NULL,
  seq INTEGER NOT NULL,
  t REAL NOT NULL,
  model_version TEXT NOT NULL,
  t2 REAL NOT NULL,
  q REAL NOT NULL,
  body TEXT NOT NULL,            -- JSON MonitorResult
  PRIMARY KEY (batch, idx)
) WITHOUT ROWID;

CREATE TABLE alarms (
  id TEXT PRIMARY KEY,
  unit TEXT NOT NULL,
  batch TEXT,
  kind TEXT NOT NULL,
  key TEXT NOT NULL,
  state TEXT NOT NULL,
  priority INTEGER NOT NULL,
  message TEXT NOT NULL,
  value REAL,
  limit_value REAL,
  active INTEGER NOT NULL,
  raised_at INTEGER NOT NULL,
  cleared_at INTEGER,
  acknowledged_at INTEGER,
  acknowledged_by TEXT,
  ack_comment TEXT,
  shelved_until INTEGER,
  shelved_by TEXT,
  shelve_reason TEXT,
  seq INTEGER,
  updated_at INTEGER NOT NULL
);
CREATE INDEX alarms_unit ON alarms(unit, state);
CREATE INDEX alarms_batch ON alarms(batch);

CREATE TABLE endpoint_events (
  id TEXT PRIMARY KEY,
  unit TEXT NOT NULL,
  batch TEXT NOT NULL,
  from_state TEXT NOT NULL,
  to_state TEXT NOT NULL,
  t REAL NOT NULL,
  seq INTEGER NOT NULL,
  reason TEXT NOT NULL,
  recorded_at INTEGER NOT NULL
);
CREATE INDEX endpoint_events_batch ON endpoint_events(batch);

-- Outgoing signals, written in the same transaction as the result that caused them.
CREATE TABLE outbox (
  id TEXT PRIMARY KEY,
  unit TEXT NOT NULL,
  unit_seq INTEGER NOT NULL,
  type TEXT NOT NULL,
  payload TEXT NOT NULL,         -- JSON
  created_at INTEGER NOT NULL,
  UNIQUE (unit, unit_seq)
);

CREATE TABLE audit (
  id INTEGER PRIMARY KEY,
  at INTEGER NOT NULL,
  user TEXT NOT NULL,
  action TEXT NOT NULL,
  object TEXT NOT NULL,
  before TEXT,
  after TEXT,
  reason TEXT
);
