import { describe, expect, it } from 'vitest';
import { simulateBatch, type SimulatedBatch } from '../../simulators/batch.ts';
import { FAULT_INFO, FAULT_TYPES, parseFaultArg, resolveFaults, type FaultType } from '../../simulators/faults.ts';

const ONSET_S = 20 * 60;
const cases: [('dryer' | 'reactor'), FaultType][] = [];
for (const t of FAULT_TYPES) for (const k of FAULT_INFO[t].kinds) if (t !== 'over-wet') cases.push([k, t]);

function sameSpectrum(a: Float32Array, b: Float32Array): boolean {
  return a.length === b.length && a.every((v, i) => Object.is(v, b[i]));
}

function meanDiff(a: Float32Array, b: Float32Array): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i]! - b[i]!;
  return s / a.length;
}

describe('faults act from their onset and not before', () => {
  const clean: Record<string, SimulatedBatch> = {
    dryer: simulateBatch('dryer', { seed: 21 }),
    reactor: simulateBatch('reactor', { seed: 21 }),
  };

  it.each(cases)('%s / %s', (kind, type) => {
    const c = clean[kind]!;
    const f = simulateBatch(kind, { seed: 21, faults: [{ type, onsetS: ONSET_S }] });
    expect(f.truth.faults).toHaveLength(1);
    const tf = f.truth.faults[0]!;
    expect(tf.type).toBe(type);
    expect(tf.onsetT).toBe(f.times[tf.onsetIndex]);
    const isProcess = type === 'slow-drying' || type === 'stalled-reaction';
    // spectral faults: first scan at or after the onset; process faults: the first state after it
    expect(tf.onsetIndex).toBe(isProcess ? ONSET_S / (kind === 'dryer' ? 10 : 20) + 1 : ONSET_S / (kind === 'dryer' ? 10 : 20));
    for (let i = 0; i < tf.onsetIndex; i++) expect(sameSpectrum(f.spectra[i]!, c.spectra[i]!), `scan ${i} before onset`).toBe(true);
    for (let i = 0; i < tf.onsetIndex; i++) expect(f.truth.property.values[i]).toBe(c.truth.property.values[i]);
    if (type === 'dropout') {
      const d = f.truth.dropped;
      expect(d[0]).toBe(tf.onsetIndex);
      expect(d.length).toBe(300 / (kind === 'dryer' ? 10 : 20));
      expect(d.every((v, k) => v === tf.onsetIndex + k)).toBe(true);
      expect(clean[kind]!.truth.dropped).toEqual([]);
    } else {
      expect(sameSpectrum(f.spectra[tf.onsetIndex]!, c.spectra[tf.onsetIndex]!), 'scan at onset').toBe(false);
    }
  });

  it('probe fouling: a growing offset that attenuates the moisture change', () => {
    const c = clean.dryer!;
    const f = simulateBatch('dryer', { seed: 21, faults: [{ type: 'probe-fouling', onsetS: ONSET_S }] });
    const o = f.truth.faults[0]!.onsetIndex;
    const d1 = meanDiff(f.spectra[o + 10]!, c.spectra[o + 10]!);
    const d2 = meanDiff(f.spectra[o + 100]!, c.spectra[o + 100]!);
    expect(d1).toBeGreaterThan(0);
    expect(d2).toBeGreaterThan(d1);
    // the 1450 nm water band falls less than in the clean batch (the window sees a stuck, wetter layer)
    const j = f.axis.findIndex((v) => v >= 1450);
    const end = Math.min(c.spectra.length, f.spectra.length) - 1;
    expect(f.spectra[o]![j]! - f.spectra[end]![j]!).toBeLessThan(c.spectra[o]![j]! - c.spectra[end]![j]!);
  });

  it('lamp ageing: a rising baseline and more noise', () => {
    const c = clean.reactor!;
    const f = simulateBatch('reactor', { seed: 21, faults: [{ type: 'lamp-ageing', onsetS: ONSET_S }] });
    const o = f.truth.faults[0]!.onsetIndex;
    expect(meanDiff(f.spectra[o + 300]!, c.spectra[o + 300]!)).toBeGreaterThan(meanDiff(f.spectra[o + 30]!, c.spectra[o + 30]!));
    expect(meanDiff(f.spectra[o + 300]!, c.spectra[o + 300]!)).toBeGreaterThan(0.02);
  });

  it('wrong material: the change is largest near the impurity band', () => {
    const c = clean.reactor!;
    const f = simulateBatch('reactor', { seed: 21, faults: [{ type: 'wrong-material', onsetS: ONSET_S, params: { bandNm: 1400, shiftNm: 0 } }] });
    const o = f.truth.faults[0]!.onsetIndex;
    let arg = 0;
    let best = -Infinity;
    f.spectra[o]!.forEach((v, j) => {
      const d = v - c.spectra[o]![j]!;
      if (d > best) [best, arg] = [d, j];
    });
    expect(Math.abs(f.axis[arg]! - 1400)).toBeLessThanOrEqual(4);
  });

  it('spikes and bad scans hit only the listed scans; the others equal the clean batch', () => {
    for (const type of ['spikes', 'bad-scans'] as const) {
      const c = clean.dryer!;
      const f = simulateBatch('dryer', { seed: 21, faults: [{ type, onsetS: ONSET_S }] });
      const hits = new Set(f.truth.faults[0]!.indices);
      expect(hits.has(f.truth.faults[0]!.onsetIndex)).toBe(true);
      expect(hits.size).toBeGreaterThan(2);
      for (let i = 0; i < f.spectra.length; i++) expect(sameSpectrum(f.spectra[i]!, c.spectra[i]!), `${type} scan ${i}`).toBe(!hits.has(i));
      if (type === 'bad-scans') for (const i of hits) expect(Math.max(...f.spectra[i]!)).toBeGreaterThan(3);
    }
  });

  it('stalled reaction: conversion stops; slow drying: moisture stays higher; over-wet: wetter from the start', () => {
    const s = simulateBatch('reactor', { seed: 21, faults: [{ type: 'stalled-reaction', onsetS: ONSET_S, params: { rateFactor: 0 } }] });
    const v = s.truth.property.values;
    const o = s.truth.faults[0]!.onsetIndex;
    expect(v[v.length - 1]).toBeCloseTo(v[o]!, 6);
    expect(s.truth.endpointIndex).toBeNull();
    const d = simulateBatch('dryer', { seed: 21, faults: [{ type: 'slow-drying', onsetS: ONSET_S }] });
    const i = clean.dryer!.truth.endpointIndex!;
    expect(d.truth.property.values[i]).toBeGreaterThan(clean.dryer!.truth.property.values[i]! + 1);
    const w = simulateBatch('dryer', { seed: 21, faults: [{ type: 'over-wet', onsetS: 0 }] });
    expect(w.truth.property.values[0]).toBeCloseTo(30, 9);
    expect(w.truth.faults[0]!.onsetIndex).toBe(0);
    expect(sameSpectrum(w.spectra[0]!, clean.dryer!.spectra[0]!)).toBe(false);
  });

  it('several faults combine; nothing changes before the earliest onset', () => {
    const c = clean.dryer!;
    const f = simulateBatch('dryer', {
      seed: 21,
      faults: [
        { type: 'lamp-ageing', onsetS: 30 * 60 },
        { type: 'probe-fouling', onsetS: 15 * 60 },
        { type: 'spikes', onsetS: 25 * 60 },
        { type: 'slow-drying', onsetS: 35 * 60 },
      ],
    });
    expect(f.truth.faults.map((x) => x.onsetIndex)).toEqual([180, 90, 150, 211]);
    for (let i = 0; i < 90; i++) expect(sameSpectrum(f.spectra[i]!, c.spectra[i]!)).toBe(true);
    expect(sameSpectrum(f.spectra[90]!, c.spectra[90]!)).toBe(false);
  });

  it('a fault whose onset comes after the batch ended is reported as not reached', () => {
    const f = simulateBatch('dryer', { seed: 21, faults: [{ type: 'spikes', onsetS: 10 * 3600 }] });
    expect(f.truth.faults).toEqual([]);
    expect(f.truth.faultsNotReached.map((x) => x.type)).toEqual(['spikes']);
  });
});

