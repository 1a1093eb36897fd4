/**
 * A model with a property model builds from a site's own files, through the public paths only:
 * site-shaped spectra files (simulators/site-set.ts: the site's axis rounded to 0.01 nm, elapsed
 * seconds, a moisture column filled on a few spectra per batch) imported with `tideline import
 * --origin`, then built through REST with a PLS model of moisture. The reference loader passes each
 * batch's lab values as a sparse per-spectrum property, so the version shows a property model
 * calibrated on exactly the imported lab values, and each reference batch's endpoint comes from its
 * lab values crossing the target — never from its last spectrum.
 */
import { readFileSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { importReferences, prepareSiteSet, Rest, setUpInstallation, siteBuildSettings, SITE_OWNER, SITE_PRODUCT, startServerProcess, type PreparedSiteSet, type ServerProcess } from '../../scripts/site-check.ts';

const dir = mkdtempSync(join(tmpdir(), 'tideline-labref-'));
let prepared: PreparedSiteSet;
let server: ServerProcess | null = null;
const dataDir = join(dir, 'data');
beforeAll(() => {
  prepared = prepareSiteSet(dir, { seed: 31, reference: 6, good: 0, perFault: 0 });
  mkdirSync(dataDir, { recursive: true });
});
afterAll(async () => {
  await server?.stop();
  rmSync(dir, { recursive: true, force: true });
});

describe('reference batches with lab values imported from site files', () => {
  it('build a property model and lab-crossing endpoints through REST', async () => {
    const set = prepared.set;
    await setUpInstallation(dataDir);
    const record = new Map(
      readFileSync(join(prepared.setDir, 'batch-record.csv'), 'utf8').trimEnd().split('\n').slice(1).map((l) => l.split(',')).map((c) => [c[0]!, { start: c[2]! }]),
    );
    const imports = await importReferences(dataDir, prepared.files.reference, record);
    for (const [k, r] of imports.entries()) {
      const sb = set.reference[k]!;
      expect(r.stdout).toContain(`imported ${sb.batch.id}: ${sb.batch.spectra.length} spectra, ${sb.lab.length} lab values from ${sb.batch.id}.csv`);
      expect(r.stdout).toContain(`lab property moisture [% w/w]: ${sb.lab.length} value(s) on 1 batch(es): ${sb.batch.id}`);
    }
    server = await startServerProcess(dataDir);
    const api = new Rest(server.url);
    await api.login(SITE_OWNER.name, SITE_OWNER.password);

    // The stored lab values: on the spectrum each result sits on in the file.
    const first = set.reference[0]!;
    const b = await api.ok(`/api/batches/${first.batch.id}`);
    expect(b.labValues.map((v: { spectrumIdx: number; value: number; source: string }) => [v.spectrumIdx, v.value, v.source])).toEqual(first.lab.map((l) => [l.spectrumIndex, l.value, 'import']));

    const ids = set.reference.map((sb) => sb.batch.id);
    const build = await api.post('/api/models/build', { name: 'fbd2-lab', product: SITE_PRODUCT, referenceBatches: ids, settings: siteBuildSettings() });
    expect(build.status, JSON.stringify(build.body)).toBe(201);
    const detail = await api.ok(`/api/models/versions/${encodeURIComponent(build.body.versionId)}`);

    // The property model is calibrated on the imported lab values in its range (0–4 % w/w), every batch contributing.
    const range = (siteBuildSettings().property as { range: [number, number] }).range;
    const inRange = set.reference.flatMap((sb) => sb.lab.filter((l) => l.value >= range[0] && l.value <= range[1]));
    expect(detail.property.name).toBe('moisture');
    expect(detail.property.unit).toBe('% w/w');
    expect(detail.property.nLabValues).toBe(inRange.length);
    expect(detail.property.batchesWithoutLab).toEqual([]);
    expect(detail.property.rmsecv.length).toBeGreaterThan(0);

    // Each batch's endpoint: where its lab values cross the 2 % w/w target, never its last spectrum.
    const eps = detail.referenceEndpoints as { batch: string; index: number; source: string }[];
    expect(eps.map((e) => e.batch).sort()).toEqual([...ids].sort());
    for (const sb of set.reference) {
      const e = eps.find((x) => x.batch === sb.batch.id)!;
      expect(e.source).toBe('lab');
      const below = sb.lab.filter((l) => l.value <= 2).map((l) => l.spectrumIndex);
      const above = sb.lab.filter((l) => l.value > 2).map((l) => l.spectrumIndex);
      // The crossing lies between the last lab value above the target and the first at or below it.
      expect(e.index).toBeGreaterThan(Math.max(...above.filter((i) => i < Math.min(...below))));
      expect(e.index).toBeLessThanOrEqual(Math.min(...below));
      expect(e.index).toBeLessThan(sb.batch.spectra.length - 1);
    }
    expect(detail.endpointCheck.rows).toHaveLength(ids.length);
  }, 15 * 60_000);
});
