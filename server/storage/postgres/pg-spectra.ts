/**
 * Batches and spectra on PostgreSQL (migrations/002-spectra.sql): spectra as `bytea` (Float32
 * little-endian, the bytes the analyzer sent, as SQLite's BLOB; bench/sections/pg-spectra.ts
 * measured it against `real[]`), in a table partitioned by the month of the batch's start.
 *
 * This is the part of a future PostgreSQL ingest writer that stores and reads spectra; the server
 * does not use it yet (docs/postgresql.md). Partitions are made by `ensurePartition` in their own
 * short transaction before the batch that needs one is written: creating a partition locks the
 * parent table, which must not happen inside an ingest commit.
 */
import type { BatchRow, SpectrumRow } from '../storage.ts';
import type { Q } from './pg-types.ts';

export type NewBatch = Omit<BatchRow, 'spectrumCount' | 'lastSeq' | 'lastT' | 'endpointState' | 'endpointAt' | 'status' | 'endSeq' | 'endT' | 'endReason'>;
export type NewSpectrum = SpectrumRow & { analyzer: string; boot: number; receivedAt: number };

const MONTH_MS = 31 * 24 * 3600 * 1000;

function f32Bytes(a: Float32Array): Buffer {
  return Buffer.from(a.buffer, a.byteOffset, a.byteLength);
}
function bytesF32(b: Buffer): Float32Array {
  const out = new Float32Array(b.byteLength / 4);
  new Uint8Array(out.buffer).set(b);
  return out;
}
function f64Bytes(a: Float64Array): Buffer {
  const f = Float64Array.from(a);
  return Buffer.from(f.buffer, f.byteOffset, f.byteLength);
}

interface SpectrumDbRow {
  batch: string;
  idx: number;
  seq: number;
  t: number;
  vals: Buffer;
}
const spectrumFromRow = (r: SpectrumDbRow): SpectrumRow => ({ batch: r.batch, idx: r.idx, seq: r.seq, t: r.t, values: bytesF32(r.vals) });

export class PgSpectra {
  /**
   * Batch start times (the partition key) by batch id. A start time cannot change once it is
   * stored with spectra (the spectra's foreign key holds it), so they are remembered; a batch
   * not known here is looked up.
   */
  private readonly batchStarts = new Map<string, number>();

  constructor(private readonly sql: Q) {}

  /** The partition for batches started at `startT` (ms epoch), created when missing; its name. */
  async ensurePartition(startT: number): Promise<string> {
    const [r] = await this.sql<{ p: string }[]>`SELECT tideline_spectra_partition(${startT}::float8) AS p`;
    return r!.p;
  }

  /** This month's and next month's partitions (at open, and now and then), so ingest seldom makes one. */
  async ensureCurrentPartitions(now = Date.now()): Promise<void> {
    await this.ensurePartition(now);
    await this.ensurePartition(now + MONTH_MS);
  }

  /** Start a batch (inside the caller's transaction `q`); its partition must exist (ensurePartition). */
  async insertBatch(q: Q, b: NewBatch): Promise<void> {
    await q`INSERT INTO batches (id, unit, analyzer, boot, product, status, start_seq, start_t, axis, model_version, created_at)
      VALUES (${b.id}, ${b.unit}, ${b.analyzer}, ${b.boot}, ${b.product}, 'open', ${b.startSeq}, ${b.startT}, ${f64Bytes(b.axis)}, ${b.modelVersion}, ${b.createdAt})`;
  }

  /**
   * Store spectra (inside the caller's transaction `q`), each with its stream position; a position
   * or a (batch, index) stored already is refused by the database and the transaction fails.
   */
  async insertSpectra(q: Q, rows: NewSpectrum[]): Promise<void> {
    if (rows.length === 0) return;
    const missing = [...new Set(rows.map((r) => r.batch))].filter((b) => !this.batchStarts.has(b));
    if (missing.length) for (const b of await q<{ id: string; start_t: number }[]>`SELECT id, start_t FROM batches WHERE id IN ${q(missing)}`) this.batchStarts.set(b.id, b.start_t);
    const spectra = rows.map((r) => {
      const batchT = this.batchStarts.get(r.batch);
      if (batchT === undefined) throw new Error(`spectrum ${r.analyzer}/${r.boot}/${r.seq}: batch ${r.batch} is not stored`);
      return { batch: r.batch, batch_t: batchT, idx: r.idx, analyzer: r.analyzer, boot: r.boot, seq: r.seq, t: r.t, vals: f32Bytes(r.values), received_at: r.receivedAt };
    });
    // One statement (one round trip): the spectra, and a key row for each.
    await q`WITH s AS (INSERT INTO spectra ${q(spectra)} RETURNING analyzer, boot, seq, batch_t, batch, idx)
      INSERT INTO spectrum_keys (analyzer, boot, seq, batch_t, batch, idx) SELECT analyzer, boot, seq, batch_t, batch, idx FROM s`;
  }

  // Reads name the batch's start time so that PostgreSQL scans the batch's partition only.

  async readSpectra(batch: string, fromSeq: number, toSeq: number, limit: number): Promise<SpectrumRow[]> {
    const rows = await this.sql<SpectrumDbRow[]>`SELECT batch, idx, seq, t, vals FROM spectra
      WHERE batch_t = (SELECT start_t FROM batches WHERE id = ${batch}) AND batch = ${batch} AND seq >= ${fromSeq} AND seq <= ${toSeq} ORDER BY idx LIMIT ${limit}`;
    return rows.map(spectrumFromRow);
  }

  async *iterateSpectra(batch: string, pageSize = 2000): AsyncIterable<SpectrumRow> {
    let idx = 0;
    for (;;) {
      const rows = await this.sql<SpectrumDbRow[]>`SELECT batch, idx, seq, t, vals FROM spectra
        WHERE batch_t = (SELECT start_t FROM batches WHERE id = ${batch}) AND batch = ${batch} AND idx >= ${idx} ORDER BY idx LIMIT ${pageSize}`;
      for (const r of rows) yield spectrumFromRow(r);
      if (rows.length < pageSize) return;
      idx = rows[rows.length - 1]!.idx + 1;
    }
  }

  async getSpectrumBySeq(batch: string, seq: number): Promise<SpectrumRow | null> {
    const [r] = await this.sql<SpectrumDbRow[]>`SELECT batch, idx, seq, t, vals FROM spectra
      WHERE batch_t = (SELECT start_t FROM batches WHERE id = ${batch}) AND batch = ${batch} AND seq = ${seq}`;
    return r ? spectrumFromRow(r) : null;
  }

  async spectrumTimes(batch: string): Promise<Float64Array> {
    const rows = await this.sql<{ t: number }[]>`SELECT t FROM spectra WHERE batch_t = (SELECT start_t FROM batches WHERE id = ${batch}) AND batch = ${batch} ORDER BY idx`;
    return Float64Array.from(rows, (r) => r.t);
  }

  /** The spectrum stored at a stream position (to compare a resend with), or null. */
  async atPosition(analyzer: string, boot: number, seq: number): Promise<{ t: number; values: Float32Array } | null> {
    const [r] = await this.sql<{ t: number; vals: Buffer }[]>`SELECT s.t, s.vals FROM spectrum_keys k
      JOIN spectra s ON s.batch_t = k.batch_t AND s.batch = k.batch AND s.idx = k.idx
      WHERE k.analyzer = ${analyzer} AND k.boot = ${boot} AND k.seq = ${seq}`;
    return r ? { t: r.t, values: bytesF32(r.vals) } : null;
  }
}
