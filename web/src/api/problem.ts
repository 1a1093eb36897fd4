import type { Problem } from '../../../core/api/rest.ts';

/** An API error carrying the server's problem details (RFC 9457) so views can show them plainly. */
export class ApiError extends Error {
  constructor(
    readonly status: number,
    readonly problem: Problem,
  ) {
    super(problemText(problem));
    this.name = 'ApiError';
  }
}

/** One plain sentence (plus field errors) from a problem document. */
export function problemText(p: Partial<Problem>): string {
  const head = p.detail && p.title && !p.detail.startsWith(p.title) ? `${p.title}: ${p.detail}` : p.detail || p.title || 'Request failed';
  const fields = (p.errors ?? []).map((e) => (e.path ? `${e.path}: ${e.message}` : e.message));
  return fields.length ? `${head} (${fields.join('; ')})` : head;
}

/**
 * Turn a non-2xx response body into a Problem. A server that answered with problem+json gives its
 * own words; anything else (a proxy's HTML page, an empty body) becomes a short plain message.
 */
export function toProblem(status: number, statusText: string, contentType: string | null, body: string): Problem {
  if (contentType && /json/.test(contentType)) {
    try {
      const j = JSON.parse(body) as Partial<Problem>;
      if (j && typeof j === 'object') {
        return {
          type: typeof j.type === 'string' ? j.type : 'about:blank',
          title: typeof j.title === 'string' ? j.title : statusText || `HTTP ${status}`,
          status: typeof j.status === 'number' ? j.status : status,
          detail: typeof j.detail === 'string' ? j.detail : undefined,
          errors: Array.isArray(j.errors) ? j.errors.filter((e) => e && typeof e.message === 'string') : undefined,
        };
      }
    } catch {
      /* fall through */
    }
  }
  const text = body.replace(/<[^>]+>/g, ' ').replace(/\s+/g, ' ').trim().slice(0, 200);
  return { type: 'about:blank', title: statusText || `HTTP ${status}`, status, detail: text || undefined };
}

/** Message for anything thrown by a request (network failure, ApiError, bug). */
export function errorText(e: unknown): string {
  if (e instanceof ApiError) return e.message;
  if (e instanceof TypeError && /fetch/i.test(e.message)) return 'The Tideline server cannot be reached. Check the network connection and that the server is running.';
  if (e instanceof Error) return e.message;
  return String(e);
}
