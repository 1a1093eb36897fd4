/**
 * Model files: one JSON document `{ body, format, sha256, version }` whose SHA-256 (FIPS 180-4,
 * via @noble/hashes, which also runs in the browser) covers the canonical serialization of
 * `{ body, format, version }`. Canonical = keys sorted by UTF-16 code unit order at every level,
 * no whitespace, numbers in JavaScript's shortest round-trip form (so a float64 survives exactly).
 * Reading checks, in order: JSON, envelope shape, format name, version, hash, body shape (zod).
 */
import { sha256 } from '@noble/hashes/sha2.js';
import { bytesToHex, utf8ToBytes } from '@noble/hashes/utils.js';
import type { z } from 'zod';

export type ModelFileProblem = 'not-json' | 'envelope' | 'format' | 'version' | 'hash' | 'shape';

export class ModelFileError extends Error {
  constructor(
    readonly problem: ModelFileProblem,
    message: string,
  ) {
    super(message);
    this.name = 'ModelFileError';
  }
}

function pathText(path: (string | number)[]): string {
  let s = '';
  for (const p of path) s += typeof p === 'number' ? `[${p}]` : s ? `.${p}` : p;
  return s || '(root)';
}

function badNumber(path: (string | number)[], v: number): TypeError {
  return new TypeError(`canonical JSON: ${pathText(path)} is ${v}; only finite numbers can be stored`);
}

/** `path` is a stack shared by the whole walk (pushed and popped), so nothing is allocated per element. */
function canon(value: unknown, path: (string | number)[], seen: Set<object>): string | undefined {
  if (value === null) return 'null';
  switch (typeof value) {
    case 'number':
      if (!Number.isFinite(value)) throw badNumber(path, value);
      return JSON.stringify(value);
    case 'string':
      return JSON.stringify(value);
    case 'boolean':
      return value ? 'true' : 'false';
    case 'undefined':
    case 'function':
    case 'symbol':
      return undefined;
    case 'bigint':
      throw new TypeError(`canonical JSON: ${pathText(path)} is a bigint; store it as a string or number`);
    default:
      break;
  }
  const obj = value as object;
  if (seen.has(obj)) throw new TypeError(`canonical JSON: ${pathText(path)} refers back to itself (cycle)`);
  if (typeof (obj as { toJSON?: unknown }).toJSON === 'function') {
    seen.add(obj);
    const r = canon((obj as { toJSON: () => unknown }).toJSON(), path, seen);
    seen.delete(obj);
    return r;
  }
  seen.add(obj);
  let out: string;
  if (Array.isArray(obj) || ArrayBuffer.isView(obj)) {
    const arr = obj as ArrayLike<unknown>;
    const n = arr.length;
    const parts: string[] = new Array(n);
    for (let i = 0; i < n; i++) {
      const v = arr[i];
      if (typeof v === 'number') {
        // Fast path for numeric arrays: String(v) is JSON's number form (shortest round trip; −0 → "0").
        if (v - v !== 0) {
          path.push(i);
          throw badNumber(path, v);
        }
        parts[i] = String(v);
      } else {
        path.push(i);
        parts[i] = canon(v, path, seen) ?? 'null';
        path.pop();
      }
    }
    out = `[${parts.join(',')}]`;
  } else {
    const keys = Object.keys(obj).sort();
    const parts: string[] = [];
    for (const k of keys) {
      path.push(k);
      const v = canon((obj as Record<string, unknown>)[k], path, seen);
      path.pop();
      if (v !== undefined) parts.push(`${JSON.stringify(k)}:${v}`);
    }
    out = `{${parts.join(',')}}`;
  }
  seen.delete(obj);
  return out;
}

/**
 * JSON with object keys sorted at every level and no whitespace. Typed arrays become arrays;
 * objects with toJSON() are serialized through it; undefined members are dropped (as JSON.stringify
 * does). NaN, ±Infinity, bigint and cycles are refused with the path, since JSON cannot hold them.
 */
export function canonicalJson(value: unknown): string {
  const r = canon(value, [], new Set());
  if (r === undefined) throw new TypeError('canonical JSON: the value is undefined');
  return r;
}

