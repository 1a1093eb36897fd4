/**
 * Batches as CSV: a header row naming the metadata columns and giving the wavelengths in nm, then one
 * row per spectrum.
 *
 *   batch,time_ms,moisture_pct,950.0,952.7,…
 *   B-0001,1767225600000,18.2,0.4123,0.4131,…
 *
 * Reading is tolerant of what instruments and spreadsheets write — delimiter `,` `;` or tab, decimal
 * point or decimal comma (detected, or set), a header cell like `1450 nm`, a decreasing axis, a BOM —
 * and strict about everything else: a ragged row, text or NaN in a number, an empty file, a
 * non-monotone axis or one in the wrong unit is refused with the file name, line and reason.
 *
 * Time columns: `time_ms` (ms since the Unix epoch), `time_s` / `time` / `seconds` (seconds),
 * `time_min` / `minutes`, or `timestamp` / `time_utc` (ISO 8601); with several, the most precise
 * wins. Relative times are placed after `origin`. Columns `seq` and `index` are read past. Every
 * other column of numbers is a per-spectrum property (e.g. laboratory moisture), its name and unit
 * read from the header (core/lab/property-header.ts: `moisture [% w/w]`, `moisture_pct`, …); an
 * empty cell is no value (lab values are sparse). Text and empty columns are not used, with a warning.
 */
import { parsePropertyHeader, propertyHeader } from '../lab/property-header.ts';
import { cellNumber, classifyColumn, csvRows, csvTable, splitLine } from './csv-cells.ts';
import { ImportError, checkImportTime, checkImportValue, normalizeAxis, wavenumberToNm, type ImportedBatch } from './imported-batch.ts';

export interface CsvReadOptions {
  file?: string;
  delimiter?: ',' | ';' | '\t';
  decimal?: '.' | ',';
  axisUnit?: 'nm' | 'cm-1';
  /** ms added to relative times (time_s, time_min); default 0. */
  origin?: number;
  /** Batch id for a file without a batch column. */
  batch?: string;
  /** Columns the reader does not use are named here (text, empty, a second time column, …). */
  warnings?: string[];
  /** The importer's clock (ms since the epoch): a time more than 5 min ahead of it is refused. */
  now?: number;
}

/**
 * ISO 8601 date and time, strictly: 2026-01-05T08:00:00Z, 2026-01-05 08:00:00.250+01:00. Without an
 * offset the time is taken as UTC (never as the importing computer's local time). Free forms such
 * as "Dec 1" or "1/12/2026" are refused: a reader guesses their year and day order.
 */
const ISO_RE = /^(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2})(?::(\d{2})(\.\d{1,9})?)?(Z|[+-]\d{2}:?\d{2})?$/;

/** ms since the epoch for a strict ISO 8601 date-time, else NaN. */
export function parseIsoTime(s: string): number {
  const m = ISO_RE.exec(s.trim());
  if (!m) return NaN;
  const [, y, mo, d, h, mi, sec, frac, zone] = m;
  if (+mo! < 1 || +mo! > 12 || +d! < 1 || +d! > 31 || +h! > 23 || +mi! > 59 || +(sec ?? 0) > 59) return NaN;
  const base = Date.UTC(+y!, +mo! - 1, +d!, +h!, +mi!, +(sec ?? 0), frac ? Math.round(Number(frac) * 1000) : 0);
  // A day that does not exist in that month (31 April) rolls over in Date.UTC: refuse it.
  if (new Date(base).getUTCDate() !== +d!) return NaN;
  if (!zone || zone === 'Z') return base;
  const zm = /^([+-])(\d{2}):?(\d{2})$/.exec(zone)!;
  return base - (zm[1] === '-' ? -1 : 1) * (+zm[2]! * 60 + +zm[3]!) * 60_000;
}

