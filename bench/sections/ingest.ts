/**
 * Ingest benchmark. A real server in a child process (SQLite, synchronous=FULL, group
 * commit) and analyzer peers in this process speaking ingest protocol v1 over loopback.
 *
 * - ingest_per_s: spectra stored, judged by the batch monitor and acked per second, 512-point
 *   binary frames from 20 concurrent analyzer connections (each on its own unit with a deployed
 *   model), each keeping up to 256 entries unacked.
 * - ingest_per_s_store_only: the same without a deployed model (storage and protocol only).
 * - ingest_p99_ms / ingest_p50_ms: send-to-ack latency at a steady 1,000 spectra/s (20 × 50/s).
 * - json_vs_binary: cost per spectrum with JSON spectra divided by that with binary frames
 *   (end to end, same setup); json_vs_binary_decode: the same ratio for decoding alone.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { randomUUID } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import WebSocket from 'ws';
import type { BenchContext, Figures } from '../run.ts';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { buildMonitoringModel, serializeMonitoringModel } from '../../core/model/monitoring-model.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { AnalyzerTokenStore } from '../../server/auth/analyzer-tokens.ts';
import { decodeSpectrumFrame, encodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';
import { encodeSpectrumJson, parseAnalyzerText } from '../../core/protocol/ingest-messages.ts';

export const name = 'ingest';

const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
const N_ANALYZERS = 20;
const POINTS = 512;
const WINDOW = 256;

function startServer(dir: string): Promise<{ child: ChildProcess; url: string }> {
  const extra = process.env.TIDELINE_BENCH_SERVER_NODE_ARGS?.split(' ').filter(Boolean) ?? [];
  const child = spawn(process.execPath, [...extra, '--import', 'tsx', join(root, 'server', 'cli.ts'), 'serve', '--port', '0', '--data-dir', dir, '--web-dir', 'none', '--log-level', 'error', ...(process.env.TIDELINE_BENCH_SERVER_FLAGS?.split(' ').filter(Boolean) ?? [])], {
    cwd: root,
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  return new Promise((resolve, reject) => {
    let out = '';
    let err = '';
    child.stderr!.on('data', (d) => (err += d));
    child.stdout!.on('data', (d) => {
      out += d;
      const m = /running at (http:\/\/[^\s/]+)/.exec(out);
      if (m) resolve({ child, url: m[1]!.replace('http', 'ws') });
    });
    child.on('exit', (code) => reject(new Error(`server exited with ${code}: ${err}`)));
  });
}

interface Peer {
  ws: WebSocket;
  acked: number;
  onAck: (seq: number) => void;
  problems: string[];
}

async function connect(url: string, token: string, analyzer: string, boot: number, axis: number[]): Promise<Peer> {
  const ws = new WebSocket(url + '/ingest', { headers: { Authorization: `Bearer ${token}` }, perMessageDeflate: false });
  await new Promise<void>((res, rej) => {
    ws.once('open', () => res());
    ws.once('error', rej);
  });
  const peer: Peer = { ws, acked: -1, onAck: () => undefined, problems: [] };
  ws.on('close', (code, reason) => peer.problems.push(`closed ${code} ${reason.toString()}`));
  const welcome = new Promise<void>((res, rej) => {
    ws.on('message', (d: Buffer) => {
      const m = JSON.parse(d.toString()) as { type: string; seq?: number; message?: string };
      if (m.type === 'welcome') res();
      else if (m.type === 'ack') {
        peer.acked = m.seq!;
        peer.onAck(m.seq!);
      } else if (m.type === 'error') rej(new Error(`${analyzer}: ${m.message}`));
    });
  });
  ws.send(JSON.stringify({ type: 'hello', protocol: 1, analyzer, boot, axis }));
  await welcome;
  return peer;
}

/** Stream `count` spectra per peer as fast as the window allows; returns spectra per second. */
async function flat(peers: Peer[], units: string[], spectra: Float32Array[], count: number, json: boolean, tag: string): Promise<number> {
  // Stamped 1 s apart and ending before now: the server refuses times beyond its window (ingest.maxAheadMs).
  const t0 = Date.now() - (count + 2) * 1000;
  const runId = Date.now() * 1000 + Math.floor(Math.random() * 1000);
  const start = performance.now();
  let lastProgress = performance.now();
  let total = -1;
  const watchdog = setInterval(() => {
    const sum = peers.reduce((a, p) => a + p.acked, 0);
    if (sum !== total) {
      total = sum;
      lastProgress = performance.now();
    } else if (performance.now() - lastProgress > 60_000) {
      clearInterval(watchdog);
      const stuck = peers.map((p, i) => `${i}: acked ${p.acked} ${p.problems.slice(-2).join(' | ')}`).join('\n');
      throw new Error(`ingest bench (${tag}): no ack for 60 s\n${stuck}`);
    }
  }, 1000);
  await Promise.all(
    peers.map(
      (p, i) =>
        new Promise<void>((resolve) => {
          let next = 0; // seq 0 = batch-start
          const last = count + 1; // seq count+1 = batch-end
          const send = () => {
            while (next <= last && next - p.acked <= WINDOW) {
              const seq = next++;
              if (seq === 0) p.ws.send(JSON.stringify({ type: 'batch-start', seq, t: t0, unit: units[i], batch: `${tag}-${i}-${runId}`, product: 'bench' }));
              else if (seq === last) p.ws.send(JSON.stringify({ type: 'batch-end', seq, t: t0 + seq * 1000, batch: `${tag}-${i}-${runId}` }));
              else {
                const v = spectra[seq % spectra.length]!;
                p.ws.send(json ? encodeSpectrumJson(seq, t0 + seq * 1000, v) : encodeSpectrumFrame(seq, t0 + seq * 1000, v));
              }
            }
          };
          p.onAck = (a) => {
            if (a >= last) resolve();
            else send();
          };
          send();
        }),
    ),
  );
  clearInterval(watchdog);
  return (peers.length * count) / ((performance.now() - start) / 1000);
}

