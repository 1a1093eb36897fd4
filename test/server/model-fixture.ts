/** A small real monitoring model for server tests, built by core from simulated reference batches. */
import { randomUUID } from 'node:crypto';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { buildMonitoringModel, serializeMonitoringModel, type MonitoringModel } from '../../core/model/monitoring-model.ts';
import type { Storage } from '../../server/storage/storage.ts';

export function buildSmallDryerModel(seed = 11): { model: MonitoringModel; text: string; axis: number[] } {
  const refs = simulateReferenceSet('dryer', 4, seed, { intervalS: 60 });
  const model = buildMonitoringModel(
    refs.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })),
    { name: 'dryer-test', product: 'granule A', author: 'test', createdAt: 0, components: 3, property: { name: 'moisture', unit: '% w/w', components: 3, target: 2, direction: 'below' } },
  );
  return { model, text: serializeMonitoringModel(model), axis: refs[0]!.axis };
}

/** Store, approve and deploy a model version to a unit, straight through the storage interface. */
export async function installModel(storage: Storage, text: string, model: MonitoringModel, unit: string): Promise<string> {
  const id = randomUUID();
  await storage.insertModelVersion({
    id, name: model.settings.name, version: await storage.nextModelVersion(model.settings.name), product: model.settings.product, sha256: model.sha256,
    body: text, settings: model.settings as unknown as Record<string, unknown>, referenceBatches: model.meta.batches.map((b) => b.id),
    components: model.pca.nComponents, confidence: model.settings.confidence, status: 'draft', createdAt: 0, createdBy: 'test',
    approvedAt: null, approvedBy: null, approvalReason: null, retiredAt: null, retiredBy: null, retireReason: null,
  });
  await storage.approveModelVersion(id, 'test', 1, 'test fixture');
  await storage.deploy({ id: randomUUID(), unit, modelVersion: id, deployedAt: 2, deployedBy: 'test', reason: null, endedAt: null });
  return id;
}
