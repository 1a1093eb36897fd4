/**
 * A lab results file (pure): the results a laboratory reports after a batch, one sample per row.
 *
 *   batch,sample_time,moisture [% w/w],method
 *   D-0042,2026-03-02T08:41:00Z,6.31,LOD
 *   D-0042,2026-03-02T09:12:00Z,2.05,LOD
 *
 * - `batch` (or `batch_id`) names the batch.
 * - The sample time, one column: `sample_time` / `sampled_at` / `timestamp` / `time_utc` /
 *   `datetime` / `time` (ISO 8601 with its zone, or ms since the epoch as digits), `time_ms` /
 *   `sample_time_ms` (ms since the epoch), or elapsed time after the batch start: `elapsed_min` /
 *   `time_min` / `minutes`, `elapsed_s` / `time_s`. With several, absolute times win.
 * - `method` (optional): the reference method of the row's values, e.g. LOD.
 * - Every other column holding numbers is a property, its header read like a spectra file's
 *   (core/lab/property-header.ts: `moisture [% w/w]`, `moisture_pct`, …); an empty cell is no value.
 *   Text-only columns, empty columns and rows without a value are not used, each with a warning; a
 *   number column with a stray text cell is refused with file, line and reason.
 * Delimiter `,` `;` or tab and decimal comma are detected as for spectra files.
 */
import { cellNumber, classifyColumn, csvRows, csvTable } from '../io/csv-cells.ts';
import { ImportError } from '../io/imported-batch.ts';
import { parsePropertyHeader } from './property-header.ts';

type LabTimeKind = 'abs' | 'ms' | 'elapsed_s' | 'elapsed_min';
const LAB_TIME_COLUMNS: Record<string, LabTimeKind> = {
  sample_time: 'abs',
  sampled_at: 'abs',
  sample_t: 'abs',
  timestamp: 'abs',
  time_utc: 'abs',
  datetime: 'abs',
  time: 'abs',
  time_ms: 'ms',
  sample_time_ms: 'ms',
  elapsed_s: 'elapsed_s',
  time_s: 'elapsed_s',
  elapsed_min: 'elapsed_min',
  time_min: 'elapsed_min',
  minutes: 'elapsed_min',
};
const PRECEDENCE: LabTimeKind[] = ['ms', 'abs', 'elapsed_s', 'elapsed_min'];
const BATCH_COLUMNS = new Set(['batch', 'batch_id', 'batchid']);

/** One value of the file: its batch, sample time (absolute or elapsed), property, unit, method, line. */
export interface LabFileEntry {
  line: number;
  batch: string;
  /** ms epoch or ISO 8601 text, when the file gives absolute times. */
  sampleT?: number | string;
  /** Minutes after the batch start, when the file gives elapsed times. */
  elapsedMin?: number;
  property: string;
  unit: string;
  value: number;
  method: string | null;
}

export interface LabFile {
  entries: LabFileEntry[];
  properties: { name: string; unit: string; header: string }[];
  warnings: string[];
}

