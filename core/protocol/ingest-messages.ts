/**
 * Tideline ingest protocol, version 1 — message types and their validation.
 *
 * One WebSocket connection per analyzer at `/ingest`, authenticated at upgrade with the analyzer's
 * token (`Authorization: Bearer <token>`). The analyzer's stream is an ordered log: every
 * `batch-start`, spectrum and `batch-end` carries a sequence number `seq` that counts up by one
 * within one analyzer boot epoch (`boot`, chosen by the analyzer when it starts, e.g. its start time
 * in ms). The server persists entries in order and acks the highest contiguous persisted seq; a
 * reconnecting analyzer sends `hello` again, reads `welcome.resumeAfter` and resends from there.
 * Entries at or below the persisted seq are duplicates: acked again, never stored twice.
 *
 * Spectra travel as JSON (`type: "spectrum"`) or as binary frames (see binary-frame.ts).
 *
 * `analyzer-status` reports the analyzer's own NAMUR NE 107 status signal (good, failure, function
 * check, out of specification, maintenance required). It is a log entry like `batch-start`: it
 * carries a seq, is persisted and acked, and may come at any time, with or without an open batch.
 */
import { nameSchema } from '../io/names.ts';
import { z } from 'zod';
import { axisProblem, float32Problem } from './plausibility.ts';

export const PROTOCOL_VERSION = 1;

/** Upper bound on one WebSocket message, bytes (server maxPayload). */
export const MAX_MESSAGE_BYTES = 512 * 1024;
/**
 * Upper bound on points in one spectrum. A JSON spectrum of this many points, each written as the
 * longest JSON number a float32 needs (about 25 characters, e.g. -1.1754943508222875e-38), fits
 * MAX_MESSAGE_BYTES; as a binary frame it takes 64 KiB.
 */
export const MAX_SPECTRUM_POINTS = 16384;

const seqSchema = z.number().int().nonnegative().max(Number.MAX_SAFE_INTEGER);

/** A seq is an integer 0 … 2^53 − 1. Only such a number may ever become a stream position. */
export function isValidSeq(n: unknown): n is number {
  return typeof n === 'number' && Number.isSafeInteger(n) && n >= 0;
}

/** The entry types of the analyzer's log, and hello. A message of another type consumes no seq. */
export const ANALYZER_MESSAGE_TYPES = ['hello', 'batch-start', 'spectrum', 'batch-end', 'analyzer-status'] as const;
/**
 * Milliseconds since the Unix epoch, UTC. Any JSON number here (JSON.parse turns 1e999 into
 * Infinity): a non-finite time is refused as `non-finite` by parseAnalyzerText, and the server
 * judges a finite one against its own clock (the plausibility window of docs/protocol.md).
 */
const timeSchema = z.custom<number>((v) => typeof v === 'number' && !Number.isNaN(v), { message: 'expected a number (ms since the Unix epoch, UTC)' });
const idSchema = z.string().min(1).max(128).regex(/^[A-Za-z0-9._:-]+$/, 'use letters, digits and . _ : - only');

export const helloSchema = z.object({
  type: z.literal('hello'),
  protocol: z.literal(PROTOCOL_VERSION),
  analyzer: idSchema,
  boot: z.number().int().nonnegative(),
  /** Wavelength axis in nm, strictly increasing. */
  axis: z.array(z.number().finite()).min(2).max(MAX_SPECTRUM_POINTS),
  /** Optional free text for the record: vendor, model, serial, firmware. */
  instrument: nameSchema({ max: 256, empty: true }).optional(),
});

export const batchStartSchema = z.object({
  type: z.literal('batch-start'),
  seq: seqSchema,
  t: timeSchema,
  unit: idSchema,
  batch: idSchema,
  product: nameSchema({ max: 128 }),
});

export const batchEndSchema = z.object({
  type: z.literal('batch-end'),
  seq: seqSchema,
  t: timeSchema,
  batch: idSchema,
  /** Why the batch ended, as the analyzer or operator saw it. */
  reason: z.string().max(256).optional(),
});

