-- Pixel quality of each spectrum beside its result (core/quality, docs/bad-pixels.md): `quality` holds
-- the named flags and how the spectrum was judged (JSON; null for a clean spectrum). A spectrum too
-- damaged to judge keeps a result row that says so, with no T² or Q: t2 and q become nullable.
-- Same rowid table and uniqueness as 002.
CREATE TABLE results_new (
  id INTEGER PRIMARY KEY,
  batch TEXT NOT NULL REFERENCES batches(id),
  idx INTEGER NOT NULL,
  seq INTEGER NOT NULL,
  t REAL NOT NULL,
  model_version TEXT NOT NULL,
  t2 REAL,
  q REAL,
  body TEXT NOT NULL,
  quality TEXT,
  UNIQUE (batch, idx)
);
INSERT INTO results_new (id, batch, idx, seq, t, model_version, t2, q, body)
  SELECT id, batch, idx, seq, t, model_version, t2, q, body FROM results ORDER BY id;
DROP TABLE results;
ALTER TABLE results_new RENAME TO results;
