import { describe, expect, it } from 'vitest';
import { z } from 'zod';
import fc from 'fast-check';
import { canonicalJson, sha256Hex, writeModelFile, readModelFile, ModelFileError } from '../../core/model/model-file.ts';
import { pythonAvailable, runPython } from '../preprocess/python.ts';

describe('sha256Hex', () => {
  it('matches the FIPS 180-2 appendix B examples', () => {
    expect(sha256Hex('abc')).toBe('ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad');
    expect(sha256Hex('abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq')).toBe('248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1');
    expect(sha256Hex('')).toBe('e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855');
  });
  it.skipIf(!pythonAvailable)('hashes the UTF-8 bytes (python hashlib agrees on non-ASCII text)', () => {
    const text = 'Hotelling T² · Q/SPE · λ=1450 nm · 水分';
    expect(sha256Hex(text)).toBe(runPython<string>('import hashlib\nout = hashlib.sha256(inp.encode("utf-8")).hexdigest()', text));
  });
});

describe('canonicalJson', () => {
  it('sorts keys at every level, keeps array order, drops undefined, turns typed arrays into arrays', () => {
    expect(canonicalJson({ b: 1, a: { d: [3, 1, { z: true, y: null }], c: 'x' }, u: undefined, f: Float64Array.of(0.1, -2.5) })).toBe(
      '{"a":{"c":"x","d":[3,1,{"y":null,"z":true}]},"b":1,"f":[0.1,-2.5]}',
    );
  });
  it.skipIf(!pythonAvailable)('equals python json.dumps(sort_keys=True, separators=(",", ":"), ensure_ascii=False) on plain data', () => {
    const v = { zeta: [1, 2.5, -3, 'ä'], alpha: { b: false, a: [null, { y: 0.125, x: 'T²' }] }, mid: 'quote " and \\ backslash' };
    expect(canonicalJson(v)).toBe(runPython<string>('out = json.dumps(inp, sort_keys=True, separators=(",", ":"), ensure_ascii=False)', v));
  });
  it('refuses NaN, Infinity and cycles with the path', () => {
    expect(() => canonicalJson({ a: [1, NaN] })).toThrow(/a\[1\] is NaN/);
    expect(() => canonicalJson({ a: [{ b: [0, { c: Float64Array.of(1, 2, -Infinity) }] }] })).toThrow(/a\[0\]\.b\[1\]\.c\[2\] is -Infinity/);
    expect(() => canonicalJson({ a: { b: Infinity } })).toThrow(/a\.b is Infinity/);
    const c: Record<string, unknown> = {};
    c.self = c;
    expect(() => canonicalJson(c)).toThrow(/cycle/);
  });
  it('property: canonical JSON is a fixed point of parse → canonicalize, and the written file equals canonicalJson of its parse (fast-check)', () => {
    fc.assert(
      fc.property(fc.jsonValue(), (v) => {
        const c = canonicalJson(v);
        const file = writeModelFile('fx', 1, { v });
        return canonicalJson(JSON.parse(c)) === c && canonicalJson(JSON.parse(file)) === file;
      }),
      { numRuns: 300, seed: 2 },
    );
  });

  it('property: parse(canonical(x)) round-trips every float64 exactly (fast-check)', () => {
    fc.assert(
      fc.property(fc.array(fc.double({ noNaN: true, noDefaultInfinity: true })), (xs) => {
        const back = JSON.parse(canonicalJson({ xs })) as { xs: number[] };
        // JSON has no −0: it reads back as 0, the one value JSON cannot tell apart.
        return back.xs.every((v, i) => v === xs[i] && (Object.is(v, xs[i]) || Object.is(xs[i], -0)));
      }),
      { numRuns: 300, seed: 1 },
    );
  });
});

const bodySchema = z.strictObject({ name: z.string(), weights: z.array(z.number()), nested: z.object({ k: z.number().int() }) });
const body = { name: 'dryer-A', weights: [0.1, 1 / 3, -2e-300, 12345.678], nested: { k: 4 } };

describe('writeModelFile / readModelFile', () => {
  const text = writeModelFile('tideline-test-model', 1, body);

  it('round-trips and reports the hash it checked', () => {
    const r = readModelFile(text, 'tideline-test-model', [1], bodySchema);
    expect(r.body).toEqual(body);
    expect(r.sha256).toMatch(/^[0-9a-f]{64}$/);
    expect(r.sha256).toBe(sha256Hex(canonicalJson({ body, format: 'tideline-test-model', version: 1 })));
    // Writing is deterministic and independent of key order.
    expect(writeModelFile('tideline-test-model', 1, { nested: { k: 4 }, weights: body.weights, name: 'dryer-A' })).toBe(text);
  });

  function problem(t: string, versions = [1]): [string, string] {
    try {
      readModelFile(t, 'tideline-test-model', versions, bodySchema);
    } catch (e) {
      if (e instanceof ModelFileError) return [e.problem, e.message];
      throw e;
    }
    return ['none', ''];
  }

  it('not JSON', () => {
    const [p, m] = problem(text.slice(0, -5));
    expect(p).toBe('not-json');
    expect(m).toMatch(/not JSON/);
  });
  it('wrong format name', () => {
    const [p, m] = problem(writeModelFile('some-other-format', 1, body));
    expect(p).toBe('format');
    expect(m).toMatch(/format is "some-other-format"; expected "tideline-test-model"/);
  });
  it('unsupported version', () => {
    const [p, m] = problem(writeModelFile('tideline-test-model', 3, body), [1, 2]);
    expect(p).toBe('version');
    expect(m).toMatch(/version 3 .* this build reads versions 1, 2/);
  });
  it('hash mismatch when one digit of the body changes', () => {
    const [p, m] = problem(text.replace('12345.678', '12345.679'));
    expect(p).toBe('hash');
    expect(m).toMatch(/hash mismatch/);
  });
  it('hash mismatch when the version is edited (the hash covers it)', () => {
    expect(problem(text.replace('"version":1', '"version":2'), [1, 2])[0]).toBe('hash');
  });
  it('shape errors name the zod path', () => {
    const [p, m] = problem(writeModelFile('tideline-test-model', 1, { ...body, weights: [1, 'two'] }));
    expect(p).toBe('shape');
    expect(m).toMatch(/body\.weights\[1\]/);
    const [p2, m2] = problem(writeModelFile('tideline-test-model', 1, { ...body, nested: { k: 1.5 } }));
    expect(p2).toBe('shape');
    expect(m2).toMatch(/body\.nested\.k/);
  });
  it('envelope errors', () => {
    expect(problem('[1,2]')[0]).toBe('envelope');
    expect(problem('{"format":"tideline-test-model","version":1,"body":{}}')[1]).toMatch(/lacks 'sha256'/);
  });
  it('a file re-indented by hand still reads (the hash is over the canonical form, not the bytes)', () => {
    const pretty = JSON.stringify(JSON.parse(text), null, 2);
    expect(readModelFile(pretty, 'tideline-test-model', [1], bodySchema).body).toEqual(body);
  });
});