/** Steady rate: every peer sends `perPeerHz` spectra/s for `seconds`; returns latency percentiles in ms. */
async function steady(peers: Peer[], units: string[], spectra: Float32Array[], perPeerHz: number, seconds: number): Promise<{ p50: number; p99: number; max: number; n: number }> {
  const total = Math.round(perPeerHz * seconds);
  // stamped 1 s apart and ending before now (the server's time window, ingest.maxAheadMs)
  const t0 = Date.now() - (total + 2) * 1000;
  const lat: number[] = [];
  await Promise.all(
    peers.map(
      (p, i) =>
        new Promise<void>((resolve) => {
          const sentAt: number[] = [];
          let lastSeen = 0;
          p.onAck = (a) => {
            const now = performance.now();
            for (let s = lastSeen + 1; s <= a; s++) if (s >= 1 && s <= total && sentAt[s] !== undefined) lat.push(now - sentAt[s]!);
            lastSeen = Math.max(lastSeen, a);
            if (a >= total + 1) resolve();
          };
          const batch = `steady-${i}-${t0}`;
          p.ws.send(JSON.stringify({ type: 'batch-start', seq: 0, t: t0, unit: units[i], batch, product: 'bench' }));
          const begin = performance.now() + (i * 1000) / perPeerHz / peers.length;
          let seq = 1;
          const tick = () => {
            const now = performance.now();
            while (seq <= total && begin + ((seq - 1) * 1000) / perPeerHz <= now) {
              sentAt[seq] = performance.now();
              p.ws.send(encodeSpectrumFrame(seq, t0 + seq * 1000, spectra[seq % spectra.length]!));
              seq++;
            }
            if (seq <= total) setTimeout(tick, 2);
            else p.ws.send(JSON.stringify({ type: 'batch-end', seq: total + 1, t: t0 + (total + 1) * 1000, batch }));
          };
          tick();
        }),
    ),
  );
  lat.sort((a, b) => a - b);
  const q = (f: number) => lat[Math.min(lat.length - 1, Math.floor(f * lat.length))]!;
  return { p50: q(0.5), p99: q(0.99), max: lat[lat.length - 1]!, n: lat.length };
}

