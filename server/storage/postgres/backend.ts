/**
 * Choosing the storage backend by configuration (`storage.url`, TIDELINE_DATABASE_URL). SQLite in
 * `dataDir` is the default. The PostgreSQL backend does not yet implement the whole Storage
 * interface, nor the stores still outside the seam, so a configured PostgreSQL URL is refused at
 * start with what is missing: Tideline never runs with part of its records in one database and
 * part in another.
 */
import { redactUrl } from './pg-migrate.ts';

/** What the PostgreSQL backend stores today (server/storage/postgres/pg-storage.ts). */
export const PG_SUPPORTED = ['the audit trail', 'electronic signatures', 'users, sessions, login throttling and analyzer tokens', 'units, analyzers, model versions and deployments'];

/** What it does not store yet. */
export const PG_NOT_YET = [
  'ingest (batches, spectra, results, alarms, endpoint events, outbox)',
  'lab values',
  'model evaluations',
  'shadow runs',
  'signal delivery',
  'plant history builds',
];

/** The sentence that refuses a configured PostgreSQL URL (its password hidden). */
export function pgBackendRefusal(url: string, source: string): string {
  return (
    `${source}: storage.url (TIDELINE_DATABASE_URL) names PostgreSQL at ${redactUrl(url)}, which is not yet a complete Tideline backend: ` +
    `it stores ${PG_SUPPORTED.join('; ')}, but not yet ${PG_NOT_YET.join('; ')}. ` +
    `Tideline does not run with part of its records in PostgreSQL and part in SQLite; remove storage.url (and TIDELINE_DATABASE_URL) to run on SQLite in dataDir (docs/postgresql.md)`
  );
}
