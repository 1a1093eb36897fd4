/**
 * An electronic signature and the state change it signs are one record (21 CFR 11.70: signatures
 * linked to their records): if the change cannot be made, no signature is left behind.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { loadConfig } from '../../server/config.ts';
import type { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { login, startTestServer, type TestServer } from './helpers.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';

let ts: TestServer;
const fixture = buildSmallDryerModel(11);
beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

describe('approval and retirement signatures', () => {
  it('a signature whose approval fails is rolled back with it', async () => {
    const id = await installModel(ts.server.ctx.storage, fixture.text, fixture.model, 'dryer-1'); // approved already
    await login(ts, 'model-owner', 'signer');
    const auth = ts.server.ctx.auth!;
    const user = await (auth as any).users.byName('signer');
    const storage = ts.server.ctx.storage as unknown as SqliteStorage;
    const count = () => (storage.db.prepare('SELECT COUNT(*) AS n FROM auth_signatures').get() as { n: number }).n;
    const before = count();
    await expect(
      auth.sign(
        { user: { id: user.id, name: 'signer', fullName: 'signer', role: 'model-owner' }, password: 'correct horse battery staple 42', meaning: 'approved', objectType: 'model', objectId: id, objectHash: fixture.model.sha256, reason: 'second approval', address: '127.0.0.1' },
        (_sig, uow) => uow.models.approve(id, 'signer', Date.now(), 'second approval'),
      ),
    ).rejects.toThrow(/not a draft/);
    expect(count()).toBe(before);
    expect((await ts.server.ctx.audit!.verify()).ok).toBe(true);
  });
});

describe('TLS settings from flags', () => {
  it('keeps certificate paths as text', () => {
    const c = loadConfig({ flags: { 'tls.cert': '/etc/tideline/cert.pem', 'tls.key': '/etc/tideline/key.pem' } }) as unknown as { tls: { cert: string; key: string } };
    expect(c.tls).toMatchObject({ cert: '/etc/tideline/cert.pem', key: '/etc/tideline/key.pem' });
  });
});
