/**
 * How to keep spectra in PostgreSQL: `bytea` (the Float32 little-endian bytes, as SQLite's BLOB) or
 * `real[]` (a PostgreSQL array of float4). On a throwaway cluster (test/server/storage-contract/
 * pg-cluster.ts; skipped where PostgreSQL is not installed), the same 512-point spectra are written
 * in durable commits of 50 (synchronous_commit on, as Tideline runs) through postgres.js into one
 * table of each kind, then read back a batch at a time into Float32Arrays. Rounds alternate between
 * the two; the best round of each counts. Figures:
 * - pg_bytea_insert_per_s, pg_real_insert_per_s and pg_bytea_vs_real_insert (ratio, > 1: bytea faster);
 * - pg_bytea_read_per_s, pg_real_read_per_s and pg_bytea_vs_real_read;
 * - pg_bytea_bytes_per_spectrum, pg_real_bytes_per_spectrum (table + TOAST + indexes / rows);
 * - pg_real_roundtrip_mismatches: values that did not come back bit-identical (0 expected for both);
 * - pg_store_insert_per_s, pg_store_vs_bare_insert, pg_store_read_per_s, pg_store_vs_bare_read,
 *   pg_store_bytes_per_spectrum: the same spectra through Tideline's store (server/storage/postgres/
 *   pg-spectra.ts: bytea in a month partition, plus a spectrum_keys row each) against the bare
 *   bytea table, in the same rounds — the cost of partitioning and of the key table.
 */
import { loadavg } from 'node:os';
import postgres from 'postgres';
import type { NewSpectrum } from '../../server/storage/postgres/pg-spectra.ts';
import { PgStorage } from '../../server/storage/postgres/pg-storage.ts';
import { findPostgres, startCluster } from '../../test/server/storage-contract/pg-cluster.ts';
import type { BenchContext, Figures } from '../run.ts';

export const name = 'pg-spectra';

const POINTS = 512;
const PER_COMMIT = 50;

/** Deterministic NIR-like spectra: two broad bands on a sloping baseline, small seeded noise. */
function spectra(n: number): Float32Array[] {
  let s = 12345;
  const rnd = () => ((s = (s * 1103515245 + 12345) >>> 0) / 2 ** 32) - 0.5;
  const out: Float32Array[] = [];
  for (let i = 0; i < n; i++) {
    const a = new Float32Array(POINTS);
    const water = 0.6 * Math.exp(-i / (n / 3));
    for (let p = 0; p < POINTS; p++) {
      const x = p / POINTS;
      a[p] = 0.2 + 0.3 * x + water * Math.exp(-((x - 0.45) ** 2) / 0.004) + 0.25 * Math.exp(-((x - 0.75) ** 2) / 0.01) + 0.002 * rnd();
    }
    out.push(a);
  }
  return out;
}

