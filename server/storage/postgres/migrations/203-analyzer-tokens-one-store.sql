-- One analyzer-token store, as SQLite migration 203: tokens issued with an analyzer move from
-- analyzer_tokens to auth_analyzer_tokens with their SHA-256 unchanged (the analyzer keeps
-- connecting), id interim-<n>, times as UTC ISO text; a revoked token stays revoked.
INSERT INTO auth_analyzer_tokens (id, analyzer, label, token_hash, created_at, created_by, revoked_at, revoked_by, last_used_at)
SELECT
  'interim-' || id,
  analyzer,
  '(issued with the analyzer)',
  token_sha256,
  to_char(to_timestamp(created_at / 1000.0) AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"'),
  '',
  CASE WHEN revoked_at IS NULL THEN NULL ELSE to_char(to_timestamp(revoked_at / 1000.0) AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"') END,
  NULL,
  NULL
FROM analyzer_tokens
WHERE token_sha256 NOT IN (SELECT token_hash FROM auth_analyzer_tokens);

DROP TABLE analyzer_tokens;
