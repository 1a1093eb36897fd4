/**
 * Binary spectrum frame, ingest protocol version 1. All fields little-endian.
 *
 * | offset | bytes | type    | field                                              |
 * | ------ | ----- | ------- | -------------------------------------------------- |
 * | 0      | 4     | ASCII   | magic "TDL1"                                       |
 * | 4      | 2     | uint16  | protocol version (1)                               |
 * | 6      | 2     | uint16  | flags (reserved: must be 0)                        |
 * | 8      | 8     | float64 | seq (an integer ≤ 2^53 − 1)                        |
 * | 16     | 8     | float64 | t, ms since the Unix epoch, UTC                    |
 * | 24     | 4     | uint32  | n, number of points                                |
 * | 28     | 4     | uint32  | reserved (must be 0)                               |
 * | 32     | 4·n   | float32 | values, in the order of the hello axis             |
 *
 * The 32-byte header keeps the values 4-byte aligned.
 */
import { IngestProtocolError, MAX_SPECTRUM_POINTS, PROTOCOL_VERSION, type SpectrumEntry } from './ingest-messages.ts';

export const FRAME_MAGIC = 0x314c4454; // bytes 'T' 'D' 'L' '1' read as little-endian uint32
export const FRAME_HEADER_BYTES = 32;

export function encodeSpectrumFrame(seq: number, t: number, values: ArrayLike<number>): Uint8Array {
  const n = values.length;
  const buf = new ArrayBuffer(FRAME_HEADER_BYTES + 4 * n);
  const dv = new DataView(buf);
  dv.setUint32(0, FRAME_MAGIC, true);
  dv.setUint16(4, PROTOCOL_VERSION, true);
  dv.setUint16(6, 0, true);
  dv.setFloat64(8, seq, true);
  dv.setFloat64(16, t, true);
  dv.setUint32(24, n, true);
  dv.setUint32(28, 0, true);
  const out = new Float32Array(buf, FRAME_HEADER_BYTES, n);
  for (let i = 0; i < n; i++) out[i] = values[i]!;
  return new Uint8Array(buf);
}

/**
 * Decode one binary frame. The values are copied into a fresh Float32Array (the caller keeps it).
 * Throws IngestProtocolError naming the problem.
 */
export function decodeSpectrumFrame(bytes: Uint8Array): SpectrumEntry {
  if (bytes.byteLength < FRAME_HEADER_BYTES) {
    throw new IngestProtocolError('bad-frame', `binary frame is ${bytes.byteLength} bytes, shorter than the ${FRAME_HEADER_BYTES}-byte header`);
  }
  const dv = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const magic = dv.getUint32(0, true);
  if (magic !== FRAME_MAGIC) throw new IngestProtocolError('bad-frame', `binary frame magic is 0x${magic.toString(16)}, expected "TDL1"`);
  const version = dv.getUint16(4, true);
  if (version !== PROTOCOL_VERSION) {
    throw new IngestProtocolError('unsupported-protocol', `binary frame protocol version is ${version}; this server speaks ${PROTOCOL_VERSION}`);
  }
  const seq = dv.getFloat64(8, true);
  if (!Number.isSafeInteger(seq) || seq < 0) throw new IngestProtocolError('bad-frame', `binary frame seq ${seq} is not a non-negative integer`);
  const flags = dv.getUint16(6, true);
  if (flags !== 0) throw new IngestProtocolError('bad-frame', `binary frame seq ${seq}: flags (bytes 6–7) are 0x${flags.toString(16)}; they are reserved and must be 0`, seq);
  const reserved = dv.getUint32(28, true);
  if (reserved !== 0) throw new IngestProtocolError('bad-frame', `binary frame seq ${seq}: bytes 28–31 are 0x${reserved.toString(16)}; they are reserved and must be 0`, seq);
  const t = dv.getFloat64(16, true);
  // A finite t is judged by the server against its clock (the plausibility window).
  if (!Number.isFinite(t)) throw new IngestProtocolError('non-finite', `binary frame seq ${seq}: t is ${t}, not a finite time`, seq);
  const n = dv.getUint32(24, true);
  if (n < 2 || n > MAX_SPECTRUM_POINTS) {
    throw new IngestProtocolError('bad-frame', `binary frame seq ${seq}: point count ${n} is outside 2…${MAX_SPECTRUM_POINTS}`, seq);
  }
  if (bytes.byteLength !== FRAME_HEADER_BYTES + 4 * n) {
    throw new IngestProtocolError(
      'wrong-length',
      `binary frame seq ${seq}: header says ${n} points (${FRAME_HEADER_BYTES + 4 * n} bytes) but the frame is ${bytes.byteLength} bytes`,
      seq,
    );
  }
  const values = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    const v = dv.getFloat32(FRAME_HEADER_BYTES + 4 * i, true);
    if (!Number.isFinite(v)) throw new IngestProtocolError('non-finite', `binary frame seq ${seq}: value[${i}] is not finite`, seq);
    values[i] = v;
  }
  return { type: 'spectrum', seq, t, values };
}
