import { describe, expect, it } from 'vitest';
import {
  ACTIVE,
  DRYER_AXIS,
  EXCIPIENT,
  linearAxis,
  mixtureAbsorbance,
  PRODUCT_C,
  pureSpectrum,
  REACTANT_A,
  REACTOR_AXIS,
  SOLVENT,
  WATER,
  type PureComponent,
} from '../../simulators/bands.ts';
import { simulateDryerBatch } from '../../simulators/dryer.ts';
import { simulateReactorBatch } from '../../simulators/reactor.ts';
import { runPython } from './python.ts';

/** Position of the largest value within ±halfWindow nm of `near`. */
function peakNear(axis: ArrayLike<number>, y: ArrayLike<number>, near: number, halfWindow = 25): number {
  let best = -Infinity;
  let at = NaN;
  for (let i = 0; i < axis.length; i++) {
    if (Math.abs(axis[i]! - near) <= halfWindow && y[i]! > best) {
      best = y[i]!;
      at = axis[i]!;
    }
  }
  return at;
}

// Stated positions: Workman & Weyer, Practical Guide to Interpretive NIR Spectroscopy (2008), from memory.
const STATED: [PureComponent, number, string][] = [
  [WATER, 970, 'water O–H second overtone'],
  [WATER, 1190, 'water O–H combination'],
  [WATER, 1450, 'water O–H first overtone'],
  [WATER, 1940, 'water O–H combination'],
  [EXCIPIENT, 1200, 'C–H second overtone'],
  [EXCIPIENT, 1700, 'C–H first overtone'],
  [SOLVENT, 1200, 'C–H second overtone'],
  [SOLVENT, 1700, 'C–H first overtone'],
  [ACTIVE, 1500, 'N–H first overtone'],
  [REACTANT_A, 1500, 'N–H first overtone'],
];

describe('pure-component spectra', () => {
  const fine = linearAxis(900, 2400, 15001); // 0.1 nm
  it.each(STATED)('%s has its band maximum at %d nm (%s), within 1 nm', (comp, nm) => {
    const y = pureSpectrum(comp, fine);
    expect(Math.abs(peakNear(fine, y, nm) - nm)).toBeLessThanOrEqual(1);
  });

  it('on the default dryer and reactor axes the maxima fall within one pixel of the stated positions', () => {
    const dStep = DRYER_AXIS[1]! - DRYER_AXIS[0]!;
    for (const [comp, nm] of STATED) {
      for (const [axis, step] of [
        [DRYER_AXIS, dStep],
        [REACTOR_AXIS, 2],
      ] as const) {
        if (nm - 25 < axis[0]! || nm + 25 > axis[axis.length - 1]!) continue;
        expect(Math.abs(peakNear(axis, pureSpectrum(comp, axis), nm) - nm), `${comp.name} ${nm}`).toBeLessThanOrEqual(step);
      }
    }
  });

  it('the water band moves to shorter wavelength as temperature rises (−0.3 nm/°C at 1450 nm, from memory)', () => {
    const at25 = peakNear(fine, pureSpectrum(WATER, fine, 25), 1450);
    const at60 = peakNear(fine, pureSpectrum(WATER, fine, 60), 1450, 40);
    expect(at60).toBeLessThan(at25);
    expect(at60 - at25).toBeCloseTo(-0.3 * 35, 0);
  });
});

describe('Beer–Lambert mixing', () => {
  const comps = [WATER, ACTIVE, EXCIPIENT];
  const axis = DRYER_AXIS;
  it('absorbance is additive in concentration and proportional to path length', () => {
    const c1 = [12, 15, 60];
    const c2 = [3, 2, 10];
    const a1 = mixtureAbsorbance(axis, comps, c1, 1);
    const a2 = mixtureAbsorbance(axis, comps, c2, 1);
    const a12 = mixtureAbsorbance(axis, comps, c1.map((v, i) => v + c2[i]!), 1);
    const twoPath = mixtureAbsorbance(axis, comps, c1, 2);
    for (let i = 0; i < axis.length; i++) {
      expect(a12[i]).toBeCloseTo(a1[i]! + a2[i]!, 12);
      expect(twoPath[i]).toBeCloseTo(2 * a1[i]!, 12);
    }
    // and is the sum of the pure-component spectra
    const sum = new Float64Array(axis.length);
    comps.forEach((c, k) => pureSpectrum(c, axis).forEach((v, i) => (sum[i] += c1[k]! * v)));
    for (let i = 0; i < axis.length; i++) expect(a1[i]).toBeCloseTo(sum[i]!, 12);
  });

  it('matches an independent numpy evaluation of L·Σ c_k Σ_b h·exp(−½((λ−λ_b)/σ_b)²)', () => {
    const comps2 = [SOLVENT, REACTANT_A, PRODUCT_C];
    const conc = [0.7, 0.4, 0.6];
    const ours = Array.from(mixtureAbsorbance(REACTOR_AXIS, comps2, conc, 1.3));
    const theirs = runPython<number[]>(
      'import json,sys; import numpy as np; d=json.load(sys.stdin); x=np.array(d["axis"], dtype=float); a=np.zeros_like(x)\n' +
        'for comp,c in zip(d["comps"], d["conc"]):\n' +
        '  for b in comp["bands"]: a += d["path"]*c*b["height"]*np.exp(-0.5*((x-b["center"])/b["sigma"])**2)\n' +
        'print(json.dumps(a.tolist()))',
      { axis: REACTOR_AXIS, comps: comps2, conc, path: 1.3 },
    );
    const maxDiff = Math.max(...ours.map((v, i) => Math.abs(v - theirs[i]!)));
    expect(maxDiff).toBeLessThan(1e-12);
  }, 300_000);

  it('a simulated dryer spectrum with an ideal instrument is the Beer–Lambert mixture of its true state', () => {
    const b = simulateDryerBatch({ seed: 3, ideal: true });
    const trace = (name: string) => b.truth.state.find((s) => s.name === name)!.values;
    const [temp, water, active, excipient] = ['product temperature', 'water', 'active', 'excipient'].map(trace);
    for (const i of [0, 50, 150, b.spectra.length - 1]) {
      const expected = mixtureAbsorbance(b.axis, comps, [water![i]!, active![i]!, excipient![i]!], b.truth.batchVariables.effectivePath!, undefined, 0, temp![i]);
      const got = b.spectra[i]!;
      for (let j = 0; j < got.length; j++) expect(got[j]).toBeCloseTo(expected[j]!, 6);
    }
  });

  it('real-instrument spectra differ from the ideal ones by scatter, drift and noise of plausible size', () => {
    const ideal = simulateReactorBatch({ seed: 5, ideal: true });
    const real = simulateReactorBatch({ seed: 5 });
    expect(real.spectra.length).toBe(ideal.spectra.length);
    // noise: difference between neighbouring scans late in the batch, after removing the slow change
    const s1 = real.spectra[real.spectra.length - 2]!;
    const s2 = real.spectra[real.spectra.length - 1]!;
    const i1 = ideal.spectra[ideal.spectra.length - 2]!;
    const i2 = ideal.spectra[ideal.spectra.length - 1]!;
    let ss = 0;
    for (let j = 0; j < s1.length; j++) ss += ((s2[j]! - i2[j]!) - (s1[j]! - i1[j]!)) ** 2;
    const rmsNoise = Math.sqrt(ss / s1.length / 2);
    expect(rmsNoise).toBeGreaterThan(1e-5);
    expect(rmsNoise).toBeLessThan(2e-3);
  });
});
