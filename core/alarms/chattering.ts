/**
 * Chattering: an alarm that activates repeatedly in a short time. ANSI/ISA-18.2-2016 and
 * ISA-TR18.2.5 use "3 or more activations within 1 minute" as the usual definition.
 */

/** Keep only activation times inside (t − windowMs, t]; returns a new array. */
export function activationsInWindow(activations: readonly number[], t: number, windowMs: number): number[] {
  return activations.filter((a) => a > t - windowMs && a <= t);
}

export function isChattering(activations: readonly number[], t: number, windowMs: number, threshold: number): boolean {
  return activationsInWindow(activations, t, windowMs).length >= threshold;
}
