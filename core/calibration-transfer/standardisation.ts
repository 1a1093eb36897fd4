/**
 * Calibration transfer between two analyzers by direct standardisation (DS) and piecewise direct
 * standardisation (PDS) (Wang, Veltkamp & Kowalski 1991, Anal. Chem. 63:2750–2756): the same
 * transfer samples are measured on the instrument the model was built on (the master) and on the
 * new one (the slave); a transform F maps a slave spectrum onto the master's axis and response,
 *
 *   x̂_master = x_slave F + b,
 *
 * so the master's model judges the slave's spectra unchanged. Both are fitted on mean-centred
 * transfer spectra, b = m_master − m_slave F (the offset form with the transfer means; Wang,
 * Lysaght & Kowalski 1992, Anal. Chem. 64:562 — from memory).
 *
 * - DS: F (p_slave × p_master) = S_slave⁺ S_master, one global least-squares map.
 * - PDS: for each master wavelength λ_j a window of `window` slave pixels centred on the slave pixel
 *   nearest λ_j (clipped at the ends of the slave axis) is regressed on the master's column j; F is
 *   banded. The slave axis may differ from the master's (another grid, a shifted or shorter range):
 *   only the nearest pixel must lie within one slave step of λ_j.
 *
 * The pseudo-inverses are truncated SVDs (ml-matrix): singular values above rcond · the largest are
 * kept, at most maxRank of them (numpy.linalg.pinv's rcond rule). Applying a transform allocates
 * nothing per spectrum.
 */
import { Matrix, SVD } from 'ml-matrix';
import type { DenseMatrix } from '../linalg/dense-matrix.ts';

export interface TransferSamples {
  /** nm, strictly increasing */
  masterAxis: ArrayLike<number>;
  slaveAxis: ArrayLike<number>;
  /** The same samples, row for row: n × p_master and n × p_slave. */
  master: DenseMatrix;
  slave: DenseMatrix;
}

export interface TruncationOptions {
  /** Keep singular values above rcond · the largest (default 1e-6). */
  rcond?: number;
  /** Keep at most this many (default: all above rcond). */
  maxRank?: number;
}

export interface DirectStandardisation {
  method: 'ds';
  masterAxis: number[];
  slaveAxis: number[];
  /** p_slave × p_master, row-major. */
  F: Float64Array;
  /** p_master */
  offset: Float64Array;
  rank: number;
}

export interface PiecewiseDirectStandardisation {
  method: 'pds';
  masterAxis: number[];
  slaveAxis: number[];
  window: number;
  /** Per master variable: first slave pixel of its window and the window's length. */
  start: Int32Array;
  length: Int32Array;
  /** Window coefficients, master variable after master variable (Σ length values). */
  coef: Float64Array;
  offset: Float64Array;
  /** Rank kept per window. */
  ranks: Int32Array;
}

export type Standardisation = DirectStandardisation | PiecewiseDirectStandardisation;

function checkAxis(a: ArrayLike<number>, name: string): number[] {
  const out = Array.from(a);
  if (out.length < 1) throw new RangeError(`calibration transfer: the ${name} axis is empty`);
  for (let j = 0; j < out.length; j++) {
    if (!Number.isFinite(out[j]!)) throw new RangeError(`calibration transfer: ${name} wavelength ${j} is not a finite number`);
    if (j > 0 && !(out[j]! > out[j - 1]!)) throw new RangeError(`calibration transfer: the ${name} axis must increase strictly; value ${j} (${out[j]} nm) does not`);
  }
  return out;
}

