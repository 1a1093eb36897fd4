/**
 * How a batch ended, in words that cannot contradict its endpoint record. The analyzer (or the
 * control system behind it) sends its own end reason with batch-end, free text; Tideline kept it
 * verbatim and showed it as the end reason, so a batch whose endpoint was never reached could read
 * "stopped after the endpoint". The statement here starts from Tideline's own endpoint record and
 * quotes the reported reason only as what was reported; where the reported reason claims an
 * endpoint that the record does not show, it says so. Pure.
 */
import { endpointStateName } from '../vocabulary/plain-names.ts';

export type BatchEndCode = 'open' | 'after-endpoint' | 'without-endpoint' | 'not-judged';

export interface BatchEndStatement {
  code: BatchEndCode;
  /** One sentence for people: the end and the endpoint, agreeing with each other. */
  text: string;
  /** The end reason as the analyzer sent it (kept verbatim in the record), or null. */
  reported: string | null;
  /** Set when the reported reason claims an endpoint the record does not show. */
  disagreement: string | null;
}

/** Does a free-text end reason claim that the endpoint was reached? ("stopped after the endpoint", "endpoint reached", "at endpoint") */
export function claimsEndpoint(reason: string): boolean {
  const r = reason.toLowerCase();
  if (/\b(no|not|without|before|never)\b[^.;]*\bendpoint\b/.test(r) || /\bendpoint\b[^.;]*\bnot\b/.test(r)) return false;
  return /\b(after|at|on)\s+(the\s+)?endpoint\b/.test(r) || /\bendpoint\s+(was\s+)?(reached|met|signalled|signaled)\b/.test(r);
}

export function batchEndStatement(b: {
  status: 'open' | 'ended';
  /** The reason the analyzer sent with batch-end (verbatim). */
  reportedReason: string | null;
  /** Null when no model judged the batch. */
  endpointState: string | null;
  judged: boolean;
}): BatchEndStatement {
  const reported = b.reportedReason && b.reportedReason.trim() ? b.reportedReason.trim() : null;
  if (b.status === 'open') return { code: 'open', text: 'running', reported, disagreement: null };
  const said = reported ?? 'ended';
  if (!b.judged || b.endpointState === null) {
    const disagreement = reported && claimsEndpoint(reported) ? `the analyzer reported “${reported}”, but no model judged this batch, so Tideline has no endpoint for it` : null;
    return { code: 'not-judged', text: disagreement ? 'ended; not judged by a model, so no endpoint' : `${said}; not judged by a model, so no endpoint`, reported, disagreement };
  }
  const reached = b.endpointState === 'done' || b.endpointState === 'signalled';
  if (reached) {
    return { code: 'after-endpoint', text: reported && claimsEndpoint(reported) ? reported : `${said}, after the endpoint was ${endpointStateName(b.endpointState)}`, reported, disagreement: null };
  }
  const state = endpointStateName(b.endpointState);
  if (reported && claimsEndpoint(reported)) {
    return {
      code: 'without-endpoint',
      text: `ended without reaching the endpoint (endpoint ${state})`,
      reported,
      disagreement: `the analyzer reported “${reported}”, but Tideline's endpoint was not reached (${state})`,
    };
  }
  return { code: 'without-endpoint', text: `${said}, without reaching the endpoint (endpoint ${state})`, reported, disagreement: null };
}
