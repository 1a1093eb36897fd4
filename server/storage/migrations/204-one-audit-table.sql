-- One audit table. The first schema (001) had an unchained `audit` table, written only by the
-- ingest pipeline when it ran without the audit trail; every other record is in the hash-chained
-- audit_trail (200). Its rows are appended to the chain here, in the order they were written, each
-- keeping its user, action, object, before/after texts and reason and its own time (ms since the
-- epoch then, UTC ISO 8601 now), sealed like any record (server/audit/record-hash.ts: the SQL
-- functions are registered by server/storage/migrate.ts); then the old table goes. The carried
-- records follow the chain's last record, so their times may be earlier than the one before them.
INSERT INTO audit_trail (seq, at, user, action, object, before, after, reason, prev_hash, hash)
WITH RECURSIVE
  legacy AS MATERIALIZED (
    SELECT row_number() OVER (ORDER BY id) AS n, tideline_iso_time(at) AS at, user, action, object, before, after, reason FROM audit
  ),
  chain (n, seq, at, user, action, object, before, after, reason, prev_hash, hash) AS (
    SELECT 0, COALESCE(MAX(seq), 0), NULL, NULL, NULL, NULL, NULL, NULL, NULL, NULL,
      COALESCE((SELECT hash FROM audit_trail ORDER BY seq DESC LIMIT 1), '0000000000000000000000000000000000000000000000000000000000000000')
    FROM audit_trail
    UNION ALL
    SELECT l.n, c.seq + 1, l.at, l.user, l.action, l.object, l.before, l.after, l.reason, c.hash,
      tideline_audit_hash(c.seq + 1, l.at, l.user, l.action, l.object, l.before, l.after, l.reason, c.hash)
    FROM chain c JOIN legacy l ON l.n = c.n + 1
  )
SELECT seq, at, user, action, object, before, after, reason, prev_hash, hash FROM chain WHERE n > 0;

INSERT INTO audit_head (id, seq, hash)
SELECT 1, seq, hash FROM audit_trail WHERE seq = (SELECT MAX(seq) FROM audit_trail)
ON CONFLICT (id) DO UPDATE SET seq = excluded.seq, hash = excluded.hash;

DROP TABLE audit;