function checkSamples(s: TransferSamples): { masterAxis: number[]; slaveAxis: number[]; n: number; p1: number; p2: number } {
  const masterAxis = checkAxis(s.masterAxis, 'master');
  const slaveAxis = checkAxis(s.slaveAxis, 'slave');
  const n = s.master.rows;
  if (s.slave.rows !== n) throw new RangeError(`calibration transfer: ${n} master transfer spectra but ${s.slave.rows} slave ones; they must be the same samples, row for row`);
  if (n < 2) throw new RangeError(`calibration transfer: needs at least 2 transfer samples (got ${n})`);
  if (s.master.cols !== masterAxis.length) throw new RangeError(`calibration transfer: master spectra have ${s.master.cols} values, the master axis ${masterAxis.length}`);
  if (s.slave.cols !== slaveAxis.length) throw new RangeError(`calibration transfer: slave spectra have ${s.slave.cols} values, the slave axis ${slaveAxis.length}`);
  for (const [m, name] of [[s.master, 'master'], [s.slave, 'slave']] as const) {
    for (let k = 0; k < m.data.length; k++) {
      if (!Number.isFinite(m.data[k]!)) throw new RangeError(`calibration transfer: ${name} transfer spectrum ${Math.floor(k / m.cols)}, value ${k % m.cols} is not a finite number`);
    }
  }
  return { masterAxis, slaveAxis, n, p1: masterAxis.length, p2: slaveAxis.length };
}

function colMeans(m: DenseMatrix): Float64Array {
  const out = new Float64Array(m.cols);
  for (let i = 0; i < m.rows; i++) for (let j = 0; j < m.cols; j++) out[j] += m.data[i * m.cols + j]!;
  for (let j = 0; j < m.cols; j++) out[j] /= m.rows;
  return out;
}

function truncation(opts: TruncationOptions): { rcond: number; maxRank: number } {
  const rcond = opts.rcond ?? 1e-6;
  const maxRank = opts.maxRank ?? Infinity;
  if (!(rcond >= 0 && rcond < 1)) throw new RangeError(`calibration transfer: rcond = ${rcond} must be in [0, 1)`);
  if (!(maxRank >= 1)) throw new RangeError(`calibration transfer: maxRank = ${maxRank} must be at least 1`);
  return { rcond, maxRank };
}

/** Truncated pseudo-inverse of the n × w matrix A (rows given): w × n, and the rank kept. */
function pinv(A: Matrix, rcond: number, maxRank: number): { P: Matrix; rank: number } {
  const svd = new SVD(A, { autoTranspose: true, computeLeftSingularVectors: true, computeRightSingularVectors: true });
  const s = svd.diagonal;
  const U = svd.leftSingularVectors;
  const V = svd.rightSingularVectors;
  const cut = rcond * (s[0] ?? 0);
  let rank = 0;
  while (rank < s.length && rank < maxRank && s[rank]! > cut && s[rank]! > 0) rank++;
  const P = Matrix.zeros(A.columns, A.rows);
  for (let r = 0; r < rank; r++) {
    const inv = 1 / s[r]!;
    for (let i = 0; i < A.columns; i++) {
      const vi = V.get(i, r) * inv;
      if (vi === 0) continue;
      for (let k = 0; k < A.rows; k++) P.set(i, k, P.get(i, k) + vi * U.get(k, r));
    }
  }
  return { P, rank };
}

export function fitDirectStandardisation(samples: TransferSamples, opts: TruncationOptions = {}): DirectStandardisation {
  const { masterAxis, slaveAxis, n, p1, p2 } = checkSamples(samples);
  const { rcond, maxRank } = truncation(opts);
  const m1 = colMeans(samples.master);
  const m2 = colMeans(samples.slave);
  const S2 = new Matrix(n, p2);
  const S1 = new Matrix(n, p1);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < p2; j++) S2.set(i, j, samples.slave.data[i * p2 + j]! - m2[j]!);
    for (let j = 0; j < p1; j++) S1.set(i, j, samples.master.data[i * p1 + j]! - m1[j]!);
  }
  const { P, rank } = pinv(S2, rcond, maxRank);
  const Fm = P.mmul(S1); // p2 × p1
  const F = new Float64Array(p2 * p1);
  for (let i = 0; i < p2; i++) for (let j = 0; j < p1; j++) F[i * p1 + j] = Fm.get(i, j);
  const offset = Float64Array.from(m1);
  for (let i = 0; i < p2; i++) {
    const mi = m2[i]!;
    for (let j = 0; j < p1; j++) offset[j] -= mi * F[i * p1 + j]!;
  }
  return { method: 'ds', masterAxis, slaveAxis, F, offset, rank };
}

