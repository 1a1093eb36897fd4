/**
 * Pure-component NIR absorptivity spectra built from Gaussian bands.
 *
 * Band positions: Workman & Weyer, Practical Guide to Interpretive Near-Infrared Spectroscopy
 * (CRC Press, 2008) — positions quoted FROM MEMORY, as common practice states them:
 *   liquid water O–H: second overtone near 970 nm, combination (ν1+ν3+δ... region) near 1190 nm,
 *     first overtone near 1450 nm, combination (ν2+ν3) near 1940 nm;
 *   C–H: second overtone near 1200 nm, first overtone near 1700 nm, combinations near 2300 nm;
 *   N–H: first overtone near 1500 nm (amines), combination near 2000–2060 nm.
 * Other positions below are marked "(mem)" where they come from memory of the same handbook.
 * Widths and heights are invented, chosen so that absorbances stay in the range an inline probe
 * sees (0.05–1.5 AU); they are not measured values.
 *
 * Temperature: the liquid-water bands move to shorter wavelengths as temperature rises (weaker
 * hydrogen bonding); e.g. Segtnan, Šašić, Isaksson & Ozaki 2001, Anal. Chem. 73:3153. The
 * coefficient used here, about −0.3 nm/°C at 1450 nm scaled with position, is from memory and
 * approximate.
 */

export interface Band {
  /** Band maximum at the reference temperature, nm. */
  center: number;
  /** Gaussian standard deviation, nm. */
  sigma: number;
  /** Absorptivity at the maximum, absorbance per unit concentration per unit path. */
  height: number;
  assignment: string;
  /** Shift of the maximum per °C above REFERENCE_TEMPERATURE_C, nm/°C (0 when absent). */
  shiftPerC?: number;
}

export interface PureComponent {
  name: string;
  /** Concentration unit the absorptivities refer to. */
  unit: string;
  bands: Band[];
}

export const REFERENCE_TEMPERATURE_C = 25;

/** Temperature coefficient of the water bands, nm/°C at 1450 nm (from memory, approximate). */
export const WATER_SHIFT_PER_C_AT_1450 = -0.3;
const waterShift = (nm: number) => (WATER_SHIFT_PER_C_AT_1450 * nm) / 1450;

/** Liquid water, per % w/w at unit effective path (granules in diffuse reflectance). */
export const WATER: PureComponent = {
  name: 'water',
  unit: '% w/w',
  bands: [
    { center: 970, sigma: 22, height: 0.0018, assignment: 'O–H second overtone', shiftPerC: waterShift(970) },
    { center: 1190, sigma: 26, height: 0.0026, assignment: 'O–H combination', shiftPerC: waterShift(1190) },
    { center: 1450, sigma: 34, height: 0.014, assignment: 'O–H first overtone', shiftPerC: waterShift(1450) },
    { center: 1940, sigma: 42, height: 0.03, assignment: 'O–H combination (stretch + bend)', shiftPerC: waterShift(1940) },
  ],
};

/** Carbohydrate excipient of the granules, per % w/w. */
export const EXCIPIENT: PureComponent = {
  name: 'excipient',
  unit: '% w/w',
  bands: [
    { center: 1200, sigma: 20, height: 0.0009, assignment: 'C–H second overtone' },
    { center: 1590, sigma: 40, height: 0.0007, assignment: 'O–H first overtone, bonded carbohydrate hydroxyls (mem)' },
    { center: 1700, sigma: 24, height: 0.0024, assignment: 'C–H first overtone' },
    { center: 2100, sigma: 40, height: 0.003, assignment: 'O–H + C–O combination, carbohydrate (mem)' },
    { center: 2300, sigma: 30, height: 0.0028, assignment: 'C–H combination' },
  ],
};

/** Active ingredient with an amine group, per % w/w. */
export const ACTIVE: PureComponent = {
  name: 'active',
  unit: '% w/w',
  bands: [
    { center: 1030, sigma: 18, height: 0.0012, assignment: 'N–H second overtone (mem)' },
    { center: 1500, sigma: 18, height: 0.0045, assignment: 'N–H first overtone' },
    { center: 1680, sigma: 16, height: 0.002, assignment: 'aromatic C–H first overtone (mem)' },
    { center: 2030, sigma: 30, height: 0.004, assignment: 'N–H combination' },
  ],
};

/** Reaction solvent (an aliphatic/aromatic hydrocarbon), per volume fraction. */
export const SOLVENT: PureComponent = {
  name: 'solvent',
  unit: 'volume fraction',
  bands: [
    { center: 1200, sigma: 16, height: 0.18, assignment: 'C–H second overtone' },
    { center: 1400, sigma: 20, height: 0.1, assignment: 'C–H combination (mem)' },
    { center: 1700, sigma: 20, height: 0.55, assignment: 'C–H first overtone' },
    { center: 2300, sigma: 28, height: 0.9, assignment: 'C–H combination' },
  ],
};

/** Reactant A, a primary amine, per mol/L. */
export const REACTANT_A: PureComponent = {
  name: 'A',
  unit: 'mol/L',
  bands: [
    { center: 1500, sigma: 18, height: 0.3, assignment: 'N–H first overtone' },
    { center: 1550, sigma: 16, height: 0.12, assignment: 'N–H first overtone, second component of NH2 pair (mem)' },
    { center: 1730, sigma: 18, height: 0.1, assignment: 'CH2 first overtone (mem)' },
    { center: 2010, sigma: 24, height: 0.35, assignment: 'N–H combination' },
  ],
};

