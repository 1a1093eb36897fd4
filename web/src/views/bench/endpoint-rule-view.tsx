/** Version page: the endpoint rule as resolved at build — every threshold and how it was obtained. */
import type { EndpointRuleView } from '../../../../core/api/rest.ts';
import { Advisory } from '../../components/status.tsx';
import { sig } from '../../format/number-format.ts';
import { CRITERION_LABEL } from './form-data.ts';
import { plainText } from '../../../../core/vocabulary/plain-names.ts';

export function EndpointRulePanel({ rule }: { rule: EndpointRuleView | null }) {
  return (
    <div class="panel" data-testid="endpoint-rule">
      <h3>Endpoint rule</h3>
      {!rule ? (
        <p class="muted">This server could not read the model's endpoint rule.</p>
      ) : (
        <>
          <p>
            Done when {rule.combine === 'all' ? 'every criterion holds' : 'any one criterion holds'} on {rule.confirm} consecutive spectr{rule.confirm === 1 ? 'um' : 'a'}; "nearing" from{' '}
            {sig(rule.nearingMin)} min before the estimated endpoint.
          </p>
          <p data-testid="min-elapsed">
            {rule.minElapsedMin > 0 ? (
              <>
                No "done" before {sig(rule.minElapsedMin)} min from the batch start — {rule.minElapsedMethod}.
              </>
            ) : (
              <>No minimum time before "done" ({rule.minElapsedMethod}).</>
            )}
          </p>
          {rule.hold && <RuleGuards rule={rule} />}
          <table class="criteria">
            <thead>
              <tr>
                <th scope="col">criterion</th>
                <th scope="col">rule</th>
                <th scope="col" class="num">threshold</th>
                <th scope="col">how the threshold was obtained</th>
              </tr>
            </thead>
            <tbody>
              {rule.criteria.map((c) => (
                <tr key={c.kind}>
                  <td>{CRITERION_LABEL[c.kind]}</td>
                  <td>{c.text}</td>
                  <td class="num">{sig(c.threshold, 4)}</td>
                  <td class="small">{plainText(c.method)}</td>
                </tr>
              ))}
            </tbody>
          </table>
        </>
      )}
      <Advisory text={rule?.caution} />
    </div>
  );
}

/** The run-time guards of the rule in words (state 'held'), with its hysteresis. */
function RuleGuards({ rule }: { rule: EndpointRuleView }) {
  const hold = rule.hold ?? { alarms: true, extrapolation: true };
  const guards = [
    rule.minElapsedMin > 0 ? 'the minimum time has not passed' : null,
    hold.alarms ? 'a confirmed T², Q or envelope alarm stands' : null,
    hold.extrapolation && rule.criteria.some((c) => c.kind === 'property') ? 'the property prediction is outside its calibration' : null,
  ].filter((g): g is string => g !== null);
  return (
    <p data-testid="rule-guards">
      {guards.length ? <>Held — not done — while {guards.join(', or while ')}.</> : <>No run-time guard holds this rule's "done".</>}
      {!hold.alarms && <> The alarm guard is switched off.</>}
      {!hold.extrapolation && <> The calibration guard is switched off.</>} States change against the trend only after {rule.hysteresis ?? 3} spectra in a row.
    </p>
  );
}
