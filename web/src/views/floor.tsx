/** Floor: one tile per unit — batch, product, progress, endpoint, T²/Q, alarms, stale data. Live. */
import type { LiveUnitStatus } from '../../../core/api/live.ts';
import { useLive } from '../live/use-live.ts';
import { Advisory, Badge, Empty, Loading } from '../components/status.tsx';
import { AnalyzerStatusBadge } from '../components/analyzer-status.tsx';
import { ENDPOINT_WORDS, UNIT_STATUS_WORDS, limitStatus, PRIORITY_WORDS } from '../format/status-words.ts';
import { age, fixed, ofLimitPct, sig, withUnit } from '../format/number-format.ts';
import { activeAlarmsText, etaText, progressView, propertyProgressText, stallAlarm } from './floor-data.ts';
import type { Alarm } from '../../../core/api/rest.ts';
import { HELD_CAUTION, holdLabels } from './endpoint-holds.tsx';
import { href } from '../router.ts';
import { api } from '../api/endpoints.ts';
import { useAsync } from '../components/use-async.ts';
import { healthLine } from './bench/model-life-data.ts';
import { scanCountsText } from './review-data.ts';

export function Floor({ now }: { now: number }) {
  const live = useLive({ kind: 'plant' });
  const units = [...live.state.units.values()].sort((a, b) => a.name.localeCompare(b.name));
  const snapshotSeen = live.state.lastN > 0;
  return (
    <section class="view floor" aria-labelledby="floor-title">
      <header class="view-head">
        <h1 id="floor-title">Floor</h1>
        <ConnectionNote state={live.connection} />
      </header>
      {!snapshotSeen && live.connection !== 'closed' && <Loading what="units" />}
      {!snapshotSeen && live.connection === 'closed' && <Empty>No live connection to the server yet; retrying.</Empty>}
      {snapshotSeen && units.length === 0 && <Empty>No units are configured. Add a unit (POST /api/units) or start the demo.</Empty>}
      <div class="tiles">
        {units.map((u) => (
          <UnitTile key={u.id} u={u} now={live.state.serverTime ?? now} alarms={[...live.state.alarms.values()]} />
        ))}
      </div>
      {units.length > 0 && <Advisory text="Endpoint and time to endpoint are advice: Tideline advises; the site's validated control strategy, interlocks and procedures decide what an endpoint signal or alarm may do." />}
    </section>
  );
}

export function ConnectionNote({ state }: { state: 'connecting' | 'open' | 'closed' }) {
  if (state === 'open') return <Badge tone="ok">live</Badge>;
  if (state === 'connecting') return <Badge tone="muted">connecting…</Badge>;
  return <Badge tone="warn">connection lost, reconnecting</Badge>;
}

