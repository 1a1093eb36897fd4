/**
 * Batch reactor with an inline NIR transmission probe: amide formation A + B → C
 * (amine + acylating agent → amide), second order, r = k(T)·[A]·[B], B in slight excess.
 *
 * Arrhenius: k(T) = k_ref · exp(−E_a/R · (1/T − 1/T_ref)) (Arrhenius 1889; any kinetics text,
 * e.g. Levenspiel, Chemical Reaction Engineering, 3rd ed. 1999, ch. 2). E_a = 55 kJ/mol is a
 * typical value for such reactions (invented, not measured).
 * With Δ = [B]0 − [A]0 > 0 and k constant over a step, the exact solution
 *   [A](t + h) = Δ·[A] / (([A] + Δ)·e^{kΔh} − [A])
 * (Levenspiel, ch. 3, second-order A + B with unequal initial concentrations) keeps [A] decreasing,
 * so conversion X = 1 − [A]/[A]0 never falls. The reactor heats from charge temperature to the set
 * point with a first-order lag. True endpoint: conversion ≥ 99 %.
 */
import type { SimulateOptions, SimulatedBatch } from './batch-types.ts';
import { PRODUCT_C, REACTANT_A, REACTANT_B, REACTOR_AXIS, SOLVENT, WATER_IN_SOLUTION } from './bands.ts';
import type { ResolvedFault } from './faults.ts';
import type { Rng } from './prng.ts';
import { runBatch, type ProcessModel } from './run-batch.ts';

export const REACTOR_DEFAULTS = {
  axis: REACTOR_AXIS,
  intervalS: 20,
  unit: 'reactor-1',
  product: 'amide-TL7',
  kind: 'reactor' as const,
  targetPct: 99,
  maxMinutes: 480,
};

const GAS_CONSTANT = 8.314462618; // J/(mol·K), CODATA 2018 exact value
const COMPONENTS = [SOLVENT, REACTANT_A, REACTANT_B, PRODUCT_C, WATER_IN_SOLUTION];

function reactorModel(rng: Rng, faults: ResolvedFault[], intervalS: number): ProcessModel {
  const a0 = rng.normalClamped(1, 0.03, 0.9, 1.1); // mol/L
  const ratio = rng.normalClamped(1.1, 0.02, 1.04, 1.16); // B0/A0
  const setpointC = rng.normalClamped(60, 1, 57, 63);
  const chargeC = rng.normalClamped(24, 1.5, 18, 30);
  const heatTauMin = rng.normalClamped(8, 1.5, 4, 12);
  const kRef = rng.normalClamped(0.135, 0.01, 0.1, 0.17); // L/(mol·min) at 60 °C (catalyst lot)
  const eaJ = 55_000;
  const waterPct = rng.between(0.05, 0.3); // raw-material lot, % v/v
  const pathLength = rng.normalClamped(1, 0.01, 0.97, 1.03); // probe gap tolerance, relative to 2 mm
  const overrunMin = rng.between(10, 25);
  const offset = rng.normal(0.05, 0.01); // window/optics baseline
  const rateFaults = faults.filter((f) => f.type === 'stalled-reaction');
  const delta = a0 * (ratio - 1);
  let a = a0;
  let lastT = 0;
  const conc = new Float64Array(5);
  const tRefK = 273.15 + 60;
  const temperatureAt = (tS: number) => setpointC - (setpointC - chargeC) * Math.exp(-tS / 60 / heatTauMin);
  const factorAt = (tS: number) => rateFaults.reduce((f, x) => (tS > x.onsetS ? f * x.params.rateFactor! : f), 1);

  const react = (t0: number, t1: number) => {
    const mid = (t0 + t1) / 2;
    const tK = 273.15 + temperatureAt(mid);
    const k = ((kRef * Math.exp((-eaJ / GAS_CONSTANT) * (1 / tK - 1 / tRefK))) / 60) * factorAt(mid); // L/(mol·s)
    const h = t1 - t0;
    a = (delta * a) / ((a + delta) * Math.exp(k * delta * h) - a);
  };

  return {
    kind: 'reactor',
    propertyName: 'conversion',
    propertyUnit: '%',
    target: REACTOR_DEFAULTS.targetPct,
    direction: 'above',
    batchVariables: {
      initialAmolPerL: a0,
      ratioBtoA: ratio,
      setpointC,
      chargeC,
      heatTauMin,
      kRefLPerMolMin: kRef,
      activationEnergyJPerMol: eaJ,
      waterPctVv: waterPct,
      relativePath: pathLength,
    },
    traces: [
      { name: 'temperature', unit: '°C' },
      { name: 'A', unit: 'mol/L' },
      { name: 'B', unit: 'mol/L' },
      { name: 'C', unit: 'mol/L' },
    ],
    overrunSteps: Math.round((overrunMin * 60) / intervalS),
    maxSteps: Math.floor((REACTOR_DEFAULTS.maxMinutes * 60) / intervalS) + 1,
    processFaults: rateFaults,
    step(_i, tS) {
      if (tS > lastT) {
        // Sub-steps of at most 5 s (temperature changes during heat-up), split at fault onsets.
        const cuts = [lastT, ...rateFaults.map((f) => f.onsetS).filter((o) => o > lastT && o < tS), tS].sort((x, y) => x - y);
        for (let c = 1; c < cuts.length; c++) {
          const span = cuts[c]! - cuts[c - 1]!;
          const m = Math.max(1, Math.ceil(span / 5));
          for (let j = 0; j < m; j++) react(cuts[c - 1]! + (span * j) / m, cuts[c - 1]! + (span * (j + 1)) / m);
        }
        lastT = tS;
      }
      const temperatureC = temperatureAt(tS);
      const cC = a0 - a;
      const b = a0 * ratio - cC;
      // Liquid volume fractions: reactants and product displace solvent (molar volumes ~0.1 L/mol, invented).
      conc[0] = Math.max(0, 1 - 0.1 * (a + b + cC) - waterPct / 100);
      conc[1] = a;
      conc[2] = b;
      conc[3] = cC;
      conc[4] = waterPct;
      return {
        property: 100 * (1 - a / a0),
        trace: [temperatureC, a, b, cC],
        conditions: {
          components: COMPONENTS,
          concentrations: conc,
          pathLength,
          temperatureC,
          lotComponent: 2,
          scatterMult: 1,
          scatterOffset: offset,
          scatterTilt: 0.004,
        },
      };
    },
  };
}

export function simulateReactorBatch(opts: SimulateOptions): SimulatedBatch {
  const intervalS = opts.intervalS ?? REACTOR_DEFAULTS.intervalS;
  return runBatch(
    opts,
    REACTOR_DEFAULTS,
    (rng, faults) => reactorModel(rng, faults, intervalS),
    (rng) => ({
      shotNoise: 1.5e-4,
      readNoise: 4e-5,
      jitterSdNm: 0.05,
      lampDriftPerH: rng.normal(0, 0.004),
      lampTiltPerH: rng.normal(0, 0.003),
    }),
  );
}
