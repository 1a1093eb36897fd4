/**
 * Import and export against a running server: a simulated faulty dryer batch streamed over
 * the ingest protocol, exported as CSV and JCAMP-DX, imported back under new ids (values identical at
 * Float32 precision), malformed imports refused whole, and a PDF report of the faulty batch checked with
 * poppler-utils' pdftotext and pdfinfo.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, writeFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { chromiumPath } from '../../server/transfer/report-pdf.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from '../server/helpers.ts';
import { buildSmallDryerModel, installModel } from '../server/model-fixture.ts';

let ts: TestServer;
let owner: Session;
let viewer: Session;
const fixture = buildSmallDryerModel(11);
// A batch with off-spec raw material from minute 20 (simulators/faults.ts), every 60 s of process time.
const faulty = simulateDryerBatch({ seed: 901, id: 'D-FAULT-1', intervalS: 60, faults: [{ type: 'wrong-material', onsetS: 20 * 60 }] });

async function spectra(s: Session, batch: string) {
  const r = await s.get(`/api/batches/${batch}/spectra?limit=20000`);
  expect(r.status).toBe(200);
  return r.body as { axis: number[]; items: { seq: number; t: number; values: number[] }[] };
}
const batchCount = async () => (await viewer.get('/api/batches?limit=500')).body.total as number;

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  await installModel(ts.server.ctx.storage, fixture.text, fixture.model, 'dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  owner = await login(ts, 'model-owner');
  viewer = await login(ts, 'viewer');
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  await p.hello('nir-1', 7, faulty.axis);
  let seq = 0;
  p.send({ type: 'batch-start', seq: seq++, t: faulty.start, unit: 'dryer-1', batch: faulty.id, product: 'granule A' });
  for (let i = 0; i < faulty.spectra.length; i++) p.sendFrame(seq++, faulty.times[i]!, faulty.spectra[i]!);
  p.send({ type: 'batch-end', seq: seq++, t: faulty.times[faulty.times.length - 1]! + 1, batch: faulty.id });
  await p.waitAck(seq - 1, 60_000);
  p.close();
}, 180_000);
afterAll(async () => {
  await ts?.stop();
});

describe('export and import round trip', () => {
  it('CSV export imports back with identical values', async () => {
    const csv = (await viewer.get(`/api/batches/${faulty.id}/export.csv`)).body as string;
    const r = await owner.post('/api/import', { unit: 'dryer-1', product: 'granule A', files: [{ name: 'D-RT-CSV.csv', content: csv }] });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    expect(r.body.batches).toMatchObject([{ id: 'D-RT-CSV', spectra: faulty.spectra.length }]);
    const a = await spectra(viewer, faulty.id);
    const b = await spectra(viewer, 'D-RT-CSV');
    expect(b.axis).toEqual(a.axis);
    expect(b.items.map((x) => x.t)).toEqual(a.items.map((x) => x.t));
    b.items.forEach((x, i) => expect(x.values).toEqual(a.items[i]!.values));
  });

  it('JCAMP-DX export imports back with identical values', async () => {
    const jdx = (await viewer.get(`/api/batches/${faulty.id}/export.jdx`)).body as string;
    expect(jdx).toMatch(/^##TITLE=D-FAULT-1/);
    const renamed = jdx.replaceAll('D-FAULT-1', 'D-RT-JDX');
    const r = await owner.post('/api/import', { unit: 'dryer-1', product: 'granule A', files: [{ name: 'rt.jdx', content: renamed }] });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    const a = await spectra(viewer, faulty.id);
    const b = await spectra(viewer, 'D-RT-JDX');
    b.axis.forEach((x, i) => expect(x).toBeCloseTo(a.axis[i]!, 9));
    b.items.forEach((x, i) => expect(x.values).toEqual(a.items[i]!.values));
  });

  it('refuses a malformed file whole, naming file, line and reason, and imports nothing', async () => {
    const before = await batchCount();
    const good = 'batch,time_s,1000,1010,1020\nOK-1,0,1,2,3\n';
    const bad = 'batch,time_s,1000,1010,1020\nBAD-1,0,1,2,3\nBAD-1,10,1,x,3\n';
    const r = await owner.post('/api/import', { unit: 'dryer-1', product: 'granule A', files: [{ name: 'good.csv', content: good }, { name: 'bad.csv', content: bad }] });
    expect(r.status).toBe(422);
    expect(r.type).toContain('application/problem+json');
    expect(r.body.detail).toMatch(/bad\.csv, line 3: the value at 1010 .*"x" is not a number\. Nothing was imported\./);
    expect(await batchCount()).toBe(before);
  });

  it('refuses mixed axes, an unknown unit, a batch already in the record, and a viewer', async () => {
    const f = (id: string, axis: string) => ({ name: `${id}.csv`, content: `batch,time_s,${axis}\n${id},0,1,2,3\n` });
    let r = await owner.post('/api/import', { unit: 'dryer-1', product: 'p', files: [f('M-1', '1000,1010,1020'), f('M-2', '1000,1010,1030')] });
    expect(r.status).toBe(422);
    expect(r.body.detail).toMatch(/different wavelength axis/);
    r = await owner.post('/api/import', { unit: 'no-such-unit', product: 'p', files: [f('M-3', '1000,1010,1020')] });
    expect(r.body.detail).toMatch(/unit "no-such-unit" is not known/);
    r = await owner.post('/api/import', { unit: 'dryer-1', product: 'p', files: [f(faulty.id, '1000,1010,1020')] });
    expect(r.body.detail).toMatch(/already in the record/);
    r = await viewer.post('/api/import', { unit: 'dryer-1', product: 'p', files: [f('M-4', '1000,1010,1020')] });
    expect(r.status).toBe(403);
  });

  it('resamples onto a model axis and refuses a file that does not cover it', async () => {
    const version = (await viewer.get('/api/deployments?unit=dryer-1')).body.items[0].model.versionId as string;
    const ax = fixture.axis;
    const wide = Array.from({ length: 60 }, (_, i) => ax[0]! - 5 + (i * (ax[ax.length - 1]! - ax[0]! + 10)) / 59);
    const row = (k: number) => wide.map((x) => (0.5 + 0.001 * x * (1 + k / 10)).toFixed(6)).join(',');
    const content = `batch,time_s,${wide.join(',')}\nRS-1,0,${row(0)}\nRS-1,60,${row(1)}\n`;
    let r = await owner.post('/api/import', { unit: 'dryer-1', product: 'p', resampleToModel: version, files: [{ name: 'rs.csv', content }] });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    const s = await spectra(viewer, 'RS-1');
    expect(s.axis).toEqual(ax);
    // Linear data resample exactly (up to Float32): value = 0.5 + 0.001·λ.
    s.items[0]!.values.forEach((v, i) => expect(v).toBeCloseTo(0.5 + 0.001 * ax[i]!, 5));
    const narrow = `batch,time_s,${ax.slice(5).join(',')}\nRS-2,0,${ax.slice(5).map(() => 1).join(',')}\n`;
    r = await owner.post('/api/import', { unit: 'dryer-1', product: 'p', resampleToModel: version, files: [{ name: 'narrow.csv', content: narrow }] });
    expect(r.status).toBe(422);
    expect(r.body.detail).toMatch(/narrow\.csv: batch RS-2: the file's axis .* does not cover the model's .*does not extrapolate/);
  });

  it('names the envelope progress axis in words that match its numbers', async () => {
    const version = (await viewer.get('/api/deployments?unit=dryer-1')).body.items[0].model.versionId as string;
    const env = (await viewer.get(`/api/models/versions/${version}/envelope`)).body;
    const axis = (fixture.model.envelope as unknown as { axis: { kind: string; sign: number } }).axis;
    if (axis.kind === 'time') expect(env.progressUnit).toBe('min');
    else expect(env.progressUnit).toBe(axis.sign < 0 ? '−predicted moisture, % w/w' : 'predicted moisture, % w/w');
  });

  it('serves the stored model file with its hash', async () => {
    const version = (await viewer.get('/api/deployments?unit=dryer-1')).body.items[0].model.versionId as string;
    const r = await viewer.get(`/api/models/versions/${version}/model.json`);
    expect(r.status).toBe(200);
    expect(r.body.sha256).toBe(fixture.model.sha256);
  });
});

describe('review and report of the faulty batch', () => {
  it('the comparison finds where the batch left the golden batches', async () => {
    const r = await viewer.get(`/api/batches/${faulty.id}/comparison`);
    expect(r.status, JSON.stringify(r.body)).toBe(200);
    const c = r.body.comparison;
    expect(c.firstExit ?? c.firstOutside).not.toBeNull();
    expect(c.dtw.path.length).toBeGreaterThan(0);
    expect(c.regions.length).toBeGreaterThan(0);
  });

  const haveTools = chromiumPath() !== null && spawnSync('pdftotext', ['-v']).status === 0;
  it.skipIf(!haveTools)('prints a PDF report whose text names the batch, model hash, departure and caution', async () => {
    const res = await fetch(`${ts.server.url}/api/batches/${faulty.id}/report.pdf`, { headers: { cookie: viewer.cookie } });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toContain('application/pdf');
    const pdf = Buffer.from(await res.arrayBuffer());
    mkdirSync('test-results', { recursive: true });
    writeFileSync('test-results/report-faulty-batch.pdf', pdf);
    const text = execFileSync('pdftotext', ['test-results/report-faulty-batch.pdf', '-']).toString();
    for (const s of ['Batch report', faulty.id, 'dryer-test', 'Departure from the golden batches', 'Tideline advises']) expect(text).toContain(s);
    expect(text.replace(/\s+/g, '')).toContain(fixture.model.sha256);
    expect(text).toMatch(/First left the golden batches \(alarm rule\) at/);
    const pages = Number(/Pages:\s+(\d+)/.exec(execFileSync('pdfinfo', ['test-results/report-faulty-batch.pdf']).toString())![1]);
    expect(pages).toBeGreaterThanOrEqual(2);
    expect(pages).toBeLessThanOrEqual(8);
  });
  if (!haveTools) it('PDF report check skipped: Debian chromium or poppler-utils is not installed', () => expect(haveTools).toBe(false));
});
