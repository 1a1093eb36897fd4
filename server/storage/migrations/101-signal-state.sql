-- Durable state of the signal side: the OPC UA "endpoint reached" latch per unit, so a
-- restart neither re-raises nor forgets it. Reset only when the DCS acknowledges.
CREATE TABLE IF NOT EXISTS endpoint_latch (
  unit TEXT PRIMARY KEY,
  batch TEXT,
  reached INTEGER NOT NULL,
  reached_at INTEGER,
  reason TEXT,
  event_id TEXT,
  acknowledged_at INTEGER,
  acknowledged_by TEXT
);
