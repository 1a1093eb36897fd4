export { fInv, chi2Inv, betaInv, normalInv, tInv } from './quantiles.ts';
export { createPrng, type Prng } from './prng.ts';
