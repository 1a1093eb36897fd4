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
import { ImportError, normalizeAxis, wavenumberToNm, type ImportedBatch } from './imported-batch.ts';

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

/** Read one JCAMP-DX file (single spectrum or compound LINK file) into batches. */
export function readBatchJcamp(text: string, opts: { file?: string; batch?: string } = {}): ImportedBatch[] {
  const file = opts.file ?? 'JCAMP-DX';
  if (text.trim() === '') throw new ImportError(file, 0, 'the file is empty');
  if (!/^\s*##TITLE=/m.test(text)) throw new ImportError(file, 1, 'not a JCAMP-DX file: no ##TITLE= label');
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
  blocks.forEach((blk, k) => {
    const where = `block ${k + 1}${blk.title ? ` ("${blk.title}")` : ''}`;
    const sp = blk.spectra![0]!;
    const xu = (sp.xUnits ?? String(blk.info?.XUNITS ?? '')).toUpperCase().replace(/\s+/g, '');
    let xs = sp.data.x;
    const ys = sp.data.y;
    if (xs.length !== ys.length) throw new ImportError(file, 0, `${where}: ${xs.length} x values but ${ys.length} y values`);
    const npoints = Number(blk.info?.NPOINTS);
    if (Number.isFinite(npoints) && npoints !== ys.length) {
      throw new ImportError(file, 0, `${where}: ##NPOINTS=${npoints} but ${ys.length} values were read`);
    }
    if (xu === '1/CM' || xu === 'CM-1' || xu === 'CM^-1') xs = xs.map(wavenumberToNm);
    else if (xu === 'MICROMETERS') xs = xs.map((x) => x * 1000);
    else if (xu !== 'NANOMETERS' && xu !== 'NM') {
      throw new ImportError(file, 0, `${where}: ##XUNITS=${xu || '(missing)'}; expected NANOMETERS, MICROMETERS or 1/CM`);
    }
    const { axis, reversed } = normalizeAxis(xs, `${file} ${where}`, 0);
    const values = new Float32Array(ys.length);
    for (let j = 0; j < ys.length; j++) {
      const v = ys[j]!;
      if (!Number.isFinite(v)) throw new ImportError(file, 0, `${where}: y value ${j + 1} is not a finite number`);
      values[reversed ? ys.length - 1 - j : j] = v;
    }
    const meta = blk.meta ?? {};
    const tMs = Number(meta['TIME MS']);
    const t = Number.isFinite(tMs) ? tMs : parseLongDate(String(blk.info?.LONGDATE ?? ''));
    if (!Number.isFinite(t)) throw new ImportError(file, 0, `${where}: no time (neither ##$TIME MS nor a ##LONGDATE)`);
    const id = String(meta['BATCH'] ?? linkTitle ?? opts.batch ?? file.replace(/\.[^.]*$/, ''));
    const lab = labLabels(meta, file, where);
    let b = batches.get(id);
    if (!b) {
      b = { id, axis, times: [], spectra: [], properties: {}, propertyUnits: {}, source: { file, firstLine: 0, lastLine: 0 } };
      batches.set(id, b);
      order.push(id);
    } else if (b.axis.length !== axis.length || b.axis.some((x, i) => Math.abs(x - axis[i]!) > 1e-6 * Math.abs(x))) {
      throw new ImportError(file, 0, `${where}: its wavelength axis differs from the batch's first spectrum (mixed axes)`);
    }
    const prev = b.times[b.times.length - 1];
    if (prev !== undefined && !(t > prev)) throw new ImportError(file, 0, `${where}: time does not increase within batch ${id}`);
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
  const d = new Date(t);
  const p = (x: number, w = 2) => String(x).padStart(w, '0');
  return `${d.getUTCFullYear()}/${p(d.getUTCMonth() + 1)}/${p(d.getUTCDate())} ${p(d.getUTCHours())}:${p(d.getUTCMinutes())}:${p(d.getUTCSeconds())}.${p(d.getUTCMilliseconds(), 3)}`;
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
    if (batch.product) out.push(`##$PRODUCT=${batch.product}`);
    if (batch.unit) out.push(`##$UNIT=${batch.unit}`);
    for (const [name, values] of Object.entries(batch.properties ?? {})) {
      const v = values[k];
      if (v === undefined || Number.isNaN(v)) continue;
      out.push(`##$LAB ${name}=${v}`);
      const u = batch.propertyUnits?.[name];
      if (u) out.push(`##$LAB ${name} UNIT=${u}`);
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