/**
 * NAMUR NE 107 (2017) status signal categories as Tideline names them: 'good' when none of the
 * four applies, then failure (F), function check (C), out of specification (S), maintenance required (M).
 */
export const NE107_CATEGORIES = ['good', 'failure', 'function-check', 'out-of-specification', 'maintenance-required'] as const;
export type Ne107Category = (typeof NE107_CATEGORIES)[number];

export const analyzerStatusSchema = z.object({
  type: z.literal('analyzer-status'),
  seq: seqSchema,
  /** The analyzer's clock when the status took effect, ms since the Unix epoch. */
  t: timeSchema,
  status: z.enum(NE107_CATEGORIES),
  /** The analyzer's own diagnostic code, e.g. a vendor code or 'probe-cleaning'. */
  code: nameSchema({ max: 64 }).optional(),
  /** Free text for the operator and the record. */
  detail: nameSchema({ max: 256, empty: true }).optional(),
  /** The unit the analyzer serves; default: the unit of its open batch, else of its last batch. */
  unit: idSchema.optional(),
});

export const spectrumJsonSchema = z.object({
  type: z.literal('spectrum'),
  seq: seqSchema,
  t: timeSchema,
  /** Checked one by one in parseAnalyzerText: a number (else bad-message), finite as float32 (else non-finite). */
  values: z.array(z.unknown()).min(2).max(MAX_SPECTRUM_POINTS),
});

export const analyzerMessageSchema = z.discriminatedUnion('type', [
  helloSchema,
  batchStartSchema,
  batchEndSchema,
  spectrumJsonSchema,
  analyzerStatusSchema,
]);

export type HelloMessage = z.infer<typeof helloSchema>;
export type BatchStartMessage = z.infer<typeof batchStartSchema>;
export type BatchEndMessage = z.infer<typeof batchEndSchema>;
export type SpectrumJsonMessage = z.infer<typeof spectrumJsonSchema>;
export type AnalyzerStatusMessage = z.infer<typeof analyzerStatusSchema>;
export type AnalyzerMessage = z.infer<typeof analyzerMessageSchema>;

/** A spectrum after decoding, whichever encoding it came in. */
export interface SpectrumEntry {
  type: 'spectrum';
  seq: number;
  /** ms since the Unix epoch, UTC */
  t: number;
  values: Float32Array;
}

/** One entry of the analyzer's ordered log. */
export type LogEntry = BatchStartMessage | BatchEndMessage | SpectrumEntry | AnalyzerStatusMessage;

// ---- server -> analyzer ----------------------------------------------------------------------

export interface WelcomeMessage {
  type: 'welcome';
  protocol: typeof PROTOCOL_VERSION;
  analyzer: string;
  boot: number;
  /** Highest seq already persisted for this (analyzer, boot); -1 when none. Resend from resumeAfter + 1. */
  resumeAfter: number;
}

export interface AckMessage {
  type: 'ack';
  /** Highest contiguous persisted seq for this (analyzer, boot). */
  seq: number;
}

/** Stable error codes; the message text names the problem in words. */
export const INGEST_ERROR_CODES = [
  'bad-json',
  'bad-message',
  'bad-frame',
  'unsupported-protocol',
  'hello-required',
  'analyzer-mismatch',
  'axis-mismatch',
  'wrong-length',
  'non-finite',
  'time-implausible',
  'bad-axis',
  'model-mismatch',
  'conflict',
  'token-revoked',
  'seq-gap',
  'time-backwards',
  'no-open-batch',
  'batch-already-open',
  'batch-id-taken',
  'batch-mismatch',
  'unknown-unit',
  'too-large',
  'rate-limited',
  'internal',
] as const;
export type IngestErrorCode = (typeof INGEST_ERROR_CODES)[number];

export interface ErrorMessage {
  type: 'error';
  code: IngestErrorCode;
  message: string;
  /** The seq of the offending entry, when it had one. */
  seq?: number;
}

