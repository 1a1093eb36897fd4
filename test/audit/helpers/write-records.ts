/**
 * Child process for the two-writer test: opens the storage, says "ready", waits for "go" on
 * stdin, then appends N audit records.
 */
import { ChainedAuditTrail } from '../../../server/audit/audit-trail.ts';
import { SqliteStorage } from '../../../server/storage/sqlite-storage.ts';

const [file, who, n] = process.argv.slice(2);
const storage = new SqliteStorage({ file: file!, checkpointInWorker: false });
const trail = new ChainedAuditTrail(storage);
process.stdout.write('ready\n');
process.stdin.once('data', async () => {
  for (let i = 0; i < Number(n); i++) {
    await trail.record({ user: who!, action: 'test.write', object: `writer:${who}`, after: { i } });
    // Let go of the lock between records so the two writers interleave.
    await new Promise((r) => setTimeout(r, 1));
  }
  await storage.close();
  process.exit(0);
});
