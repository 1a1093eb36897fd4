/**
 * Lab results on the command line (called from server/cli.ts), on the database directly like
 * `import` (a running server sees the values at once: SQLite WAL):
 *
 *   lab add BATCH --property moisture --value 1.9 --unit "% w/w" --at 2026-03-02T09:12:00Z
 *               [--method LOD] [--supersedes ID --reason TEXT] [--by NAME]
 *               (--elapsed-min M instead of --at: minutes after the batch start)
 *   lab import FILE.csv [--by NAME] [--delimiter , | ; | tab] [--decimal . | ,]
 *   lab list BATCH
 *
 * Each value is matched to the batch's spectrum nearest its sample time (within
 * lab.matchToleranceMs), never overwrites one already there, and is written with its audit record
 * (user `cli:<operating-system user>`, or --by) in one transaction; a file is stored whole or not at
 * all, a refusal naming its file and line.
 */
import { readFileSync } from 'node:fs';
import { basename } from 'node:path';
import { userInfo } from 'node:os';
import { ImportError } from '../../core/io/imported-batch.ts';
import { readLabResultsCsv } from '../../core/lab/lab-file.ts';
import { labPropertySummary, labValueViews } from '../../core/lab/lab-values.ts';
import { ChainedAuditTrail } from '../audit/audit-trail.ts';
import { ConfigError, type ServerConfig } from '../config.ts';
import type { SqliteStorage } from '../storage/sqlite-storage.ts';
import { attachLabValues, LabEntryError, type LabEntry } from './lab-entry.ts';

export const LAB_USAGE = `usage:
  lab add BATCH --property NAME --value X --unit U (--at TIME | --elapsed-min M) [--method M] [--supersedes ID --reason TEXT] [--by NAME]
  lab import FILE.csv [--by NAME] [--delimiter , | ; | tab] [--decimal . | ,]
  lab list BATCH`;

function cliUser(by: string | undefined): string {
  if (by) return by;
  try {
    return `cli:${userInfo().username}`;
  } catch {
    return 'cli:unknown';
  }
}

const fmtTime = (t: number) => new Date(t).toISOString();

