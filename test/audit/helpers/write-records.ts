/**
 * Child process for the two-writer test: opens the database, says "ready", waits for "go" on
 * stdin, then appends N audit records.
 */
import Database from 'better-sqlite3';
import { SqliteAuditTrail } from '../../../server/audit/audit-trail.ts';

const [file, who, n] = process.argv.slice(2);
const db = new Database(file!);
db.pragma('journal_mode = WAL');
db.pragma('busy_timeout = 10000');
const trail = new SqliteAuditTrail(db);
process.stdout.write('ready\n');
process.stdin.once('data', async () => {
  for (let i = 0; i < Number(n); i++) {
    trail.record({ user: who!, action: 'test.write', object: `writer:${who}`, after: { i } });
    // Let go of the lock between records so the two writers interleave.
    await new Promise((r) => setTimeout(r, 1));
  }
  db.close();
  process.exit(0);
});
