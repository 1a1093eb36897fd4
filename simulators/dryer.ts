/**
 * Fluid-bed dryer with an inline NIR probe looking at the moving granule bed.
 *
 * Drying model: the two-period rate-of-drying curve — a constant-rate period while the granule
 * surface stays wet, then a falling-rate period below the critical moisture X_c in which the rate
 * is proportional to the free moisture X − X_e (Geankoplis, Transport Processes and Separation
 * Process Principles, 4th ed. 2003, ch. 9, "rate-of-drying curve"; Mujumdar (ed.), Handbook of
 * Industrial Drying, 4th ed. 2014 — both from memory). X is moisture on dry basis (kg water per
 * kg dry solid); the reported property is wet basis, w = 100·X/(1 + X) % w/w.
 *   constant rate:  dX/dt = −R_c
 *   falling rate:   dX/dt = −R_c·(X − X_e)/(X_c − X_e)   ⇒ exponential approach to X_e
 * The constant rate is set by heat transfer from the inlet air: R_c ∝ (T_in − T_wb)·(flow)^0.8
 * (convective heat-transfer coefficient growing with air velocity to the power 0.8 — a common
 * turbulent-flow correlation exponent, from memory). During the constant-rate period the bed sits
 * near the wet-bulb temperature; in the falling-rate period it warms towards the inlet air.
 *
 * Particle size shrinks as granules lose water and attrite (common practice; the amounts are
 * invented). Larger particles give a larger apparent absorbance in diffuse reflectance, so the
 * multiplicative and additive scatter terms grow with particle size, and smaller particles give a
 * steeper (wavelength-dependent) baseline — direction from memory, magnitudes invented.
 *
 * Initial moisture 15–25 % w/w and a target of 2 % w/w (within the usual 1–3 %): common practice.
 */
import type { SimulateOptions, SimulatedBatch } from './batch-types.ts';
import { ACTIVE, DRYER_AXIS, EXCIPIENT, WATER } from './bands.ts';
import type { ResolvedFault } from './faults.ts';
import type { Rng } from './prng.ts';
import { runBatch, type ProcessModel } from './run-batch.ts';

export const DRYER_DEFAULTS = {
  axis: DRYER_AXIS,
  intervalS: 10,
  unit: 'dryer-1',
  product: 'granulate-TL40',
  kind: 'dryer' as const,
  targetPct: 2,
  maxMinutes: 150,
};

const COMPONENTS = [WATER, ACTIVE, EXCIPIENT];
const NOMINAL_PARTICLE_UM = 320;

/** Rate multiplier for the process faults over [t0, t1] (fraction of the interval × factor). */
function rateFactorOver(faults: ResolvedFault[], t0: number, t1: number): number {
  let factor = 1;
  for (const f of faults) {
    const k = f.params.rateFactor!;
    if (t1 <= f.onsetS) continue;
    const frac = t0 >= f.onsetS ? 1 : (t1 - f.onsetS) / (t1 - t0);
    factor *= 1 - frac * (1 - k);
  }
  return factor;
}

