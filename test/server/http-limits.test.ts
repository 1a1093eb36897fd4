/**
 * A client that opens a connection and sends nothing, or trickles its request head a byte at a
 * time, cannot hold a socket of the server for long (http.idleTimeoutMs, http.headersTimeoutMs);
 * a request that takes its time to answer is not cut, and an analyzer's WebSocket that stays quiet
 * past the idle limit stays connected. Against the real server on a loopback port.
 */
import { createServer } from 'node:http';
import { connect, type AddressInfo, type Socket } from 'node:net';
import { applyIdleLimit, serverOptions } from '../../server/http-limits.ts';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { axis, Peer, startTestServer, type TestServer } from './helpers.ts';

let ts: TestServer;
let port = 0;
beforeAll(async () => {
  ts = await startTestServer({ http: { headersTimeoutMs: 1500, idleTimeoutMs: 1500 } });
  port = Number(new URL(ts.server.url).port);
}, 60_000);
afterAll(async () => {
  await ts?.stop();
});

/** Resolves when the server closes `s`, or with 'open' when `waitMs` passes first. */
function closedWithin(s: Socket, waitMs: number): Promise<'closed' | 'open'> {
  return new Promise((resolve) => {
    const timer = setTimeout(() => resolve('open'), waitMs);
    s.on('error', () => undefined);
    s.once('close', () => {
      clearTimeout(timer);
      resolve('closed');
    });
  });
}

describe('HTTP connection limits', () => {
  it('closes a connection that sends nothing', async () => {
    const s = connect(port, '127.0.0.1');
    expect(await closedWithin(s, 30_000)).toBe('closed');
  }, 60_000);

  it('closes a connection that trickles its request head', async () => {
    const s = connect(port, '127.0.0.1');
    const head = 'GET /api/auth/me HTTP/1.1\r\nHost: x\r\nX-Slow: ' + 'a'.repeat(500);
    let i = 0;
    // a byte every 200 ms: never idle, but the head is never complete
    const iv = setInterval(() => {
      if (!s.destroyed) s.write(head[i++ % head.length]!);
    }, 200);
    const r = await closedWithin(s, 30_000);
    clearInterval(iv);
    expect(r).toBe('closed');
  }, 60_000);

  it('answers a request on a connection kept open after it, and keeps an idle analyzer WebSocket', async () => {
    const res = await fetch(ts.server.url + '/healthz');
    expect(res.status).toBe(200);
    const peer = new Peer(ts.wsUrl, ts.token);
    await peer.open();
    expect((await peer.hello('nir-1', 1, axis(20))).type).toBe('welcome');
    // quiet for twice the idle limit: the upgraded socket is the protocol's own, not the HTTP limit's
    await new Promise((r) => setTimeout(r, 3500));
    expect(peer.closed).toBeNull();
    peer.send({ type: 'batch-start', seq: 1, t: Date.now(), unit: 'dryer-1', batch: 'HL-1', product: 'granule' });
    await peer.waitAck(1);
    peer.close();
  }, 60_000);
});

describe('the idle limit and a slow answer', () => {
  it('does not cut a request whose answer takes longer than the idle limit', async () => {
    const limits = { headersTimeoutMs: 1000, idleTimeoutMs: 1000 };
    const srv = createServer(serverOptions(limits), (_req, res) => {
      setTimeout(() => res.end('late but whole'), 3000); // e.g. a report rendered on a busy machine
    });
    applyIdleLimit(srv, limits);
    await new Promise<void>((r) => srv.listen(0, '127.0.0.1', () => r()));
    try {
      const res = await fetch(`http://127.0.0.1:${(srv.address() as AddressInfo).port}/`);
      expect(await res.text()).toBe('late but whole');
    } finally {
      srv.closeAllConnections();
      await new Promise<void>((r) => srv.close(() => r()));
    }
  }, 60_000);
});