export type ServerToAnalyzerMessage = WelcomeMessage | AckMessage | ErrorMessage;

export class IngestProtocolError extends Error {
  constructor(
    readonly code: IngestErrorCode,
    message: string,
    readonly seq?: number,
  ) {
    super(message);
    this.name = 'IngestProtocolError';
  }
}

/** Parse one text frame from an analyzer. Throws IngestProtocolError naming the problem. */
export function parseAnalyzerText(text: string): HelloMessage | LogEntry {
  let raw: unknown;
  try {
    raw = JSON.parse(text);
  } catch (e) {
    throw new IngestProtocolError('bad-json', `message is not valid JSON: ${(e as Error).message}`);
  }
  if (raw && typeof raw === 'object' && 'type' in raw && (raw as { type: unknown }).type === 'hello') {
    const p = (raw as { protocol?: unknown }).protocol;
    if (p !== PROTOCOL_VERSION) {
      throw new IngestProtocolError(
        'unsupported-protocol',
        `hello.protocol is ${JSON.stringify(p)}; this server speaks protocol ${PROTOCOL_VERSION}`,
      );
    }
  }
  const type = raw && typeof raw === 'object' && !Array.isArray(raw) ? (raw as { type?: unknown }).type : undefined;
  if (typeof type !== 'string' || !(ANALYZER_MESSAGE_TYPES as readonly string[]).includes(type)) {
    // Not an entry of the log: whatever seq it carries is not consumed.
    throw new IngestProtocolError(
      'bad-message',
      `type: ${type === undefined ? 'missing' : `unknown message type ${JSON.stringify(type).slice(0, 40)}`}; expected one of ${ANALYZER_MESSAGE_TYPES.join(', ')}`,
    );
  }
  const parsed = analyzerMessageSchema.safeParse(raw);
  if (!parsed.success) {
    const issue = parsed.error.issues[0]!;
    const where = issue.path.length ? issue.path.join('.') : 'message';
    // Only a valid seq is named (and may be consumed): 1.5, 1e300 or 2^53 never become a position.
    const rawSeq = (raw as { seq?: unknown }).seq;
    throw new IngestProtocolError('bad-message', `${where}: ${issue.message}`, isValidSeq(rawSeq) ? rawSeq : undefined);
  }
  const m = parsed.data;
  if (m.type !== 'hello' && !Number.isFinite(m.t)) {
    throw new IngestProtocolError('non-finite', `${m.type} seq ${m.seq}: t is ${m.t}, not a finite time`, m.seq);
  }
  if (m.type === 'hello') {
    // Order only here; the range (ingest.axisMinNm … axisMaxNm) is the server's to check.
    const p = axisProblem(m.axis, { minNm: -Infinity, maxNm: Infinity });
    if (p) throw new IngestProtocolError('bad-axis', `hello.${p.message}`);
    return m;
  }
  if (m.type === 'spectrum') {
    const raw = m.values;
    const values = new Float32Array(raw.length);
    for (let i = 0; i < values.length; i++) {
      const v = raw[i];
      if (typeof v !== 'number') throw new IngestProtocolError('bad-message', `values.${i}: expected a number, got ${v === null ? 'null' : typeof v}`, m.seq);
      // Checked as the float32 it is stored as: 1e39 is a finite double but +Infinity as float32.
      const f = Math.fround(v);
      if (!Number.isFinite(f)) throw new IngestProtocolError('non-finite', `spectrum seq ${m.seq}: values[${i}] ${float32Problem(v)}`, m.seq);
      values[i] = f;
    }
    return { type: 'spectrum', seq: m.seq, t: m.t, values };
  }
  return m;
}

export function encodeAnalyzerStatus(m: Omit<AnalyzerStatusMessage, 'type'>): string {
  return JSON.stringify({ type: 'analyzer-status', ...m });
}

export function encodeSpectrumJson(seq: number, t: number, values: ArrayLike<number>): string {
  return JSON.stringify({ type: 'spectrum', seq, t, values: Array.from(values) });
}
