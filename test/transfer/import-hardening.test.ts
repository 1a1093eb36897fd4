/**
 * Imports refuse what cannot be judged, naming file, line and reason, and store nothing: values
 * that overflow float32, impossible or future times, free-form dates, truncated JCAMP-DX files,
 * unreadable factors, names that break files, odd encodings and huge files. What sites really
 * write (CRLF, lone CR, BOM, semicolons with decimal commas, ISO times with offsets) still imports.
 * Through POST /api/import and the CLI as a child process.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync, truncateSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { writeBatchJcamp } from '../../core/io/batch-jcamp.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from '../server/helpers.ts';

const cli = (args: string[]) => spawnSync(process.execPath, ['--import', 'tsx', 'server/cli.ts', ...args], { encoding: 'utf8', env: { ...process.env, TIDELINE_LOG_LEVEL: 'warn' } });

const T0 = Date.UTC(2026, 0, 5, 8, 0, 0);
const csv = (rows: string[], head = 'batch,time_ms,1000,1010') => [head, ...rows].join('\n') + '\n';

/** A two-spectrum JCAMP-DX compound file as Tideline writes it. */
function jcamp(id = 'J-1'): string {
  return writeBatchJcamp({ id, axis: Float64Array.from([1000, 1010, 1020]), times: [T0, T0 + 10_000], spectra: [Float32Array.from([1, 2, 3]), Float32Array.from([1.5, 2.5, 3.5])], product: 'granule' });
}

let ts: TestServer;
let admin: Session;
beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  admin = await login(ts, 'model-owner');
}, 60_000);
afterAll(async () => {
  await ts?.stop();
});

async function batchCount(): Promise<number> {
  return (await admin.get('/api/batches?limit=1000')).body.total;
}

async function refused(files: { name: string; content: string }[], where: RegExp, reason: RegExp, product = 'granule') {
  const before = await batchCount();
  const r = await admin.post('/api/import', { unit: 'dryer-1', product, files });
  expect(r.status, JSON.stringify(r.body)).toBe(422);
  expect(r.body.detail).toMatch(/Nothing was imported/);
  expect(r.body.errors[0].path).toMatch(where);
  expect(r.body.errors[0].message).toMatch(reason);
  expect(await batchCount()).toBe(before);
}

