import { describe, expect, it } from 'vitest';
import type { EndpointCheckRowView } from '../../core/api/rest.ts';
import { batchesNamed } from '../../web/src/views/bench/reference-batches.tsx';
import { summariseLab } from '../../web/src/views/bench/lab-data.ts';
import { offsetText, orderCheckRows } from '../../web/src/views/bench/endpoint-check.tsx';
import { NEW_CRITERION, fieldOfBuildError, parseNumber, settingsFromForm, type PropertyForm, type RuleForm } from '../../web/src/views/bench/form-data.ts';

const prop: PropertyForm = { on: true, name: 'Moisture', unit: '% w/w', lvs: 'auto', target: '2', direction: 'below' };
const rule: RuleForm = { criteria: [NEW_CRITERION.property(), NEW_CRITERION.mbsd()], combine: 'all', confirm: '2', nearingMin: '10', minElapsed: 'auto' };

describe('Model bench form: property model and endpoint rule into build settings', () => {
  it('turns a filled form into the settings the build takes', () => {
    const r = settingsFromForm(prop, { ...rule, criteria: [{ kind: 'property', margin: 'auto', marginConfidence: '70' }, { kind: 'mbsd', block: '5', threshold: '0,002' }] }, { qMethod: 'box' }, 'auto');
    expect(r.errors).toEqual({});
    expect(r.settings).toEqual({
      qMethod: 'box',
      property: { name: 'moisture', unit: '% w/w', components: 'auto', target: 2, direction: 'below' },
      endpoint: { criteria: [{ kind: 'property', margin: 'auto', marginConfidence: 0.7 }, { kind: 'mbsd', block: 5, threshold: 0.002 }], combine: 'all', confirm: 2, nearingMin: 10, minElapsedMin: 'auto' },
    });
    const fixed = settingsFromForm({ ...prop, lvs: '3' }, { ...rule, criteria: [{ kind: 'property', margin: '0.05', marginConfidence: '' }] }, { qMethod: 'jackson-mudholkar' }, 4);
    expect(fixed.settings.property).toMatchObject({ components: 3 });
    expect((fixed.settings.endpoint as { criteria: unknown[] }).criteria).toEqual([{ kind: 'property', margin: 0.05 }]);
    const none = settingsFromForm(prop, { ...rule, criteria: [{ kind: 'property', margin: 'none', marginConfidence: '' }] }, { qMethod: 'jackson-mudholkar' }, 4);
    expect((none.settings.endpoint as { criteria: unknown[] }).criteria).toEqual([{ kind: 'property' }]);
  });
  it("carries the lab method's sd (decimal comma accepted) and refuses one that is not a number ≥ 0", () => {
    expect(settingsFromForm({ ...prop, labSd: '0,12' }, rule, { qMethod: 'box' }, 'auto').settings.property).toMatchObject({ labSd: 0.12 });
    expect(settingsFromForm({ ...prop, labSd: ' ' }, rule, { qMethod: 'box' }, 'auto').settings.property).not.toHaveProperty('labSd');
    expect(settingsFromForm({ ...prop, labSd: '-0.1' }, rule, { qMethod: 'box' }, 'auto').errors['property.labSd']).toBe('The lab sd "-0.1" must be a number ≥ 0 in % w/w, or left empty.');
  });
  it('says in a sentence beside each field what to fix', () => {
    const r = settingsFromForm(
      { ...prop, name: ' ', unit: '', lvs: '0', target: '' },
      { criteria: [NEW_CRITERION.property(), { kind: 'mbsd', block: '1', threshold: '-3' }, { kind: 'plateau', pc: '5', window: '2', tolerance: 'x' }, NEW_CRITERION.mbsd()], combine: 'any', confirm: '0', nearingMin: 'soon', minElapsed: '-5' },
      { qMethod: 'jackson-mudholkar' },
      3,
    );
    expect(r.errors).toEqual({
      'property.name': 'Choose the property the model predicts (a lab value the reference batches carry).',
      'property.unit': 'Give the unit of the property as the lab reports it, e.g. % w/w.',
      'property.lvs': 'Latent variables: a whole number from 1 to 30, or auto.',
      'property.target': 'The endpoint rule watches the predicted property: give its target, e.g. 2.',
      'endpoint.criteria.1.block': 'Block: a whole number of spectra from 2 to 50.',
      'endpoint.criteria.1.threshold': 'The threshold "-3" must be a number above 0, or auto.',
      'endpoint.criteria.2.pc': 'The model has 3 components: choose a PC from 1 to 3.',
      'endpoint.criteria.2.window': 'Window: a whole number of spectra from 3 to 200.',
      'endpoint.criteria.2.tolerance': 'The tolerance "x" must be a number above 0 (score per minute), or auto.',
      'endpoint.criteria.3.kind': '"moving-block SD of the spectra below a threshold" is already a criterion.',
      'endpoint.confirm': 'Confirm over: a whole number of consecutive spectra from 1 to 100.',
      'endpoint.nearingMin': '"Nearing" from: minutes before the estimated endpoint, a number ≥ 0.',
      'endpoint.minElapsedMin': 'The minimum time "-5" must be minutes ≥ 0, or auto.',
    });
    expect((settingsFromForm(prop, { ...rule, minElapsed: '35,5' }, { qMethod: 'box' }, 'auto').settings.endpoint as { minElapsedMin: number }).minElapsedMin).toBe(35.5);
    expect(settingsFromForm(prop, { ...rule, minElapsed: 'none' }, { qMethod: 'box' }, 'auto').settings.endpoint).not.toHaveProperty('minElapsedMin');
    expect(settingsFromForm({ ...prop, on: false }, rule, { qMethod: 'box' }, 'auto').errors).toEqual({
      'endpoint.criteria': 'The criterion "predicted property past its target" needs a property model: turn it on above, or remove the criterion.',
    });
    expect(parseNumber('1e-3')).toBe(0.001);
    expect(parseNumber('2 %')).toBeNull();
  });
  it("places the server's refusal beside the field it concerns", () => {
    const msg = (t: string) => `Cannot process: the model could not be built: ${t}`;
    expect(fieldOfBuildError(msg('build settings: endpoint.criteria.1.threshold: Too small'), rule)).toEqual({ field: 'endpoint.criteria.1', text: 'Build settings: endpoint.criteria.1.threshold: Too small' });
    expect(fieldOfBuildError(msg('property model: only 7 lab values of moisture on the reference batches; at least 10 are needed'), rule).field).toBe('property');
    const missing = fieldOfBuildError(msg(`the endpoint rule calibrates the minimum time 'auto' on the reference batches' known endpoints, and 1 reference batch has none: "b1" (no property target to read lab values against). Give their endpoints — lab values crossing a property target (settings.property with a target, and lab values on the batches), or marks in settings.referenceEndpoints ({ "batch": …, "index": spectrum } or { "batch": …, "elapsedMin": minutes }; { "batch": …, "last": true } only if the last spectrum really is the endpoint) — or leave these batches out`), rule);
    expect(missing.field).toBe('referenceEndpoints');
    expect(missing.text).toBe('The endpoint rule calibrates the minimum time \'auto\' on the reference batches\' known endpoints, and 1 reference batch has none: "b1" (no property target to read lab values against). Give their endpoints — lab values crossing a property target (turn on the property model above with a target; the batches need lab values), or an endpoint typed in the table for each (minutes from the start, a spectrum as #316, or last only if the batch really ended there) — or leave these batches out');
    expect(fieldOfBuildError(msg(`minimum time 'auto' needs the known endpoints of at least 2 reference batches besides "b1", which the leave-one-batch-out check of the rule leaves out; 2 of the 2 have one. Give the minimum time in minutes (or none), or choose at least 3 reference batches with a known endpoint`), rule).field).toBe('endpoint.minElapsedMin');
    expect(fieldOfBuildError(msg('moving-block SD criterion: no reference batch has 5 spectra up to a known endpoint'), rule).field).toBe('endpoint.criteria.1');
    expect(fieldOfBuildError(msg('endpoint criterion "property": margin "auto" needs the cross-validated error of the property model'), rule).field).toBe('endpoint.criteria.0');
    expect(fieldOfBuildError(msg('the endpoint rule calibrates the moving-block SD threshold on the reference batches\' known endpoints, and 2 reference batches have none: "b1" (no lab values), "b2" (no lab values). Give their endpoints'), rule).field).toBe('referenceEndpoints');
    expect(fieldOfBuildError(msg('referenceEndpoints: batch "b1" has 40 spectra; index 50 is beyond its last (39)'), rule).field).toBe('referenceEndpoints');
    expect(fieldOfBuildError('Conflict: another build is running', rule)).toEqual({ field: '', text: 'Conflict: another build is running' });
  });
});

