/** Ledger: the audit trail, filterable, with chain verification and export (data from /api/audit). */
import { useState } from 'preact/hooks';
import { get, query } from '../api/http.ts';
import { useAsync } from '../components/use-async.ts';
import { Badge, Empty, ErrorBox, Loading } from '../components/status.tsx';
import { href } from '../router.ts';
import { groupAcknowledgeText, ledgerQuery, summariseChange } from './ledger-data.ts';
import type { AuditRow, LedgerFilter } from './ledger-data.ts';

export function Ledger({ filter }: { filter: Record<string, string> }) {
  const f: LedgerFilter = { user: filter.user ?? '', action: filter.action ?? '', object: filter.object ?? '', from: filter.from ?? '', to: filter.to ?? '' };
  const [draft, setDraft] = useState(f);
  const rows = useAsync(() => get<{ items: AuditRow[]; total: number; limit: number }>(`/api/audit${query(ledgerQuery(f, 500))}`), [JSON.stringify(f)]);
  const verify = useAsync(() => get<{ ok: boolean; count: number; brokenSeq?: number; problem?: string; empty?: boolean; note?: string }>('/api/audit/verify'), []);
  const apply = (e: Event) => {
    e.preventDefault();
    location.hash = href({ view: 'ledger', filter: { ...draft } });
  };
  const set = (k: keyof LedgerFilter) => (e: Event) => setDraft({ ...draft, [k]: (e.target as HTMLInputElement).value });
  return (
    <section class="view ledger">
      <header class="view-head">
        <h1>Ledger</h1>
        <div class="head-facts">
          {verify.data &&
            (verify.data.ok && verify.data.empty ? (
              <Badge tone="info" title={verify.data.note}>
                nothing to verify · 0 records
              </Badge>
            ) : verify.data.ok ? (
              <Badge tone="ok">chain intact · {verify.data.count} records</Badge>
            ) : (
              <Badge tone="alarm">
                chain broken at record {verify.data.brokenSeq}: {verify.data.problem}
              </Badge>
            ))}
          {verify.error && <Badge tone="warn">chain not verified: {verify.error}</Badge>}
        </div>
      </header>
      <form class="panel filters" onSubmit={apply}>
        <label>
          user <input value={draft.user} onInput={set('user')} placeholder="e.g. alice" />
        </label>
        <label>
          action <input value={draft.action} onInput={set('action')} placeholder="e.g. model. or alarm.acknowledge" />
        </label>
        <label>
          object <input value={draft.object} onInput={set('object')} placeholder="e.g. model: or alarm:42" />
        </label>
        <label>
          from (UTC) <input type="datetime-local" value={draft.from} onInput={set('from')} />
        </label>
        <label>
          to (UTC) <input type="datetime-local" value={draft.to} onInput={set('to')} />
        </label>
        <button class="btn primary" type="submit">
          Filter
        </button>
        <a class="btn" href={href({ view: 'ledger', filter: {} })}>
          Clear
        </a>
        <a class="btn" href={`/api/audit/export${query({ ...ledgerQuery(f, undefined), format: 'csv' })}`} download>
          Export CSV
        </a>
      </form>
      {rows.loading && !rows.data && <Loading what="audit records" />}
      {rows.error && <ErrorBox message={rows.error} onRetry={rows.reload} />}
      {rows.data && rows.data.items.length === 0 && <Empty>No audit records match this filter.</Empty>}
      {rows.data && rows.data.items.length > 0 && (
        <div class="panel">
          <p class="muted small">
            Showing {rows.data.items.length} of {rows.data.total} records, newest first. Times in UTC.
          </p>
          <table class="ledger-table" data-testid="ledger-table">
            <thead>
              <tr>
                <th scope="col" class="num">#</th>
                <th scope="col">time (UTC)</th>
                <th scope="col">user</th>
                <th scope="col">action</th>
                <th scope="col">object</th>
                <th scope="col">change</th>
                <th scope="col">reason</th>
              </tr>
            </thead>
            <tbody>
              {rows.data.items.map((r) => (
                <tr key={r.seq}>
                  <td class="num">{r.seq}</td>
                  <td class="nowrap">{r.at.replace('T', ' ').replace(/\.\d+Z$/, '')}</td>
                  <td>
                    <a href={href({ view: 'ledger', filter: { ...filter, user: r.user } })}>{r.user}</a>
                  </td>
                  <td>
                    <a href={href({ view: 'ledger', filter: { ...filter, action: r.action } })}>{r.action}</a>
                  </td>
                  <td class="mono">{r.object}</td>
                  <td class="small">
                    <Change r={r} />
                  </td>
                  <td>{r.reason ?? ''}</td>
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      )}
    </section>
  );
}

/** The change column: a group acknowledgement lists every alarm it covers; other records in short. */
function Change({ r }: { r: AuditRow }) {
  const g = r.action === 'alarm.acknowledge-group' ? groupAcknowledgeText(r.after) : null;
  if (!g) return <>{summariseChange(r.before, r.after)}</>;
  return (
    <div data-testid="ledger-group-ack">
      {g.head}
      <ul class="compact">
        {g.items.map((t, i) => (
          <li key={i}>{t}</li>
        ))}
      </ul>
    </div>
  );
}