describe('import refuses values and times that cannot be judged', () => {
  it('a CSV value beyond float32 (1e39) — finite as a double, +Infinity as stored', async () => {
    await refused([{ name: 'a.csv', content: csv([`A-1,${T0},1,2`, `A-1,${T0 + 1000},1e39,2`]) }], /^a\.csv:3$/, /value at 1000 \(column 3\) = 1e\+39 is beyond the float32 range/);
  });
  it('times before 1970, beyond any date, a year ahead, negative elapsed time, and free-form dates', async () => {
    await refused([{ name: 'neg.csv', content: csv([`A-2,-5,1,2`]) }], /^neg\.csv:2$/, /time -5 ms lies before 1970/);
    await refused([{ name: 'big.csv', content: csv([`A-3,1e20,1,2`]) }], /^big\.csv:2$/, /beyond the largest time a date can hold/);
    await refused([{ name: 'ahead.csv', content: csv([`A-4,${Date.now() + 365 * 86_400_000},1,2`]) }], /^ahead\.csv:2$/, /ahead of this computer's clock .* cannot come from the future/);
    await refused([{ name: 'el.csv', content: csv(['A-5,0,1,2', 'A-5,-10,1,2'], 'batch,time_s,1000,1010') }], /^el\.csv:3$/, /time "-10" in column "time_s" is negative/);
    await refused([{ name: 'dec.csv', content: csv(['A-6,Dec 1,1,2'], 'batch,timestamp,1000,1010') }], /^dec\.csv:2$/, /time "Dec 1" is not an ISO 8601 date-time/);
    await refused([{ name: 'apr.csv', content: csv(['A-7,2026-04-31T08:00:00Z,1,2'], 'batch,timestamp,1000,1010') }], /^apr\.csv:2$/, /not an ISO 8601 date-time/);
  });
  it('a JCAMP-DX y value beyond float32 and a time beyond any date', async () => {
    await refused([{ name: 'y.jdx', content: jcamp().replace(/^1000 1 2 3$/m, `1000 1 2 1${'0'.repeat(39)}`) }], /^y\.jdx:\d+$/, /block 1 .*: y value 3 = [0-9.e+]+ is beyond the float32 range/);
    await refused([{ name: 't.jdx', content: jcamp().replace(`##$TIME MS=${T0 + 10_000}`, '##$TIME MS=1e20') }], /^t\.jdx:\d+$/, /block 2 .*beyond the largest time a date can hold/);
  });
});

describe('import refuses a truncated or damaged JCAMP-DX file instead of importing part of it', () => {
  const good = jcamp();
  it('no final ##END=', async () => {
    await refused([{ name: 'cut.jdx', content: good.replace(/##END=\n$/, '') }], /^cut\.jdx:1$/, /the file ends inside the block starting here: no ##END= \(the file is truncated\)/);
  });
  it('fewer blocks than ##BLOCKS= says', async () => {
    await refused([{ name: 'few.jdx', content: good.replace('##BLOCKS=2', '##BLOCKS=3') }], /^few\.jdx:1$/, /says ##BLOCKS=3 but holds 2 block\(s\)/);
  });
  it('a block without data', async () => {
    const noData = good.replace(/##XYDATA=\(X\+\+\(Y\.\.Y\)\)\n1000 1\.5 2\.5 3\.5\n/, '');
    expect(noData).not.toBe(good);
    await refused([{ name: 'empty.jdx', content: noData }], /^empty\.jdx:\d+$/, /the block starting here has no data/);
  });
  it('an unreadable ##YFACTOR', async () => {
    await refused([{ name: 'yf.jdx', content: good.replace('##YFACTOR=1', '##YFACTOR=abc') }], /^yf\.jdx:\d+$/, /##YFACTOR=abc is not a usable factor/);
  });
  it('the good file imports whole', async () => {
    const r = await admin.post('/api/import', { unit: 'dryer-1', product: 'granule', files: [{ name: 'J-1.jdx', content: good }] });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    expect(r.body.batches).toMatchObject([{ id: 'J-1', spectra: 2, from: T0, to: T0 + 10_000 }]);
  });
});

describe('what sites write still imports', () => {
  it('CRLF, lone CR, a BOM, semicolons with decimal commas and ISO times with offsets', async () => {
    const files = [
      { name: 'crlf.csv', content: `\ufeffbatch;timestamp;1000,0;1010,0\r\nS-1;2026-01-05T09:00:00+01:00;0,5;1,25\r\nS-1;2026-01-05 08:00:10Z;0,75;1,5\r\n` },
      { name: 'cr.csv', content: `batch,time_ms,1000,1010\rS-2,${T0},1,2\rS-2,${T0 + 1000},3,4\r` },
    ];
    const r = await admin.post('/api/import', { unit: 'dryer-1', product: 'granule', files });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    expect(r.body.batches).toMatchObject([
      { id: 'S-1', spectra: 2, from: T0, to: T0 + 10_000 },
      { id: 'S-2', spectra: 2, from: T0, to: T0 + 1000 },
    ]);
    const csvOut = await admin.get('/api/batches/S-1/spectra.csv');
    if (csvOut.status === 200) expect(String(csvOut.body)).toMatch(/S-1,1767600000000,0\.5,1\.25/);
  });
});

describe('names that would break a file are refused at the door', () => {
  it('a batch id with a bidirectional override or markup: refused, and shown escaped in the message', async () => {
    await refused([{ name: 'bidi.csv', content: csv([`B\u202eX,${T0},1,2`]) }], /^bidi\.csv:2$/, /^the batch id "B\\u202eX" holds U\+202E; use 1–128 letters/);
    await refused([{ name: 'tag.csv', content: csv([`<b>x</b>,${T0},1,2`]) }], /^tag\.csv:2$/, /^the batch id "<b>x<\/b>" holds "<"/);
  });
  it('a product name with a line break (REST)', async () => {
    const r = await admin.post('/api/import', { unit: 'dryer-1', product: 'granule\n##END=', files: [{ name: 'n.csv', content: csv([`N-1,${T0},1,2`]) }] });
    expect(r.status).toBe(400);
    expect(JSON.stringify(r.body)).toMatch(/product.*line break/);
  });
});

describe('an imported batch id is taken for live analyzers too', () => {
  it('a batch-start naming an imported batch is refused; the connection and other batches go on', async () => {
    const r = await admin.post('/api/import', { unit: 'dryer-1', product: 'granule', files: [{ name: 'L-1.csv', content: csv([`L-1,${T0},1,2`]) }] });
    expect(r.status).toBe(201);
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    const w = await p.hello('nir-1', 1, [1000, 1010]);
    expect(w.type).toBe('welcome');
    const t = Date.now();
    p.send({ type: 'batch-start', seq: 0, t, unit: 'dryer-1', batch: 'L-1', product: 'granule' });
    const e = await p.waitError('batch-id-taken');
    expect(e.message).toMatch(/batch id "L-1" is already used/);
    p.send({ type: 'batch-start', seq: 1, t: t + 1, unit: 'dryer-1', batch: 'L-2', product: 'granule' });
    await p.waitAck(1);
    p.close();
  }, 60_000);
});

describe('import on the command line: encodings and size', () => {
  it('takes UTF-16 with its BOM, refuses Latin-1 with the line of the bad byte, refuses a file over 64 MiB, and a product with a line break', () => {
    const d = mkdtempSync(join(tmpdir(), 'tideline-imp-'));
    const data = ['--data-dir', d];
    expect(cli(['unit', 'add', 'dryer-1', ...data]).status).toBe(0);
    const u16 = join(d, 'u16.csv');
    writeFileSync(u16, Buffer.concat([Buffer.from([0xff, 0xfe]), Buffer.from(csv([`U-1,${T0},1,2`]), 'utf16le')]));
    let r = cli(['import', '--unit', 'dryer-1', '--product', 'granule', u16, ...data]);
    expect(r.stdout + r.stderr).toMatch(/imported U-1: 1 spectra from u16\.csv/);
    expect(r.status).toBe(0);
    const latin = join(d, 'latin.csv');
    writeFileSync(latin, Buffer.concat([Buffer.from(`batch,time_ms,1000,1010\nU-2,${T0},1,2\nU-2,${T0 + 1000},1,2 `), Buffer.from([0xb5]), Buffer.from('\n')]));
    r = cli(['import', '--unit', 'dryer-1', '--product', 'granule', latin, ...data]);
    expect(r.status).toBe(3);
    expect(r.stdout).toMatch(/nothing was imported: latin\.csv, line 3: byte 0xB5 is not UTF-8 text/);
    const huge = join(d, 'huge.csv');
    writeFileSync(huge, csv([`H-1,${T0},1,2`]));
    truncateSync(huge, 64 * 1024 * 1024 + 1);
    r = cli(['import', '--unit', 'dryer-1', '--product', 'granule', huge, ...data]);
    expect(r.status).toBe(3);
    expect(r.stdout).toMatch(/nothing was imported: huge\.csv: the file is 64\.0 MiB; one import reads at most 64 MiB/);
    r = cli(['import', '--unit', 'dryer-1', '--product', 'granule\nB', u16, ...data]);
    expect(r.status).toBe(3);
    expect(r.stdout).toMatch(/the product name holds a line break/);
  }, 300_000);
});