function dryerModel(rng: Rng, faults: ResolvedFault[], intervalS: number): ProcessModel {
  // Batch-to-batch variation, drawn in a fixed order.
  let w0 = rng.between(15, 25); // % w/w
  const xc = rng.normalClamped(0.1, 0.008, 0.075, 0.125); // critical moisture, dry basis
  const xe = rng.normalClamped(0.01, 0.0015, 0.006, 0.014); // equilibrium moisture, dry basis
  const tIn = rng.normalClamped(60, 2.5, 52, 68); // inlet air, °C
  const flow = rng.normalClamped(1, 0.06, 0.8, 1.2); // relative to nominal air flow
  const tWb = rng.normalClamped(28, 1, 25, 31); // wet-bulb temperature of the inlet air, °C
  const granuleFactor = rng.normalClamped(1, 0.06, 0.82, 1.18); // lot: porosity / binder
  const d0 = rng.normalClamped(NOMINAL_PARTICLE_UM, 22, 260, 380); // µm
  const shrink = rng.normalClamped(0.12, 0.02, 0.06, 0.18);
  const attritionPerH = rng.normalClamped(0.04, 0.01, 0.01, 0.07);
  const activeFraction = rng.normalClamped(0.2, 0.006, 0.18, 0.22); // of the dry solid (lot)
  const pathLength = rng.normalClamped(1, 0.03, 0.9, 1.1); // effective optical path (bed packing)
  const overrunMin = rng.between(4, 10);
  const overWet = faults.find((f) => f.type === 'over-wet');
  if (overWet) w0 = overWet.params.moisturePct!;
  const rateFaults = faults.filter((f) => f.type === 'slow-drying');

  const x0 = w0 / (100 - w0);
  const rc = (0.0066 / 60) * granuleFactor * ((tIn - tWb) / 32) * flow ** 0.8; // per second, dry basis
  let x = x0;
  let lastT = 0;
  const conc = new Float64Array(3);

  const dry = (dt: number, rate: number) => {
    let left = dt;
    if (x > xc) {
      const tToCritical = (x - xc) / rate;
      if (tToCritical >= left) {
        x -= rate * left;
        return;
      }
      x = xc;
      left -= tToCritical;
    }
    x = xe + (x - xe) * Math.exp((-rate / (xc - xe)) * left);
  };

  return {
    kind: 'dryer',
    propertyName: 'moisture',
    propertyUnit: '% w/w',
    target: DRYER_DEFAULTS.targetPct,
    direction: 'below',
    batchVariables: {
      initialMoisturePct: w0,
      criticalMoistureDryBasis: xc,
      equilibriumMoistureDryBasis: xe,
      inletAirC: tIn,
      relativeAirFlow: flow,
      wetBulbC: tWb,
      constantRatePerMinDryBasis: rc * 60,
      initialParticleUm: d0,
      activeFractionOfSolids: activeFraction,
      effectivePath: pathLength,
    },
    traces: [
      { name: 'product temperature', unit: '°C' },
      { name: 'particle size', unit: 'µm' },
      { name: 'water', unit: '% w/w' },
      { name: 'active', unit: '% w/w' },
      { name: 'excipient', unit: '% w/w' },
    ],
    overrunSteps: Math.round((overrunMin * 60) / intervalS),
    maxSteps: Math.floor((DRYER_DEFAULTS.maxMinutes * 60) / intervalS) + 1,
    processFaults: rateFaults,
    step(_i, tS) {
      if (tS > lastT) {
        // Split the interval at fault onsets so the rate changes exactly there.
        const cuts = [lastT, ...rateFaults.map((f) => f.onsetS).filter((o) => o > lastT && o < tS).sort((a, b) => a - b), tS];
        for (let k = 1; k < cuts.length; k++) dry(cuts[k]! - cuts[k - 1]!, rc * rateFactorOver(rateFaults, cuts[k - 1]!, cuts[k]!));
        lastT = tS;
      }
      const w = (100 * x) / (1 + x);
      // Bed temperature: warms from 22 °C to wet bulb, then towards the inlet air as drying slows.
      const warmUp = tWb - (tWb - 22) * Math.exp(-tS / 180);
      const falling = x < xc ? (xc - x) / (xc - xe) : 0;
      const temperatureC = warmUp + 0.85 * (tIn - tWb) * falling;
      const d = d0 * (1 - shrink * Math.min(1, (x0 - x) / (x0 - xe))) * (1 - (attritionPerH * tS) / 3600);
      const rel = d / NOMINAL_PARTICLE_UM;
      conc[0] = w;
      conc[1] = (100 - w) * activeFraction;
      conc[2] = (100 - w) * (1 - activeFraction);
      return {
        property: w,
        trace: [temperatureC, d, conc[0], conc[1], conc[2]],
        conditions: {
          components: COMPONENTS,
          concentrations: conc,
          pathLength,
          temperatureC,
          lotComponent: 1,
          scatterMult: Math.sqrt(rel),
          scatterOffset: 0.22 + 0.12 * (rel - 1),
          scatterTilt: -0.025 / rel,
        },
      };
    },
  };
}

export function simulateDryerBatch(opts: SimulateOptions): SimulatedBatch {
  const intervalS = opts.intervalS ?? DRYER_DEFAULTS.intervalS;
  return runBatch(
    opts,
    DRYER_DEFAULTS,
    (rng, faults) => dryerModel(rng, faults, intervalS),
    (rng) => ({
      shotNoise: 1.2e-4,
      readNoise: 3e-5,
      jitterSdNm: 0.03,
      lampDriftPerH: rng.normal(0, 0.004),
      lampTiltPerH: rng.normal(0, 0.003),
    }),
  );
}
