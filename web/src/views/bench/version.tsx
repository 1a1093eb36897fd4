/** Model bench version page: facts, the calibration transfer it carries, the endpoint rule and its check, the property model, diagnostics, evaluation, approval, deployment. */
import type { Me } from '../../api/session.ts';
import { api } from '../../api/endpoints.ts';
import { useAsync } from '../../components/use-async.ts';
import { ErrorBox, Loading } from '../../components/status.tsx';
import { confidence, dateTime, limitName, sig } from '../../format/number-format.ts';
import { useEnvelope } from '../use-envelope.ts';
import { Approve } from './approve.tsx';
import { Calibration } from './calibration.tsx';
import { Deploy } from './deploy.tsx';
import { EndpointCheckPanel } from './endpoint-check.tsx';
import { EndpointRulePanel } from './endpoint-rule-view.tsx';
import { EnvelopePreview } from './envelope-preview.tsx';
import { Evaluation } from './evaluation.tsx';
import { ExplainedChart } from './explained.tsx';
import { StatusBadge } from './model-list.tsx';
import { PropertyEvidencePanel } from './property-evidence.tsx';
import { TransferPanel } from './transfer-panel.tsx';
import { ModelHealthPanel } from './health.tsx';
import { ShadowPanel } from './shadow.tsx';
import { limitMethodName, plainText } from '../../../../core/vocabulary/plain-names.ts';

export function VersionDetail({ version, me }: { version: string; me: Me | null }) {
  const detail = useAsync(() => api.modelVersion(version), [version]);
  const { env, withReferences: envWithRefs } = useEnvelope(version);
  const d = detail.data;
  if (detail.loading && !d) return <Loading what="model version" />;
  if (detail.error) return <ErrorBox message={detail.error} onRetry={detail.reload} />;
  if (!d) return null;
  return (
    <div class="version" data-testid="version-detail">
      <div class="panel">
        <div class="panel-head">
          <h2>
            {d.name} v{d.version} <StatusBadge status={d.status} />
          </h2>
          <span class="muted small mono" title="content hash (SHA-256)">
            {d.sha256.slice(0, 16)}…
          </span>
        </div>
        <dl class="facts inline">
          <dt>Product</dt>
          <dd>{d.product}</dd>
          <dt>Built</dt>
          <dd>
            {dateTime(d.createdAt)} by {d.createdBy}
          </dd>
          <dt>Reference batches</dt>
          <dd>{d.referenceBatches.join(', ')}</dd>
          <dt>Components</dt>
          <dd>{d.components}</dd>
          <dt>Limits</dt>
          <dd>
            {limitName('T²', d.limits.confidence)} = {sig(d.limits.t2)} ({limitMethodName(d.limits.t2Method)}); {limitName('Q', d.limits.confidence)} = {sig(d.limits.q)} ({limitMethodName(d.limits.qMethod)})
          </dd>
          {d.alarmLimits && (
            <>
              <dt>Alarm limits</dt>
              <dd data-testid="alarm-limits">
                {limitName('T²', d.alarmLimits.confidence, 'alarm limit')} = {sig(d.alarmLimits.t2)}; {limitName('Q', d.alarmLimits.confidence, 'alarm limit')} = {sig(d.alarmLimits.q)}; envelope alarm at ±{sig(d.alarmLimits.envelopeK)} sd — {plainText(d.alarmLimits.envelopeKMethod)}. The charts draw the {confidence(d.limits.confidence)} limits; alarms are raised at these.
              </dd>
            </>
          )}
          {d.approvedAt && (
            <>
              <dt>Approved</dt>
              <dd>
                {dateTime(d.approvedAt)} by {d.approvedBy}: “{d.approvalReason}”
              </dd>
            </>
          )}
          {(d.signatures ?? []).length > 0 && (
            <>
              <dt>Signatures</dt>
              <dd data-testid="signatures">
                <ul class="plain">
                  {d.signatures!.map((s) => (
                    <li key={s.auditSeq}>
                      {s.meaning} by {s.signerFullName} ({s.signer}, {s.signerRole}) {dateTime(s.signedAt)}: “{s.reason}”
                      {s.override && <span data-testid="signed-override"> — {s.meaning === 'deployed' ? 'reason for dropping the endpoint property, signed with it' : 'override signed with it'}: “{s.override}”</span>}
                    </li>
                  ))}
                </ul>
              </dd>
            </>
          )}
          {d.deployedTo.length > 0 && (
            <>
              <dt>Deployed to</dt>
              <dd>{d.deployedTo.join(', ')}</dd>
            </>
          )}
        </dl>
      </div>
      {d.notes.length > 0 && (
        <div class="panel" data-testid="build-notes">
          <h3>What the build decided on its own</h3>
          <ul>
            {d.notes.map((n) => (
              <li key={n}>{plainText(n)}</li>
            ))}
          </ul>
        </div>
      )}
      <TransferPanel t={d.transfer} />
      <EndpointRulePanel rule={d.endpoint} />
      <EndpointCheckPanel check={d.endpointCheck} ends={d.referenceEndpoints} />
      <PropertyEvidencePanel p={d.property} />
      <div class="two-col">
        <ExplainedChart d={d} />
        <Calibration d={d} />
      </div>
      <EnvelopePreview env={envWithRefs} error={env.error} />
      <Evaluation d={d} onDone={detail.reload} />
      <div class="two-col">
        <Approve d={d} me={me} onDone={detail.reload} />
        <Deploy d={d} onDone={detail.reload} />
      </div>
      <ShadowPanel d={d} onDone={detail.reload} />
      {d.status !== 'draft' && <ModelHealthPanel versionId={d.versionId} reloadKey={d.deployedTo.join(',')} />}
    </div>
  );
}