export function readLabResultsCsv(text: string, opts: { file?: string; delimiter?: ',' | ';' | '\t'; decimal?: '.' | ',' } = {}): LabFile {
  const file = opts.file ?? 'lab results';
  const table = csvTable(text, file, opts.delimiter);
  const { delimiter, header, headerLine } = table;
  const rows = csvRows(table, 'results');
  let decimal = opts.decimal;
  if (decimal === ',' && delimiter === ',') throw new ImportError(file, headerLine, 'decimal comma and comma delimiter cannot be used together');
  decimal ??= delimiter !== ',' && rows[0]!.cells.some((c) => /^[+-]?\d+,\d+$/.test(c)) ? ',' : '.';

  const warnings: string[] = [];
  const warn = (col: number, what: string) => warnings.push(`${file}: column ${col + 1} "${header[col]}" ${what}`);
  let batchCol = -1;
  let methodCol = -1;
  let timeCol = -1;
  let timeKind = 'elapsed_min' as LabTimeKind;
  const timeCols: number[] = [];
  const candidates: number[] = [];
  header.forEach((cell, col) => {
    const name = cell.toLowerCase().trim().replace(/\s+/g, '_');
    if (name === '') throw new ImportError(file, headerLine, `column ${col + 1} has an empty header`);
    if (BATCH_COLUMNS.has(name)) batchCol = col;
    else if (name === 'method') methodCol = col;
    else if (name in LAB_TIME_COLUMNS) {
      const kind = LAB_TIME_COLUMNS[name]!;
      timeCols.push(col);
      if (timeCol < 0 || PRECEDENCE.indexOf(kind) < PRECEDENCE.indexOf(timeKind)) {
        timeCol = col;
        timeKind = kind;
      }
    } else candidates.push(col);
  });
  if (batchCol < 0) throw new ImportError(file, headerLine, 'no batch column (batch)');
  if (timeCol < 0) throw new ImportError(file, headerLine, `no sample time column (expected one of ${Object.keys(LAB_TIME_COLUMNS).join(', ')})`);
  for (const c of timeCols) if (c !== timeCol) warn(c, `is a time column; not used ("${header[timeCol]}" is used)`);

  const properties: (LabFile['properties'][number] & { col: number })[] = [];
  for (const col of candidates) {
    const k = classifyColumn(rows.map((r) => r.cells[col]!), decimal);
    if (k.kind === 'empty') warn(col, 'has no value in any row; not used');
    else if (k.kind === 'text') warn(col, `holds ${k.numbers ? 'mostly ' : ''}text (e.g. "${k.example}"); not used`);
    else if (k.kind === 'stray') {
      const r = rows[k.row]!;
      throw new ImportError(file, r.line, `column "${header[col]}" holds "${r.cells[col]}", which is not a number, among ${k.numbers} numbers; leave the cell empty where there is no value`);
    } else {
      const ph = parsePropertyHeader(header[col]!);
      if ('problem' in ph) {
        warn(col, `holds numbers but ${ph.problem}; not used`);
        continue;
      }
      const prev = properties.find((p) => p.name === ph.name);
      if (prev) throw new ImportError(file, headerLine, `columns ${prev.col + 1} "${prev.header}" and ${col + 1} "${header[col]}" both name the property ${ph.name}`);
      properties.push({ name: ph.name, unit: ph.unit, header: header[col]!, col });
    }
  }
  if (properties.length === 0) throw new ImportError(file, headerLine, 'no column holds lab values (numbers under a property header such as "moisture [% w/w]")');

  const entries: LabFileEntry[] = [];
  for (const r of rows) {
    const batch = r.cells[batchCol]!;
    if (!batch) throw new ImportError(file, r.line, 'the batch column is empty');
    const tCell = r.cells[timeCol]!;
    if (tCell === '') throw new ImportError(file, r.line, `the sample time ("${header[timeCol]}") is empty`);
    const time: Pick<LabFileEntry, 'sampleT' | 'elapsedMin'> = {};
    if (timeKind === 'abs') time.sampleT = tCell;
    else {
      const v = cellNumber(tCell, decimal);
      if (v === null) throw new ImportError(file, r.line, `the sample time "${tCell}" in column "${header[timeCol]}" is not a number`);
      if (timeKind === 'ms') time.sampleT = v;
      else time.elapsedMin = timeKind === 'elapsed_s' ? v / 60 : v;
    }
    const method = methodCol >= 0 ? r.cells[methodCol]! || null : null;
    let any = false;
    for (const p of properties) {
      const cell = r.cells[p.col]!;
      if (cell === '') continue;
      any = true;
      entries.push({ line: r.line, batch, ...time, property: p.name, unit: p.unit, value: cellNumber(cell, decimal)!, method });
    }
    if (!any) warnings.push(`${file}, line ${r.line}: no value in any property column; not used`);
  }
  return { entries, properties: properties.map(({ name, unit, header }) => ({ name, unit, header })), warnings };
}
