/**
 * A dense row-major matrix of float64: the shape shared by core's fitting code.
 * Element (i, j) is data[i * cols + j]. Spectra sets are n × p (one row per spectrum).
 */
export interface DenseMatrix {
  rows: number;
  cols: number;
  data: Float64Array;
}

export function denseMatrix(rows: number, cols: number, data?: Float64Array): DenseMatrix {
  if (!Number.isInteger(rows) || !Number.isInteger(cols) || rows < 0 || cols < 0) {
    throw new RangeError(`matrix shape ${rows} × ${cols} is not a pair of non-negative integers`);
  }
  const d = data ?? new Float64Array(rows * cols);
  if (d.length !== rows * cols) throw new RangeError(`matrix data has ${d.length} values; ${rows} × ${cols} needs ${rows * cols}`);
  return { rows, cols, data: d };
}

/** Stack equal-length rows into a DenseMatrix; names the first row of the wrong length. */
export function matrixFromRows(rows: ArrayLike<ArrayLike<number>>): DenseMatrix {
  const n = rows.length;
  if (n === 0) throw new RangeError('no rows to stack');
  const p = rows[0]!.length;
  const m = denseMatrix(n, p);
  for (let i = 0; i < n; i++) {
    const r = rows[i]!;
    if (r.length !== p) throw new RangeError(`row ${i} has ${r.length} values; row 0 has ${p}`);
    for (let j = 0; j < p; j++) m.data[i * p + j] = r[j]!;
  }
  return m;
}

export function matrixRow(m: DenseMatrix, i: number): Float64Array {
  return m.data.subarray(i * m.cols, (i + 1) * m.cols);
}