/** Reactant B, an acylating agent (ester), per mol/L. */
export const REACTANT_B: PureComponent = {
  name: 'B',
  unit: 'mol/L',
  bands: [
    { center: 1690, sigma: 16, height: 0.18, assignment: 'CH3 first overtone (mem)' },
    { center: 1910, sigma: 22, height: 0.12, assignment: 'C=O second overtone (mem)' },
    { center: 2270, sigma: 26, height: 0.3, assignment: 'C–H combination (mem)' },
  ],
};

/** Product C, a secondary amide, per mol/L. */
export const PRODUCT_C: PureComponent = {
  name: 'C',
  unit: 'mol/L',
  bands: [
    { center: 1480, sigma: 20, height: 0.2, assignment: 'N–H first overtone, secondary amide (mem)' },
    { center: 1710, sigma: 18, height: 0.16, assignment: 'C–H first overtone' },
    { center: 2055, sigma: 26, height: 0.32, assignment: 'N–H + amide II combination (mem)' },
    { center: 2180, sigma: 24, height: 0.14, assignment: 'C=O + N–H combination (mem)' },
  ],
};

/** Trace water in the reactor liquid, per % v/v (solution absorptivities, 2 mm path). */
export const WATER_IN_SOLUTION: PureComponent = {
  name: 'water',
  unit: '% v/v',
  bands: WATER.bands.map((b) => ({ ...b, height: b.height * 8 })),
};

/** Impurity band introduced by off-spec raw material: an O–H combination near 1390–1420 nm (mem). */
export function impurityComponent(centerNm: number): PureComponent {
  return {
    name: 'impurity',
    unit: 'relative',
    bands: [{ center: centerNm, sigma: 14, height: 1, assignment: 'impurity band (fault)' }],
  };
}

/** A copy of a component with every band moved by `shiftNm`. */
export function shiftedComponent(c: PureComponent, shiftNm: number): PureComponent {
  return { ...c, bands: c.bands.map((b) => ({ ...b, center: b.center + shiftNm })) };
}

/**
 * Add `scale` × the component's absorptivity to `out`, evaluated at axis[i] + shiftNm (a
 * wavelength-scale error of the instrument) and at temperature `temperatureC`.
 * Bands are summed; beyond 8 σ a band's tail is below 1e-13 of its height and is skipped.
 */
export function addComponent(
  out: Float64Array,
  axis: ArrayLike<number>,
  comp: PureComponent,
  scale: number,
  shiftNm = 0,
  temperatureC = REFERENCE_TEMPERATURE_C,
): void {
  if (scale === 0) return;
  const dT = temperatureC - REFERENCE_TEMPERATURE_C;
  for (const b of comp.bands) {
    const c = b.center + (b.shiftPerC ?? 0) * dT;
    const inv = 1 / b.sigma;
    const h = scale * b.height;
    const reach = 8 * b.sigma;
    for (let i = 0; i < out.length; i++) {
      const d = axis[i]! + shiftNm - c;
      if (d > reach || d < -reach) continue;
      const z = d * inv;
      out[i] += h * Math.exp(-0.5 * z * z);
    }
  }
}

/** Absorptivity spectrum of one pure component on an axis (unit concentration, unit path). */
export function pureSpectrum(comp: PureComponent, axis: ArrayLike<number>, temperatureC = REFERENCE_TEMPERATURE_C): Float64Array {
  const out = new Float64Array(axis.length);
  addComponent(out, axis, comp, 1, 0, temperatureC);
  return out;
}

/**
 * Beer–Lambert mixing: A(λ) = L · Σ_k c_k ε_k(λ), absorbance additive in concentration × path.
 * Writes into `out` (zeroed first) and returns it.
 */
export function mixtureAbsorbance(
  axis: ArrayLike<number>,
  components: readonly PureComponent[],
  concentrations: ArrayLike<number>,
  pathLength: number,
  out: Float64Array = new Float64Array(axis.length),
  shiftNm = 0,
  temperatureC = REFERENCE_TEMPERATURE_C,
): Float64Array {
  if (concentrations.length !== components.length) {
    throw new RangeError(`mixture has ${components.length} components but ${concentrations.length} concentrations`);
  }
  out.fill(0);
  for (let k = 0; k < components.length; k++) {
    addComponent(out, axis, components[k]!, pathLength * concentrations[k]!, shiftNm, temperatureC);
  }
  return out;
}

/** Evenly spaced axis from `from` to `to` inclusive with `n` points. */
export function linearAxis(from: number, to: number, n: number): number[] {
  if (!(n >= 2) || !Number.isInteger(n)) throw new RangeError(`axis needs an integer number of points ≥ 2, got ${n}`);
  if (!(to > from)) throw new RangeError(`axis end ${to} nm must exceed its start ${from} nm`);
  const step = (to - from) / (n - 1);
  return Array.from({ length: n }, (_, i) => Math.round((from + i * step) * 1e6) / 1e6);
}

/** Default dryer axis: a 256-pixel InGaAs diode array over 950–1650 nm. */
export const DRYER_AXIS = linearAxis(950, 1650, 256);
/** Default reactor axis: 1100–2300 nm at 2 nm (601 points). */
export const REACTOR_AXIS = linearAxis(1100, 2300, 601);