describe('fault specifications', () => {
  it('parses TYPE@MINUTES[:name=value,…]', () => {
    expect(parseFaultArg('probe-fouling@25:tauMin=10,maxFraction=0.5')).toEqual({
      type: 'probe-fouling',
      onsetS: 1500,
      params: { tauMin: 10, maxFraction: 0.5 },
    });
    expect(parseFaultArg('dropout@7.5')).toEqual({ type: 'dropout', onsetS: 450, params: {} });
  });

  it('rejects unknown types, unknown or out-of-range parameters and faults of the other process, naming them', () => {
    expect(() => parseFaultArg('melting@3')).toThrow(/unknown type "melting"/);
    expect(() => parseFaultArg('spikes')).toThrow(/TYPE@MINUTES/);
    expect(() => parseFaultArg('spikes@3:probability=x')).toThrow(/probability=x/);
    expect(() => resolveFaults('dryer', [{ type: 'stalled-reaction', onsetS: 0 }])).toThrow(/not to the dryer/);
    expect(() => resolveFaults('dryer', [{ type: 'constructor' as FaultType, onsetS: 0 }])).toThrow(/unknown type "constructor"/);
    expect(() => resolveFaults('dryer', [{ type: 'spikes', onsetS: 0, params: { toString: 1 } }])).toThrow(/unknown parameter "toString"/);
    expect(() => resolveFaults('dryer', [{ type: 'spikes', onsetS: 0, params: { size: 1 } }])).toThrow(/unknown parameter "size"/);
    expect(() => resolveFaults('dryer', [{ type: 'spikes', onsetS: 0, params: { probability: 2 } }])).toThrow(/probability = 2 is outside/);
    expect(() => resolveFaults('dryer', [{ type: 'over-wet', onsetS: 60 }])).toThrow(/onset must be 0/);
    expect(() => resolveFaults('dryer', [{ type: 'spikes', onsetS: -1 }])).toThrow(/onset -1/);
  });
});
