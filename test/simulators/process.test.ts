import { describe, expect, it } from 'vitest';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { simulateDryerBatch } from '../../simulators/dryer.ts';
import { simulateReactorBatch } from '../../simulators/reactor.ts';
import { runPython } from './python.ts';

describe('dryer process (two-period drying model)', () => {
  const set = simulateReferenceSet('dryer', 12, 11);

  it('moisture never increases, starts at 15–25 % w/w and ends below the 2 % target', () => {
    for (const b of set) {
      const m = b.truth.property.values;
      expect(m[0]).toBeGreaterThanOrEqual(15);
      expect(m[0]).toBeLessThanOrEqual(25);
      for (let i = 1; i < m.length; i++) expect(m[i]!, `${b.id} at ${i}`).toBeLessThanOrEqual(m[i - 1]!);
      expect(m[m.length - 1]).toBeLessThanOrEqual(2);
      expect(b.truth.property.target).toBe(2);
    }
  });

  it('the true endpoint is the first spectrum with moisture ≤ target, reached in about 40–90 min', () => {
    for (const b of set) {
      const m = b.truth.property.values;
      const first = m.findIndex((v) => v <= 2);
      expect(b.truth.endpointIndex).toBe(first);
      expect(b.truth.endpointT).toBe(b.times[first]);
      const minutes = (b.times[first]! - b.start) / 60000;
      expect(minutes).toBeGreaterThan(30);
      expect(minutes).toBeLessThan(100);
      expect(b.times[1]! - b.times[0]!).toBe(10_000);
    }
  });

  it('follows the closed-form two-period solution for its batch variables', () => {
    // constant rate: X = X0 − Rc·t until X_c; falling rate: X = X_e + (X_c − X_e)·exp(−Rc·(t − t_c)/(X_c − X_e))
    for (const b of set.slice(0, 4)) {
      const v = b.truth.batchVariables;
      const x0 = v.initialMoisturePct! / (100 - v.initialMoisturePct!);
      const rc = v.constantRatePerMinDryBasis! / 60;
      const xc = v.criticalMoistureDryBasis!;
      const xe = v.equilibriumMoistureDryBasis!;
      const tc = (x0 - xc) / rc;
      b.truth.property.values.forEach((w, i) => {
        const t = (b.times[i]! - b.start) / 1000;
        const x = t <= tc ? x0 - rc * t : xe + (xc - xe) * Math.exp((-rc * (t - tc)) / (xc - xe));
        expect(w).toBeCloseTo((100 * x) / (1 + x), 9);
      });
    }
  });

  it('batches differ in initial state, rates, particle size and lot', () => {
    const keys = ['initialMoisturePct', 'constantRatePerMinDryBasis', 'initialParticleUm', 'activeFractionOfSolids', 'inletAirC'];
    for (const k of keys) expect(new Set(set.map((b) => b.truth.batchVariables[k])).size).toBe(set.length);
  });

  it('particle size shrinks as the granules dry', () => {
    for (const b of set) {
      const d = b.truth.state.find((s) => s.name === 'particle size')!.values;
      expect(d[d.length - 1]).toBeLessThan(d[0]! * 0.95);
      for (let i = 1; i < d.length; i++) expect(d[i]).toBeLessThanOrEqual(d[i - 1]!);
    }
  });
});

describe('reactor process (A + B → C, Arrhenius)', () => {
  const batches = [1, 2, 3, 4, 5].map((seed) => simulateReactorBatch({ seed }));

  it('conversion never decreases and the endpoint is the first spectrum with conversion ≥ 99 %', () => {
    for (const b of batches) {
      const c = b.truth.property.values;
      expect(c[0]).toBe(0);
      for (let i = 1; i < c.length; i++) expect(c[i]).toBeGreaterThanOrEqual(c[i - 1]!);
      const first = c.findIndex((v) => v >= 99);
      expect(b.truth.endpointIndex).toBe(first);
      const hours = (b.times[first]! - b.start) / 3600_000;
      expect(hours).toBeGreaterThan(1.5);
      expect(hours).toBeLessThan(6);
      expect(b.times[1]! - b.times[0]!).toBe(20_000);
    }
  });

  it('matches scipy solve_ivp on dA/dt = −k(T(t))·A·(A + Δ) with Arrhenius k and the heat-up curve', () => {
    const b = batches[0]!;
    const v = b.truth.batchVariables;
    const idx = [0, 30, 90, 200, 400, b.truth.endpointIndex!];
    const ts = idx.map((i) => (b.times[i]! - b.start) / 1000);
    const ref = runPython<number[]>(
      [
        'import json,sys; import numpy as np; from scipy.integrate import solve_ivp',
        'd=json.load(sys.stdin); v=d["v"]; R=8.314462618',
        'a0=v["initialAmolPerL"]; delta=a0*(v["ratioBtoA"]-1)',
        'T=lambda t: v["setpointC"]-(v["setpointC"]-v["chargeC"])*np.exp(-t/60/v["heatTauMin"])',
        'k=lambda t: v["kRefLPerMolMin"]/60*np.exp(-v["activationEnergyJPerMol"]/R*(1/(273.15+T(t))-1/333.15))',
        'sol=solve_ivp(lambda t,a: -k(t)*a*(a+delta), (0, max(d["t"])), [a0], t_eval=d["t"], rtol=1e-11, atol=1e-13, method="LSODA")',
        'print(json.dumps((100*(1-sol.y[0]/a0)).tolist()))',
      ].join('\n'),
      { v, t: ts },
    );
    idx.forEach((i, k) => expect(b.truth.property.values[i]).toBeCloseTo(ref[k]!, 4));
  }, 300_000);

  it('temperature rises from the charge temperature to the set point', () => {
    const b = batches[1]!;
    const t = b.truth.state.find((s) => s.name === 'temperature')!.values;
    expect(t[0]).toBeCloseTo(b.truth.batchVariables.chargeC!, 9);
    expect(t[t.length - 1]).toBeCloseTo(b.truth.batchVariables.setpointC!, 3);
  });

  it('A, B and C keep the mass balance A + C = A0 and B − A = B0 − A0', () => {
    const b = batches[2]!;
    const [a, bb, c] = ['A', 'B', 'C'].map((n) => b.truth.state.find((s) => s.name === n)!.values);
    const a0 = b.truth.batchVariables.initialAmolPerL!;
    a!.forEach((ai, i) => {
      expect(ai + c![i]!).toBeCloseTo(a0, 12);
      expect(bb![i]! - ai).toBeCloseTo(a0 * (b.truth.batchVariables.ratioBtoA! - 1), 12);
    });
  });
});

describe('input checks', () => {
  it('rejects a bad seed, axis or interval with a message naming it', () => {
    expect(() => simulateDryerBatch({ seed: -1 })).toThrow(/seed -1/);
    expect(() => simulateDryerBatch({ seed: 1, axis: [1000, 1000, 1100] })).toThrow(/increase strictly/);
    expect(() => simulateDryerBatch({ seed: 1, intervalS: 0 })).toThrow(/interval 0/);
  });
});
