/**
 * Batches as JCAMP-DX (McDonald & Wilks 1988, Appl. Spectrosc. 42:151, "JCAMP-DX: A Standard Form
 * for Exchange of Infrared Spectra in Computer Readable Form"; version 4.24 labels).
 *
 * Reading uses the jcampconverter package: a single-spectrum file, or a compound file
 * (##DATA TYPE=LINK with ##BLOCKS=n) holding one block per spectrum. The time of each spectrum is
 * taken from the user label ##$TIME MS (ms since the Unix epoch, written by Tideline), else from
 * ##LONGDATE (YYYY/MM/DD HH:MM:SS[.sss], UTC assumed); the batch id from ##$BATCH, else the
 * title of the link block, else the fallback given (the file name). Lab values ride in user labels of
 * the spectrum's block: `##$LAB moisture=1.9` with `##$LAB moisture UNIT=% w/w` (a block without the
 * label has no value of that property: sparse).
 *
 * Writing produces a compound LINK file; each block carries ##XUNITS=NANOMETERS,
 * ##YUNITS=ABSORBANCE and the data as ##XYDATA=(X++(Y..Y)) when the axis is equidistant, else as
 * ##XYPOINTS=(XY..XY). Values are written in fixed decimal notation (no exponents: AFFN readers
 * differ on them) with 9 significant digits, which round-trips Float32 exactly.
 */
import { convert } from 'jcampconverter';
import { normalisePropertyName, PROPERTY_NAME_RE } from '../lab/lab-values.ts';
import { ImportError, checkImportTime, checkImportValue, normalizeAxis, wavenumberToNm, type ImportedBatch } from './imported-batch.ts';
import { isoTimeOrNull } from '../protocol/plausibility.ts';

interface JcampEntry {
  title?: string;
  dataType?: string;
  info?: Record<string, unknown>;
  meta?: Record<string, unknown>;
  spectra?: { data: { x: number[]; y: number[] }; xUnits?: string; yUnits?: string }[];
  children?: unknown[];
}

function parseLongDate(s: string): number {
  const m = /^(\d{4})\/(\d{2})\/(\d{2})(?:[ T](\d{2}):(\d{2}):(\d{2}(?:\.\d+)?))?/.exec(s.trim());
  if (!m) return NaN;
  const sec = Number(m[6] ?? 0);
  return Date.UTC(+m[1]!, +m[2]! - 1, +m[3]!, +(m[4] ?? 0), +(m[5] ?? 0), Math.floor(sec), Math.round((sec % 1) * 1000));
}

const DATA_LABELS = new Set(['XYDATA', 'PEAKTABLE', 'XYPOINTS', 'DATATABLE', 'RADATA', 'NTUPLES']);

/**
 * The file's block structure, checked before parsing: every ##TITLE= block closed by its ##END=,
 * a LINK block holding as many blocks as its ##BLOCKS= says, each other block holding data, and
 * ##XFACTOR= / ##YFACTOR= numbers. (The parser drops an empty block and takes an unreadable factor
 * as 1, so a truncated file would otherwise import as a partial batch.) Returns the first line of
 * each data block, in file order.
 */
