-- Analyzer status reports (ingest message `analyzer-status`, NAMUR NE 107 categories), one row per
-- log entry; the latest row per analyzer is the analyzer's current status after a restart.
CREATE TABLE analyzer_status (
  id INTEGER PRIMARY KEY,
  analyzer TEXT NOT NULL REFERENCES analyzers(id),
  boot INTEGER NOT NULL,
  seq INTEGER NOT NULL,
  t REAL NOT NULL,               -- the analyzer's time of the status
  status TEXT NOT NULL CHECK (status IN ('good', 'failure', 'function-check', 'out-of-specification', 'maintenance-required')),
  code TEXT,
  detail TEXT,
  unit TEXT,                     -- the unit the status was applied to (null when the analyzer served none yet)
  received_at INTEGER NOT NULL,
  UNIQUE (analyzer, boot, seq)
);
CREATE INDEX analyzer_status_latest ON analyzer_status(analyzer, id);
CREATE TRIGGER analyzer_status_no_update BEFORE UPDATE ON analyzer_status
BEGIN SELECT RAISE(ABORT, 'analyzer status reports are the record and are never changed'); END;

-- Suppression by state (ISA-18.2 designed suppression): comma-separated reasons, '' when annunciated.
ALTER TABLE alarms ADD COLUMN suppressed_by TEXT NOT NULL DEFAULT '';
