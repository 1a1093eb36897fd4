/**
 * Fuzzing the ingest protocol through its public path: one analyzer on a real server sends a seeded
 * mix of valid entries and hostile ones (junk text, wrong types, values beyond float32, times far
 * from the clock, flipped bits and set reserved bytes in binary frames, unknown types, seq jumps,
 * changed resends), then a clean batch. Checked: the server never answers `internal` and keeps the
 * connection, every spectrum it acked without refusing is stored as sent, every stored spectrum can
 * be judged (finite float32, a valid increasing time), and the stream is not wedged (the clean batch
 * after the chaos is stored whole).
 *
 *   npm run fuzz -- --minutes 10 [--seed 7] [--messages 3000]
 *
 * Used short by test/server/ingest-fuzz.test.ts.
 */
import WebSocket from 'ws';
import { Rng } from '../simulators/prng.ts';
import { encodeSpectrumFrame } from '../core/protocol/binary-frame.ts';
import { storedSpectrumProblem } from '../core/protocol/plausibility.ts';
import type { Storage } from '../server/storage/storage.ts';

export interface FuzzReport {
  seed: number;
  sent: number;
  acked: number;
  errors: Record<string, number>;
  storedSpectra: number;
  problems: string[];
}

type Sent = { seq: number; values: Float32Array; t: number; clean: boolean };

const POINTS = 8;
const HOUR = 3_600_000;

