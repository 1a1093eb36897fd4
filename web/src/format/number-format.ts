/** Number, time and limit formatting for the dashboard. Pure functions; '—' stands for "no value". */

export const NO_VALUE = '—';

function isNum(v: unknown): v is number {
  return typeof v === 'number' && Number.isFinite(v);
}

/** Fixed decimals, with a real minus sign and thin grouping left to the caller's locale-free style. */
export function fixed(v: number | null | undefined, decimals: number): string {
  if (!isNum(v)) return NO_VALUE;
  const s = v.toFixed(decimals);
  // -0.00 → 0.00
  const cleaned = /^-0(\.0+)?$/.test(s) ? s.slice(1) : s;
  return cleaned.replace('-', '−');
}

/**
 * Significant digits without scientific notation for ordinary magnitudes; values < 1e-3 or
 * ≥ 1e6 use "1.23 × 10⁻⁴" style.
 */
export function sig(v: number | null | undefined, digits = 3): string {
  if (!isNum(v)) return NO_VALUE;
  if (v === 0) return '0';
  const a = Math.abs(v);
  if (a < 1e-3 || a >= 1e6) {
    const exp = Math.floor(Math.log10(a));
    let mant = v / 10 ** exp;
    let e = exp;
    if (Math.abs(Number(mant.toFixed(digits - 1))) >= 10) { mant /= 10; e += 1; }
    return `${fixed(mant, digits - 1)} × 10${superscript(e)}`;
  }
  const decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(a)));
  return fixed(v, decimals);
}

const SUP: Record<string, string> = { '-': '⁻', '0': '⁰', '1': '¹', '2': '²', '3': '³', '4': '⁴', '5': '⁵', '6': '⁶', '7': '⁷', '8': '⁸', '9': '⁹' };
export function superscript(n: number): string {
  return String(n).split('').map((c) => SUP[c] ?? c).join('');
}

/** 0.99 → "99 %", 0.999 → "99.9 %", 0.95 → "95 %". */
export function confidence(c: number | null | undefined): string {
  if (!isNum(c)) return NO_VALUE;
  const pct = c * 100;
  const s = Number.isInteger(Math.round(pct * 1000) / 1000) ? String(Math.round(pct)) : String(Number(pct.toFixed(2)));
  return `${s} %`;
}

/**
 * The name of a limit line as drawn on charts: "T² limit (99 %)". Where per-point limits are drawn
 * too, the names say which is which: a global limit is one value for the whole batch (from all the
 * reference spectra), a local one is the limit at this point of the golden course.
 */
export function limitName(stat: 'T²' | 'Q' | 'combined' | string, c: number, kind: 'limit' | 'global limit' | 'local limit' | 'alarm limit' | 'global alarm limit' | 'local alarm limit' = 'limit'): string {
  return `${stat} ${kind} (${confidence(c)})`;
}

/** Minutes as "45 s", "12.5 min", "1 h 05 min". */
export function minutes(m: number | null | undefined): string {
  if (!isNum(m)) return NO_VALUE;
  const sign = m < 0 ? '−' : '';
  const a = Math.abs(m);
  if (a < 1) return `${sign}${Math.round(a * 60)} s`;
  if (a < 10) return `${sign}${a.toFixed(1)} min`;
  if (a < 60) return `${sign}${Math.round(a)} min`;
  const h = Math.floor(a / 60);
  const rest = Math.round(a - h * 60);
  if (rest === 60) return `${sign}${h + 1} h 00 min`;
  return `${sign}${h} h ${String(rest).padStart(2, '0')} min`;
}

/** Time to endpoint with its spread: "≈ 12 min (8 min – 17 min)". */
export function eta(e: { median: number; low: number; high: number } | null | undefined): string {
  if (!e || !isNum(e.median)) return NO_VALUE;
  return `≈ ${minutes(e.median)} (${minutes(e.low)} – ${minutes(e.high)})`;
}

/** A time a Date can hold (|t| ≤ 8.64e15 ms); a batch stored by an older version may hold others. */
function isDateMs(t: number): boolean {
  return Math.abs(t) <= 8.64e15;
}

