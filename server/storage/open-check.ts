/**
 * Checks made when a database file is opened, before Tideline writes anything to it. Each refusal is
 * a StorageOpenError whose message is one sentence naming the file and what is wrong with it, so
 * that `npm run tideline -- serve` ends with that sentence and not a stack trace.
 *
 * - a 0-byte file where a database was expected (a fresh installation starts from a missing file);
 * - a file that is not SQLite (a foreign file) or that is shorter than its own header says (truncated);
 * - an SQLite file that is not a Tideline database (tables, but no schema_migrations);
 * - a database from a newer Tideline: a higher schema version, a migration this version does not
 *   know, or a migration applied from a file with another checksum (migrate.ts);
 * - a table created by an applied migration that is no longer there (dropped outside Tideline).
 */
import { closeSync, openSync, readSync, statSync } from 'node:fs';
import { StartupError } from '../startup-error.ts';

export class StorageOpenError extends StartupError {
  override name = 'StorageOpenError';
}

const SQLITE_MAGIC = Buffer.from('SQLite format 3\0', 'latin1');
const RESTORE = 'restore it from a backup, or point dataDir at the right folder';

function readHeader(file: string, size: number): Buffer {
  const fd = openSync(file, 'r');
  try {
    const b = Buffer.alloc(Math.min(100, size));
    readSync(fd, b, 0, b.length, 0);
    return b;
  } finally {
    closeSync(fd);
  }
}

/**
 * Looks at the file before SQLite opens it. A missing file is a new installation (SQLite creates
 * it); anything else must look like a whole SQLite database.
 */
export function checkDatabaseFile(file: string): void {
  const st = statSync(file, { throwIfNoEntry: false });
  if (!st) return;
  if (!st.isFile()) throw new StorageOpenError(`database ${file} is not a file; dataDir must name a folder holding tideline.db`);
  const wal = statSync(`${file}-wal`, { throwIfNoEntry: false });
  const walBytes = wal?.isFile() ? wal.size : 0;
  if (st.size === 0) {
    throw new StorageOpenError(
      `database ${file} is an empty file (0 bytes) where a Tideline database was expected${walBytes > 0 ? ` (beside a ${walBytes}-byte write-ahead log)` : ''}; ` +
        `Tideline will not start it as a new, empty installation: ${RESTORE}; to really start afresh, delete the file`,
    );
  }
  const h = readHeader(file, st.size);
  if (h.length < 100 || !h.subarray(0, 16).equals(SQLITE_MAGIC)) {
    throw new StorageOpenError(`database ${file} is not an SQLite database (it does not begin with the SQLite header): a foreign or damaged file; Tideline did not change it; ${RESTORE}`);
  }
  const raw = h.readUInt16BE(16);
  const pageSize = raw === 1 ? 65536 : raw;
  if (pageSize < 512 || pageSize > 65536 || (pageSize & (pageSize - 1)) !== 0) {
    throw new StorageOpenError(`database ${file} has a damaged header (page size ${raw}); ${RESTORE}`);
  }
  if (st.size % pageSize !== 0) {
    throw new StorageOpenError(`database ${file} is truncated or damaged: its ${st.size} bytes are not a whole number of ${pageSize}-byte pages; ${RESTORE}`);
  }
  // The page count in the header is valid when "version-valid-for" equals the change counter
  // (SQLite file format, section 1.3.7). With a non-empty WAL the file may legitimately lag behind.
  const pages = h.readUInt32BE(28);
  const valid = h.readUInt32BE(92) === h.readUInt32BE(24);
  if (valid && pages > 0 && st.size < pages * pageSize && walBytes === 0) {
    throw new StorageOpenError(
      `database ${file} is truncated: it holds ${st.size} bytes but its header says ${pages} pages of ${pageSize} bytes (${pages * pageSize} bytes); ${RESTORE}`,
    );
  }
}

/** An SQLite error met while opening or migrating, as a sentence naming the file. */
export function describeOpenError(file: string, e: unknown): Error {
  if (e instanceof StorageOpenError) return e;
  const code = (e as { code?: string })?.code ?? '';
  const msg = (e as Error)?.message ?? String(e);
  if (code === 'SQLITE_NOTADB') return new StorageOpenError(`database ${file} is not an SQLite database (${msg}): a foreign or damaged file; ${RESTORE}`);
  if (code === 'SQLITE_CORRUPT' || code.startsWith('SQLITE_CORRUPT')) return new StorageOpenError(`database ${file} is damaged (${msg}); ${RESTORE}`);
  if (code === 'SQLITE_CANTOPEN' || code.startsWith('SQLITE_CANTOPEN')) return new StorageOpenError(`database ${file} cannot be opened (${msg}): check that the folder exists and that Tideline may read and write it`);
  if (code === 'SQLITE_READONLY' || code.startsWith('SQLITE_READONLY')) return new StorageOpenError(`database ${file} is read-only (${msg}): Tideline must be able to write it`);
  if (code === 'SQLITE_BUSY' || code.startsWith('SQLITE_BUSY')) return new StorageOpenError(`database ${file} is locked by another program (${msg})`);
  if (code.startsWith('SQLITE_')) return new StorageOpenError(`database ${file} could not be opened: ${msg}`);
  return e instanceof Error ? e : new Error(msg);
}
