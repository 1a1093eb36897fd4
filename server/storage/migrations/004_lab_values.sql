-- Laboratory (reference-method) values of a batch, e.g. loss-on-drying moisture. Append-only like
-- the spectra: a value is never changed or deleted; a correction is a new row that names the row it
-- corrects (supersedes) with a reason, and the effective value is the newest one not superseded
-- (core/lab/lab-values.ts). Times are ms since the Unix epoch (UTC).
CREATE TABLE lab_values (
  id TEXT PRIMARY KEY,                 -- uuid
  batch TEXT NOT NULL REFERENCES batches(id),
  property TEXT NOT NULL,              -- normalised name, e.g. 'moisture'
  value REAL NOT NULL,
  unit TEXT NOT NULL,                  -- e.g. '% w/w'; '' when the property has none
  sample_t REAL NOT NULL,              -- when the sample was taken
  spectrum_idx INTEGER NOT NULL,       -- the spectrum nearest the sample time
  spectrum_dt_ms REAL NOT NULL,        -- |sample_t − that spectrum's t|
  method TEXT,                         -- reference method, e.g. 'LOD'
  entered_by TEXT NOT NULL,
  entered_at INTEGER NOT NULL,
  source TEXT NOT NULL CHECK (source IN ('import', 'entry')),
  supersedes TEXT REFERENCES lab_values(id),
  reason TEXT,
  FOREIGN KEY (batch, spectrum_idx) REFERENCES spectra(batch, idx),
  CHECK (spectrum_dt_ms >= 0),
  CHECK (supersedes IS NULL OR (reason IS NOT NULL AND length(trim(reason)) > 0))
);
CREATE INDEX lab_values_batch ON lab_values(batch, property, spectrum_idx);
-- A value is corrected at most once: a later correction corrects the correction, so there is
-- always one effective value per chain.
CREATE UNIQUE INDEX lab_values_corrected_once ON lab_values(supersedes) WHERE supersedes IS NOT NULL;
CREATE TRIGGER lab_values_no_update BEFORE UPDATE ON lab_values
BEGIN SELECT RAISE(ABORT, 'lab values are the record and are never changed; enter a correction that supersedes the value'); END;
CREATE TRIGGER lab_values_no_delete BEFORE DELETE ON lab_values
BEGIN SELECT RAISE(ABORT, 'lab values are the record and are never deleted; enter a correction that supersedes the value'); END;
