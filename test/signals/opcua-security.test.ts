/**
 * OPC UA security modes: a plant configuration offering only SignAndEncrypt (Basic256Sha256) admits
 * a client that signs and encrypts, refuses an unsecured one, and keeps its certificates in the PKI
 * folder inside the data folder; an unknown client certificate is rejected unless the lab setting
 * acceptUnknownCertificates is on.
 */
import { existsSync, mkdtempSync, readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { SecurityPolicy } from 'node-opcua';
import { afterAll, describe, expect, it } from 'vitest';
import { parseSignalsConfig } from '../../server/signals/config.ts';
import { OpcuaChannel } from '../../server/signals/opcua/opcua-channel.ts';
import { SqliteSignalRepository } from '../../server/storage/sqlite-signals.ts';
import { connectClient } from './helpers/opcua-client.ts';
import { openSignalDb } from './helpers/outbox-db.ts';

const stops: (() => Promise<void>)[] = [];
afterAll(async () => {
  for (const s of stops.reverse()) await s();
});

async function startChannel(opcua: Record<string, unknown>) {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-opcua-sec-'));
  const db = openSignalDb(join(dir, 'tideline.db'));
  const cfg = parseSignalsConfig({ opcua: { port: 0, ...opcua } }).opcua!;
  const channel = new OpcuaChannel(cfg, new SqliteSignalRepository(db), { dataDir: dir });
  await channel.start();
  channel.ensureUnits(['reactor-2']);
  stops.push(async () => {
    await channel.stop();
    db.close();
  });
  return { channel, dir };
}

describe('OPC UA security', () => {
  it('SignAndEncrypt: a signing and encrypting client reads; an unsecured one is refused', async () => {
    const { channel, dir } = await startChannel({ securityModes: ['SignAndEncrypt'], securityPolicies: ['Basic256Sha256'], allowAnonymous: true, acceptUnknownCertificates: true });
    expect(existsSync(join(dir, 'pki', 'opcua', 'own', 'certs'))).toBe(true);
    const c = await connectClient(channel.endpointUrl, { mode: 'SignAndEncrypt', policy: SecurityPolicy.Basic256Sha256 });
    const dv = await c.read('/Objects/1:Tideline/1:reactor-2/1:EndpointReached');
    expect(dv.value.value).toBe(false);
    await c.close();
    // the accepted client certificate was stored as trusted
    expect(readdirSync(join(dir, 'pki', 'opcua', 'trusted', 'certs')).length).toBeGreaterThan(0);
    await expect(connectClient(channel.endpointUrl, { mode: 'None' })).rejects.toThrow();
  }, 180_000);

  it('refuses an unknown client certificate unless told to accept it', async () => {
    const { channel, dir } = await startChannel({ securityModes: ['Sign'], securityPolicies: ['Basic256Sha256'], allowAnonymous: true, acceptUnknownCertificates: false });
    await expect(connectClient(channel.endpointUrl, { mode: 'Sign', policy: SecurityPolicy.Basic256Sha256 })).rejects.toThrow();
    // the refused certificate waits in rejected/ for an administrator to move it to trusted/
    expect(readdirSync(join(dir, 'pki', 'opcua', 'rejected')).filter((f) => f.endsWith('.pem'))).toHaveLength(1);
    expect(readdirSync(join(dir, 'pki', 'opcua', 'trusted', 'certs'))).toHaveLength(0);
  }, 180_000);

  it('names a bad setting', () => {
    expect(() => parseSignalsConfig({ opcua: { securityModes: ['Encrypt'] } })).toThrow(/signals\.opcua\.securityModes\.0/);
    expect(() => parseSignalsConfig({ webhooks: [{ name: 'a', url: 'ftp://x', secret: 'x'.repeat(16) }] })).toThrow(/signals\.webhooks\.0\.url/);
    expect(() => parseSignalsConfig({ webhooks: [{ name: 'a', url: 'http://x', secret: 'short' }] })).toThrow(/signals\.webhooks\.0\.secret/);
    expect(() => parseSignalsConfig({ mqtt: { url: 'mqtt://x', prefix: 'a/#' } })).toThrow(/signals\.mqtt\.prefix/);
    expect(() => parseSignalsConfig({ nonsense: 1 })).toThrow(/nonsense|unrecognized/i);
    const two = { name: 'a', url: 'http://x', secret: 'x'.repeat(16) };
    expect(() => parseSignalsConfig({ webhooks: [two, two] })).toThrow(/used twice/);
  });
});
