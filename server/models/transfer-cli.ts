/**
 * Command line: `tideline model transfer VERSION …` — the same transfer as
 * POST /api/models/versions/:version/transfer (server/models/transfer-service.ts), on the database
 * directly (server stopped or running: SQLite WAL allows both), with its audit record.
 */
import { userInfo } from 'node:os';
import type { TransferModelRequest } from '../../core/api/rest.ts';
import { parseMonitoringModel } from '../../core/model/monitoring-model.ts';
import { ChainedAuditTrail } from '../audit/audit-trail.ts';
import { ConfigError } from '../config.ts';
import type { Storage } from '../storage/storage.ts';
import { HttpProblem } from '../api/problem.ts';
import { transferBlockingWarning } from '../../core/calibration-transfer/transfer-model.ts';
import { transferAuditAfter, transferVersion } from './transfer-service.ts';

export const MODEL_USAGE = `usage:
  model transfer VERSION --method ds|pds [--window W] --fit OLD=NEW[,OLD=NEW…] --held-out OLD=NEW[,…] [--rcond X] [--max-rank N] [--by NAME]
    VERSION: a version id, or NAME@N. OLD=NEW: a transfer set, the batch of the old analyzer and the batch of the new one
    (the same samples, row for row, imported like batches). Stores a new draft version carrying the transform.`;

function pairs(text: string | undefined, flag: string): { old: string; new: string }[] {
  if (!text) throw new ConfigError(`--${flag} is required\n${MODEL_USAGE}`);
  return text.split(',').map((p) => {
    const [o, n, extra] = p.split('=');
    if (!o || !n || extra !== undefined) throw new ConfigError(`--${flag}: "${p}" is not OLD=NEW (two batch ids joined by =)`);
    return { old: o.trim(), new: n.trim() };
  });
}

function num(v: string | undefined, flag: string, int: boolean): number | undefined {
  if (v === undefined) return undefined;
  const x = Number(v);
  if (!Number.isFinite(x) || (int && !Number.isInteger(x))) throw new ConfigError(`--${flag} must be ${int ? 'a whole number' : 'a number'}, not "${v}"`);
  return x;
}

const pct = (v: number) => `${Number((v * 100).toPrecision(3))} %`;

/** Exit code: 0 stored; 3 refused (nothing stored). Usage errors throw ConfigError (exit 2). */
export async function runModelCli(positional: string[], flags: Record<string, string>, storage: Storage, out: (s: string) => void): Promise<number> {
  const [verb, ref] = positional;
  if (verb !== 'transfer' || !ref) throw new ConfigError(MODEL_USAGE);
  const method = flags.method;
  if (method !== 'ds' && method !== 'pds') throw new ConfigError(`--method must be ds or pds\n${MODEL_USAGE}`);
  const req: TransferModelRequest = { method, fit: pairs(flags.fit, 'fit'), heldOut: pairs(flags['held-out'], 'held-out') };
  const window = num(flags.window, 'window', true);
  const rcond = num(flags.rcond, 'rcond', false);
  const maxRank = num(flags['max-rank'], 'max-rank', true);
  if (window !== undefined) req.window = window;
  if (rcond !== undefined) req.rcond = rcond;
  if (maxRank !== undefined) req.maxRank = maxRank;
  let src = await storage.getModelVersion(ref);
  if (!src && ref.includes('@')) {
    const [name, v] = ref.split('@');
    src = (await storage.listModelVersions()).find((m) => m.name === name && String(m.version) === v) ?? null;
  }
  if (!src) throw new ConfigError(`model version "${ref}" does not exist (give its id or NAME@N)`);
  let by = flags.by;
  if (!by) {
    try {
      by = `cli:${userInfo().username}`;
    } catch {
      by = 'cli:unknown';
    }
  }
  try {
    const row = await transferVersion(storage, src, req, by, Date.now());
    await new ChainedAuditTrail(storage).record({ user: by, action: 'model.transfer', object: `model:${row.name}@${row.version}`, before: undefined, after: transferAuditAfter(row, src, req), reason: null });
    const j = parseMonitoringModel(row.body).transfer!.judgement;
    out(`${row.name} v${row.version} (${row.id}, draft) carries a ${method.toUpperCase()} transfer from v${src.version}; sha256 ${row.sha256}\n`);
    out(`held-out transfer samples: ${j.spectra}; beyond the T² or Q limit: old analyzer ${j.old.beyond} (${pct(j.old.rate)}), new without transfer ${j.before.beyond} (${pct(j.before.rate)}), new with transfer ${j.after.beyond} (${pct(j.after.rate)})\n`);
    if (j.property) out(`${j.property.name}: RMS difference from the old analyzer's prediction ${j.property.vsOld.before.toPrecision(3)} → ${j.property.vsOld.after.toPrecision(3)} ${j.property.unit}${j.property.vsLab ? `; from ${j.property.vsLab.n} lab values ${j.property.vsLab.before.toPrecision(3)} → ${j.property.vsLab.after.toPrecision(3)} (old analyzer ${j.property.vsLab.old.toPrecision(3)})` : ''}\n`);
    const w = transferBlockingWarning(parseMonitoringModel(row.body).transfer);
    if (w) out(`warning: ${w.text} Approval needs evidenceOverride.\n`);
    return 0;
  } catch (e) {
    if (e instanceof HttpProblem) {
      out(`transfer refused, nothing was stored: ${e.message}\n`);
      return 3;
    }
    throw e;
  }
}
