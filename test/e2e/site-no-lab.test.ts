/**
 * End to end, through the public paths only: the reference batches of the site-style set
 * (simulators/site-set.ts) with their lab moisture column removed, imported with the command line.
 * A rule that needs end regions (moving-block SD with an automatic threshold) must not be fitted on
 * the batches' last spectra, where the operators stopped: the build is refused, naming every batch
 * and asking for marked endpoints. With endpoints marked by the model owner (read off the lab
 * sheet), it builds, and the version shows each mark as the batch's endpoint.
 * (scripts/site-check.ts does the walking; this file asserts.)
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { prepareSiteSet, runNoLabCheck, type PreparedSiteSet } from '../../scripts/site-check.ts';

const dir = mkdtempSync(join(tmpdir(), 'tideline-site-no-lab-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const log = (l: string) => console.log(`  [site e2e, no lab] ${l}`);

let prepared: PreparedSiteSet;
beforeAll(() => {
  // The 16 reference batches of the end-to-end set (same seed); no test batches are needed here.
  prepared = prepareSiteSet(dir, { seed: 14, reference: 16, good: 0, perFault: 0 });
});

describe("a site's dryer batches without lab values, through the public paths", () => {
  it('without the lab column the build asks for marked endpoints, naming the batches; with marks it builds', async () => {
    const r = await runNoLabCheck({ dir, prepared, log });
    const set = prepared.set;
    console.log(`site e2e without lab values: refused ${r.refused.status}, marked build ${r.built.status}; stages ${JSON.stringify(r.timings)}`);
    expect(r.refused.status).toBe(422);
    const detail = String(r.refused.body?.detail ?? '');
    for (const sb of set.reference) expect(detail, `the refusal names ${sb.batch.id}`).toContain(sb.batch.id);
    expect(detail).toMatch(/mark/i);
    expect(r.built.status, JSON.stringify(r.built.body)).toBe(201);
    const eps = r.detail!.referenceEndpoints as { batch: string; elapsedMin: number; source: string }[];
    expect(eps).toHaveLength(set.reference.length);
    for (const m of r.marks) {
      const e = eps.find((x) => x.batch === m.batch)!;
      if (m.last) expect(e.source).toBe('marked-last');
      else {
        expect(e.source).toBe('marked');
        // The mark lands on a spectrum within one scan interval (15 s, ±0.4 s jitter) of it.
        expect(Math.abs(e.elapsedMin - m.elapsedMin)).toBeLessThanOrEqual(15.8 / 60);
      }
    }
    // The leave-one-batch-out check at build judges the rule against those marks, never the last spectra.
    const rows = r.detail!.endpointCheck?.rows as { batch: string; knownSource: string }[];
    expect(rows.map((x) => x.batch).sort()).toEqual(set.reference.map((sb) => sb.batch.id).sort());
    for (const row of rows) expect(['marked', 'marked-last']).toContain(row.knownSource);
  }, 10 * 60_000);
});