export async function run(ctx: BenchContext): Promise<Figures> {
  const axis = Array.from({ length: POINTS }, (_, i) => 1100 + i * 2);
  const refs = simulateReferenceSet('dryer', ctx.quick ? 3 : 4, 77, { axis, intervalS: 30 });
  ctx.log(`building a ${POINTS}-point dryer model from ${refs.length} simulated batches …`);
  const model = buildMonitoringModel(
    refs.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra })),
    { name: 'bench-dryer', product: 'bench', author: 'bench', createdAt: 0, components: 3 },
  );
  const text = serializeMonitoringModel(model);
  const spectra = refs.flatMap((b) => b.spectra);
  const dir = mkdtempSync(join(tmpdir(), 'tideline-bench-'));
  const st = new SqliteStorage({ file: join(dir, 'tideline.db') });
  const tokens: string[] = [];
  const judged: string[] = [];
  const plain: string[] = [];
  const versionId = randomUUID();
  await st.insertModelVersion({
    id: versionId, name: 'bench-dryer', version: 1, product: 'bench', sha256: model.sha256, body: text, settings: {}, referenceBatches: [],
    components: model.pca.nComponents, confidence: 0.99, status: 'draft', createdAt: 0, createdBy: 'bench', approvedAt: null, approvedBy: null,
    approvalReason: null, retiredAt: null, retiredBy: null, retireReason: null,
  });
  await st.approveModelVersion(versionId, 'bench', 0, 'bench');
  for (let i = 0; i < N_ANALYZERS; i++) {
    for (const [list, prefix] of [[judged, 'judged'], [plain, 'plain']] as const) {
      const unit = `${prefix}-${i}`;
      await st.createUnit({ id: unit, name: unit, kind: 'dryer', description: '', createdAt: 0 });
      list.push(unit);
      if (prefix === 'judged') await st.deploy({ id: randomUUID(), unit, modelVersion: versionId, deployedAt: 0, deployedBy: 'bench', reason: null, endedAt: null });
    }
    tokens.push((await new AnalyzerTokenStore(st.analyzerTokens, Date.now).create(`bench-${i}`, 'bench', 'bench')).token);
  }
  await st.close();
  const { child, url } = await startServer(dir);
  const figures: Figures = {};
  try {
    let boot = Date.now();
    let peers: Peer[] = [];
    // Each run on fresh connections with a new boot epoch (seq restarts at 0).
    const fresh = async () => {
      for (const p of peers) p.ws.close();
      boot++;
      peers = await Promise.all(tokens.map((t, i) => connect(url, t, `bench-${i}`, boot, axis)));
      return peers;
    };
    const count = ctx.quick ? 300 : 1500;
    await flat(await fresh(), judged, spectra, 50, false, 'warm');
    ctx.log(`ingest: ${N_ANALYZERS} analyzers × ${count} binary spectra, judged …`);
    figures.ingest_per_s = Math.round(await flat(await fresh(), judged, spectra, count, false, 'bin'));
    ctx.log(`  ${figures.ingest_per_s} spectra/s`);
    figures.ingest_per_s_store_only = Math.round(await flat(await fresh(), plain, spectra, count, false, 'plain'));
    ctx.log(`  store only: ${figures.ingest_per_s_store_only} spectra/s`);
    const jsonRate = await flat(await fresh(), judged, spectra, Math.round(count / 2), true, 'json');
    figures.ingest_per_s_json = Math.round(jsonRate);
    figures.json_vs_binary = Math.round(((figures.ingest_per_s as number) / jsonRate) * 100) / 100;
    ctx.log(`  JSON: ${figures.ingest_per_s_json} spectra/s → JSON/binary cost ratio ${figures.json_vs_binary}`);
    await fresh();
    const seconds = ctx.quick ? 4 : 10;
    ctx.log(`ingest latency at a steady 1,000 spectra/s for ${seconds} s …`);
    const lat = await steady(peers, judged, spectra, 1000 / N_ANALYZERS, seconds);
    figures.ingest_p50_ms = Math.round(lat.p50 * 100) / 100;
    figures.ingest_p99_ms = Math.round(lat.p99 * 100) / 100;
    figures.ingest_max_ms = Math.round(lat.max * 100) / 100;
    figures.ingest_latency_samples = lat.n;
    ctx.log(`  p50 ${figures.ingest_p50_ms} ms, p99 ${figures.ingest_p99_ms} ms, max ${figures.ingest_max_ms} ms (${lat.n} spectra)`);
    for (const p of peers) p.ws.close();
  } finally {
    child.kill('SIGTERM');
    await new Promise((r) => child.once('exit', r));
    rmSync(dir, { recursive: true, force: true });
  }
  // Decoding alone, in this process.
  const v = spectra[0]!;
  const frame = encodeSpectrumFrame(1, 1, v);
  const text1 = encodeSpectrumJson(1, 1, v);
  const reps = ctx.quick ? 2000 : 20000;
  let t = performance.now();
  for (let i = 0; i < reps; i++) decodeSpectrumFrame(frame);
  const bin = performance.now() - t;
  t = performance.now();
  for (let i = 0; i < reps; i++) parseAnalyzerText(text1);
  const js = performance.now() - t;
  figures.json_vs_binary_decode = Math.round((js / bin) * 10) / 10;
  figures.json_bytes_per_spectrum = text1.length;
  figures.binary_bytes_per_spectrum = frame.byteLength;
  figures.goal_ingest_per_s = 10000;
  figures.goal_ingest_p99_ms = 25;
  return figures;
}
