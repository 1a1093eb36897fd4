/**
 * Names people and instruments give things — unit, analyzer and product names, descriptions, the
 * instrument text of a hello — come from keyboards, spreadsheets and vendor software. They are shown
 * in views, reports, exports and the audit trail, so each must be text that reads the same
 * everywhere it goes:
 *
 * - no control characters (C0 U+0000–U+001F, DEL, C1 U+0080–U+009F): a NUL truncates in C tools, an
 *   escape sequence repaints a terminal, a newline breaks a line-oriented file (a JCAMP-DX label, a
 *   CSV cell, a log line); a multi-line description may hold line feeds and tabs;
 * - no bidirectional embedding, override or isolate marks (U+202A–U+202E, U+2066–U+2069, and the
 *   marks U+200E, U+200F, U+061C): they make a name display as something else (Unicode Technical
 *   Report #36, "Unicode Security Considerations", §2.3; CVE-2021-42574 "Trojan Source");
 * - no lone surrogate (U+D800–U+DFFF unpaired): it has no UTF-8 form and would be stored as bytes
 *   that are not UTF-8;
 * - no byte-order mark or other non-character (U+FEFF, U+FFFE, U+FFFF);
 * - not empty and not only spaces; at most `max` characters (Unicode code points).
 *
 * Identifiers (unit, analyzer, batch ids) are stricter still: `ID_RE` below.
 *
 * Pure: returns null when the text is fine, else a sentence naming what is wrong and where.
 */
import { z } from 'zod';

/** Identifiers: 1–128 of A–Z a–z 0–9 . _ : - (unit, batch ids; analyzer ids are at most 64). */
export const ID_RE = /^[A-Za-z0-9._:-]{1,128}$/;
export const ID_RULE = '1–128 letters, digits or . _ : - (no spaces)';

/** Longest name by default (code points). */
export const NAME_MAX = 200;

const BIDI = new Set([0x061c, 0x200e, 0x200f, 0x202a, 0x202b, 0x202c, 0x202d, 0x202e, 0x2066, 0x2067, 0x2068, 0x2069]);

export interface TextRule {
  /** Longest allowed, code points; default NAME_MAX. */
  max?: number;
  /** Allow line feed, carriage return and tab (descriptions, comments); default false. */
  multiline?: boolean;
  /** Allow the empty string; default false. */
  empty?: boolean;
}

function hex(cp: number): string {
  return 'U+' + cp.toString(16).toUpperCase().padStart(4, '0');
}

/** null when `s` is acceptable text under `rule`, else why not (the caller adds which field). */
export function textProblem(s: unknown, rule: TextRule = {}): string | null {
  if (typeof s !== 'string') return `must be text, got ${s === null ? 'null' : typeof s}`;
  const max = rule.max ?? NAME_MAX;
  if (s.trim() === '') return rule.empty && s === '' ? null : 'must not be empty or only spaces';
  let n = 0;
  for (let i = 0; i < s.length; i++) {
    const c = s.charCodeAt(i);
    n++;
    if (c >= 0xd800 && c <= 0xdbff) {
      const d = s.charCodeAt(i + 1);
      if (d >= 0xdc00 && d <= 0xdfff) {
        i++;
        continue;
      }
      return `holds a lone surrogate (${hex(c)}) at character ${n}: not valid Unicode text`;
    }
    if (c >= 0xdc00 && c <= 0xdfff) return `holds a lone surrogate (${hex(c)}) at character ${n}: not valid Unicode text`;
    if (c < 0x20 || (c >= 0x7f && c <= 0x9f)) {
      if (rule.multiline && (c === 0x0a || c === 0x0d || c === 0x09)) continue;
      const what = c === 0 ? 'a NUL character' : c === 0x1b ? 'an escape character' : c === 0x0a || c === 0x0d ? 'a line break' : c === 0x09 ? 'a tab' : 'a control character';
      return `holds ${what} (${hex(c)}) at character ${n}; ${rule.multiline ? 'only line breaks and tabs are allowed among control characters' : 'a name is one line of printable text'}`;
    }
    if (BIDI.has(c)) return `holds a bidirectional control character (${hex(c)}) at character ${n}, which can make the text display as something it is not`;
    if (c === 0xfeff || c === 0xfffe || c === 0xffff) return `holds ${hex(c)} at character ${n}, which is not a printable character`;
  }
  if (n > max) return `is ${n} characters long; at most ${max} are allowed`;
  return null;
}

/** Throws-free check for identifiers: null when `s` matches ID_RE (and `max`), else why not. */
export function idProblem(s: unknown, max = 128): string | null {
  if (typeof s !== 'string') return `must be text, got ${s === null ? 'null' : typeof s}`;
  if (s.length === 0) return 'must not be empty';
  if (s.length > max) return `is ${s.length} characters long; at most ${max} are allowed`;
  if (!ID_RE.test(s)) {
    const bad = [...s].find((ch) => !/[A-Za-z0-9._:-]/.test(ch))!;
    const cp = bad.codePointAt(0)!;
    return `holds ${cp >= 0x21 && cp < 0x7f ? `"${bad}"` : hex(cp)}; use ${ID_RULE}`;
  }
  return null;
}

/** A zod string checked by textProblem (for request bodies and protocol messages). */
export function nameSchema(rule: TextRule = {}) {
  return z.string().superRefine((v, ctx) => {
    const p = textProblem(v, rule);
    if (p) ctx.addIssue({ code: 'custom', message: p });
  });
}