type TimeKind = 'ms' | 's' | 'min' | 'iso';
const TIME_COLUMNS: Record<string, TimeKind> = {
  time_ms: 'ms',
  t_ms: 'ms',
  time_s: 's',
  time: 's',
  t_s: 's',
  seconds: 's',
  elapsed_s: 's',
  time_min: 'min',
  minutes: 'min',
  elapsed_min: 'min',
  timestamp: 'iso',
  datetime: 'iso',
  time_utc: 'iso',
};
/** When a file has several time columns, the most precise is used: ms, then ISO, then s, then min. */
const TIME_PRECEDENCE: TimeKind[] = ['ms', 'iso', 's', 'min'];
const BATCH_COLUMNS = new Set(['batch', 'batch_id', 'batchid']);
/** Bookkeeping columns that are read past (neither time nor a property). */
const IGNORED_COLUMNS = new Set(['seq', 'index', 'idx', 'row']);
const TEXT_COLUMNS = new Set(['product', 'unit']);
const TIME_FACTOR: Record<Exclude<TimeKind, 'iso'>, number> = { ms: 1, s: 1000, min: 60_000 };

/** Read one or more batches from CSV text. Throws ImportError naming file, line and reason. */
export function readBatchCsv(text: string, opts: CsvReadOptions = {}): ImportedBatch[] {
  const file = opts.file ?? 'CSV';
  const warn = (w: string) => opts.warnings?.push(w);
  // Line ends: LF, CRLF, or a lone CR (older Mac and some instrument software).
  const table = csvTable(text, file, opts.delimiter);
  const { lines, h, delimiter, header, headerLine } = table;

  // Decimal comma: only possible when the delimiter is not a comma; detect from the header's axis cells
  // or, failing that, from the first data row.
  let decimal = opts.decimal;
  if (decimal === ',' && delimiter === ',') throw new ImportError(file, headerLine, 'decimal comma and comma delimiter cannot be used together');
  if (!decimal) {
    const firstData = lines.slice(h + 1).find((l) => l.trim() !== '' && !l.startsWith('#'));
    const cells = [...header, ...(firstData ? splitLine(firstData, delimiter) : [])];
    decimal = delimiter !== ',' && cells.some((c) => /^[+-]?\d+,\d+$/.test(c)) ? ',' : '.';
  }
  const dec = decimal;
  const toNumber = (cell: string): number | null => cellNumber(cell, dec);

  // Classify the header.
  let batchCol = -1;
  let timeCol = -1;
  let timeKind = 's' as TimeKind;
  const timeCols: number[] = [];
  const textCols: { name: string; col: number }[] = [];
  const candidates: number[] = [];
  const axisCols: number[] = [];
  const axisRaw: number[] = [];
  let axisUnit = opts.axisUnit;
  const column = (col: number) => `column ${col + 1} "${header[col]}"`;
  header.forEach((cellRaw, col) => {
    const cell = cellRaw.replace(/^"|"$/g, '');
    // A wavelength: "1450", "1450.5 nm", "nm_1450.5" (as Tideline's batch export writes), or a wavenumber "7000 cm-1".
    const m = /^(?:nm_)?([+-]?[\d.,]+(?:[eE][+-]?\d+)?)\s*(nm|cm-1|cm⁻¹|1\/cm)?$/.exec(cell);
    const num = m ? toNumber(m[1]!) : null;
    if (m && num !== null) {
      if (m[2] && m[2] !== 'nm') {
        if (axisUnit === 'nm') throw new ImportError(file, headerLine, `column ${col + 1} header "${cell}" is in cm⁻¹ but the axis unit was set to nm`);
        axisUnit = 'cm-1';
      }
      axisCols.push(col);
      axisRaw.push(num);
      return;
    }
    const name = cell.toLowerCase().replace(/\s+/g, '_');
    if (name === '') throw new ImportError(file, headerLine, `column ${col + 1} has an empty header`);
    if (BATCH_COLUMNS.has(name)) batchCol = col;
    else if (name in TIME_COLUMNS) {
      const kind = TIME_COLUMNS[name]!;
      if (timeCol >= 0 && kind === timeKind) throw new ImportError(file, headerLine, `two time columns of the same kind ("${header[timeCol]}" and "${cell}")`);
      timeCols.push(col);
      if (timeCol < 0 || TIME_PRECEDENCE.indexOf(kind) < TIME_PRECEDENCE.indexOf(timeKind)) {
        timeCol = col;
        timeKind = kind;
      }
    } else if (IGNORED_COLUMNS.has(name)) warn(`${file}: ${column(col)} is a row count; not used`);
    else if (TEXT_COLUMNS.has(name)) textCols.push({ name, col });
    else candidates.push(col);
  });
  if (axisCols.length < 2) throw new ImportError(file, headerLine, `the header has ${axisCols.length} wavelength column(s); expected a row of wavelengths in nm`);
  if (timeCol < 0) throw new ImportError(file, headerLine, `no time column (expected one of ${Object.keys(TIME_COLUMNS).join(', ')})`);
  if (batchCol < 0 && !opts.batch) throw new ImportError(file, headerLine, 'no batch column and no batch id given');
  for (const c of timeCols) if (c !== timeCol) warn(`${file}: ${column(c)} is a time column; not used ("${header[timeCol]}" is more precise)`);
  for (let i = 1; i < axisCols.length; i++) {
    if (axisCols[i] !== axisCols[i - 1]! + 1) throw new ImportError(file, headerLine, `the wavelength columns are not contiguous (column ${axisCols[i - 1]! + 2} is "${header[axisCols[i - 1]! + 1]}")`);
  }
  const axisNm = axisUnit === 'cm-1' ? axisRaw.map(wavenumberToNm) : axisRaw;
  const { axis, reversed } = normalizeAxis(axisNm, file, headerLine);
  const p = axis.length;
  const a0 = axisCols[0]!;

  // The rows, then the columns that are neither axis, time, batch nor bookkeeping: a column of
  // numbers (empty cells allowed) is a property; text, empty columns and headers that name no
  // property are not used (warned); numbers with a stray text cell are refused.
  const rows = csvRows(table, 'spectra');
  const propCols: { name: string; unit: string; col: number }[] = [];
  for (const col of candidates) {
    const k = classifyColumn(rows.map((r) => r.cells[col]!), dec);
    if (k.kind === 'empty') warn(`${file}: ${column(col)} has no value in any row; not used`);
    else if (k.kind === 'text') warn(`${file}: ${column(col)} holds ${k.numbers ? 'mostly ' : ''}text (e.g. "${k.example}"), not numbers; not used`);
    else if (k.kind === 'stray') {
      const r = rows[k.row]!;
      throw new ImportError(file, r.line, `${column(col)} holds "${r.cells[col]}", which is not a number, among ${k.numbers} numbers; leave the cell empty where there is no lab value`);
    } else {
      const ph = parsePropertyHeader(header[col]!);
      if ('problem' in ph) {
        warn(`${file}: ${column(col)} holds numbers but ${ph.problem}; not used`);
        continue;
      }
      const prev = propCols.find((q) => q.name === ph.name);
      if (prev) throw new ImportError(file, headerLine, `${column(prev.col)} and ${column(col)} both name the property ${ph.name}`);
      propCols.push({ ...ph, col });
    }
  }
  if ((timeKind === 'ms' || timeKind === 'iso') && opts.origin !== undefined) {
    warn(`${file}: the origin given is not used: the times in "${header[timeCol]}" are absolute`);
  }
  if ((timeKind === 's' || timeKind === 'min') && opts.origin === undefined) {
    warn(`${file}: times are elapsed ${timeKind === 's' ? 'seconds' : 'minutes'} ("${header[timeCol]}") and no origin was given: the batches are placed after 1970-01-01T00:00:00Z; give the batch start (import --origin) to store real times`);
  }

  const batches = new Map<string, ImportedBatch>();
  const order: string[] = [];
  for (const { line: lineNo, cells } of rows) {
    const id = batchCol >= 0 ? cells[batchCol]! : opts.batch!;
    if (!id) throw new ImportError(file, lineNo, 'the batch column is empty');
    const tCell = cells[timeCol]!;
    let t: number;
    if (timeKind === 'iso') {
      t = parseIsoTime(tCell);
      if (!Number.isFinite(t)) throw new ImportError(file, lineNo, `time "${tCell}" is not an ISO 8601 date-time such as 2026-01-05T08:00:00Z`);
    } else {
      const v = toNumber(tCell);
      if (v === null || !Number.isFinite(v)) throw new ImportError(file, lineNo, `time "${tCell}" in column "${header[timeCol]}" is not a number`);
      if (timeKind !== 'ms' && v < 0) throw new ImportError(file, lineNo, `time "${tCell}" in column "${header[timeCol]}" is negative; elapsed times start at 0`);
      t = v * TIME_FACTOR[timeKind] + (timeKind === 'ms' ? 0 : (opts.origin ?? 0));
    }
    checkImportTime(t, opts.now, file, lineNo, `column "${header[timeCol]}": `);
    const values = new Float32Array(p);
    for (let j = 0; j < p; j++) {
      const cell = cells[a0 + j]!;
      const v = toNumber(cell);
      if (v === null || !Number.isFinite(v)) {
        const what = cell === '' ? 'is empty' : /^nan$/i.test(cell) ? 'is NaN' : `"${cell}" is not a number`;
        throw new ImportError(file, lineNo, `the value at ${axisRaw[j]} (column ${a0 + j + 1}) ${what}`);
      }
      // 1e39 is a finite double but +Infinity as the float32 a spectrum is stored as.
      checkImportValue(v, file, lineNo, `the value at ${axisRaw[j]} (column ${a0 + j + 1})`);
      values[reversed ? p - 1 - j : j] = v;
    }
    let b = batches.get(id);
    if (!b) {
      b = { id, axis, times: [], spectra: [], properties: {}, propertyUnits: {}, source: { file, firstLine: lineNo, lastLine: lineNo } };
      for (const pc of propCols) {
        b.properties[pc.name] = [];
        b.propertyUnits![pc.name] = pc.unit;
      }
      for (const tc of textCols) {
        const v = cells[tc.col]!;
        if (v) (b as unknown as Record<string, string>)[tc.name] = v;
      }
      batches.set(id, b);
      order.push(id);
    }
    const prevT = b.times[b.times.length - 1];
    if (prevT !== undefined && !(t > prevT)) {
      throw new ImportError(file, lineNo, `time does not increase within batch ${id} (${tCell} after the previous row)`);
    }
    for (const pc of propCols) {
      const cell = cells[pc.col]!;
      b.properties[pc.name]!.push(cell === '' ? NaN : toNumber(cell)!);
    }
    b.times.push(t);
    b.spectra.push(values);
    b.source.lastLine = lineNo;
  }
  return order.map((id) => batches.get(id)!);
}

