-- Batches and their spectra on PostgreSQL (as server/storage/migrations/001_initial.sql's batches and
-- spectra). Spectra are the record: never changed, never deleted.
--
-- The spectrum table is partitioned by time (declarative range partitioning), one partition per
-- calendar month (UTC) of the batch's start (batch_t = batches.start_t, held to it by a foreign
-- key): a batch's spectra are never split across partitions, a read of one batch touches one
-- partition, and an old month can be archived as whole batches. PostgreSQL's unique constraints on
-- a partitioned table must include the partition key, so the one-spectrum-per-stream-position rule
-- (analyzer, boot, seq) is kept by spectrum_keys, an unpartitioned table that references every
-- spectrum. That reference also makes PostgreSQL refuse to drop, detach or truncate a partition
-- whose spectra are keyed: spectra cannot leave the database silently.

CREATE TABLE batches (
  id TEXT PRIMARY KEY,
  unit TEXT NOT NULL REFERENCES units(id),
  analyzer TEXT NOT NULL REFERENCES analyzers(id),
  boot INTEGER NOT NULL,
  product TEXT NOT NULL,
  status TEXT NOT NULL CHECK (status IN ('open', 'ended')),
  start_seq BIGINT NOT NULL,
  start_t DOUBLE PRECISION NOT NULL,   -- ms epoch
  end_seq BIGINT,
  end_t DOUBLE PRECISION,
  end_reason TEXT,
  axis BYTEA NOT NULL,                 -- Float64 little-endian
  model_version TEXT REFERENCES model_versions(id),
  spectrum_count INTEGER NOT NULL DEFAULT 0,
  last_seq BIGINT,
  last_t DOUBLE PRECISION,
  endpoint_state TEXT,
  endpoint_at DOUBLE PRECISION,
  created_at BIGINT NOT NULL,
  UNIQUE (id, start_t)
);
CREATE INDEX batches_unit ON batches(unit, start_t);
CREATE INDEX batches_status ON batches(status);
CREATE TRIGGER batches_no_delete BEFORE DELETE ON batches FOR EACH ROW EXECUTE FUNCTION tideline_refuse_change('batches are never deleted');
CREATE TRIGGER batches_no_truncate BEFORE TRUNCATE ON batches FOR EACH STATEMENT EXECUTE FUNCTION tideline_refuse_change('batches are never deleted');

CREATE TABLE spectra (
  batch TEXT NOT NULL,
  batch_t DOUBLE PRECISION NOT NULL,   -- the batch's start_t: the partition key
  idx INTEGER NOT NULL,                -- 0-based position in the batch
  analyzer TEXT NOT NULL,
  boot INTEGER NOT NULL,
  seq BIGINT NOT NULL,
  t DOUBLE PRECISION NOT NULL,         -- ms epoch
  vals BYTEA NOT NULL,                 -- Float32 little-endian, raw as received (bytea: see docs/postgresql.md)
  received_at BIGINT NOT NULL,
  PRIMARY KEY (batch_t, batch, idx),
  FOREIGN KEY (batch, batch_t) REFERENCES batches (id, start_t)
) PARTITION BY RANGE (batch_t);
-- Row triggers on a partitioned table are cloned onto every partition (PostgreSQL 13+); statement
-- triggers are not, so tideline_spectra_partition gives each partition its own TRUNCATE trigger.
CREATE TRIGGER spectra_append_only BEFORE UPDATE OR DELETE ON spectra FOR EACH ROW EXECUTE FUNCTION tideline_refuse_change('stored spectra are the record and are never changed or deleted');
CREATE TRIGGER spectra_no_truncate BEFORE TRUNCATE ON spectra FOR EACH STATEMENT EXECUTE FUNCTION tideline_refuse_change('stored spectra are the record and are never changed or deleted');

-- One row per stored spectrum: its stream position, unique across all partitions.
CREATE TABLE spectrum_keys (
  analyzer TEXT NOT NULL,
  boot INTEGER NOT NULL,
  seq BIGINT NOT NULL,
  batch_t DOUBLE PRECISION NOT NULL,
  batch TEXT NOT NULL,
  idx INTEGER NOT NULL,
  PRIMARY KEY (analyzer, boot, seq),
  FOREIGN KEY (batch_t, batch, idx) REFERENCES spectra (batch_t, batch, idx)
);
CREATE INDEX spectrum_keys_spectrum ON spectrum_keys (batch_t, batch, idx);
CREATE TRIGGER spectrum_keys_append_only BEFORE UPDATE OR DELETE ON spectrum_keys FOR EACH ROW EXECUTE FUNCTION tideline_refuse_change('stored spectra are the record and are never changed or deleted');
CREATE TRIGGER spectrum_keys_no_truncate BEFORE TRUNCATE ON spectrum_keys FOR EACH STATEMENT EXECUTE FUNCTION tideline_refuse_change('stored spectra are the record and are never changed or deleted');

-- The month partition (UTC) that holds batches started at `start_t` (ms epoch), created when
-- missing; returns its name (spectra_YYYY_MM). Serialized by an advisory lock, so instances creating
-- the same month at once do not collide.
CREATE FUNCTION tideline_spectra_partition(start_t DOUBLE PRECISION) RETURNS TEXT LANGUAGE plpgsql AS $$
DECLARE
  month TIMESTAMP := date_trunc('month', to_timestamp(start_t / 1000.0) AT TIME ZONE 'UTC');
  lo DOUBLE PRECISION := extract(epoch FROM month) * 1000;
  hi DOUBLE PRECISION := extract(epoch FROM month + INTERVAL '1 month') * 1000;
  part TEXT := 'spectra_' || to_char(month, 'YYYY_MM');
BEGIN
  IF to_regclass(part) IS NOT NULL THEN
    RETURN part;
  END IF;
  PERFORM pg_advisory_xact_lock(1413761104); -- 'TDLP'
  IF to_regclass(part) IS NULL THEN
    EXECUTE format('CREATE TABLE %I PARTITION OF spectra FOR VALUES FROM (%s) TO (%s)', part, lo, hi);
    EXECUTE format('CREATE TRIGGER %I BEFORE TRUNCATE ON %I FOR EACH STATEMENT EXECUTE FUNCTION tideline_refuse_change(%L)',
      part || '_no_truncate', part, 'stored spectra are the record and are never changed or deleted');
  END IF;
  RETURN part;
END;
$$;
