/**
 * A dispatcher never moves past a row that is not yet committed: rows 1, 2 and 5 of a unit are in
 * the outbox, 3 and 4 still on their way. Delivery stops after 2; when 3 and 4 arrive, all five
 * are delivered in order. A gap that stands longer than gapWaitMs (rows that will never come, e.g.
 * from a database an older version wrote) is reported and passed, so one lost row cannot stop a
 * channel for good. Real signal repository on SQLite; the clock is the test's.
 */
import { randomUUID } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { SignalDispatcher, type SignalChannel } from '../../server/signals/dispatcher.ts';
import { type SignalEnvelope } from '../../server/signals/outbox-store.ts';
import { SqliteSignalRepository } from '../../server/storage/sqlite-signals.ts';
import { openSignalDb } from './helpers/outbox-db.ts';

/** Let the dispatcher's own loop run a few more passes (it polls every 5 ms). */
const passes = () => new Promise((r) => setTimeout(r, 100));

async function until(cond: () => boolean, what: string, ms = 20_000): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 10));
  }
}

function insert(db: ReturnType<typeof openSignalDb>, unit: string, seq: number) {
  db.prepare('INSERT INTO outbox (id, unit, unit_seq, type, payload, created_at) VALUES (?, ?, ?, ?, ?, ?)').run(randomUUID(), unit, seq, 'alarm', JSON.stringify({ n: seq }), 1000 + seq);
}

function setup() {
  const db = openSignalDb();
  const store = new SqliteSignalRepository(db);
  const got: [string, number][] = [];
  const channel: SignalChannel = { name: 'rec', maxAttempts: 3, deliver: async (e: SignalEnvelope) => void got.push([e.unit, e.seq]) };
  let now = 1_000_000;
  const gaps: [string, number, number, number][] = [];
  const d = new SignalDispatcher(store, channel, { pollMs: 5, now: () => now, gapWaitMs: 5000, onGap: (_c, unit, from, to, waited) => void gaps.push([unit, from, to, waited]) });
  d.start();
  return { db, got, gaps, d, tick: (ms: number) => (now += ms) };
}

describe('signal delivery at a gap in a unit seq', () => {
  it('stops before a missing row and delivers it, in order, when it is committed', async () => {
    const { db, got, gaps, d } = setup();
    for (const s of [1, 2, 5]) insert(db, 'u1', s);
    insert(db, 'u2', 1);
    await until(() => got.length >= 3, 'u1 #1, #2 and u2 #1 delivered');
    await passes();
    expect(got.filter(([u]) => u === 'u1')).toEqual([['u1', 1], ['u1', 2]]);
    insert(db, 'u1', 3);
    insert(db, 'u1', 4);
    await until(() => got.length >= 6, 'u1 #3 to #5 delivered');
    expect(got.filter(([u]) => u === 'u1').map(([, s]) => s)).toEqual([1, 2, 3, 4, 5]);
    expect(gaps).toEqual([]);
    expect(d.stats.gaps).toBe(0);
    await d.stop();
  });

  it('goes on past a gap that stood longer than gapWaitMs, reporting it once', async () => {
    const { db, got, gaps, d, tick } = setup();
    for (const s of [1, 2, 5, 6]) insert(db, 'u1', s);
    await until(() => got.length >= 2, 'u1 #1 and #2 delivered');
    await passes();
    tick(4999);
    await passes();
    expect(got.map(([, s]) => s)).toEqual([1, 2]);
    tick(1);
    await until(() => got.length >= 4, 'u1 #5 and #6 delivered');
    expect(got.map(([, s]) => s)).toEqual([1, 2, 5, 6]);
    expect(gaps).toEqual([['u1', 3, 4, 5000]]);
    expect(d.stats.gaps).toBe(1);
    await d.stop();
  });
});
