/**
 * Builder: the property model — which lab value the reference batches carry, its unit, the number of
 * latent variables (auto: the build's stated rule), its target and direction.
 */
import type { LabProperty } from './lab-data.ts';
import type { FieldKey, PropertyForm } from './form-data.ts';
import { FieldError } from './field-error.tsx';

export function PropertyFields({ value, onChange, known, knownNote, errors }: { value: PropertyForm; onChange: (p: PropertyForm) => void; known: LabProperty[]; knownNote: string; errors: Record<FieldKey, string> }) {
  const set = (p: Partial<PropertyForm>) => onChange({ ...value, ...p });
  return (
    <fieldset data-testid="property-fields">
      <legend>Property model (PLS on the lab values)</legend>
      <label class="block">
        <input type="checkbox" checked={value.on} onChange={(e) => set({ on: (e.target as HTMLInputElement).checked })} /> Predict a property from the spectra (needed for an endpoint on the
        property, e.g. moisture ≤ 2 % w/w)
      </label>
      <FieldError text={errors.property} />
      {value.on && (
        <>
          <div class="form-row">
            <label>
              Property{' '}
              {known.length > 0 ? (
                <select
                  value={value.name}
                  onChange={(e) => {
                    const name = (e.target as HTMLSelectElement).value;
                    const k = known.find((x) => x.property === name);
                    set({ name, unit: k?.unit ?? value.unit });
                  }}
                >
                  <option value="">choose…</option>
                  {known.map((k) => (
                    <option key={k.property} value={k.property}>
                      {k.property} ({k.unit}) — {k.values} values on {k.batches} batch{k.batches === 1 ? '' : 'es'}
                    </option>
                  ))}
                </select>
              ) : (
                <input value={value.name} placeholder="e.g. moisture" onInput={(e) => set({ name: (e.target as HTMLInputElement).value })} />
              )}
            </label>
            <label>
              Unit <input size={8} value={value.unit} placeholder="% w/w" onInput={(e) => set({ unit: (e.target as HTMLInputElement).value })} />
            </label>
            <label>
              Latent variables{' '}
              <select value={value.lvs === 'auto' ? 'auto' : 'n'} onChange={(e) => set({ lvs: (e.target as HTMLSelectElement).value === 'auto' ? 'auto' : '3' })}>
                <option value="auto">auto (one-standard-error rule on batch-grouped CV)</option>
                <option value="n">a number</option>
              </select>
              {value.lvs !== 'auto' && <input size={3} aria-label="number of latent variables" value={value.lvs} onInput={(e) => set({ lvs: (e.target as HTMLInputElement).value })} />}
            </label>
          </div>
          <p class="muted small">{knownNote}</p>
          <FieldError text={errors['property.name']} />
          <FieldError text={errors['property.unit']} />
          <FieldError text={errors['property.lvs']} />
          <div class="form-row">
            <label>
              Target{' '}
              <select aria-label="target direction" value={value.direction} onChange={(e) => set({ direction: (e.target as HTMLSelectElement).value as PropertyForm['direction'] })}>
                <option value="below">at or below</option>
                <option value="above">at or above</option>
              </select>{' '}
              <input size={7} aria-label="target value" value={value.target} placeholder="2" onInput={(e) => set({ target: (e.target as HTMLInputElement).value })} /> {value.unit}
            </label>
          </div>
          <FieldError text={errors['property.target']} />
          <div class="form-row">
            <label title="The standard deviation of one lab result near the target (e.g. the repeatability sd of loss on drying from the method validation), not the repeatability limit r. RMSECV compares predictions with lab values and so carries this error; the automatic endpoint margin takes it out (never below one standard error of RMSECV²).">
              Lab method sd{' '}
              <input size={7} aria-label="lab method sd" value={value.labSd ?? ''} placeholder="not stated" onInput={(e) => set({ labSd: (e.target as HTMLInputElement).value })} /> {value.unit}
            </label>
          </div>
          <p class="muted small">Optional. Without it the automatic margin takes the whole RMSECV, lab error included, and calls the endpoint later than the prediction error alone needs.</p>
          <FieldError text={errors['property.labSd']} />
          <p class="muted small">
            Each reference batch's endpoint is where its lab values cross this target (between the two lab values around the crossing), unless you mark it below.
          </p>
        </>
      )}
    </fieldset>
  );
}
