/**
 * A compiled step of a fitted chain: fixed input and output lengths, the axis after the step,
 * the state learned at fit (JSON-ready, null when the step learns nothing), and `apply`, which
 * reads src[0…inLength) and writes dst[0…outLength) without allocating. src and dst never alias.
 */
export interface Stage {
  readonly inLength: number;
  readonly outLength: number;
  readonly outAxis: Float64Array;
  readonly fitted: StageState;
  apply(src: ArrayLike<number>, dst: Float64Array): void;
}

/** State learned at fit: MSC reference, centre/scale vectors. Plain arrays of float64. */
export type StageState = null | { reference: number[] } | { center: number[] | null; scale: number[] | null };
