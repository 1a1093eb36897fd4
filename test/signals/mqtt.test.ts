/**
 * MQTT delivery against a real Eclipse Mosquitto broker (Debian package `mosquitto`): the publishing
 * process is killed (SIGKILL) mid-batch and started again; the subscriber must receive every event
 * at least once, duplicates only with the same id and body, per-unit seq in order of first arrival;
 * the retained status goes offline through the last will and online again; the retained state
 * follows the last event.
 */
import { spawn } from 'node:child_process';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import mqtt from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mosquittoPath, startMosquitto, type Broker } from './helpers/mosquitto.ts';
import { openSignalDb } from './helpers/outbox-db.ts';

if (!mosquittoPath) console.warn('mqtt test skipped: mosquitto is not installed (apt-get install mosquitto)');

async function until(cond: () => boolean, what: string, ms = 30_000): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

const FIXTURE = join(import.meta.dirname, 'fixtures/mqtt-batch-process.ts');

describe.skipIf(!mosquittoPath)('MQTT channel against mosquitto', () => {
  let broker: Broker;
  let url: string;
  const dir = mkdtempSync(join(tmpdir(), 'tideline-mqtt-'));

  beforeAll(async () => {
    broker = await startMosquitto();
    url = broker.url;
  });

  afterAll(() => {
    broker?.stop();
  });

  it('every event exactly once per id across a kill and restart mid-batch', async () => {
    const perUnit = 40;
    const dbPath = join(dir, 'signals.db');
    const received: { topic: string; body: string }[] = [];
    const statuses: { online: boolean }[] = [];
    const sub = mqtt.connect(url, { clientId: 'dcs-historian', clean: true });
    await new Promise<void>((resolve, reject) => {
      sub.once('connect', () => sub.subscribe(['tideline/v1/units/+/events', 'tideline/v1/status'], { qos: 1 }, (err) => (err ? reject(err) : resolve())));
      sub.once('error', reject);
    });
    sub.on('message', (topic, payload) => {
      if (topic === 'tideline/v1/status') statuses.push(JSON.parse(payload.toString()));
      else received.push({ topic, body: payload.toString() });
    });

    const run = () => {
      const child = spawn(process.execPath, ['--import', 'tsx', FIXTURE, dbPath, url, String(perUnit), '40'], { stdio: ['ignore', 'pipe', 'pipe'], cwd: join(import.meta.dirname, '../..') });
      let out = '';
      let err = '';
      child.stdout!.on('data', (d: Buffer) => (out += d.toString()));
      child.stderr!.on('data', (d: Buffer) => (err += d.toString()));
      return { child, out: () => out, err: () => err };
    };

    const first = run();
    await until(() => /written (2[4-9]|3\d)\b/.test(first.out()), `first process to write about a third of the batch (stderr: ${first.err()})`);
    first.child.kill('SIGKILL');
    await new Promise((r) => first.child.once('exit', r));
    const before = received.length;
    await until(() => statuses.some((s) => s.online === false), 'the last-will offline status');
    expect(before).toBeGreaterThan(0);

    const second = run();
    try {
      await until(() => second.out().includes('drained'), `second process to drain the outbox (stderr: ${second.err()})`, 60_000);
      await until(() => statuses.length > 0 && statuses[statuses.length - 1]!.online === true, 'online status after restart');

      const db = openSignalDb(dbPath);
      const rows = db.prepare('SELECT id, unit, unit_seq FROM outbox ORDER BY unit, unit_seq').all() as { id: string; unit: string; unit_seq: number }[];
      db.close();
      expect(rows).toHaveLength(2 * perUnit);
      await until(() => new Set(received.map((r) => JSON.parse(r.body).id)).size >= rows.length, 'all events at the subscriber');

      const byId = new Map<string, string>();
      for (const r of received) {
        const e = JSON.parse(r.body) as { id: string; unit: string; seq: number };
        expect(r.topic).toBe(`tideline/v1/units/${e.unit}/events`);
        if (byId.has(e.id)) expect(r.body).toBe(byId.get(e.id)); // a duplicate is the same event
        byId.set(e.id, r.body);
      }
      expect([...byId.keys()].sort()).toEqual(rows.map((r) => r.id).sort());
      const duplicates = received.length - byId.size;
      expect(duplicates).toBeLessThanOrEqual(2); // at most the in-flight event per unit at the kill
      for (const unit of ['dryer-1', 'dryer-2']) {
        const firstSeen: number[] = [];
        for (const r of received) {
          const e = JSON.parse(r.body) as { unit: string; seq: number };
          if (e.unit === unit && !firstSeen.includes(e.seq)) firstSeen.push(e.seq);
        }
        expect(firstSeen).toEqual(Array.from({ length: perUnit }, (_, i) => i + 1));
      }

      // retained state: a fresh subscriber gets the last state of each unit at once
      const late = mqtt.connect(url, { clean: true });
      const state = await new Promise<Record<string, unknown>>((resolve, reject) => {
        late.once('connect', () => late.subscribe('tideline/v1/units/dryer-1/state', { qos: 1 }));
        late.on('message', (_t, p) => resolve(JSON.parse(p.toString())));
        late.once('error', reject);
      });
      late.end(true);
      expect(state).toMatchObject({ unit: 'dryer-1', batch: 'dryer-1-B1', batchActive: false, lastEventSeq: perUnit });
      expect((state.endpoint as { reached: boolean }).reached).toBe(true);

      // a graceful stop publishes the retained offline status itself
      const exited = new Promise((r) => second.child.once('exit', r));
      second.child.kill('SIGTERM');
      await exited;
      await until(() => statuses[statuses.length - 1]!.online === false, 'offline status after a graceful stop');
    } finally {
      if (second.child.exitCode === null && second.child.signalCode === null) {
        const exited = new Promise((r) => second.child.once('exit', r));
        second.child.kill('SIGKILL');
        await exited;
      }
      sub.end(true);
    }
  }, 180_000);
});
