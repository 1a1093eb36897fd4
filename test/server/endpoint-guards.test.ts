/**
 * Run-time guards of the endpoint through the public paths: a deployed model judges batches streamed
 * over /ingest; the endpoint is 'held' (never 'done') while a confirmed T² alarm stands, and while the
 * batch is younger than the rule's minimum time; the held state and its reasons reach the outbox,
 * MQTT (events and the retained unit state), OPC UA (EndpointState, EndpointHeld,
 * EndpointHoldReasons), a webhook receiver, the /live stream and the REST results.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import mqtt from 'mqtt';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { connectClient, type TestClient } from '../signals/helpers/opcua-client.ts';
import { simulateDryerBatch, simulateReferenceSet, type SimulatedBatch } from '../../simulators/batch.ts';
import { buildMonitoringModel, serializeMonitoringModel } from '../../core/model/monitoring-model.ts';
import { installModel } from './model-fixture.ts';
import { LivePeer, login, Peer, startTestServer, type TestServer, sqliteDb, analyzerToken } from './helpers.ts';
import { mosquittoPath, startMosquitto, type Broker } from '../signals/helpers/mosquitto.ts';

async function until(cond: () => boolean, what: string, ms = 30_000): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

type Hold = { code: string; text: string };
type Outbox = { unit_seq: number; type: string; payload: string };

describe.skipIf(!mosquittoPath)('endpoint guards through /ingest', () => {
  let broker: Broker;
  let ts: TestServer;
  let sub: mqtt.MqttClient;
  let receiver: Server;
  let opc: TestClient;
  const hooks: { type: string; unit: string; payload: Record<string, unknown> }[] = [];
  const mqttEvents: { topic: string; body: { type: string; payload: Record<string, unknown> } }[] = [];
  const mqttState = new Map<string, { endpoint: { state: string; holds?: Hold[] } }>();
  const refs = simulateReferenceSet('dryer', 4, 11, { intervalS: 60 });
  const data = refs.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values }));
  const base = { author: 'test', createdAt: 0, components: 3, property: { name: 'moisture', unit: '% w/w', components: 3, target: 2, direction: 'below' } };

  beforeAll(async () => {
    broker = await startMosquitto();
    receiver = createServer((req, res) => {
      const chunks: Buffer[] = [];
      req.on('data', (c: Buffer) => chunks.push(c));
      req.on('end', () => {
        hooks.push(JSON.parse(Buffer.concat(chunks).toString()));
        res.writeHead(200).end();
      });
    });
    await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
    const hookUrl = `http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hook`;
    ts = await startTestServer({
      signals: {
        pollMs: 20,
        mqtt: { url: broker.url, clientId: 'tideline-guards', stateEveryMs: 200, keepaliveS: 5 },
        opcua: { port: 0, securityModes: ['None'], allowAnonymous: true, heartbeatMs: 200 },
        webhooks: [{ name: 'mes', url: hookUrl, secret: 'endpoint-guards-secret-0123456789', backoff: { baseMs: 20, capMs: 200 } }],
      },
    } as never, { units: ['dryer-1', 'dryer-2'] });
    const admin = await login(ts, 'administrator');
    opc = await connectClient((await admin.get('/api/signals')).body.opcua.endpointUrl);
    sub = mqtt.connect(broker.url, { clientId: 'guards-test-sub' });
    await new Promise<void>((r) => sub.once('connect', () => r()));
    await new Promise<void>((r, j) => sub.subscribe('tideline/v1/units/+/#', { qos: 1 }, (e) => (e ? j(e) : r())));
    sub.on('message', (topic, buf) => {
      const body = JSON.parse(buf.toString());
      if (topic.endsWith('/events')) mqttEvents.push({ topic, body });
      else if (topic.endsWith('/state')) mqttState.set(topic.split('/')[3]!, body);
    });
  }, 180_000);

  afterAll(async () => {
    await new Promise<void>((r) => (sub ? sub.end(true, {}, () => r()) : r()));
    await opc?.close();
    await new Promise<void>((r) => (receiver ? receiver.close(() => r()) : r()));
    await ts?.stop();
    broker?.stop();
  });

  async function stream(unit: string, analyzer: string, b: SimulatedBatch): Promise<void> {
    const token = analyzer === 'nir-1' ? ts.token : await analyzerToken(ts.server.ctx.storage, analyzer);
    const peer = new Peer(ts.wsUrl, token);
    await peer.open();
    expect((await peer.hello(analyzer, 1, b.axis)).type).toBe('welcome');
    peer.send({ type: 'batch-start', seq: 1, t: b.start, unit, batch: b.id, product: 'granule A' });
    const n = b.spectra.length;
    for (let i = 0; i < n; i++) peer.sendFrame(2 + i, b.times[i]!, b.spectra[i]!);
    peer.send({ type: 'batch-end', seq: n + 2, t: b.times[n - 1]! + 1000, batch: b.id });
    await peer.waitAck(n + 2, 120_000);
    peer.close();
  }

  function outbox(unit: string): Outbox[] {
    const db = sqliteDb(ts.server.ctx.storage);
    return db.prepare('SELECT unit_seq, type, payload FROM outbox WHERE unit = ? ORDER BY unit_seq').all(unit) as Outbox[];
  }
  const endpointEvents = (unit: string) => outbox(unit).filter((r) => r.type === 'endpoint-state').map((r) => JSON.parse(r.payload) as { from: string; to: string; reason: string; holds?: Hold[]; t: number });

  it("a standing T² alarm holds the endpoint ('alarm'); never done; held on the outbox, MQTT, /live and REST", async () => {
    const model = buildMonitoringModel(data, { ...base, name: 'dryer-guards', product: 'granule A' });
    await installModel(ts.server.ctx.storage, serializeMonitoringModel(model), model, 'dryer-1');
    await ts.server.ctx.ingest.refreshDeployment('dryer-1');
    const session = await login(ts, 'viewer');
    const live = new LivePeer(ts.wsUrl, session.cookie);
    await live.open();
    live.send({ type: 'subscribe', id: 'u', scope: { kind: 'unit', unit: 'dryer-1' } });
    await live.until((m) => m.type === 'snapshot');

    // The lamp dims from 30 min on: T², Q and the envelope leave their limits and stay out while the
    // moisture prediction still falls through its 2 % w/w target — the rule alone would call it done.
    const b = simulateDryerBatch({ seed: 21, id: 'B-lamp', intervalS: 60, faults: [{ type: 'lamp-ageing', onsetS: 1800, params: { lossPerHour: 1 } }] });
    await stream('dryer-1', 'nir-1', b);

    const ev = endpointEvents('dryer-1');
    expect(ev.map((e) => e.to)).not.toContain('done');
    const held = ev.find((e) => e.to === 'held')!;
    expect(held).toBeDefined();
    expect(held.reason).toMatch(/^rule met and confirmed over 3 spectra at [\d.]+ min; held: /);
    const t2 = held.holds!.find((h) => h.code === 'alarm' && h.text.startsWith('T² alarm standing since'));
    expect(t2, JSON.stringify(held.holds)).toBeDefined();
    // the alarm is one the alarm list shows: a T² condition raised before the hold and not cleared
    const conds = outbox('dryer-1').filter((r) => r.type === 'condition').map((r) => JSON.parse(r.payload) as { change: { key: string; active: boolean }; t: number });
    const t2Changes = conds.filter((c) => c.change.key === 't2');
    expect(t2Changes[0]!.change.active).toBe(true);
    expect(t2Changes[0]!.t).toBeLessThanOrEqual(held.t);
    expect(t2Changes.some((c) => !c.change.active)).toBe(false);
    const end = outbox('dryer-1').find((r) => r.type === 'batch-end')!;
    expect(JSON.parse(end.payload)).toMatchObject({ endpointState: 'held', endpointAt: null });

    // MQTT: the same events, and the retained unit state says held with its reasons
    await until(() => mqttEvents.some((m) => m.topic.endsWith('dryer-1/events') && m.body.type === 'batch-end'), 'the batch end on MQTT');
    const mq = mqttEvents.filter((m) => m.topic.endsWith('dryer-1/events') && m.body.type === 'endpoint-state').map((m) => m.body.payload);
    expect(mq.map((p) => p.to)).toEqual(ev.map((e) => e.to));
    expect(mq.find((p) => p.to === 'held')!.holds).toEqual(held.holds);
    await until(() => mqttState.get('dryer-1')?.endpoint.state === 'held', 'retained state held');
    expect(mqttState.get('dryer-1')!.endpoint.holds!.some((h) => h.code === 'alarm')).toBe(true);

    // OPC UA: the state, the held flag and the reasons, one per line
    const P = (name: string) => `/Objects/1:Tideline/1:dryer-1/1:${name}`;
    for (let i = 0; i < 400 && (await opc.read(P('EndpointState'))).value.value !== 'held'; i++) await new Promise((r) => setTimeout(r, 50));
    expect((await opc.read(P('EndpointState'))).value.value).toBe('held');
    expect((await opc.read(P('EndpointHeld'))).value.value).toBe(true);
    expect((await opc.read(P('EndpointReached'))).value.value).toBe(false);
    const reasons = String((await opc.read(P('EndpointHoldReasons'))).value.value).split('\n');
    expect(reasons.some((l) => l.startsWith('alarm: T² alarm standing since'))).toBe(true);

    // webhook: the held event with its reasons
    await until(() => hooks.some((h) => h.unit === 'dryer-1' && h.type === 'batch-end'), 'the batch end on the webhook');
    expect(hooks.find((h) => h.unit === 'dryer-1' && h.type === 'endpoint-state' && h.payload.to === 'held')!.payload.holds).toEqual(held.holds);

    // /live: the endpoint change to held with the status and its holds
    const lm = await live.until((m) => m.type === 'endpoint' && m.to === 'held');
    expect(lm.endpoint.holds.map((h: Hold) => h.code)).toContain('alarm');
    live.ws.close();

    // REST: the stored results carry the held state and its reasons
    const admin = await login(ts, 'administrator');
    const res = await admin.get('/api/batches/B-lamp/results?limit=1000');
    expect(res.status).toBe(200);
    const items = (res.body.items ?? res.body.results ?? res.body) as { endpoint: { state: string; holds?: Hold[] } }[];
    const heldResults = items.filter((r) => r.endpoint.state === 'held');
    expect(heldResults.length).toBeGreaterThan(0);
    expect(heldResults.every((r) => r.endpoint.holds!.length > 0)).toBe(true);
  }, 300_000);

  it("a batch meeting the rule before the minimum time is held ('min-elapsed'), then done once past it", async () => {
    const probe = simulateDryerBatch({ seed: 22, id: 'B-early', intervalS: 60 });
    const truthMin = (probe.times[probe.truth.endpointIndex!]! - probe.start) / 60000;
    const minElapsedMin = Math.round(truthMin + 5);
    // The alarm guard is switched off in this rule (hold.alarms false) to see the minimum time alone:
    // with four reference batches this batch carries a standing PC1 envelope alarm from 30 min on,
    // which would hold it to the end.
    const model = buildMonitoringModel(data, { ...base, name: 'dryer-guards-min', product: 'granule A', endpoint: { criteria: [{ kind: 'property' }], combine: 'all', confirm: 3, nearingMin: 10, minElapsedMin, hold: { alarms: false } } });
    const versionId = await installModel(ts.server.ctx.storage, serializeMonitoringModel(model), model, 'dryer-2');
    await ts.server.ctx.ingest.refreshDeployment('dryer-2');
    // the version page's rule names its guards and hysteresis
    const detail = await (await login(ts, 'viewer')).get(`/api/models/versions/${versionId}`);
    expect(detail.status).toBe(200);
    expect(detail.body.endpoint).toMatchObject({ minElapsedMin, minElapsedMethod: 'set by the model owner', hold: { alarms: false, extrapolation: true }, hysteresis: 3 });
    // deploying it where a version with both guards runs (dryer-1, the test above) names the switched-off guard
    const preview = await (await login(ts, 'administrator')).get(`/api/deployments/preview?unit=dryer-1&versionId=${versionId}`);
    expect(preview.status).toBe(200);
    expect(preview.body.comparison.changes.find((c: { what: string }) => c.what === 'endpoint guards')).toMatchObject({
      before: 'held for standing alarm and prediction outside its calibration; hysteresis 3 spectra',
      after: 'held for prediction outside its calibration; hysteresis 3 spectra',
    });
    expect(preview.body.comparison.warnings).toContain('dryer-guards-min v1 switches off the alarm guard: its endpoint may be called done while a confirmed T², Q or envelope alarm stands.');
    await stream('dryer-2', 'nir-2', probe);

    const ev = endpointEvents('dryer-2');
    const to = ev.map((e) => e.to);
    expect(to.indexOf('held')).toBeGreaterThan(-1);
    expect(to.indexOf('held')).toBeLessThan(to.indexOf('done'));
    const held = ev.find((e) => e.to === 'held')!;
    expect(held.holds).toEqual([{ code: 'min-elapsed', text: `no endpoint before ${minElapsedMin.toFixed(2)} min from the batch start (set by the model owner)` }]);
    expect((held.t - probe.start) / 60000).toBeLessThan(minElapsedMin);
    const done = ev.find((e) => e.to === 'done')!;
    const doneMin = (done.t - probe.start) / 60000;
    // done at the first spectrum at or past the minimum (1 min apart)
    expect(doneMin).toBeGreaterThanOrEqual(minElapsedMin);
    expect(doneMin).toBeLessThan(minElapsedMin + 1);
    expect(done.holds).toEqual([]);
    await until(() => mqttEvents.some((m) => m.topic.endsWith('dryer-2/events') && m.body.type === 'endpoint-state' && m.body.payload.to === 'held'), 'held on MQTT');
    const mqHeld = mqttEvents.find((m) => m.topic.endsWith('dryer-2/events') && m.body.payload.to === 'held')!;
    expect(mqHeld.body.payload.holds).toEqual(held.holds);
    // the batch ends with its endpoint at the 'done' spectrum, not at the held one
    const end = JSON.parse(outbox('dryer-2').find((r) => r.type === 'batch-end')!.payload);
    expect(end.endpointAt).toBe(done.t);
    expect(['done', 'signalled']).toContain(end.endpointState);
  }, 300_000);
});