function checkStructure(text: string, file: string): number[] {
  const lines = text.split(/\r\n|\r|\n/);
  type Block = { line: number; link: boolean; declared: number | null; children: number; data: boolean };
  const stack: Block[] = [];
  const dataLines: number[] = [];
  let closedTop = 0;
  for (let i = 0; i < lines.length; i++) {
    const m = /^\s*##([^=]*)=(.*)$/.exec(lines[i]!);
    if (!m) continue;
    const label = m[1]!.trim().toUpperCase().replace(/[\s_\-/]/g, '');
    const value = m[2]!.replace(/\$\$.*$/, '').trim();
    const line = i + 1;
    const top = stack[stack.length - 1];
    if (label === 'TITLE') {
      if (!top && closedTop > 0) throw new ImportError(file, line, 'a second top-level ##TITLE= after the file\'s final ##END=; one file holds one block or one LINK block');
      stack.push({ line, link: false, declared: null, children: 0, data: false });
      continue;
    }
    if (!top) throw new ImportError(file, line, `##${m[1]}= outside any block (before the first ##TITLE= or after the final ##END=)`);
    if (label === 'END') {
      stack.pop();
      if (top.link) {
        if (top.declared !== null && top.children !== top.declared) {
          throw new ImportError(file, top.line, `the LINK block says ##BLOCKS=${top.declared} but holds ${top.children} block(s): the file is truncated or was cut`);
        }
      } else if (!top.data) throw new ImportError(file, top.line, 'the block starting here has no data (no ##XYDATA=, ##PEAK TABLE= or ##XYPOINTS=)');
      const parent = stack[stack.length - 1];
      if (parent) parent.children++;
      else closedTop++;
    } else if (label === 'DATATYPE' && value.toUpperCase() === 'LINK') top.link = true;
    else if (label === 'BLOCKS') {
      const n = Number(value);
      if (!/^\d+$/.test(value) || n < 1) throw new ImportError(file, line, `##BLOCKS=${value} is not a positive whole number`);
      top.declared = n;
    } else if (label === 'XFACTOR' || label === 'YFACTOR') {
      const f = Number(value.replace(',', '.'));
      if (value === '' || !/^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(value.replace(',', '.')) || !Number.isFinite(f) || f === 0) {
        throw new ImportError(file, line, `##${m[1]!.trim()}=${value} is not a usable factor (a finite number other than 0)`);
      }
    } else if (DATA_LABELS.has(label)) {
      if (!top.data) dataLines.push(top.line);
      top.data = true;
    }
  }
  if (stack.length > 0) {
    throw new ImportError(file, stack[stack.length - 1]!.line, `the file ends inside the block starting here: no ##END= (the file is truncated)`);
  }
  return dataLines;
}

