/**
 * Approval: the evidence on held-out good batches the approver signs against (GET
 * /api/models/versions/:version/approval-evidence) — the share of their points beyond the T² and Q
 * limits against the nominal rate with its exact interval, the worst batch, good batches that
 * alarmed, the endpoint reached n of m, the endpoint check's early calls — and its warnings in plain
 * words. A warning the server marks blocking needs a reason, signed with the approval.
 */
import { get } from '../../api/http.ts';
import { ApiError } from '../../api/problem.ts';
import { Badge } from '../../components/status.tsx';
import { dateTime, percent } from '../../format/number-format.ts';
import { plainText } from '../../../../core/vocabulary/plain-names.ts';

export interface RateView {
  name: string;
  beyond: number;
  points: number;
  rate: number;
  interval: [number, number];
  farAbove: boolean;
  farBelow: boolean;
}

export interface EvidenceView {
  evaluatedAt: number;
  confidence: number;
  nominalRate: number;
  heldOutGood: string[];
  excluded: { batch: string; why: string }[];
  points: number;
  rates: RateView[];
  worst: { batch: string; spectra: number; beyond: number; share: number } | null;
  alarmedGood: { batch: string; alarms: number }[];
  endpoint: { reached: number; of: number; notReached: string[] };
  earlyCalls: { count: number; text: string | null };
  warnings: { code: string; blocking: boolean; text: string }[];
  method: string;
}

const rec = (v: unknown): Record<string, unknown> => (v && typeof v === 'object' ? (v as Record<string, unknown>) : {});
const n = (v: unknown): number => (typeof v === 'number' && Number.isFinite(v) ? v : NaN);
const arr = (v: unknown): unknown[] => (Array.isArray(v) ? v : []);

function rateOf(v: unknown, name: string): RateView | null {
  const r = rec(v);
  if (!Number.isFinite(n(r.rate))) return null;
  const iv = arr(r.interval);
  return { name: typeof r.name === 'string' ? r.name : name, beyond: n(r.beyond), points: n(r.points), rate: n(r.rate), interval: [n(iv[0]), n(iv[1])], farAbove: r.farAbove === true, farBelow: r.farBelow === true };
}

/** The evidence from the server's answer; null when the version has not been evaluated. */
export function evidenceOf(body: unknown): EvidenceView | null {
  if (!body || typeof body !== 'object') return null;
  const o = rec(body);
  const ep = rec(o.endpoint);
  const early = rec(o.earlyCalls);
  const worst = rec(o.worst);
  return {
    evaluatedAt: n(o.evaluatedAt),
    confidence: n(o.confidence),
    nominalRate: n(o.nominalRate),
    heldOutGood: arr(o.heldOutGood).filter((x): x is string => typeof x === 'string'),
    excluded: arr(o.excluded).map(rec).filter((x) => typeof x.batch === 'string').map((x) => ({ batch: x.batch as string, why: String(x.why ?? '') })),
    points: n(o.points),
    rates: [rateOf(o.t2, 'T²'), rateOf(o.q, 'Q')].filter((x): x is RateView => x !== null),
    worst: typeof worst.batch === 'string' ? { batch: worst.batch, spectra: n(worst.spectra), beyond: n(worst.beyond), share: n(worst.share) } : null,
    alarmedGood: arr(o.alarmedGood).map(rec).filter((x) => typeof x.batch === 'string').map((x) => ({ batch: x.batch as string, alarms: n(x.alarms) })),
    endpoint: { reached: n(ep.reached), of: n(ep.of), notReached: arr(ep.notReached).filter((x): x is string => typeof x === 'string') },
    earlyCalls: { count: Number.isFinite(n(early.count)) ? n(early.count) : 0, text: typeof early.text === 'string' ? early.text : null },
    warnings: arr(o.warnings).map(rec).filter((w) => typeof w.text === 'string').map((w) => ({ code: String(w.code ?? ''), blocking: w.blocking === true, text: w.text as string })),
    method: typeof o.method === 'string' ? o.method : '',
  };
}

