import { describe, expect, it } from 'vitest';
import { decodeSpectrumFrame, encodeSpectrumFrame, FRAME_HEADER_BYTES } from '../../core/protocol/binary-frame.ts';
import { IngestProtocolError, parseAnalyzerText, encodeSpectrumJson } from '../../core/protocol/ingest-messages.ts';

describe('binary spectrum frame (protocol v1)', () => {
  it('round-trips seq, time and Float32 values', () => {
    const values = [0.1, 0.25, -3.5, 1e-6];
    const bytes = encodeSpectrumFrame(123456789012, 1764633600123.5, values);
    expect(bytes.byteLength).toBe(FRAME_HEADER_BYTES + 4 * values.length);
    const d = decodeSpectrumFrame(bytes);
    expect(d.seq).toBe(123456789012);
    expect(d.t).toBe(1764633600123.5);
    expect(Array.from(d.values)).toEqual(Array.from(Float32Array.from(values)));
  });

  it('lays the header out little-endian as documented', () => {
    const bytes = encodeSpectrumFrame(7, 1000, [1, 2]);
    expect(String.fromCharCode(...bytes.slice(0, 4))).toBe('TDL1');
    const dv = new DataView(bytes.buffer);
    expect(dv.getUint16(4, true)).toBe(1);
    expect(dv.getFloat64(8, true)).toBe(7);
    expect(dv.getUint32(24, true)).toBe(2);
    expect(dv.getFloat32(32, true)).toBe(1);
  });

  it.each([
    ['short frame', new Uint8Array(10), 'bad-frame'],
    ['bad magic', (() => { const b = encodeSpectrumFrame(1, 1, [1, 2]); b[0] = 0; return b; })(), 'bad-frame'],
    ['truncated values', encodeSpectrumFrame(1, 1, [1, 2, 3]).slice(0, 40), 'wrong-length'],
    ['NaN value', encodeSpectrumFrame(1, 1, [1, NaN]), 'non-finite'],
  ])('refuses a %s with a named error', (_name, bytes, code) => {
    try {
      decodeSpectrumFrame(bytes as Uint8Array);
      expect.unreachable();
    } catch (e) {
      expect(e).toBeInstanceOf(IngestProtocolError);
      expect((e as IngestProtocolError).code).toBe(code);
      expect((e as Error).message.length).toBeGreaterThan(10);
    }
  });
});

describe('JSON analyzer messages', () => {
  it('parses a spectrum into Float32 values', () => {
    const m = parseAnalyzerText(encodeSpectrumJson(3, 5000, [1, 2, 3]));
    expect(m.type).toBe('spectrum');
    if (m.type === 'spectrum') expect(Array.from(m.values)).toEqual([1, 2, 3]);
  });
  it('names the field that is wrong', () => {
    expect(() => parseAnalyzerText('{"type":"batch-start","seq":1,"t":5,"unit":"dryer-1","product":"X"}')).toThrow(/batch/);
    expect(() => parseAnalyzerText('{nope')).toThrow(IngestProtocolError);
    expect(() => parseAnalyzerText('{"type":"hello","protocol":2,"analyzer":"a","boot":1,"axis":[1,2]}')).toThrow(/protocol/);
    expect(() => parseAnalyzerText('{"type":"hello","protocol":1,"analyzer":"a","boot":1,"axis":[2,1]}')).toThrow(/increase/);
  });
});
