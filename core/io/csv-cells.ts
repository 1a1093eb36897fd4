/** CSV cells as instruments, spreadsheets and LIMS write them: splitting, delimiters, numbers, column kinds. */
import { ImportError } from './imported-batch.ts';

export const NUMBER_RE = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

export function splitLine(line: string, delimiter: string): string[] {
  if (!line.includes('"')) return line.split(delimiter).map((c) => c.trim());
  // Quoted fields (RFC 4180): a quote doubles inside quotes.
  const out: string[] = [];
  let cur = '';
  let inQ = false;
  for (let i = 0; i < line.length; i++) {
    const ch = line[i]!;
    if (inQ) {
      if (ch === '"' && line[i + 1] === '"') {
        cur += '"';
        i++;
      } else if (ch === '"') inQ = false;
      else cur += ch;
    } else if (ch === '"') inQ = true;
    else if (ch === delimiter) {
      out.push(cur.trim());
      cur = '';
    } else cur += ch;
  }
  out.push(cur.trim());
  return out;
}

export function detectDelimiter(header: string): ',' | ';' | '\t' {
  const count = (c: string) => header.split(c).length - 1;
  const counts: [',' | ';' | '\t', number][] = [
    ['\t', count('\t')],
    [';', count(';')],
    [',', count(',')],
  ];
  counts.sort((a, b) => b[1] - a[1]);
  return counts[0]![1] > 0 ? counts[0]![0] : ',';
}

/** A number in a cell (decimal point, or decimal comma when `decimal` is ','), else null. */
export function cellNumber(cell: string, decimal: '.' | ','): number | null {
  const s = decimal === ',' ? cell.replace(',', '.') : cell;
  return NUMBER_RE.test(s) ? Number(s) : null;
}

/**
 * What a column that is neither axis, time nor batch holds:
 * - 'empty': no value in any row;
 * - 'text': text only, or mostly text (more text cells than numbers) — not a property;
 * - 'stray': numbers with some text cells (at most as many as numbers) — refused, `row` is the first text cell;
 * - 'numbers': numbers, empty cells allowed (sparse).
 */
export type ColumnKind = { kind: 'empty' } | { kind: 'text'; numbers: number; texts: number; example: string } | { kind: 'stray'; row: number; numbers: number } | { kind: 'numbers'; numbers: number };

export function classifyColumn(cells: readonly string[], decimal: '.' | ','): ColumnKind {
  let numbers = 0;
  let texts = 0;
  let first = -1;
  for (let r = 0; r < cells.length; r++) {
    const cell = cells[r]!;
    if (cell === '') continue;
    const v = cellNumber(cell, decimal);
    if (v !== null && Number.isFinite(v)) numbers++;
    else {
      texts++;
      if (first < 0) first = r;
    }
  }
  if (numbers === 0 && texts === 0) return { kind: 'empty' };
  if (texts > numbers) return { kind: 'text', numbers, texts, example: cells[first]! };
  if (texts > 0) return { kind: 'stray', row: first, numbers };
  return { kind: 'numbers', numbers };
}

/** A delimited text's header: the first line that is neither empty nor a # comment. */
export interface CsvTable {
  file: string;
  lines: string[];
  /** Index of the header line in `lines` (0-based); `headerLine` is its 1-based line number. */
  h: number;
  headerLine: number;
  delimiter: ',' | ';' | '\t';
  header: string[];
}

/**
 * Split a file into lines (LF, CRLF or a lone CR; a leading byte-order mark dropped) and find its
 * header. An empty file is an ImportError naming the file.
 */
export function csvTable(text: string, file: string, delimiter?: ',' | ';' | '\t'): CsvTable {
  const src = text.charCodeAt(0) === 0xfeff ? text.slice(1) : text;
  const lines = src.split(/\r\n|\r|\n/);
  let h = 0;
  while (h < lines.length && (lines[h]!.trim() === '' || lines[h]!.startsWith('#'))) h++;
  if (h >= lines.length) throw new ImportError(file, 0, 'the file is empty');
  const d = delimiter ?? detectDelimiter(lines[h]!);
  return { file, lines, h, headerLine: h + 1, delimiter: d, header: splitLine(lines[h]!, d) };
}

/** The data rows after the header, each with its 1-based line number; every row as wide as the header. */
export function csvRows(t: CsvTable, noun: string): { line: number; cells: string[] }[] {
  const rows: { line: number; cells: string[] }[] = [];
  for (let li = t.h + 1; li < t.lines.length; li++) {
    const raw = t.lines[li]!;
    if (raw.trim() === '' || raw.startsWith('#')) continue;
    const cells = splitLine(raw, t.delimiter);
    if (cells.length !== t.header.length) throw new ImportError(t.file, li + 1, `${cells.length} fields, but the header has ${t.header.length}`);
    rows.push({ line: li + 1, cells });
  }
  if (rows.length === 0) throw new ImportError(t.file, 0, `the file has a header but no ${noun}`);
  return rows;
}