/** The evidence, null when not evaluated, or 'unsupported' on a server without the route. */
export async function loadEvidence(versionId: string): Promise<EvidenceView | null | 'unsupported'> {
  try {
    return evidenceOf(await get<unknown>(`/api/models/versions/${encodeURIComponent(versionId)}/approval-evidence`));
  } catch (e) {
    if (e instanceof ApiError && e.status === 404 && /no API route/.test(e.problem.detail ?? '')) return 'unsupported';
    throw e;
  }
}

export function ApprovalEvidence({ ev }: { ev: EvidenceView | null | 'unsupported' }) {
  if (ev === 'unsupported') return null;
  if (ev === null)
    return (
      <div class="approval-evidence" data-testid="approval-evidence">
        <p class="field-error" role="alert">
          <span aria-hidden="true">▲ </span>
          This version has not been evaluated on held-out batches: nothing shows how it judges good batches it was not built from. Evaluate it above before you approve.
        </p>
      </div>
    );
  const pct = (x: number) => percent(x, x < 0.1 ? 1 : 0);
  return (
    <div class="approval-evidence" data-testid="approval-evidence">
      <h4>Evidence on held-out good batches</h4>
      <p class="small muted">
        Evaluated {dateTime(ev.evaluatedAt)} on {ev.heldOutGood.length} good batch{ev.heldOutGood.length === 1 ? '' : 'es'} ({ev.points} spectra)
        {ev.excluded.length > 0 && `; left out: ${ev.excluded.map((x) => `${x.batch} (${x.why})`).join(', ')}`}. At {percent(ev.confidence, ev.confidence > 0.99 ? 1 : 0)} limits about {pct(ev.nominalRate)} of a
        good batch's points lie beyond each limit by chance.
      </p>
      <table class="batch-table" data-testid="evidence-rates">
        <thead>
          <tr>
            <th scope="col">limit</th>
            <th scope="col" class="num">points beyond</th>
            <th scope="col" class="num">share</th>
            <th scope="col">95 % interval</th>
            <th scope="col" class="num">expected</th>
            <th scope="col">verdict</th>
          </tr>
        </thead>
        <tbody>
          {ev.rates.map((r) => (
            <tr key={r.name} class={r.farAbove ? 'row-alarm' : r.farBelow ? 'row-suspect' : ''}>
              <td>{r.name}</td>
              <td class="num">
                {r.beyond} of {r.points}
              </td>
              <td class="num">{pct(r.rate)}</td>
              <td>
                {pct(r.interval[0])} – {pct(r.interval[1])}
              </td>
              <td class="num">{pct(ev.nominalRate)}</td>
              <td>{r.farAbove ? <Badge tone="alarm">▲ far above</Badge> : r.farBelow ? <Badge tone="warn">▼ far below</Badge> : <Badge tone="ok">as expected</Badge>}</td>
            </tr>
          ))}
        </tbody>
      </table>
      <dl class="facts inline">
        {ev.worst && (
          <>
            <dt>Worst good batch</dt>
            <dd>
              {ev.worst.batch}: {ev.worst.beyond} of {ev.worst.spectra} points beyond a limit ({pct(ev.worst.share)})
            </dd>
          </>
        )}
        <dt>Good batches with an alarm</dt>
        <dd>{ev.alarmedGood.length === 0 ? 'none' : ev.alarmedGood.map((a) => `${a.batch} (${a.alarms})`).join(', ')}</dd>
        <dt>Endpoint reached</dt>
        <dd>
          {ev.endpoint.reached} of {ev.endpoint.of}
          {ev.endpoint.notReached.length > 0 && ` — not on ${ev.endpoint.notReached.join(', ')}`}
        </dd>
        <dt>Early endpoint calls (reference batches, left out one at a time)</dt>
        <dd>{ev.earlyCalls.count === 0 ? 'none' : (ev.earlyCalls.text ?? String(ev.earlyCalls.count))}</dd>
      </dl>
      {ev.warnings.length > 0 && (
        <ul class="evidence-warnings" data-testid="evidence-warnings">
          {ev.warnings.map((w, i) => (
            <li key={i} class={w.blocking ? 'field-error' : ''}>
              {w.blocking ? <Badge tone="alarm">▲ needs a reason</Badge> : <Badge tone="warn">⚠ warning</Badge>} {w.text}
            </li>
          ))}
        </ul>
      )}
      {ev.method && <p class="muted small">{plainText(ev.method)}</p>}
    </div>
  );
}