/** One round: connect, chaos, a clean batch, checks. Throws nothing; problems are listed. */
export async function fuzzRound(opts: { wsUrl: string; token: string; analyzer: string; unit: string; storage: Storage; seed: number; messages: number }): Promise<FuzzReport> {
  const rng = new Rng(opts.seed);
  const int = (n: number) => Math.floor(rng.uniform() * n);
  const pick = <T>(xs: readonly T[]): T => xs[int(xs.length)]!;
  const problems: string[] = [];
  const errors: Record<string, number> = {};
  const refusedSeqs = new Set<number>();
  const sentBySeq = new Map<number, Sent[]>();
  let acked = -1;
  let closed: number | null = null;
  const boot = 1_000_000 + opts.seed;
  const ax = Array.from({ length: POINTS }, (_, i) => 1100 + 10 * i);
  const ws = new WebSocket(opts.wsUrl + '/ingest', { headers: { Authorization: `Bearer ${opts.token}` }, perMessageDeflate: false });
  const waiters: (() => void)[] = [];
  const log: { type: string; seq?: number; code?: string; message?: string }[] = [];
  ws.on('message', (d: Buffer) => {
    const m = JSON.parse(d.toString()) as { type: string; seq?: number; code?: string; message?: string };
    log.push(m);
    if (m.type === 'ack' && typeof m.seq === 'number') acked = Math.max(acked, m.seq);
    if (m.type === 'error') {
      errors[m.code!] = (errors[m.code!] ?? 0) + 1;
      if (m.seq !== undefined) refusedSeqs.add(m.seq);
      if (m.code === 'internal') problems.push(`internal error: ${m.message}`);
    }
    for (const w of waiters.splice(0)) w();
  });
  ws.on('close', (code) => {
    closed = code;
    for (const w of waiters.splice(0)) w();
  });
  ws.on('error', () => undefined);
  await new Promise<void>((res, rej) => {
    ws.once('open', () => res());
    ws.once('unexpected-response', (_q, r) => rej(new Error(`upgrade refused ${r.statusCode}`)));
  });
  const until = async (pred: () => boolean, what: string, ms = 30_000) => {
    const end = Date.now() + ms;
    while (!pred()) {
      if (closed !== null) throw new Error(`connection closed (${closed}) while waiting for ${what}`);
      if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
      await new Promise<void>((r) => {
        waiters.push(r);
        setTimeout(r, 200);
      });
    }
  };
  const send = (m: unknown) => ws.send(typeof m === 'string' || m instanceof Uint8Array ? m : JSON.stringify(m));
  let hello = false;
  ws.once('message', () => (hello = true));
  send({ type: 'hello', protocol: 1, analyzer: opts.analyzer, boot, axis: ax });
  await until(() => hello, 'welcome');

  const now = Date.now();
  let t = now - 6 * HOUR;
  let seq = 0;
  let batchNo = 0;
  let batch = `FZ-${opts.seed}-0`;
  const batches = [batch];
  let open = false;
  const valuesOf = () => Float32Array.from({ length: POINTS }, () => rng.between(-2, 2));
  const record = (s: number, v: Float32Array, tt: number, clean: boolean) => {
    const l = sentBySeq.get(s) ?? [];
    l.push({ seq: s, values: v, t: tt, clean });
    sentBySeq.set(s, l);
  };
  const hostileNumbers = [1e39, -3.5e38, 1e308, Number.MAX_VALUE, 1e-320, -0, 2 ** 53, 1e300];
  const hostileTimes = [1e300, 9e15, -1, 0, now + 365 * 24 * HOUR, now - 20 * 365 * 24 * HOUR, 8.64e15 + 1, 1.5];
  const junk = ['', 'null', '[]', '{', '{"type":"spectrum"}', '{"type":1}', '"hello"', '{"type":"hello","protocol":2}', 'Infinity', '{"type":"spectrum","seq":"1","t":1,"values":[1,2]}', '\u0000\u0001', '{"type":"batch-start","seq":-1}', '{"type":"__proto__","seq":1}'];

  /**
   * Send one message meant to carry seq `s` (null: none) and wait for the server's answer. Returns
   * true when the server consumed `s` (acked it, or refused it with its seq in a consuming error).
   */
  const NOT_CONSUMING = new Set(['seq-gap', 'conflict', 'internal', 'hello-required']);
  const exchange = async (msg: unknown, s: number | null, resend = false): Promise<boolean> => {
    const from = log.length;
    send(msg);
    let answer: (typeof log)[number] | undefined;
    const what = () => {
      const text = msg instanceof Uint8Array ? `binary frame ${Buffer.from(msg).subarray(0, 32).toString('hex')}…` : typeof msg === 'string' ? msg : JSON.stringify(msg);
      return `an answer to ${text.slice(0, 160)} (seq ${s}${resend ? ', a resend' : ''}; last from the server: ${JSON.stringify(log.slice(-3))})`;
    };
    await until(() => {
      // a resend is answered with an ack (the same entry) or a conflict
      answer = log.slice(from).find((m) => m.type === 'error' || (m.type === 'ack' && (resend || (s !== null && m.seq! >= s))));
      return !!answer;
    }, 'an answer').catch((e: Error) => {
      throw new Error(e.message.replace('an answer', what()));
    });
    if (answer!.type === 'ack') return !resend;
    return s !== null && answer!.seq === s && !NOT_CONSUMING.has(answer!.code!);
  };

  let sent = 0;
  for (let i = 0; i < opts.messages; i++) {
    if (closed !== null) break;
    sent++;
    const r = rng.uniform();
    try {
      if (!open && r < 0.5) {
        batch = `FZ-${opts.seed}-${++batchNo}`;
        batches.push(batch);
        t += 1000;
        if (await exchange({ type: 'batch-start', seq, t, unit: opts.unit, batch, product: 'fuzz' }, seq)) {
          seq++;
          open = true;
        }
      } else if (r < 0.45) {
        // a valid spectrum, JSON or binary
        const tt = t + 1000 + int(1000);
        const v = valuesOf();
        const ok = await exchange(rng.uniform() < 0.5 ? encodeSpectrumFrame(seq, tt, v) : JSON.stringify({ type: 'spectrum', seq, t: tt, values: Array.from(v) }), seq);
        if (ok) {
          record(seq, v, tt, true);
          t = tt;
          seq++;
        }
      } else if (r < 0.55) {
        // a value that does not fit float32, or a literal 1e999
        const v = Array.from(valuesOf()) as number[];
        v[int(POINTS)] = pick(hostileNumbers);
        let text = JSON.stringify({ type: 'spectrum', seq, t: t + 1, values: v });
        if (rng.uniform() < 0.2) text = text.replace('"values":[', '"values":[1e999,').replace(/,[^,\]]*\]/, ']');
        if (await exchange(text, seq)) seq++;
      } else if (r < 0.65) {
        // a time far from the clock
        const v = valuesOf();
        const tt = pick(hostileTimes);
        if (await exchange(rng.uniform() < 0.5 ? encodeSpectrumFrame(seq, tt, v) : JSON.stringify({ type: 'spectrum', seq, t: tt, values: Array.from(v) }), seq)) seq++;
      } else if (r < 0.75) {
        // a binary frame with a flipped bit (header or values) or a set reserved field
        const f = new Uint8Array(encodeSpectrumFrame(seq, t + 1, valuesOf()));
        const at = int(f.length);
        f[at] = f[at]! ^ (1 << int(8));
        // a flip in the seq field makes it another seq: a resend of an earlier one (acked again or a
        // conflict), a seq ahead (seq-gap) or no valid seq at all; ours is then not consumed
        const other = new DataView(f.buffer, f.byteOffset).getFloat64(8, true) !== seq;
        if (await exchange(f, other ? null : seq, other)) {
          // a flip in a value can leave a valid spectrum: it is stored, its time taken
          t += 1;
          seq++;
        }
      } else if (r < 0.82) {
        await exchange(pick(junk), null);
      } else if (r < 0.86) {
        await exchange({ type: pick(['calibration', 'spectra', 'SPECTRUM', 'reboot']), seq, t }, null);
      } else if (r < 0.9) {
        // a resend of an earlier seq, unchanged or changed
        const earlier = [...sentBySeq.values()];
        if (!earlier.length) continue;
        const e = pick(earlier)[0]!;
        const v = rng.uniform() < 0.5 ? e.values : valuesOf();
        await exchange(encodeSpectrumFrame(e.seq, e.t, v), null, true);
      } else if (r < 0.93) {
        // a seq that skips ahead, or an invalid one
        await exchange({ type: 'spectrum', seq: pick([seq + 5, 1.5, 1e300, 2 ** 53, -3]), t: t + 1, values: Array.from(valuesOf()) }, null);
      } else if (r < 0.96) {
        if (await exchange({ type: 'analyzer-status', seq, t, status: pick(['good', 'maintenance-required', 'out-of-specification']) }, seq)) seq++;
      } else if (open && r < 0.98) {
        if (await exchange({ type: 'batch-end', seq, t: t + 1000, batch }, seq)) {
          t += 1000;
          seq++;
          open = false;
        }
      } else {
        if (await exchange({ type: 'batch-end', seq, t: t + 1, batch: 'not-this-one' }, seq)) seq++;
      }
    } catch (e) {
      problems.push(`message ${i}: ${(e as Error).message}`);
      break;
    }
  }
  // The stream is not wedged: a clean batch on a new boot is stored whole.
  try {
    if (closed !== null) throw new Error(`the server closed the connection (${closed}) during the chaos`);
    await until(() => acked >= 0 || sent === 0, 'a first ack');
    const clean = `FZC-${opts.seed}`;
    const at = log.length;
    send({ type: 'hello', protocol: 1, analyzer: opts.analyzer, boot: boot + 1, axis: ax });
    await until(() => log.slice(at).some((m) => m.type === 'welcome'), 'second welcome');
    const t1 = Date.now() - HOUR;
    const from = log.length;
    send({ type: 'batch-start', seq: 0, t: t1, unit: opts.unit, batch: clean, product: 'fuzz' });
    for (let k = 1; k <= 20; k++) send(encodeSpectrumFrame(k, t1 + k * 1000, valuesOf()));
    send({ type: 'batch-end', seq: 21, t: t1 + 22_000, batch: clean });
    await until(() => log.slice(from).some((m) => m.type === 'ack' && m.seq! >= 21), 'the clean batch to be acked');
    const rows = await opts.storage.readSpectra(clean, 0, 100, 100);
    if (rows.length !== 20) problems.push(`the clean batch after the chaos has ${rows.length} of 20 spectra stored`);
  } catch (e) {
    problems.push(`stream wedged or closed: ${(e as Error).message}`);
  }
  ws.close();

  // Nothing acked is lost: a spectrum sent once under its seq, acked, and not refused, is stored as sent.
  const stored: { seq: number; t: number; values: Float32Array; batch: string }[] = [];
  for (const b of batches) for (const r of await opts.storage.readSpectra(b, 0, Number.MAX_SAFE_INTEGER, 1_000_000)) stored.push({ ...r, batch: b });
  const bySeq = new Map(stored.map((s) => [s.seq, s]));
  const finalAck = Math.max(acked, -1);
  for (const [s, list] of sentBySeq) {
    if (list.length !== 1 || !list[0]!.clean || s > finalAck || refusedSeqs.has(s)) continue;
    const row = bySeq.get(s);
    if (!row) {
      problems.push(`spectrum seq ${s} was acked and never refused, but is not stored`);
      continue;
    }
    if (row.t !== list[0]!.t || row.values.some((x, i) => !Object.is(x, list[0]!.values[i]))) problems.push(`spectrum seq ${s} is stored with other content than sent`);
  }
  // Every stored spectrum can be judged.
  for (const b of batches) {
    let prevT = -Infinity;
    for (const s of stored) {
      if (s.batch !== b) continue;
      const why = storedSpectrumProblem(s.t, s.values, prevT);
      if (why) problems.push(`stored spectrum seq ${s.seq} of ${b}: ${why}`);
      prevT = s.t;
    }
  }
  return { seed: opts.seed, sent, acked: finalAck, errors, storedSpectra: stored.length, problems };
}