/**
 * The one zone every time on the dashboard is shown in (docs/dashboard.md, "Time"), the zone the
 * batch report and the Ledger use too; the navigation bar says it.
 */
export const TIME_ZONE = 'UTC';

/** A clock time "14:03:27" (default: the dashboard's zone, UTC). */
export function clock(t: number | null | undefined, timeZone: string = TIME_ZONE): string {
  if (!isNum(t)) return NO_VALUE;
  if (!isDateMs(t)) return String(t);
  return new Intl.DateTimeFormat('en-GB', { hour: '2-digit', minute: '2-digit', second: '2-digit', hour12: false, timeZone }).format(new Date(t));
}

/** "2026-12-02 14:03" (default: the dashboard's zone, UTC). */
export function dateTime(t: number | null | undefined, timeZone: string = TIME_ZONE): string {
  if (!isNum(t)) return NO_VALUE;
  if (!isDateMs(t)) return String(t);
  const parts = new Intl.DateTimeFormat('en-CA', { year: 'numeric', month: '2-digit', day: '2-digit', hour: '2-digit', minute: '2-digit', hour12: false, timeZone })
    .formatToParts(new Date(t));
  const get = (k: string) => parts.find((p) => p.type === k)?.value ?? '';
  const hour = get('hour') === '24' ? '00' : get('hour');
  return `${get('year')}-${get('month')}-${get('day')} ${hour}:${get('minute')}`;
}

/** "2026-12-02 14:03:27" (default: the dashboard's zone, UTC). */
export function dateTimeSec(t: number | null | undefined, timeZone: string = TIME_ZONE): string {
  if (!isNum(t)) return NO_VALUE;
  return `${dateTime(t, timeZone).slice(0, 10)} ${clock(t, timeZone)}`;
}

/** A time of day with seconds, its date before it when it is not the day of `ref`. */
export function clockOrDate(t: number | null | undefined, ref: number, timeZone: string = TIME_ZONE): string {
  if (!isNum(t)) return NO_VALUE;
  return dateTime(t, timeZone).slice(0, 10) === dateTime(ref, timeZone).slice(0, 10) ? clock(t, timeZone) : dateTimeSec(t, timeZone);
}

/** A process time as people read it on a live screen: the time of day, with its date when not today. */
export function processTime(t: number | null | undefined): string {
  return clockOrDate(t, Date.now());
}

/** "3 s ago", "4 min ago" — ages of data for stale warnings. `now` is passed in. */
export function age(t: number | null | undefined, now: number): string {
  if (!isNum(t)) return NO_VALUE;
  const s = Math.max(0, (now - t) / 1000);
  if (s < 60) return `${Math.round(s)} s ago`;
  if (s < 3600) return `${Math.round(s / 60)} min ago`;
  return `${Math.round(s / 3600)} h ago`;
}

/** A fraction 0…1 as "42 %". */
export function percent(f: number | null | undefined, decimals = 0): string {
  if (!isNum(f)) return NO_VALUE;
  return `${fixed(f * 100, decimals)} %`;
}

/** A value with its unit, separated by a space: "1.82 % w/w", "1650 nm". */
export function withUnit(v: number | null | undefined, unit: string, digits = 3): string {
  const s = sig(v, digits);
  return s === NO_VALUE ? s : `${s} ${unit}`;
}

/** Ratio of a statistic to its limit, e.g. "0.42 × limit". */
export function ofLimit(value: number | null | undefined, limit: number | null | undefined): string {
  if (!isNum(value) || !isNum(limit) || limit <= 0) return NO_VALUE;
  return `${fixed(value / limit, 2)} × limit`;
}

/** A statistic as a share of its limit: "64 % of limit" (100 % = on the limit). */
export function ofLimitPct(value: number | null | undefined, limit: number | null | undefined): string {
  if (!isNum(value) || !isNum(limit) || limit <= 0) return NO_VALUE;
  const pct = (100 * value) / limit;
  return `${pct >= 1000 ? sig(pct, 3) : fixed(pct, 0)} % of limit`;
}
