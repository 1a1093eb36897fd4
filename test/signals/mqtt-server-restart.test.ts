/**
 * Full server in a child process with the MQTT channel, a real mosquitto broker, and a simulated
 * dryer batch judged by the deployed model: the server is killed (SIGKILL) mid-batch and started
 * again; the analyzer resends what was not acked. The subscriber must receive every outbox event,
 * exactly once per id (a duplicate only with the same id and body), per unit in seq order without
 * gaps, and the endpoint 'done' exactly once. The last will turns the status offline at the kill.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import mqtt from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { Peer, analyzerToken } from '../server/helpers.ts';
import { mosquittoPath, startMosquitto, type Broker } from './helpers/mosquitto.ts';

const root = join(import.meta.dirname, '..', '..');
const haveMonitor = ['core/model/monitoring-model.ts', 'core/monitor/batch-monitor.ts'].every((f) => existsSync(join(root, f)));
if (!mosquittoPath) console.warn('mqtt server restart test skipped: mosquitto is not installed (apt-get install mosquitto)');
if (!haveMonitor) console.warn('mqtt server restart test skipped: the core batch monitor is not in this checkout yet');

async function until(cond: () => boolean, what: string, ms = 60_000): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

describe.skipIf(!mosquittoPath || !haveMonitor)('MQTT across a server kill and restart mid-batch', () => {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-mqtt-e2e-'));
  const children: ChildProcess[] = [];
  let broker: Broker;

  beforeAll(async () => {
    broker = await startMosquitto();
  });
  afterAll(() => {
    for (const c of children) if (c.exitCode === null && c.signalCode === null) c.kill('SIGKILL');
    broker?.stop();
  });

  function startChild(configFile: string): Promise<{ child: ChildProcess; url: string }> {
    const child = spawn(process.execPath, ['--import', 'tsx', join(root, 'server', 'cli.ts'), 'serve', '--config', configFile, '--port', '0', '--data-dir', dir, '--web-dir', 'none', '--log-level', 'error'], {
      cwd: root,
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    children.push(child);
    return new Promise((resolve, reject) => {
      let out = '';
      let err = '';
      const timer = setTimeout(() => reject(new Error(`server did not start: ${out} ${err}`)), 120_000);
      child.stderr!.on('data', (d) => (err += d));
      child.stdout!.on('data', (d) => {
        out += d;
        const m = /running at (http:\/\/[^\s/]+)/.exec(out);
        if (m) {
          clearTimeout(timer);
          resolve({ child, url: m[1]! });
        }
      });
      child.on('exit', (code) => reject(new Error(`server exited with ${code}: ${err}`)));
    });
  }

  it('every event exactly once per id', async () => {
    const { buildSmallDryerModel, installModel } = await import('../server/model-fixture.ts');
    const { model, text } = buildSmallDryerModel();
    const setup = new SqliteStorage({ file: join(dir, 'tideline.db') });
    await setup.createUnit({ id: 'dryer-1', name: 'Dryer 1', kind: 'dryer', description: '', createdAt: 0 });
    const token = await analyzerToken(setup, 'nir-mqtt');
    await installModel(setup, text, model, 'dryer-1');
    await setup.close();
    const configFile = join(dir, 'tideline.json');
    writeFileSync(configFile, JSON.stringify({ signals: { pollMs: 20, mqtt: { url: broker.url, clientId: 'tideline-e2e', stateEveryMs: 200, keepaliveS: 5 } } }));

    const received: string[] = [];
    const statuses: { online: boolean }[] = [];
    const sub = mqtt.connect(broker.url, { clientId: 'plant-historian', clean: true });
    await new Promise<void>((resolve, reject) => {
      sub.once('connect', () => sub.subscribe(['tideline/v1/units/+/events', 'tideline/v1/status'], { qos: 1 }, (e) => (e ? reject(e) : resolve())));
      sub.once('error', reject);
    });
    sub.on('message', (topic, payload) => {
      if (topic === 'tideline/v1/status') statuses.push(JSON.parse(payload.toString()));
      else received.push(payload.toString());
    });

    const batch = simulateDryerBatch({ seed: 99, id: 'B-mqtt', intervalS: 30 });
    const n = batch.spectra.length;
    const BOOT = 4242;
    const sendFrom = (p: Peer, from: number, to = n + 1) => {
      for (let seq = from; seq <= to; seq++) {
        if (seq === 0) p.send({ type: 'batch-start', seq: 0, t: batch.start, unit: 'dryer-1', batch: 'B-mqtt', product: 'granule A' });
        else if (seq <= n) p.sendFrame(seq, batch.times[seq - 1]!, batch.spectra[seq - 1]!);
        else p.send({ type: 'batch-end', seq, t: batch.times[n - 1]! + 1000, batch: 'B-mqtt' });
      }
    };

    const first = await startChild(configFile);
    const p = new Peer(first.url.replace('http', 'ws'), token);
    await p.open();
    expect((await p.hello('nir-mqtt', BOOT, batch.axis)).resumeAfter).toBe(-1);
    // stream in chunks until several events have reached the subscriber, but stop well before the end
    let sent = -1;
    while (sent < Math.floor((2 * n) / 3)) {
      const to = Math.min(sent + 10, n);
      sendFrom(p, sent + 1, to);
      sent = to;
      await p.waitAck(sent, 60_000);
      await new Promise((r) => setTimeout(r, 100));
      if (received.length >= 4) break;
    }
    await until(() => received.length >= 1, 'first events at the subscriber');
    sendFrom(p, sent + 1, n); // more in flight (never batch-end) while the server dies
    first.child.kill('SIGKILL');
    await p.waitClose(30_000);
    const acked = Math.max(...p.messages.filter((m) => m.type === 'ack').map((m) => m.seq as number));
    expect(acked).toBeLessThan(n + 1); // killed mid-batch
    await until(() => statuses.some((s) => s.online === false), 'the last-will offline status');
    const beforeRestart = received.length;

    const second = await startChild(configFile);
    const q = new Peer(second.url.replace('http', 'ws'), token);
    await q.open();
    const w = await q.hello('nir-mqtt', BOOT, batch.axis);
    sendFrom(q, Math.max(0, w.resumeAfter - 3));
    await q.waitAck(n + 1, 90_000);
    q.close();
    await until(() => statuses[statuses.length - 1]?.online === true, 'online again');

    // wait until the channel has delivered the whole outbox
    const db = new Database(join(dir, 'tideline.db'), { readonly: true });
    const outbox = () => db.prepare('SELECT id, unit, unit_seq, type, payload FROM outbox ORDER BY unit, unit_seq').all() as { id: string; unit: string; unit_seq: number; type: string; payload: string }[];
    const cursor = () => (db.prepare("SELECT last_seq FROM signal_cursor WHERE channel = 'mqtt' AND unit = 'dryer-1'").get() as { last_seq: number } | undefined)?.last_seq ?? 0;
    await until(() => {
      const rows = outbox();
      return rows.some((r) => r.type === 'batch-end') && cursor() === rows[rows.length - 1]!.unit_seq;
    }, 'the MQTT cursor at the end of the outbox', 90_000);
    const rows = outbox();
    db.close();
    await until(() => new Set(received.map((r) => JSON.parse(r).id)).size >= rows.length, 'every event at the subscriber');

    const byId = new Map<string, string>();
    for (const r of received) {
      const id = (JSON.parse(r) as { id: string }).id;
      if (byId.has(id)) expect(r).toBe(byId.get(id));
      byId.set(id, r);
    }
    expect([...byId.keys()].sort()).toEqual(rows.map((r) => r.id).sort());
    const firstSeen: number[] = [];
    for (const r of received) {
      const e = JSON.parse(r) as { seq: number };
      if (!firstSeen.includes(e.seq)) firstSeen.push(e.seq);
    }
    expect(firstSeen).toEqual(rows.map((r) => r.unit_seq));
    expect(rows.map((r) => r.unit_seq)).toEqual(Array.from({ length: rows.length }, (_, i) => i + 1));
    const types = [...byId.values()].map((r) => JSON.parse(r) as { type: string; payload: { to?: string } });
    expect(types.filter((e) => e.type === 'endpoint-state' && e.payload.to === 'done')).toHaveLength(1);
    expect(types.filter((e) => e.type === 'batch-start')).toHaveLength(1);
    console.log(`mqtt e2e: ${rows.length} events (${types.map((e) => e.type).join(', ')}); ${beforeRestart} received before the kill; ${received.length - byId.size} duplicate(s) with the same id`);

    second.child.kill('SIGTERM');
    await new Promise((r) => second.child.once('exit', r));
    await until(() => statuses[statuses.length - 1]!.online === false, 'offline after a clean stop');
    sub.end(true);
  }, 240_000);
});
