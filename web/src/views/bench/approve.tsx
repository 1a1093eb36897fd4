/** Version page: approval with an electronic signature; an early-firing endpoint rule needs a signed override reason. */
import { useState } from 'preact/hooks';
import type { ModelVersionDetail } from '../../../../core/api/rest.ts';
import { api } from '../../api/endpoints.ts';
import { ApiError, errorText } from '../../api/problem.ts';
import type { Me } from '../../api/session.ts';
import { Badge, ErrorBox } from '../../components/status.tsx';
import { fixed } from '../../format/number-format.ts';
import { StatusBadge } from './model-list.tsx';
import { FieldError } from './field-error.tsx';
import { ApprovalEvidence, loadEvidence } from './approval-evidence.tsx';
import { useAsync } from '../../components/use-async.ts';

export function Approve({ d, me, onDone }: { d: ModelVersionDetail; me: Me | null; onDone: () => void }) {
  const [reason, setReason] = useState('');
  const [override, setOverride] = useState('');
  const [password, setPassword] = useState('');
  const [passwordError, setPasswordError] = useState<string | null>(null);
  // The leave-one-batch-out endpoint check: a rule that reached done early on a reference batch
  // needs a signed override reason.
  const early = (d.endpointCheck?.rows ?? []).filter((r) => r.verdict === 'early');
  const [error, setError] = useState<string | null>(null);
  const [overrideError, setOverrideError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const [evidenceReason, setEvidenceReason] = useState('');
  const [evidenceError, setEvidenceError] = useState<string | null>(null);
  const [reviewDays, setReviewDays] = useState('365');
  // the evidence of the latest evaluation; it changes when the version is evaluated again
  const lastEval = d.evaluations[d.evaluations.length - 1]?.id ?? '';
  const evidence = useAsync(() => loadEvidence(d.versionId), [d.versionId, lastEval]);
  const ev = evidence.data;
  const blocking = ev && ev !== 'unsupported' ? ev.warnings.filter((w) => w.blocking) : [];
  const warned = ev && ev !== 'unsupported' ? ev.warnings.length > 0 : false;
  if (d.status !== 'draft')
    return (
      <div class="panel">
        <h3>Approval</h3>
        <p>
          This version is <StatusBadge status={d.status} />. An approved version cannot change; build a new version to change anything.
        </p>
      </div>
    );
  return (
    <form
      class="panel"
      data-testid="approve"
      onSubmit={async (e) => {
        e.preventDefault();
        setError(null);
        setOverrideError(null);
        setEvidenceError(null);
        setPasswordError(null);
        let stop = false;
        if (early.length > 0 && !override.trim()) {
          setOverrideError(
            `Not approved: the rule reached done early on ${early.length} reference batch${early.length === 1 ? '' : 'es'}. Give the reason it may be used all the same; it is signed with the approval.`,
          );
          stop = true;
        }
        if (blocking.length > 0 && !evidenceReason.trim()) {
          setEvidenceError('Not approved: the evidence on held-out good batches is far from what the limits promise. Give the reason to approve all the same; it is signed with the approval.');
          stop = true;
        }
        if (stop) return;
        setBusy(true);
        try {
          const days = Number(reviewDays);
          await api.approve(d.versionId, reason, password || undefined, early.length ? override : undefined, blocking.length ? evidenceReason : undefined, Number.isInteger(days) && days > 0 ? days : undefined);
          onDone();
        } catch (err) {
          const t = errorText(err);
          if (err instanceof ApiError && /\/signature-refused$/.test(err.problem.type) && (err.status === 401 || err.status === 429)) {
            setPasswordError(
              err.status === 401
                ? 'The password does not match your account: the signature was refused (the attempt is kept in the audit trail). Type it again; the rest of the form is kept.'
                : `Too many signature attempts: ${err.problem.detail ?? 'wait a moment and try again'}.`,
            );
            setPassword('');
          } else if (/evidenceOverride|evidence/i.test(t)) setEvidenceError(t);
          else if (/override/i.test(t)) setOverrideError(t);
          else setError(t);
          evidence.reload();
        } finally {
          setBusy(false);
        }
      }}
    >
      <h3>Approve this version</h3>
      <p class="small">
        Approving signs the version (hash {d.sha256.slice(0, 12)}…) as {me ? `${me.user.fullName} (${me.user.role})` : 'the signed-in user'}. It then cannot change.
      </p>
      <label class="block">
        Reason (required){' '}
        <textarea rows={2} required value={reason} onInput={(e) => setReason((e.target as HTMLTextAreaElement).value)} placeholder="e.g. evaluated on 4 held-out good and 2 faulty batches; no false alarms" />
      </label>
      {evidence.error && <ErrorBox message={`The approval evidence could not be read: ${evidence.error}`} onRetry={evidence.reload} />}
      {ev !== undefined && ev !== null && ev !== 'unsupported' ? <ApprovalEvidence ev={ev} /> : evidence.data === null && !evidence.loading && !evidence.error ? <ApprovalEvidence ev={null} /> : null}
      {blocking.length > 0 && (
        <div data-testid="evidence-override">
          <label class="block">
            Reason to approve against the evidence (required, signed){' '}
            <textarea rows={2} value={evidenceReason} onInput={(e) => setEvidenceReason((e.target as HTMLTextAreaElement).value)} placeholder="why this version may be used although its held-out good batches say otherwise" />
          </label>
          <FieldError text={evidenceError ?? undefined} />
        </div>
      )}
      {warned && blocking.length === 0 && <p class="small">The evidence above carries warnings: say in your reason how you weighed them.</p>}
      {early.length > 0 && (
        <div class="early-endpoint" data-testid="early-endpoint">
          <p class="small">
            <Badge tone="warn">early endpoint</Badge> Replayed leave-one-batch-out, the endpoint rule reached done before the known endpoint on {early.length} of{' '}
            {d.endpointCheck!.rows.length} reference batches:{' '}
            {early.map((r) => `${r.batch} ${-r.intervals!} interval${r.intervals === -1 ? '' : 's'} (${fixed(-r.minutes!, 1)} min) early${r.withinBracket ? ', inside its lab bracket' : r.bracketMin ? `, at or before its lab bracket (${fixed(r.bracketMin[0], 1)}–${fixed(r.bracketMin[1], 1)} min) began` : ''}`).join('; ')}. An endpoint signal may stop the unit:
            approving this rule needs your reason, signed with the approval.
          </p>
          <label class="block">
            Override reason (required){' '}
            <textarea rows={2} value={override} onInput={(e) => setOverride((e.target as HTMLTextAreaElement).value)} placeholder="why this rule may be used although it fires early on reference batches" />
          </label>
          <FieldError text={overrideError ?? undefined} />
        </div>
      )}
      <label class="block">
        Periodic review after{' '}
        <input type="number" min={1} max={3650} step={1} value={reviewDays} onInput={(e) => setReviewDays((e.target as HTMLInputElement).value)} data-testid="review-days" /> days (signed with the approval; the version's health shows the due date)
      </label>
      <label class="block">
        Password (re-enter to sign) <input type="password" autocomplete="current-password" value={password} onInput={(e) => setPassword((e.target as HTMLInputElement).value)} />
      </label>
      <FieldError text={passwordError ?? undefined} />
      <button class="btn primary" type="submit" disabled={busy || !reason.trim()}>
        Approve
      </button>
      {error && <ErrorBox message={error} />}
      <p class="muted small">A model must be validated under the site's quality system before it is used for release decisions.</p>
    </form>
  );
}