async function main() {
  const args = process.argv.slice(2);
  const flag = (name: string, dflt: number) => {
    const i = args.indexOf(`--${name}`);
    if (i < 0) return dflt;
    const v = Number(args[i + 1]);
    if (!Number.isFinite(v) || v < 0) throw new Error(`--${name} must be a number ≥ 0, got "${args[i + 1]}"`);
    return v;
  };
  const minutes = flag('minutes', 1);
  let seed = flag('seed', 1);
  const messages = flag('messages', 3000);
  const { startTestServer } = await import('../test/server/helpers.ts');
  const units = Array.from({ length: 1 }, (_, i) => `fz-${i}`);
  // the chaos is mostly bad messages: the per-connection error budget would (rightly) close it
  const ts = await startTestServer({ ingest: { maxErrorsPer10s: 1_000_000 } }, { units });
  const end = Date.now() + minutes * 60_000;
  let rounds = 0;
  let failed = 0;
  try {
    while (Date.now() < end) {
      const r = await fuzzRound({ wsUrl: ts.wsUrl, token: ts.token, analyzer: 'nir-1', unit: units[0]!, storage: ts.server.ctx.storage, seed, messages });
      rounds++;
      if (r.problems.length) {
        failed++;
        console.log(`seed ${seed}: ${r.problems.length} problem(s):\n  ${r.problems.slice(0, 10).join('\n  ')}`);
      } else console.log(`seed ${seed}: ${r.sent} messages, acked up to ${r.acked}, ${r.storedSpectra} spectra stored, errors ${JSON.stringify(r.errors)}`);
      seed++;
    }
  } finally {
    await ts.stop();
  }
  console.log(`${rounds - failed} passed, ${failed} failed`);
  process.exit(failed ? 1 : 0);
}

if (import.meta.url === `file://${process.argv[1]}`) void main();