/** Read one JCAMP-DX file (single spectrum or compound LINK file) into batches. */
export function readBatchJcamp(text: string, opts: { file?: string; batch?: string; now?: number } = {}): ImportedBatch[] {
  const file = opts.file ?? 'JCAMP-DX';
  if (text.trim() === '') throw new ImportError(file, 0, 'the file is empty');
  if (!/^\s*##TITLE=/m.test(text)) throw new ImportError(file, 1, 'not a JCAMP-DX file: no ##TITLE= label');
  const blockLines = checkStructure(text, file);
  let result: { flatten: JcampEntry[] };
  try {
    result = convert(text, { keepRecordsRegExp: /.*/ }) as unknown as { flatten: JcampEntry[] };
  } catch (e) {
    throw new ImportError(file, 0, `JCAMP-DX could not be parsed: ${(e as Error).message}`);
  }
  const linkTitle = result.flatten.find((e) => (e.dataType ?? '').toUpperCase() === 'LINK')?.title;
  const blocks = result.flatten.filter((e) => (e.spectra?.length ?? 0) > 0);
  if (blocks.length === 0) throw new ImportError(file, 0, 'the file holds no spectrum (no ##XYDATA or ##PEAK TABLE block)');

  const batches = new Map<string, ImportedBatch>();
  const order: string[] = [];
  if (blocks.length !== blockLines.length) {
    throw new ImportError(file, 0, `${blockLines.length} block(s) hold data, but ${blocks.length} could be read as spectra`);
  }
  blocks.forEach((blk, k) => {
    const where = `block ${k + 1}${blk.title ? ` ("${blk.title}")` : ''}`;
    const at = blockLines[k]!;
    const sp = blk.spectra![0]!;
    const xu = (sp.xUnits ?? String(blk.info?.XUNITS ?? '')).toUpperCase().replace(/\s+/g, '');
    let xs = sp.data.x;
    const ys = sp.data.y;
    if (xs.length !== ys.length) throw new ImportError(file, at, `${where}: ${xs.length} x values but ${ys.length} y values`);
    const npoints = Number(blk.info?.NPOINTS);
    if (Number.isFinite(npoints) && npoints !== ys.length) {
      throw new ImportError(file, at, `${where}: ##NPOINTS=${npoints} but ${ys.length} values were read`);
    }
    if (xu === '1/CM' || xu === 'CM-1' || xu === 'CM^-1') xs = xs.map(wavenumberToNm);
    else if (xu === 'MICROMETERS') xs = xs.map((x) => x * 1000);
    else if (xu !== 'NANOMETERS' && xu !== 'NM') {
      throw new ImportError(file, at, `${where}: ##XUNITS=${xu || '(missing)'}; expected NANOMETERS, MICROMETERS or 1/CM`);
    }
    const { axis, reversed } = normalizeAxis(xs, `${file} ${where}`, 0);
    const values = new Float32Array(ys.length);
    for (let j = 0; j < ys.length; j++) {
      const v = ys[j]!;
      if (!Number.isFinite(v)) throw new ImportError(file, at, `${where}: y value ${j + 1} is not a finite number`);
      checkImportValue(v, file, at, `${where}: y value ${j + 1}`);
      values[reversed ? ys.length - 1 - j : j] = v;
    }
    const meta = blk.meta ?? {};
    const tMs = Number(meta['TIME MS']);
    const t = Number.isFinite(tMs) ? tMs : parseLongDate(String(blk.info?.LONGDATE ?? ''));
    if (!Number.isFinite(t)) throw new ImportError(file, at, `${where}: no time (neither ##$TIME MS nor a ##LONGDATE)`);
    checkImportTime(t, opts.now, file, at, `${where}: `);
    const id = String(meta['BATCH'] ?? linkTitle ?? opts.batch ?? file.replace(/\.[^.]*$/, ''));
    const lab = labLabels(meta, file, where);
    let b = batches.get(id);
    if (!b) {
      b = { id, axis, times: [], spectra: [], properties: {}, propertyUnits: {}, source: { file, firstLine: 0, lastLine: 0 } };
      batches.set(id, b);
      order.push(id);
    } else if (b.axis.length !== axis.length || b.axis.some((x, i) => Math.abs(x - axis[i]!) > 1e-6 * Math.abs(x))) {
      throw new ImportError(file, at, `${where}: its wavelength axis differs from the batch's first spectrum (mixed axes)`);
    }
    const prev = b.times[b.times.length - 1];
    if (prev !== undefined && !(t > prev)) throw new ImportError(file, at, `${where}: time does not increase within batch ${id}`);
    const units = b.propertyUnits!;
    for (const [name, { value, unit }] of lab) {
      if (!(name in b.properties)) {
        b.properties[name] = new Array<number>(b.times.length).fill(NaN);
        units[name] = unit;
      } else if (units[name] !== unit) {
        throw new ImportError(file, 0, `${where}: ##$LAB ${name} UNIT=${unit || '(none)'}, but earlier blocks of batch ${id} give ${name} in "${units[name]}"; one property has one unit`);
      }
    }
    for (const [name, arr] of Object.entries(b.properties)) arr.push(lab.get(name)?.value ?? NaN);
    b.times.push(t);
    b.spectra.push(values);
  });
  return order.map((id) => batches.get(id)!);
}

/** The lab values of a block: `##$LAB name=value` and `##$LAB name UNIT=unit` (labels as jcampconverter keeps them). */
function labLabels(meta: Record<string, unknown>, file: string, where: string): Map<string, { value: number; unit: string }> {
  const out = new Map<string, { value: number; unit: string }>();
  const units = new Map<string, string>();
  for (const [key, raw] of Object.entries(meta)) {
    const m = /^LAB\s+(.+?)(\s+UNIT)?$/i.exec(key.trim());
    if (!m) continue;
    const name = normalisePropertyName(m[1]!);
    if (!PROPERTY_NAME_RE.test(name)) throw new ImportError(file, 0, `${where}: ##$${key}: "${name}" is not a property name (it must start with a letter; letters, digits, _ . - up to 64)`);
    if (m[2]) {
      units.set(name, String(raw ?? '').trim());
      continue;
    }
    const v = typeof raw === 'number' ? raw : Number(String(raw).trim());
    if (String(raw).trim() === '' || !Number.isFinite(v)) throw new ImportError(file, 0, `${where}: ##$${key}=${String(raw)} is not a number`);
    out.set(name, { value: v, unit: '' });
  }
  for (const [name, unit] of units) {
    const e = out.get(name);
    if (!e) throw new ImportError(file, 0, `${where}: ##$LAB ${name} UNIT is given without a ##$LAB ${name} value`);
    e.unit = unit;
  }
  return out;
}

/** Fixed-notation decimal with 9 significant digits (never an exponent). */
export function fixed9(v: number): string {
  const f = Math.fround(v);
  if (f === 0) return '0';
  const mag = Math.floor(Math.log10(Math.abs(f)));
  const decimals = Math.min(100, Math.max(0, 8 - mag));
  let s = f.toFixed(decimals);
  if (s.includes('.')) s = s.replace(/0+$/, '').replace(/\.$/, '');
  return s;
}

function isEquidistant(axis: ArrayLike<number>): boolean {
  const n = axis.length;
  const d = (axis[n - 1]! - axis[0]!) / (n - 1);
  for (let i = 1; i < n; i++) if (Math.abs(axis[i]! - axis[i - 1]! - d) > 1e-9 * Math.abs(d) + 1e-12) return false;
  return true;
}

function longDate(t: number): string {
  // A batch stored by an older version may hold a time no date can hold: say so rather than NaN.
  if (isoTimeOrNull(t) === null) return `(not a valid time: ${t} ms)`;
  const d = new Date(t);
  const p = (x: number, w = 2) => String(x).padStart(w, '0');
  return `${d.getUTCFullYear()}/${p(d.getUTCMonth() + 1)}/${p(d.getUTCDate())} ${p(d.getUTCHours())}:${p(d.getUTCMinutes())}:${p(d.getUTCSeconds())}.${p(d.getUTCMilliseconds(), 3)}`;
}

/**
 * A label's value is one line (JCAMP-DX 4.24: a label runs to the end of its line). Names are
 * checked when they enter Tideline (core/io/names.ts), but one stored by an older version may hold a
 * line break: it is written as a space, so that the file can always be read back.
 */
function labelValue(v: string): string {
  return v.replace(/[\u0000-\u001f\u007f-\u009f]/g, ' ');
}

/** Write one batch as a compound JCAMP-DX 4.24 file, one block per spectrum. Lines stay within 80 characters. */
export function writeBatchJcamp(batch: Pick<ImportedBatch, 'id' | 'axis' | 'times' | 'spectra'> & Partial<Pick<ImportedBatch, 'properties' | 'propertyUnits'>> & { product?: string; unit?: string }): string {
  const out: string[] = [
    `##TITLE=${batch.id}`,
    '##JCAMP-DX=4.24',
    '##DATA TYPE=LINK',
    `##BLOCKS=${batch.spectra.length}`,
  ];
  const axis = batch.axis;
  const n = axis.length;
  const equi = isEquidistant(axis);
  batch.spectra.forEach((s, k) => {
    out.push(
      `##TITLE=${batch.id} spectrum ${k + 1}`,
      '##JCAMP-DX=4.24',
      '##DATA TYPE=NEAR INFRARED SPECTRUM',
      `##BLOCK_ID=${k + 1}`,
      `##ORIGIN=Tideline export`,
      `##OWNER=see the Tideline record`,
      `##LONGDATE=${longDate(batch.times[k]!)}`,
      `##$BATCH=${batch.id}`,
      `##$TIME MS=${batch.times[k]}`,
    );
    if (batch.product) out.push(`##$PRODUCT=${labelValue(batch.product)}`);
    if (batch.unit) out.push(`##$UNIT=${labelValue(batch.unit)}`);
    for (const [name, values] of Object.entries(batch.properties ?? {})) {
      const v = values[k];
      if (v === undefined || Number.isNaN(v)) continue;
      out.push(`##$LAB ${name}=${v}`);
      const u = batch.propertyUnits?.[name];
      if (u) out.push(`##$LAB ${name} UNIT=${labelValue(u)}`);
    }
    out.push('##XUNITS=NANOMETERS', '##YUNITS=ABSORBANCE', '##XFACTOR=1', '##YFACTOR=1', `##FIRSTX=${axis[0]}`, `##LASTX=${axis[n - 1]}`, `##NPOINTS=${n}`, `##FIRSTY=${fixed9(s[0]!)}`);
    if (equi) {
      out.push('##XYDATA=(X++(Y..Y))');
      const per = 5;
      for (let j = 0; j < n; j += per) {
        const ys: string[] = [];
        for (let q = j; q < Math.min(n, j + per); q++) ys.push(fixed9(s[q]!));
        out.push(`${axis[j]} ${ys.join(' ')}`);
      }
    } else {
      // JCAMP-DX 4.24 has no tabular form for unevenly spaced full spectra besides (XY..XY) pairs,
      // which the 1988 specification defines under ##PEAK TABLE; readers (jcampconverter among them) take it.
      out.push('##PEAK TABLE=(XY..XY)');
      for (let j = 0; j < n; j++) out.push(`${axis[j]}, ${fixed9(s[j]!)}`);
    }
    out.push('##END=');
  });
  out.push('##END=');
  return out.join('\n') + '\n';
}