export function fitPiecewiseDirectStandardisation(samples: TransferSamples, opts: TruncationOptions & { window: number }): PiecewiseDirectStandardisation {
  const { masterAxis, slaveAxis, n, p1, p2 } = checkSamples(samples);
  const { rcond, maxRank } = truncation(opts);
  const w = opts.window;
  if (!Number.isInteger(w) || w < 1 || w % 2 === 0) throw new RangeError(`calibration transfer: PDS window = ${w} must be an odd whole number of slave pixels`);
  if (w > p2) throw new RangeError(`calibration transfer: PDS window ${w} is wider than the ${p2} slave pixels`);
  const half = (w - 1) / 2;
  const m1 = colMeans(samples.master);
  const m2 = colMeans(samples.slave);
  const start = new Int32Array(p1);
  const length = new Int32Array(p1);
  const ranks = new Int32Array(p1);
  const offset = new Float64Array(p1);
  const coefs: number[] = [];
  let c = 0;
  for (let j = 0; j < p1; j++) {
    const lam = masterAxis[j]!;
    while (c < p2 - 1 && Math.abs(slaveAxis[c + 1]! - lam) < Math.abs(slaveAxis[c]! - lam)) c++;
    const step = p2 > 1 ? (slaveAxis[Math.min(c + 1, p2 - 1)]! - slaveAxis[Math.max(c - 1, 0)]!) / (Math.min(c + 1, p2 - 1) - Math.max(c - 1, 0)) : Infinity;
    if (Math.abs(slaveAxis[c]! - lam) > step) {
      throw new RangeError(`calibration transfer: master wavelength ${lam} nm lies outside the slave axis (${slaveAxis[0]}–${slaveAxis[p2 - 1]} nm); restrict the master axis or measure a wider range`);
    }
    const lo = Math.max(0, Math.min(c - half, p2 - w));
    start[j] = lo;
    length[j] = w;
    const A = new Matrix(n, w);
    for (let i = 0; i < n; i++) for (let k = 0; k < w; k++) A.set(i, k, samples.slave.data[i * p2 + lo + k]! - m2[lo + k]!);
    const { P, rank } = pinv(A, rcond, maxRank);
    ranks[j] = rank;
    let b = m1[j]!;
    for (let k = 0; k < w; k++) {
      let f = 0;
      for (let i = 0; i < n; i++) f += P.get(k, i) * (samples.master.data[i * p1 + j]! - m1[j]!);
      coefs.push(f);
      b -= m2[lo + k]! * f;
    }
    offset[j] = b;
  }
  return { method: 'pds', masterAxis, slaveAxis, window: w, start, length, coef: Float64Array.from(coefs), offset, ranks };
}

/** Apply a transform to one slave spectrum; with `out` given (length p_master) it allocates nothing. */
export function applyStandardisation(t: Standardisation, slave: ArrayLike<number>, out?: Float64Array): Float64Array {
  const p1 = t.masterAxis.length;
  const p2 = t.slaveAxis.length;
  if (slave.length !== p2) throw new RangeError(`calibration transfer: the spectrum has ${slave.length} values; the slave axis ${p2}`);
  const dst = out ?? new Float64Array(p1);
  if (dst.length !== p1) throw new RangeError(`calibration transfer: output has ${dst.length} values; the master axis ${p1}`);
  if (t.method === 'ds') {
    const F = t.F;
    for (let j = 0; j < p1; j++) dst[j] = t.offset[j]!;
    for (let i = 0; i < p2; i++) {
      const v = slave[i]!;
      const o = i * p1;
      for (let j = 0; j < p1; j++) dst[j] += v * F[o + j]!;
    }
    return dst;
  }
  let k = 0;
  for (let j = 0; j < p1; j++) {
    const lo = t.start[j]!;
    const len = t.length[j]!;
    let s = t.offset[j]!;
    for (let m = 0; m < len; m++) s += t.coef[k + m]! * slave[lo + m]!;
    k += len;
    dst[j] = s;
  }
  return dst;
}