/** SHA-256 of the UTF-8 bytes of text, lower-case hex. */
export function sha256Hex(text: string): string {
  return bytesToHex(sha256(utf8ToBytes(text)));
}

/** The hashed text: canonical {body, format, version} (keys already in sorted order). */
function hashedText(format: string, version: number, bodyJson: string): string {
  return `{"body":${bodyJson},"format":${JSON.stringify(format)},"version":${version}}`;
}

function hashOf(format: string, version: number, body: unknown): string {
  return sha256Hex(hashedText(format, version, canonicalJson(body)));
}

/** Serialize `{ body, format, sha256, version }` canonically; the hash covers body, format and version. */
export function writeModelFile<T>(format: string, version: number, body: T): string {
  if (typeof format !== 'string' || format.length === 0) throw new TypeError('model file: format must be a non-empty string');
  if (!Number.isInteger(version) || version < 1) throw new TypeError(`model file: version must be a positive integer; got ${version}`);
  // Canonical JSON is a fixed point of parse → canonicalize, so the reader, which hashes the
  // canonical form of the body it parsed, hashes exactly this text (tested).
  const bodyJson = canonicalJson(body);
  const sha = sha256Hex(hashedText(format, version, bodyJson));
  return `{"body":${bodyJson},"format":${JSON.stringify(format)},"sha256":"${sha}","version":${version}}`;
}

/**
 * Parse and check a model file. Errors (ModelFileError, with `problem`) say what is wrong: not
 * JSON, wrong format name, unsupported version, hash mismatch, or the body's shape with the path.
 */
export function readModelFile<T>(text: string, format: string, versions: number[], bodySchema: z.ZodType<T>): { body: T; sha256: string; version: number } {
  let doc: unknown;
  try {
    doc = JSON.parse(text);
  } catch (e) {
    throw new ModelFileError('not-json', `model file is not JSON: ${(e as Error).message}`);
  }
  if (typeof doc !== 'object' || doc === null || Array.isArray(doc)) {
    throw new ModelFileError('envelope', 'model file must be a JSON object with format, version, sha256 and body');
  }
  const d = doc as Record<string, unknown>;
  for (const k of ['format', 'version', 'sha256', 'body']) {
    if (!(k in d)) throw new ModelFileError('envelope', `model file lacks '${k}'`);
  }
  const extra = Object.keys(d).filter((k) => !['format', 'version', 'sha256', 'body'].includes(k));
  if (extra.length) throw new ModelFileError('envelope', `model file has unexpected top-level member(s): ${extra.join(', ')}`);
  if (d.format !== format) {
    throw new ModelFileError('format', `model file format is ${JSON.stringify(d.format)}; expected "${format}"`);
  }
  if (typeof d.version !== 'number' || !versions.includes(d.version)) {
    throw new ModelFileError('version', `model file version ${JSON.stringify(d.version)} of "${format}" is not supported; this build reads version${versions.length > 1 ? 's' : ''} ${versions.join(', ')}`);
  }
  if (typeof d.sha256 !== 'string' || !/^[0-9a-f]{64}$/.test(d.sha256)) {
    throw new ModelFileError('envelope', 'model file sha256 must be 64 lower-case hex digits');
  }
  let actual: string;
  try {
    actual = hashOf(format, d.version, d.body);
  } catch (e) {
    throw new ModelFileError('shape', `model file body cannot be serialized: ${(e as Error).message}`);
  }
  if (actual !== d.sha256) {
    throw new ModelFileError('hash', `model file hash mismatch: the file says sha256 ${d.sha256} but its content hashes to ${actual}; it was changed after it was written`);
  }
  const r = bodySchema.safeParse(d.body);
  if (!r.success) {
    const issues = r.error.issues.slice(0, 3).map((i) => `body${i.path.length ? (typeof i.path[0] === 'number' ? '' : '.') : ''}${pathText(i.path as (string | number)[]).replace('(root)', '')}: ${i.message}`);
    throw new ModelFileError('shape', `model file body has the wrong shape: ${issues.join('; ')}${r.error.issues.length > 3 ? ` (and ${r.error.issues.length - 3} more)` : ''}`);
  }
  return { body: r.data, sha256: d.sha256, version: d.version };
}
