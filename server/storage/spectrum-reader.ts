/**
 * Reading stored spectra from another thread (the plant-history workers, server/models/history-*):
 * a connection cannot cross threads, so the storage hands out a serialisable reference
 * (Storage.spectrumSource()) and the worker opens its own reader with openSpectrumReader. On
 * SQLite that is a read-only connection to the same file (WAL: it reads a committed snapshot
 * beside the server's writes, never blocking them).
 */
import Database from 'better-sqlite3';
import type { SpectrumReader, SpectrumSourceRef } from './repositories.ts';

class SqliteSpectrumReader implements SpectrumReader {
  private readonly db: Database.Database;
  private readonly sAll;
  private readonly sFirst;

  constructor(file: string) {
    this.db = new Database(file, { readonly: true, fileMustExist: true });
    this.sAll = this.db.prepare<[string], { vals: Buffer }>('SELECT vals FROM spectra WHERE batch = ? ORDER BY idx');
    this.sFirst = this.db.prepare<[string], { vals: Buffer }>('SELECT vals FROM spectra WHERE batch = ? ORDER BY idx LIMIT 1');
  }

  async first(batch: string): Promise<Float32Array | null> {
    const r = this.sFirst.get(batch);
    if (!r) return null;
    const out = new Float32Array(r.vals.byteLength / 4);
    new Uint8Array(out.buffer).set(r.vals);
    return out;
  }

  async *spectra(batch: string, into: Float32Array): AsyncIterable<Float32Array> {
    const bytes = new Uint8Array(into.buffer, into.byteOffset, into.byteLength);
    for (const r of this.sAll.iterate(batch)) {
      if (r.vals.byteLength !== into.byteLength) throw new RangeError(`batch "${batch}": a spectrum has ${r.vals.byteLength / 4} values, expected ${into.length}`);
      bytes.set(r.vals);
      yield into;
    }
  }

  async close(): Promise<void> {
    this.db.close();
  }
}

export function openSpectrumReader(ref: SpectrumSourceRef): SpectrumReader {
  switch (ref.kind) {
    case 'sqlite':
      return new SqliteSpectrumReader(ref.file);
    default:
      throw new Error(`no spectrum reader for storage kind "${(ref as { kind: string }).kind}"`);
  }
}
