/** The dashboard shell: navigation, hash routing, sign-in, a clock for ages. */
import { Fragment } from 'preact';
import { useEffect, useState } from 'preact/hooks';
import type { Route } from './router.ts';
import { VIEW_TITLES, href, parseHash } from './router.ts';
import { Floor } from './views/floor.tsx';
import { Watch } from './views/watch.tsx';
import { ModelBench } from './views/bench/index.tsx';
import { Review } from './views/review.tsx';
import { Ledger } from './views/ledger.tsx';
import { Empty, ErrorBox } from './components/status.tsx';
import { onUnauthorized } from './api/http.ts';
import type { Me } from './api/session.ts';
import { session } from './api/session.ts';
import { ApiError, errorText } from './api/problem.ts';
import { api } from './api/endpoints.ts';
import type { SimulationInfo } from '../../core/api/rest.ts';
import { clock, TIME_ZONE } from './format/number-format.ts';

function useRoute(): Route {
  const [route, setRoute] = useState(() => parseHash(location.hash));
  useEffect(() => {
    const f = () => setRoute(parseHash(location.hash));
    addEventListener('hashchange', f);
    return () => removeEventListener('hashchange', f);
  }, []);
  return route;
}

function useNow(everyMs: number): number {
  const [now, setNow] = useState(() => Date.now());
  useEffect(() => {
    const t = setInterval(() => setNow(Date.now()), everyMs);
    return () => clearInterval(t);
  }, [everyMs]);
  return now;
}

type Auth = { kind: 'checking' } | { kind: 'in'; me: Me | null } | { kind: 'out'; message: string | null };

export function App() {
  const route = useRoute();
  const now = useNow(1000);
  const [auth, setAuth] = useState<Auth>({ kind: 'checking' });

  useEffect(() => {
    session.me().then(
      (me) => setAuth({ kind: 'in', me }),
      (e) => {
        // 401: sign in. 404: this server has no sign-in (open demo); carry on without a user.
        if (e instanceof ApiError && e.status === 401) setAuth({ kind: 'out', message: null });
        else if (e instanceof ApiError && e.status === 404) setAuth({ kind: 'in', me: null });
        else setAuth({ kind: 'in', me: null });
      },
    );
    return onUnauthorized(() => setAuth({ kind: 'out', message: 'Your session has ended; please sign in again.' }));
  }, []);

  const [simulation, setSimulation] = useState<SimulationInfo | null>(null);
  const signedIn = auth.kind === 'in';
  useEffect(() => {
    // the demo marks its data as simulated, with its speed-up (GET /api/info, for signed-in users)
    if (!signedIn) return;
    api.info().then(
      (i) => setSimulation(i.simulation ?? null),
      () => setSimulation(null),
    );
  }, [signedIn]);

  useEffect(() => {
    const t = route.view === 'not-found' ? 'Tideline' : `${VIEW_TITLES[route.view]} — Tideline`;
    document.title = t;
  }, [route]);

  return (
    <div class="shell">
      <nav class="topnav" aria-label="views">
        <a class="brand" href="#/floor">
          Tideline
        </a>
        {(['floor', 'bench', 'review', 'ledger'] as const).map((v) => {
          const target: Route = v === 'floor' ? { view: 'floor' } : v === 'bench' ? { view: 'bench', version: null } : v === 'review' ? { view: 'review', batch: null, compare: [] } : { view: 'ledger', filter: {} };
          const current = route.view === v;
          return (
            <Fragment key={v}>
              <a href={href(target)} class={current ? 'current' : ''} aria-current={current ? 'page' : undefined}>
                {VIEW_TITLES[v]}
              </a>
              {/* Watch is opened from a Floor tile; while it is open it has its own entry, marked current */}
              {v === 'floor' && route.view === 'watch' && (
                <a href={href(route)} class="current" aria-current="page" data-testid="nav-watch">
                  {VIEW_TITLES.watch} · {route.unit}
                </a>
              )}
            </Fragment>
          );
        })}
        <span class="spacer" />
        <span class="zone" title="Every time on the dashboard, in its reports and in the Ledger is in this one zone. Process times are the analyzer's time of the spectrum.">
          {clock(now)} {TIME_ZONE} · times in {TIME_ZONE}
        </span>
        {auth.kind === 'in' && auth.me && (
          <span class="who">
            {auth.me.user.fullName} · {auth.me.user.role}{' '}
            <button type="button" class="btn small" onClick={() => session.logout().finally(() => setAuth({ kind: 'out', message: null }))}>
              Sign out
            </button>
          </span>
        )}
      </nav>
      {simulation && (
        <div class="simulated-banner" role="note" data-testid="simulated">
          <strong>Simulated data.</strong> {simulation.note || `Replayed faster than real time: ${simulation.units.map((u) => `${u.unit} ×${u.speedUp}`).join(', ')}.`}
        </div>
      )}
      <main>
        {auth.kind === 'checking' && <Empty>Connecting to the server…</Empty>}
        {auth.kind === 'out' && <SignIn message={auth.message} onIn={(me) => setAuth({ kind: 'in', me })} />}
        {auth.kind === 'in' && <View route={route} now={now} me={auth.me} />}
      </main>
    </div>
  );
}

function View({ route, now, me }: { route: Route; now: number; me: Me | null }) {
  switch (route.view) {
    case 'floor':
      return <Floor now={now} />;
    case 'watch':
      return <Watch key={route.unit} unit={route.unit} now={now} />;
    case 'bench':
      return <ModelBench version={route.version} me={me} />;
    case 'review':
      return <Review batch={route.batch} compare={route.compare} me={me} />;
    case 'ledger':
      return <Ledger filter={route.filter} />;
    case 'not-found':
      return <ErrorBox message={`There is no page at “${route.hash}”. Use the navigation above.`} />;
  }
}

function SignIn({ message, onIn }: { message: string | null; onIn: (me: Me | null) => void }) {
  const [name, setName] = useState('');
  const [password, setPassword] = useState('');
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  return (
    <form
      class="panel signin"
      onSubmit={async (e) => {
        e.preventDefault();
        setBusy(true);
        setError(null);
        try {
          onIn(await session.login(name, password));
        } catch (err) {
          setError(errorText(err));
        } finally {
          setBusy(false);
        }
      }}
    >
      <h1>Sign in to Tideline</h1>
      {message && <p>{message}</p>}
      {error && <ErrorBox message={error} />}
      <label>
        User name <input name="username" autocomplete="username" value={name} onInput={(e) => setName((e.target as HTMLInputElement).value)} required />
      </label>
      <label>
        Password <input name="password" type="password" autocomplete="current-password" value={password} onInput={(e) => setPassword((e.target as HTMLInputElement).value)} required />
      </label>
      <button class="btn primary" type="submit" disabled={busy}>
        Sign in
      </button>
    </form>
  );
}
