import { ApiError, toProblem } from './problem.ts';

const CSRF_COOKIE = 'tideline_csrf';
const CSRF_HEADER = 'x-csrf-token';

function csrfToken(): string | null {
  if (typeof document === 'undefined') return null;
  const m = document.cookie.split(/;\s*/).find((c) => c.startsWith(`${CSRF_COOKIE}=`));
  return m ? decodeURIComponent(m.slice(CSRF_COOKIE.length + 1)) : null;
}

/** Listeners told when the server says the session is missing (401), so the shell can ask to sign in. */
const unauthorizedListeners = new Set<() => void>();
export function onUnauthorized(fn: () => void): () => void {
  unauthorizedListeners.add(fn);
  return () => unauthorizedListeners.delete(fn);
}

/**
 * A 401 means the session is gone, except where the server refused a password typed into a form
 * (an e-signature, a password change, a sign-in): that form says so beside the field and keeps
 * what was typed, and the session goes on.
 */
export function sessionEnded(status: number, problemType: string): boolean {
  return status === 401 && !/\/(signature-refused|wrong-password|login-failed)$/.test(problemType);
}

export async function request<T>(method: string, path: string, body?: unknown, signal?: AbortSignal): Promise<T> {
  const headers: Record<string, string> = { accept: 'application/json, application/problem+json' };
  if (body !== undefined) headers['content-type'] = 'application/json';
  if (method !== 'GET') {
    const t = csrfToken();
    if (t) headers[CSRF_HEADER] = t;
  }
  const res = await fetch(path, { method, headers, body: body === undefined ? undefined : JSON.stringify(body), credentials: 'same-origin', signal });
  const text = await res.text();
  if (!res.ok) {
    const problem = toProblem(res.status, res.statusText, res.headers.get('content-type'), text);
    if (sessionEnded(res.status, problem.type)) unauthorizedListeners.forEach((f) => f());
    throw new ApiError(res.status, problem);
  }
  if (!text) return undefined as T;
  return JSON.parse(text) as T;
}

export const get = <T>(path: string, signal?: AbortSignal) => request<T>('GET', path, undefined, signal);
export const post = <T>(path: string, body?: unknown) => request<T>('POST', path, body ?? {});

/** Build "?a=1&b=x" from defined values only. */
export function query(params: Record<string, string | number | boolean | null | undefined>): string {
  const q = Object.entries(params)
    .filter(([, v]) => v !== undefined && v !== null && v !== '')
    .map(([k, v]) => `${encodeURIComponent(k)}=${encodeURIComponent(String(v))}`)
    .join('&');
  return q ? `?${q}` : '';
}