/** Float32 values print exactly with 9 significant digits (IEEE 754: 9 decimal digits round-trip binary32). */
export function formatFloat32(v: number): string {
  return Number(Math.fround(v).toPrecision(9)).toString();
}

/** A CSV cell, quoted when it holds the delimiter, a quote or leading/trailing blanks (RFC 4180). */
export function csvCell(s: string): string {
  return /[",\n\r]|^\s|\s$/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

/** The header a property is written under, read back to the same name and unit. */
export function propertyColumnHeader(name: string, unit: string): string {
  const h = propertyHeader(name, unit);
  const back = parsePropertyHeader(h);
  return 'problem' in back || back.name !== name || back.unit !== unit ? `${name} [${unit}]` : h;
}

/**
 * Write batches (same axis) as CSV in the layout readBatchCsv reads first: batch, time_ms, properties
 * (`name [unit]`, empty where a spectrum has no value), wavelengths.
 */
export function writeBatchCsv(batches: Pick<ImportedBatch, 'id' | 'axis' | 'times' | 'spectra' | 'properties' | 'propertyUnits'>[]): string {
  if (batches.length === 0) throw new RangeError('no batches to write');
  const axis = batches[0]!.axis;
  const units = new Map<string, string>();
  for (const b of batches) {
    for (const k of Object.keys(b.properties)) {
      const u = b.propertyUnits?.[k] ?? '';
      const prev = units.get(k);
      if (prev !== undefined && prev !== u) throw new RangeError(`property ${k} is in "${prev}" in one batch and "${u}" in batch ${b.id}; write them to separate files`);
      units.set(k, u);
    }
  }
  const props = [...units.keys()];
  const rows: string[] = [['batch', 'time_ms', ...props.map((k) => csvCell(propertyColumnHeader(k, units.get(k)!))), ...Array.from(axis, (x) => String(x))].join(',')];
  for (const b of batches) {
    if (b.axis.length !== axis.length || b.axis.some((x, i) => x !== axis[i])) throw new RangeError(`batch ${b.id} has a different axis; write it to its own file`);
    for (let i = 0; i < b.spectra.length; i++) {
      const cells = [csvCell(b.id), String(b.times[i])];
      for (const k of props) {
        const v = b.properties[k]?.[i];
        cells.push(v === undefined || Number.isNaN(v) ? '' : String(v));
      }
      const s = b.spectra[i]!;
      for (let j = 0; j < s.length; j++) cells.push(formatFloat32(s[j]!));
      rows.push(cells.join(','));
    }
  }
  return rows.join('\n') + '\n';
}