/** Returns the exit code: 0 stored, 3 refused (nothing stored); usage errors throw ConfigError (exit 2). */
export async function runLabCli(positional: string[], flags: Record<string, string>, storage: SqliteStorage, config: ServerConfig, out: (s: string) => void): Promise<number> {
  const [verb, arg] = positional;
  const now = Date.now();
  const opts = { toleranceMs: config.lab.matchToleranceMs, user: cliUser(flags.by), now, audit: new ChainedAuditTrail(storage) };
  if (verb === 'list') {
    if (!arg) throw new ConfigError(LAB_USAGE);
    const b = await storage.getBatch(arg);
    if (!b) throw new ConfigError(`batch "${arg}" does not exist`);
    const rows = await storage.listLabValues(arg);
    const views = labValueViews(rows, await storage.spectrumTimes(arg), b.startT);
    if (views.length === 0) out(`${arg}: no lab values\n`);
    for (const v of views) {
      out(
        `${v.id}  ${v.property} ${v.value}${v.unit ? ` ${v.unit}` : ''}  sampled ${fmtTime(v.sampleT)} (${v.elapsedMin.toFixed(1)} min)  spectrum ${v.spectrumIdx}` +
          `  ${v.source}${v.method ? ` ${v.method}` : ''} by ${v.enteredBy}${v.supersedes ? `  corrects ${v.supersedes}: ${v.reason}` : ''}${v.effective ? '' : `  (superseded by ${v.supersededBy})`}\n`,
      );
    }
    for (const p of labPropertySummary(rows)) out(`${p.name}${p.unit ? ` [${p.unit}]` : ''}: ${p.values} value(s) in force\n`);
    return 0;
  }
  let entries: LabEntry[];
  let action: string;
  let via: string;
  if (verb === 'add') {
    if (!arg || flags.property === undefined || flags.value === undefined || flags.unit === undefined) throw new ConfigError(LAB_USAGE);
    if ((flags.at === undefined) === (flags['elapsed-min'] === undefined)) throw new ConfigError('lab add: give the sample time once, --at TIME (ISO 8601 with its zone, or ms since the epoch) or --elapsed-min M');
    const value = Number(flags.value);
    if (flags.value.trim() === '' || !Number.isFinite(value)) throw new ConfigError(`lab add: --value "${flags.value}" is not a number`);
    let elapsedMin: number | undefined;
    if (flags['elapsed-min'] !== undefined) {
      elapsedMin = Number(flags['elapsed-min']);
      if (flags['elapsed-min'].trim() === '' || !Number.isFinite(elapsedMin)) throw new ConfigError(`lab add: --elapsed-min "${flags['elapsed-min']}" is not a number of minutes`);
    }
    if (flags.supersedes !== undefined && !flags.reason) throw new ConfigError('lab add: a correction (--supersedes) needs --reason');
    entries = [{ batch: arg, property: flags.property, value, unit: flags.unit, ...(flags.at !== undefined ? { sampleT: flags.at } : { elapsedMin }), method: flags.method ?? null, supersedes: flags.supersedes ?? null, reason: flags.reason ?? null, where: 'lab add' }];
    action = 'lab-value.add';
    via = 'cli';
  } else if (verb === 'import') {
    if (!arg) throw new ConfigError(LAB_USAGE);
    const delimiter = flags.delimiter === 'tab' ? '\t' : flags.delimiter;
    if (delimiter !== undefined && ![',', ';', '\t'].includes(delimiter)) throw new ConfigError(`--delimiter must be , ; or tab, not "${flags.delimiter}"`);
    if (flags.decimal !== undefined && !['.', ','].includes(flags.decimal)) throw new ConfigError(`--decimal must be . or , not "${flags.decimal}"`);
    const name = basename(arg);
    let text: string;
    try {
      text = readFileSync(arg, 'utf8');
    } catch (e) {
      out(`lab import refused, nothing was stored: ${name}: ${(e as NodeJS.ErrnoException).code === 'ENOENT' ? 'no such file' : (e as Error).message}\n`);
      return 3;
    }
    try {
      const file = readLabResultsCsv(text, { file: name, delimiter: delimiter as ',' | ';' | '\t' | undefined, decimal: flags.decimal as '.' | ',' | undefined });
      for (const w of file.warnings) out(`warning: ${w}\n`);
      entries = file.entries.map((e) => ({ ...e, where: `${name}, line ${e.line}` }));
    } catch (e) {
      if (e instanceof ImportError) {
        out(`lab import refused, nothing was stored: ${e.message}\n`);
        return 3;
      }
      throw e;
    }
    action = 'lab-value.import';
    via = name;
  } else throw new ConfigError(LAB_USAGE);

  try {
    const stored = await attachLabValues(storage, entries, { ...opts, action, via });
    for (const v of stored) {
      out(
        `${v.batch}: ${v.property} ${v.value}${v.unit ? ` ${v.unit}` : ''} sampled ${fmtTime(v.sampleT)} → spectrum ${v.spectrumIdx} at ${fmtTime(v.spectrumT)} ` +
          `(${(v.spectrumDtMs / 1000).toFixed(1)} s apart)${v.supersedes ? `, corrects ${v.supersedes}` : ''}; id ${v.id}\n`,
      );
    }
    const batches = new Set(stored.map((v) => v.batch));
    out(`${stored.length} lab value(s) stored on ${batches.size} batch(es) by ${opts.user}\n`);
    return 0;
  } catch (e) {
    if (e instanceof LabEntryError) {
      out(`${verb === 'import' ? 'lab import refused, nothing was stored' : 'lab value refused'}: ${e.message}\n`);
      return 3;
    }
    throw e;
  }
}
