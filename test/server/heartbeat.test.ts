import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Peer, axis, startTestServer, type TestServer } from './helpers.ts';

let ts: TestServer;
beforeAll(async () => {
  ts = await startTestServer({ ingest: { heartbeatMs: 200 } });
});
afterAll(async () => {
  await ts?.stop();
});

async function connections(): Promise<number> {
  return (await ts.server.ctx.metrics.ingestConnections.get()).values[0]?.value ?? 0;
}

describe('ingest heartbeat', () => {
  it('keeps a peer that answers pings and drops one that has gone silent', async () => {
    const live = new Peer(ts.wsUrl, ts.token);
    await live.open();
    await live.hello('nir-1', 1, axis(8));
    await new Promise((r) => setTimeout(r, 800));
    expect(live.closed).toBeNull();
    expect(await connections()).toBe(1);
    // Stop reading: the peer no longer answers pings (a half-open connection looks like this).
    (live.ws as any)._socket.pause();
    let n = 1;
    for (let i = 0; i < 50 && n > 0; i++) {
      await new Promise((r) => setTimeout(r, 100));
      n = await connections();
    }
    expect(n).toBe(0);
  });
});