describe('Model bench: reference endpoints, lab values and the endpoint check in words', () => {
  it('finds the reference batches a refusal names, among the chosen ones', () => {
    expect([...batchesNamed('2 reference batches have none: "b1" (no lab values), "b3" (no lab values); "x" is not chosen', ['b1', 'b2', 'b3'])]).toEqual(['b1', 'b3']);
    expect(batchesNamed(undefined, ['b1']).size).toBe(0);
  });
  it('sums the lab values of the chosen batches per property, leaving out superseded ones', () => {
    const b1 = { items: [{ property: 'moisture', unit: '% w/w' }, { property: 'moisture', unit: '% w/w' }, { property: 'moisture', unit: '% w/w', supersededBy: 'x' }] };
    const b2 = [{ property: 'moisture', unit: '% w/w' }, { property: 'psd', unit: 'µm' }];
    expect(summariseLab([b1, b2, { items: [] }])).toEqual([
      { property: 'moisture', unit: '% w/w', values: 3, batches: 2 },
      { property: 'psd', unit: 'µm', values: 1, batches: 1 },
    ]);
  });
  it('lists early batches first, most early first, and says by how much', () => {
    const row = (batch: string, verdict: EndpointCheckRowView['verdict'], intervals: number | null, minutes: number | null) => ({ batch, verdict, intervals, minutes }) as EndpointCheckRowView;
    const rows = [row('a', 'late', 2, 3), row('b', 'early', -1, -1.5), row('c', 'early', -4, -6), row('d', 'on time', 0, 0)];
    expect(orderCheckRows(rows).map((r) => r.batch)).toEqual(['c', 'b', 'a', 'd']);
    expect(offsetText(rows[2]!)).toBe('4 intervals (6.0 min) early');
    expect(offsetText(rows[1]!)).toBe('1 interval (1.5 min) early');
    expect(offsetText(rows[0]!)).toBe('2 intervals (3.0 min) late');
    expect(offsetText(rows[3]!)).toBe('at the known endpoint');
    expect(offsetText(row('e', 'not reached', null, null))).toBe('—');
    // no known endpoint: counted from the first spectrum after a lab value not yet past the target
    expect(offsetText({ ...row('f', 'early', -3, -1), knownIndex: null })).toBe('at least 3 intervals (1.0 min) early');
  });
});
