/**
 * What the PostgreSQL repositories share: the query function they run on (the pool, or one unit of
 * work's transaction) and how values cross the driver.
 */
import postgres from 'postgres';

/** The pool or one transaction: both run tagged-template queries. */
// eslint-disable-next-line @typescript-eslint/no-explicit-any
export type Q = postgres.ISql<any>;

/**
 * bigint (int8) columns read as JS numbers. Tideline stores ms epochs, seqs and counts in them, all
 * within 2^53; a value beyond that is refused rather than rounded.
 */
const int8AsNumber = {
  to: 20,
  from: [20],
  serialize: (x: number) => String(x),
  parse: (x: string) => {
    const n = Number(x);
    if (!Number.isSafeInteger(n)) throw new RangeError(`bigint value ${x} is beyond 2^53 and cannot be read as a JS number without rounding`);
    return n;
  },
};

export const PG_TYPES = { int8: int8AsNumber };
