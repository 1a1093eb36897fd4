/**
 * A property column's header as name and unit (pure). The forms recognised (docs/import-export.md
 * lists the same):
 *
 * | header                | name       | unit    |
 * | --------------------- | ---------- | ------- |
 * | `moisture [% w/w]`    | moisture   | % w/w   |
 * | `moisture (% w/w)`    | moisture   | % w/w   |
 * | `moisture_%`, `moisture %`, `moisture%` | moisture | % |
 * | `moisture_pct`, `moisture_percent` | moisture | % |
 * | `water_ppm`           | water      | ppm     |
 * | `temperature_degc`    | temperature | °C     |
 * | `moisture`            | moisture   | (none)  |
 *
 * The unit inside brackets is kept as written (blanks collapsed); only the last bracketed or
 * parenthesised group counts as the unit (`LOD moisture (oven) [%]` → `lod_moisture_oven`, `%`).
 * The name is normalised: lower case, blanks and other signs as `_` (core/lab/lab-values.ts
 * normalisePropertyName); it must then start with a letter.
 */
import { normalisePropertyName, PROPERTY_NAME_RE } from './lab-values.ts';

export interface PropertyHeader {
  name: string;
  unit: string;
}

/** Unit suffixes after `_` or a blank, as written in column names, and the unit they stand for. */
export const UNIT_SUFFIXES: Record<string, string> = {
  pct: '%',
  percent: '%',
  ppm: 'ppm',
  degc: '°C',
};

/**
 * Name and unit of a property column header, or a reason why the header cannot name a property
 * (empty name, a name that does not start with a letter, …).
 */
export function parsePropertyHeader(header: string): PropertyHeader | { problem: string } {
  const h = header.trim().replace(/\s+/g, ' ');
  let name = h;
  let unit = '';
  const bracket = /^(.*?)\s*(?:\[([^\][]*)\]|\(([^()]*)\))$/.exec(h);
  if (bracket && bracket[1]!.trim() !== '') {
    name = bracket[1]!;
    unit = (bracket[2] ?? bracket[3] ?? '').trim();
  } else {
    const pct = /^(.*?)[\s_]*%$/.exec(h);
    const suffix = /^(.*?)[\s_]([A-Za-z]+)$/.exec(h);
    if (pct && pct[1]!.trim() !== '') {
      name = pct[1]!;
      unit = '%';
    } else if (suffix && suffix[2]!.toLowerCase() in UNIT_SUFFIXES && suffix[1]!.trim() !== '') {
      name = suffix[1]!;
      unit = UNIT_SUFFIXES[suffix[2]!.toLowerCase()]!;
    }
  }
  const n = normalisePropertyName(name)
    .replace(/[^\p{L}\p{N}_.-]+/gu, '_')
    .replace(/_+/g, '_')
    .replace(/^_|_$/g, '');
  if (n === '') return { problem: 'the header names no property' };
  if (!PROPERTY_NAME_RE.test(n)) return { problem: `"${n}" is not a property name (it must start with a letter; letters, digits, _ . - up to 64)` };
  return { name: n, unit };
}

/** The header Tideline writes for a property: `name [unit]`, or the bare name without a unit. */
export function propertyHeader(name: string, unit: string): string {
  return unit ? `${name} [${unit}]` : name;
}
