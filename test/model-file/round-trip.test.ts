import { describe, expect, it } from 'vitest';
import { z } from 'zod';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';
import { fitChain, loadChain, fittedChainJsonSchema, type ChainSpec } from '../../core/preprocess/index.ts';
import { fitPls1, loadPls1, createPls1Predictor, pls1JsonSchema } from '../../core/pls/index.ts';
import { writeModelFile, readModelFile } from '../../core/model/model-file.ts';
import { seededRandom } from '../preprocess/python.ts';

const bodySchema = z.strictObject({ chain: fittedChainJsonSchema, pls: pls1JsonSchema, meta: z.strictObject({ author: z.string(), createdAt: z.number() }) });

describe('save → load → apply is bit-identical (chain + PLS through the model file)', () => {
  it('preprocessed predictions, T² and Q agree in every bit', () => {
    const rnd = seededRandom(2026);
    const axis = Array.from({ length: 300 }, (_, j) => 1100 + 3 * j);
    const spectra: number[][] = [];
    const y: number[] = [];
    for (let i = 0; i < 40; i++) {
      const water = 2 + 6 * rnd();
      const scatter = 0.8 + 0.4 * rnd();
      spectra.push(axis.map((l) => scatter * (0.3 + water * 0.02 * Math.exp(-(((l - 1450) / 30) ** 2)) + 0.1 * Math.exp(-(((l - 1700) / 50) ** 2))) + 0.002 * rnd()));
      y.push(water);
    }
    const spec: ChainSpec = [
      { step: 'select', ranges: [[1150, 1900]] },
      { step: 'savgol', window: 15, polyorder: 2, deriv: 2 },
      { step: 'snv' },
      { step: 'msc' },
      { step: 'scale', center: true, scaling: 'pareto' },
    ];
    const chain = fitChain(spec, axis, matrixFromRows(spectra));
    const Xp = chain.applyMatrix(matrixFromRows(spectra));
    const pls = fitPls1(Xp, y, { components: 3 });
    const text = writeModelFile('tideline-test-bundle', 1, { chain: chain.toJSON(), pls: pls.toJSON(), meta: { author: 'test', createdAt: 1764633600000 } });
    const { body } = readModelFile(text, 'tideline-test-bundle', [1], bodySchema);
    const chain2 = loadChain(body.chain);
    const pls2 = loadPls1(body.pls);
    const p1 = createPls1Predictor(pls);
    const p2 = createPls1Predictor(pls2);
    const b1 = new Float64Array(chain.outputAxis.length);
    const b2 = new Float64Array(chain2.outputAxis.length);
    let checked = 0;
    for (let k = 0; k < 25; k++) {
      const raw = Float32Array.from(axis, (l) => 0.9 * (0.3 + (0.03 + 0.15 * rnd()) * Math.exp(-(((l - 1450) / 30) ** 2))) + 0.002 * rnd());
      chain.apply(raw, b1);
      chain2.apply(raw, b2);
      for (let j = 0; j < b1.length; j++) expect(Object.is(b1[j], b2[j])).toBe(true);
      const r1 = { ...p1.predict(b1) };
      const r2 = p2.predict(b2);
      expect([Object.is(r1.y, r2.y), Object.is(r1.t2, r2.t2), Object.is(r1.q, r2.q), r1.extrapolating === r2.extrapolating]).toEqual([true, true, true, true]);
      checked++;
    }
    expect(checked).toBe(25);
    // And writing the loaded parts again reproduces the file byte for byte.
    expect(writeModelFile('tideline-test-bundle', 1, { chain: chain2.toJSON(), pls: pls2.toJSON(), meta: body.meta })).toBe(text);
  });
});
