import { describe, expect, it } from 'vitest';
import { href, parseHash } from '../../web/src/router.ts';
import type { Route } from '../../web/src/router.ts';
import { problemText, toProblem } from '../../web/src/api/problem.ts';
import { query, sessionEnded } from '../../web/src/api/http.ts';
import { normaliseMe } from '../../web/src/api/session.ts';

describe('hash routes', () => {
  it('parses every view and round-trips through href', () => {
    const routes: Route[] = [
      { view: 'floor' },
      { view: 'watch', unit: 'dryer 1' },
      { view: 'bench', version: null },
      { view: 'bench', version: 'm@3' },
      { view: 'review', batch: 'B-7', compare: ['B-1', 'B-2'] },
      { view: 'review', batch: null, compare: [] },
      { view: 'ledger', filter: { user: 'alice', action: 'model.' } },
    ];
    for (const r of routes) expect(parseHash(href(r))).toEqual(r);
  });
  it('treats an empty hash as Floor and unknown paths as not found', () => {
    expect(parseHash('')).toEqual({ view: 'floor' });
    expect(parseHash('#/')).toEqual({ view: 'floor' });
    expect(parseHash('#/nowhere')).toEqual({ view: 'not-found', hash: '#/nowhere' });
    expect(parseHash('#/watch')).toEqual({ view: 'not-found', hash: '#/watch' });
  });
});

describe('problem details shown plainly', () => {
  it('uses the server’s title and detail and lists field errors', () => {
    const p = toProblem(400, 'Bad Request', 'application/problem+json', JSON.stringify({ type: '/problems/validation', title: 'Invalid request', status: 400, detail: 'reason must not be blank', errors: [{ path: 'reason', message: 'required' }] }));
    expect(problemText(p)).toBe('Invalid request: reason must not be blank (reason: required)');
  });
  it('does not repeat a title the detail already starts with', () => {
    expect(problemText({ title: 'Not found', detail: 'Not found: batch B9' })).toBe('Not found: batch B9');
  });
  it('turns a non-JSON error page into short plain text', () => {
    const p = toProblem(502, 'Bad Gateway', 'text/html', '<html><body><h1>502 Bad Gateway</h1></body></html>');
    expect(p.title).toBe('Bad Gateway');
    expect(p.detail).toBe('502 Bad Gateway');
    expect(toProblem(500, '', null, '').title).toBe('HTTP 500');
  });
  it('builds query strings from defined values only', () => {
    expect(query({ a: 1, b: undefined, c: '', d: 'x y', e: false })).toBe('?a=1&d=x%20y&e=false');
    expect(query({})).toBe('');
  });
  it('reads the signed-in user plain or wrapped', () => {
    expect(normaliseMe({ user: { id: 1, name: 'al', fullName: 'Al B', role: 'operator' }, csrfToken: 'x' })?.user.role).toBe('operator');
    expect(normaliseMe({ id: 2, name: 'bo', role: 'viewer' })?.user.fullName).toBe('bo');
    expect(normaliseMe(null)).toBeNull();
  });
});

describe('a 401 and the session', () => {
  it('ends the session on a missing session, not on a password refused in a form', () => {
    expect(sessionEnded(401, '/problems/login-required')).toBe(true);
    expect(sessionEnded(401, 'about:blank')).toBe(true);
    expect(sessionEnded(401, '/problems/signature-refused')).toBe(false);
    expect(sessionEnded(401, '/problems/wrong-password')).toBe(false);
    expect(sessionEnded(403, '/problems/forbidden')).toBe(false);
  });
});
