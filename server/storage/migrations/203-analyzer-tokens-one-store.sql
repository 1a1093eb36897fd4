-- One analyzer-token store. Tokens issued with an analyzer (POST /api/analyzers, `analyzer add`)
-- were kept in `analyzer_tokens` (migration 001) beside the access-control store
-- `auth_analyzer_tokens` (migration 201), and /ingest looked in both. Every token moves to
-- auth_analyzer_tokens with its SHA-256 unchanged, so an analyzer configured with such a token
-- keeps connecting; its id stays the one the token list showed (interim-<n>), its times become UTC
-- ISO text like the rest of the table, and a revoked token stays revoked.
INSERT INTO auth_analyzer_tokens (id, analyzer, label, token_hash, created_at, created_by, revoked_at, revoked_by, last_used_at)
SELECT
  'interim-' || id,
  analyzer,
  '(issued with the analyzer)',
  token_sha256,
  strftime('%Y-%m-%dT%H:%M:%fZ', created_at / 1000.0, 'unixepoch'),
  '',
  CASE WHEN revoked_at IS NULL THEN NULL ELSE strftime('%Y-%m-%dT%H:%M:%fZ', revoked_at / 1000.0, 'unixepoch') END,
  NULL,
  NULL
FROM analyzer_tokens
WHERE token_sha256 NOT IN (SELECT token_hash FROM auth_analyzer_tokens);

DROP TABLE analyzer_tokens;
