-- A model's life after approval (docs/model-life.md).
-- Shadow runs: a candidate version judges a unit's live spectra beside the deployed one. Its results
-- are stored here, apart from `results`; it never signals and raises no alarm. One active run per unit.
CREATE TABLE shadow_runs (
  id TEXT PRIMARY KEY,
  unit TEXT NOT NULL REFERENCES units(id),
  model_version TEXT NOT NULL REFERENCES model_versions(id),
  deployed_version TEXT REFERENCES model_versions(id),  -- deployed on the unit when the run started
  started_at INTEGER NOT NULL,
  started_by TEXT NOT NULL,
  reason TEXT,
  ended_at INTEGER,
  ended_by TEXT,
  end_reason TEXT
);
CREATE UNIQUE INDEX shadow_runs_one_active ON shadow_runs(unit) WHERE ended_at IS NULL;

-- The batches a shadow run judged (written with the batch start, in the same commit).
CREATE TABLE shadow_batches (
  run TEXT NOT NULL REFERENCES shadow_runs(id),
  batch TEXT NOT NULL REFERENCES batches(id),
  PRIMARY KEY (run, batch)
);
CREATE INDEX shadow_batches_batch ON shadow_batches(batch);

-- The candidate's result per spectrum (JSON MonitorResult, like results.body), written in the same
-- commit as the spectrum.
CREATE TABLE shadow_results (
  id INTEGER PRIMARY KEY,
  run TEXT NOT NULL REFERENCES shadow_runs(id),
  batch TEXT NOT NULL REFERENCES batches(id),
  idx INTEGER NOT NULL,
  seq INTEGER NOT NULL,
  t REAL NOT NULL,
  t2 REAL,
  q REAL,
  body TEXT NOT NULL,
  UNIQUE (run, batch, idx)
);

-- The periodic review of an approved version: due date set at approval.
CREATE TABLE model_reviews (
  model_version TEXT PRIMARY KEY REFERENCES model_versions(id),
  interval_days REAL NOT NULL,
  due_at INTEGER NOT NULL,
  set_at INTEGER NOT NULL,
  set_by TEXT NOT NULL
);