export async function run(ctx: BenchContext): Promise<Figures> {
  if (!findPostgres()) {
    ctx.log('PostgreSQL is not installed: pg-spectra skipped');
    return { pg_bytea_vs_real_insert: null, pg_bytea_vs_real_read: null };
  }
  const n = ctx.quick ? 2000 : 10000;
  const rounds = ctx.quick ? 2 : 3;
  const data = spectra(n);
  const cluster = await startCluster();
  const sql = postgres(cluster.url(), { onnotice: () => {}, max: 2 });
  try {
    ctx.log(`load average before: ${loadavg().map((v) => v.toFixed(1)).join(' ')}; ${n} spectra × ${POINTS} points, commits of ${PER_COMMIT}, ${rounds} rounds each`);
    const kinds = {
      bytea: {
        type: 'bytea',
        param: (a: Float32Array) => Buffer.from(a.buffer, a.byteOffset, a.byteLength),
        back: (v: Buffer) => {
          const out = new Float32Array(v.byteLength / 4);
          new Uint8Array(out.buffer).set(v);
          return out;
        },
      },
      real: {
        type: 'real[]',
        param: (a: Float32Array) => sql.array(Array.from(a), 700),
        back: (v: number[]) => Float32Array.from(v),
      },
    } as const;
    const best: Record<string, { insert: number; read: number; bytes: number; mismatches: number }> = {};
    await sql`CREATE DATABASE bench_store`;
    const st = await PgStorage.open({ url: cluster.url('bench_store'), max: 2 });
    const T0 = Date.UTC(2026, 0, 5);
    await st.createUnit({ id: 'dryer-1', name: 'Dryer 1', kind: 'dryer', description: '', createdAt: T0 });
    await st.createAnalyzer({ id: 'nir-1', name: 'nir-1', createdAt: T0 });
    await st.spectra.ensurePartition(T0);
    const stored = async () =>
      (await st.sql<{ b: number }[]>`SELECT (SELECT coalesce(sum(pg_total_relation_size(inhrelid)), 0) FROM pg_inherits WHERE inhparent = 'spectra'::regclass)::float8
        + pg_total_relation_size('spectrum_keys')::float8 AS b`)[0]!.b;
    /** One round through the store: batches of 1,000 spectra, commits of PER_COMMIT, then read back batch by batch. */
    const storeRound = async (r: number) => {
      const before = await stored();
      const batches = Math.ceil(n / 1000);
      await st.sql.begin(async (tx) => {
        for (let b = 0; b < batches; b++) {
          await st.spectra.insertBatch(tx, { id: `r${r}b${b}`, unit: 'dryer-1', analyzer: 'nir-1', boot: r, product: 'granule A', startSeq: b * 1000, startT: T0 + b, axis: new Float64Array(POINTS), modelVersion: null, createdAt: T0 });
        }
      });
      const t0 = performance.now();
      for (let i = 0; i < n; i += PER_COMMIT) {
        const rows: NewSpectrum[] = [];
        for (let j = i; j < Math.min(n, i + PER_COMMIT); j++) {
          const b = Math.floor(j / 1000);
          rows.push({ batch: `r${r}b${b}`, idx: j % 1000, analyzer: 'nir-1', boot: r, seq: b * 1000 + (j % 1000) + 1, t: T0 + j * 10_000, values: data[j]!, receivedAt: T0 });
        }
        await st.sql.begin((tx) => st.spectra.insertSpectra(tx, rows));
      }
      const insert = n / ((performance.now() - t0) / 1000);
      const t1 = performance.now();
      let mismatches = 0;
      for (let b = 0; b < batches; b++) {
        for await (const row of st.spectra.iterateSpectra(`r${r}b${b}`, 1000)) {
          const got = new Uint32Array(row.values.buffer, row.values.byteOffset, row.values.length);
          const want = data[b * 1000 + row.idx]!;
          const ww = new Uint32Array(want.buffer, want.byteOffset, want.length);
          for (let p = 0; p < POINTS; p++) if (got[p] !== ww[p]) mismatches++;
        }
      }
      const read = n / ((performance.now() - t1) / 1000);
      return { insert, read, bytes: ((await stored()) - before) / n, mismatches };
    };
    for (let r = 0; r < rounds; r++) {
      {
        const x = await storeRound(r);
        ctx.log(`round ${r + 1} store: insert ${x.insert.toFixed(0)}/s, read ${x.read.toFixed(0)}/s, ${x.bytes.toFixed(0)} B/spectrum, ${x.mismatches} mismatching values`);
        const prev = best.store;
        best.store = { insert: Math.max(prev?.insert ?? 0, x.insert), read: Math.max(prev?.read ?? 0, x.read), bytes: x.bytes, mismatches: (prev?.mismatches ?? 0) + x.mismatches };
      }
      for (const [kind, k] of Object.entries(kinds)) {
        const table = `spectra_${kind}_${r}`;
        await sql.unsafe(`CREATE TABLE ${table} (batch text NOT NULL, idx integer NOT NULL, t bigint NOT NULL, vals ${k.type} NOT NULL, PRIMARY KEY (batch, idx))`);
        const t0 = performance.now();
        for (let i = 0; i < n; i += PER_COMMIT) {
          const rows: Record<string, unknown>[] = [];
          for (let j = i; j < Math.min(n, i + PER_COMMIT); j++) rows.push({ batch: `b${Math.floor(j / 1000)}`, idx: j % 1000, t: 1_767_600_000_000 + j * 10_000, vals: (k.param as (a: Float32Array) => unknown)(data[j]!) });
          await sql.begin((tx) => tx`INSERT INTO ${tx(table)} ${tx(rows as Record<string, any>[])}`);
        }
        const insert = n / ((performance.now() - t0) / 1000);
        const t1 = performance.now();
        let mismatches = 0;
        for (let b = 0; b * 1000 < n; b++) {
          const rows = await sql.unsafe(`SELECT idx, vals FROM ${table} WHERE batch = $1 ORDER BY idx`, [`b${b}`]);
          for (const row of rows) {
            const got = (k.back as (v: unknown) => Float32Array)(row.vals);
            const want = data[b * 1000 + (row.idx as number)]!;
            const gw = new Uint32Array(got.buffer, got.byteOffset, got.length);
            const ww = new Uint32Array(want.buffer, want.byteOffset, want.length);
            for (let p = 0; p < POINTS; p++) if (gw[p] !== ww[p]) mismatches++;
          }
        }
        const read = n / ((performance.now() - t1) / 1000);
        const [{ bytes }] = (await sql.unsafe(`SELECT pg_total_relation_size('${table}')::float8 AS bytes`)) as unknown as [{ bytes: number }];
        ctx.log(`round ${r + 1} ${kind.padEnd(5)}: insert ${insert.toFixed(0)}/s, read ${read.toFixed(0)}/s, ${(bytes / n).toFixed(0)} B/spectrum, ${mismatches} mismatching values`);
        const prev = best[kind];
        best[kind] = {
          insert: Math.max(prev?.insert ?? 0, insert),
          read: Math.max(prev?.read ?? 0, read),
          bytes: bytes / n,
          mismatches: (prev?.mismatches ?? 0) + mismatches,
        };
        await sql.unsafe(`DROP TABLE ${table}`);
      }
    }
    await st.close();
    const b = best.bytea!;
    const a = best.real!;
    const so = best.store!;
    return {
      pg_bytea_insert_per_s: b.insert,
      pg_real_insert_per_s: a.insert,
      pg_bytea_vs_real_insert: b.insert / a.insert,
      pg_bytea_read_per_s: b.read,
      pg_real_read_per_s: a.read,
      pg_bytea_vs_real_read: b.read / a.read,
      pg_bytea_bytes_per_spectrum: b.bytes,
      pg_real_bytes_per_spectrum: a.bytes,
      pg_bytea_roundtrip_mismatches: b.mismatches,
      pg_real_roundtrip_mismatches: a.mismatches,
      pg_store_insert_per_s: so.insert,
      pg_store_vs_bare_insert: so.insert / b.insert,
      pg_store_read_per_s: so.read,
      pg_store_vs_bare_read: so.read / b.read,
      pg_store_bytes_per_spectrum: so.bytes,
      pg_store_roundtrip_mismatches: so.mismatches,
    };
  } finally {
    await sql.end({ timeout: 5 });
    await cluster.stop();
  }
}
