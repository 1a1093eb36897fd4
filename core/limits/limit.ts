/** A control limit together with the confidence and the method that produced it. */
export interface Limit {
  value: number;
  confidence: number;
  /** Short id of the method, e.g. 't2-f-new', 'q-jackson-mudholkar'. */
  method: string;
  /** The published source of the formula. */
  reference: string;
  /** Why this method was used when it is not the one asked for (e.g. the Box fallback of the Q limit). */
  note?: string;
}

export function checkConfidence(confidence: number, what: string): void {
  if (!(confidence > 0 && confidence < 1)) {
    throw new RangeError(`${what}: confidence ${confidence} must lie strictly between 0 and 1 (e.g. 0.99)`);
  }
}