function UnitTile({ u, now, alarms }: { u: LiveUnitStatus; now: number; alarms: Alarm[] }) {
  const st = UNIT_STATUS_WORDS[u.status];
  const ep = u.endpoint ? ENDPOINT_WORDS[u.endpoint.state] : null;
  const p = u.latest;
  const t2 = limitStatus(p?.t2, p?.t2Limit);
  const q = limitStatus(p?.q, p?.qLimit);
  const stale = u.status === 'stale' || u.status === 'offline';
  const stall = stallAlarm(alarms, u.id, u.openBatch?.id ?? null);
  const etaWords = etaText(u.endpoint, stall);
  const prog = progressView(p, u.endpoint, stall);
  const alarmWords = activeAlarmsText(alarms, u.id);
  // The deployed version's health, read again when a batch starts or ends or the unit's health alarm changes.
  const healthAlarm = alarms.find((a) => a.unit === u.id && a.kind === 'model-health');
  const versionId = u.deployment?.versionId ?? null;
  const health = useAsync(() => (versionId ? api.health(versionId) : Promise.resolve(null)), [versionId, u.openBatch?.id ?? null, healthAlarm?.state ?? null, healthAlarm?.message ?? null]);
  const hl = healthLine(health.data);
  return (
    <a class={`tile${stale ? ' tile-stale' : ''}${u.unacknowledgedAlarms ? ' tile-alarm' : ''}`} href={href({ view: 'watch', unit: u.id })} data-testid={`tile-${u.id}`}>
      <div class="tile-head">
        <h2>{u.name}</h2>
        <span class="muted">{u.kind}</span>
        <Badge tone={st.tone}>{st.text}</Badge>
      </div>
      {u.openBatch ? (
        <>
          <div class="tile-batch">
            <span>
              batch <b>{u.openBatch.id}</b>
            </span>
            <span>{u.openBatch.product}</span>
          </div>
          <div class={`progress${prog.share === null ? ' progress-unknown' : ''}`} role="progressbar" aria-valuemin={0} aria-valuemax={100} aria-valuenow={prog.share === null ? undefined : Math.round(prog.share * 100)} aria-valuetext={prog.text}>
            {prog.share !== null && <div class="progress-fill" style={{ width: `${Math.min(100, Math.max(0, prog.share * 100))}%` }} />}
            <span class="progress-text" data-testid={`progress-${u.id}`}>
              {prog.text}
            </span>
          </div>
          <dl class="tile-facts">
            <dt>Endpoint</dt>
            <dd>
              {ep ? <Badge tone={ep.tone} title={ep.help}>{ep.text}</Badge> : <span class="muted">no model deployed</span>}
              {etaWords && (
                <span class="eta" data-testid="eta">
                  {' '}
                  {etaWords}
                </span>
              )}
            </dd>
            {u.endpoint?.state === 'held' && (
              <>
                <dt>Held by</dt>
                <dd data-testid={`held-${u.id}`} title={`${(u.endpoint.holds ?? []).map((h) => h.text).join('\n')}\n${HELD_CAUTION}`}>
                  {holdLabels(u.endpoint.holds)} <span class="muted small">— not an endpoint; Tideline advises, the site's control strategy decides</span>
                </dd>
              </>
            )}
            <dt>T²</dt>
            <dd>
              <Badge tone={t2.tone}>{t2.text}</Badge> <span class="num" title={`T² ${sig(p?.t2)}, limit ${sig(p?.t2Limit)}`}>{ofLimitPct(p?.t2, p?.t2Limit)}</span>
            </dd>
            <dt>Q</dt>
            <dd>
              <Badge tone={q.tone}>{q.text}</Badge> <span class="num" title={`Q ${sig(p?.q)}, limit ${sig(p?.qLimit)}`}>{ofLimitPct(p?.q, p?.qLimit)}</span>
            </dd>
            {p?.prediction && (
              <>
                <dt>{p.prediction.name}</dt>
                <dd class="num" data-testid={`property-${u.id}`}>{propertyProgressText(p.prediction, u.endpoint)}</dd>
              </>
            )}
            {p?.envelopeOutside && (
              <>
                <dt>Envelope</dt>
                <dd>
                  <Badge tone="warn">outside golden envelope</Badge>
                </dd>
              </>
            )}
          </dl>
        </>
      ) : (
        <p class="muted">No batch running.</p>
      )}
      <div class="tile-foot">
        {u.activeAlarms > 0 ? (
          <Badge tone={u.unacknowledgedAlarms ? 'alarm' : 'warn'}>
            {/* the alarms themselves when this view has them, else the unit's counts */}
            {alarmWords ?? `${u.activeAlarms} active alarm${u.activeAlarms === 1 ? '' : 's'}${u.highestPriority ? ` · ${PRIORITY_WORDS[u.highestPriority]}` : ''}`}
            {u.unacknowledgedAlarms ? ` · ${u.unacknowledgedAlarms} to acknowledge` : ''}
          </Badge>
        ) : u.unacknowledgedAlarms > 0 ? (
          <Badge tone="info">{u.unacknowledgedAlarms} cleared alarm{u.unacknowledgedAlarms === 1 ? '' : 's'} to acknowledge</Badge>
        ) : (
          <span class="muted">no active alarms</span>
        )}
        {stale && u.silentForMs !== null && <Badge tone="warn">last data {age(now - u.silentForMs, now)}</Badge>}
        <AnalyzerStatusBadge status={u.analyzerStatus} suppressed={u.suppression} />
        {u.deployment && (
          <span class="muted small">
            model {u.deployment.name} v{u.deployment.version}
          </span>
        )}
        {hl && (
          <span class="small" data-testid={`health-line-${u.id}`}>
            <Badge tone={hl.tone}>{hl.text}</Badge>
          </span>
        )}
        {u.openBatch && (
          <span class={u.openBatch.suspectCount || u.openBatch.unjudgedCount ? 'small' : 'muted small'} data-testid={`scans-${u.id}`}>
            {fixed(u.openBatch.spectrumCount, 0)} spectra
            {u.openBatch.suspectCount !== undefined && ` · ${scanCountsText(u.openBatch)}`}
          </span>
        )}
      </div>
    </a>
  );
}
