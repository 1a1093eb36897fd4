/**
 * Before a version is deployed to a unit: can it judge the unit's batches, and what does it change
 * against the version it replaces. A dryer model deployed onto the reactor (another product, a
 * 256-point axis on a 601-point analyzer) used to be accepted, after which no batch on the reactor
 * was judged; the checks here refuse it, naming both sides.
 *
 * - axis: the version's wavelength axis against the axis the unit's analyzer sends (the connected
 *   analyzer last serving the unit, else the unit's latest batch): count and range must match;
 * - product: the version's product against the product of the unit's latest batch;
 * - kind: the kind (dryer, reactor) of the units the version's reference batches ran on, against
 *   the unit's kind (units of kind "other" are not compared).
 * A unit that has never run a batch has no axis or product to compare yet: the monitor checks the
 * axis again at every batch start and raises a "model does not fit the analyzer" alarm.
 */
import type { DeployMismatch, DeployPreview, ModelRef } from '../../core/api/rest.ts';
import { compareDeployment, type ComparableModel } from '../../core/model/deploy-comparison.ts';
import type { ServerContext } from '../context.ts';
import type { ModelVersionRow } from '../storage/storage.ts';

const fmt = (v: number) => Number(v.toPrecision(5)).toString();
const axisText = (a: ArrayLike<number>) => (a.length ? `${a.length} points, ${fmt(a[0]!)}–${fmt(a[a.length - 1]!)} nm` : 'no points');

function sameAxis(a: ArrayLike<number>, b: ArrayLike<number>): boolean {
  if (a.length !== b.length) return false;
  for (let i = 0; i < a.length; i++) if (Math.abs(a[i]! - b[i]!) > 1e-6 * Math.max(1, Math.abs(a[i]!))) return false;
  return true;
}

export function refOf(m: ModelVersionRow): ModelRef {
  return { versionId: m.id, name: m.name, version: m.version, sha256: m.sha256 };
}

/** Why `m` cannot judge `unit`'s batches; empty when it can. */
export async function deployMismatches(ctx: ServerContext, unit: string, m: ModelVersionRow, model: ComparableModel): Promise<DeployMismatch[]> {
  const out: DeployMismatch[] = [];
  const u = ctx.ingest.units.get(unit);
  const label = `${m.name} v${m.version}`;
  const latest = (await ctx.storage.listBatches({ unit, limit: 1, offset: 0 })).items[0] ?? null;
  const live = ctx.ingest.unitAnalyzerAxis(unit);
  const sends = live ?? (latest ? { analyzer: latest.analyzer, axis: latest.axis } : null);
  const want = model.chain.inputAxis;
  if (sends && !sameAxis(want, sends.axis)) {
    out.push({ what: 'axis', text: `${label} expects ${axisText(want)}; ${unit}'s analyzer ${sends.analyzer} sends ${axisText(sends.axis)}` });
  }
  if (latest && latest.product !== m.product) {
    out.push({ what: 'product', text: `${label} is built for product "${m.product}"; ${unit} last ran product "${latest.product}" (batch ${latest.id})` });
  }
  if (u && u.kind !== 'other') {
    const kinds = new Map<string, string[]>();
    for (const id of m.referenceBatches) {
      const b = await ctx.storage.getBatch(id);
      const ru = b ? ctx.ingest.units.get(b.unit) : undefined;
      if (!ru || ru.kind === 'other') continue;
      kinds.set(ru.kind, [...(kinds.get(ru.kind) ?? []), ru.id]);
    }
    if (kinds.size > 0 && !kinds.has(u.kind)) {
      const theirs = [...kinds.entries()].map(([k, units]) => `${k} (${[...new Set(units)].join(', ')})`).join(', ');
      out.push({ what: 'kind', text: `${label} was built from batches of a ${theirs}; ${unit} is a ${u.kind}` });
    }
  }
  return out;
}

/** Whether `m` fits `unit`, and what it changes against the version deployed there now. */
export async function deployPreview(ctx: ServerContext, unit: string, m: ModelVersionRow): Promise<DeployPreview> {
  const model = (await ctx.ingest.loadModel(m.id)) as unknown as ComparableModel | null;
  if (!model) throw new Error(`model version ${m.id} cannot be read`);
  const curRef = ctx.ingest.deploymentRef(unit);
  const curModel = curRef ? ((await ctx.ingest.loadModel(curRef.versionId)) as unknown as ComparableModel | null) : null;
  const comparison = compareDeployment(curRef && curModel ? { ref: curRef, model: curModel } : null, { ref: refOf(m), model });
  return { unit, model: refOf(m), mismatches: await deployMismatches(ctx, unit, m, model), comparison, needsEndpointLossConfirmation: comparison.dropsEndpointProperty };
}
